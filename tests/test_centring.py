"""Centred values (tolspread centre): neighbouring preferred values at the same grades.

Checks: the neighbours against the preferred-number tables (IEC 60063, REFERENCES.md
section 1); the choice and the yields against a closed form (first-order RC low-pass with
one toleranced capacitor: the yield is a difference of two normal CDF values, scipy.stats);
the command line as a user runs it (subprocess).
"""
from __future__ import annotations

import json
import subprocess
import sys

import pytest
from scipy import stats

from designs import rc_capacitor_band
from tolspread.centring import neighbours
from tolspread.grades import builtin_catalog
from tolspread.designfile import load


def _grade(name: str):
    return builtin_catalog()[name]


def test_neighbours_follow_the_series_tables():
    # IEC 60063 Table 2 (E96): ... 9.76, 10.0, 10.2 ...; Table 1 (E24): ... 20, 22, 24 ...
    r1 = next(g for g in builtin_catalog().grades if g.kind == "R" and g.tolerance_pct == 1.0)
    c5 = next(g for g in builtin_catalog().grades if g.kind == "C" and g.tolerance_pct == 5.0)
    assert neighbours(10e3, r1) == ("E96", pytest.approx(9.76e3), pytest.approx(10.2e3))
    assert neighbours(22e-9, c5) == ("E24", pytest.approx(20e-9), pytest.approx(24e-9))
    # a value between series values: the nearest on each side (E24 4.3 < 4.5 < 4.7)
    assert neighbours(4.5e-9, c5)[1:] == (pytest.approx(4.3e-9), pytest.approx(4.7e-9))


SIGMA = 0.025          # 5 % read as two standard deviations, not truncated
C_LO, C_HI = 10.2e-9, 11.6e-9   # the band of capacitances that meets both spans


def _closed_form_yield(c: float) -> float:
    return stats.norm.cdf((C_HI / c - 1) / SIGMA) - stats.norm.cdf((C_LO / c - 1) / SIGMA)


@pytest.fixture
def off_centre(tmp_path):
    grade = {"name": "C-test-5", "kind": "C", "tolerance_pct": 5.0, "coverage": 2.0, "truncate": False}
    data = rc_capacitor_band(grade, C_LO, C_HI, samples=20000, seed=3, name="RC off centre (test)")
    path = tmp_path / "off.json"
    path.write_text(json.dumps(data))
    return path


def _run(*args):
    return subprocess.run([sys.executable, "-m", "tolspread.app.cli", *args], capture_output=True, text=True,
                          timeout=300)


def test_centre_picks_the_closed_form_best_value(off_centre, tmp_path):
    # E24 neighbours of 10n: 9.1n and 11n. Closed-form yields decide which is best.
    yields = {c: _closed_form_yield(c) for c in (9.1e-9, 10e-9, 11e-9)}
    best = max(yields, key=yields.get)
    assert best == 11e-9  # the band 10.2n-11.6n is centred near 10.9n
    out = tmp_path / "centred.json"
    r = _run("centre", str(off_centre), "--json", "-o", str(out))
    assert r.returncode == 0, r.stderr
    res = json.loads(r.stdout)
    assert [(m["ref"], m["new"]) for m in res["moves"]] == [("C1", pytest.approx(11e-9))]
    before, after = res["yield_before"], res["yield_after"]
    assert before["ci95"][0] <= yields[10e-9] <= before["ci95"][1]
    assert after["ci95"][0] <= yields[11e-9] <= after["ci95"][1]
    assert res["exhaustive"] and res["combinations"] == 3  # R1 is exact: only C1 moves
    # -o writes the design with the new values (also with --json)
    assert load(str(out)).parts[1].value == pytest.approx(11e-9)


def test_centre_text_output_and_bad_input(off_centre, tmp_path):
    r = _run("centre", str(off_centre), "--samples", "4000")
    assert r.returncode == 0, r.stderr
    assert "C1" in r.stdout and "11 nF" in r.stdout and "confirm it with measured parts" in r.stdout
    bad = tmp_path / "nomask.json"
    data = json.loads(off_centre.read_text())
    data["mask"] = []
    bad.write_text(json.dumps(data))
    r = _run("centre", str(bad))
    assert r.returncode == 2 and "mask" in r.stderr and "Traceback" not in r.stderr
    r = _run("centre", str(off_centre), "--screen-boards", "0")
    assert r.returncode == 2 and "--screen-boards" in r.stderr
