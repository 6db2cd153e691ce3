"""Measured parts: a reel's measured values as a part's distribution.

When an engineer has measured a sample of the parts they will build with, the measured
values are a better model than the grade's stated tolerance. A part may carry its measured
values (``"measured"`` in the design file, imported from a CSV with
:func:`read_measured_csv`); every board then draws that part's value by resampling the
measured values (a bootstrap: each board takes one of the n measured deviations, with
replacement, by its standard score). The part keeps its grade's temperature and life
figures unless the CSV holds measurements at other temperatures, which give a measured mean
temperature coefficient.

Having measured only n parts is itself uncertain: :func:`measured_yield` repeats the
analysis on resampled sets of the measured values (an outer bootstrap; by lot when the CSV
names lots) and adds that spread to the binomial spread of the boards.

Caution: one reel says nothing about lot-to-lot variation. A distribution measured on one
lot models boards built from that lot; other lots may sit elsewhere within the grade's
tolerance. Measure several lots, or keep the grade's model, before a decision that spans lots.

The CSV: one value per line (SI or RKM text such as ``4k7`` or ``10.2n``, or a plain
number in SI units), with optional further columns ``temperature_c`` and ``lot``; a first
line of column names (``value,temperature_c,lot`` in any order) is allowed. Blank lines and
lines starting with ``#`` are skipped. A bad line is refused with its line number.
"""
from __future__ import annotations

import csv
import io
import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any, Callable

import numpy as np

from .errors import Cancelled, InputError, is_finite_number
from .grades import Grade
from .safeio import read_text
from .values import parse_value

__all__ = [
    "MAX_MEASURED",
    "MIN_MEASURED",
    "REFERENCE_BAND_C",
    "Measured",
    "read_measured_csv",
    "measured_from_dict",
    "measured_to_dict",
    "measured_grade",
    "MeasuredYield",
    "measured_yield",
    "summary_rows",
]

MAX_MEASURED = 100_000     # values of one part
MIN_MEASURED = 10          # fewer say too little about a distribution
MAX_CSV_BYTES = 20_000_000
REFERENCE_BAND_C = 2.0     # rows within 25 +- 2 deg C count as measured at the reference
_COLUMNS = ("value", "temperature_c", "lot")


@dataclass(frozen=True)
class Measured:
    """Measured values of one part, SI units; ``temperatures_c`` and ``lots`` are empty or
    one per value; ``source`` names the file they came from (for the report)."""

    values: tuple[float, ...]
    temperatures_c: tuple[float, ...] = ()
    lots: tuple[str, ...] = ()
    source: str = ""

    @property
    def lot_count(self) -> int:
        """Distinct lots named (1 when none are named)."""
        return len(set(self.lots)) if self.lots else 1

    def at_reference(self) -> np.ndarray:
        """The values measured at the reference temperature (all when no temperatures), (n,)."""
        v = np.asarray(self.values, dtype=float)
        if not self.temperatures_c:
            return v
        t = np.asarray(self.temperatures_c, dtype=float)
        return v[np.abs(t - 25.0) <= REFERENCE_BAND_C]

    def tempco_ppm(self) -> float | None:
        """Mean temperature coefficient (ppm/K) by least squares over the temperatures measured,
        relative to the mean at the reference; None unless two or more temperatures were measured."""
        if not self.temperatures_c:
            return None
        t = np.asarray(self.temperatures_c, dtype=float)
        if np.unique(np.round(t, 6)).size < 2:
            return None
        v = np.asarray(self.values, dtype=float)
        ref = self.at_reference()
        base = float(ref.mean()) if ref.size else float(v.mean())
        slope = np.polyfit(t - 25.0, v / base - 1.0, 1)[0]
        return float(slope * 1e6)


def _cell_value(text: str, where: str) -> float:
    try:
        x = parse_value(text.strip(), where)
    except InputError as exc:
        raise InputError(f"{text.strip()!r} is not a value ({exc.reason})", where) from None
    if not (math.isfinite(x) and x > 0):
        raise InputError(f"{text.strip()!r} must be a positive value", where)
    return float(x)


def read_measured_csv(path: str | Path, *, text: str | None = None) -> Measured:
    """Read a CSV of measured values (see the module's text for the format).

    Parameters
    ----------
    path : str or Path
        The file (its name is kept as the source).
    text : str, optional
        The file's text, when already read (``path`` is then only its name).

    Returns
    -------
    Measured
        The values in SI units, with temperatures and lots when the file has those columns.

    Raises
    ------
    InputError
        A bad line (its number named), too few or too many values, or an unreadable file.
    """
    name = Path(path).name
    if text is None:
        text = read_text(path, MAX_CSV_BYTES, what="CSV of measured values")
    reader = csv.reader(io.StringIO(text))
    columns: tuple[str, ...] | None = None
    values: list[float] = []
    temps: list[float] = []
    lots: list[str] = []
    for row in reader:
        line = reader.line_num
        cells = [c.strip() for c in row]
        if not cells or not any(cells) or cells[0].startswith("#"):
            continue
        where = f"{name} line {line}"
        if columns is None:
            if not _looks_numeric(cells[0]):
                names = tuple(c.lower() for c in cells)
                unknown = [c for c in names if c not in _COLUMNS]
                if unknown or "value" not in names or len(set(names)) != len(names):
                    raise InputError(f"column names must be value, temperature_c and lot (each at most once); "
                                     f"got {', '.join(cells)}", where)
                columns = names
                continue
            columns = _COLUMNS[:len(cells)] if len(cells) <= 3 else _COLUMNS
        if len(cells) != len(columns):
            raise InputError(f"expected {len(columns)} column(s) ({', '.join(columns)}), found {len(cells)}", where)
        rec = dict(zip(columns, cells))
        values.append(_cell_value(rec["value"], where))
        if "temperature_c" in rec:
            try:
                t = float(rec["temperature_c"])
            except ValueError:
                raise InputError(f"temperature {rec['temperature_c']!r} is not a number of deg C", where) from None
            if not (math.isfinite(t) and -273.15 < t < 1000):
                raise InputError(f"temperature {rec['temperature_c']!r} deg C is out of range", where)
            temps.append(t)
        if "lot" in rec:
            if not rec["lot"]:
                raise InputError("the lot is empty", where)
            lots.append(rec["lot"])
        if len(values) > MAX_MEASURED:
            raise InputError(f"more than {MAX_MEASURED:,} values", name)
    m = Measured(tuple(values), tuple(temps), tuple(lots), name)
    _check_counts(m, name)
    return m


def _looks_numeric(cell: str) -> bool:
    try:
        parse_value(cell)
        return True
    except InputError:
        return False


def _check_counts(m: Measured, where: str) -> None:
    n_ref = m.at_reference().size
    if n_ref < MIN_MEASURED:
        at = " at 25 +- 2 deg C" if m.temperatures_c else ""
        raise InputError(f"needs at least {MIN_MEASURED} values measured{at}; found {n_ref}", where)


def measured_from_dict(data: Any, path: str) -> Measured:
    """The design file's ``"measured"`` entry of a part: ``{"values": [...], "temperatures_c":
    [...], "lots": [...], "source": "reel.csv"}`` (values in SI units).

    Parameters
    ----------
    data : Any
        The entry as read from JSON.
    path : str
        Its field path, for messages (``parts[3].measured``).

    Returns
    -------
    Measured
    """
    if not isinstance(data, dict):
        raise InputError("must be an object with a list of values", path)
    unknown = [k for k in data if k not in ("values", "temperatures_c", "lots", "source")]
    if unknown:
        raise InputError(f"unknown field {unknown[0]!r}", f"{path}.{unknown[0]}")
    vals = data.get("values")
    if not isinstance(vals, list) or not all(is_finite_number(v) and v > 0 for v in vals):
        raise InputError("must be a list of positive values in SI units", f"{path}.values")
    if len(vals) > MAX_MEASURED:
        raise InputError(f"at most {MAX_MEASURED:,} values", f"{path}.values")
    temps = data.get("temperatures_c", [])
    if not isinstance(temps, list) or (temps and len(temps) != len(vals)) or \
            not all(is_finite_number(t) for t in temps):
        raise InputError("must be empty or one temperature (deg C) per value", f"{path}.temperatures_c")
    lots = data.get("lots", [])
    if not isinstance(lots, list) or (lots and len(lots) != len(vals)) or \
            not all(isinstance(x, str) and x for x in lots):
        raise InputError("must be empty or one lot name per value", f"{path}.lots")
    source = data.get("source", "")
    if not isinstance(source, str):
        raise InputError("must be a file name", f"{path}.source")
    m = Measured(tuple(float(v) for v in vals), tuple(float(t) for t in temps), tuple(lots), source)
    _check_counts(m, f"{path}.values")
    return m


def measured_to_dict(m: Measured) -> dict:
    """The design file's form of ``m`` (see :func:`measured_from_dict`).

    Parameters
    ----------
    m : Measured
        A part's measured values.

    Returns
    -------
    dict
        JSON-ready data.
    """
    out: dict[str, Any] = {"values": list(m.values)}
    if m.temperatures_c:
        out["temperatures_c"] = list(m.temperatures_c)
    if m.lots:
        out["lots"] = list(m.lots)
    if m.source:
        out["source"] = m.source
    return out


def measured_grade(grade: Grade, marked: float, m: Measured, ref: str) -> Grade:
    """The part's grade with its value distribution replaced by the measured deviations.

    Parameters
    ----------
    grade : Grade
        The part's catalog grade (its temperature, life and cost figures are kept).
    marked : float
        The part's marked value, SI units.
    m : Measured
        The measured values.
    ref : str
        The part's reference designator (names the grade: ``C1 measured``).

    Returns
    -------
    Grade
        ``measured`` holds the relative deviations at the reference temperature (fractions);
        ``tolerance_pct`` is the largest of them in percent (what worst-case corners use);
        a measured temperature coefficient replaces the grade's mean coefficient.
    """
    dev = m.at_reference() / marked - 1.0
    tc = m.tempco_ppm()
    out = replace(grade, name=f"{ref} measured", tolerance_pct=float(np.max(np.abs(dev)) * 100.0),
                  measured=tuple(float(x) for x in dev))
    if tc is not None:
        out = replace(out, tempco_ppm=tc)
    return out


@dataclass(frozen=True)
class MeasuredYield:
    """The yield when some parts are measured: the estimate on the boards, the spread from
    having measured only n parts (``measurement_sd``, standard deviation of the yield over
    resampled measured sets), the boards' binomial spread (``boards_sd``), and the interval
    that holds both (fractions)."""

    estimate: float
    measurement_sd: float
    boards_sd: float
    low: float
    high: float
    confidence: float
    replicates: int
    parts: tuple[str, ...]
    lots: dict[str, int]

    def to_dict(self) -> dict:
        """Plain numbers for the JSON output."""
        return {"estimate": self.estimate, "measurement_sd": self.measurement_sd, "boards_sd": self.boards_sd,
                "low": self.low, "high": self.high, "confidence": self.confidence,
                "replicates": self.replicates, "measured_parts": list(self.parts), "lots": self.lots}


def _resampled(m: Measured, rng: np.random.Generator) -> Measured:
    """One outer-bootstrap copy of ``m``: by lot (whole lots drawn with replacement) when
    there are several lots, else value by value."""
    v = np.asarray(m.values)
    t = np.asarray(m.temperatures_c) if m.temperatures_c else None
    if m.lot_count > 1:
        names = sorted(set(m.lots))
        pick = rng.choice(len(names), size=len(names))
        lots = np.asarray(m.lots)
        idx = np.concatenate([np.flatnonzero(lots == names[k]) for k in pick])
    else:
        idx = rng.integers(0, v.size, size=v.size)
    return Measured(tuple(v[idx]), () if t is None else tuple(t[idx]),
                    tuple(np.asarray(m.lots)[idx]) if m.lots else (), m.source)


def measured_yield(design, *, samples: int | None = None, seed: int | None = None,
                   replicates: int = 40, should_stop: Callable[[], bool] | None = None) -> MeasuredYield:
    """Yield of a design with measured parts, with an interval that counts the measurement.

    Parameters
    ----------
    design : Design
        A design in which one or more parts carry measured values.
    samples, seed : int, optional
        Boards and seed (default: the design's); every replicate uses the same boards.
    replicates : int
        Resampled measured sets (outer bootstrap).
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run (raises :class:`~filters.errors.Cancelled`);
        asked between replicates and inside each evaluation.

    Returns
    -------
    MeasuredYield
        The estimate on the measured values as given, and an interval at the design's
        confidence: estimate +- z sqrt(measurement_sd^2 + boards_sd^2) (normal approximation).
    """
    from scipy.special import ndtri

    from .temperature import judged_boards

    a = design.analysis
    measured = [(i, p) for i, p in enumerate(design.parts) if getattr(p, "measured", None) is not None]
    if not measured:
        raise InputError("no part of the design carries measured values", "parts")
    if replicates < 2:
        raise InputError("at least 2 replicates", "replicates")
    base = judged_boards(design, samples=samples, seed=seed, should_stop=should_stop)
    p = float(base.passed.mean())
    n = base.samples
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(a.seed if seed is None else seed,
                                                                     spawn_key=(0xB007,))))
    ys = np.empty(replicates)
    for b in range(replicates):  # replicates, not boards: each one evaluates every board at once
        if should_stop is not None and should_stop():
            raise Cancelled("measured yield stopped")
        d = design
        for _, part in measured:
            d = d.with_part(part.ref, measured=_resampled(part.measured, rng))
        ys[b] = judged_boards(d, samples=samples, seed=seed, should_stop=should_stop).passed.mean()
    m_sd = float(np.std(ys, ddof=1))
    b_sd = math.sqrt(p * (1 - p) / n)
    z = float(ndtri(0.5 + a.confidence / 2))
    half = z * math.hypot(m_sd, b_sd)
    lots = {part.ref: part.measured.lot_count for _, part in measured}
    return MeasuredYield(p, m_sd, b_sd, max(0.0, p - half), min(1.0, p + half), a.confidence, replicates,
                         tuple(part.ref for _, part in measured), lots)


def summary_rows(design) -> list[dict]:
    """One row per measured part: n, mean and spread of the deviation (percent of the
    marked value), the extremes, the lots and the measured coefficient, for tables.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[dict]
        One row per measured part (deviations in percent).
    """
    rows = []
    for p, g in zip(design.parts, design.part_grades()):
        m = getattr(p, "measured", None)
        if m is None:
            continue
        dev = np.asarray(g.measured) * 100.0
        rows.append({"ref": p.ref, "source": m.source, "n": int(dev.size), "mean_pct": float(dev.mean()),
                     "sd_pct": float(dev.std(ddof=1)), "min_pct": float(dev.min()), "max_pct": float(dev.max()),
                     "lots": m.lot_count, "tempco_ppm": m.tempco_ppm()})
    return rows

