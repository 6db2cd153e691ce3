"""One evaluation of a design: sample part values, compute responses, metrics, margins.

:func:`evaluate` returns an :class:`Ensemble` (arrays shaped (samples, ...)) plus the
nominal design's response and metrics. Work runs in chunks of samples on a small thread
pool (numpy releases the GIL inside its loops), which keeps temporaries in cache and uses
both cores; results do not depend on the chunking. With ``curves=False`` only per-sample
metrics and margins are kept, so memory stays bounded for very large sample counts.

:func:`evaluate_values` runs the same pipeline on given part values (rows need not be
random: the sensitivities and corners use it on perturbed and extreme designs).
"""
from __future__ import annotations

import threading
from concurrent.futures import TimeoutError as FuturesTimeout
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from .design import Design
from .engine import (
    Circuit,
    Response,
    compile_design,
    fold_columns,
    frequency_response,
    give_scratch,
    response_blocks,
    stage_coefficients,
    take_scratch,
)
from .errors import Cancelled, InputError
from .grades import Grade
from .judge import SpanPlan, margins, needs, plan
from .mask import edge_frequencies
from .metric_names import attenuation_name
from .metrics import GridScan, attenuation_db, cutoff_metrics, lowpass_level_db, scan_block, stage_metrics
from .channel_match import evaluate_channels, match_quantities, sample_values
from .sampling import Conditions, draw_scores
from .workers import POOL, WORKERS
from .freed_memory import reuse_freed_memory  # re-exported: the program's memory setting

__all__ = [
    "CHUNK_MAX",
    "WORKERS",
    "reuse_freed_memory",
    "STOP_POLL_S",
    "chunk_size",
    "frequency_grid",
    "scores_for",
    "Evaluated",
    "Nominal",
    "Ensemble",
    "Prepared",
    "prepare",
    "evaluate_values",
    "evaluate",
]

CHUNK_MAX = 8192  # boards per chunk at most: bounds the per-chunk arrays (a few x 8192 x F floats)
STOP_POLL_S = 0.01  # how often a waiting evaluation asks should_stop (s)
_SCORES: dict[tuple, np.ndarray] = {}
def chunk_size(samples: int) -> int:
    """Boards per chunk: the fewest rounds of equal chunks, one per thread in each round,
    with no chunk above :data:`CHUNK_MAX` (an unequal last round leaves a thread idle).

    Parameters
    ----------
    samples : int
        Number of boards to evaluate.

    Returns
    -------
    int
        Boards per chunk (at least 1).
    """
    rounds = -(-samples // (WORKERS * CHUNK_MAX))
    return max(256, -(-samples // (max(rounds, 1) * WORKERS)))


def frequency_grid(design: Design, extra: Sequence[float] = ()) -> np.ndarray:
    """Log-spaced grid (Hz) over the analysed range, holding every mask edge and ``extra``.

    Parameters
    ----------
    design : Design
        The design (its analysis range and points per decade, its mask's edges).
    extra : sequence of float
        More frequencies to hold, in Hz.

    Returns
    -------
    np.ndarray
        (F,) float, ascending, in Hz.
    """
    a = design.analysis
    grid = np.geomspace(a.f_start, a.f_stop, a.points)
    keep = [grid, edge_frequencies(design.mask), np.asarray(extra, dtype=float)]
    return np.unique(np.concatenate(keep))


def scores_for(design: Design, samples: int, seed: int, method: str, start: int = 0) -> np.ndarray:
    """Standard scores for samples ``[start, start + samples)`` (cached for repeated use).

    Parameters
    ----------
    design : Design
        The design (its part count sets the columns).
    samples : int
        Number of boards.
    seed : int
        Seed of the boards.
    method : str
        Sampling method, ``"random"`` or ``"sobol"``.
    start : int
        Index of the first board in the seed's sequence.

    Returns
    -------
    np.ndarray
        (samples, P) float standard scores (no unit), read-only.
    """
    key = (seed, len(design.parts), start, samples, method)
    hit = _SCORES.get(key)
    if hit is None:
        hit = draw_scores(seed, len(design.parts), start, start + samples, method)  # type: ignore[arg-type]
        hit.setflags(write=False)
        if len(_SCORES) >= 4:
            _SCORES.pop(next(iter(_SCORES)))
        _SCORES[key] = hit
    return hit


@dataclass(frozen=True)
class Evaluated:
    """Results for a batch of part values: response (S, F) (None when no curves were
    kept), metrics name -> (S,) (empty on the pass/fail path), margins (S, spans) in each
    span's unit."""

    response: Response | None
    metrics: dict[str, np.ndarray]
    margins: np.ndarray


@dataclass(frozen=True)
class Nominal:
    """The nominal design (every part at its marked value): response arrays (1, F)."""

    values: np.ndarray
    response: Response
    metrics: dict[str, float]
    margins: np.ndarray  # (spans,)


@dataclass(frozen=True)
class Ensemble:
    """Sampled boards.

    ``values`` (S, P) in SI units; ``gain_db``, ``phase_deg`` (continuous across frequency)
    and ``delay_s`` (group delay) shaped (S, F), or None when curves were not kept;
    ``metrics`` name -> (S,); ``margins`` (S, spans) and ``passed`` (S,) against the mask
    (every board passes an empty mask).
    """

    design: Design
    grades: tuple[Grade, ...]
    seed: int
    method: str
    start: int
    values: np.ndarray
    freqs_hz: np.ndarray
    gain_db: np.ndarray | None
    phase_deg: np.ndarray | None
    delay_s: np.ndarray | None
    metrics: dict[str, np.ndarray]
    margins: np.ndarray
    nominal: Nominal
    # boards of several channels, with curves: match quantity -> (S, F) largest difference
    # between any two channels at each frequency (filters/channel_match.py)
    channel_spread: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def samples(self) -> int:
        return int(self.values.shape[0])

    @property
    def passed(self) -> np.ndarray:
        """True for every board that meets every span (S,)."""
        return fold_columns(np.logical_and, self.margins >= 0, True)  # np.all along each row


@dataclass(frozen=True)
class Prepared:
    """What every chunk of one evaluation shares: compiled circuit, grid, span plans."""

    design: Design
    circuit: Circuit
    freqs_hz: np.ndarray
    plans: list[SpanPlan]
    nominal: Nominal
    w_refs: tuple[float, ...]  # each stage's frequency scale (rad/s), from the nominal design


def prepare(design: Design, extra_freqs: Sequence[float] = ()) -> Prepared:
    """Compile the design, build the grid, evaluate the nominal design, plan the mask.

    Parameters
    ----------
    design : Design
        The design.
    extra_freqs : sequence of float
        More frequencies for the grid, in Hz.

    Returns
    -------
    Prepared
        The compiled design, its grid (F,) in Hz, its nominal response and the mask's plan.
    """
    circuit = compile_design(design)
    freqs = frequency_grid(design, extra_freqs)
    nominal_values = np.array([p.value for p in design.parts])
    with np.errstate(divide="ignore", over="ignore", invalid="ignore", under="ignore"):
        coeffs = stage_coefficients(circuit, nominal_values[None, :])
        resp = frequency_response(circuit, coeffs, freqs, phase=True, delay=True)
        m = _metrics_for(circuit, coeffs, resp, design.analysis.cutoff_db, design.analysis.attenuation_hz)
        plans = plan(design.mask, freqs, float(m["reference_db"][0]))
        marg = margins(plans, resp)[0]
    _check_finite(m, marg)
    nominal = Nominal(nominal_values, resp, {k: float(v[0]) for k, v in m.items()}, marg)
    return Prepared(design, circuit, freqs, plans, nominal, tuple(c.w_ref for c in coeffs))


def _check_finite(m: dict[str, np.ndarray], marg: np.ndarray) -> None:
    if not np.isfinite(m["reference_db"][0]) or m["reference_db"][0] < -250:
        raise InputError("the nominal design has no passband gain (check the part values)", "parts")
    if not np.all(np.isfinite(marg)):
        raise InputError("the nominal response cannot be judged against the mask", "mask")


def _metrics_for(circuit: Circuit, coeffs, resp: Response, cutoff_db: float,
                 attenuation_hz: Sequence[float] = (), scan: GridScan | None = None) -> dict[str, np.ndarray]:
    m = cutoff_metrics(circuit, coeffs, resp, cutoff_db, scan)
    m.update(stage_metrics(circuit, coeffs))
    if attenuation_hz:
        ref2 = 10 ** (m["reference_db"] / 10)
        for f in attenuation_hz:
            m[attenuation_name(f)] = attenuation_db(coeffs, ref2, f)
    return m


def evaluate_values(prep: Prepared, values: np.ndarray, *, phase: bool = False,
                    delay: bool = False, out: tuple | None = None, metrics: bool = True) -> Evaluated:
    """Responses, metrics and margins for part values ``values`` (S, P), no sampling.

    ``out`` = (gain_db, phase, delay) arrays (S, F) (or None each) to write the curves into.
    The margins are judged block by block while each block of the response is in the CPU
    cache (:func:`filters.engine.response_blocks`).

    ``metrics=False`` is the pass/fail-and-margins path: no metrics (``metrics`` is
    empty), no phase or delay unless the mask or ``phase``/``delay`` asks for them, and
    without ``out`` no curves at all (``response`` is None; memory is a few blocks of
    rows). Its margins equal the full path's bit for bit.

    Parameters
    ----------
    prep : Prepared
        From :func:`prepare`.
    values : np.ndarray
        (S, P) part values in SI units (ohm, F, H; an op-amp's gain-bandwidth in Hz).
    phase : bool
        Compute the phase (deg).
    delay : bool
        Compute the group delay (s).
    out : tuple, optional
        ``(gain_db, phase, delay)`` arrays (S, F) to write the curves into (None each).
    metrics : bool
        Compute the metrics (False: pass/fail and margins only).

    Returns
    -------
    Evaluated
        Response (S, F) or None, metrics name -> (S,), margins (S, spans).
    """
    need_phase, need_delay = needs(prep.design.mask)
    want_phase, want_delay = phase or need_phase, delay or need_delay
    s, f = values.shape[0], prep.freqs_hz.size
    o = out or (None, None, None)
    gain, ph, tau = o[0], o[1] if want_phase else None, o[2] if want_delay else None
    if metrics:  # the metrics read the whole curves: keep them
        gain = np.empty((s, f)) if gain is None else gain
        ph = np.empty((s, f)) if want_phase and ph is None else ph
        tau = np.empty((s, f)) if want_delay and tau is None else tau
    marg = np.empty((s, len(prep.plans)))
    # Extreme but valid designs may overflow or underflow in places (a gain of 1e-320);
    # such numbers become inf or 0 and are reported as missing, never as warnings mid-run.
    with np.errstate(divide="ignore", over="ignore", invalid="ignore", under="ignore"):
        coeffs = stage_coefficients(prep.circuit, values, prep.w_refs)
        a = prep.design.analysis
        # a low-pass's cutoff reads the grid twice (its peak, the last point above the level):
        # read each block while it is in the CPU cache, not the whole (S, F) gain afterwards
        level = lowpass_level_db(coeffs, a.cutoff_db) if metrics and prep.circuit.kind == "lowpass" else None
        if level is not None:
            scan = GridScan(np.empty(s, dtype=np.intp), np.empty(s, dtype=np.intp), np.empty(s, dtype=bool))
        # without gain curves to keep, the gain is judged as a power ratio (the same margins)
        for lo, hi, block in response_blocks(prep.circuit, coeffs, prep.freqs_hz, phase=want_phase,
                                             delay=want_delay, out_gain_db=gain, out_phase=ph,
                                             out_delay=tau, power=gain is None):
            marg[lo:hi] = margins(prep.plans, block)
            if level is not None:
                scan.peak[lo:hi], scan.edge[lo:hi], scan.found[lo:hi] = scan_block(block.gain_db, level[lo:hi])
        resp = None if gain is None else Response(prep.freqs_hz, gain, ph, tau)
        if not metrics:
            return Evaluated(resp, {}, marg)
        assert resp is not None
        m = _metrics_for(prep.circuit, coeffs, resp, a.cutoff_db, a.attenuation_hz,
                         scan if level is not None else None)
        return Evaluated(resp, m, marg)


def evaluate(design: Design, *, samples: int | None = None, seed: int | None = None,
             method: str | None = None, grades: Sequence[Grade] | None = None,
             curves: bool = True, phase: bool = True, delay: bool = False,
             metrics: bool = True, extra_freqs: Sequence[float] = (), chunk: int | None = None, start: int = 0,
             prepared: Prepared | None = None,
             progress: Callable[[int, int], None] | None = None,
             should_stop: Callable[[], bool] | None = None,
             conditions: Conditions | None = None) -> Ensemble:
    """Evaluate ``samples`` boards of ``design`` (defaults from its analysis settings).

    ``grades`` overrides each part's grade (same order as ``design.parts``), which is how a
    tolerance slider or a candidate recommendation is tried on the same boards.
    ``start`` skips that many boards of the seed's sequence (for adding batches).
    ``conditions`` replaces the analysis' board conditions (one judged temperature, a
    service life: :mod:`filters.temperature`); the boards' scores stay the same.
    ``metrics=False`` judges pass/fail and margins only (what a recommendation reads): the
    ensemble's ``metrics`` is empty, the margins are the full path's bit for bit, and with
    ``curves=False`` no (S, F) array is made at all.
    ``progress(done, total)`` is called after each chunk; ``should_stop()`` returning True
    raises :class:`Cancelled`: it is asked after each chunk and every :data:`STOP_POLL_S`
    while a chunk is awaited; chunks still running then skip the rest of their work.

    Parameters
    ----------
    design : Design
        The design.
    samples : int, optional
        Number of boards (default: the design's ``analysis.samples``).
    seed : int, optional
        Seed of the boards (default: the design's).
    method : str, optional
        Sampling method, ``"random"`` or ``"sobol"`` (default: the design's).
    grades : sequence of Grade, optional
        One grade per part (design order) in place of the design's.
    curves : bool
        Keep the responses (S, F).
    phase : bool
        Compute the phase (deg).
    delay : bool
        Compute the group delay (s).
    metrics : bool
        Compute the metrics (False: pass/fail and margins only).
    extra_freqs : sequence of float
        More frequencies for the grid, in Hz.
    chunk : int, optional
        Boards per chunk (default: :func:`chunk_size`).
    start : int
        Index of the first board in the seed's sequence.
    prepared : Prepared, optional
        A :func:`prepare` of ``design`` to reuse.
    progress : callable, optional
        ``progress(done, total)`` with counts of boards.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.
    conditions : Conditions, optional
        Board conditions in place of the analysis' own.

    Returns
    -------
    Ensemble
        Part values (S, P), pass/fail (S,), margins (S, spans), metrics name -> (S,) and,
        with ``curves``, the responses (S, F).
    """
    a = design.analysis
    n = a.samples if samples is None else int(samples)
    seed = a.seed if seed is None else int(seed)
    method = a.method if method is None else method
    grade_list = tuple(grades) if grades is not None else design.part_grades()
    cond = a.conditions if conditions is None else conditions
    prep = prepared if prepared is not None else prepare(design, extra_freqs)
    freqs = prep.freqs_hz
    nominal_values = prep.nominal.values
    n_parts = len(design.parts)

    scores = scores_for(design, n, seed, method, start) if n * n_parts <= 4_000_000 else None
    values = np.empty((n, n_parts))
    f = freqs.size
    gain_db = np.empty((n, f)) if curves else None
    phase_deg = np.empty((n, f)) if curves and phase else None
    delay_s = np.empty((n, f)) if curves and delay else None
    marg = np.empty((n, len(prep.plans)))
    spread = {q: np.empty((n, f)) for q in match_quantities(design)} if curves else {}
    columns: dict[str, np.ndarray] = {}  # metric name -> (n,)

    stopped = threading.Event()  # set when the caller stops: chunks not yet done skip their work

    def work(lo: int, hi: int) -> tuple[int, int, dict[str, np.ndarray]]:
        if stopped.is_set():
            return lo, hi, {}
        sc = scores[lo:hi] if scores is not None else draw_scores(
            seed, n_parts, start + lo, start + hi, method)  # type: ignore[arg-type]
        every = sample_values(design, nominal_values, grade_list, sc, cond, seed, method, start + lo)
        vals = every[0]  # (S, P): channel 1, the board's only channel without channels
        values[lo:hi] = vals
        if stopped.is_set():
            return lo, hi, {}
        # curves go straight into the result arrays
        out = (None if gain_db is None else gain_db[lo:hi],
               None if phase_deg is None else phase_deg[lo:hi],
               None if delay_s is None else delay_s[lo:hi])
        scratch = None
        if gain_db is None and metrics and every.shape[0] == 1:
            # the metrics read a gain curve that is not kept: this thread's memory from its
            # last chunk, not fresh pages (a page fault per 4 kB, filters/engine.take_scratch)
            scratch, (g,) = take_scratch(1, hi - lo, f, "chunk gain")
            out = (g, None, None)
        try:  # evaluate_values without channels
            ev = evaluate_channels(prep, every, phase=curves and phase, delay=curves and delay, out=out,
                                   metrics=metrics, spread_out={q: a[lo:hi] for q, a in spread.items()})
        finally:
            if scratch is not None:
                give_scratch(scratch, "chunk gain")
        marg[lo:hi] = ev.margins
        return lo, hi, ev.metrics

    if chunk is None:
        chunk = chunk_size(n)
    bounds = [(lo, min(n, lo + chunk)) for lo in range(0, n, chunk)]
    done = 0
    window = WORKERS + 1  # chunks in flight at once (bounded memory): one queued keeps every thread busy
    pending: list = []

    def result_of(fut):
        """The chunk's result; while waiting, ``should_stop`` is asked every STOP_POLL_S."""
        if should_stop is None:
            return fut.result()
        while True:
            try:
                return fut.result(timeout=STOP_POLL_S)
            except FuturesTimeout:
                if should_stop():
                    raise Cancelled("evaluation cancelled") from None

    try:
        for b in bounds:
            pending.append(POOL.submit(work, *b))
            if len(pending) >= window:
                done = _collect(result_of(pending.pop(0)), columns, n, done, progress)
                if should_stop is not None and should_stop():
                    raise Cancelled("evaluation cancelled")
        while pending:
            done = _collect(result_of(pending.pop(0)), columns, n, done, progress)
            if pending and should_stop is not None and should_stop():
                raise Cancelled("evaluation cancelled")
    finally:
        # On a stop or an error: queued chunks are dropped and running ones return early;
        # their arrays belong to this call alone, so nothing waits for them.
        stopped.set()
        for p in pending:
            p.cancel()
    return Ensemble(design, grade_list, seed, method, start, values, freqs, gain_db, phase_deg,
                    delay_s, columns, marg, prep.nominal, spread)


def _collect(result: tuple, metrics: dict[str, np.ndarray], n: int, done: int, progress) -> int:
    lo, hi, m = result
    for k, v in m.items():
        arr = metrics.get(k)
        if arr is None:
            arr = metrics[k] = np.full(n, np.nan)
        arr[lo:hi] = v
    done += hi - lo
    if progress is not None:
        progress(done, n)
    return done
