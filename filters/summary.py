"""Summaries of an ensemble's metrics: nominal, mean, spread and percentiles.

Plain numbers for the command line, the JSON output and the report; no formatting for
people here beyond names.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .evaluate import Ensemble


@dataclass(frozen=True)
class MetricSummary:
    """Statistics of one per-sample metric. ``valid`` counts samples where it exists
    (a cutoff outside the analysed range is missing, not zero)."""

    name: str
    nominal: float
    mean: float
    std: float
    p01: float
    p99: float
    minimum: float
    maximum: float
    valid: int

    @property
    def rel_std(self) -> float:
        """Standard deviation relative to the mean (fraction)."""
        return self.std / abs(self.mean) if self.mean else float("nan")

    def to_dict(self) -> dict[str, float | int]:
        return {"nominal": self.nominal, "mean": self.mean, "std": self.std, "p01": self.p01,
                "p99": self.p99, "min": self.minimum, "max": self.maximum, "valid": self.valid}


def summarize(ens: Ensemble, name: str) -> MetricSummary:
    """Summary of metric ``name`` over the ensemble's samples (NaN samples left out)."""
    v = ens.metrics[name]
    ok = v[np.isfinite(v)]
    nominal = ens.nominal.metrics.get(name, float("nan"))
    if ok.size == 0:
        nan = float("nan")
        return MetricSummary(name, nominal, nan, nan, nan, nan, nan, nan, 0)
    p01, p99 = np.percentile(ok, [1, 99])
    return MetricSummary(name, nominal, float(ok.mean()), float(ok.std(ddof=1)) if ok.size > 1 else 0.0,
                         float(p01), float(p99), float(ok.min()), float(ok.max()), int(ok.size))


METRIC_LABELS = {
    "cutoff_hz": "cutoff (Hz)",
    "centre_hz": "centre (Hz)",
    "bandwidth_hz": "bandwidth (Hz)",
    "lower_hz": "lower band edge (Hz)",
    "upper_hz": "upper band edge (Hz)",
    "reference_db": "passband gain (dB)",
    "peaking_db": "peaking (dB)",
}


def metric_label(name: str, stage_names: list[str] | None = None) -> str:
    """A readable label for a metric name such as ``s2.q`` -> ``stage 2 Q``."""
    if name in METRIC_LABELS:
        return METRIC_LABELS[name]
    parts = name.split(".")
    if parts[0].startswith("s") and parts[0][1:].isdigit():
        k = int(parts[0][1:])
        stage = stage_names[k - 1] if stage_names and k - 1 < len(stage_names) else f"stage {k}"
        rest = {"f0_hz": "f0 (Hz)", "q": "Q", "fc_hz": "fc (Hz)"}
        tail = parts[-1]
        pair = f" pair {parts[1][1:]}" if len(parts) == 3 else ""
        return f"{stage}{pair} {rest.get(tail, tail)}"
    if name.startswith("attenuation_db@"):
        from .values import format_value

        return f"attenuation at {format_value(float(name.split('@')[1]), 'Hz')} (dB)"
    if name.startswith("margin."):
        return f"margin of '{name[7:]}' (dB)"
    return name
