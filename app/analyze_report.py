"""Text and JSON output of ``tolspread analyze`` (formatting only; the numbers come from
:func:`filters.analysis.analyze`)."""
from __future__ import annotations

import math
from typing import Any, TextIO

from filters import __version__
from filters.analysis import AnalysisResult, analyze  # noqa: F401  (re-exported for the CLI)
from filters.budget import is_pair_metric
from filters.summary import MetricSummary, metric_label
from filters.values import format_value

CAUTION = ("The yield is an estimate under the grades' stated distributions (see README); "
           "confirm it by measuring real parts, follow the standards that apply, and have the design reviewed.")


def _fmt(x: float, unit: str) -> str:
    if not math.isfinite(x):
        return "n/a"
    if unit == "Hz":
        return format_value(x, "Hz", digits=4)
    if unit == "dB":
        return f"{x:+.3f} dB"
    return f"{x:.4g}"


def _unit(name: str) -> str:
    if name.endswith("_hz"):
        return "Hz"
    return "dB" if name.endswith("_db") or name.startswith(("margin.", "attenuation_db@")) else ""


def summary_row(s: MetricSummary, label: str) -> str:
    u = _unit(s.name)
    rel = f"{100 * s.rel_std:6.2f} %" if u == "Hz" or s.name.endswith(".q") else "        "
    return (f"  {label:<28} {_fmt(s.nominal, u):>11} {_fmt(s.mean, u):>11} {_fmt(s.std, u):>11} {rel}"
            f" {_fmt(s.p01, u):>11} {_fmt(s.p99, u):>11} {_fmt(s.minimum, u):>11} {_fmt(s.maximum, u):>11}")


def _pct(x: float) -> str:
    return f"{100 * x:.2f} %"


def print_summary(result: AnalysisResult, out: TextIO, top: int = 3) -> None:
    """The readable summary ``tolspread analyze`` prints."""
    d = result.design
    ens = result.ensemble
    names = [s.name for s in d.stages]
    out.write(f"{d.name or 'design'}\n")
    out.write(f"{result.samples} sampled boards, seed {result.seed}, {ens.method} sampling; "
              f"grades: {', '.join(sorted({p.grade for p in d.parts}))}\n\n")

    y = result.yield_
    if d.mask:
        out.write(f"YIELD  {_pct(y.estimate)}  ({round(100 * y.confidence)} % interval {_pct(y.low)} to "
                  f"{_pct(y.high)}, {y.method}; {y.passed} of {y.samples} boards pass)\n")
        from filters.stats import samples_for_half_width

        need = [(h, samples_for_half_width(h / 100, y.estimate, y.confidence, y.method)) for h in (1.0, 0.5, 0.1)]
        out.write("  boards needed at this yield for an interval of " +
                  ", ".join(f"+-{h:g} points: {n:,}" for h, n in need) + "\n")
        if len(result.history) > 1:
            out.write(f"  adaptive run: {len(result.history)} batches, interval half-width "
                      f"{100 * y.half_width:.2f} points\n")
        out.write(f"  {'span':<24} {'failing boards':>15} {'share of failures':>18} {'worst margin':>13}"
                  f" {'nominal margin':>15}\n")
        for j, s in enumerate(result.spans):
            unit = d.mask[j].quantity
            u = {"gain": "dB", "phase": "deg", "delay": "s"}[unit]
            out.write(f"  {s.name:<24} {s.failed:>8} ({_pct(s.fraction):>7}) {_pct(s.share_of_failures):>16}"
                      f" {s.worst_margin_db:>+10.3f} {u:<3} {result.prepared.nominal.margins[j]:>+11.3f} {u}\n")
        out.write("\n")
    else:
        out.write("No spec mask in this design: add floor and ceiling spans to get a yield.\n\n")

    head = (f"  {'metric':<28} {'nominal':>11} {'mean':>11} {'std':>11} {'std/mean':>8}"
            f" {'1st pct':>11} {'99th pct':>11} {'min':>11} {'max':>11}\n")
    out.write(head)
    order = [n for n in ("cutoff_hz", "centre_hz", "bandwidth_hz", "reference_db", "peaking_db")
             if n in result.summaries]
    order += [n for n in result.summaries if n.startswith("attenuation_db@")]
    order += [n for n in result.summaries if n.startswith("s") and n not in order and not is_pair_metric(n)]
    for n in order:
        out.write(summary_row(result.summaries[n], metric_label(n, names)) + "\n")
    for n in order:
        s = result.summaries[n]
        if s.valid < result.samples:
            out.write(f"  note: {metric_label(n, names)} is outside the analysed range for "
                      f"{result.samples - s.valid} board(s); they are left out of its statistics\n")

    out.write("\nSPREAD BUDGET (share of variance explained by each part; top entries)\n")
    for name, b in result.budget.items():
        if name not in ("cutoff_hz",) and not name.startswith("margin."):
            continue
        tops = ", ".join(f"{e.ref} {_pct(e.share)}" for e in b.entries[:top] if e.share > 0)
        out.write(f"  {metric_label(name, names):<36} {tops or 'no spread'}"
                  f"{f'; unexplained {_pct(b.remainder)}' if b.remainder >= 0.005 else ''}\n")

    c = result.corners
    kind = (f"all {c.boards} combinations of {c.varying_parts} parts at their limits" if c.exhaustive
            else f"{c.boards} sensitivity-guided corners of {c.varying_parts} parts: an estimate, not a guaranteed worst case")
    out.write(f"\nCORNERS ({kind})\n")
    out.write(f"  {'metric':<36} {'corner low':>11} {'corner high':>11} {'MC min':>11} {'MC max':>11}"
              f" {'RSS std':>11}\n")
    for name in ["cutoff_hz"] + [n for n in c.ranges if n.startswith("margin.")]:
        r = c.ranges.get(name)
        if r is None:
            continue
        u = _unit(name)
        out.write(f"  {metric_label(name, names):<36} {_fmt(r.corner_low, u):>11} {_fmt(r.corner_high, u):>11}"
                  f" {_fmt(r.mc_low, u):>11} {_fmt(r.mc_high, u):>11} {_fmt(r.rss_std, u):>11}\n")
    if d.mask:
        out.write(f"  worst case: {'every corner board meets the mask' if c.all_pass else 'some corner boards fail the mask'}"
                  "\n")
    if result.opamps:
        from filters.synthesis import opamp_table_text

        out.write("\nOP-AMP GAIN-BANDWIDTH (single-pole model; rule: GBW >= 100 G Q f0, open-loop gain at f0\n"
                  "  40 dB above the stage's gain, after Op Amps for Everyone ch. 16)\n")
        out.write(opamp_table_text(result.opamps) + "\n")
        for r in result.opamps:
            if r.too_low:
                out.write(f"  WARNING: {r.stage}: gain-bandwidth {format_value(r.gbw_hz or 0, 'Hz')} is below the "
                          f"{format_value(r.required_gbw_hz, 'Hz')} this stage needs\n")
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
    """The JSON document of ``tolspread analyze --json``."""
    d = result.design
    y = result.yield_.to_dict()
    y["spans"] = [s.to_dict() for s in result.spans]
    y["caution"] = CAUTION
    return _clean({
        "tool": "tolspread", "version": __version__,
        "design": d.name,
        "samples": result.samples,
        "seed": result.seed,
        "method": result.ensemble.method,
        "metrics": {n: s.to_dict() for n, s in result.summaries.items()},
        "yield": y,
        "budget": {n: b.to_dict() for n, b in result.budget.items()},
        "corners": result.corners.to_dict(),
        "opamps": [dict(vars(r)) for r in result.opamps],
    })
