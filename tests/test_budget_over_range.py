"""The spread budget of a design judged over an operating range and after a service life.

Over a range each span's budget is that of the board's worst margin over the judged
temperatures, fitted on the board's parts as they are at the temperature where that margin
is smallest (filters/budget.py ``worst_budget``). Checked against a closed form (a
first-order RC low-pass whose margin depends on ln R + ln C only, so each part's share is
its log deviation's variance over the sum: derived in the comments, variances by numerical
integration with scipy) and against a least-squares fit written here with numpy on the
boards evaluated at each temperature by the public ``evaluate``.
"""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import integrate

from tolspread.analysis import analyze
from tolspread.design import design_from_dict
from tolspread.evaluate import evaluate
from tolspread.metric_names import margin_name
from tolspread.sampling import Conditions
from tolspread.temperature import lived_budgets

from cli_runs import run_cli

FC_HZ = 1 / (2 * math.pi * 10e3 * 10e-9)  # the RC corner, 1591.5 Hz (common practice: fc = 1 / (2 pi R C))
EDGE = [{"name": "edge", "quantity": "gain", "kind": "floor", "f1": 10, "f2": 1500, "limit1": -4}]
BASIS = "over -40 to 85 \u00b0C, worst judged temperature"


def rc_data(r_grade: dict, c_grade: dict, analysis: dict, mask: list | None = None) -> dict:
    """A first-order RC low-pass, 10 kohm and 10 nF, with its own grades (file form)."""
    return {
        "format": "tolspread-design", "version": 2, "name": "rc over a range (invented test design)",
        "parts": [{"ref": "R1", "value": "10k", "grade": r_grade["name"]},
                  {"ref": "C1", "value": "10n", "grade": c_grade["name"]}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": 4000, "seed": 11, "f_start": 10, "f_stop": 1e5, "points": 200, **analysis},
        "mask": EDGE if mask is None else mask,
        "grades": [r_grade, c_grade],
    }


# R: 0.1 % (uniform) and a temperature coefficient of 600 +- 300 ppm/K (uniform in the spread);
# C: 1 % (uniform), no temperature coefficient: the only temperature-dependent part is R1
R_TC = {"name": "R-tc", "kind": "R", "tolerance_pct": 0.1, "distribution": "uniform",
        "tempco_ppm": 600, "tempco_spread_ppm": 300}
C_TOL = {"name": "C-1", "kind": "C", "tolerance_pct": 1, "distribution": "uniform"}


def log_variance(a: float, b: float) -> float:
    """Var[ln(1 + a + b u)] for u uniform in -1..1 (numerical integration, scipy.integrate.quad)."""
    m1 = integrate.quad(lambda u: 0.5 * math.log1p(a + b * u), -1, 1)[0]
    m2 = integrate.quad(lambda u: 0.5 * math.log1p(a + b * u) ** 2, -1, 1)[0]
    return m2 - m1 * m1


def shares(budget) -> dict[str, float]:
    return {e.ref: e.share for e in budget.entries}


def test_a_temperature_coefficient_dominates_the_budget_over_the_range_and_not_at_25_degrees():
    # Closed form. The floor span ends at 1500 Hz, below the corner: its margin is smallest
    # where the corner is lowest, i.e. where R C is largest. R1's coefficient is positive for
    # every board (300..900 ppm/K), so R1 is largest at 85 degC (+1.8..5.4 %, far beyond its
    # 0.1 % tolerance) and every board's worst temperature is 85 degC. There the margin is a
    # smooth function of ln R + ln C (fc = 1 / (2 pi R C)), so to first order
    # y = a - s (x_R + x_C) with independent x_R = ln(1 + e_R) + ln(1 + tc 60 K) and
    # x_C = ln(1 + e_C): the least-squares shares are Var(x_i) / (Var(x_R) + Var(x_C)).
    over = analyze(design_from_dict(rc_data(R_TC, C_TOL, {"operating_range_c": [-40, 85]})), with_corners=False)
    at25 = analyze(design_from_dict(rc_data(R_TC, C_TOL, {})), with_corners=False)
    v_r = log_variance(0.0, 0.001) + log_variance(600e-6 * 60, 300e-6 * 60)
    v_c = log_variance(0.0, 0.01)
    expect_over = v_r / (v_r + v_c)             # about 0.77
    expect_25 = log_variance(0.0, 0.001) / (log_variance(0.0, 0.001) + v_c)  # about 0.01
    b_over = over.budget[margin_name(over.design.mask[0])]
    b_25 = at25.budget[margin_name(at25.design.mask[0])]
    # every board's margin is smallest at 85 degC (index 2 of -40, 25, 85)
    assert over.temperature is not None and over.temperature.temperatures_c == (-40.0, 25.0, 85.0)
    assert np.all(over.temperature.worst_index[:, 0] == 2)
    assert b_over.entries[0].ref == "R1" and b_25.entries[0].ref == "C1"
    # sampling error of a share from 4000 boards: about 0.005; the fit's curvature: under 0.01
    assert shares(b_over)["R1"] == pytest.approx(expect_over, abs=0.02)
    assert shares(b_25)["R1"] == pytest.approx(expect_25, abs=0.01)
    assert b_over.basis == BASIS and b_25.basis == ""
    # the metrics' budgets stay at the board temperature and say so
    assert over.budget["cutoff_hz"].basis == "at 25 \u00b0C"
    assert over.budget["cutoff_hz"].to_dict()["parts"] == at25.budget["cutoff_hz"].to_dict()["parts"]


def _lstsq_shares(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, float]:
    """Shares beta_i^2 Var(x_i) / Var(y) of an ordinary least-squares fit with an intercept
    (numpy.linalg.lstsq), scaled to add to 1 when they add to more (the budget's stated rule
    for regressors correlated against each other: choosing each board's worst temperature
    correlates R1's and C1's deviations there), and the remainder 1 - their sum."""
    a = np.column_stack([np.ones(len(y)), x])
    beta = np.linalg.lstsq(a, y, rcond=None)[0][1:]
    s = beta ** 2 * x.var(axis=0) / y.var()
    if s.sum() > 1:
        s = s / s.sum()
    return s, 1 - s.sum()


def test_the_budget_over_the_range_is_the_least_squares_fit_at_each_boards_worst_temperature():
    # R1's coefficient spreads across zero (0 +- 500 ppm/K), so some boards are worst at
    # -40 degC and others at 85 degC, and the stopband ceiling (worst where the corner is
    # highest) at the other end from the passband floor: each span reads its own boards'
    # worst temperature. C1 has a small coefficient of its own (0 +- 30 ppm/K, C0G-like).
    r = {"name": "R-tc0", "kind": "R", "tolerance_pct": 0.5, "distribution": "uniform",
         "tempco_ppm": 0, "tempco_spread_ppm": 500}
    c = {"name": "C-c0g", "kind": "C", "tolerance_pct": 2, "tempco_spread_ppm": 30}
    mask = EDGE + [{"name": "stop", "quantity": "gain", "kind": "ceiling", "f1": 20000, "f2": 1e5, "limit1": -20}]
    d = design_from_dict(rc_data(r, c, {"operating_range_c": [-40, 85], "samples": 3000}, mask))
    res = analyze(d, with_corners=False)
    temps = (-40.0, 25.0, 85.0)
    runs = [evaluate(d, curves=False, metrics=False, conditions=Conditions(t, t)) for t in temps]
    margins = np.stack([e.margins for e in runs])      # (T, S, spans)
    values = np.stack([e.values for e in runs])        # (T, S, P)
    nominal = np.array([10e3, 10e-9])
    worst_at = np.argmin(margins, axis=0)              # (S, spans), the first temperature on a tie
    rows = np.arange(d.analysis.samples)
    assert set(np.unique(worst_at[:, 0])) == {0, 2}   # both ends occur
    assert np.mean(worst_at[:, 0] == worst_at[:, 1]) < 0.05  # the spans are worst at opposite ends
    for j, span in enumerate(d.mask):
        y = margins[worst_at[:, j], rows, j]
        x = np.log(values[worst_at[:, j], rows] / nominal)
        want, rest = _lstsq_shares(x, y)
        b = res.budget[margin_name(span)]
        got = shares(b)
        np.testing.assert_allclose([got["R1"], got["C1"]], want, rtol=1e-7, atol=1e-12)
        assert b.remainder == pytest.approx(max(0.0, rest), abs=1e-9)
        np.testing.assert_array_equal(res.ensemble.margins[:, j], y)  # the margin judged is the worst


def test_the_budget_after_the_service_life_names_the_part_that_drifts():
    # R1 drifts +-2 % at its 1,000 h rating, with no temperature acceleration (activation 0):
    # after 4,000 h its life drift is 2 % x sqrt(4000 / 1000) = 4 % (the square-root time law
    # the grade states, filters/temperature_physics.life_fraction), uniform on the drift score.
    # Same closed form as above: shares Var(x_i) / (Var(x_R) + Var(x_C)).
    r = {"name": "R-life", "kind": "R", "tolerance_pct": 0.1, "distribution": "uniform",
         "life_drift_pct": 2, "life_hours": 1000, "life_temp_c": 70}
    d = design_from_dict(rc_data(r, C_TOL, {"service_life": {"hours": 4000, "temperature_c": 70}}))
    res = analyze(d, with_corners=False)
    v_r = log_variance(0.0, 0.001) + log_variance(0.0, 0.04)
    v_c = log_variance(0.0, 0.01)
    after = res.life_budget[margin_name(d.mask[0])]
    assert after.basis == f"after {4000 / 8766:.3g} years"  # 8,766 h a year (365.25 days, common practice)
    assert after.entries[0].ref == "R1"
    assert shares(after)["R1"] == pytest.approx(v_r / (v_r + v_c), abs=0.02)
    # at delivery, at the board temperature: C1 dominates and nothing is relabelled
    assert res.budget[margin_name(d.mask[0])].entries[0].ref == "C1"
    assert all(not b.basis for b in res.budget.values())
    assert res.life is not None and res.life.worst_margins is None  # the per-board arrays are not kept


def test_at_one_temperature_nothing_changes():
    d = design_from_dict(rc_data(R_TC, C_TOL, {"samples": 500}))
    res = analyze(d, with_corners=False)
    assert res.temperature is None and res.life is None and res.life_budget == {}
    assert all(b.basis == "" and "basis" not in b.to_dict() for b in res.budget.values())
    again, after, life = lived_budgets(d, res.prepared, res.ensemble, res.budget, None, None)
    assert again is res.budget and after == {} and life is None


def test_the_terminal_json_and_report_show_the_budget_over_the_range(tmp_path):
    data = rc_data(R_TC, C_TOL, {"operating_range_c": [-40, 85], "samples": 1000,
                                 "service_life": {"hours": 87660, "temperature_c": 40}})
    path = tmp_path / "rc_range.json"
    path.write_text(json.dumps(data))
    js, html = tmp_path / "r.json", tmp_path / "r.html"
    proc = run_cli("analyze", str(path), "--json", str(js), "--report", str(html))
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(js.read_text())
    edge = doc["budget"]["margin.edge"]
    assert edge["basis"] == BASIS and edge["parts"][0]["ref"] == "R1"
    assert doc["budget"]["cutoff_hz"]["basis"] == "at 25 \u00b0C"
    assert doc["budget_after_life"]["margin.edge"]["basis"] == "after 10 years, worst of -40 to 85 \u00b0C"
    rows = [ln for ln in proc.stdout.splitlines() if ln.strip().startswith("margin of 'edge'")]
    over_row = next(ln for ln in rows if "worst judged temperature" in ln)
    assert over_row.split("temperature", 1)[1].split()[0] == "R1"  # the first part named is R1
    assert any("after 10 years" in ln for ln in rows)
    assert "note: over a range each span's budget is that of the board's worst margin" in proc.stdout
    assert "note: these metric statistics are at the board temperature" in proc.stdout
    page = html.read_text()
    assert "margin of &#x27;edge&#x27; (dB), over -40 to 85 \u00b0C, worst judged temperature" in page or \
        "margin of 'edge' (dB), over -40 to 85 \u00b0C, worst judged temperature" in page
    assert "Over a range each span&#x27;s budget" in page or "Over a range each span's budget" in page
    # one temperature: no judged column, no basis, no after-life budget
    plain = tmp_path / "plain.json"
    plain.write_text(json.dumps(rc_data(R_TC, C_TOL, {"samples": 500})))
    js2 = tmp_path / "p.json"
    proc2 = run_cli("analyze", str(plain), "--json", str(js2))
    doc2 = json.loads(js2.read_text())
    assert "budget_after_life" not in doc2 and all("basis" not in b for b in doc2["budget"].values())
    assert "worst judged temperature" not in proc2.stdout and "note: over a range" not in proc2.stdout
    assert "these metric statistics are at the board temperature" not in proc2.stdout


def test_a_metric_no_board_has_reads_not_found_over_the_range(tmp_path):
    # the notch example's second pole pair of its low-pass stage is not found on any board
    # (its 'pair 2' metrics are NaN): over a range the table of f0 and Q over temperature
    # said "nan is not a finite value" and 'tolspread analyze' stopped with exit 2 (defect
    # seen while checking the budget over a range on every example)
    from pathlib import Path

    data = json.loads((Path(__file__).resolve().parent.parent / "assets" / "examples" /
                       "weigh_scale_notch.json").read_text(encoding="utf-8"))
    data["analysis"].update(operating_range_c=[-40, 85], samples=300)
    path = tmp_path / "notch_range.json"
    path.write_text(json.dumps(data))
    proc = run_cli("analyze", str(path))
    assert proc.returncode == 0, proc.stderr
    table = proc.stdout.split("STAGE f0 AND Q OVER TEMPERATURE", 1)[1].split("\n\n", 1)[0]
    rows = [ln for ln in table.splitlines() if "pair 2" in ln]
    assert rows and all(ln.count("not found") == 3 for ln in rows)  # one cell per judged temperature


def test_the_budget_over_the_range_does_not_depend_on_chunks_or_on_keeping_the_regressors(monkeypatch):
    import tolspread.budget as budget
    from tolspread.temperature import judged_conditions

    d = design_from_dict(rc_data(R_TC, C_TOL, {"operating_range_c": [-40, 85], "samples": 1500}))
    res = analyze(d, with_corners=False, budget=False)
    over = res.temperature
    conds = [judged_conditions(d, t) for t in over.temperatures_c]
    whole = budget.worst_budget(res.ensemble, res.prepared, over.worst_margins, over.worst_index, conds, "x")
    monkeypatch.setattr(budget, "WORST_KEEP", 0)  # made again for the second pass, in chunks of 400 boards
    pieces = budget.worst_budget(res.ensemble, res.prepared, over.worst_margins, over.worst_index, conds, "x",
                                 chunk=400)
    for name, b in whole.items():
        got = shares(pieces[name])
        for ref, share in shares(b).items():
            assert got[ref] == pytest.approx(share, rel=1e-9, abs=1e-12)
