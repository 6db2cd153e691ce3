"""Constraints and real costs for the grade search (tolspread.constraints, tolspread.grade_sets,
``tolspread recommend`` options), checked against outside facts.

Checks: price breaks read as a price list is read (common practice: the unit price of the
largest break at or below the quantity); money per board summed independently from the
catalog file; which capacitors the response depends on, against the first-order RC closed
form; locked and forbidden grades respected; the class II warning and the search without
class II dielectrics (common practice keeps them out of filter signal paths); the command
line as a user runs it (subprocess).
"""
from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest

from tolspread.constraints import is_class_ii, signal_path_capacitors, unit_price
from tolspread.design import design_from_dict
from tolspread.grades import Grade, builtin_catalog

CATALOG = {
    "format": "tolspread-catalog", "version": 1,
    "grades": [
        {"name": "R-a-5", "kind": "R", "tolerance_pct": 5, "cost": 1.0, "technology": "thick-film chip",
         "prices": [[1, 0.010], [1000, 0.0020], [10000, 0.0008]]},
        {"name": "R-b-1", "kind": "R", "tolerance_pct": 1, "cost": 2.0, "technology": "thick-film chip",
         "prices": [[1, 0.020], [1000, 0.0040], [10000, 0.0015]]},
        {"name": "C-x-10", "kind": "C", "tolerance_pct": 10, "cost": 1.0, "technology": "X7R ceramic (class II)",
         "prices": [[1, 0.010], [1000, 0.0015], [10000, 0.0006]]},
        {"name": "C-g-5", "kind": "C", "tolerance_pct": 5, "cost": 3.0, "technology": "C0G/NP0 ceramic",
         "prices": [[1, 0.050], [1000, 0.0100], [10000, 0.0040]]},
        {"name": "C-g-2", "kind": "C", "tolerance_pct": 2, "cost": 5.0, "technology": "C0G/NP0 ceramic",
         "prices": [[1, 0.090], [1000, 0.0200], [10000, 0.0090]]},
    ],
}


def test_unit_price_reads_the_breaks():
    g = Grade("R-a-5", "R", 5.0, prices=((1.0, 0.010), (1000.0, 0.0020), (10000.0, 0.0008)))
    assert unit_price(g, 1) == 0.010 and unit_price(g, 999) == 0.010
    assert unit_price(g, 1000) == 0.0020 and unit_price(g, 5000) == 0.0020 and unit_price(g, 10**6) == 0.0008
    assert unit_price(Grade("x", "R", 5.0), 100) is None


def test_class_ii_by_code_and_words():
    cat = builtin_catalog()
    assert any(is_class_ii(g) for g in cat.grades if "X7R" in g.name)
    assert not any(is_class_ii(g) for g in cat.grades if "C0G" in g.name)
    assert is_class_ii(Grade("C-y5v", "C", 20.0, technology="Y5V ceramic"))  # EIA-198 code (REFERENCES.md section 3)


def _rc(topology: str, r: str, c: str, f1: float, f2: float, limit: float, kind: str = "floor") -> dict:
    return {"format": "tolspread-design", "version": 2, "name": "RC (test)",
            "parts": [{"ref": "R1", "value": r, "grade": "R-thick-1"}, {"ref": "C1", "value": c, "grade": "C-C0G-5"}],
            "stages": [{"topology": topology, "parts": {"R1": "R1", "C1": "C1"}}],
            "analysis": {"samples": 2000, "seed": 1, "f_start": 0.1, "f_stop": 1e5, "points": 80},
            "mask": [{"kind": kind, "f1": f1, "f2": f2, "limit1": limit, "relative": False, "name": "band"}]}


def test_signal_path_capacitors_against_the_closed_form():
    # High-pass RC, corner 1/(2 pi R C). Gain |H|^2 = x^2 / (1 + x^2), x = 2 pi f R C (circuit theory):
    # a +1 % change of C moves the gain by d = 10 log10(|H(1.01x)|^2 / |H(x)|^2) dB.
    def moved_db(f: float, r: float, c: float) -> float:
        x = 2 * math.pi * f * r * c
        return 10 * math.log10((1.01 * x) ** 2 / (1 + (1.01 * x) ** 2) * (1 + x ** 2) / x ** 2)

    # corner 1.6 Hz, judged from 1 kHz: the response does not depend on C (d ~ 1e-7 dB)
    far = design_from_dict(_rc("rc_highpass", "100k", "1u", 1e3, 1e4, -1.0))
    assert moved_db(1e3, 100e3, 1e-6) < 0.01 and signal_path_capacitors(far) == set()
    # corner 1.6 kHz, judged around it: it does (d ~ 0.04 dB)
    near = design_from_dict(_rc("rc_highpass", "10k", "10n", 1e3, 1e4, -8.0))
    assert moved_db(1e3, 10e3, 10e-9) > 0.01 and signal_path_capacitors(near) == {"C1"}


def _run(*args, timeout=600):
    return subprocess.run([sys.executable, "-m", "tolspread.app.cli", *args], capture_output=True, text=True,
                          timeout=timeout)


@pytest.fixture
def priced_files(tmp_path):
    cat = tmp_path / "catalog.json"
    cat.write_text(json.dumps(CATALOG))
    d = _rc("rc_lowpass", "10k", "10n", 100, 1000, -1.6)  # nominal -1.445 dB at 1 kHz
    d["parts"][0]["grade"], d["parts"][1]["grade"] = "R-b-1", "C-g-2"
    d["grades"] = CATALOG["grades"]
    d["purchase"] = {"boards": 5000, "currency": "EUR"}
    design = tmp_path / "design.json"
    design.write_text(json.dumps(d))
    return design, cat


def test_money_per_board_and_constraints(priced_files):
    design, _ = priced_files
    r = _run("recommend", str(design), "--target-yield", "0.9", "--samples", "2000", "--allow-class-ii")
    assert r.returncode == 0, r.stderr
    assert "EUR per board at 5,000 boards" in r.stdout
    chosen = {line.split()[0]: line.split()[3] for line in r.stdout.splitlines()
              if line.strip().startswith(("R1 ", "C1 "))}
    # the money per board of the chosen set, summed from the catalog's breaks at 5,000 (1,000 break)
    price = {g["name"]: [p for q, p in g["prices"] if q <= 5000][-1] for g in CATALOG["grades"]}
    total = price[chosen["R1"]] + price[chosen["C1"]]
    assert f"total EUR per board at 5,000 boards: {total:.4g}" in r.stdout
    # locked: R1 keeps R-b-1; forbidden: C1 gets no X7R
    r = _run("recommend", str(design), "--target-yield", "0.9", "--samples", "2000", "--lock", "R1",
             "--forbid", "C1=X7R")
    assert r.returncode == 0, r.stderr
    rows = {line.split()[0]: line.split() for line in r.stdout.splitlines() if line.strip().startswith(("R1 ", "C1 "))}
    assert rows["R1"][3] == "R-b-1" and "locked" in rows["R1"]
    assert rows["C1"][3] != "C-x-10"


def test_class_ii_warning_offers_a_set_without_them(priced_files):
    design, _ = priced_files
    r = _run("recommend", str(design), "--target-yield", "0.5", "--samples", "2000",
             "--compare", "C1=C-g-5")
    assert r.returncode == 0, r.stderr
    # the loose target lets the cheap X7R grade through; the response depends on C1
    assert "C-x-10" in r.stdout and "Warning: C1 would get class II" in r.stdout
    side = r.stdout[r.stdout.index("grade sets side by side"):]
    assert "no class II" in side and "yours 1" in side and "C1 C-g-5" in side
    assert "no class II: C1 C-x-10" not in side


def test_bad_constraint_options(priced_files):
    design, _ = priced_files
    for args, word in ((["--forbid", "C1"], "REF=WORD"), (["--lock", "R9"], "R9"),
                       (["--compare", "R1=nonsense"], "nonsense"), (["--compare", "C1=R-a-5"], "C1"),
                       (["--forbid", "C1=ceramic", "--forbid", "C1=film"], "forbidden")):
        r = _run("recommend", str(design), "--target-yield", "0.9", "--samples", "500", *args)
        assert r.returncode == 2 and word in r.stderr and "Traceback" not in r.stderr, (args, r.stderr)
