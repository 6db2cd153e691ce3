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


def test_yield_panel_says_why_no_high_yield_estimate_with_a_network(starter, qtbot):
    # the network example passes every board; its network's shared error is drawn outside the
    # scores the estimator shifts, so the panel says the estimate was not made, and why
    from pathlib import Path

    path = Path(__file__).resolve().parents[2] / "assets" / "examples" / "network_antialias.json"
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: w.results.high_yield.isVisible(), timeout=WAIT_MS)
    assert "not made" in w.results.high_yield.text() and "resistor networks" in w.results.high_yield.text()


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


@pytest.mark.parametrize("name, dialog", [("centre_values", "centre_dialog"), ("shapes", "shapes_dialog")])
def test_closing_the_window_during_a_search_stops_it(window, qtbot, name, dialog):
    action(window, name).trigger()
    dlg = getattr(window, dialog)
    assert dlg.running
    assert window.close()  # nothing unsaved: closes at once
    assert not dlg.task.running  # its thread was waited for; nothing reports into a closed window


# --- 3 and 5: a part's own menu in the parts panel (right-click on its name) --------------------------
def part_action(qtbot, window, ref: str, name: str) -> QAction:
    """Right-click part ``ref``'s name in the parts panel; the action ``name`` of the menu shown."""
    from PySide6.QtGui import QContextMenuEvent
    from PySide6.QtWidgets import QApplication

    label = window.parts.rows[ref].label
    centre = label.rect().center()
    QApplication.sendEvent(label, QContextMenuEvent(QContextMenuEvent.Reason.Mouse, centre,
                                                    label.mapToGlobal(centre)))
    qtbot.waitUntil(lambda: getattr(window, "part_menu", None) is not None and window.part_menu.isVisible())
    hits = [a for a in window.part_menu.findChildren(QAction) if a.objectName() == name]
    hits += [a for m in window.part_menu.findChildren(type(window.part_menu)) for a in m.actions()
             if a.objectName() == name and a not in hits]
    assert len(hits) == 1, f"no single {name!r} in {ref}'s menu"
    return hits[0]


def choose(qtbot, window, ref: str, name: str) -> None:
    a = part_action(qtbot, window, ref, name)
    assert a.isEnabled()
    a.trigger()  # a click on the entry
    window.part_menu.close()


def test_measured_values_from_csv_replace_a_parts_tolerance_as_one_undoable_edit(starter, qtbot, answers, shown,
                                                                                 tmp_path):
    # R1 fails above 10.1k (rc_file: floor at the gain of R = 10k (1 + 2 x 0.5 %), C exact).
    # Boards resample the measured values (a bootstrap), so the yield is the share of measured
    # values below 10.1k: 28 of 40 = 0.7 (counting), within the boards' binomial interval.
    path, _ = rc_file(tmp_path, 2.0, samples=4000)
    values = [9805 + 10 * k for k in range(28)] + [10115 + 10 * k for k in range(12)]
    assert sum(v < 10100 for v in values) == 28
    good = tmp_path / "reel.csv"
    good.write_text("value,lot\n" + "".join(f"{v},L1\n" for v in values), encoding="utf-8")
    bad = tmp_path / "bad reel.csv"
    bad.write_text("value\n10.01k\n9.99k\nbanana\n", encoding="utf-8")
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    edits = w.session.undo_stack.count()
    row = w.parts.rows["R1"]
    assert row.slider.isVisible()

    answers.open_paths.append(str(bad))
    choose(qtbot, w, "R1", "part_measured_csv")
    problem = [s for s in shown.errors() if "Measured values" in s.title]
    assert problem and "bad reel.csv line 4" in problem[-1].text  # the file and the line named
    assert w.session.design.parts[0].measured is None and w.session.undo_stack.count() == edits
    shown.shown.clear()

    answers.open_paths.append(str(good))
    choose(qtbot, w, "R1", "part_measured_csv")
    m = w.session.design.parts[0].measured
    assert m is not None and len(m.values) == 40 and w.session.undo_stack.count() == edits + 1
    assert not row.slider.isVisible() and "40 measured, 1 lot" in row.readout.text()
    assert "lot-to-lot" in row.readout.toolTip() and "lot-to-lot" in w.status_text.text()
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: w.session.last_view is not None and
                    w.session.last_view.design.parts[0].measured is not None, timeout=WAIT_MS)
    wait_idle(qtbot, w)
    y = float(re.search(r"yield ([0-9.]+) %", w.results.yield_label.text()).group(1)) / 100
    ci = stats.binomtest(round(y * 4000), 4000).proportion_ci(0.999, method="wilson")  # scipy.stats
    assert ci.low <= 0.7 <= ci.high
    # the panel names the measured parts, says its headline interval leaves the measurement out,
    # then (computed in the background) gives the interval that counts it, with the lot caution
    qtbot.waitUntil(lambda: "with the measurement" in w.results.measured.text(), timeout=WAIT_MS)
    note = w.results.measured.text()
    assert "R1 (40 values, 1 lot)" in note and "boards' spread only" in note and "lot-to-lot" in note
    low, high = (float(g) / 100 for g in re.search(rf"interval {PCT} to {PCT}</b>", note).groups())
    # the same numbers as the library the command line prints (same boards, seed and replicates)
    from tolspread.app.qt_measured_yield import REPLICATES
    from tolspread.measured import measured_yield

    my = measured_yield(w.session.last_view.design, samples=4000, seed=1, replicates=REPLICATES)
    assert low == pytest.approx(my.low, abs=6e-5) and high == pytest.approx(my.high, abs=6e-5)
    # wider than the boards' interval alone: 40 measured values spread a proportion of 0.7 by
    # about sqrt(0.7 x 0.3 / 40) = 0.072 (binomial sd of a proportion, textbook)
    assert high - low > 2 * 1.96 * math.sqrt(0.7 * 0.3 / 40) * 0.5
    assert low <= 0.7 <= high

    action(w, "undo").trigger()
    assert w.session.design.parts[0].measured is None and row.slider.isVisible()
    action(w, "redo").trigger()
    choose(qtbot, w, "R1", "part_measured_clear")
    assert w.session.design.parts[0].measured is None and row.slider.isVisible()
    action(w, "undo").trigger()
    assert w.session.design.parts[0].measured is not None
    assert not shown.errors() and not log_errors()


def test_measured_interval_follows_the_newest_boards_and_stops_on_close(starter, qtbot, tmp_path):
    # two lots in the file: the panel's caution says few lots; New boards (a newer evaluation)
    # replaces the interval by the one on the new seed; closing the window ends the run
    from tolspread.app.qt_measured_yield import REPLICATES
    from tolspread.measured import measured_yield

    path, _ = rc_file(tmp_path, 2.0, samples=4000)
    data = json.loads(path.read_text(encoding="utf-8"))
    values = [9805.0 + 10 * k for k in range(28)] + [10115.0 + 10 * k for k in range(12)]
    data["parts"][0]["measured"] = {"values": values, "lots": ["A", "B"] * 20}
    path.write_text(json.dumps(data), encoding="utf-8")
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    label = w.results.measured
    qtbot.waitUntil(lambda: "with the measurement" in label.text(), timeout=WAIT_MS)
    assert "R1 (40 values, 2 lots)" in label.text() and "Only 2 lots" in label.text()
    first = label.text()
    QTest.mouseClick(w.parts.redraw, Qt.MouseButton.LeftButton)  # the next seed
    qtbot.waitUntil(lambda: w.session.last_view.seed != 1 and not w.session.busy, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: "with the measurement" in label.text() and label.text() != first, timeout=WAIT_MS)
    seed = w.session.last_view.seed
    my = measured_yield(w.session.last_view.design, samples=4000, seed=seed, replicates=REPLICATES)
    low, high = (float(g) / 100 for g in re.search(rf"interval {PCT} to {PCT}</b>", label.text()).groups())
    assert low == pytest.approx(my.low, abs=6e-5) and high == pytest.approx(my.high, abs=6e-5)
    # while C1's tolerance slider is dragged (previews on the first boards) nothing is computed
    from PySide6.QtCore import QPoint
    from PySide6.QtWidgets import QStyle, QStyleOptionSlider

    slider = w.parts.rows["C1"].slider
    opt = QStyleOptionSlider()
    slider.initStyleOption(opt)
    pos = slider.style().subControlRect(QStyle.ComplexControl.CC_Slider, opt,
                                        QStyle.SubControl.SC_SliderHandle, slider).center()
    previews, fulls = [], []
    w.session.view_ready.connect(lambda v: (previews if v.preview else fulls).append(
        (label.text(), w.results.measured_line.task)))
    QTest.mousePress(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
    for dx in range(1, 200):
        if previews:
            break
        QTest.mouseMove(slider, QPoint(pos.x() + dx % 20, pos.y()))
        QTest.qWait(20)
    QTest.mouseRelease(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
    assert previews and all("after the release" in text and task is None for text, task in previews)
    qtbot.waitUntil(lambda: bool(fulls), timeout=WAIT_MS)  # the release's full evaluation starts one
    text, task = fulls[-1]
    assert "computing" in text and task is not None
    assert w.close()  # nothing unsaved: closes at once
    assert not task.running  # its thread was stopped and waited for; nothing reports into a closed window
    assert not log_errors()


def test_lock_and_forbid_from_a_parts_menu_are_undoable_and_saved(window, qtbot, answers, tmp_path):
    w = window
    edits = w.session.undo_stack.count()
    choose(qtbot, w, "C1", "part_lock")
    c1 = w.session.design.parts[w.session.design.part_index("C1")]
    assert c1.locked and w.parts.rows["C1"].label.text() == "C1 (locked)"
    choose(qtbot, w, "C1", "part_forbid:class II")
    choose(qtbot, w, "C2", "part_forbid:X7R")
    assert w.session.undo_stack.count() == edits + 3
    assert "forbidden: class II" in w.parts.rows["C1"].label.toolTip()
    out = tmp_path / "constrained.json"
    answers.save_paths.append(str(out))
    action(w, "file_save_as").trigger()
    parts = {p["ref"]: p for p in json.loads(out.read_text(encoding="utf-8"))["parts"]}
    assert parts["C1"]["locked"] is True and parts["C1"]["forbid"] == ["class II"]
    assert parts["C2"]["forbid"] == ["X7R"] and "locked" not in parts["C2"]
    for _ in range(3):
        action(w, "undo").trigger()
    c1 = w.session.design.parts[w.session.design.part_index("C1")]
    assert not c1.locked and not c1.forbid and w.parts.rows["C1"].label.text() == "C1"
    assert not log_errors()


# --- 5. purchase, prices, the class II warning and the grade sets side by side -------------------------
def priced_file(tmp_path):
    """A first-order RC low-pass with the priced catalog of tests/test_constraints.py (C1 may
    take an X7R grade, the cheapest) and no purchase stated."""
    from test_constraints import CATALOG, _rc

    d = _rc("rc_lowpass", "10k", "10n", 100, 1000, -1.6)  # nominal -1.445 dB at 1 kHz
    d["parts"][0]["grade"], d["parts"][1]["grade"] = "R-b-1", "C-g-2"
    d["grades"] = CATALOG["grades"]
    path = tmp_path / "priced.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    return path, CATALOG


def test_purchase_dialog_then_recommend_shows_money_class_ii_warning_and_sets_side_by_side(starter, qtbot,
                                                                                           tmp_path):
    from PySide6.QtWidgets import QDialogButtonBox

    path, catalog = priced_file(tmp_path)
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    edits = w.session.undo_stack.count()
    action(w, "purchase").trigger()
    dlg = w.purchase_dialog
    dlg.boards.lineEdit().selectAll()
    QTest.keyClicks(dlg.boards.lineEdit(), "5000")
    QTest.keyClicks(dlg.currency, "EUR")
    click(dlg.findChild(QDialogButtonBox).button(QDialogButtonBox.StandardButton.Ok))
    p = w.session.design.purchase
    assert (p.boards, p.currency) == (5000, "EUR") and w.session.undo_stack.count() == edits + 1

    action(w, "recommend").trigger()
    rec = w.recommend_dialog
    rec.samples.setValue(2000)
    rec.target.lineEdit().selectAll()
    QTest.keyClicks(rec.target.lineEdit(), "50")
    QTest.keyClick(rec.target.lineEdit(), Qt.Key.Key_Tab)
    QTest.keyClicks(rec.own_set, "C1=R-a-5")  # a resistor grade for a capacitor: refused, nothing searched
    click(rec.run_button)
    assert "your own set" in rec.summary.text() and "C1 is a C part" in rec.summary.text()
    assert rec.run_button.isEnabled() and not rec.apply_button.isEnabled()
    rec.own_set.selectAll()
    QTest.keyClicks(rec.own_set, "C1=C-g-5")
    click(rec.run_button)
    qtbot.waitUntil(rec.apply_button.isEnabled, timeout=120_000)
    view = rec.sets_view
    assert view.isVisible() and view.warning.isVisible()
    assert "C1" in view.warning.text() and "class II" in view.warning.text()  # common practice
    rows = {r[0]: r for r in table_rows(view.table)}
    assert list(rows) == ["current", "recommended", "no class II", "yours"]
    assert "EUR per board at 5,000 boards" in view.heading.text() and "EUR per board" in rec.summary.text()
    # money per board summed independently from the catalog's breaks at 5,000 (the 1,000 break)
    price = {g["name"]: [q_p[1] for q_p in g["prices"] if q_p[0] <= 5000][-1] for g in catalog["grades"]}
    chosen = {rec.table.item(i, 0).text(): rec.table.item(i, 3).text() for i in range(rec.table.rowCount())}
    assert chosen["C1"] == "C-x-10"  # the cheapest, class II
    total = price[chosen["R1"]] + price[chosen["C1"]]
    assert float(rows["recommended"][1].split()[0]) == pytest.approx(total, rel=1e-3)
    assert float(rows["current"][1].split()[0]) == pytest.approx(price["R-b-1"] + price["C-g-2"], rel=1e-3)
    assert "C1 C-g-" in rows["no class II"][-1]  # the alternative gives C1 a C0G grade
    assert float(rows["yours"][1].split()[0]) == pytest.approx(price["R-b-1"] + price["C-g-5"], rel=1e-3)
    assert rows["yours"][-1] == "C1 C-g-5"  # R1 keeps its grade (the last column: grades changed)
    assert "price breaks at 5,000 parts" in rec.caution.text() and "measured parts" in rec.caution.text()
    for r in rows.values():  # yield inside its interval, lower bound below it
        y, lo_hi, lb = (x for x in (r[2], r[3], r[4]))
        lo, hi = (float(x) for x in re.findall(r"([0-9.]+) %", lo_hi))
        assert lo <= float(y.rstrip(" %")) <= hi and float(lb.rstrip(" %")) <= float(y.rstrip(" %"))
    rec.reject()
    action(w, "undo").trigger()
    assert w.session.design.purchase.boards == 0
    assert not log_errors()
