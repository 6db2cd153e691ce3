"""Checks of the yield (tolspread.evaluate, tolspread.stats through tolspread.analysis.analyze)
against analytic results and reference libraries.

References used below:
  [RC]     first-order RC low-pass |H|^2 = 1/(1 + (f/fc)^2), fc = 1/(2 pi R C) (elementary
           circuit theory, from memory): |H(f)|^2 >= 1/2 exactly when fc >= f, so a floor of
           -10 log10(2) dB at f means fc >= f and a ceiling of the same level means fc <= f.
  [GUM]    product of powers Y = c prod X_i^p_i: (u_c/y)^2 = sum (p_i u(x_i)/x_i)^2
           (JCGM 100:2008 5.1.6, from memory [M], tests/REFERENCES.md section 4); for fc = 1/(2 pi R C)
           ln fc = -ln R - ln C - ln 2 pi, so to first order ln fc ~ Normal(ln fc0,
           sqrt(s_R^2 + s_C^2)).
  [NORM]   scipy.stats.norm and scipy.integrate.quad: the exact pass probability of the
           sampled model (values = nominal * (1 + delta), delta normal), integrated here.
  [GRADE]  README "Grades": a tolerance is read as two standard deviations (coverage factor
           2, common practice; GUM Table G.1 [C] via tests/REFERENCES.md section 4).
  [BINOM]  Wilson (1927) and Clopper & Pearson (1934) intervals as implemented by
           scipy.stats.binomtest(k, n).proportion_ci (tests/REFERENCES.md section 8 [C]).
  [CHI2]   the mean of N independent draws has variance sigma^2/N; the mean square of m
           independent normal errors is sigma^2 chi2_m / m (elementary statistics, from memory).
  [QMC]    scrambled (Owen) Sobol points integrate smooth functions with a smaller error than
           independent points (Owen 1997, from memory [M]); the ratio is measured here.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from tolspread.analysis import analyze
from tolspread.design import design_from_dict
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate, prepare
from tolspread.temperature import judged_boards

TWO_PI = 2 * math.pi
R_NOM, C_NOM = 10e3, 10e-9
FC0 = 1 / (TWO_PI * R_NOM * C_NOM)  # [RC] 1591.55 Hz
HALF_DB = -10 * math.log10(2.0)      # -3.0103 dB: |H|^2 = 1/2
WIDTH = 1.0001                       # span width ratio (a span needs f1 < f2)
GRADES = [  # untruncated normal, tolerance = 2 sigma [GRADE]: sigma_R = 1 %, sigma_C = 2 %
    {"name": "R-g2", "kind": "R", "tolerance_pct": 2, "truncate": False},
    {"name": "C-g4", "kind": "C", "tolerance_pct": 4, "truncate": False},
]
SIGMA_R, SIGMA_C = 0.01, 0.02


def window_design(f_lo: float, f_hi: float, *, confidence: float = 0.95,
                  interval: str = "wilson") -> dict:
    """RC low-pass whose mask is only a cutoff window: [RC] pass <=> f_lo*WIDTH <= fc <= f_hi.

    Floor span [f_lo, f_lo*WIDTH]: the low-pass falls, so its worst point is f2 = f_lo*WIDTH.
    Ceiling span [f_hi, f_hi*WIDTH]: its worst point is f1 = f_hi.
    """
    return {
        "format": "tolspread-design", "version": 1, "name": "RC window",
        "grades": GRADES,
        "parts": [{"ref": "R1", "value": R_NOM, "grade": "R-g2"},
                  {"ref": "C1", "value": C_NOM, "grade": "C-g4"}],
        "stages": [{"topology": "rc_lowpass", "options": {"sections": 1},
                    "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"f_start": 10, "f_stop": 1e5, "points": 40, "confidence": confidence,
                     "interval": interval},
        "mask": [
            {"name": "fc low", "kind": "floor", "f1": f_lo, "f2": f_lo * WIDTH,
             "limit1": HALF_DB, "relative": True},
            {"name": "fc high", "kind": "ceiling", "f1": f_hi, "f2": f_hi * WIDTH,
             "limit1": HALF_DB, "relative": True},
        ],
    }


def exact_window_yield(a: float, b: float) -> float:
    """[NORM] P(a <= fc0 / ((1 + dR)(1 + dC)) <= b), dR ~ N(0, s_R), dC ~ N(0, s_C).

    For each dR the condition is an interval of dC; the outer integral runs over +-12 s_R
    (the mass beyond is below 1e-30; 1 + dR > 0 throughout)."""
    def inner(dr: float) -> float:
        lo = FC0 / (b * (1 + dr)) - 1
        hi = FC0 / (a * (1 + dr)) - 1
        return stats.norm.pdf(dr, scale=SIGMA_R) * (stats.norm.cdf(hi, scale=SIGMA_C)
                                                     - stats.norm.cdf(lo, scale=SIGMA_C))
    val, err = integrate.quad(inner, -12 * SIGMA_R, 12 * SIGMA_R, epsabs=1e-13, epsrel=1e-12,
                              limit=200)
    assert err < 1e-9
    return float(val)


def lognormal_window_yield(a: float, b: float) -> float:
    """[GUM] first-order approximation: ln fc ~ Normal(ln fc0, sqrt(s_R^2 + s_C^2))."""
    s = math.hypot(SIGMA_R, SIGMA_C)
    return float(stats.norm.cdf(math.log(b / FC0) / s) - stats.norm.cdf(math.log(a / FC0) / s))


# --- yield against the analytic result --------------------------------------------------

@pytest.mark.parametrize("method,samples", [("random", 20000), ("sobol", 2 ** 14)])
def test_cutoff_window_yield_matches_the_exact_probability(method, samples):
    f_lo, f_hi = 0.97 * FC0, 1.04 * FC0
    design = design_from_dict(window_design(f_lo, f_hi, confidence=0.999))
    a, b = f_lo * WIDTH, f_hi
    exact = exact_window_yield(a, b)  # 0.87341 (computed here, not by the library)
    # The first-order lognormal model differs from the exact one by 4e-4, far below the
    # interval half-width (~8e-3 at 99.9 %): the check is made against the exact value.
    assert abs(exact - lognormal_window_yield(a, b)) < 1e-3
    res = analyze(design, samples=samples, seed=20240607, method=method)
    est = res.yield_
    assert est.samples == samples and est.method == "wilson" and est.confidence == 0.999
    # Bound: with a correct library the 99.9 % Wilson interval misses the true yield with
    # probability ~0.1 % for random sampling (scrambled Sobol points err less [QMC]).
    assert est.low <= exact <= est.high
    # the interval is scipy's [BINOM]
    ci = stats.binomtest(est.passed, samples).proportion_ci(confidence_level=0.999, method="wilson")
    assert (est.low, est.high) == pytest.approx((ci.low, ci.high), abs=1e-12)
    # every board's verdict follows [RC] from its own sampled R and C
    v = res.ensemble.values
    fc = 1 / (TWO_PI * v[:, 0] * v[:, 1])
    assert np.array_equal(res.ensemble.passed, (fc >= a) & (fc <= b))
    # the sampled spread is the grades' sigma [GRADE]: within 5 % (sampling error of a
    # std at N >= 16384 is ~0.6 %)
    lnx = np.log(v / np.array([R_NOM, C_NOM]))
    assert lnx.std(axis=0) == pytest.approx([SIGMA_R, SIGMA_C], rel=0.05)


def test_yield_is_insensitive_to_a_window_that_holds_every_board():
    # a window 20 sigma wide: [NORM] gives 1 - 1e-80, every one of 5000 boards passes
    design = design_from_dict(window_design(0.6 * FC0, 1.6 * FC0))
    res = analyze(design, samples=5000, seed=3)
    assert res.yield_.passed == 5000 and res.yield_.high == 1.0


# --- interval method plumbed through analyze --------------------------------------------

@pytest.mark.parametrize("interval", ["exact", "wilson"])
def test_interval_option_reaches_the_yield(interval):
    design = design_from_dict(window_design(0.99 * FC0, 1.02 * FC0))  # yield ~ 0.5
    res = analyze(design, samples=3000, seed=77, interval=interval)
    est = res.yield_
    k, n = est.passed, est.samples
    assert 0 < k < n and n == 3000
    assert est.method == interval
    ci = stats.binomtest(k, n).proportion_ci(confidence_level=0.95, method=interval)  # [BINOM]
    assert est.low == pytest.approx(ci.low, abs=1e-12)
    assert est.high == pytest.approx(ci.high, abs=1e-12)


def test_exact_interval_is_wider_than_wilson_on_the_same_boards():
    # [BINOM] Clopper-Pearson is conservative: it contains the Wilson interval here
    # (scipy computes both; same seed, so the same k)
    design = design_from_dict(window_design(0.99 * FC0, 1.02 * FC0))
    w = analyze(design, samples=3000, seed=77, interval="wilson").yield_
    e = analyze(design, samples=3000, seed=77, interval="exact").yield_
    assert w.passed == e.passed
    assert e.low < w.low and e.high > w.high


# --- quasi Monte Carlo against plain Monte Carlo ------------------------------------------

def test_sobol_mean_cutoff_error_is_smaller_than_random():
    demo = load_demo()
    prep = prepare(demo)
    ref = evaluate(demo, samples=2 ** 16, seed=99, method="sobol", curves=False, prepared=prep)
    cut_ref = ref.metrics["cutoff_hz"]
    assert np.all(np.isfinite(cut_ref))
    mean_ref = float(cut_ref.mean())
    n, seeds = 1024, range(5000, 5020)
    err: dict[str, list[float]] = {"random": [], "sobol": []}
    for s in seeds:
        for method in err:
            e = evaluate(demo, samples=n, seed=s, method=method, curves=False, prepared=prep)
            err[method].append(float(e.metrics["cutoff_hz"].mean()) - mean_ref)
    rms = {m: math.sqrt(float(np.mean(np.square(v)))) for m, v in err.items()}
    ratio = rms["sobol"] / rms["random"]
    print(f"mean-cutoff RMS error: random {rms['random']:.4g} Hz, sobol {rms['sobol']:.4g} Hz, "
          f"ratio {ratio:.3g}")
    # Measured when written (these seeds): RMS error random 1.14 Hz, sobol 0.0011 Hz,
    # ratio 0.0010 [QMC].
    # The assertion is the brief's ratio < 1; the measured ratio is far below it.
    assert ratio < 1
    # [CHI2] plain MC errors are those of independent boards: 20 * (rms / (sd/sqrt(N)))^2 is
    # chi2 with 20 degrees of freedom; its 0.1 % and 99.9 % quantiles bound the check.
    sd = float(cut_ref.std())
    z = 20 * (rms["random"] / (sd / math.sqrt(n))) ** 2
    assert stats.chi2.ppf(0.001, 20) < z < stats.chi2.ppf(0.999, 20)
    # the reference itself is close to the plain-MC mean of 20 x 1024 boards
    # (standard error sd / sqrt(20480) ~ 0.23 Hz; bound 5 standard errors)
    assert abs(np.mean(err["random"])) < 5 * sd / math.sqrt(20 * n)


# --- adaptive run --------------------------------------------------------------------------

def test_adaptive_run_meets_the_half_width_and_is_a_prefix_of_one_run():
    demo = load_demo()
    res = analyze(demo, half_width=0.005)
    est = res.yield_
    assert est.half_width <= 0.005
    hist = res.history
    assert len(hist) >= 2
    sizes = [h.samples for h in hist]
    passed = [h.passed for h in hist]
    assert all(b > a for a, b in zip(sizes, sizes[1:]))
    assert all(b >= a for a, b in zip(passed, passed[1:]))
    assert all(h.half_width > 0.005 for h in hist[:-1])  # it stopped at the first success
    assert hist[-1] == est
    n = res.ensemble.samples
    assert n == est.samples
    # prefix property: the batches are the first n boards of one run with the same seed,
    # judged as the analysis judges them (the demo: over -40..85 degC, its operating range)
    single = judged_boards(demo, samples=n, seed=demo.analysis.seed)
    assert int(single.passed.sum()) == est.passed == int(res.ensemble.passed.sum())
    assert np.array_equal(single.values, res.ensemble.values)
    # the half-width is the Wilson interval's [BINOM]
    ci = stats.binomtest(est.passed, n).proportion_ci(confidence_level=0.95, method="wilson")
    assert est.half_width == pytest.approx((ci.high - ci.low) / 2, abs=1e-12)
