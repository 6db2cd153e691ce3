"""Rare failures: a yield near 100 % estimated from thousands of boards, not millions.

Plain Monte Carlo needs about 3,000 boards without a failure to show 99.9 % at 95 %
confidence, and about 4 million to estimate a failure rate of 1e-4 within 20 %. This
module estimates the failure rate by **importance sampling** in the space of standard
normal scores that every board is drawn from (:mod:`filters.sampling`): the boards are
drawn around the most likely failure points instead of around the nominal design, and each
board's failure counts with the weight ``w = phi(z) / q(z)`` (the ratio of the true score
density to the one sampled from), so the estimate stays unbiased.

How the failure points are found (tests/REFERENCES.md section 15):

1. The linear model of every span's margin: ``m_j(z) ~ m_j(0) + g_j . z``, with ``g_j`` by
   central differences of one score unit. Its most likely failure point is
   ``z_j = -m_j(0) g_j / |g_j|^2`` at ``beta_j = m_j(0) / |g_j|`` standard deviations.
2. A line search finds where the real margin reaches 0 along that direction; then the
   direction is turned to the limit's normal at the point found (the condition a most likely
   point satisfies) and searched again, a few times, keeping the nearest point. The line
   search, not the gradient alone, places the point, so parts that saturate at their
   tolerance limits (truncated distributions) do not stall it.
3. The boards are drawn from a mixture: a unit normal around each span's point, weighted
   by ``Phi(-beta_j)``, and one tenth of the boards around the nominal design ("defensive
   mixture", which bounds every weight by 10 and keeps the estimate honest when a failure
   region was missed).

The interval is the normal interval of the weighted mean (the estimate's standard error
from the weights' spread). The number of plain boards that would give the same interval is
``p (1 - p) / se^2``. When no sampled board fails, no rate is claimed: the caller falls back
to the plain interval.

Caution: the estimate is only as good as the model of the parts (distribution, tolerance,
temperature range); it says how rare a failure is among boards built from parts as modelled,
to be confirmed by measurement of real parts and qualified review.

Everything is vectorized over boards; the only Python loops run over refinement steps and
batches.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable, Sequence

import numpy as np

from .errors import InputError
from .lazyimport import LazyModule

__all__ = [
    "MarginFunction",
    "FailurePoint",
    "RareEstimate",
    "linear_model",
    "failure_points",
    "importance_estimate",
    "design_margin_function",
    "RARE_TRIGGER",
    "not_estimable",
    "estimate_for",
]

special = LazyModule("scipy.special")

#: Margin function: standard normal scores (S, D) -> margins (S, J), >= 0 where a span passes.
MarginFunction = Callable[[np.ndarray], np.ndarray]

DEFENSIVE_SHARE = 0.1   # share of boards drawn around the nominal design
STEP = 1.0              # finite-difference step in score units
REFINE_STEPS = 3        # direction refinements per failure point
LINE_POINTS = 48        # points of the line search along a direction
BISECTIONS = 12         # bisection steps on the limit (1e-4 of MAX_BETA / LINE_POINTS)
MAX_BETA = 12.0         # farther points than this (failure rate < 1e-32) are not sampled


@dataclass(frozen=True)
class FailurePoint:
    """The most likely failure point of one span.

    ``span`` the span's index (column of the margins); ``z`` the point, shape (D,), in
    standard normal scores; ``beta`` its distance from the nominal design (score units);
    ``linear_rate`` the first-order failure rate ``Phi(-beta)`` (a fraction).
    """

    span: int
    z: np.ndarray
    beta: float

    @property
    def linear_rate(self) -> float:
        return float(special.ndtr(-self.beta))


@dataclass(frozen=True)
class RareEstimate:
    """A failure rate estimated by importance sampling, and what it is worth.

    Fractions in [0, 1]. ``failure_rate`` with its two-sided interval ``low``..``high`` at
    ``confidence``; ``boards`` sampled, of which ``failing`` failed; ``plain_equivalent``
    the number of plain Monte Carlo boards for the same interval; ``points`` the failure
    points the boards were drawn around; ``method`` says which estimator gave the number.
    """

    failure_rate: float
    low: float
    high: float
    confidence: float
    boards: int
    failing: int
    standard_error: float
    plain_equivalent: float
    points: list[FailurePoint] = field(default_factory=list)
    method: str = "importance sampling"

    @property
    def yield_estimate(self) -> float:
        """1 - the failure rate."""
        return 1.0 - self.failure_rate

    @property
    def relative_half_width(self) -> float:
        """Half the interval's width over the rate (inf when the rate is 0)."""
        return (self.high - self.low) / 2 / self.failure_rate if self.failure_rate > 0 else math.inf

    def to_dict(self) -> dict:
        """Plain numbers for the JSON output (fractions, counts)."""
        return {"method": self.method, "failure_rate": self.failure_rate,
                "yield": self.yield_estimate, "low_yield": 1 - self.high, "high_yield": 1 - self.low,
                "confidence": self.confidence, "boards": self.boards, "failing_boards": self.failing,
                "standard_error": self.standard_error,
                "plain_boards_for_same_interval": self.plain_equivalent,
                "failure_points": [{"span": p.span, "beta": p.beta} for p in self.points]}


def linear_model(fn: MarginFunction, dims: int, at: np.ndarray | None = None,
                 step: float = STEP) -> tuple[np.ndarray, np.ndarray]:
    """Margins and their gradients at score points by central differences.

    Parameters
    ----------
    fn : MarginFunction
        Scores (S, D) -> margins (S, J).
    dims : int
        D, the number of score columns.
    at : ndarray, shape (K, D), optional
        The points (default: the nominal design, one row of zeros).
    step : float
        Difference step in score units.

    Returns
    -------
    m0 : ndarray, shape (K, J)
        Margins at the points.
    grad : ndarray, shape (K, J, D)
        d margin / d score at the points.
    """
    pts = np.zeros((1, dims)) if at is None else np.atleast_2d(np.asarray(at, dtype=float))
    k = pts.shape[0]
    eye = np.eye(dims) * step
    rows = np.concatenate([pts, (pts[:, None, :] + eye).reshape(-1, dims),
                           (pts[:, None, :] - eye).reshape(-1, dims)])
    m = fn(rows)
    j = m.shape[1]
    m0 = m[:k]
    up = m[k:k + k * dims].reshape(k, dims, j)
    down = m[k + k * dims:].reshape(k, dims, j)
    grad = np.transpose((up - down) / (2 * step), (0, 2, 1))
    return m0, grad


def _limit_along(fn: MarginFunction, dirs: np.ndarray) -> np.ndarray:
    """Distance t (J,) from the nominal design along each unit direction ``dirs`` (J, D) to the
    first point where span j's margin reaches 0; inf when it does not within MAX_BETA."""
    n_spans, dims = dirs.shape
    ts = np.linspace(MAX_BETA / LINE_POINTS, MAX_BETA, LINE_POINTS)
    m = fn((ts[None, :, None] * dirs[:, None, :]).reshape(-1, dims))
    m = m.reshape(n_spans, LINE_POINTS, -1)[np.arange(n_spans), :, np.arange(n_spans)]  # (J, T)
    below = m <= 0
    found = below.any(axis=1)
    first = np.argmax(below, axis=1)
    hi = np.where(found, ts[first], np.inf)
    lo = np.where(found & (first > 0), ts[np.maximum(first - 1, 0)], 0.0)
    rows = np.arange(n_spans)
    for _ in range(BISECTIONS):  # the span's margin is >= 0 at lo and < 0 at hi
        mid = np.where(found, (lo + hi) / 2, 0.0)
        mm = fn(mid[:, None] * dirs)[rows, rows]
        lo, hi = np.where(mm > 0, mid, lo), np.where(mm > 0, hi, mid)
    return np.where(found, hi, np.inf)


def failure_points(fn: MarginFunction, dims: int, *, steps: int = REFINE_STEPS) -> list[FailurePoint]:
    """The most likely failure point of each span that can fail (see the module's text).

    Each span's point lies on its limit (margin 0) along a direction from the nominal design:
    first the steepest descent of its linear model, then the limit's normal at the point found
    (the condition of the most likely point of a smooth limit). A line search along each
    direction finds the limit, so parts whose values saturate at their tolerance limits
    (truncated distributions) do not stall the search.

    Parameters
    ----------
    fn : MarginFunction
        The margin function, as for :func:`linear_model`.
    dims : int
        The number of score columns, as for :func:`linear_model`.
    steps : int
        Refinement steps after the first direction.

    Returns
    -------
    list of FailurePoint
        One per span whose margin reaches zero within :data:`MAX_BETA` score units of the
        nominal design; spans that cannot fail that way are left out. Empty when the nominal
        design already fails a span.
    """
    m0, grad = linear_model(fn, dims)
    m0, grad = m0[0], grad[0]
    if np.any(m0 < 0):
        return []
    n_spans = m0.size
    rows = np.arange(n_spans)
    best_t = np.full(n_spans, np.inf)
    best_dir = np.zeros((n_spans, dims))
    g = grad
    for _ in range(steps + 1):
        norm = np.linalg.norm(g, axis=1)
        ok = norm > 1e-15
        if not ok.any():
            break
        dirs = np.where(ok[:, None], -g / np.where(ok, norm, 1.0)[:, None], 0.0)
        t = np.where(ok, _limit_along(fn, dirs), np.inf)
        better = t < best_t
        best_t = np.where(better, t, best_t)
        best_dir = np.where(better[:, None], dirs, best_dir)
        if not np.isfinite(t).any():
            break
        # the limit's normal at each point found: the next direction
        _, g_all = linear_model(fn, dims, at=np.where(np.isfinite(t), t, 0.0)[:, None] * dirs,
                                step=STEP / 4)
        g = np.where(np.isfinite(t)[:, None], g_all[rows, rows], 0.0)
    return [FailurePoint(int(j), best_t[j] * best_dir[j], float(best_t[j]))
            for j in np.flatnonzero(np.isfinite(best_t))]


def _mixture(points: Sequence[FailurePoint], dims: int) -> tuple[np.ndarray, np.ndarray]:
    """Centres (K, D) and weights (K,) of the sampling mixture, the nominal design first."""
    centres = np.zeros((1 + len(points), dims))
    rates = np.array([p.linear_rate for p in points])
    weights = np.empty(1 + len(points))
    weights[0] = DEFENSIVE_SHARE if points else 1.0
    if points:
        centres[1:] = np.array([p.z for p in points])
        rates = np.maximum(rates, 1e-300)
        weights[1:] = (1 - DEFENSIVE_SHARE) * rates / rates.sum()
    return centres, weights


def _log_weights(z: np.ndarray, centres: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """log(phi(z) / q(z)) for the mixture q, shape (S,)."""
    # log q/phi = log sum_k a_k exp(z . mu_k - |mu_k|^2 / 2)
    expo = z @ centres.T - 0.5 * np.einsum("kd,kd->k", centres, centres)
    return -special.logsumexp(expo, b=weights, axis=1)


def importance_estimate(fn: MarginFunction, dims: int, *, seed: int, confidence: float = 0.95,
                        rel_half_width: float = 0.2, batch: int = 10_000, max_boards: int = 200_000,
                        points: Sequence[FailurePoint] | None = None,
                        should_stop: Callable[[], bool] | None = None) -> RareEstimate:
    """Failure rate by mixture importance sampling, batches until the interval is narrow.

    Parameters
    ----------
    fn : MarginFunction
        Scores (S, D) -> margins (S, J); a board fails when any margin is below 0.
    dims : int
        D, the number of score columns.
    seed : int
        Seed of the importance draws (the same seed gives the same estimate).
    confidence : float
        Two-sided confidence of the interval, a fraction (0.95).
    rel_half_width : float
        Stop when the interval's half-width is at most this fraction of the rate.
    batch, max_boards : int
        Boards per batch and at most in all.
    points : list of FailurePoint, optional
        The failure points (default: :func:`failure_points`).
    should_stop : callable, optional
        Asked between batches; True stops with the boards so far.

    Returns
    -------
    RareEstimate
        The rate with its interval; ``failing`` 0 means no sampled board failed and no rate is
        claimed (the interval is then [0, 0]; use the plain interval instead).
    """
    if not 0 < confidence < 1:
        raise InputError(f"confidence must be between 0 and 1, got {confidence!r}", "confidence")
    if batch < 2 or max_boards < batch:
        raise InputError("importance sampling needs a batch of at least 2 boards and max_boards >= batch",
                         "batch")
    pts = list(failure_points(fn, dims) if points is None else points)
    centres, weights = _mixture(pts, dims)
    rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=(0x5EA,))))
    zq = float(special.ndtri(0.5 + confidence / 2))
    total = total2 = 0.0
    n = failing = 0
    while n < max_boards:
        m = min(batch, max_boards - n)
        comp = rng.choice(len(weights), size=m, p=weights)
        z = centres[comp] + rng.standard_normal((m, dims))
        fails = np.any(fn(z) < 0, axis=1)
        wf = np.where(fails, np.exp(_log_weights(z, centres, weights)), 0.0)
        total += float(wf.sum())
        total2 += float(np.dot(wf, wf))
        n += m
        failing += int(fails.sum())
        p = total / n
        var = max(total2 / n - p * p, 0.0) / n
        if failing >= 10 and p > 0 and zq * math.sqrt(var) <= rel_half_width * p:
            break
        if should_stop is not None and should_stop():
            break
    p = total / n
    se = math.sqrt(max(total2 / n - p * p, 0.0) / n)
    low, high = max(0.0, p - zq * se), min(1.0, p + zq * se)
    plain = p * (1 - p) / se**2 if se > 0 else math.inf
    return RareEstimate(p, low, high, confidence, n, failing, se, plain, pts)


def design_margin_function(prepared, grades, conditions, temperatures: Sequence[float] = ()) -> MarginFunction:
    """The margin function of a prepared design with given grades (the pass/fail path).

    Parameters
    ----------
    prepared : filters.evaluate.Prepared
        The compiled design, grid and mask plans.
    grades : sequence of Grade
        One grade per part, in the design's order.
    conditions : filters.sampling.Conditions
        Temperature range and lot share.
    temperatures : sequence of float
        Judged temperatures (deg C) of an operating range; each board's margin is then its
        worst over them, as :func:`filters.temperature.judge_over_range` judges it. Empty:
        at ``conditions`` only.

    Returns
    -------
    MarginFunction
        Scores (S, 4P + 1) -> margins (S, spans) in each span's unit, judged exactly as the
        plain evaluation judges boards (:func:`filters.evaluate.evaluate_values`).
    """
    from .evaluate import evaluate_values
    from .sampling import part_values

    nominal = prepared.nominal.values
    grade_list = tuple(grades)

    every = [replace(conditions, temp_low_c=t, temp_high_c=t) for t in temperatures] or [conditions]

    def fn(z: np.ndarray) -> np.ndarray:
        out = np.empty((z.shape[0], len(prepared.plans)))
        for lo in range(0, z.shape[0], 4096):  # blocks of boards bound the memory
            worst = None
            for cond in every:  # a handful of judged temperatures, each over all the block's boards
                vals = part_values(nominal, grade_list, z[lo:lo + 4096], cond)
                m = evaluate_values(prepared, vals, metrics=False).margins
                worst = m if worst is None else np.minimum(worst, m)
            out[lo:lo + 4096] = worst
        return out

    return fn


RARE_TRIGGER = 10  # fewer failing boards than this in a plain run: the automatic choice estimates by importance


def not_estimable(design) -> str:
    """Why the importance estimate cannot be made for ``design`` ("" when it can).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    str
        A plain reason: no mask, resistor networks or several channels (their shared errors
        are drawn outside the scores this estimator shifts); empty when the estimate applies.
        Over an operating range each board is judged at every judged temperature.
    """
    if not design.mask:
        return "the design has no spec mask"
    if getattr(design, "networks", ()):
        return "the design has resistor networks (plain sampling only, for now)"
    channels = getattr(design, "channels", None)
    if channels is not None and getattr(channels, "count", 1) > 1:
        return "the design has several channels (plain sampling only, for now)"
    return ""


def estimate_for(design, prepared, grades, *, seed: int, confidence: float,
                 should_stop: Callable[[], bool] | None = None) -> RareEstimate:
    """The importance estimate of ``design``'s failure rate with ``grades`` (see the module).

    Parameters
    ----------
    design : Design
        A design for which :func:`not_estimable` is empty.
    prepared : filters.evaluate.Prepared
        Its prepared evaluation.
    grades : sequence of Grade
        One grade per part.
    seed : int
        The analysis seed (the importance draws take their own stream from it).
    confidence : float
        Two-sided confidence of the interval (fraction).
    should_stop : callable, optional
        Asked between batches.

    Returns
    -------
    RareEstimate
    """
    from .sampling import columns
    from .temperature_settings import judged_temperatures

    fn = design_margin_function(prepared, grades, design.analysis.conditions,
                                judged_temperatures(design.analysis))
    return importance_estimate(fn, columns(len(design.parts)), seed=seed, confidence=confidence,
                               should_stop=should_stop)
