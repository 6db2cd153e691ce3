"""Yield under other part distributions (tolspread.robustness) against closed forms.

One toleranced capacitor in a first-order RC low-pass whose mask passes capacitances in a
band [C_LO, C_HI]: the yield is the probability that the capacitor falls in the band, known
in closed form for each distribution (scipy.stats.truncnorm / norm; uniform by length;
binned by symmetry). The command line runs as a user runs it (subprocess).
"""
from __future__ import annotations

import json
import subprocess
import sys

import pytest
from scipy import stats

from designs import rc_capacitor_band
from tolspread.designfile import load
from tolspread.grades import builtin_catalog
from tolspread.robustness import SHAPES, reshaped, shape_yields

C0 = 10e-9
C_LO, C_HI = 10.2e-9, 11.6e-9   # relative deviations +2 % .. +16 %


@pytest.fixture
def band_design(tmp_path):
    data = rc_capacitor_band({"name": "C-test-5", "kind": "C", "tolerance_pct": 5.0},  # default shape
                             C_LO, C_HI, samples=40000, seed=5)
    path = tmp_path / "band.json"
    path.write_text(json.dumps(data))
    return path


def _closed_forms() -> dict[str, float]:
    lo = C_LO / C0 - 1      # +2 %
    tol = 0.05
    two = stats.truncnorm(-2, 2, scale=tol / 2)     # 5 % = 2 sigma, truncated at the limits
    three = stats.truncnorm(-3, 3, scale=tol / 3)   # 5 % = 3 sigma, truncated
    return {
        "as graded": two.sf(lo),
        "3 sigma": three.sf(lo),
        "uniform": (tol - lo) / (2 * tol),
        # centre +-2 % removed: the upper hump [2 %, 5 %] holds half the parts (symmetry)
        "binned": 0.5,
        # one toleranced part: sharing its variance with a reel leaves its distribution alone
        "shared reel": two.sf(lo),
    }


def test_shape_yields_match_closed_forms(band_design):
    truth = _closed_forms()
    results = shape_yields(load(str(band_design)))
    assert [r.shape for r in results] == list(SHAPES)
    for r in results:
        # five checks at once: each at 99.9 % (Wilson interval from scipy.stats.binomtest)
        ci = stats.binomtest(int(r.yield_.passed), int(r.yield_.samples)).proportion_ci(0.999, method="wilson")
        assert ci.low <= truth[r.shape] <= ci.high, (r.shape, r.yield_.estimate, truth[r.shape])


def test_reshaped_keeps_name_cost_and_exact_parts():
    cat = builtin_catalog()
    g = next(g for g in cat.grades if g.kind == "R" and g.tolerance_pct == 5.0)
    b = reshaped(g, "binned")
    assert (b.name, b.cost, b.distribution, b.bin_inner_pct) == (g.name, g.cost, "binned", 2.0)
    assert reshaped(g, "3 sigma").coverage == 3.0
    exact = next(g for g in cat.grades if g.tolerance_pct == 0)
    assert all(reshaped(exact, s) == exact for s in SHAPES)


def test_analyze_shapes_on_the_command_line(band_design):
    r = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "shapes", str(band_design), "--samples",
                        "20000", "--json"], capture_output=True, text=True, timeout=300)
    assert r.returncode == 0, r.stderr
    rows = json.loads(r.stdout)["shapes"]
    truth = _closed_forms()
    for row in rows:
        y = row["yield"]
        ci = stats.binomtest(y["passed"], y["samples"]).proportion_ci(0.999, method="wilson")
        assert ci.low <= truth[row["shape"]] <= ci.high
    text = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "shapes", str(band_design), "--samples",
                           "5000"], capture_output=True, text=True, timeout=300)
    assert text.returncode == 0 and "uniform inside the tolerance" in text.stdout
    assert "measurement of real parts" in text.stdout


def test_report_says_where_the_recommendation_changes(band_design, tmp_path):
    # The search under each shape, written into the review report: a uniform reading of a 5 %
    # capacitor passes (5 - 2) / 10 = 30 % of boards (closed form above), so a 50 % target that
    # a 5 % part meets as graded needs another grade under "uniform": the report must say so.
    from tolspread.analysis import analyze
    from tolspread.report import build_report, write_report
    from tolspread.report.build import FIGURE_BOARDS
    from tolspread.robustness import shape_recommendations

    design = load(str(band_design))
    choices = shape_recommendations(design, 0.15, samples=3000, shapes=("as graded", "uniform"))
    result = analyze(design, samples=3000, curves=FIGURE_BOARDS)
    out = tmp_path / "r.html"
    write_report(build_report(result, target=0.15, shape_choices=choices), str(out))
    html = out.read_text(encoding="utf-8")
    assert "Cheapest grades found" in html and "the reference set" in html
    if any(c.changed for c in choices):
        assert "The recommendation would change under uniform" in html
    else:
        assert "The recommendation is the same under every shape" in html


def test_recommend_shapes_on_the_command_line(band_design):
    # the same search, asked for with 'tolspread recommend --shapes' as a user does
    r = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "recommend", str(band_design), "--target-yield",
                        "0.15", "--samples", "3000", "--shapes"], capture_output=True, text=True, timeout=600)
    assert r.returncode == 0, r.stderr
    assert "the search under each distribution shape" in r.stdout
    for shape in SHAPES:
        assert f"    {shape}" in r.stdout
    assert ("the recommendation would change under" in r.stdout
            or "the recommendation is the same under every shape" in r.stdout)
