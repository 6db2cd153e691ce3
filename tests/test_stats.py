"""Checks of tolspread.stats against outside sources, each named beside its check.

Sources, abbreviated below (tests/REFERENCES.md section 8):
  [W27]    Wilson (1927), JASA 22:209-212 - the score interval: the p with
           (k/n - p)^2 = z^2 p (1 - p) / n, solved here independently as a quadratic.
  [CP34]   Clopper & Pearson (1934), Biometrika 26:404-413 - exact interval; its ends are
           beta quantiles (from memory), evaluated here with scipy.stats.beta.
  [SCIPY]  scipy.stats.binomtest(k, n).proportion_ci(method="wilson" | "exact"), the
           reference implementation [C]; its documentation example is 7 of 50, exact 95 %:
           0.0581917003 to 0.2673960025.
  [D]      zero failures in n: one-sided upper bound 1 - (1 - C)^(1/n), near 3/n at 95 %
           (rule of three).
  [BCD01]  Brown, Cai & DasGupta (2001), Statistical Science 16:101-133 - from memory:
           Wilson's coverage stays close to nominal.
  "from memory" marks a check not looked up anywhere; "common practice" a textbook rule.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import special
from scipy import stats as sps

import tolspread.stats as fstats
from tolspread.errors import Cancelled, InputError
from tolspread.stats import (
    SpanFailures,
    YieldEstimate,
    adaptive_yield,
    binomial_exact_zero_failures_upper,
    binomial_interval,
    failure_breakdown,
    lower_bound,
    samples_for_half_width,
    yield_estimate,
)

METHODS = ("wilson", "exact")
GRID = [(k, n) for n in (1, 2, 3, 10, 50, 137, 1000, 20000)
        for k in sorted({0, 1, n // 3, n // 2, n - 1, n}) if 0 <= k <= n]


def scipy_ci(k: int, n: int, confidence: float, method: str) -> tuple[float, float]:
    ci = sps.binomtest(k, n).proportion_ci(confidence_level=confidence, method=method)
    return float(ci.low), float(ci.high)


# --- intervals against scipy -----------------------------------------------------------

@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("confidence", [0.8, 0.95, 0.99])
@pytest.mark.parametrize("k,n", GRID)
def test_yield_estimate_matches_scipy(k, n, confidence, method):
    # [W27] / [CP34] as implemented by [SCIPY]
    est = yield_estimate(k, n, confidence, method)
    lo, hi = scipy_ci(k, n, confidence, method)
    assert est.low == pytest.approx(lo, rel=1e-12, abs=1e-15)
    assert est.high == pytest.approx(hi, rel=1e-12, abs=1e-15)
    assert est.estimate == k / n
    assert (est.passed, est.samples, est.confidence, est.method) == (k, n, confidence, method)
    # from memory: both intervals contain the point estimate and stay in [0, 1]
    assert 0.0 <= est.low <= est.estimate <= est.high <= 1.0


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("confidence", [0.8, 0.95, 0.99])
def test_vectorized_interval_matches_scipy(confidence, method):
    # [SCIPY]: the closed-form / beta-quantile fast path against scipy's own intervals
    k = np.array([k for k, _ in GRID])
    n = np.array([n for _, n in GRID])
    low, high = binomial_interval(k, n, confidence, method)
    ref = np.array([scipy_ci(int(a), int(b), confidence, method) for a, b in zip(k, n)])
    np.testing.assert_allclose(low, ref[:, 0], rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(high, ref[:, 1], rtol=1e-9, atol=1e-12)
    assert np.all(low[k == 0] == 0.0) and np.all(high[k == n] == 1.0)


def test_scipy_documentation_example_exact():
    # [SCIPY] documentation example [C]: 7 of 50, Clopper-Pearson 95 %
    est = yield_estimate(7, 50, method="exact")
    assert est.low == pytest.approx(0.0581917003, rel=1e-8)
    assert est.high == pytest.approx(0.2673960025, rel=1e-8)
    low, high = binomial_interval(7, 50, 0.95, "exact")
    assert float(low) == pytest.approx(0.0581917003, rel=1e-8)
    assert float(high) == pytest.approx(0.2673960025, rel=1e-8)


def test_boolean_array_input_equals_count():
    # from memory: an array of 37 True and 13 False is the count 37 of 50
    arr = np.array([True] * 37 + [False] * 13)
    np.random.default_rng(1).shuffle(arr)
    assert yield_estimate(arr) == yield_estimate(37, 50)
    assert yield_estimate(arr, samples=50) == yield_estimate(37, 50)
    assert yield_estimate(np.ones(5, bool)).high == 1.0
    assert yield_estimate(np.zeros(5, bool)).low == 0.0


def test_to_dict_and_half_width():
    # [SCIPY] Wilson 95 % for 7 of 50; keys as the project brief fixes them
    est = yield_estimate(7, 50)
    lo, hi = scipy_ci(7, 50, 0.95, "wilson")
    d = est.to_dict()
    assert d == {"estimate": 0.14, "ci95": [pytest.approx(lo), pytest.approx(hi)], "method": "wilson",
                 "samples": 50, "passed": 7, "confidence": 0.95}
    assert est.half_width == pytest.approx((hi - lo) / 2)
    assert "ci99" in yield_estimate(7, 50, 0.99).to_dict()
    assert "ci90" in yield_estimate(7, 50, 0.9).to_dict()
    assert "ci99.9" in yield_estimate(7, 50, 0.999).to_dict()
    with pytest.raises(AttributeError):
        est.low = 0.0  # frozen


# --- one-sided lower bound -------------------------------------------------------------

@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
@pytest.mark.parametrize("k,n", GRID)
def test_lower_bound_is_two_sided_at_2c_minus_1(k, n, confidence, method):
    # [SCIPY] two-sided interval at 2C - 1; its lower end is the one-sided bound at C (from memory)
    ref_low, _ = scipy_ci(k, n, 2 * confidence - 1, method)
    assert lower_bound(k, n, confidence, method) == pytest.approx(ref_low, rel=1e-9, abs=1e-12)
    two = yield_estimate(k, n, confidence, method)
    assert lower_bound(k, n, confidence, method, one_sided=False) == two.low
    # from memory: the one-sided bound is tighter than the two-sided lower end
    assert lower_bound(k, n, confidence, method) >= two.low


def test_lower_bound_accepts_pass_array():
    arr = np.array([True, True, False, True])
    assert lower_bound(arr, None) == lower_bound(3, 4)


# --- zero failures ---------------------------------------------------------------------

def test_zero_failures_rule_of_three():
    # [D]: 1 - 0.05^(1/n) is close to 3/n; within 1 % at n = 1000
    ub = binomial_exact_zero_failures_upper(1000)
    assert ub == pytest.approx(1 - 0.05 ** (1 / 1000), rel=1e-12)
    assert ub == pytest.approx(3 / 1000, rel=0.01)


@pytest.mark.parametrize("n", [1, 7, 100, 5000, 10**6])
@pytest.mark.parametrize("confidence", [0.9, 0.95, 0.99])
def test_zero_failures_matches_scipy_exact(n, confidence):
    # [SCIPY] exact one-sided ("less") upper bound for 0 failures of n; [D] formula
    ci = sps.binomtest(0, n, alternative="less").proportion_ci(confidence_level=confidence, method="exact")
    assert binomial_exact_zero_failures_upper(n, confidence) == pytest.approx(ci.high, rel=1e-9)
    # the same bound seen from the yield side: all n pass, exact one-sided lower bound
    assert lower_bound(n, n, confidence, "exact") == pytest.approx(
        1 - binomial_exact_zero_failures_upper(n, confidence), rel=1e-9)


# --- planning the number of samples ----------------------------------------------------

def ref_half_width(n: int, p: float, confidence: float, method: str) -> float:
    """Half-width at k = p n by the definitions, written independently of tolspread.stats."""
    k = p * n
    if method == "wilson":
        # [W27]: roots of (1 + z^2/n) q^2 - (2 k/n + z^2/n) q + (k/n)^2 = 0
        z = sps.norm.ppf(0.5 + confidence / 2)
        ph = k / n
        roots = np.roots([1 + z * z / n, -(2 * ph + z * z / n), ph * ph]).real
        return float(roots.max() - roots.min()) / 2
    # [CP34]: ends as beta quantiles
    a = (1 - confidence) / 2
    low = 0.0 if k <= 0 else sps.beta.ppf(a, k, n - k + 1)
    high = 1.0 if k >= n else sps.beta.ppf(1 - a, k + 1, n - k)
    return float(high - low) / 2


@pytest.mark.parametrize("method", METHODS)
def test_reference_half_width_agrees_with_scipy(method):
    # [SCIPY]: the test's own reference gives scipy's interval at whole counts
    for k, n in [(0, 10), (3, 10), (10, 10), (45, 50), (500, 1000), (999, 1000)]:
        lo, hi = scipy_ci(k, n, 0.95, method)
        assert ref_half_width(n, k / n, 0.95, method) == pytest.approx((hi - lo) / 2, rel=1e-7, abs=1e-12)


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("h,p,confidence", [
    (0.01, 0.5, 0.95), (0.01, 0.9, 0.95), (0.005, 0.99, 0.95), (0.02, 0.7, 0.99),
    (0.05, 0.5, 0.9), (0.001, 0.999, 0.95), (0.01, 0.0, 0.95), (0.01, 1.0, 0.95), (0.2, 0.5, 0.95),
])
def test_samples_for_half_width_is_the_smallest(h, p, confidence, method):
    # [W27] / [CP34] via ref_half_width: n meets the half-width, n - 1 does not
    n = samples_for_half_width(h, p, confidence, method)
    assert ref_half_width(n, p, confidence, method) <= h * (1 + 1e-9)
    if n > 1:
        assert ref_half_width(n - 1, p, confidence, method) > h * (1 - 1e-9)


def test_samples_for_half_width_classic_9604():
    # common practice: z^2 / (4 h^2) = 9604 at p = 0.5, h = 0.01, 95 % (normal approximation)
    n = samples_for_half_width(0.01, 0.5)
    assert abs(n - 9604) / 9604 < 0.005
    z = special.ndtri(0.975)
    assert math.ceil(z * z / (4 * 0.01 ** 2)) == 9604


def test_samples_for_half_width_loose_target_is_one():
    # from memory: any interval lies in [0, 1], so its half-width never exceeds 0.5
    assert samples_for_half_width(0.5, 0.5) == 1
    assert samples_for_half_width(0.9, 0.3, method="exact") == 1


def test_samples_for_half_width_uses_few_evaluations(monkeypatch):
    # from memory: bisection needs about 2 log2(n) half-width evaluations, not n
    calls = []
    real = fstats._half_width_at

    def counting(n, p, c, m):
        calls.append(n)
        return real(n, p, c, m)

    monkeypatch.setattr(fstats, "_half_width_at", counting)
    n = samples_for_half_width(1e-4, 0.5)
    assert n > 9 * 10**7
    assert len(calls) < 4 * math.log2(n)


def test_samples_for_half_width_monotone_in_target():
    # from memory: a tighter target never needs fewer samples
    ns = [samples_for_half_width(h, 0.9, method=m) for m in METHODS for h in (0.05, 0.02, 0.01, 0.005)]
    assert ns[:4] == sorted(ns[:4]) and ns[4:] == sorted(ns[4:])


# --- adaptive runs ---------------------------------------------------------------------

class Bernoulli:
    """Synthetic boards: each passes with probability p (numpy Generator, fixed seed)."""

    def __init__(self, p: float, seed: int) -> None:
        self.p = p
        self.rng = np.random.default_rng(seed)
        self.calls: list[tuple[int, int]] = []

    def __call__(self, start: int, stop: int) -> np.ndarray:
        self.calls.append((start, stop))
        return self.rng.random(stop - start) < self.p


@pytest.mark.parametrize("method", METHODS)
@pytest.mark.parametrize("seed", [1, 2, 3])
def test_adaptive_yield_reaches_target_and_covers_truth(method, seed):
    # [SCIPY] intervals; true yield 0.9 must lie inside the final 95 % interval for these seeds
    boards = Bernoulli(0.9, seed)
    final, history = adaptive_yield(boards, half_width=0.01, batch=500, method=method)
    assert final.half_width <= 0.01
    assert final.low <= 0.9 <= final.high
    assert final == history[-1]
    assert final.samples == boards.calls[-1][1]
    # batches are contiguous from 0 and follow the documented growth rule
    assert boards.calls[0] == (0, 500)
    for (a0, b0), (a1, b1) in zip(boards.calls, boards.calls[1:]):
        assert a1 == b0 and 500 <= b1 - a1 <= a1
    samples = [h.samples for h in history]
    assert samples == sorted(samples) and len(set(samples)) == len(samples)
    assert all(h.half_width > 0.01 for h in history[:-1])
    # planning jumps ahead: far fewer batches than one per 500 samples, and no large overshoot
    need = samples_for_half_width(0.01, 0.9, method=method)
    assert len(history) < final.samples / 500
    assert final.samples <= 2 * need


def test_adaptive_yield_stops_at_max_samples():
    # from memory: +/- 0.0001 at p = 0.9 needs millions of samples, more than 10 000
    boards = Bernoulli(0.9, 7)
    final, history = adaptive_yield(boards, half_width=1e-4, batch=1000, max_samples=10_000)
    assert final.samples == 10_000
    assert final.half_width > 1e-4
    assert sum(b - a for a, b in boards.calls) == 10_000
    assert [h.samples for h in history] == sorted(h.samples for h in history)


def test_adaptive_yield_max_below_batch():
    boards = Bernoulli(0.9, 8)
    final, history = adaptive_yield(boards, half_width=1e-4, batch=2000, max_samples=300)
    assert boards.calls == [(0, 300)] and final.samples == 300 and len(history) == 1


def test_adaptive_yield_cancelled():
    boards = Bernoulli(0.9, 4)
    asked = []

    def stop() -> bool:
        asked.append(1)
        return len(asked) > 2

    with pytest.raises(Cancelled):
        adaptive_yield(boards, half_width=1e-4, batch=100, should_stop=stop)
    assert len(boards.calls) == 2


def test_adaptive_yield_rejects_bad_batch_output():
    with pytest.raises(InputError) as e:
        adaptive_yield(lambda a, b: np.ones(b - a + 1, bool), half_width=0.01)
    assert e.value.path == "run_batch"
    with pytest.raises(InputError) as e:
        adaptive_yield(lambda a, b: np.ones(b - a), half_width=0.01)
    assert e.value.path == "run_batch"


# --- coverage --------------------------------------------------------------------------

def test_wilson_coverage_near_nominal():
    # [BCD01] from memory: Wilson 95 % covers close to 95 %; 2000 experiments, n = 200, p = 0.9
    rng = np.random.default_rng(20240601)
    k = rng.binomial(200, 0.9, size=2000)
    low, high = binomial_interval(k, 200, 0.95, "wilson")
    coverage = np.mean((low <= 0.9) & (0.9 <= high))
    assert 0.93 <= coverage <= 0.97
    # the same intervals, a few checked against [SCIPY]
    for i in range(0, 2000, 400):
        lo, hi = scipy_ci(int(k[i]), 200, 0.95, "wilson")
        assert low[i] == pytest.approx(lo, rel=1e-10) and high[i] == pytest.approx(hi, rel=1e-10)


# --- failure breakdown -----------------------------------------------------------------

def test_failure_breakdown_hand_made():
    # counted by hand: 5 boards, 3 spans; boards 1, 2, 4 fail something (3 failing boards)
    passes = np.array([
        [True, True, True],
        [False, True, True],
        [False, False, True],
        [True, True, True],
        [True, False, True],
    ])
    margins = np.array([
        [1.0, 2.0, 3.0],
        [-0.5, 1.0, 0.2],
        [-2.0, -0.1, 0.5],
        [0.3, 0.4, 0.1],
        [0.7, -1.5, 2.0],
    ])
    out = failure_breakdown(passes, margins, ["pass", "stop", "ripple"])
    assert [s.name for s in out] == ["pass", "stop", "ripple"]
    assert [s.failed for s in out] == [2, 2, 0]
    assert [s.share_of_failures for s in out] == pytest.approx([2 / 3, 2 / 3, 0.0])
    assert [s.fraction for s in out] == pytest.approx([0.4, 0.4, 0.0])
    assert [s.worst_margin_db for s in out] == [-2.0, -1.5, 0.1]
    assert out[1].to_dict() == {"name": "stop", "failed": 2, "share_of_failures": pytest.approx(2 / 3),
                                "fraction": 0.4, "worst_margin_db": -1.5}
    assert isinstance(out[0], SpanFailures)
    assert isinstance(yield_estimate(1, 2), YieldEstimate)


def test_failure_breakdown_no_failures():
    out = failure_breakdown(np.ones((4, 2), bool), np.full((4, 2), 1.0), ["a", "b"])
    assert [(s.failed, s.share_of_failures, s.fraction) for s in out] == [(0, 0.0, 0.0)] * 2


@pytest.mark.parametrize("passes,margins,names,path", [
    (np.ones((3, 2)), np.zeros((3, 2)), ["a", "b"], "passes"),
    (np.ones(3, bool), np.zeros(3), ["a"], "passes"),
    (np.ones((3, 2), bool), np.zeros((3, 3)), ["a", "b"], "margins"),
    (np.ones((3, 2), bool), np.full((3, 2), np.nan), ["a", "b"], "margins"),
    (np.ones((3, 2), bool), np.zeros((3, 2)), ["a"], "names"),
])
def test_failure_breakdown_rejects(passes, margins, names, path):
    with pytest.raises(InputError) as e:
        failure_breakdown(passes, margins, names)
    assert e.value.path == path


# --- input checks ----------------------------------------------------------------------

@pytest.mark.parametrize("call,path", [
    (lambda: yield_estimate(3, 10, confidence=1.0), "confidence"),
    (lambda: yield_estimate(3, 10, confidence=0.0), "confidence"),
    (lambda: yield_estimate(3, 10, confidence=float("nan")), "confidence"),
    (lambda: yield_estimate(3, 10, confidence="0.95"), "confidence"),
    (lambda: yield_estimate(3, 10, method="wald"), "method"),
    (lambda: yield_estimate(3), "samples"),
    (lambda: yield_estimate(3, 0), "samples"),
    (lambda: yield_estimate(3, 2.5), "samples"),
    (lambda: yield_estimate(11, 10), "passed"),
    (lambda: yield_estimate(-1, 10), "passed"),
    (lambda: yield_estimate(True, 10), "passed"),
    (lambda: yield_estimate(np.array([1, 0, 1])), "passed"),
    (lambda: yield_estimate(np.zeros(0, bool)), "passed"),
    (lambda: yield_estimate(np.ones(4, bool), samples=5), "samples"),
    (lambda: lower_bound(3, 10, confidence=1.5), "confidence"),
    (lambda: samples_for_half_width(0.0), "half_width"),
    (lambda: samples_for_half_width(-0.1), "half_width"),
    (lambda: samples_for_half_width(1e-12), "half_width"),
    (lambda: samples_for_half_width(0.01, expected_yield=1.2), "expected_yield"),
    (lambda: adaptive_yield(Bernoulli(0.9, 0), half_width=0.01, batch=0), "batch"),
    (lambda: adaptive_yield(Bernoulli(0.9, 0), half_width=0.01, max_samples=0), "max_samples"),
    (lambda: adaptive_yield(Bernoulli(0.9, 0), half_width=0.0), "half_width"),
    (lambda: binomial_exact_zero_failures_upper(0), "n"),
    (lambda: binomial_exact_zero_failures_upper(10, 1.0), "confidence"),
])
def test_input_errors_name_the_field(call, path):
    with pytest.raises(InputError) as e:
        call()
    assert e.value.path == path


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 10**6), frac=st.floats(0, 1), conf=st.floats(0.5, 0.999))
def test_wilson_fast_path_matches_scipy_everywhere(n, frac, conf):
    # [SCIPY]: the vectorized Wilson over random (k, n, confidence)
    k = int(round(frac * n))
    low, high = binomial_interval(k, n, conf, "wilson")
    lo, hi = scipy_ci(k, n, conf, "wilson")
    assert float(low) == pytest.approx(lo, rel=1e-9, abs=1e-13)
    assert float(high) == pytest.approx(hi, rel=1e-9, abs=1e-13)


@pytest.mark.parametrize("target, p, method", [(0.995, 1.0, "wilson"), (0.99, 1.0, "exact"),
                                               (0.95, 0.97, "wilson"), (0.9, 0.93, "exact")])
def test_samples_to_show_is_the_fewest_boards_whose_lower_bound_reaches_the_target(target, p, method):
    from tolspread.stats import samples_to_show

    n = samples_to_show(target, p, 0.95, method)

    # independent: scipy.stats.binomtest's one-sided bound with whole counts; p*n is
    # fractional in samples_to_show, so compare at p = 1 exactly and bracket otherwise
    def low(k: int, m: int) -> float:
        return sps.binomtest(k, m, alternative="greater").proportion_ci(0.95, method).low

    if p == 1.0:
        assert low(n, n) >= target > low(n - 1, n - 1)
    else:
        assert low(math.ceil(p * n), n) >= target
        assert low(math.floor(p * (n - 1)), n - 1) < target


def test_samples_to_show_refuses_a_yield_not_above_the_target():
    from tolspread.stats import samples_to_show

    with pytest.raises(InputError) as e:
        samples_to_show(0.95, 0.95)
    assert e.value.path == "target"
