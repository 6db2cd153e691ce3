"""What every report section reads: the analysis result and the optional extras, with the
figures the sections add as they are built."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Sequence

from ..analysis import AnalysisResult, Curves
from ..design import Design
from ..evaluate import Ensemble, Prepared

__all__ = [
    "Context",
]


@dataclass
class Context:
    """The input of one report. ``result`` must keep curves (``analyze(..., curves=N)``);
    ``recommendation``, ``curve`` (its cost-yield curve, a list of (target,
    Recommendation)), ``parts_rows``, ``current``, ``comparison``, ``target`` and
    ``shapes`` as :func:`filters.report.build_report` takes them. Sections add their SVG figures to ``figures`` (name -> SVG text)."""

    result: AnalysisResult
    recommendation: Any = None
    curve: Any = None
    parts_rows: Sequence[dict] | None = None
    current: Any = None
    comparison: Sequence[Any] = ()   # filters.grade_sets.SetResult, current first
    target: float | None = None      # the yield target the comparison is judged against
    shapes: Sequence[Any] = ()       # filters.robustness.ShapeYield of the reported grades
    shape_choices: Sequence[Any] = ()  # filters.robustness.ShapeChoice: the search under each shape
    figures: dict[str, str] = field(default_factory=dict)

    @property
    def design(self) -> Design:
        return self.result.design

    @property
    def ensemble(self) -> Ensemble:
        return self.result.ensemble

    @property
    def prepared(self) -> Prepared:
        return self.result.prepared

    @property
    def curves(self) -> Curves:
        assert self.result.curves is not None
        return self.result.curves

    @property
    def stage_names(self) -> list[str]:
        return [s.name for s in self.design.stages]

    @property
    def reference_db(self) -> float:
        """The nominal design's passband gain (dB), the reference of relative spans."""
        return float(self.result.prepared.nominal.metrics.get("reference_db", 0.0))

    @property
    def conf_pct(self) -> str:
        """The yield interval's confidence as text ("95 %")."""
        return f"{self.result.yield_.confidence * 100:g} %"
