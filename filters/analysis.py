"""The main job in one call: evaluate a design's boards and gather every result.

:func:`analyze` is what the command line, the window and the report share: it samples
the boards (a fixed count, or batches until the yield's interval is narrow enough),
judges them against the mask, and computes the yield with its interval, the failure
breakdown, the spread budget and the corners. It returns an :class:`AnalysisResult`;
nothing here formats or plots.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .budget import Budget, spread_budget
from .corners import Corners, corners
from .design import Design
from .evaluate import Ensemble, Prepared, evaluate, prepare
from .memory import BoardStore, check_boards
from .stats import SpanFailures, YieldEstimate, adaptive_yield, failure_breakdown, yield_estimate
from .summary import MetricSummary, summarize
from .temperature import OverTemperature, ServiceLife, judge_over_range, judge_service_life

__all__ = [
    "AnalysisResult",
    "yield_of",
    "analyze",
]


@dataclass(frozen=True)
class AnalysisResult:
    """Everything one analysis found. ``summaries`` by metric name; ``budget`` by metric
    name; ``history`` the yield after each batch of an adaptive run (else one entry)."""

    design: Design
    ensemble: Ensemble
    prepared: Prepared
    summaries: dict[str, MetricSummary]
    yield_: YieldEstimate
    spans: list[SpanFailures]
    budget: dict[str, Budget]
    corners: Corners
    history: list[YieldEstimate]
    opamps: list = field(default_factory=list)  # synthesis.GbwWarning per stage with an op-amp part

    # judged over the operating range / after the service life (filters/temperature.py), when asked
    temperature: OverTemperature | None = None
    life: ServiceLife | None = None

    @property
    def samples(self) -> int:
        return self.ensemble.samples

    @property
    def seed(self) -> int:
        return self.ensemble.seed


def yield_of(ens: Ensemble, confidence: float, method: str) -> tuple[YieldEstimate, list[SpanFailures]]:
    """Yield with its interval, and the per-span failure breakdown."""
    est = yield_estimate(ens.passed, None, confidence, method)  # type: ignore[arg-type]
    names = [s.label for s in ens.design.mask]
    spans = failure_breakdown(ens.margins >= 0, ens.margins, names) if names else []
    return est, spans


def analyze(design: Design, *, samples: int | None = None, seed: int | None = None,
            method: str | None = None, interval: str | None = None,
            half_width: float | None = None, max_samples: int = 1_000_000,
            progress: Callable[[int, int], None] | None = None,
            should_stop: Callable[[], bool] | None = None) -> AnalysisResult:
    """Sample ``design``, judge it against its mask and gather every result.

    With ``half_width`` (a fraction, 0.01 = one percentage point) boards are added in
    batches until the yield interval's half-width is at most that, or ``max_samples``.
    """
    a = design.analysis
    interval = interval or a.interval
    prep = prepare(design)
    if half_width is None:
        # the memory rule (filters/memory.py): refused in one line before any work
        check_boards(prep, a.samples if samples is None else int(samples),
                     "analysis.samples" if samples is None else "samples")
        ens = evaluate(design, samples=samples, seed=seed, method=method, curves=False,
                       prepared=prep, progress=progress, should_stop=should_stop)
        est, spans = yield_of(ens, a.confidence, interval)
        history = [est]
    else:
        check_boards(prep, int(max_samples), "max_samples")
        store = BoardStore(prep, int(max_samples))  # batches join without a second copy

        def run_batch(start: int, stop: int) -> np.ndarray:
            passed = []
            for lo, hi in store.pieces(start, stop):
                e = evaluate(design, samples=hi - lo, start=lo, seed=seed, method=method,
                             curves=False, prepared=prep, should_stop=should_stop)
                store.add(e)
                passed.append(e.passed)
            if progress is not None:
                progress(stop, max_samples)
            return np.concatenate(passed)

        first = samples or min(2000, max_samples)
        est, history = adaptive_yield(run_batch, half_width=half_width, batch=first,
                                      max_samples=max_samples, confidence=a.confidence,
                                      method=interval, should_stop=should_stop)  # type: ignore[arg-type]
        ens = store.ensemble()
        _, spans = yield_of(ens, a.confidence, interval)
    over = judge_over_range(design, prep, ens, should_stop)
    corner_ens = ens
    if over is not None:  # a board passes only if it meets the mask at every judged temperature
        ens = replace(ens, margins=over.worst_margins)
        est, spans = yield_of(ens, a.confidence, interval)
        history = history[:-1] + [est]
        lo, hi = over.range_c  # corners: each part's extremes over the whole range
        corner_ens = replace(ens, design=design.with_analysis(temp_low_c=lo, temp_high_c=hi))
    life = judge_service_life(design, prep, ens, est, should_stop)
    summaries = {name: summarize(ens, name) for name in ens.metrics}
    budget = spread_budget(ens, prep)
    corner_result = corners(corner_ens, prep)
    from .synthesis import gbw_warnings

    opamps = gbw_warnings(design)
    return AnalysisResult(design, ens, prep, summaries, est, spans, budget, corner_result, history, opamps,
                          over, life)
