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

The default is a normal distribution with coverage factor 2 (the tolerance read as about
two standard deviations, common practice) truncated at the limits.
"""
from __future__ import annotations

import json
from dataclasses import asdict, dataclass, fields, replace
from importlib import resources
from pathlib import Path
from typing import Any, Literal

from .errors import InputError, ValidationError, is_finite_number

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

    @property
    def sigma(self) -> float:
        """Relative standard deviation of the underlying normal (fraction, not percent)."""
        return self.tolerance_pct / 100.0 / self.coverage

    def fits(self, kind: str) -> bool:
        """Whether this grade may be given to a part of ``kind`` (R, C, L, opamp)."""
        return self.kind in (kind, "any")

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)

    @staticmethod
    def from_dict(data: Any, path: str = "") -> "Grade":
        """Build and validate a grade; every problem is reported with its field path."""
        if not isinstance(data, dict):
            raise InputError("must be an object with name, kind and tolerance_pct", path)
        known = {f.name for f in fields(Grade)}
        problems: list[InputError] = []
        for k in data:
            if k not in known:
                problems.append(InputError(f"unknown field {k!r}", f"{path}.{k}"))
        for k in ("name", "kind", "tolerance_pct"):
            if k not in data:
                problems.append(InputError("is missing", f"{path}.{k}"))
        if any(p.path.endswith((".name", ".kind", ".tolerance_pct")) for p in problems):
            raise ValidationError(problems)
        args = {k: data[k] for k in data if k in known}
        if not isinstance(args["name"], str) or not args["name"].strip():
            problems.append(InputError("must be a non-empty text", f"{path}.name"))
        if args["kind"] not in KINDS:
            problems.append(InputError(f"must be one of {', '.join(KINDS)}", f"{path}.kind"))
        if args.get("distribution", "normal") not in DISTRIBUTIONS:
            problems.append(InputError(f"must be one of {', '.join(DISTRIBUTIONS)}",
                                       f"{path}.distribution"))
        numbers = ("tolerance_pct", "coverage", "bin_inner_pct", "tempco_ppm", "tempco_spread_ppm",
                   "drift_pct", "cost")
        for k in numbers:
            if k in args:
                v = args[k]
                if isinstance(v, bool) or not isinstance(v, (int, float)) or not is_finite_number(v):
                    problems.append(InputError(f"must be a finite number, not {v!r}", f"{path}.{k}"))
                    del args[k]
                else:
                    args[k] = float(v)
        if "truncate" in args and not isinstance(args["truncate"], bool):
            problems.append(InputError("must be true or false", f"{path}.truncate"))
        # Range checks on every field that parsed, so one report lists every problem.
        d = Grade("x", "any", 1.0)
        get = {k: args.get(k, getattr(d, k)) for k in numbers}
        tol = get["tolerance_pct"] if "tolerance_pct" in args else None
        checks = [
            ("tolerance_pct", tol is None or 0 <= tol < 100, "must be at least 0 and below 100 %"),
            ("coverage", get["coverage"] > 0, "must be above 0"),
            ("bin_inner_pct", get["bin_inner_pct"] >= 0 and (tol is None or get["bin_inner_pct"] == 0
                                                             or get["bin_inner_pct"] < tol),
             "must be at least 0 and below the tolerance"),
            ("tempco_spread_ppm", get["tempco_spread_ppm"] >= 0, "must not be negative"),
            ("drift_pct", 0 <= get["drift_pct"] < 100, "must be at least 0 and below 100 %"),
            ("cost", get["cost"] >= 0, "must not be negative"),
            ("coverage", tol is None or args.get("truncate", True) or args.get("distribution", "normal") != "normal"
             or tol / get["coverage"] * 8 < 100,
             "with truncate false, tolerance / coverage must stay below 12.5 % (8 standard deviations "
             "must not reach a negative value); truncate the grade or raise the coverage factor"),
        ]
        problems += [InputError(msg, f"{path}.{k}") for k, ok, msg in checks if k in args and not ok]
        if (args.get("distribution") == "binned" and "bin_inner_pct" in args and get["bin_inner_pct"] <= 0) or (
                args.get("distribution") == "binned" and "bin_inner_pct" not in args):
            problems.append(InputError("a binned grade needs the removed centre's half-width above 0",
                                       f"{path}.bin_inner_pct"))
        if problems:
            raise ValidationError(problems)
        g = Grade(**args)
        return g


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
                grades.append(Grade.from_dict(item, f"{path}.grades[{i}]"))
            except ValidationError as exc:
                problems += exc.problems
            except InputError as exc:
                problems.append(exc)
        if problems:
            raise ValidationError(problems)
        return Catalog(tuple(grades))


def builtin_catalog() -> Catalog:
    """The catalog shipped with the package (typical grades; demo costs)."""
    text = resources.files("filters").joinpath("data/catalog.json").read_text(encoding="utf-8")
    return Catalog.from_dict(json.loads(text))


def load_catalog(path: str | Path) -> Catalog:
    """Read a catalog file (JSON, same shape as the built-in one)."""
    p = Path(path)
    try:
        data = json.loads(p.read_text(encoding="utf-8"))
    except OSError as exc:
        raise InputError(f"cannot read catalog file: {exc.strerror}", str(p)) from None
    except (json.JSONDecodeError, UnicodeDecodeError) as exc:
        raise InputError(f"not a valid JSON catalog file: {exc}", str(p)) from None
    return Catalog.from_dict(data)


def scaled(grade: Grade, tolerance_pct: float) -> Grade:
    """``grade`` with a different tolerance (what a tolerance slider does)."""
    return replace(grade, name=f"{grade.name}@{tolerance_pct:g}", tolerance_pct=tolerance_pct)
