"""Text and JSON output of ``tolspread analyze``: the terminal summary's tables and the
``--json`` document (formatting only; the numbers come from :func:`filters.analysis.analyze`,
figures with units from :mod:`filters.report.numbers`, the same writer as the HTML report)."""
from __future__ import annotations

import math
from typing import Any, TextIO

from .. import __version__, metric_names
from ..analysis import AnalysisResult
from ..metric_names import SPAN_UNIT, is_margin, is_pair_metric, metric_label
from ..metrics import ATTENUATION_FLOOR_DB
from ..temperature_text import LIVED_BUDGET_NOTE, temperature_json, temperature_tables, yield_note
from .texttable import table
from .numbers import format_metric, format_pct, format_quantity, summary_beyond_floor, summary_cells
from .words import MATCH_NOTE

__all__ = [
    "CAUTION",
    "table",
    "summary_cells",
    "metric_order",
    "print_summary",
    "to_json",
]

CAUTION = ("The yield is an estimate under the grades' stated distributions (see README); "
           "confirm it by measuring real parts, follow the standards that apply, and have the design reviewed.")


def _write(out: TextIO, lines: list[str]) -> None:
    for line in lines:
        out.write(line + "\n")


def metric_order(result: AnalysisResult) -> list[str]:
    """The metrics the summary lists, in order: cutoff or band (centre, edges, width),
    gains, attenuations, then each stage's f0 and Q.

    Parameters
    ----------
    result : AnalysisResult
        The analysis result.

    Returns
    -------
    list[str]
        Metric names.
    """
    order = [n for n in ("cutoff_hz", "centre_hz", "lower_hz", "upper_hz", "bandwidth_hz", "reference_db",
                         "peaking_db") if n in result.summaries]
    kinds = {n: metric_names.parse(n).kind for n in result.summaries}
    order += [n for n in result.summaries if kinds[n] == "attenuation"]
    order += [n for n in result.summaries if kinds[n] == "stage" and not is_pair_metric(n)]
    return order


def rare_lines(result: AnalysisResult) -> list[str]:
    """The high-yield estimate's lines (filters/rare_failures.py), or why it was not made."""
    r = result.rare
    if r is None:
        return [f"  high-yield estimate: not made ({result.rare_note})"] if result.rare_note else []
    conf = f"{100 * r.confidence:g} %"
    plain = "more than 10^12" if not r.plain_equivalent < 1e12 else f"about {r.plain_equivalent:,.0f}"
    return [f"  HIGH-YIELD ESTIMATE (importance sampling): failure rate {r.failure_rate:.3g}, {conf} interval "
            f"{r.low:.3g} to {r.high:.3g}; yield {format_pct(1 - r.failure_rate)} ({format_pct(1 - r.high)} to "
            f"{format_pct(1 - r.low)})",
            f"    from {r.boards:,} boards drawn around {len(r.points)} likeliest failure point(s) "
            f"({r.failing:,} failing, weighted); plain sampling would need {plain} boards for this interval"]


def print_summary(result: AnalysisResult, out: TextIO, top: int = 3) -> None:
    """The readable summary ``tolspread analyze`` prints.

    Parameters
    ----------
    result : AnalysisResult
        The analysis result.
    out : TextIO
        Where to write.
    top : int
        Parts listed per spread budget.
    """
    d = result.design
    ens = result.ensemble
    names = [s.name for s in d.stages]
    out.write(f"{d.name or 'design'}\n")
    out.write(f"{result.samples:,} sampled boards, seed {result.seed}, {ens.method} sampling; "
              f"grades: {', '.join(sorted({p.grade for p in d.parts}))}\n\n")

    y = result.yield_
    if d.mask:
        out.write(f"YIELD  {format_pct(y.estimate)}  ({100 * y.confidence:g} % interval {format_pct(y.low)} to "
                  f"{format_pct(y.high)}, {y.method}; {y.passed:,} of {y.samples:,} boards pass)\n")
        if yield_note(result):  # over a range: what the yield covers; after a life: that yield
            out.write(f"  {yield_note(result)}\n")
        from ..stats import samples_for_half_width

        need = [(h, samples_for_half_width(h / 100, y.estimate, y.confidence, y.method)) for h in (1.0, 0.5, 0.1)]
        out.write("  boards needed at this yield for an interval of " +
                  ", ".join(f"+-{h:g} points: {n:,}" for h, n in need) + "\n")
        if len(result.history) > 1:
            out.write(f"  adaptive run: {len(result.history):,} batches, interval half-width "
                      f"{100 * y.half_width:.2f} points\n")
        for line in rare_lines(result):
            out.write(line + "\n")
        rows = []
        for j, s in enumerate(result.spans):
            u = SPAN_UNIT[d.mask[j].quantity]
            rows.append([s.name, f"{s.failed:,}", format_pct(s.fraction), format_pct(s.share_of_failures),
                         format_metric(s.worst_margin_db, u),
                         format_metric(float(result.prepared.nominal.margins[j]), u)])
        _write(out, table(["span", "failing boards", "of all", "share of failures", "worst margin",
                           "nominal margin"], rows, "<>>>>>"))
        out.write("\n")
    else:
        out.write("No spec mask in this design: add floor and ceiling spans to get a yield.\n\n")
    for t in temperature_tables(result):  # operating range and service life, when the design asks
        out.write(t.title + "\n")
        _write(out, table(t.headers, t.rows, t.align))
        for note in t.notes:
            out.write(f"  note: {note}\n")
        out.write("\n")

    order = metric_order(result)
    rows = [summary_cells(result.summaries[n], metric_label(n, names), d.mask) for n in order]
    _write(out, table(["metric", "nominal", "mean", "std", "std/mean", "1st pct", "99th pct", "min", "max"],
                      rows, "<>>>>>>>>"))
    for n in order:
        s = result.summaries[n]
        if s.valid < result.samples:
            out.write(f"  note: {metric_label(n, names)} is outside the analysed range for "
                      f"{result.samples - s.valid:,} board(s); they are left out of its statistics\n")
    if result.temperature is not None:  # over a range the table above is of the board temperature
        out.write("  note: these metric statistics are at the board temperature; over the range see STAGE f0 AND Q "
                  "OVER TEMPERATURE (the yield and the spans' worst margins are over every judged temperature)\n")
    if any(summary_beyond_floor(result.summaries[n]) for n in order):
        out.write(f"  note: attenuations beyond {ATTENUATION_FLOOR_DB:g} dB are not figures to trust: float64 "
                  "rounding in the response leaves them unresolved, and a real board's leakage stops far "
                  "short of them (measure)\n")

    out.write("\nSPREAD BUDGET (share of variance explained by each part, top entries; one decimal, "
              "rounded so each line adds to 100 %)\n")
    rows = []
    lived = [*result.budget.items(), *result.life_budget.items()]
    judged = any(b.basis for _, b in lived)  # over a range or after a life: say where each was taken
    for name, b in lived:
        if name not in ("cutoff_hz", "centre_hz") and not is_margin(name):
            continue
        shares = b.rounded_percent(top)
        rows.append([metric_label(name, names, d.mask), *([b.basis] if judged else []),
                     ", ".join(f"{ref} {v:.1f} %" for ref, v in shares) or "no spread"])
    if rows:
        _write(out, table(["metric", "judged", "shares"] if judged else ["metric", "shares"], rows,
                          "<<<" if judged else "<<")[1:])
    if judged:
        out.write(f"  note: {LIVED_BUDGET_NOTE}\n")

    c = result.corners
    kind = (f"all {c.boards:,} combinations of {c.varying_parts} parts at their limits" if c.exhaustive
            else f"{c.boards:,} sensitivity-guided corners of {c.varying_parts} parts: an estimate, not a "
                 "guaranteed worst case")
    out.write(f"\nCORNERS ({kind})\n")
    rows, nonlinear = [], []
    for name in ["cutoff_hz", "centre_hz"] + [n for n in c.ranges if is_margin(n)]:
        r = c.ranges.get(name)
        if r is None:
            continue
        u = metric_names.unit(name, d.mask)
        rss = format_metric(r.rss_std, u, signed=False) if r.linear else "not linear"
        label = metric_label(name, names, d.mask)
        if not r.linear:
            nonlinear.append(label)
        rows.append([label, *(format_metric(x, u) for x in (r.corner_low, r.corner_high, r.mc_low, r.mc_high)), rss])
    _write(out, table(["metric", "corner low", "corner high", "MC min", "MC max", "RSS std"], rows, "<>>>>>"))
    for label in nonlinear:
        out.write(f"  note: {label} is not linear at the nominal: a one-sided limit (a minimum or maximum over "
                  "frequencies) has zero first-order sensitivity there, so RSS cannot estimate it; see the "
                  "sampled spread (MC min and max)\n")
    if d.mask:
        out.write(f"  worst case: {'every corner board meets the mask' if c.all_pass else 'some corner boards fail the mask'}"
                  "\n")
    if any(s.kind == "match" for s in d.mask):
        out.write(f"  note: {MATCH_NOTE}\n")
    if result.opamps:
        from ..synthesis_result import opamp_table_text

        out.write("\nOP-AMP GAIN-BANDWIDTH (single-pole model; rule: GBW >= 100 G Q f0, open-loop gain at f0\n"
                  "  40 dB above the stage's gain, after Op Amps for Everyone ch. 16)\n")
        out.write(opamp_table_text(result.opamps) + "\n")
        for r in result.opamps:
            if r.too_low:
                out.write(f"  WARNING: {r.stage}: gain-bandwidth {format_quantity(r.gbw_hz or 0, 'Hz')} is below the "
                          f"{format_quantity(r.required_gbw_hz, 'Hz')} this stage needs\n")
    out.write(f"\n{CAUTION}\n")


def _clean(obj: Any) -> Any:
    """JSON has no NaN or infinity: such numbers become null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {k: _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    return obj


def to_json(result: AnalysisResult) -> dict[str, Any]:
    """The JSON document of ``tolspread analyze --json``.

    Parameters
    ----------
    result : AnalysisResult
        The analysis result.

    Returns
    -------
    dict[str, Any]
        JSON-ready data (yields as fractions, frequencies in Hz).
    """
    d = result.design

    def with_unit(name: str, fields: dict[str, Any]) -> dict[str, Any]:
        return {**fields, "unit": metric_names.unit(name, d.mask)}

    y = result.yield_.to_dict()
    # a span's margins (worst_margin_db) are in its quantity's unit: dB, deg or s
    y["spans"] = [{**s.to_dict(), "unit": SPAN_UNIT[span.quantity]} for s, span in zip(result.spans, d.mask)]
    y["caution"] = CAUTION
    if result.rare is not None:
        y["high_yield"] = result.rare.to_dict()
    elif result.rare_note:
        y["high_yield"] = {"method": "plain sampling", "note": result.rare_note}
    corner_doc = result.corners.to_dict()
    corner_doc["metrics"] = {n: with_unit(n, r) for n, r in corner_doc["metrics"].items()}
    return _clean({
        "tool": "tolspread", "version": __version__,
        "design": d.name,
        "samples": result.samples,
        "seed": result.seed,
        "method": result.ensemble.method,
        "metrics": {n: with_unit(n, s.to_dict()) for n, s in result.summaries.items()},
        "attenuation_floor_db": ATTENUATION_FLOOR_DB,
        "yield": y,
        "budget": {n: with_unit(n, b.to_dict()) for n, b in result.budget.items()},
        **({"budget_after_life": {n: with_unit(n, b.to_dict()) for n, b in result.life_budget.items()}}
           if result.life_budget else {}),
        "corners": corner_doc,
        "opamps": [dict(vars(r)) for r in result.opamps],
        **temperature_json(result),
    })
