"""The one evaluation pipeline: sample a design's boards once and gather every result.

:func:`analyze` is what the command line, the report and the window share. It samples
the boards (a fixed count, or batches until the yield's interval is narrow enough),
judges them against the mask, and computes the yield with its interval, the failure
breakdown, the spread budget and (when asked) the corners. Asked for ``curves=N`` it also
keeps the responses of the first N boards (the same boards the numbers start with) and
their spread bands: what the window draws and the report's spread figure. Every board is
evaluated once; nothing downstream evaluates again. It returns an :class:`AnalysisResult`;
nothing here formats or plots.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Callable, Literal, Sequence

import numpy as np

from .bands import Bands, bands
from .budget import Budget, spread_budget
from .corners import Corners, corners
from .design import Design
from .evaluate import Ensemble, Prepared, evaluate, prepare
from .grades import Grade
from .errors import InputError
from .memory import BoardStore, check_boards
from .rare_failures import RARE_TRIGGER, RareEstimate, estimate_for, not_estimable
from .stats import SpanFailures, YieldEstimate, adaptive_yield, failure_breakdown, yield_estimate
from .summary import MetricSummary, summarize
from .temperature import (OverTemperature, ServiceLife, judge_over_range, judge_service_life, lived_budgets,
                          passed_over_range)

__all__ = [
    "SecondQuantity",
    "Curves",
    "AnalysisResult",
    "yield_of",
    "analyze",
    "completed",
]

#: The quantity drawn beside the gain: phase (deg) or group delay (s).
SecondQuantity = Literal["phase", "delay"]


@dataclass(frozen=True)
class Curves:
    """Responses of the first ``boards`` boards of a run, and their spread bands.

    ``freqs_hz`` (F,); ``gain_db`` and ``second`` (N, F): gain in dB and the ``second``
    quantity (phase in degrees or group delay in s); ``passed`` (N,) whether each of these
    boards meets the mask; ``gain_bands`` and ``second_bands`` per frequency (F,) each.
    Boards of several channels with match spans: ``channel_spread`` match quantity -> (N, F)
    the largest difference between any two channels (dB, deg or s) and ``spread_bands``
    its bands, taken on first use (only the window's Channel match tab reads them:
    :mod:`filters.channel_match`); else both empty.
    """

    second_kind: SecondQuantity
    freqs_hz: np.ndarray
    gain_db: np.ndarray
    second: np.ndarray
    passed: np.ndarray
    gain_bands: Bands
    second_bands: Bands
    start: int = 0  # the first board's index in the seed's sequence
    channel_spread: dict[str, np.ndarray] = field(default_factory=dict)

    @cached_property
    def spread_bands(self) -> dict[str, Bands]:
        """Bands of :attr:`channel_spread`, match quantity -> (F,) each."""
        return {q: bands(v) for q, v in self.channel_spread.items()}

    @property
    def boards(self) -> int:
        return int(self.gain_db.shape[0])

    def first(self, n: int) -> "Curves":
        """The curves of the first ``n`` of these boards, with their own bands (no board is
        evaluated: the rows are sliced and their quantiles taken)."""
        if n >= self.boards:
            return self
        g, s2 = self.gain_db[:n], self.second[:n]
        spread = {q: v[:n] for q, v in self.channel_spread.items()}
        return Curves(self.second_kind, self.freqs_hz, g, s2, self.passed[:n], bands(g), bands(s2), self.start,
                      spread)


@dataclass(frozen=True)
class AnalysisResult:
    """Everything one analysis found. ``budget`` by metric name (empty when not asked);
    ``corners`` None when not asked; ``history`` the yield after each batch of an adaptive
    run (else one entry); ``curves`` the first boards' responses when asked (else None);
    ``summaries`` by metric name and ``opamps`` (the op-amp check), taken on first use.
    Over an operating range the margins' budgets are of each board's worst margin over the
    judged temperatures (:attr:`Budget.basis` says so); ``life_budget`` the margins' budgets
    after the service life (empty without one): :func:`filters.temperature.lived_budgets`."""

    design: Design
    ensemble: Ensemble
    prepared: Prepared
    yield_: YieldEstimate
    spans: list[SpanFailures]
    budget: dict[str, Budget]
    corners: Corners | None
    history: list[YieldEstimate]
    curves: Curves | None = None
    # judged over the operating range / after the service life (filters/temperature.py), when asked
    temperature: OverTemperature | None = None
    rare: RareEstimate | None = None  # the high-yield estimate by importance sampling (filters/rare_failures.py)
    rare_note: str = ""               # why it was not made, when it was asked for
    life: ServiceLife | None = None
    life_budget: dict[str, Budget] = field(default_factory=dict)

    @property
    def samples(self) -> int:
        return self.ensemble.samples

    @property
    def seed(self) -> int:
        return self.ensemble.seed

    @cached_property
    def summaries(self) -> dict[str, MetricSummary]:
        """Statistics of every per-board metric (:func:`filters.summary.summarize`)."""
        return {name: summarize(self.ensemble, name) for name in self.ensemble.metrics}

    @cached_property
    def opamps(self) -> list:
        """The op-amp gain-bandwidth check of each stage with an op-amp part
        (:func:`filters.opamp_check.gbw_warnings`), taken on first use."""
        from .opamp_check import gbw_warnings

        return gbw_warnings(self.design)


def yield_of(ens: Ensemble, confidence: float, method: str) -> tuple[YieldEstimate, list[SpanFailures]]:
    """Yield with its interval, and the per-span failure breakdown.

    Parameters
    ----------
    ens : Ensemble
        An evaluated ensemble (``ens.passed``: (S,) bool; ``ens.margins``: (S, spans)).
    confidence : float
        Confidence of the interval, a fraction in (0, 1).
    method : str
        Interval method (:data:`filters.stats.INTERVAL_METHODS`).

    Returns
    -------
    tuple[YieldEstimate, list[SpanFailures]]
        The yield (fractions) and, per span of the mask, the boards that fail it.
    """
    est = yield_estimate(ens.passed, None, confidence, method)  # type: ignore[arg-type]
    names = [s.label for s in ens.design.mask]
    spans = failure_breakdown(ens.margins >= 0, ens.margins, names) if names else []
    return est, spans


class _Runner:
    """Evaluates board ranges of one run, the first ``keep`` boards with their curves."""

    def __init__(self, design: Design, prep: Prepared, keep: int, second: SecondQuantity, seed, method,
                 grades, total: int, progress, should_stop) -> None:
        self.design, self.prep, self.keep, self.second = design, prep, keep, second
        self.kw = dict(seed=seed, method=method, grades=grades, prepared=prep, should_stop=should_stop)
        self.total, self.progress = total, progress
        self.head: Ensemble | None = None  # the boards [0, keep) with curves

    def _report(self, offset: int) -> Callable[[int, int], None] | None:
        if self.progress is None:
            return None
        return lambda done, _n: self.progress(offset + done, self.total)

    def run(self, lo: int, hi: int, progress: bool = True) -> Ensemble:
        """Boards ``[lo, hi)`` in one call, with curves when they are all below ``keep``."""
        with_curves = hi <= self.keep
        return evaluate(self.design, samples=hi - lo, start=lo, curves=with_curves,
                        phase=self.second == "phase", delay=self.second == "delay",
                        progress=self._report(lo) if progress else None, **self.kw)

    def into(self, store: BoardStore, lo: int, hi: int, progress: bool = True) -> np.ndarray:
        """Boards ``[lo, hi)`` added to ``store`` (the curve boards first, kept in
        :attr:`head`); returns their pass/fail (hi - lo,)."""
        passed = []
        if lo < self.keep:
            self.head = self.run(lo, min(hi, self.keep), progress)
            store.add(self.head)
            passed.append(self.head.passed)
            lo = min(hi, self.keep)
        for a, b in store.pieces(lo, hi) if lo < hi else []:
            e = self.run(a, b, progress)
            store.add(e)
            passed.append(e.passed)
        return np.concatenate(passed)

    def curves(self, passed: np.ndarray) -> Curves | None:
        """The head's curves; ``passed`` (S,): every board's verdict (over temperature, when judged)."""
        h = self.head
        if h is None:
            return None
        second = h.delay_s if self.second == "delay" else h.phase_deg
        assert h.gain_db is not None and second is not None
        return Curves(self.second, h.freqs_hz, h.gain_db, second, passed[:h.samples], bands(h.gain_db),
                      bands(second), h.start, h.channel_spread)


def analyze(design: Design, *, samples: int | None = None, seed: int | None = None,
            method: str | None = None, interval: str | None = None,
            half_width: float | None = None, max_samples: int = 1_000_000,
            grades: Sequence[Grade] | None = None, budget: bool = True, with_corners: bool = True,
            curves: int = 0, second: SecondQuantity = "phase", prepared: Prepared | None = None,
            samples_path: str | None = None, rare: str = "off",
            progress: Callable[[int, int], None] | None = None,
            should_stop: Callable[[], bool] | None = None) -> AnalysisResult:
    """Sample ``design``, judge it against its mask and gather every result.

    With ``half_width`` (a fraction, 0.01 = one percentage point) boards are added in
    batches until the yield interval's half-width is at most that, or ``max_samples``.

    ``grades`` overrides each part's grade (what-if tolerances; design order). ``budget``
    and ``with_corners`` ask for the spread budget and the corners (the window's preview
    skips both). ``curves`` keeps the responses of the first that many boards (at most the
    run's) with their spread bands in :attr:`AnalysisResult.curves`, the gain with the
    ``second`` quantity (``"phase"``, deg, or ``"delay"``, s); the numbers are the same
    with or without. ``prepared`` reuses a :func:`filters.evaluate.prepare` of ``design``.
    ``samples_path`` names the field the memory rule refuses a count at (default
    ``analysis.samples``, or ``samples`` when ``samples`` is given).
    ``rare`` asks for the high-yield estimate by importance sampling
    (:mod:`filters.rare_failures`): ``"off"``, ``"always"``, or ``"auto"`` (when fewer than
    :data:`~filters.rare_failures.RARE_TRIGGER` boards failed); it is in
    :attr:`AnalysisResult.rare`, or :attr:`AnalysisResult.rare_note` says why not.

    Raises :class:`~tolspread.errors.InputError` when the boards would keep more numbers
    than the memory rule allows (:func:`filters.memory.check_boards`), before any work;
    ``should_stop()`` returning True raises :class:`~tolspread.errors.Cancelled`.

    Parameters
    ----------
    design : Design
        The design to analyse (its mask defines passing).
    samples : int, optional
        Number of boards (default: the design's ``analysis.samples``).
    seed : int, optional
        Seed of the boards (default: the design's).
    method : str, optional
        Sampling method, ``"random"`` or ``"sobol"`` (default: the design's).
    interval : str, optional
        Yield interval method (default: the design's).
    half_width : float, optional
        Add boards until the yield interval's half-width (a fraction) is at most this.
    max_samples : int
        Most boards an adaptive run (``half_width``) may use.
    grades : sequence of Grade, optional
        One grade per part (design order) in place of the design's.
    budget : bool
        Compute the spread budget.
    with_corners : bool
        Compute the corners and RSS estimates.
    curves : int
        Keep the responses of the first this many boards (0: none).
    second : str
        The curves' second quantity, ``"phase"`` (deg) or ``"delay"`` (s).
    prepared : Prepared, optional
        A :func:`filters.evaluate.prepare` of ``design`` to reuse.
    samples_path : str, optional
        Field path named when the memory rule refuses the board count.
    rare : str
        High-yield estimate: ``"off"``, ``"always"`` or ``"auto"``.
    progress : callable, optional
        ``progress(done, total)`` with counts of boards.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    AnalysisResult
        Yield with its interval, failures per span, metric summaries, spread budget,
        corners and, when asked, curves and the high-yield estimate.
    """
    a = design.analysis
    interval = interval or a.interval
    prep = prepared if prepared is not None and prepared.design is design else prepare(design)
    if half_width is None:
        n = a.samples if samples is None else int(samples)
        # the memory rule (filters/memory.py): refused in one line before any work
        check_boards(prep, n, samples_path or ("analysis.samples" if samples is None else "samples"))
        runner = _Runner(design, prep, min(int(curves), n), second, seed, method, grades, n, progress,
                         should_stop)
        if runner.keep in (0, n):  # one call: every board with or without curves
            ens = runner.run(0, n)
            runner.head = ens if runner.keep else None
        else:  # the first boards with curves, the rest without, joined without a second copy
            store = BoardStore(prep, n)
            runner.into(store, 0, n)
            ens = store.ensemble()
        est, spans = yield_of(ens, a.confidence, interval)
        history = [est]
    else:
        check_boards(prep, int(max_samples), samples_path or "max_samples")
        store = BoardStore(prep, int(max_samples))  # batches join without a second copy
        runner = _Runner(design, prep, min(int(curves), int(max_samples)), second, seed, method, grades,
                         int(max_samples), None, should_stop)

        def run_batch(start: int, stop: int) -> np.ndarray:
            passed = runner.into(store, start, stop)
            over_range = passed_over_range(design, prep, grades, seed, method, start, stop, should_stop)
            if over_range is not None:  # with a range the stopping rule reads the yield over it
                passed = over_range
            if progress is not None:
                progress(stop, max_samples)
            return passed

        first = samples or min(2000, max_samples)
        est, history = adaptive_yield(run_batch, half_width=half_width, batch=first,
                                      max_samples=max_samples, confidence=a.confidence,
                                      method=interval, should_stop=should_stop)  # type: ignore[arg-type]
        ens = store.ensemble()
        _, spans = yield_of(ens, a.confidence, interval)
    over = judge_over_range(design, prep, ens, should_stop)
    if over is not None:  # a board passes only if it meets the mask at every judged temperature
        ens = replace(ens, margins=over.worst_margins)
        est, spans = yield_of(ens, a.confidence, interval)
        history = history[:-1] + [est]
    life = judge_service_life(design, prep, ens, est, should_stop)
    budget_result = spread_budget(ens, prep) if budget else {}
    budget_result, life_budget, life = lived_budgets(design, prep, ens, budget_result, over, life)
    corner_result = _corners(design, prep, ens, over) if with_corners else None
    rare_est, rare_note = _rare(design, prep, ens, est, rare, grades, seed, should_stop)
    return AnalysisResult(design, ens, prep, est, spans, budget_result, corner_result, history,
                          curves=runner.curves(ens.passed), temperature=over, life=life, rare=rare_est,
                          rare_note=rare_note, life_budget=life_budget)


def _rare(design: Design, prep: Prepared, ens: Ensemble, est: YieldEstimate, rare: str, grades, seed,
          should_stop) -> tuple[RareEstimate | None, str]:
    """The importance estimate when ``rare`` asks for it (see :func:`analyze`)."""
    if rare not in ("off", "auto", "always"):
        raise InputError(f"must be off, auto or always, not {rare!r}", "rare")
    failing = est.samples - est.passed
    if rare == "off" or (rare == "auto" and (failing >= RARE_TRIGGER or not design.mask)):
        return None, ""
    why = not_estimable(design)
    if why:
        return None, why
    found = estimate_for(design, prep, ens.grades if grades is None else tuple(grades), seed=ens.seed,
                         confidence=design.analysis.confidence, should_stop=should_stop)
    if found.failing == 0:
        return None, (f"no failing board among {found.boards:,} drawn around the likeliest failure points: "
                      "the plain interval stands")
    return found, ""


def _corners(design: Design, prep: Prepared, ens: Ensemble, over: OverTemperature | None) -> Corners:
    """The corners of the run's boards; over a judged temperature range each part's
    extremes over the whole range."""
    if over is not None:
        lo, hi = over.range_c
        ens = replace(ens, design=design.with_analysis(temp_low_c=lo, temp_high_c=hi))
    return corners(ens, prep)


def completed(result: AnalysisResult, *, curves: int | None = None) -> AnalysisResult:
    """``result`` with what a full :func:`analyze` has and it lacks, from its own boards:
    the spread budget and the corners when it was run without them, and its curves cut to
    the first ``curves`` boards (bands taken again). No sampled board is evaluated again
    (the corners evaluate their corner designs only). Raises ValueError when ``curves`` is
    asked of a result that kept none.

    Parameters
    ----------
    result : AnalysisResult
        A result of :func:`analyze`.
    curves : int, optional
        Keep the curves of the first this many boards (default: as kept).

    Returns
    -------
    AnalysisResult
        A new result; ``result`` is unchanged.
    """
    if curves is not None and result.curves is None:
        raise ValueError("this result kept no curves: analyze(design, ..., curves=N)")
    ens, prep = result.ensemble, result.prepared
    budget, life_budget, life = result.budget, result.life_budget, result.life
    if not budget:  # over a range and after a life as analyze takes them
        budget, life_budget, life = lived_budgets(result.design, prep, ens, spread_budget(ens, prep),
                                                  result.temperature, life)
    return replace(result, budget=budget, life_budget=life_budget, life=life,
                   corners=result.corners or _corners(result.design, prep, ens, result.temperature),
                   curves=result.curves if curves is None else result.curves.first(curves))  # type: ignore[union-attr]
