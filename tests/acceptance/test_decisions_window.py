"""Issue 16 from the window: the decisions a design review asks about, done as a person does them.

The window is started through the console script's own function (tests/acceptance/conftest.py);
menus are QActions triggered, buttons clicked with the mouse, file dialogs answered with a
path only. Each number shown is checked against an outside fact (closed form, scipy.stats)
or against the library function the command line also prints.
"""
from __future__ import annotations

import json
import math
import re

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from PySide6.QtTest import QTest
from scipy import stats

from .conftest import WAIT_MS, log_errors, wait_idle

pytestmark = pytest.mark.gui


def action(window, name: str) -> QAction:
    hits = [a for a in window.findChildren(QAction) if a.objectName() == name]
    assert len(hits) == 1, f"no single action named {name!r}"
    return hits[0]


def rc_file(tmp_path, z_crit: float, tol_pct: float = 1.0, samples: int = 2000, **analysis):
    """One RC low-pass section with an exact capacitor and a floor at the gain a resistor
    ``z_crit`` standard deviations high gives (|H|^2 = 1 / (1 + (2 pi f R C)^2), circuit theory):
    the failure rate of a normal untruncated resistor is Phi(-z_crit) (scipy.stats.norm.sf)."""
    r0, c0, f2, sigma = 10e3, 10e-9, 2e3, tol_pct / 200
    limit = -10 * math.log10(1 + (2 * math.pi * f2 * r0 * (1 + z_crit * sigma) * c0) ** 2)
    data = {
        "format": "tolspread-design", "version": 2, "name": "one RC section (test)",
        "grades": [{"name": "R-test", "kind": "R", "tolerance_pct": tol_pct, "coverage": 2.0, "truncate": False},
                   {"name": "C-test", "kind": "C", "tolerance_pct": 0.0}],
        "parts": [{"ref": "R1", "value": "10k", "grade": "R-test"},
                  {"ref": "C1", "value": "10n", "grade": "C-test"}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": samples, "seed": 1, "f_start": 10, "f_stop": 100e3, "points": 40, **analysis},
        "mask": [{"kind": "floor", "f1": f2 / 2, "f2": f2, "limit1": limit, "quantity": "gain",
                  "relative": False, "name": "passband floor"}],
    }
    path = tmp_path / "rc.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path, float(stats.norm.sf(z_crit))


PCT = r"([0-9.]+) %"


# --- 1. the high-yield estimate in the yield panel ------------------------------------------------
def test_yield_panel_shows_the_high_yield_estimate_when_few_boards_fail(starter, qtbot, tmp_path):
    # Phi(-3.9) ~ 4.8e-5: 2,000 plain boards show no failure; the panel gives the importance
    # estimate, whose interval holds the closed-form tail (scipy.stats.norm.sf)
    path, truth = rc_file(tmp_path, 3.9)
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: w.results.high_yield.isVisible(), timeout=WAIT_MS)
    text = w.results.high_yield.text()
    assert "importance sampling" in text and "Plain sampling would need" in text
    m = re.search(rf"interval {PCT} to {PCT}", text)
    low, high = (float(g) / 100 for g in m.groups())
    assert low <= 1 - truth <= high
    assert "plain sampling" in text.lower()  # says which method gave the headline
    assert "2,000 of 2,000 boards pass" in w.results.yield_label.text()
    assert not log_errors()


def test_yield_panel_says_why_no_high_yield_estimate_over_a_range(starter, qtbot, tmp_path):
    path, _ = rc_file(tmp_path, 3.9, operating_range_c=[-40, 85])
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: w.results.high_yield.isVisible(), timeout=WAIT_MS)
    assert "not made" in w.results.high_yield.text() and "operating range" in w.results.high_yield.text()


def test_no_high_yield_line_when_many_boards_fail(window, qtbot):
    # the demo fails on many boards: the plain interval is enough, nothing more is said
    wait_idle(qtbot, window)
    assert window.results.yield_label.text()
    assert not window.results.high_yield.isVisible()
