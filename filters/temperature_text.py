"""Tables of the temperature-range and service-life results, as plain cells.

The command line (``tolspread analyze``) and the report lay out the same tables; each is
a :class:`Table` of text cells (no layout here). See :mod:`filters.temperature` for the numbers.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from .metric_names import metric_label
from .report.numbers import format_pct
from .stats import YieldEstimate
from .temperature_settings import HOURS_PER_YEAR
from .values import format_value

__all__ = [
    "Table",
    "temperature_tables",
    "temperature_json",
    "physics_text",
    "assumption_texts",
    "yield_note",
    "point_yields_note",
    "DEGREE",
    "LIVED_BUDGET_NOTE",
]

DEGREE = "\u00b0C"
#: What a spread budget over an operating range or after a service life means (terminal, report, window).
LIVED_BUDGET_NOTE = ("over a range each span's budget is that of the board's worst margin over the judged "
                     "temperatures, fitted on the board's own parts as they are where that margin is smallest "
                     "(tolerance, drawn temperature coefficient and, after the life, drift together); a part with "
                     "a large share there is what moves boards out at the extremes or with age. The metrics' "
                     "budgets (cutoff, stage f0 and Q) are at the board temperature")


@dataclass(frozen=True)
class Table:
    """A titled table: header cells, rows of cells, one alignment character per column
    (``<`` left, ``>`` right) and notes printed under it."""

    title: str
    headers: list[str]
    rows: list[list[str]]
    align: str
    notes: list[str]


def _interval(y: YieldEstimate) -> str:
    return f"{format_pct(y.low)} to {format_pct(y.high)}"


def _figure(x: float, unit: str) -> str:
    """A frequency in engineering notation (4 figures), a plain number (4 figures)."""
    return format_value(x, unit, digits=4) if unit else f"{x:.4g}"


def _spread_cell(s: Any, unit: str) -> str:
    """'mean ± std' of a metric summary; 'not found' when no board has the metric there
    (e.g. a stage's second pole pair that no board has)."""
    if not (math.isfinite(s.mean) and math.isfinite(s.std)):
        return "not found"
    return f"{_figure(s.mean, unit)} \u00b1 {_figure(s.std, unit)}"


def _t(t: float) -> str:
    return f"{t:g} {DEGREE}"


def temperature_tables(result: Any) -> list[Table]:
    """The tables of ``result`` (an :class:`filters.analysis.AnalysisResult`) about its
    operating range and service life; empty when the design asks for neither.

    Parameters
    ----------
    result : AnalysisResult
        An analysis result.

    Returns
    -------
    list[Table]
        Tables for people.
    """
    out: list[Table] = []
    over, life, d = result.temperature, result.life, result.design
    names = [s.name for s in d.stages]
    if over is not None:
        lo, hi = over.range_c
        rows = [[_t(p.temperature_c), format_pct(p.yield_.estimate), _interval(p.yield_),
                 f"{p.yield_.samples - p.yield_.passed:,}"] for p in over.points]
        y = over.overall
        rows.append(["every judged temperature", format_pct(y.estimate), _interval(y), f"{y.samples - y.passed:,}"])
        out.append(Table(
            f"YIELD OVER TEMPERATURE (operating range {lo:g} to {hi:g} {DEGREE}; each board keeps its parts and "
            "passes only if it meets the mask at every judged temperature)",
            ["temperature", "yield", f"{100 * y.confidence:g} % interval", "failing boards"], rows, "<>>>",
            []))
        if over.span_names:
            n = y.samples
            worst = result.ensemble.margins  # the smallest margin over the judged temperatures
            rows = []
            for j, name in enumerate(over.span_names):
                cells = [format_pct(p.span_failed[j] / n) for p in over.points]
                rows.append([name, *cells, format_pct(float((worst[:, j] < 0).sum()) / n)])
            out.append(Table(
                "FAILURES BY SPAN AND TEMPERATURE (share of all boards failing each span there)",
                ["span", *(_t(p.temperature_c) for p in over.points), "at any"], rows,
                "<" + ">" * (len(over.points) + 1), []))
        shift = [m for m in over.points[0].summaries if m.endswith((".f0_hz", ".q")) or m == "cutoff_hz"]
        if shift:
            rows = []
            for m in shift:
                unit = "Hz" if m.endswith("_hz") else ""
                rows.append([metric_label(m, names), *(_spread_cell(p.summaries[m], unit) for p in over.points)])
            out.append(Table(
                "STAGE f0 AND Q OVER TEMPERATURE (mean \u00b1 standard deviation of the boards)",
                ["metric", *(_t(p.temperature_c) for p in over.points)], rows,
                "<" + ">" * len(over.points),
                ["each board's parts move with their own drawn temperature coefficients (class II "
                 "capacitors along their dielectric's curve); op-amp gain-bandwidth with its grade's drift"]))
    if life is not None:
        where = "at every judged temperature" if over is not None else "at the board temperature"
        years = life.hours / HOURS_PER_YEAR
        rows = [["yield", format_pct(life.delivery.estimate), format_pct(life.after.estimate)],
                [f"{100 * life.delivery.confidence:g} % interval", _interval(life.delivery), _interval(life.after)],
                ["failing boards", f"{life.delivery.samples - life.delivery.passed:,}",
                 f"{life.after.samples - life.after.passed:,}"]]
        out.append(Table(
            f"SERVICE LIFE (the same boards at delivery and after {life.hours:,.0f} h = {years:.3g} years at "
            f"{life.temp_c:g} {DEGREE}, judged {where})",
            ["figure", "at delivery", f"after {years:.3g} years"], rows, "<>>",
            ["life drift: each grade's load-life rating (at rated power) scaled by sqrt(time) and an "
             "Arrhenius factor, class II ageing per decade of hours (README 'What the numbers mean'): a "
             "cautious estimate for parts run well below rated power; confirm with life tests of real parts"]))
    return out


def temperature_json(result: Any) -> dict[str, Any]:
    """The ``temperature`` and ``service_life`` entries of the analyze JSON (absent keys
    when the design asks for neither).

    Parameters
    ----------
    result : AnalysisResult
        An analysis result.

    Returns
    -------
    dict[str, Any]
        JSON-ready data (yields as fractions, temperatures in deg C).
    """
    out: dict[str, Any] = {}
    if result.temperature is not None:
        doc = result.temperature.to_dict()
        doc["span_failed_any"] = [int(x) for x in (result.ensemble.margins < 0).sum(axis=0)]
        out["temperature"] = doc
    if result.life is not None:
        out["service_life"] = result.life.to_dict()
    return out


def physics_text(g: Any) -> str:
    """A grade's temperature behaviour in words: a class II curve with its code's limit, or
    the coefficient (ppm/K, with its spread); "" when it has neither.

    Parameters
    ----------
    g : Grade
        A grade.

    Returns
    -------
    str
        The words.
    """
    if g.temp_curve_pct:
        lim = f", clipped to \u00b1{g.temp_limit_pct:g} %" if g.temp_limit_pct else ""
        ends = ", ".join(f"{c:+g} % at {t:g} {DEGREE}" for t, c in (g.temp_curve_pct[0], g.temp_curve_pct[-1]))
        return (f"a temperature curve ({ends}; scale \u00b1{100 * g.temp_curve_spread:g} % between parts{lim})")
    return ""


def assumption_texts(analysis: Any) -> list[str]:
    """Plain sentences on the operating range and service life of ``analysis`` (for the
    report's assumptions); empty when the design asks for neither.

    Parameters
    ----------
    analysis : Analysis
        The design's analysis settings.

    Returns
    -------
    list[str]
        Sentences.
    """
    from .temperature_settings import judged_temperatures

    out = []
    temps = judged_temperatures(analysis)
    if temps:
        lo, hi = analysis.operating_range_c
        out.append(f"Operating range {lo:g} to {hi:g} {DEGREE}: every board is judged at "
                   + ", ".join(f"{t:g}" for t in temps) + f" {DEGREE} with its own parts (their temperature "
                   "coefficients drawn once) and passes only if it meets the mask at every one; the stated yield "
                   "is that of the boards passing at all of them. The metrics, bands and budget are those at the "
                   "board temperature above. Corners take each part's extremes over the whole range.")
    if analysis.service_hours:
        out.append(f"Service life {analysis.service_hours:,.0f} h ({analysis.service_hours / HOURS_PER_YEAR:.3g} "
                   f"years) at {analysis.service_temp_c:g} {DEGREE}: each part drifts by its grade's load-life "
                   "rating scaled by sqrt(time) and an Arrhenius factor, in the direction of its own drift score; "
                   "class II capacitors lose their ageing rate per decade of hours (assets/sources.md). The "
                   "ratings are at rated power, so the figure is cautious for parts run well below it.")
    return out


def yield_note(result: Any) -> str:
    """One line saying what the stated yield covers (the judged temperatures) and the
    yield after the service life; "" when the design asks for neither (or no result).

    Parameters
    ----------
    result : AnalysisResult or None
        An analysis result.

    Returns
    -------
    str
        The line ("" when there is nothing to say).
    """
    if result is None:
        return ""
    parts = []
    if result.temperature is not None:
        temps = ", ".join(f"{t:g}" for t in result.temperature.temperatures_c)
        parts.append(f"at every judged temperature ({temps} {DEGREE})")
    if result.life is not None:
        parts.append(f"after {result.life.years:.3g} years: {format_pct(result.life.after.estimate)}")
    return "; ".join(parts)


def point_yields_note(result: Any) -> str:
    """One line with the yield at each judged temperature on its own (the same boards, each
    temperature alone: e.g. "each temperature alone: -40 °C 90.48 %, 25 °C 90.72 %, 85 °C
    90.58 %", no-break spaces inside each pair); "" without an operating range (or no result).

    Parameters
    ----------
    result : AnalysisResult or None
        An analysis result.

    Returns
    -------
    str
        The line ("" when there is nothing to say).
    """
    over = getattr(result, "temperature", None)
    if over is None:
        return ""
    # no-break spaces inside each "temperature yield" pair: a narrow panel wraps between pairs
    return "each temperature alone: " + ", ".join(
        f"{_t(p.temperature_c)} {format_pct(p.yield_.estimate)}".replace(" ", "\u00a0") for p in over.points)
