"""What the window shows after one evaluation, computed off the GUI thread.

:func:`compute_view` turns a design (and optional what-if grades) into a
:class:`ViewData`: nominal curves, spread bands, a few sample traces, yield with its
interval, failure breakdown, per-sample metrics for histograms, and the spread budget.
Plain numpy; the window only draws it.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field
from typing import Callable, Literal, Sequence

import numpy as np

from .bands import Bands, bands, pick_rows
from .budget import Budget, metric_columns, spread_budget
from .design import Design
from .evaluate import Ensemble, Prepared, evaluate, prepare
from .grades import Grade
from .memory import check_boards
from .metric_names import margin_name
from .stats import SpanFailures, YieldEstimate, failure_breakdown, yield_estimate

__all__ = [
    "SecondQuantity",
    "CURVE_LIMIT",
    "ViewRequest",
    "ViewData",
    "compute_view",
    "what_if_grades",
]

SecondQuantity = Literal["phase", "delay"]
CURVE_LIMIT = 20_000  # boards whose curves are kept for the bands: bounded memory for big runs


@dataclass(frozen=True)
class ViewRequest:
    """An immutable request: the design, what-if grades, and what to draw."""

    generation: int
    design: Design
    grades: tuple[Grade, ...] | None = None
    second: SecondQuantity = "phase"
    traces: int = 20
    budget: bool = True
    boards: int | None = None  # evaluate only the first this many boards (a quick preview)


@dataclass(frozen=True)
class ViewData:
    """Everything the window draws for one request. Curves are (F,) arrays; traces
    (K, F); ``metrics`` name -> (S,) including span margins as ``margin.<label>``."""

    generation: int
    design: Design
    freqs_hz: np.ndarray
    second: SecondQuantity
    nominal_gain_db: np.ndarray
    nominal_second: np.ndarray
    gain_bands: Bands
    second_bands: Bands
    pass_traces_gain: np.ndarray
    pass_traces_second: np.ndarray
    fail_traces_gain: np.ndarray
    fail_traces_second: np.ndarray
    yield_: YieldEstimate
    spans: list[SpanFailures]
    metrics: dict[str, np.ndarray]
    nominal_metrics: dict[str, float]
    budget: dict[str, Budget]
    samples: int
    seed: int
    method: str
    elapsed_s: float
    ensemble: Ensemble = field(repr=False, compare=False)
    curve_boards: int = 0  # boards behind the bands and traces (all, or the first CURVE_LIMIT)
    preview: bool = False  # only the first ViewRequest.boards boards (while a slider is dragged)


def compute_view(req: ViewRequest, prepared: Prepared | None = None,
                 progress: Callable[[int, int], None] | None = None,
                 should_stop: Callable[[], bool] | None = None) -> ViewData:
    """Evaluate ``req`` and gather what the window draws (may raise Cancelled).

    Raises :class:`~tolspread.errors.InputError` (path ``analysis.samples``) when the boards
    would keep more numbers than the memory rule allows (:func:`filters.memory.check_boards`).
    """
    t0 = time.perf_counter()
    d = req.design
    prep = prepared if prepared is not None and prepared.design is d else prepare(d)
    delay = req.second == "delay"
    n = d.analysis.samples if req.boards is None else min(req.boards, d.analysis.samples)
    check_boards(prep, n, "analysis.samples")  # the memory rule (filters/memory.py), before any work
    if n <= CURVE_LIMIT:
        ens = evaluate(d, samples=n, grades=req.grades, curves=True, phase=not delay, delay=delay,
                       prepared=prep, progress=progress, should_stop=should_stop)
        drawn = ens
    else:  # every board for the numbers; the first CURVE_LIMIT boards (the same ones) for the curves
        ens = evaluate(d, samples=n, grades=req.grades, curves=False, prepared=prep, progress=progress,
                       should_stop=should_stop)
        drawn = evaluate(d, samples=CURVE_LIMIT, grades=req.grades, curves=True, phase=not delay,
                         delay=delay, prepared=prep, should_stop=should_stop)
    second = drawn.delay_s if delay else drawn.phase_deg
    assert drawn.gain_db is not None and second is not None
    passed = drawn.passed
    pass_rows = pick_rows(passed, req.traces, failing=False)
    fail_rows = pick_rows(passed, req.traces, failing=True)
    nom = prep.nominal.response
    nominal_second = (nom.delay_s if delay else nom.phase_deg)[0]  # type: ignore[index]
    est = yield_estimate(ens.passed, None, d.analysis.confidence, d.analysis.interval)  # type: ignore[arg-type]
    names = [s.label for s in d.mask]
    spans = failure_breakdown(ens.margins >= 0, ens.margins, names) if names else []
    budget = spread_budget(ens, prep) if req.budget else {}
    nominal_metrics = dict(prep.nominal.metrics)
    for j, s in enumerate(d.mask):
        nominal_metrics[margin_name(s)] = float(prep.nominal.margins[j])
    return ViewData(
        req.generation, d, ens.freqs_hz, req.second, nom.gain_db[0],
        np.asarray(nominal_second), bands(drawn.gain_db), bands(second),
        drawn.gain_db[pass_rows], second[pass_rows], drawn.gain_db[fail_rows], second[fail_rows],
        est, spans, metric_columns(ens), nominal_metrics, budget, ens.samples, ens.seed, ens.method,
        time.perf_counter() - t0, ens, drawn.samples, n < d.analysis.samples)


def what_if_grades(design: Design, tolerances: Sequence[float | None]) -> tuple[Grade, ...]:
    """The design's grades with per-part tolerance overrides (None keeps the part's own)."""
    from .grades import scaled

    base = design.part_grades()
    return tuple(g if t is None else scaled(g, t) for g, t in zip(base, tolerances))
