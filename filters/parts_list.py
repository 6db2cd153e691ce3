"""The parts list: one row per part (value, preferred-value series, grade, tolerance
letter, temperature coefficient, cost, share of the spread budget) and its CSV file.

Values in SI units with their unit (ohm, F, H; an op-amp's gain-bandwidth in Hz);
tolerances in %; temperature coefficients in ppm/K; costs the catalog's relative costs.
"""
from __future__ import annotations

import csv
import io
import math
from pathlib import Path
from typing import TYPE_CHECKING, Any, Mapping, Sequence

import numpy as np

from .budget import Budget
from .design import Design
from .designfile import write_text_atomic
from .errors import InputError
from .evaluate import Ensemble
from .metric_names import is_margin, margin_names, metric_label
from .report.numbers import format_quantity
from .values import E_SERIES, PART_UNITS, series_for_tolerance, snap, tolerance_letter

if TYPE_CHECKING:
    from .recommend import Recommendation

__all__ = [
    "PARTS_COLUMNS",
    "FORMULA_STARTS",
    "worst_margin_metric",
    "smallest_series",
    "parts_list_rows",
    "write_parts_csv",
]

PARTS_COLUMNS: tuple[str, ...] = (
    "ref", "nominal value", "series", "nearest preferred value", "grade", "tolerance (\u00b1 %)",
    "IEC 60062 letter", "tempco (ppm/K)", "drift", "technology", "relative cost",
    "share of spread budget (%)", "budget metric")
#: First characters that make a spreadsheet program read a cell as a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def worst_margin_metric(ens: Ensemble) -> str | None:
    """``"margin.<label>"`` of the span most boards fail (ties: the smallest margin),
    or None without a mask - a ``metric`` for :func:`parts_list_rows`.

    Parameters
    ----------
    ens : Ensemble
        An evaluated ensemble with span margins (``ens.margins``: (S, spans), in each span's
        unit).

    Returns
    -------
    str or None
        The metric name, or None when the design has no mask.
    """
    names = margin_names(ens.design.mask)
    if not names:
        return None
    fails = np.count_nonzero(ens.margins < 0, axis=0)
    worst = ens.margins.min(axis=0)
    j = min(range(len(names)), key=lambda j: (-int(fails[j]), float(worst[j]), j))
    return names[j]


def smallest_series(value: float) -> str | None:
    """The smallest IEC 60063 series (E3, E6, E12, E24, E48, E96, E192, in that order) that
    holds ``value`` (SI units, any decade), or None when no series does: 4.7 nF -> "E3",
    15 nF -> "E6", 2.67 kohm -> "E96".

    Parameters
    ----------
    value : float
        A part value in SI units (ohm, F, H), positive.

    Returns
    -------
    str or None
        The series name (``"E3"`` ... ``"E192"``), or None.
    """
    return next((name for name in E_SERIES
                 if math.isclose(float(snap(value, name)), value, rel_tol=1e-9)), None)


def parts_list_rows(design: Design, recommendation: "Recommendation | None",
                    budget: Mapping[str, Budget] | None = None, *,
                    metric: str | None = None) -> list[dict[str, Any]]:
    """The parts list, one dict per part (keys :data:`PARTS_COLUMNS`), for the CSV file.

    With a recommendation that chose a set, its design's grades are listed; else the
    design's own (what-if tolerances applied). ``nominal value`` is the marked value in
    SI units with its unit (``2.67 kΩ``); ``series`` the smallest IEC 60063 series that
    holds it (:func:`smallest_series`; "none" when no series does; blank for op-amps and
    ideal grades). A value of any series counts as a preferred value (common practice: E24
    values are sold at 1 % and 2 % too); only a value in no series gets a ``nearest
    preferred value``: the nearest value of the series usual for the grade's tolerance,
    named with that series (a different value changes the design and needs a new
    analysis). ``tolerance (± %)`` with its IEC 60062 letter (blank if it has none);
    ``tempco (ppm/K)`` as ``nominal ± spread``; ``drift`` as the grade states it (a fixed
    drift, its load-life rating, class II ageing per decade-hour; "none");
    ``relative cost`` the catalog's.
    ``share of spread budget (%)`` is the part's share of ``metric``'s variance in
    ``budget`` (from :func:`filters.budget.spread_budget`), by default ``cutoff_hz`` (else
    the first span margin); pass ``metric=worst_margin_metric(ens)`` for the worst span.
    ``budget metric`` names that metric in words (``margin of 'corner floor' (dB)``), and
    over an operating range which budget it is (the budget's ``basis``: ``margin of 'corner
    floor' (dB), over -40 to 85 °C, worst judged temperature``; a metric's ``at 25 °C``).
    Blank without a budget.

    Parameters
    ----------
    design : Design
        The design whose parts are listed.
    recommendation : Recommendation or None
        A recommendation; when it chose a set, its grades are listed instead.
    budget : mapping of str to Budget, optional
        Spread budgets by metric name (:func:`filters.budget.spread_budget`).
    metric : str, optional
        The budget metric whose shares are listed (default: ``cutoff_hz``, else the first
        span margin).

    Returns
    -------
    list[dict[str, Any]]
        One row per part (P rows), keyed by the column titles.

    Raises
    ------
    InputError
        When ``budget`` has no entry for ``metric`` (path ``metric``).
    """
    shown = recommendation.design if recommendation is not None and recommendation.chosen else design
    grades = shown.part_grades()
    if budget and metric is None:
        metric = "cutoff_hz" if "cutoff_hz" in budget else next(
            (k for k in budget if is_margin(k)), next(iter(budget)))
    shares: dict[str, float] = {}
    if budget and metric is not None:
        if metric not in budget:
            raise InputError(f"no spread budget for {metric!r}; have {', '.join(budget)}", "metric")
        shares = {e.ref: e.share for e in budget[metric].entries}
    metric_words = (metric_label(metric, [s.name for s in shown.stages], shown.mask)
                    if shares and metric else "")
    if shares and metric and budget[metric].basis:  # over a range or after a life: which budget it is
        metric_words += f", {budget[metric].basis}"
    from .report.words import drift_text

    rows = []
    for p, g in zip(shown.parts, grades):
        unit = PART_UNITS.get(p.kind, "")
        nearest, series = "", ""
        if p.kind in ("R", "C", "L") and g.tolerance_pct > 0:
            series = smallest_series(p.value) or "none"
            if series == "none":
                usual = series_for_tolerance(g.tolerance_pct)
                nearest = (f"{format_quantity(float(snap(p.value, usual)), unit)} "
                           f"({usual}, the series usual for \u00b1{g.tolerance_pct:g} %)")
        share = shares.get(p.ref)
        rows.append({
            "ref": p.ref,
            "nominal value": format_quantity(p.value, unit),
            "series": series,
            "nearest preferred value": nearest,
            "grade": p.grade,
            "tolerance (\u00b1 %)": g.tolerance_pct,
            "IEC 60062 letter": tolerance_letter(g.tolerance_pct) or "",
            "tempco (ppm/K)": f"{g.tempco_ppm:g} \u00b1 {g.tempco_spread_ppm:g}",
            "drift": drift_text(g),
            "technology": g.technology,
            "relative cost": g.cost,
            "share of spread budget (%)": "" if share is None else round(100.0 * share, 1),
            "budget metric": metric_words,
        })
    return rows


def _as_text_cell(value: Any) -> Any:
    """A cell a spreadsheet program would run as a formula (text starting with = + - @,
    tab or carriage return) gets a leading apostrophe, so it is shown as text."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


def write_parts_csv(rows: Sequence[Mapping[str, Any]], path: str | Path) -> None:
    """Write parts-list rows (from :func:`parts_list_rows`) as a CSV file with a header,
    atomically (:func:`filters.designfile.write_text_atomic`). The file is UTF-8 with a
    byte-order mark (``utf-8-sig``), so spreadsheet programs show ohm and ± signs; text
    cells that a spreadsheet would run as a formula are written with a leading apostrophe.

    Parameters
    ----------
    rows : sequence of mapping
        Rows from :func:`parts_list_rows` (extra keys become extra columns).
    path : str or Path
        The file to write (replaced atomically).

    Raises
    ------
    InputError
        When the file cannot be written.
    """
    columns = list(PARTS_COLUMNS)
    for r in rows:
        columns += [k for k in r if k not in columns]
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
    writer.writerow({k: _as_text_cell(k) for k in columns})
    for r in rows:
        writer.writerow({k: _as_text_cell(v) for k, v in r.items()})
    write_text_atomic(Path(path), "\ufeff" + buf.getvalue(), backup=False)
