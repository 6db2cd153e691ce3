"""What the window shows after one evaluation, computed off the GUI thread.

:func:`compute_view` runs the one pipeline (:func:`filters.analysis.analyze`, the command
line's and the report's) on a design (and optional what-if grades) and reads a
:class:`ViewData` from its result: nominal curves, spread bands, a few sample traces,
yield with its interval, failure breakdown, per-sample metrics for histograms, and the
spread budget. Plain numpy; the window only draws it.
"""
from __future__ import annotations

import time
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from .analysis import AnalysisResult, Curves, SecondQuantity, analyze
from .bands import Bands, pick_rows
from .budget import Budget, metric_columns
from .design import Design
from .evaluate import Ensemble, Prepared, prepare
from .grades import Grade
from .metric_names import margin_name
from .stats import SpanFailures, YieldEstimate
from .temperature_settings import over_range_or_life
from .temperature_text import DEGREE

__all__ = [
    "SecondQuantity",
    "CURVE_LIMIT",
    "ViewRequest",
    "ViewData",
    "compute_view",
    "board_temperature_text",
    "prepared_for",
]

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
    """What the window draws for one request, read from one analysis (``result``).

    Its own fields are what only the window needs: the nominal curves (F,), a few sample
    traces (K, F) of passing and failing boards, ``metrics`` name -> (S,) including span
    margins as ``margin.<label>`` and their nominal values. The yield, failures, budget,
    bands and board counts are the result's (properties below)."""

    generation: int
    design: Design
    second: SecondQuantity
    nominal_gain_db: np.ndarray
    nominal_second: np.ndarray
    pass_traces_gain: np.ndarray
    pass_traces_second: np.ndarray
    fail_traces_gain: np.ndarray
    fail_traces_second: np.ndarray
    metrics: dict[str, np.ndarray]
    nominal_metrics: dict[str, float]
    elapsed_s: float
    result: AnalysisResult = field(repr=False, compare=False)
    preview: bool = False  # only the first ViewRequest.boards boards (while a slider is dragged)
    # a preview of a design with an operating range or a service life, judged at the board
    # temperature only (the one the curves show); the release judges over the range
    reference_only: bool = False

    @property
    def ensemble(self) -> Ensemble:
        return self.result.ensemble

    @property
    def freqs_hz(self) -> np.ndarray:
        return self.result.ensemble.freqs_hz

    @property
    def yield_(self) -> YieldEstimate:
        return self.result.yield_

    @property
    def spans(self) -> list[SpanFailures]:
        return self.result.spans

    @property
    def budget(self) -> dict[str, Budget]:
        return self.result.budget

    @property
    def samples(self) -> int:
        return self.result.samples

    @property
    def seed(self) -> int:
        return self.result.seed

    @property
    def method(self) -> str:
        return self.result.ensemble.method

    @property
    def gain_bands(self) -> Bands:
        return self._curves.gain_bands

    @property
    def second_bands(self) -> Bands:
        return self._curves.second_bands

    @property
    def curve_boards(self) -> int:
        """Boards behind the bands and traces (all, or the first :data:`CURVE_LIMIT`)."""
        return self._curves.boards

    @property
    def _curves(self) -> Curves:
        assert self.result.curves is not None
        return self.result.curves


def compute_view(req: ViewRequest, prepared: Prepared | None = None,
                 progress: Callable[[int, int], None] | None = None,
                 should_stop: Callable[[], bool] | None = None) -> ViewData:
    """Analyse ``req`` (:func:`filters.analysis.analyze`, no corners; curves of the first
    :data:`CURVE_LIMIT` boards; a full run, not a preview, adds the high-yield estimate when few
    boards fail, ``rare="auto"``) and gather what the window draws (may raise Cancelled).

    A preview (``req.boards``) of a design judged over an operating range or after a
    service life is judged at its board temperature only (:func:`at_board_temperature`:
    one evaluation per board, not one per judged temperature and again after the life);
    :attr:`ViewData.reference_only` says so. Its boards, curves and figures are those of
    the full run's evaluation at that temperature; the full run judges over the range.

    Raises :class:`~tolspread.errors.InputError` (path ``analysis.samples``) when the boards
    would keep more numbers than the memory rule allows (:func:`filters.memory.check_boards`).

    Parameters
    ----------
    req : ViewRequest
        The design, what-if grades and what to draw.
    prepared : Prepared, optional
        A :func:`filters.evaluate.prepare` of the design to reuse.
    progress : callable, optional
        ``progress(done, total)`` with counts of boards.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    ViewData
        The analysis result with the curves (at most ``CURVE_LIMIT`` boards, (S, F)),
        their bands and the sample traces the window draws.
    """
    t0 = time.perf_counter()
    d = req.design
    n = d.analysis.samples if req.boards is None else min(req.boards, d.analysis.samples)
    judged, reference_only = d, False
    if req.boards is not None and over_range_or_life(d.analysis):  # a drag's preview: the board temperature only
        judged, reference_only = at_board_temperature(d), True
        if prepared is not None and prepared.design is d:  # nothing prepared depends on the range
            prepared = replace(prepared, design=judged)
    result = analyze(judged, samples=n, grades=req.grades, budget=req.budget, with_corners=False,
                     curves=min(n, CURVE_LIMIT), second=req.second, prepared=prepared,
                     samples_path="analysis.samples", progress=progress, should_stop=should_stop,
                     rare="auto" if req.boards is None else "off")  # a drag's preview stays quick
    ens, drawn, prep = result.ensemble, result.curves, result.prepared
    assert drawn is not None
    pass_rows = pick_rows(drawn.passed, req.traces, failing=False)
    fail_rows = pick_rows(drawn.passed, req.traces, failing=True)
    nom = prep.nominal.response
    nominal_second = (nom.delay_s if req.second == "delay" else nom.phase_deg)[0]  # type: ignore[index]
    nominal_metrics = dict(prep.nominal.metrics)
    for j, s in enumerate(d.mask):
        nominal_metrics[margin_name(s)] = float(prep.nominal.margins[j])
    return ViewData(
        req.generation, d, req.second, nom.gain_db[0], np.asarray(nominal_second),
        drawn.gain_db[pass_rows], drawn.second[pass_rows], drawn.gain_db[fail_rows], drawn.second[fail_rows],
        metric_columns(ens), nominal_metrics, time.perf_counter() - t0, result, n < d.analysis.samples,
        reference_only)


def prepared_for(design: Design, last: Prepared | None = None) -> Prepared:
    """:func:`filters.evaluate.prepare` of ``design``, or ``last`` made over for it when the
    two designs differ only in their parts' tolerances (a tolerance slider released):
    nothing prepared (circuit, grid, nominal response, the mask's plan) depends on them.

    Parameters
    ----------
    design : Design
        The design to evaluate.
    last : Prepared, optional
        The design prepared last.

    Returns
    -------
    Prepared
        ``design`` prepared (its ``design`` is ``design``).
    """
    if last is not None and last.design is not design and _untoleranced(last.design) == _untoleranced(design):
        return replace(last, design=design)
    return last if last is not None and last.design is design else prepare(design)


def _untoleranced(design: Design) -> Design:
    """``design`` with no tolerance set on any part (each part as its grade has it)."""
    return replace(design, parts=tuple(replace(p, tolerance_pct=None) for p in design.parts))


def at_board_temperature(design: Design) -> Design:
    """``design`` judged at its board temperature only (``temperature_c``, the curves'),
    without its operating range, extra judged temperatures and service life."""
    return design.with_analysis(operating_range_c=None, judge_at_c=(), service_hours=0.0)


def board_temperature_text(design: Design) -> str:
    """The board temperature of ``design`` as a reader sees it.

    Parameters
    ----------
    design : Design
        The design (its ``temperature_c``, deg C).

    Returns
    -------
    str
        "25 °C", or "0 to 50 °C" for boards spread uniformly over a range.
    """
    lo, hi = design.analysis.temp_low_c, design.analysis.temp_high_c
    return f"{lo:g} {DEGREE}" if lo == hi else f"{lo:g} to {hi:g} {DEGREE}"
