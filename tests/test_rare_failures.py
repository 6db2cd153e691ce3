"""Rare failures by importance sampling (tolspread.rare_failures) against outside checks.

Checks: the normal tail probability (scipy.stats.norm.sf) of linear margins and of a
one-part RC low-pass whose failure threshold is solved in closed form; plain Monte Carlo
with many boards (numpy sampling, binomial interval) on a two-part design at failure rates
near 1e-2, 1e-3 and 1e-4.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from tolspread.design import design_from_dict
from tolspread.evaluate import evaluate, prepare
from tolspread.rare_failures import design_margin_function, failure_points, importance_estimate
from tolspread.sampling import columns


@pytest.mark.parametrize("beta", [2.33, 3.09, 3.72, 4.75])
def test_linear_margin_matches_normal_tail(beta):
    # One linear margin beta - a.z with |a| = 1: P(fail) = Phi(-beta) (scipy.stats.norm.sf).
    a = np.array([0.6, -0.8, 0.0])

    def fn(z):
        return (beta - z @ a)[:, None]

    est = importance_estimate(fn, 3, seed=4, rel_half_width=0.1)
    truth = stats.norm.sf(beta)
    assert est.low <= truth <= est.high
    assert est.relative_half_width <= 0.1
    assert est.boards < est.plain_equivalent  # fewer boards than plain sampling would need
    assert est.points and est.points[0].beta == pytest.approx(beta, rel=1e-3)


def test_two_spans_union_matches_normal_tails():
    # Two independent linear margins: P = p1 + p2 - p1 p2 (inclusion-exclusion, normal tails).
    def fn(z):
        return np.stack([3.5 - z[:, 0], 3.6 + z[:, 1]], axis=1)

    p1, p2 = stats.norm.sf(3.5), stats.norm.sf(3.6)
    est = importance_estimate(fn, 3, seed=2, rel_half_width=0.1)
    assert est.low <= p1 + p2 - p1 * p2 <= est.high
    assert {p.span for p in est.points} == {0, 1}


def test_no_failure_reachable_claims_no_rate():
    # A margin that never reaches 0: no failure point, no sampled failure, rate 0 with no width.
    def fn(z):
        return (1.0 + np.tanh(z[:, :1]))  # > 0 everywhere

    est = importance_estimate(fn, 2, seed=1, batch=1000, max_boards=3000)
    assert est.failing == 0 and est.failure_rate == 0 and not est.points


def _rc_design(r_grade: dict, c_grade: dict, limit_db: float, f2: float) -> dict:
    return {
        "format": "tolspread-design", "version": 2, "name": "one RC section (test)",
        "grades": [r_grade, c_grade],
        "parts": [{"ref": "R1", "value": "10k", "grade": r_grade["name"]},
                  {"ref": "C1", "value": "10n", "grade": c_grade["name"]}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": 1000, "seed": 1, "f_start": 10, "f_stop": 100e3, "points": 40},
        "mask": [{"kind": "floor", "f1": f2 / 2, "f2": f2, "limit1": limit_db, "quantity": "gain",
                  "relative": False, "name": "passband floor"}],
    }


def test_one_part_rc_matches_closed_form_tail():
    # First-order RC low-pass: |H(f)|^2 = 1 / (1 + (2 pi f R C)^2) (circuit theory). With C exact
    # and R normal (not truncated, sigma = tol / 2), the floor at f2 fails when R > R_crit, where
    # 10 log10(1 + (2 pi f2 R_crit C)^2) = -limit; P(fail) = Phi(-(R_crit / R0 - 1) / sigma).
    r0, c0, f2, sigma = 10e3, 10e-9, 2e3, 0.005
    z_crit = 3.6
    r_crit = r0 * (1 + z_crit * sigma)
    limit = -10 * math.log10(1 + (2 * math.pi * f2 * r_crit * c0) ** 2)
    data = _rc_design({"name": "R-test", "kind": "R", "tolerance_pct": 1.0, "coverage": 2.0, "truncate": False},
                      {"name": "C-test", "kind": "C", "tolerance_pct": 0.0}, limit, f2)
    design = design_from_dict(data)
    prep = prepare(design)
    nominal_margin = -10 * math.log10(1 + (2 * math.pi * f2 * r0 * c0) ** 2) - limit
    assert prep.nominal.margins[0] == pytest.approx(nominal_margin, abs=1e-9)  # f2 is judged
    fn = design_margin_function(prep, design.part_grades(), design.analysis.conditions)
    est = importance_estimate(fn, columns(2), seed=7, rel_half_width=0.1)
    truth = stats.norm.sf(z_crit)
    assert est.low <= truth <= est.high
    assert est.points[0].beta == pytest.approx(z_crit, rel=1e-3)


@pytest.mark.parametrize(("z_crit", "truncate"), [(1.9, True), (3.1, False), (3.7, False)])
def test_against_plain_sampling_with_many_boards(z_crit, truncate):
    # Two parts, failure rates near 1e-2 (truncated normal, the default grade shape: both parts
    # can reach +-2 sigma, so the RC product reaches about 2.8 sigma), 1e-3 and 1e-4 (normal).
    # The importance estimate and a plain Monte Carlo run with enough boards for about 100
    # failures must have overlapping 99 % intervals (plain: Wilson interval, scipy.stats.binomtest).
    r0, c0, f2 = 10e3, 10e-9, 2e3
    sigma = 0.01  # 2 % parts read as 2 sigma
    # the RC product's spread is about sqrt(2) sigma for two equal parts (first order)
    tau_crit = r0 * c0 * (1 + z_crit * math.sqrt(2) * sigma)
    limit = -10 * math.log10(1 + (2 * math.pi * f2 * tau_crit) ** 2)
    g = {"tolerance_pct": 2.0, "coverage": 2.0, "truncate": truncate}
    design = design_from_dict(_rc_design({"name": "R-t", "kind": "R", **g}, {"name": "C-t", "kind": "C", **g},
                                         limit, f2))
    prep = prepare(design)
    fn = design_margin_function(prep, design.part_grades(), design.analysis.conditions)
    est = importance_estimate(fn, columns(2), seed=3, confidence=0.99, rel_half_width=0.1)
    n_plain = int(min(4_000_000, 150 / est.failure_rate))
    ens = evaluate(design, samples=n_plain, seed=11, curves=False, metrics=False, prepared=prep)
    failing = int((~ens.passed).sum())
    ci = stats.binomtest(failing, n_plain).proportion_ci(0.99, method="wilson")
    assert failing >= 50
    print(f"importance {est.failure_rate:.3g} [{est.low:.3g}, {est.high:.3g}] from {est.boards} boards; "
          f"plain {failing / n_plain:.3g} [{ci.low:.3g}, {ci.high:.3g}] from {n_plain} boards")
    assert est.low <= ci.high and ci.low <= est.high
    assert est.boards * 5 < est.plain_equivalent or z_crit < 2.5  # the point of the method


def _one_part_file(tmp_path, z_crit: float, **analysis) -> tuple[str, float]:
    r0, c0, f2, sigma = 10e3, 10e-9, 2e3, 0.005
    r_crit = r0 * (1 + z_crit * sigma)
    limit = -10 * math.log10(1 + (2 * math.pi * f2 * r_crit * c0) ** 2)
    data = _rc_design({"name": "R-test", "kind": "R", "tolerance_pct": 1.0, "coverage": 2.0, "truncate": False},
                      {"name": "C-test", "kind": "C", "tolerance_pct": 0.0}, limit, f2)
    data["analysis"].update(analysis)
    path = tmp_path / "rc.json"
    path.write_text(json.dumps(data))
    return str(path), float(stats.norm.sf(z_crit))


def _analyze(*args):
    return subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", *args], capture_output=True,
                          text=True, timeout=300)


def test_analyze_chooses_importance_sampling_when_few_boards_fail(tmp_path):
    # Phi(-3.9) ~ 4.8e-5: 2,000 plain boards show no failure, so the automatic choice estimates
    # by importance sampling and says so; the interval holds the closed-form tail (scipy.stats).
    path, truth = _one_part_file(tmp_path, 3.9)
    r = _analyze(path, "--samples", "2000", "--json", "-")
    assert r.returncode == 0, r.stderr
    high = json.loads(r.stdout)["yield"]["high_yield"]
    assert high["method"] == "importance sampling"
    assert 1 - high["high_yield"] <= truth <= 1 - high["low_yield"]
    assert high["plain_boards_for_same_interval"] > 100 * high["boards"]
    text = _analyze(path, "--samples", "2000")
    assert "HIGH-YIELD ESTIMATE (importance sampling)" in text.stdout and "plain sampling would need" in text.stdout
    off = _analyze(path, "--samples", "2000", "--rare", "off")
    assert "HIGH-YIELD" not in off.stdout


def test_analyze_over_a_range_estimates_the_worst_temperature(tmp_path):
    # C has a temperature coefficient of -1000 ppm/K and no tolerance; judged at -40, 25 and
    # 85 deg C the largest capacitance is at -40 deg C: C0 (1 + 65e-3) (linear coefficient, the
    # definition of ppm/K). The floor fails when R C(-40) > tau_crit: P = Phi(-z_eff) with
    # z_eff = (tau_crit / (R0 C0 1.065) - 1) / sigma (normal tail, scipy.stats).
    r0, c0, f2, sigma, z_eff = 10e3, 10e-9, 2e3, 0.005, 3.8
    tau_crit = r0 * c0 * 1.065 * (1 + z_eff * sigma)
    limit = -10 * math.log10(1 + (2 * math.pi * f2 * tau_crit) ** 2)
    data = _rc_design({"name": "R-test", "kind": "R", "tolerance_pct": 1.0, "coverage": 2.0, "truncate": False},
                      {"name": "C-tc", "kind": "C", "tolerance_pct": 0.0, "tempco_ppm": -1000.0}, limit, f2)
    data["analysis"]["operating_range_c"] = [-40, 85]
    path = tmp_path / "rc_range.json"
    path.write_text(json.dumps(data))
    r = _analyze(str(path), "--samples", "2000", "--json", "-")
    assert r.returncode == 0, r.stderr
    high = json.loads(r.stdout)["yield"]["high_yield"]
    assert high["method"] == "importance sampling"
    truth = float(stats.norm.sf(z_eff))
    assert 1 - high["high_yield"] <= truth <= 1 - high["low_yield"]
