"""Confidence intervals for a yield estimated by Monte Carlo, and how many samples it needs.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

A yield is a binomial proportion: ``passed`` boards of ``samples`` meet the spec mask.
Every fraction here (yield, bound, half-width) is a plain fraction in [0, 1], not a
percentage; margins are in dB.

Two interval methods (tests/REFERENCES.md section 8):

* ``"wilson"`` - the Wilson (1927) score interval, without continuity correction;
* ``"exact"`` - the Clopper & Pearson (1934) interval from beta quantiles.

Single estimates go through ``scipy.stats.binomtest(k, n).proportion_ci``. The vectorized
:func:`binomial_interval` (used for planning and for many estimates at once) writes the
same intervals in closed form (Wilson) or through beta quantiles (Clopper-Pearson).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Literal, Sequence

import numpy as np

from .errors import Cancelled, InputError
from .lazyimport import LazyModule

__all__ = [
    "IntervalMethod",
    "INTERVAL_METHODS",
    "MAX_PLANNED_SAMPLES",
    "YieldEstimate",
    "SpanFailures",
    "binomial_interval",
    "yield_estimate",
    "lower_bound",
    "binomial_exact_zero_failures_upper",
    "samples_for_half_width",
    "samples_to_show",
    "smallest_meeting",
    "adaptive_yield",
    "failure_breakdown",
]

# imported on first use: scipy.stats (exact intervals, binomtest) takes about a second
special = LazyModule("scipy.special")
stats = LazyModule("scipy.stats")

IntervalMethod = Literal["wilson", "exact"]
INTERVAL_METHODS: tuple[str, ...] = ("wilson", "exact")

#: :func:`samples_for_half_width` refuses to plan beyond this many samples.
MAX_PLANNED_SAMPLES = 10**15


# --- results -------------------------------------------------------------------------------

def _ci_key(confidence: float) -> str:
    """``"ci95"`` for 0.95; ``"ci99.9"`` for 0.999 (a whole percentage drops its decimals)."""
    pct = confidence * 100.0
    whole = round(pct)
    if abs(pct - whole) < 1e-9:
        return f"ci{whole}"
    return f"ci{pct:.10g}"


@dataclass(frozen=True)
class YieldEstimate:
    """A yield with its two-sided confidence interval.

    ``passed`` of ``samples`` boards passed; ``estimate`` = passed / samples; ``low`` and
    ``high`` bound the yield (fractions in [0, 1]) at ``confidence`` (a fraction, 0.95 for
    95 %) by ``method`` (``"wilson"`` or ``"exact"``).
    """

    passed: int
    samples: int
    estimate: float
    low: float
    high: float
    confidence: float
    method: str

    @property
    def half_width(self) -> float:
        """Half the interval width, (high - low) / 2, as a fraction (0.01 = 1 percentage point)."""
        return (self.high - self.low) / 2.0

    def to_dict(self) -> dict:
        """Plain JSON-ready form. The interval is under ``f"ci{confidence in %}"``: always
        ``"ci95"`` at confidence 0.95, ``"ci99"`` at 0.99, ``"ci99.9"`` at 0.999."""
        return {
            "estimate": float(self.estimate),
            _ci_key(self.confidence): [float(self.low), float(self.high)],
            "method": self.method,
            "samples": int(self.samples),
            "passed": int(self.passed),
            "confidence": float(self.confidence),
        }


@dataclass(frozen=True)
class SpanFailures:
    """How often one span of the spec mask fails.

    ``failed`` boards fail this span; ``share_of_failures`` = failed / (boards failing any
    span), 0 when no board fails - shares of several spans can add to more than 1 because a
    board may fail several spans; ``fraction`` = failed / samples; ``worst_margin_db`` is the
    smallest margin (dB, negative = violation) of this span over all samples.
    """

    name: str
    failed: int
    share_of_failures: float
    fraction: float
    worst_margin_db: float

    def to_dict(self) -> dict:
        """Plain JSON-ready form with the same keys as the fields."""
        return {
            "name": self.name,
            "failed": int(self.failed),
            "share_of_failures": float(self.share_of_failures),
            "fraction": float(self.fraction),
            "worst_margin_db": float(self.worst_margin_db),
        }


# --- input checks --------------------------------------------------------------------------

def _check_confidence(confidence: object, path: str = "confidence") -> float:
    if isinstance(confidence, (bool, np.bool_)) or not isinstance(confidence, (int, float, np.integer, np.floating)):
        raise InputError(f"must be a number, not {confidence!r}", path)
    c = float(confidence)
    if not math.isfinite(c) or not 0.0 < c < 1.0:
        raise InputError(f"must be between 0 and 1 (exclusive), not {c:g}", path)
    return c


def _check_method(method: object) -> str:
    if method not in INTERVAL_METHODS:
        raise InputError(f"must be one of {', '.join(INTERVAL_METHODS)}, not {method!r}", "method")
    return str(method)


def _check_whole(value: object, path: str, lo: int) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
        raise InputError(f"must be a whole number, not {value!r}", path)
    v = int(value)
    if v < lo:
        raise InputError(f"must be at least {lo}, not {v}", path)
    return v


def _check_fraction(value: object, path: str, *, lo_open: bool, hi_open: bool) -> float:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise InputError(f"must be a number, not {value!r}", path)
    v = float(value)
    bad = (not math.isfinite(v) or (v <= 0.0 if lo_open else v < 0.0) or (v >= 1.0 if hi_open else v > 1.0))
    if bad:
        lo_s = "above 0" if lo_open else "at least 0"
        hi_s = "below 1" if hi_open else "at most 1"
        raise InputError(f"must be {lo_s} and {hi_s}, not {v:g}", path)
    return v


def _counts(passed: object, samples: object) -> tuple[int, int]:
    """(k, n) from a count and a sample count, or from a boolean pass array."""
    if isinstance(passed, (int, np.integer)) and not isinstance(passed, (bool, np.bool_)):
        if samples is None:
            raise InputError("is needed when passed is a count", "samples")
        n = _check_whole(samples, "samples", 1)
        k = int(passed)
        if not 0 <= k <= n:
            raise InputError(f"must be between 0 and samples ({n}), not {k}", "passed")
        return k, n
    if isinstance(passed, (bool, np.bool_)):
        raise InputError("must be a count or a boolean pass array, not a single bool", "passed")
    arr = np.asarray(passed)
    if arr.dtype != np.bool_ or arr.ndim != 1:
        raise InputError(f"must be a count or a 1-D boolean pass array, not {arr.dtype} of shape {arr.shape}",
                         "passed")
    if arr.size == 0:
        raise InputError("must hold at least one sample", "passed")
    if samples is not None and _check_whole(samples, "samples", 1) != arr.size:
        raise InputError(f"must equal the length of the pass array ({arr.size}), not {samples}", "samples")
    return int(np.count_nonzero(arr)), int(arr.size)


# --- intervals -----------------------------------------------------------------------------

def binomial_interval(passed: np.ndarray | float, samples: np.ndarray | float, confidence: float = 0.95,
                      method: IntervalMethod = "wilson") -> tuple[np.ndarray, np.ndarray]:
    """Vectorized two-sided interval (low, high) for the proportion ``passed / samples``.

    Arrays broadcast. ``passed`` may be fractional (``p * n`` when planning): both
    formulas extend continuously, and for whole counts they give scipy's intervals.
    Wilson: centre (2k + z^2) / (2(n + z^2)), half-width z sqrt(4k(1 - k/n) + z^2) / (2(n + z^2)),
    z the normal quantile at (1 + confidence) / 2. Clopper-Pearson: low = Beta(k, n - k + 1)
    quantile at alpha/2, high = Beta(k + 1, n - k) quantile at 1 - alpha/2, alpha = 1 - confidence.
    Both put low = 0 at k = 0 and high = 1 at k = n. No input checks beyond confidence and method.

    Parameters
    ----------
    passed : np.ndarray or float
        Passing boards (counts; fractional allowed when planning).
    samples : np.ndarray or float
        Boards evaluated, broadcast with ``passed``.
    confidence : float
        Two-sided confidence, a fraction in (0, 1).
    method : str
        ``"wilson"`` or ``"exact"`` (Clopper-Pearson).

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        (low, high) yield fractions, of the broadcast shape.
    """
    c = _check_confidence(confidence)
    m = _check_method(method)
    k, n = np.broadcast_arrays(np.asarray(passed, dtype=float), np.asarray(samples, dtype=float))
    at_zero = k <= 0.0
    at_all = k >= n
    if m == "wilson":
        z = float(special.ndtri(0.5 + 0.5 * c))
        denom = 2.0 * (n + z * z)
        center = (2.0 * k + z * z) / denom
        inner = np.maximum(4.0 * k * (1.0 - k / n) + z * z, 0.0)
        delta = z * np.sqrt(inner) / denom
        low = center - delta
        high = center + delta
    else:
        alpha = 1.0 - c
        # keep the shape parameters positive at the edges; those entries are replaced below
        a_lo = np.where(at_zero, 1.0, k)
        b_hi = np.where(at_all, 1.0, n - k)
        low = stats.beta.ppf(alpha / 2.0, a_lo, n - k + 1.0)
        high = stats.beta.isf(alpha / 2.0, k + 1.0, b_hi)
    low = np.where(at_zero, 0.0, np.clip(low, 0.0, 1.0))
    high = np.where(at_all, 1.0, np.clip(high, 0.0, 1.0))
    return low, high


def yield_estimate(passed: int | np.ndarray, samples: int | None = None, confidence: float = 0.95,
                   method: IntervalMethod = "wilson") -> YieldEstimate:
    """The yield of ``passed`` boards of ``samples`` with its two-sided interval.

    ``passed`` is a count (then ``samples`` is required) or a 1-D boolean pass array (then
    ``samples``, if given, must equal its length). ``confidence`` is a fraction in (0, 1).
    The interval is ``scipy.stats.binomtest(passed, samples).proportion_ci``; k = 0 and
    k = n are allowed. Raises :class:`InputError` with path ``passed``, ``samples``,
    ``confidence`` or ``method``.

    Parameters
    ----------
    passed : int or np.ndarray
        Passing boards: a count, or an (S,) bool pass array.
    samples : int, optional
        Boards evaluated (required with a count).
    confidence : float
        Two-sided confidence, a fraction in (0, 1).
    method : str
        ``"wilson"`` or ``"exact"``.

    Returns
    -------
    YieldEstimate
        Estimate, low and high (fractions), counts and the method.
    """
    k, n = _counts(passed, samples)
    c = _check_confidence(confidence)
    m = _check_method(method)
    if m == "wilson":  # scipy's formula without building a test (its p-value is not needed)
        low, high = _wilson(k, n, float(special.ndtri(0.5 + 0.5 * c)))
    else:
        ci = stats.binomtest(k, n).proportion_ci(confidence_level=c, method=m)
        low, high = float(ci.low), float(ci.high)
    low = 0.0 if k == 0 else low
    high = 1.0 if k == n else high
    return YieldEstimate(passed=k, samples=n, estimate=k / n, low=low, high=high, confidence=c, method=m)


def lower_bound(passed: int | np.ndarray, samples: int | None, confidence: float = 0.95,
                method: IntervalMethod = "wilson", one_sided: bool = True) -> float:
    """Lower confidence bound on the yield (a fraction).

    One-sided (default): the yield is at least this with probability ``confidence``; it is
    the lower end of the two-sided interval at level 2 * confidence - 1, computed as
    ``scipy.stats.binomtest(k, n, alternative="greater").proportion_ci(confidence)``. Use it
    for "the lower confidence bound of the yield meets the target". With ``one_sided=False``
    it is the lower end of the two-sided interval at ``confidence``.

    Parameters
    ----------
    passed : int or np.ndarray
        Passing boards: a count, or an (S,) bool pass array.
    samples : int or None
        Boards evaluated (None with a pass array).
    confidence : float
        Confidence, a fraction in (0, 1).
    method : str
        ``"wilson"`` or ``"exact"``.
    one_sided : bool
        One-sided bound (default) or the low end of the two-sided interval.

    Returns
    -------
    float
        The lower bound, a fraction in [0, 1].
    """
    k, n = _counts(passed, samples)
    c = _check_confidence(confidence)
    m = _check_method(method)
    if not one_sided:
        return yield_estimate(k, n, c, m).low
    if k == 0:
        return 0.0
    if m == "wilson":
        return _wilson(k, n, float(special.ndtri(c)))[0]
    ci = stats.binomtest(k, n, alternative="greater").proportion_ci(confidence_level=c, method=m)
    return float(ci.low)


def _wilson(k: int, n: int, z: float) -> tuple[float, float]:
    """Wilson score interval (low, high) of k of n at normal quantile ``z``, written as
    ``scipy.stats.binomtest(...).proportion_ci(method="wilson")`` computes it (Newcombe
    1998), operation for operation, so the numbers are scipy's bit for bit (a test checks)
    without the cost of building a test and its p-value. The edges k = 0 and k = n are
    the callers'."""
    p = k / n
    denom = 2 * (n + z**2)
    center = (2 * n * p + z**2) / denom
    delta = z / denom * math.sqrt(4 * n * p * (1 - p) + z**2)
    return center - delta, center + delta


def binomial_exact_zero_failures_upper(n: int, confidence: float = 0.95) -> float:
    """Exact one-sided upper bound on the failure fraction when none of ``n`` boards fails.

    1 - (1 - confidence)^(1/n) (tests/REFERENCES.md section 8 [D]); about 3/n at 95 % (rule of three).

    Parameters
    ----------
    n : int
        Boards evaluated, none failing.
    confidence : float
        Confidence, a fraction in (0, 1).

    Returns
    -------
    float
        Upper bound on the failure fraction.
    """
    nn = _check_whole(n, "n", 1)
    c = _check_confidence(confidence)
    return float(-math.expm1(math.log1p(-c) / nn))


def _half_width_at(n: int, p: float, confidence: float, method: str) -> float:
    low, high = binomial_interval(p * n, n, confidence, method)  # type: ignore[arg-type]
    return float(high - low) / 2.0


def samples_for_half_width(half_width: float, expected_yield: float = 0.5, confidence: float = 0.95,
                           method: IntervalMethod = "wilson") -> int:
    """Smallest number of samples n whose interval half-width at the expected yield is at most
    ``half_width`` (a fraction: 0.01 = +/- 1 percentage point).

    The half-width at n is that of :func:`binomial_interval` with ``passed = expected_yield * n``
    (fractional counts allowed, so the half-width falls smoothly with n). The normal
    approximation n0 = z^2 p (1 - p) / h^2 is only the first guess; there p is clipped to
    [h, 1 - h] (h at most 0.5) so that an expected yield of 0 or 1 still gives a positive
    guess. The answer is then bracketed by halving or doubling n0 and found by bisection on
    the method's own half-width, so the guard changes the number of steps, never the result.
    Raises :class:`InputError` (path ``half_width``) if more than :data:`MAX_PLANNED_SAMPLES`
    would be needed.

    Parameters
    ----------
    half_width : float
        Wanted interval half-width, a fraction.
    expected_yield : float
        Expected yield, a fraction.
    confidence : float
        Two-sided confidence, a fraction in (0, 1).
    method : str
        ``"wilson"`` or ``"exact"``.

    Returns
    -------
    int
        Number of boards.
    """
    if isinstance(half_width, (bool, np.bool_)) or not isinstance(half_width, (int, float, np.integer, np.floating)):
        raise InputError(f"must be a number, not {half_width!r}", "half_width")
    h = float(half_width)
    if not math.isfinite(h) or h <= 0.0:
        raise InputError(f"must be a positive fraction, not {h:g}", "half_width")
    p = _check_fraction(expected_yield, "expected_yield", lo_open=False, hi_open=False)
    c = _check_confidence(confidence)
    m = _check_method(method)

    def meets(n: int) -> bool:
        return _half_width_at(n, p, c, m) <= h

    z = float(special.ndtri(0.5 + 0.5 * c))
    g = min(h, 0.5)
    pg = min(max(p, g), 1.0 - g)
    n0 = max(1, min(MAX_PLANNED_SAMPLES, math.ceil(z * z * pg * (1.0 - pg) / (h * h))))
    if meets(n0):
        hi, lo = n0, n0 // 2          # invariant: meets(hi); lo == 0 or not meets(lo)
        while lo >= 1 and meets(lo):
            hi, lo = lo, lo // 2
    else:
        lo, hi = n0, 2 * n0
        while not meets(hi):
            if hi > MAX_PLANNED_SAMPLES:
                raise InputError(f"would need more than {MAX_PLANNED_SAMPLES:.0e} samples", "half_width")
            lo, hi = hi, 2 * hi
    return smallest_meeting(meets, lo, hi)


def samples_to_show(target: float, expected_yield: float = 1.0, confidence: float = 0.95,
                    method: IntervalMethod = "wilson") -> int:
    """Fewest boards n whose one-sided lower bound at ``confidence`` reaches ``target``
    when a fraction ``expected_yield`` of them passes (fractions in (0, 1]).

    The lower bound is that of :func:`lower_bound` (the low end of the two-sided interval
    at 2 * confidence - 1), with ``passed = expected_yield * n`` allowed to be fractional
    so it rises smoothly with n. ``expected_yield`` 1 (every board passes) gives the least
    any run can do with. Raises :class:`InputError` (path ``target``) when the expected
    yield does not exceed the target (no number of boards shows it) or when more than
    :data:`MAX_PLANNED_SAMPLES` would be needed.

    Parameters
    ----------
    target : float
        Target yield, a fraction in (0, 1).
    expected_yield : float
        Fraction of boards expected to pass, in (0, 1].
    confidence : float
        Confidence of the one-sided bound, a fraction.
    method : str
        ``"wilson"`` or ``"exact"``.

    Returns
    -------
    int
        Number of boards.
    """
    t = _check_fraction(target, "target", lo_open=True, hi_open=True)
    p = _check_fraction(expected_yield, "expected_yield", lo_open=True, hi_open=False)
    c = _check_confidence(confidence)
    m = _check_method(method)
    if p <= t:
        raise InputError(f"an expected yield of {p:g} never shows a target of {t:g}", "target")
    two_sided = 2.0 * c - 1.0

    def meets(n: int) -> bool:
        return float(binomial_interval(p * n, n, two_sided, m)[0]) >= t  # type: ignore[arg-type]

    hi = 1
    while not meets(hi):
        if hi > MAX_PLANNED_SAMPLES:
            raise InputError(f"would need more than {MAX_PLANNED_SAMPLES:.0e} boards", "target")
        hi *= 2
    return 1 if hi == 1 else smallest_meeting(meets, hi // 2, hi)


def smallest_meeting(ok: Callable[[int], bool], lo: int, hi: int) -> int:
    """The smallest n in (lo, hi] with ``ok(n)`` true, by bisection; ``ok`` must be
    monotone (false up to some n, true from there) and ``ok(hi)`` true.

    Parameters
    ----------
    ok : callable
        ``ok(n)`` -> bool, monotone in n.
    lo : int
        ``ok`` is taken false at ``lo``.
    hi : int
        ``ok(hi)`` is true.

    Returns
    -------
    int
        The smallest n in (lo, hi] with ``ok(n)``.
    """
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi


# --- adaptive run --------------------------------------------------------------------------

def adaptive_yield(run_batch: Callable[[int, int], np.ndarray], *, half_width: float, batch: int = 2000,
                   max_samples: int = 1_000_000, confidence: float = 0.95, method: IntervalMethod = "wilson",
                   should_stop: Callable[[], bool] | None = None) -> tuple[YieldEstimate, list[YieldEstimate]]:
    """Add samples until the yield interval's half-width is at most ``half_width`` (a fraction).

    ``run_batch(start, stop)`` must return a boolean pass array of length ``stop - start``
    for samples ``[start, stop)``; batches are contiguous, starting at 0. The run stops when
    the half-width of :func:`yield_estimate` over all samples so far is at most ``half_width``
    or ``max_samples`` samples have run. Returns the final estimate and the history (one
    estimate per batch, samples increasing).

    Batch rule: the first batch has ``batch`` samples. After that, the next batch is the
    number still missing by :func:`samples_for_half_width` at the current point estimate,
    but at least ``batch``, at most as many as have run so far (the total at most doubles
    per batch, so a plan never rests on fewer than half the samples it leads to), and never
    beyond ``max_samples``. ``should_stop()`` is asked before every batch; when it returns
    True, :class:`Cancelled` is raised and the partial result is discarded.

    Parameters
    ----------
    run_batch : callable
        ``run_batch(start, stop)`` -> (stop - start,) bool pass array.
    half_width : float
        Wanted interval half-width, a fraction.
    batch : int
        Boards per batch.
    max_samples : int
        Most boards in all.
    confidence : float
        Two-sided confidence, a fraction in (0, 1).
    method : str
        ``"wilson"`` or ``"exact"``.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    tuple[YieldEstimate, list[YieldEstimate]]
        The final estimate and one estimate per batch.
    """
    if isinstance(half_width, (bool, np.bool_)) or not isinstance(half_width, (int, float, np.integer, np.floating)):
        raise InputError(f"must be a number, not {half_width!r}", "half_width")
    h = float(half_width)
    if not math.isfinite(h) or h <= 0.0:
        raise InputError(f"must be a positive fraction, not {h:g}", "half_width")
    step = _check_whole(batch, "batch", 1)
    cap = _check_whole(max_samples, "max_samples", 1)
    c = _check_confidence(confidence)
    m = _check_method(method)

    total = 0
    passed = 0
    history: list[YieldEstimate] = []
    size = min(step, cap)
    while True:
        if should_stop is not None and should_stop():
            raise Cancelled(f"yield run cancelled after {total} samples")
        start, stop = total, total + size
        out = np.asarray(run_batch(start, stop))
        if out.dtype != np.bool_ or out.shape != (stop - start,):
            raise InputError(f"must return a boolean array of length {stop - start}, "
                             f"not {out.dtype} of shape {out.shape}", "run_batch")
        passed += int(np.count_nonzero(out))
        total = stop
        est = yield_estimate(passed, total, c, m)
        history.append(est)
        if est.half_width <= h or total >= cap:
            return est, history
        try:
            need = samples_for_half_width(h, est.estimate, c, m)
        except InputError:
            need = cap
        grow = min(need - total, total)
        size = min(max(step, grow), cap - total)


# --- which spans fail ----------------------------------------------------------------------

def failure_breakdown(passes: np.ndarray, margins: np.ndarray, names: Sequence[str]) -> list[SpanFailures]:
    """Per-span failure counts, one :class:`SpanFailures` per span in the order of ``names``.

    ``passes`` is a boolean array (samples, spans), True where the board meets that span;
    ``margins`` has the same shape, in dB (negative = violation, +/-inf allowed, NaN not);
    ``names`` has one name per span. A board fails overall when it fails any span.

    Parameters
    ----------
    passes : np.ndarray
        (S, spans) bool, True where a board meets a span.
    margins : np.ndarray
        (S, spans) float margins in each span's unit (negative: violation).
    names : sequence of str
        One name per span.

    Returns
    -------
    list[SpanFailures]
        One entry per span, in the order of ``names``.
    """
    p = np.asarray(passes)
    mg = np.asarray(margins, dtype=float)
    if p.dtype != np.bool_ or p.ndim != 2:
        raise InputError(f"must be a 2-D boolean array (samples, spans), not {p.dtype} of shape {p.shape}",
                         "passes")
    if p.shape[0] < 1:
        raise InputError("must hold at least one sample", "passes")
    if mg.shape != p.shape:
        raise InputError(f"must have the shape of passes {p.shape}, not {mg.shape}", "margins")
    if np.isnan(mg).any():
        raise InputError("must not contain NaN", "margins")
    names = list(names)
    if len(names) != p.shape[1]:
        raise InputError(f"must name each of the {p.shape[1]} spans, not {len(names)}", "names")
    samples = p.shape[0]
    fails = ~p
    failing_boards = int(np.count_nonzero(fails.any(axis=1)))
    per_span = fails.sum(axis=0)
    worst = mg.min(axis=0) if p.shape[1] else np.zeros(0)
    out: list[SpanFailures] = []
    for j, name in enumerate(names):
        f = int(per_span[j])
        out.append(SpanFailures(
            name=str(name),
            failed=f,
            share_of_failures=(f / failing_boards) if failing_boards else 0.0,
            fraction=f / samples,
            worst_margin_db=float(worst[j]),
        ))
    return out
