"""One evaluation of a design: sample part values, compute responses and metrics.

:func:`evaluate` returns an :class:`Ensemble` (arrays shaped (samples, ...)) plus the
nominal design's response and metrics. Work runs in chunks of samples on a small thread
pool (numpy releases the GIL inside its loops), which keeps temporaries in cache and uses
both cores; results do not depend on the chunking. With ``curves=False`` only per-sample
metrics are kept, so memory stays bounded for very large sample counts.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from .design import Design
from .engine import Circuit, Response, compile_design, frequency_response, stage_coefficients
from .errors import Cancelled
from .grades import Grade
from .mask import edge_frequencies
from .metrics import cutoff_metrics, stage_metrics
from .sampling import draw_scores, part_values

CHUNK = 1024
WORKERS = max(1, min(4, os.cpu_count() or 1))
_POOL = ThreadPoolExecutor(max_workers=WORKERS, thread_name_prefix="tolspread")
_SCORES: dict[tuple, np.ndarray] = {}


def frequency_grid(design: Design, extra: Sequence[float] = ()) -> np.ndarray:
    """Log-spaced grid (Hz) over the analysed range, holding every mask edge and ``extra``."""
    a = design.analysis
    grid = np.geomspace(a.f_start, a.f_stop, a.points)
    keep = [grid, edge_frequencies(design.mask), np.asarray(extra, dtype=float)]
    return np.unique(np.concatenate(keep))


def scores_for(design: Design, samples: int, seed: int, method: str, start: int = 0) -> np.ndarray:
    """Standard scores for samples ``[start, start + samples)`` (cached for repeated use)."""
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
class Nominal:
    """The nominal design (every part at its marked value)."""

    values: np.ndarray          # (parts,)
    response: Response          # arrays shaped (1, F)
    metrics: dict[str, float]


@dataclass(frozen=True)
class Ensemble:
    """Sampled boards. ``values`` (S, P) in SI units; ``gain_db``, ``phase_deg`` (continuous
    across frequency) and ``delay_s`` (group delay) shaped (S, F), or None when curves
    were not kept; ``metrics`` name -> (S,); ``extras`` what a chunk hook added."""

    design: Design
    grades: tuple[Grade, ...]
    seed: int
    method: str
    values: np.ndarray
    freqs_hz: np.ndarray
    gain_db: np.ndarray | None
    phase_deg: np.ndarray | None
    delay_s: np.ndarray | None
    metrics: dict[str, np.ndarray]
    nominal: Nominal
    extras: dict[str, np.ndarray] = field(default_factory=dict)

    @property
    def samples(self) -> int:
        return int(self.values.shape[0])


def _metrics_for(circuit: Circuit, coeffs, resp: Response, cutoff_db: float) -> dict[str, np.ndarray]:
    m = cutoff_metrics(circuit, coeffs, resp, cutoff_db)
    m.update(stage_metrics(circuit, coeffs))
    return m


ChunkHook = Callable[[Circuit, list, Response, dict[str, np.ndarray]], dict[str, np.ndarray]]


def evaluate(design: Design, *, samples: int | None = None, seed: int | None = None,
             method: str | None = None, grades: Sequence[Grade] | None = None,
             curves: bool = True, phase: bool = True, delay: bool = False,
             extra_freqs: Sequence[float] = (), chunk: int = CHUNK, start: int = 0,
             hook: ChunkHook | None = None,
             progress: Callable[[int, int], None] | None = None,
             should_stop: Callable[[], bool] | None = None) -> Ensemble:
    """Evaluate ``samples`` boards of ``design`` (defaults from its analysis settings).

    ``grades`` overrides each part's grade (same order as ``design.parts``), which is how a
    tolerance slider or a candidate recommendation is tried on the same boards.
    ``hook(circuit, coeffs, response, metrics)`` runs per chunk and returns more per-sample
    arrays (for example pass/fail against a mask), gathered into ``Ensemble.extras``.
    ``progress(done, total)`` is called after each chunk; ``should_stop()`` returning True
    raises :class:`Cancelled` between chunks.
    """
    a = design.analysis
    n = a.samples if samples is None else int(samples)
    seed = a.seed if seed is None else int(seed)
    method = a.method if method is None else method
    cat = design.catalog
    grade_list = tuple(grades) if grades is not None else tuple(cat[p.grade] for p in design.parts)
    circuit = compile_design(design)
    freqs = frequency_grid(design, extra_freqs)
    nominal_values = np.array([p.value for p in design.parts])

    nom_coeffs = stage_coefficients(circuit, nominal_values[None, :])
    nom_resp = frequency_response(circuit, nom_coeffs, freqs, phase=True, delay=True)
    nom_m = _metrics_for(circuit, nom_coeffs, nom_resp, a.cutoff_db)
    if hook is not None:
        nom_m.update(hook(circuit, nom_coeffs, nom_resp, nom_m))
    nominal = Nominal(nominal_values, nom_resp, {k: float(v[0]) for k, v in nom_m.items()})

    scores = scores_for(design, n, seed, method, start) if n * len(design.parts) <= 4_000_000 else None
    values = np.empty((n, len(design.parts)))
    f = freqs.size
    gain_db = np.empty((n, f)) if curves else None
    phase_deg = np.empty((n, f)) if curves and phase else None
    delay_s = np.empty((n, f)) if curves and delay else None
    metrics: dict[str, np.ndarray] = {}
    extras: dict[str, np.ndarray] = {}

    def work(lo: int, hi: int) -> tuple[int, int, dict, dict]:
        sc = scores[lo:hi] if scores is not None else draw_scores(seed, len(design.parts), start + lo,
                                                                   start + hi, method)  # type: ignore[arg-type]
        vals = part_values(nominal_values, grade_list, sc, a.conditions)
        values[lo:hi] = vals
        coeffs = stage_coefficients(circuit, vals)
        resp = frequency_response(circuit, coeffs, freqs, phase=curves and phase, delay=delay)
        m = _metrics_for(circuit, coeffs, resp, a.cutoff_db)
        ex = hook(circuit, coeffs, resp, m) if hook is not None else {}
        if gain_db is not None:
            np.log10(np.maximum(resp.gain2, 1e-300), out=gain_db[lo:hi])
            gain_db[lo:hi] *= 10.0
        if phase_deg is not None and resp.phase_deg is not None:
            phase_deg[lo:hi] = resp.phase_deg
        if delay_s is not None and resp.delay_s is not None:
            delay_s[lo:hi] = resp.delay_s
        return lo, hi, m, ex

    bounds = [(lo, min(n, lo + chunk)) for lo in range(0, n, chunk)]
    done = 0
    window = 2 * WORKERS  # chunks in flight at once (bounded memory)
    pending = []
    it = iter(bounds)
    try:
        for b in it:
            pending.append(_POOL.submit(work, *b))
            if len(pending) >= window:
                done = _collect(pending.pop(0), metrics, extras, n, done, progress)
                if should_stop is not None and should_stop():
                    raise Cancelled("evaluation cancelled")
        while pending:
            done = _collect(pending.pop(0), metrics, extras, n, done, progress)
            if should_stop is not None and should_stop() and pending:
                raise Cancelled("evaluation cancelled")
    finally:
        for p in pending:
            p.cancel()
        for p in pending:
            if not p.cancelled():
                p.exception()
    return Ensemble(design, grade_list, seed, method, values, freqs, gain_db, phase_deg, delay_s,
                    metrics, nominal, extras)


def _collect(fut, metrics: dict, extras: dict, n: int, done: int, progress) -> int:
    lo, hi, m, ex = fut.result()
    for target, src in ((metrics, m), (extras, ex)):
        for k, v in src.items():
            arr = target.get(k)
            if arr is None:
                arr = target[k] = np.full(n, np.nan) if np.asarray(v).dtype.kind == "f" else np.zeros(
                    (n,) + np.shape(v)[1:], dtype=np.asarray(v).dtype)
            arr[lo:hi] = v
    done += hi - lo
    if progress is not None:
        progress(done, n)
    return done
