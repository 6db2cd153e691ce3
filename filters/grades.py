"""Grades: purchasable tolerance classes, and the catalog that lists them.

A grade says how a bought part's value deviates from its marked value: a tolerance
(plus/minus percent), the distribution inside it, a temperature coefficient (ppm/K, a
nominal value and a plus/minus spread between parts), optional long-term drift, and a
relative cost.

Distributions (``Grade.distribution``):

- ``normal``: standard deviation = tolerance / coverage factor. With ``truncate`` (the
  default) values beyond the tolerance limits are removed, as a maker's final test would.
- ``uniform``: equally likely anywhere inside the limits.
- ``binned``: a normal distribution whose centre, inside plus/minus ``bin_inner_pct``, was
  sorted out and sold as a tighter grade, leaving two humps near the limits.

Part physics by technology (fields after ``technology``; each catalog number's source is
named in assets/sources.md): an absolute tolerance in pF for capacitors below 10 pF
(IEC 60062 letters B, C, D), a temperature-coefficient spread by value range (thick film),
a class II dielectric's temperature curve within its code's limit (EIA-198) and its DC-bias
curve, a load-life drift rating (scaled by :func:`filters.temperature.life_fraction`) and
class II ageing per decade of hours. At their defaults a grade behaves as before.

The default is a normal distribution with coverage factor 2 (the tolerance read as about
two standard deviations, common practice) truncated at the limits.
"""
from __future__ import annotations

import functools
import json
import os
from dataclasses import asdict, dataclass, fields, replace
from importlib import resources
from pathlib import Path
from typing import Any, Literal

from .errors import InputError, ValidationError, is_finite_number
from .safeio import parse_json, read_text

__all__ = [
    "Distribution",
    "PartKind",
    "DISTRIBUTIONS",
    "KINDS",
    "Grade",
    "GRADE_LIMITS",
    "Catalog",
    "builtin_catalog",
    "CATALOG_MAX_BYTES",
    "CATALOG_MAX_DEPTH",
    "load_catalog",
    "scaled",
    "PHYSICS_FIELDS",
]

Distribution = Literal["normal", "uniform", "binned"]
PartKind = Literal["R", "C", "L", "opamp", "any"]
DISTRIBUTIONS: tuple[str, ...] = ("normal", "uniform", "binned")
KINDS: tuple[str, ...] = ("R", "C", "L", "opamp", "any")


@dataclass(frozen=True)
class Grade:
    """A purchasable tolerance class. Percentages are plus/minus percent of the marked value."""

    name: str
    kind: PartKind
    tolerance_pct: float
    distribution: Distribution = "normal"
    coverage: float = 2.0
    truncate: bool = True
    bin_inner_pct: float = 0.0
    tempco_ppm: float = 0.0
    tempco_spread_ppm: float = 0.0
    drift_pct: float = 0.0
    cost: float = 1.0
    technology: str = ""
    # Part physics by technology (assets/sources.md names the source of every catalog number).
    tolerance_pf: float = 0.0          # capacitors below 10 pF: absolute tolerance, plus/minus pF
    tempco_by_value: tuple[tuple[float, float, float], ...] = ()  # (low, high SI, spread ppm/K)
    temp_curve_pct: tuple[tuple[float, float], ...] = ()  # class II: (deg C, typical change %)
    temp_curve_spread: float = 0.0     # part-to-part scale of the curve, plus/minus fraction
    temp_limit_pct: float = 0.0        # the dielectric code's limit over its range, plus/minus %
    bias_curve_pct: tuple[tuple[float, float], ...] = ()  # class II: (DC bias V, typical change %)
    life_drift_pct: float = 0.0        # load-life drift at the rating, plus/minus %
    life_hours: float = 1000.0         # the rating's time in service (h)
    life_temp_c: float = 70.0          # the rating's temperature (deg C)
    activation_ev: float = 0.0         # Arrhenius activation energy of the life drift (eV)
    ageing_pct_per_decade: float = 0.0  # class II: capacitance loss per decade of hours (%)
    # A measured part's relative deviations (fractions), resampled instead of the distribution
    # (filters/measured.py); built for one part, never read from a catalog file.
    measured: tuple[float, ...] = ()
    # Price breaks: (quantity, unit price) in rising quantity, in the design's purchase
    # currency (filters/constraints.py); empty: only the relative ``cost`` is known.
    prices: tuple[tuple[float, float], ...] = ()
    bias_v: float = 0.0                # the DC bias a part of this grade sits at (V; from the part)

    @property
    def sigma(self) -> float:
        """Relative standard deviation of the underlying normal (fraction, not percent)."""
        return self.tolerance_pct / 100.0 / self.coverage

    def fits(self, kind: str) -> bool:
        """Whether this grade may be given to a part of ``kind`` (R, C, L, opamp)."""
        return self.kind in (kind, "any")

    def to_dict(self) -> dict[str, Any]:
        """The grade's fields; the physics fields only where they differ from their defaults."""
        out = asdict(self)
        if not out["measured"]:
            del out["measured"]
        else:
            out["measured"] = list(out["measured"])
        if not out["prices"]:
            del out["prices"]
        else:
            out["prices"] = [list(row) for row in out["prices"]]
        for k in PHYSICS_FIELDS:
            if out[k] == getattr(_PLAIN, k):
                del out[k]
            elif isinstance(out[k], tuple):
                out[k] = [list(row) for row in out[k]]
        return out

    @staticmethod
    def from_dict(data: Any, path: str = "") -> "Grade":
        """Build and validate a grade; every problem is reported with its field path.

        Every rule runs on the grade as it will be (a missing field has its default), so
        a grade that loads also saves and reloads: see :data:`GRADE_LIMITS`.
        """
        if not isinstance(data, dict):
            raise InputError("must be an object with name, kind and tolerance_pct", path)
        known = {f.name for f in fields(Grade)} - {"measured"}  # measured values belong to a part
        problems: list[InputError] = []
        for k in data:
            if k not in known:
                problems.append(InputError(f"unknown field {k!r}", f"{path}.{k}"))
        for k in ("name", "kind", "tolerance_pct"):
            if k not in data:
                problems.append(InputError("is missing", f"{path}.{k}"))
        if any(p.path.endswith((".name", ".kind", ".tolerance_pct")) for p in problems):
            raise ValidationError(problems)
        defaults = Grade("x", "any", 1.0)
        args = {f.name: data.get(f.name, getattr(defaults, f.name)) for f in fields(Grade)}
        problems += _grade_problems(args, path)
        problems += _table_problems(args, path)
        problems += _price_problems(args, path)
        if problems:
            raise ValidationError(problems)
        return Grade(**args)


PHYSICS_FIELDS = ("tolerance_pf", "tempco_by_value", "temp_curve_pct", "temp_curve_spread",
                  "temp_limit_pct", "bias_curve_pct", "life_drift_pct", "life_hours", "life_temp_c",
                  "activation_ev", "ageing_pct_per_decade", "bias_v")
_TABLES = {"tempco_by_value": 3, "temp_curve_pct": 2, "bias_curve_pct": 2}  # columns per row


def _price_problems(args: dict[str, Any], path: str) -> list[InputError]:
    """Check a grade's price breaks: rows [quantity >= 1, unit price >= 0], rising quantity;
    the table becomes a tuple of tuples in place."""
    rows = args["prices"]
    ok = isinstance(rows, (list, tuple)) and len(rows) <= 50 and all(
        isinstance(r, (list, tuple)) and len(r) == 2 and all(is_finite_number(x) and not isinstance(x, bool) for x in r)
        and r[0] >= 1 and r[1] >= 0 for r in rows)
    if not ok:
        return [InputError("must be a list of up to 50 rows [quantity >= 1, unit price >= 0]", f"{path}.prices")]
    table = tuple((float(q), float(p)) for q, p in rows)
    if any(b[0] <= a[0] for a, b in zip(table, table[1:])):
        return [InputError("price breaks must be in rising order of quantity", f"{path}.prices")]
    args["prices"] = table
    return []


def _table_problems(args: dict[str, Any], path: str) -> list[InputError]:
    """Check the grade's tables (rows of numbers); each becomes a tuple of tuples in place."""
    problems: list[InputError] = []
    for k, width in _TABLES.items():
        v = args[k]
        rows = v if isinstance(v, (list, tuple)) else None
        ok = rows is not None and len(rows) <= 50 and all(
            isinstance(r, (list, tuple)) and len(r) == width and all(is_finite_number(x) and not isinstance(x, bool)
                                                                     for x in r) for r in rows)
        if not ok:
            problems.append(InputError(f"must be a list of up to 50 rows of {width} numbers", f"{path}.{k}"))
            continue
        table = tuple(tuple(float(x) for x in r) for r in rows)
        if k != "tempco_by_value" and any(b[0] <= a[0] for a, b in zip(table, table[1:])):
            problems.append(InputError("rows must be in rising order of their first number", f"{path}.{k}"))
            continue
        if k == "tempco_by_value" and any(not 0 <= r[0] < r[1] or r[2] < 0 for r in table):
            problems.append(InputError("each row is [low, high, spread ppm/K] with 0 <= low < high and "
                                       "spread >= 0", f"{path}.{k}"))
            continue
        if k != "tempco_by_value" and any(abs(r[1]) >= 100 for r in table):
            problems.append(InputError("changes must be within plus/minus 100 %", f"{path}.{k}"))
            continue
        args[k] = table
    return problems


# Ranges of a grade's numbers: (lowest, highest, whether the highest itself is allowed).
# Beyond them no purchasable part exists and the arithmetic would overflow or divide by ~0.
GRADE_LIMITS: dict[str, tuple[float, float, bool]] = {
    "tolerance_pct": (0.0, 100.0, False),        # percent
    "coverage": (0.1, 10.0, True),               # the tolerance in standard deviations
    "bin_inner_pct": (0.0, 100.0, False),        # percent
    "tempco_ppm": (-100_000.0, 100_000.0, True),  # ppm/K (10 %/K)
    "tempco_spread_ppm": (0.0, 100_000.0, True),  # ppm/K
    "drift_pct": (0.0, 100.0, False),            # percent
    "cost": (0.0, 1e9, True),                    # relative cost
    "tolerance_pf": (0.0, 10.0, True),           # pF (below 10 pF only)
    "temp_curve_spread": (0.0, 1.0, True),       # fraction of the curve
    "temp_limit_pct": (0.0, 100.0, False),       # percent
    "life_drift_pct": (0.0, 100.0, False),       # percent at the rating
    "life_hours": (1.0, 1e7, True),              # hours
    "life_temp_c": (-273.0, 1000.0, True),       # deg C
    "activation_ev": (0.0, 5.0, True),           # eV
    "ageing_pct_per_decade": (0.0, 50.0, True),  # percent per decade of hours
    "bias_v": (-10_000.0, 10_000.0, True),       # V
}
_UNITS = {"tolerance_pf": " pF", "life_drift_pct": " %", "ageing_pct_per_decade": " %",
          "tolerance_pct": " %", "bin_inner_pct": " %", "drift_pct": " %", "tempco_ppm": " ppm/K",
          "tempco_spread_ppm": " ppm/K"}


def _grade_problems(args: dict[str, Any], path: str) -> list[InputError]:
    """Every problem of a grade's complete field set ``args`` (numbers become floats in
    place); the one rule set used by loading, the catalog editor and saving."""
    problems: list[InputError] = []

    def bad(field: str, reason: str) -> None:
        problems.append(InputError(reason, f"{path}.{field}"))

    if not isinstance(args["name"], str) or not args["name"].strip():
        bad("name", "must be a non-empty text")
    if not isinstance(args["kind"], str) or args["kind"] not in KINDS:
        bad("kind", f"must be one of {', '.join(KINDS)}")
    if not isinstance(args["distribution"], str) or args["distribution"] not in DISTRIBUTIONS:
        bad("distribution", f"must be one of {', '.join(DISTRIBUTIONS)}")
    if not isinstance(args["truncate"], bool):
        bad("truncate", "must be true or false")
    if not isinstance(args["technology"], str):
        bad("technology", f"must be a text, not {args['technology']!r}")
    ok: dict[str, float] = {}
    for k, (lo, hi, hi_ok) in GRADE_LIMITS.items():
        v = args[k]
        if isinstance(v, bool) or not isinstance(v, (int, float)) or not is_finite_number(v):
            bad(k, f"must be a finite number, not {v!r}")
            continue
        v = args[k] = float(v)
        if not (lo <= v and (v <= hi if hi_ok else v < hi)):
            unit = _UNITS.get(k, "")
            span = f"from {lo:g}{unit} to {'' if hi_ok else 'below '}{hi:g}{unit}"
            bad(k, f"must not be negative (allowed: {span}), not {v:g}" if v < lo == 0
                else f"must be {span}, not {v:g}")
            continue
        ok[k] = v
    tol, cov, inner = ok.get("tolerance_pct"), ok.get("coverage"), ok.get("bin_inner_pct")
    if tol is not None and inner is not None:
        if args["distribution"] == "binned" and not 0 < inner < tol:
            bad("bin_inner_pct", "a binned grade needs the removed centre's half-width above 0 and "
                                 "below the tolerance")
        elif inner != 0 and inner >= tol:
            bad("bin_inner_pct", "must be at least 0 and below the tolerance")
    if (tol is not None and cov is not None and args["distribution"] == "normal"
            and args["truncate"] is False and not tol / cov * 8 < 100):
        bad("coverage", "with truncate false, tolerance / coverage must stay below 12.5 % (8 standard "
                        "deviations must not reach a negative value); truncate the grade or raise the "
                        "coverage factor")
    return problems


_PLAIN = Grade("plain", "any", 0.0)


@dataclass(frozen=True)
class Catalog:
    """An ordered set of grades, looked up by name."""

    grades: tuple[Grade, ...]

    def __post_init__(self) -> None:
        names = [g.name for g in self.grades]
        dup = {n for n in names if names.count(n) > 1}
        if dup:
            raise InputError(f"grade names must be unique; repeated: {', '.join(sorted(dup))}", "grades")

    def __contains__(self, name: str) -> bool:
        return any(g.name == name for g in self.grades)

    def __getitem__(self, name: str) -> Grade:
        for g in self.grades:
            if g.name == name:
                return g
        raise InputError(f"unknown grade {name!r}", "grade")

    def names(self) -> list[str]:
        return [g.name for g in self.grades]

    def for_kind(self, kind: str) -> list[Grade]:
        """Grades that fit a part of ``kind``, the cheapest first."""
        return sorted((g for g in self.grades if g.fits(kind)), key=lambda g: (g.cost, -g.tolerance_pct))

    def with_grade(self, grade: Grade) -> "Catalog":
        """A copy with ``grade`` added, or replacing the grade of the same name."""
        rest = [g for g in self.grades if g.name != grade.name]
        if len(rest) == len(self.grades):
            return Catalog(self.grades + (grade,))
        return Catalog(tuple(grade if g.name == grade.name else g for g in self.grades))

    def to_dict(self) -> dict[str, Any]:
        return {"format": "tolspread-catalog", "version": 1, "grades": [g.to_dict() for g in self.grades]}

    @staticmethod
    def from_dict(data: Any, path: str = "catalog") -> "Catalog":
        if not isinstance(data, dict) or not isinstance(data.get("grades"), list):
            raise InputError("must be an object with a list 'grades'", path)
        problems: list[InputError] = []
        grades = []
        for i, item in enumerate(data["grades"]):
            try:
                grades.append(Grade.from_dict(item, f"{path}.grades[{i}]" if path else f"grades[{i}]"))
            except ValidationError as exc:
                problems += exc.problems
            except InputError as exc:
                problems.append(exc)
        if problems:
            raise ValidationError(problems)
        return Catalog(tuple(grades))


@functools.lru_cache(maxsize=1)
def builtin_catalog() -> Catalog:
    """The catalog shipped with the package (typical grades; demo costs). Read once and
    shared: a :class:`Catalog` and its grades are immutable."""
    text = resources.files(__package__).joinpath("data/catalog.json").read_text(encoding="utf-8")
    return Catalog.from_dict(json.loads(text))


CATALOG_MAX_BYTES = 2_000_000
CATALOG_MAX_DEPTH = 20


def load_catalog(path: str | Path) -> Catalog:
    """Read a catalog file (JSON, same shape as the built-in one): a regular file of at
    most 2 MB, parsed with the design files' guards (:func:`filters.safeio.parse_json`).

    Parameters
    ----------
    path : str or Path
        The catalog file (JSON).

    Returns
    -------
    Catalog
        The grades (tolerances in %, costs relative, temperature coefficients in ppm/K).
    """
    p = os.fspath(path)
    text = read_text(p, CATALOG_MAX_BYTES, what="catalog file")
    data = parse_json(text, p, limit=CATALOG_MAX_BYTES, max_depth=CATALOG_MAX_DEPTH, what="catalog file")
    try:
        return Catalog.from_dict(data, "")
    except ValidationError as exc:  # name the file in front of each field
        raise ValidationError([InputError(q.reason, f"{p}: {q.path}" if q.path else p)
                               for q in exc.problems]) from None
    except InputError as exc:
        raise InputError(exc.reason, f"{p}: {exc.path}" if exc.path else p) from None


def scaled(grade: Grade, tolerance_pct: float) -> Grade:
    """``grade`` with a different tolerance (what a tolerance slider does).

    Parameters
    ----------
    grade : Grade
        The grade.
    tolerance_pct : float
        The new tolerance in percent.

    Returns
    -------
    Grade
        A copy of ``grade`` with that tolerance.
    """
    return replace(grade, name=f"{grade.name}@{tolerance_pct:g}", tolerance_pct=tolerance_pct)
