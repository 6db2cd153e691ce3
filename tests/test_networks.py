"""Resistor networks and matched pairs (issue 15 item 4).

Sources named beside each check:
  [GUM]   JCGM 100:2008 via REFERENCES.md section 4: a tolerance read with coverage factor
          k = 2 has a standard deviation of tolerance / 2; for a product of powers,
          (u_c/y)^2 = sum (p_i u_i / x_i)^2 (first-order propagation, GUM 5.1.6).
  [SK]    REFERENCES.md section 6: Sallen-Key low-pass with gain K = 1 + RF/RG,
          Q = sqrt(R1 R2 C1 C2) / [C2 (R1 + R2) + R1 C1 (1 - K)].
  [NET]   REFERENCES.md section 10: a network's members share an error and differ by their
          own, sigma_own = sigma_ratio / sqrt(2) (derived, [D]).
  numpy   sample statistics of many boards.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from cli_runs import analyze_json, refused_first_line  # shared: tests/cli_runs.py

from tolspread.budget import spread_budget
from tolspread.design import design_from_dict
from tolspread.evaluate import evaluate, prepare
from tolspread.networks import board_values, member_sigma, ratio_sigma, shared_sigma
from tolspread.sampling import Conditions, draw_scores

EXAMPLE = Path(__file__).resolve().parent.parent / "assets" / "examples" / "network_antialias.json"

# a normal grade read exactly as two standard deviations (not truncated): std = tolerance / 2 [GUM]
R_NORMAL = {"name": "R-normal-1", "kind": "R", "tolerance_pct": 1.0, "truncate": False,
            "tempco_ppm": 0, "tempco_spread_ppm": 100}


def sallen_key(network: dict | None, *, r_grade: str = "R-normal-1", analysis: dict | None = None) -> dict:
    """Equal-component Sallen-Key low-pass with gain 1 + RF/RG (Q set by the ratio RF/RG)."""
    data = {
        "format": "tolspread-design", "version": 2, "name": "test (invented)",
        "parts": [{"ref": "R1", "value": "10k", "grade": r_grade},
                  {"ref": "R2", "value": "10k", "grade": r_grade},
                  {"ref": "RF", "value": "5k9", "grade": r_grade},
                  {"ref": "RG", "value": "10k", "grade": r_grade},
                  {"ref": "C1", "value": "10n", "grade": "EXACT"},
                  {"ref": "C2", "value": "10n", "grade": "EXACT"}],
        "stages": [{"topology": "sallen_key_lowpass", "options": {"gain": "resistors"},
                    "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2", "RF": "RF", "RG": "RG"}}],
        "grades": [R_NORMAL],
        "analysis": {"f_start": 10, "f_stop": 100000, "points": 60, **(analysis or {})},
    }
    if network:
        data["networks"] = [network]
    return data


NET = {"name": "RN1", "members": ["R1", "R2", "RF", "RG"], "tolerance_pct": 1.0, "ratio_pct": 0.1,
       "tracking_ppm": 5}


@pytest.mark.parametrize("method", ["random", "sobol"])
def test_member_and_ratio_spread_match_the_stated_tolerances(method):
    design = design_from_dict(sallen_key(NET))
    ens = evaluate(design, samples=40_000, seed=4, curves=False, metrics=False, method=method)
    rel = ens.values[:, :4] / np.array([10e3, 10e3, 5.9e3, 10e3]) - 1
    # one member: standard deviation = tolerance / k = 1 % / 2 [GUM]; numpy sample std of 40,000
    # boards has a relative standard error of about 1 / sqrt(2 n) = 0.35 %
    assert np.std(rel, axis=0, ddof=1) == pytest.approx(np.full(4, 0.005), rel=0.02)
    assert member_sigma(1.0) == 0.005
    # ratio of two members: standard deviation = ratio tolerance / k = 0.1 % / 2 [GUM, NET]
    ratio = (ens.values[:, 2] / ens.values[:, 3]) / 0.59 - 1
    assert np.std(ratio, ddof=1) == pytest.approx(0.0005, rel=0.02)
    assert ratio_sigma(0.1) == 0.0005
    # the derived split: shared^2 (1 + own^2) + own^2 = member^2 exactly ([NET], the product form)
    own = 0.0005 / math.sqrt(2)
    assert (1 + shared_sigma(1.0, 0.1) ** 2) * (1 + own ** 2) - 1 == pytest.approx(0.005 ** 2, rel=1e-12)
    # members are strongly correlated: corr = shared^2 / member^2 [NET]
    corr = np.corrcoef(rel[:, 0], rel[:, 1])[0, 1]
    assert corr == pytest.approx(1 - own ** 2 / 0.005 ** 2, abs=0.002)


def test_temperature_coefficients_track_within_the_tracking_figure():
    net = {**NET, "ratio_pct": 0.0, "tracking_ppm": 5}
    design = design_from_dict(sallen_key(net))
    scores = draw_scores(3, len(design.parts), 0, 20_000)
    hot = Conditions(temp_low_c=-40.0, temp_high_c=85.0)
    vals = board_values(design, np.array([p.value for p in design.parts]), design.part_grades(), scores,
                        hot, 3, "random", 0)
    # with no ratio error, R1/R2 - 1 = (TC1 - TC2) dT to first order: |TC1 - TC2| <= 5 ppm/K over
    # |dT| <= 65 K from 25 deg C bounds it by 3.25e-4 (the tracking figure's definition)
    assert np.max(np.abs(vals[:, 0] / vals[:, 1] - 1)) <= 5e-6 * 65 * (1 + 1e-3)
    # while the shared coefficient (grade spread +-100 ppm/K) still moves both together
    assert np.std(vals[:, 0] / 10e3 - 1) > 10 * 5e-6 * 65 / 2


def test_q_spread_narrower_with_a_network_as_its_sensitivities_predict():
    def q_closed(r1, r2, rf, rg, c1=10e-9, c2=10e-9):  # [SK]
        k = 1 + rf / rg
        return math.sqrt(r1 * r2 * c1 * c2) / (c2 * (r1 + r2) + r1 * c1 * (1 - k))

    nom = np.array([10e3, 10e3, 5.9e3, 10e3])
    h = 1e-6  # central differences of ln Q in ln R_i: normalized sensitivities
    sens = []
    for i in range(4):
        up, down = nom.copy(), nom.copy()
        up[i] *= math.exp(h)
        down[i] *= math.exp(-h)
        sens.append((math.log(q_closed(*up)) - math.log(q_closed(*down))) / (2 * h))
    sens = np.array(sens)
    # first-order propagation [GUM 5.1.6]: independent parts, each std 0.5 %
    predicted_independent = math.sqrt(np.sum((sens * 0.005) ** 2))
    # network: shared error moves every member alike (sum of sensitivities, 0 for Q, which is a
    # ratio of resistances) plus each member's own error with std 0.1 % / 2 / sqrt(2) [NET]
    own = 0.0005 / math.sqrt(2)
    shared = shared_sigma(1.0, 0.1)
    predicted_network = math.sqrt((sens.sum() * shared) ** 2 + np.sum((sens * own) ** 2))

    n = 6000
    independent = evaluate(design_from_dict(sallen_key(None)), samples=n, seed=2, curves=False)
    network = evaluate(design_from_dict(sallen_key(NET)), samples=n, seed=2, curves=False)
    sd_ind = np.std(np.log(independent.metrics["s1.q"]), ddof=1)
    sd_net = np.std(np.log(network.metrics["s1.q"]), ddof=1)
    # numpy sample std of 6,000 boards: relative standard error ~0.9 %
    assert sd_ind == pytest.approx(predicted_independent, rel=0.05)
    assert sd_net == pytest.approx(predicted_network, rel=0.05)
    assert sd_net < sd_ind / 5


def test_budget_gives_the_shared_error_to_the_network_not_a_member():
    design = design_from_dict(sallen_key(NET))
    ens = evaluate(design, samples=4000, seed=5, curves=False)
    budget = spread_budget(ens, prepare(design), ["s1.f0_hz"])["s1.f0_hz"]
    shares = {e.ref: e.share for e in budget.entries}
    # f0 = 1 / (2 pi sqrt(R1 R2 C1 C2)), exponents -1/2 [GUM 5.1.6, REFERENCES.md section 4]:
    # Var(ln f0) = (1/2 + 1/2)^2 shared^2 + (1/4 + 1/4) own^2
    own, shared = 0.0005 / math.sqrt(2), shared_sigma(1.0, 0.1)
    expected = shared ** 2 / (shared ** 2 + 0.5 * own ** 2)
    assert shares["RN1"] == pytest.approx(expected, abs=0.01)
    assert max(shares[r] for r in ("R1", "R2")) < 0.02
    network_entry = next(e for e in budget.entries if e.ref == "RN1")
    assert network_entry.sensitivity == pytest.approx(-1.0, abs=1e-6)  # -1/2 - 1/2 [GUM]


def test_adding_a_network_changes_no_other_part_and_no_design_without_one():
    plain = design_from_dict(sallen_key(None, analysis={"lot_share": 0.3}))
    pair = design_from_dict(sallen_key({**NET, "members": ["RF", "RG"]}, analysis={"lot_share": 0.3}))
    a = evaluate(plain, samples=500, seed=9, curves=False, metrics=False)
    b = evaluate(pair, samples=500, seed=9, curves=False, metrics=False)
    # common random numbers: R1, R2 (and the capacitors) draw the same values with or without
    # the pair; RF, RG do not
    assert np.array_equal(a.values[:, [0, 1, 4, 5]], b.values[:, [0, 1, 4, 5]])
    assert not np.array_equal(a.values[:, 2], b.values[:, 2])


def test_analyze_the_network_example_on_the_command_line(tmp_path):
    data = analyze_json(EXAMPLE, tmp_path)
    budget = data["budget"]["cutoff_hz"]["parts"]
    assert any(e["ref"] == "RN1" for e in budget)  # the network is an entry of its own


@pytest.mark.parametrize("change, field", [
    (lambda n: {**n, "members": ["R1", "R9"]}, "networks[0].members"),
    (lambda n: {**n, "ratio_pct": 1.5}, "networks[0].ratio_pct"),  # above sqrt(2) x 1 %
    (lambda n: {**n, "ratio_pct": -0.1}, "networks[0].ratio_pct"),
    (lambda n: {**n, "tolerance_pct": 0}, "networks[0].tolerance_pct"),
    (lambda n: {**n, "members": ["R1"]}, "networks[0].members"),
])
def test_bad_network_exits_2_naming_the_field(tmp_path, change, field):
    assert field in refused_first_line(sallen_key(change(NET)), tmp_path)


def test_a_part_in_two_networks_is_refused():
    data = sallen_key(NET)
    data["networks"].append({**NET, "name": "RN2", "members": ["R1", "RG"]})
    with pytest.raises(ValueError, match="already in network RN1"):
        design_from_dict(data)


def test_network_survives_save_and_load():
    from tolspread.designfile import design_to_dict

    design = design_from_dict(sallen_key(NET))
    again = design_from_dict(json.loads(json.dumps(design_to_dict(design))))
    assert again.networks == design.networks


def test_recommend_keeps_a_network_members_grade():
    from tolspread.recommend import candidate_grades

    design = design_from_dict(sallen_key({**NET, "members": ["RF", "RG"]}))
    cands = candidate_grades(design)
    # a member's value spread is the network's: another grade would name a different part
    # (separate resistors), so it is no candidate (the grade stays, as a locked part's does)
    assert [g.name for g in cands[2]] == ["R-normal-1"] and [g.name for g in cands[3]] == ["R-normal-1"]
    assert len(cands[0]) > 1  # R1 is a part of its own and may change grade
