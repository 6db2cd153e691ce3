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


# --- 2. distribution shapes ----------------------------------------------------------------------
def band_file(tmp_path, c_lo: float, c_hi: float, samples: int = 3000):
    """R1 10k exact, C1 10n 5 %; the mask passes C in [c_lo, c_hi] (tests/designs.py)."""
    from designs import rc_capacitor_band

    path = tmp_path / "band.json"
    path.write_text(json.dumps(rc_capacitor_band({"name": "C-test-5", "kind": "C", "tolerance_pct": 5.0},
                                                 c_lo, c_hi, samples=samples, seed=5)), encoding="utf-8")
    return path


def table_rows(table) -> list[list[str]]:
    return [[table.item(i, j).text() if table.item(i, j) else "" for j in range(table.columnCount())]
            for i in range(table.rowCount())]


def click(widget) -> None:
    QTest.mouseClick(widget, Qt.MouseButton.LeftButton)


def wait_dialog_done(qtbot, dlg, timeout: int = 60_000) -> None:
    qtbot.waitUntil(lambda: not dlg.running and dlg.run_button.isEnabled(), timeout=timeout)


def test_distribution_shapes_dialog_shows_each_shape_and_flags_a_changed_recommendation(starter, qtbot, tmp_path):
    from test_robustness import _closed_forms  # the closed forms of each shape (scipy.stats.truncnorm)

    w = starter.launch(str(band_file(tmp_path, 10.2e-9, 11.6e-9, samples=20000)))
    wait_idle(qtbot, w)
    action(w, "shapes").trigger()
    dlg = w.shapes_dialog
    assert dlg.isVisible() and w.isEnabled()  # the work runs in the background
    wait_dialog_done(qtbot, dlg)
    rows = table_rows(dlg.yields)
    truth = _closed_forms()
    assert [r[0] for r in rows] == list(truth)
    for shape, _model, y, _interval, _lower in rows:
        n = 20000
        passed = round(float(y.rstrip(" %")) / 100 * n)
        ci = stats.binomtest(passed, n).proportion_ci(0.999, method="wilson")  # five checks at 99.9 %
        assert ci.low <= truth[shape] <= ci.high, (shape, y, truth[shape])
    assert not dlg.choices.isVisible()

    # a band of +-4 % and a target of 90 %: uniform 5 % parts pass 80 % (4/5, by length), so the
    # set chosen under the catalog's normal reading (its 5 % capacitor) misses there and changes
    w2 = starter.launch(str(band_file(tmp_path, 9.6e-9, 10.4e-9)))
    wait_idle(qtbot, w2)
    action(w2, "shapes").trigger()
    dlg = w2.shapes_dialog
    wait_dialog_done(qtbot, dlg)
    click(dlg.with_target)
    dlg.target.lineEdit().selectAll()
    QTest.keyClicks(dlg.target.lineEdit(), "90")
    QTest.keyClick(dlg.target.lineEdit(), Qt.Key.Key_Tab)
    assert dlg.target.value() == 90.0
    click(dlg.run_button)
    wait_dialog_done(qtbot, dlg, timeout=120_000)
    assert dlg.choices.isVisible()
    choices = {r[0]: r for r in table_rows(dlg.choices)}
    assert "C-test-5" in choices["as graded"][1]
    assert choices["uniform"][3] == "changed" and choices["uniform"][4] == "MISSES"
    assert "depends on the distribution" in dlg.note.text()
    assert not log_errors()


# --- 4. centre values -------------------------------------------------------------------------------
def test_centre_values_dialog_applies_all_moves_as_one_undoable_edit(starter, qtbot, tmp_path):
    # C1 10n 5 % (E24) in a band of +2 % .. +16 %: at 10n a truncated normal passes
    # truncnorm(-2, 2, scale=2.5 %).sf(2 %) (scipy.stats); the next E24 value 11n puts the
    # whole +-5 % inside the band (-7.3 % .. +5.5 %): yield 1 (IEC 60063 E24: 10, 11)
    w = starter.launch(str(band_file(tmp_path, 10.2e-9, 11.6e-9)))
    wait_idle(qtbot, w)
    before_edits = w.session.undo_stack.count()
    action(w, "centre_values").trigger()
    dlg = w.centre_dialog
    wait_dialog_done(qtbot, dlg)
    assert table_rows(dlg.table) == [
        ["C1", "10 nF", "11 nF", "E24"]]
    text = dlg.summary.text()
    now, centred = (float(x) / 100 for x in re.findall(r"yield (?:now|centred) <b>([0-9.]+) %", text))
    truth = stats.truncnorm(-2, 2, scale=0.025).sf(0.02)
    n = w.session.design.analysis.samples
    ci = stats.binomtest(round(now * n), n).proportion_ci(0.999, method="wilson")
    assert ci.low <= truth <= ci.high
    assert centred == 1.0 and "gain <b>+" in text and "standard error" in text
    assert dlg.apply_button.isEnabled()
    click(dlg.apply_button)
    d = w.session.design
    assert d.parts[d.part_index("C1")].value == pytest.approx(11e-9)
    assert w.session.undo_stack.count() == before_edits + 1
    assert "centre values" in w.session.undo_stack.undoText()
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: "100.00 %" in w.results.yield_label.text(), timeout=WAIT_MS)
    action(w, "undo").trigger()
    d = w.session.design
    assert d.parts[d.part_index("C1")].value == pytest.approx(10e-9)
    assert dlg.apply_button.isEnabled()  # back on the searched design: it can be applied again
    assert not log_errors()


def test_closing_the_window_during_a_centre_search_stops_it(window, qtbot):
    action(window, "centre_values").trigger()
    dlg = window.centre_dialog
    assert dlg.running
    assert window.close()  # nothing unsaved: closes at once
    assert not dlg.task.running  # its thread was waited for; nothing reports into a closed window
