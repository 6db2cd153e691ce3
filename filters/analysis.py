"""The main job in one call: evaluate a design's boards and gather every result.

:func:`analyze` is what the command line, the window and the report share. It returns an
:class:`Analysis` result object; nothing here formats or plots.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable

from .design import Design
from .evaluate import Ensemble, evaluate
from .summary import MetricSummary, summarize


@dataclass(frozen=True)
class AnalysisResult:
    """Everything one analysis found. ``summaries`` by metric name."""

    design: Design
    ensemble: Ensemble
    summaries: dict[str, MetricSummary]
    extra: dict[str, Any] = field(default_factory=dict)

    @property
    def samples(self) -> int:
        return self.ensemble.samples

    @property
    def seed(self) -> int:
        return self.ensemble.seed


def analyze(design: Design, *, samples: int | None = None, seed: int | None = None,
            method: str | None = None, curves: bool = False,
            progress: Callable[[int, int], None] | None = None,
            should_stop: Callable[[], bool] | None = None) -> AnalysisResult:
    """Sample ``design`` and summarise every metric."""
    ens = evaluate(design, samples=samples, seed=seed, method=method, curves=curves, phase=curves,
                   progress=progress, should_stop=should_stop)
    summaries = {name: summarize(ens, name) for name in ens.metrics}
    return AnalysisResult(design, ens, summaries)
