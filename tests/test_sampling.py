"""Sampling: standard scores in blocks, common random numbers, lot correlation,
temperature, value limits, and the propagated spread of a first-order RC corner.

References are named beside each check. tests/REFERENCES.md tags: [C] confirmed in a stored copy
of the published document, [M] from memory (not confirmed), [D] derived by computation.
Statistical checks use fixed seeds and a stated bound of 5 standard errors.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from tolspread.design import design_from_dict
from tolspread.errors import InputError
from tolspread.evaluate import evaluate
from tolspread.grades import Grade, builtin_catalog
from tolspread.sampling import (BLOCK, REFERENCE_CELSIUS, Conditions, columns, draw_scores, limits,
                              part_values)


def _normal(name: str, kind: str, tol: float, **kw) -> Grade:
    """An untruncated normal grade without temperature effects."""
    return Grade(name, kind, tol, truncate=False, **kw)


# --- scores: shape, reproducibility, blocks ---------------------------------------------

def test_score_columns_are_4p_plus_1():
    # sampling.py docstring: value, lot, tempco, drift per part, plus board temperature.
    for p in (1, 3, 8):
        assert columns(p) == 4 * p + 1
        assert draw_scores(1, p, 0, 10).shape == (10, 4 * p + 1)
        assert draw_scores(1, p, 0, 10, "sobol").shape == (10, 4 * p + 1)


def test_same_seed_same_scores_other_seed_other_scores():
    a = draw_scores(42, 3, 0, 2000)
    b = draw_scores(42, 3, 0, 2000)
    c = draw_scores(43, 3, 0, 2000)
    assert np.array_equal(a, b)
    assert not np.any(a == c)  # continuous draws: no coincidences between seeds


def test_chunked_draws_equal_one_draw():
    # Block property (sampling.py docstring): [0, 5000) + [5000, 10000) == [0, 10000),
    # with the chunk boundary inside a block (BLOCK = 4096).
    whole = draw_scores(7, 2, 0, 10_000)
    parts = np.vstack([draw_scores(7, 2, 0, 5000), draw_scores(7, 2, 5000, 10_000)])
    assert np.array_equal(whole, parts)
    # an arbitrary window and a run of fewer samples are slices of the same numbers
    assert np.array_equal(draw_scores(7, 2, 3000, 9001), whole[3000:9001])
    assert np.array_equal(draw_scores(7, 2, 0, 123), whole[:123])
    assert np.array_equal(draw_scores(7, 2, BLOCK, BLOCK + 1), whole[BLOCK:BLOCK + 1])
    assert draw_scores(7, 2, 50, 50).shape == (0, 9)


def test_scores_do_not_depend_on_anything_but_seed_method_parts_and_range():
    # Common random numbers: the score array is a function of (seed, parts, range, method)
    # only; drawing other arrays in between does not change it.
    first = draw_scores(5, 4, 0, 1000)
    draw_scores(6, 4, 0, 5000)
    np.random.seed(0)
    np.random.standard_normal(10)
    assert np.array_equal(draw_scores(5, 4, 0, 1000), first)


def test_bad_range_and_method_are_refused():
    with pytest.raises(InputError):
        draw_scores(1, 2, 10, 5)
    with pytest.raises(InputError):
        draw_scores(1, 2, -1, 5)
    with pytest.raises(InputError) as e:
        draw_scores(1, 2, 0, 5, "latin")  # type: ignore[arg-type]
    assert e.value.path == "analysis.method"


def test_random_scores_are_standard_normal():
    # Reference library: scipy.stats.kstest against the standard normal; critical value
    # at alpha = 0.001 about 1.95/sqrt(n) (Smirnov asymptotic, from memory).
    z = draw_scores(3, 2, 0, 20_000)
    for col in range(z.shape[1]):
        assert stats.kstest(z[:, col], "norm").statistic < 1.95 / math.sqrt(z.shape[0])
    # columns independent: |correlation| < 5 standard errors (1/sqrt(n))
    r = np.corrcoef(z, rowvar=False)
    off = r[~np.eye(r.shape[0], dtype=bool)]
    assert np.max(np.abs(off)) < 5 / math.sqrt(z.shape[0])


def test_sobol_reproducible_and_closer_to_zero_mean_than_random():
    n = 4096  # a power of two, where scrambled Sobol points are balanced (scipy.stats.qmc)
    a = draw_scores(9, 2, 0, n, "sobol")
    assert a.shape == (n, 4 * 2 + 1)
    assert np.array_equal(a, draw_scores(9, 2, 0, n, "sobol"))
    assert not np.array_equal(a, draw_scores(10, 2, 0, n, "sobol"))
    r = draw_scores(9, 2, 0, n, "random")
    # Quasi-Monte Carlo: column means far below the 1/sqrt(N) of random sampling.
    sobol_err = np.abs(a.mean(axis=0)).max()
    random_err = np.abs(r.mean(axis=0)).max()
    assert sobol_err < random_err
    assert sobol_err < 0.1 / math.sqrt(n)
    # still standard normal marginals (KS at alpha 0.001, from memory)
    for col in range(a.shape[1]):
        assert stats.kstest(a[:, col], "norm").statistic < 1.95 / math.sqrt(n)


def test_sobol_chunks_equal_one_draw():
    whole = draw_scores(9, 2, 0, 4096, "sobol")
    parts = np.vstack([draw_scores(9, 2, 0, 1000, "sobol"), draw_scores(9, 2, 1000, 4096, "sobol")])
    assert np.array_equal(whole, parts)


# --- common random numbers -----------------------------------------------------------------

def test_tighter_grade_rescales_the_same_boards():
    # Common random numbers (sampling.py docstring): 5 % -> 1 % untruncated normal scales
    # that part's deviations by exactly 1/5; the other parts do not move.
    nominal = [10e3, 22e-9, 4.7e3]
    z = draw_scores(2024, 3, 0, 5000)
    loose = [_normal("R5", "R", 5.0), _normal("C5", "C", 5.0), _normal("R2", "R", 2.0)]
    tight = [_normal("R1", "R", 1.0), loose[1], loose[2]]
    v_loose = part_values(nominal, loose, z)
    v_tight = part_values(nominal, tight, z)
    d_loose = v_loose[:, 0] / nominal[0] - 1
    d_tight = v_tight[:, 0] / nominal[0] - 1
    np.testing.assert_allclose(d_tight, d_loose / 5, rtol=1e-9, atol=1e-15)
    assert np.array_equal(v_loose[:, 1:], v_tight[:, 1:])


def test_evaluate_with_grade_override_uses_the_same_boards():
    # The same via evaluate(grades=...) on the demo's parts: equal grades give equal values.
    from tolspread.designfile import load_demo

    d = load_demo()
    cat = d.catalog
    grades = [cat[p.grade] for p in d.parts]
    e1 = evaluate(d, samples=300, curves=False)
    e2 = evaluate(d, samples=300, curves=False, grades=grades)
    assert np.array_equal(e1.values, e2.values)
    # a tighter grade on part 0 only moves part 0
    g0 = grades[0]
    tighter = [Grade(g0.name + "x", g0.kind, g0.tolerance_pct / 2, tempco_spread_ppm=0)] + grades[1:]
    e3 = evaluate(d, samples=300, curves=False, grades=tighter)
    assert np.array_equal(e1.values[:, 1:], e3.values[:, 1:])
    assert not np.array_equal(e1.values[:, 0], e3.values[:, 0])


# --- lot correlation ------------------------------------------------------------------------

def test_lot_share_correlates_parts_of_same_value_and_grade():
    n = 40_000
    rho = 0.8
    g = _normal("C5", "C", 5.0)
    nominal = [10e-9, 10e-9, 22e-9]
    z = draw_scores(77, 3, 0, n)
    v = part_values(nominal, [g, g, g], z, Conditions(lot_share=rho))
    dev = v / np.asarray(nominal) - 1
    r = np.corrcoef(dev, rowvar=False)
    # standard error of a sample correlation about (1 - rho^2)/sqrt(n) (Fisher, from memory)
    assert abs(r[0, 1] - rho) < 5 * (1 - rho ** 2) / math.sqrt(n)
    assert abs(r[0, 2]) < 5 / math.sqrt(n)
    assert abs(r[1, 2]) < 5 / math.sqrt(n)
    # the lot share redistributes variance, it does not add any: std stays tol/2
    for i in range(3):
        assert abs(dev[:, i].std() / 0.025 - 1) < 5 / math.sqrt(2 * n)


def test_lot_share_needs_the_same_grade_too():
    n = 20_000
    z = draw_scores(78, 2, 0, n)
    v = part_values([1e3, 1e3], [_normal("A", "R", 5.0), _normal("B", "R", 5.0)], z,
                    Conditions(lot_share=0.8))
    assert abs(np.corrcoef(v, rowvar=False)[0, 1]) < 5 / math.sqrt(n)


def test_lot_share_zero_means_independent():
    n = 20_000
    g = _normal("C5", "C", 5.0)
    z = draw_scores(79, 2, 0, n)
    v = part_values([1e-9, 1e-9], [g, g], z, Conditions(lot_share=0.0))
    assert abs(np.corrcoef(v, rowvar=False)[0, 1]) < 5 / math.sqrt(n)


# --- temperature ------------------------------------------------------------------------------

def test_fixed_temperature_applies_the_tempco_exactly():
    # Closed form: a part marked at 25 deg C with -200 ppm/K at 85 deg C has
    # value = nominal * (1 - 200e-6 * 60); no tolerance, no spread.
    g = Grade("film", "C", 0.0, tempco_ppm=-200.0, tempco_spread_ppm=0.0)
    z = draw_scores(1, 1, 0, 100)
    v = part_values([10e-9], [g], z, Conditions(85.0, 85.0))
    expected = 10e-9 * (1 - 200e-6 * 60)
    np.testing.assert_allclose(v[:, 0], expected, rtol=1e-14, atol=0)
    assert REFERENCE_CELSIUS == 25.0  # README: parts are marked at 25 deg C


def test_temperature_range_is_uniform_and_shared_by_the_board():
    # README: temperature sampled uniformly per board over [low, high]. A uniform over
    # [-55, 125] has mean 35 and std 180/sqrt(12) (GUM 4.3.7, from memory).
    n = 40_000
    g1 = Grade("t1", "R", 0.0, tempco_ppm=100.0)
    g2 = Grade("t2", "C", 0.0, tempco_ppm=-300.0)
    z = draw_scores(12, 2, 0, n)
    v = part_values([1e3, 1e-9], [g1, g2], z, Conditions(-55.0, 125.0))
    t1 = (v[:, 0] / 1e3 - 1) / 100e-6 + 25
    t2 = (v[:, 1] / 1e-9 - 1) / -300e-6 + 25
    np.testing.assert_allclose(t1, t2, rtol=0, atol=1e-6)  # one temperature per board
    assert t1.min() >= -55 - 1e-6 and t1.max() <= 125 + 1e-6
    sd = 180 / math.sqrt(12)
    assert abs(t1.mean() - 35) < 5 * sd / math.sqrt(n)
    assert stats.kstest(t1, stats.uniform(loc=-55, scale=180).cdf).statistic < 1.95 / math.sqrt(n)


def test_tempco_spread_is_between_parts():
    # tempco = nominal +- spread (uniform between parts); at 125 deg C (100 K above 25) a
    # 0 +- 200 ppm/K part moves at most 2 %, and both signs occur.
    g = Grade("s", "R", 0.0, tempco_spread_ppm=200.0)
    z = draw_scores(4, 1, 0, 5000)
    dev = part_values([1.0], [g], z, Conditions(125.0, 125.0))[:, 0] - 1
    assert np.all(np.abs(dev) <= 0.02 + 1e-12)
    assert dev.min() < -0.015 and dev.max() > 0.015


# --- limits -----------------------------------------------------------------------------------

def test_limits_of_a_plain_grade_are_the_tolerance():
    lo, hi = limits([1000.0, 1e-9], [Grade("a", "R", 5.0), Grade("b", "C", 1.0)])
    np.testing.assert_allclose(lo, [950.0, 0.99e-9], rtol=1e-12)
    np.testing.assert_allclose(hi, [1050.0, 1.01e-9], rtol=1e-12)


def test_limits_contain_every_sampled_value():
    cat = builtin_catalog()
    grades = [cat["R-thick-5"], cat["C-film-5"], cat["C-X7R-20"], cat["OPAMP-GBW-50"],
              Grade("drifty", "R", 2.0, tempco_ppm=50, tempco_spread_ppm=25, drift_pct=0.5),
              Grade("bin", "R", 5.0, distribution="binned", bin_inner_pct=1.0)]
    nominal = [4.7e3, 10e-9, 100e-9, 1e6, 2.2e3, 1e3]
    for cond in (Conditions(), Conditions(-40.0, 85.0), Conditions(0.0, 70.0, lot_share=0.5)):
        z = draw_scores(31, len(grades), 0, 50_000)
        v = part_values(nominal, grades, z, cond)
        lo, hi = limits(nominal, grades, cond)
        assert np.all(v >= lo * (1 - 1e-12)), cond
        assert np.all(v <= hi * (1 + 1e-12)), cond
        # and the limits are not absurdly loose: the tolerance part is reached closely
        assert np.all(v.min(axis=0) < nominal), cond
        assert np.all(v.max(axis=0) > nominal), cond


def test_part_values_refuses_mismatched_shapes():
    z = draw_scores(1, 2, 0, 10)
    with pytest.raises(ValueError):
        part_values([1.0, 2.0, 3.0], [Grade("a", "R", 1.0)] * 3, z)


# --- propagation through a first-order RC corner --------------------------------------------

SIG_R, SIG_C = 0.01, 0.02  # 2 % and 4 % grades read at coverage 2
R_NOM, C_NOM = 10e3, 10e-9


def _rc_design(samples: int) -> dict:
    return {
        "format": "tolspread-design", "version": 1, "name": "RC corner",
        "grades": [
            {"name": "R-test-2", "kind": "R", "tolerance_pct": 2, "truncate": False},
            {"name": "C-test-4", "kind": "C", "tolerance_pct": 4, "truncate": False},
        ],
        "parts": [{"ref": "R1", "value": "10k", "grade": "R-test-2"},
                  {"ref": "C1", "value": "10n", "grade": "C-test-4"}],
        "stages": [{"topology": "rc_lowpass", "options": {"sections": 1},
                    "parts": {"R1": "R1", "C1": "C1"}}],
        # |H|^2 = 1/(1 + (w R C)^2) halves at w = 1/(RC): the half-power level is
        # 10*log10(2) = 3.0103 dB below the passband (closed form), not exactly 3 dB.
        "analysis": {"samples": samples, "seed": 99, "f_start": 10, "f_stop": 1e6, "points": 200,
                     "cutoff_db": 10 * math.log10(2)},
    }


def _log1p_moments(sigma: float) -> tuple[float, float]:
    """Mean and variance of ln(1 + d), d ~ N(0, sigma^2) (reference library: numerical
    expectation by scipy.stats.norm.expect, over +-12 sigma)."""
    ref = stats.norm(0, sigma)
    lim = 12 * sigma  # tails beyond 12 sigma hold below 1e-32 of the mass
    m1 = ref.expect(np.log1p, lb=-lim, ub=lim)
    m2 = ref.expect(lambda d: np.log1p(d) ** 2, lb=-lim, ub=lim)
    return m1, m2 - m1 ** 2


def _check_log_cutoff(ln_fc: np.ndarray) -> None:
    n = ln_fc.size
    ln_f0 = math.log(1 / (2 * math.pi * R_NOM * C_NOM))
    # GUM 5.1.6, law of propagation for a product of powers (tests/REFERENCES.md section 4, [M]
    # from memory), first order: fc = 1/(2 pi R C) -> u(fc)/fc = sqrt(sigma_R^2 + sigma_C^2).
    first_order = math.hypot(SIG_R, SIG_C)
    # exact moments of ln fc = ln f0 - ln(1 + dR) - ln(1 + dC) (scipy numerical expectation)
    (mr, vr), (mc, vc) = _log1p_moments(SIG_R), _log1p_moments(SIG_C)
    exact_sd = math.sqrt(vr + vc)
    assert abs(exact_sd / first_order - 1) < 2e-3  # first order is good to 0.2 % here
    sd = ln_fc.std(ddof=1)
    # std of a sample std ~ sigma/sqrt(2N); 5 of those, plus the first-order error
    assert abs(sd - first_order) < 5 * first_order / math.sqrt(2 * n) + 2e-3 * first_order
    assert abs(sd - exact_sd) < 5 * exact_sd / math.sqrt(2 * n)
    # mean of ln fc: ln(1/(2 pi R C)) up to the second-order shift -(E ln(1+dR) + E ln(1+dC))
    se = exact_sd / math.sqrt(n)
    assert abs(ln_fc.mean() - (ln_f0 - mr - mc)) < 5 * se
    assert abs(ln_fc.mean() - ln_f0) < 5 * se + abs(mr + mc)


def test_sampled_rc_product_spread_matches_propagation_law():
    # Sampling level: 1/(2 pi R C) from the sampled part values of the design's grades.
    n = 100_000
    d = design_from_dict(_rc_design(n))
    cat = d.catalog
    grades = [cat[p.grade] for p in d.parts]
    assert [p.value for p in d.parts] == [R_NOM, C_NOM]
    v = part_values([p.value for p in d.parts], grades, draw_scores(99, 2, 0, n))
    _check_log_cutoff(-np.log(2 * math.pi * v[:, 0] * v[:, 1]))


def test_evaluated_rc_cutoff_spread_matches_propagation_law():
    # Whole chain: design -> sampled boards -> responses -> -3.01 dB cutoff per board.
    n = 50_000
    d = design_from_dict(_rc_design(n))
    ens = evaluate(d, curves=False)
    fc = ens.metrics["cutoff_hz"]
    assert np.all(np.isfinite(fc))
    # nominal cutoff is the closed form 1/(2 pi R C)
    assert ens.nominal.metrics["cutoff_hz"] == pytest.approx(1 / (2 * math.pi * R_NOM * C_NOM), rel=1e-9)
    # every board's cutoff equals its own closed form (R, C as sampled)
    np.testing.assert_allclose(fc, 1 / (2 * math.pi * ens.values[:, 0] * ens.values[:, 1]), rtol=1e-7)
    _check_log_cutoff(np.log(fc))
