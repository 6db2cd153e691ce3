"""Text and JSON output of ``tolspread analyze`` (formatting only; the numbers come from
:func:`filters.analysis.analyze`)."""
from __future__ import annotations

import math
from typing import Any, TextIO

from filters import __version__
from filters.analysis import AnalysisResult, analyze  # noqa: F401  (re-exported for the CLI)
from filters.summary import MetricSummary, metric_label
from filters.values import format_value


def _fmt(x: float, unit: str) -> str:
    if not math.isfinite(x):
        return "n/a"
    if unit == "Hz":
        return format_value(x, "Hz", digits=4)
    if unit == "dB":
        return f"{x:+.3f} dB"
    return f"{x:.4g}"


def _unit(name: str) -> str:
    return "Hz" if name.endswith("_hz") else "dB" if name.endswith("_db") else ""


def summary_row(s: MetricSummary, label: str) -> str:
    u = _unit(s.name)
    rel = f"{100 * s.rel_std:6.2f} %" if u == "Hz" or s.name.endswith(".q") else "        "
    return (f"  {label:<28} {_fmt(s.nominal, u):>11} {_fmt(s.mean, u):>11} {_fmt(s.std, u):>11} {rel}"
            f" {_fmt(s.p01, u):>11} {_fmt(s.p99, u):>11} {_fmt(s.minimum, u):>11} {_fmt(s.maximum, u):>11}")


def print_summary(result: AnalysisResult, out: TextIO) -> None:
    """The readable summary ``tolspread analyze`` prints."""
    d = result.design
    ens = result.ensemble
    names = [s.name for s in d.stages]
    out.write(f"{d.name or 'design'}\n")
    out.write(f"{result.samples} sampled boards, seed {result.seed}, {ens.method} sampling; "
              f"grades: {', '.join(sorted({p.grade for p in d.parts}))}\n\n")
    head = (f"  {'metric':<28} {'nominal':>11} {'mean':>11} {'std':>11} {'std/mean':>8}"
            f" {'1st pct':>11} {'99th pct':>11} {'min':>11} {'max':>11}\n")
    out.write(head)
    order = [n for n in ("cutoff_hz", "centre_hz", "bandwidth_hz", "reference_db", "peaking_db")
             if n in result.summaries]
    order += [n for n in result.summaries if n.startswith("s") and n not in order and ".p" not in n]
    for n in order:
        out.write(summary_row(result.summaries[n], metric_label(n, names)) + "\n")
    missing = {n: s for n, s in result.summaries.items() if n in order and s.valid < result.samples}
    for n, s in missing.items():
        out.write(f"  note: {metric_label(n, names)} is outside the analysed range for "
                  f"{result.samples - s.valid} board(s); they are left out of its statistics\n")
    out.write("\nEstimates under the grades' stated distributions; confirm with measured parts.\n")


def to_json(result: AnalysisResult) -> dict[str, Any]:
    """The JSON document of ``tolspread analyze --json``."""
    d = result.design
    return {
        "tool": "tolspread", "version": __version__,
        "design": d.name,
        "samples": result.samples,
        "seed": result.seed,
        "method": result.ensemble.method,
        "metrics": {n: _clean(s.to_dict()) for n, s in result.summaries.items()},
    }


def _clean(d: dict[str, Any]) -> dict[str, Any]:
    """JSON has no NaN: missing numbers become null."""
    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in d.items()}
