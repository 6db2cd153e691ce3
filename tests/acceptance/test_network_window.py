"""Resistor networks, matched pairs and a stage's DC bias made in the window, the way a
person makes them (issue 15 items 3 and 4 in the window).

The window is started through the console script's function (conftest). A person clicks
parts' names to choose them (Ctrl+click for more), right-clicks a part's name or a
network's heading for its menu, or uses Design > New network or matched pair…; fills the
network dialog with the keyboard and clicks OK; types the Stages tab's DC bias field; undoes
with Ctrl+Z; saves with File > Save As. Checks read the saved file with the standard
library's json reader (not the program's loader) and hold the window's yield to what
``tolspread analyze`` prints for the same file in its own process.

The design is the invented anti-alias example (assets/examples/network_antialias.json) with
its passband floor at -0.28 dB and 2,000 boards, so that every network changes the yield.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QAction, QContextMenuEvent
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QApplication, QDialog, QMenu

from .conftest import close_later, run_cli, wait_idle, yield_shown
from .test_stage_editing import bring_tab_forward, choose, retype_cell

pytestmark = pytest.mark.gui

EXAMPLE = Path(__file__).resolve().parents[2] / "assets" / "examples" / "network_antialias.json"
RN1 = {"name": "RN1", "members": ["R1", "R2", "RF", "RG"], "tolerance_pct": 0.5, "ratio_pct": 0.05,
       "tracking_ppm": 5.0}
CP1 = {"name": "CP1", "members": ["C1", "C2"], "tolerance_pct": 2.0, "ratio_pct": 0.5, "tracking_ppm": 10.0}


def design_file(folder: Path, networks: bool, **part_grades: str) -> Path:
    """The example with a floor at -0.28 dB and 2,000 boards; without its networks unless
    ``networks``; ``part_grades`` (ref -> grade) replace grades."""
    data = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    data["mask"][0]["limit1"] = -0.28
    data["analysis"]["samples"] = 2000
    if not networks:
        data.pop("networks")
    for p in data["parts"]:
        p["grade"] = part_grades.get(p["ref"], p["grade"])
    path = folder / ("with_networks.json" if networks else "separate_parts.json")
    path.write_text(json.dumps(data, indent=1), encoding="utf-8")
    return path


def analyzed_yield(path: Path, folder: Path) -> float:
    """``tolspread analyze PATH --json`` in its own process: the yield (fraction)."""
    out = folder / f"{path.stem}_analyzed.json"
    run = run_cli("analyze", str(path), "--json", str(out))
    assert run.returncode == 0, run.stderr
    return json.loads(out.read_text(encoding="utf-8"))["yield"]["estimate"]


def assert_window_yield_is_analyzes(qtbot, window, answers, folder: Path, name: str) -> dict:
    """Save As ``name``, then the window's yield must be what ``tolspread analyze`` gives
    for the saved file (the window prints it to 0.01 %). Returns the file as json reads it."""
    wait_idle(qtbot, window)
    qtbot.waitUntil(lambda: window.session.last_view is not None and not window.session.last_view.preview
                    and window.session.last_view.design == window.session.design, timeout=30_000)
    path = folder / name
    answers.save_paths.append(str(path))
    action(window, "file_save_as").trigger()
    qtbot.waitUntil(path.exists, timeout=5000)
    expected = analyzed_yield(path, folder)
    assert math.isclose(yield_shown(window), round(expected, 4), abs_tol=1e-9), (yield_shown(window), expected)
    return json.loads(path.read_text(encoding="utf-8"))


def action(window, name: str) -> QAction:
    hits = [a for a in window.findChildren(QAction) if a.objectName() == name]
    assert len(hits) == 1, name
    return hits[0]


def click_name(qtbot, window, ref: str, ctrl: bool = False) -> None:
    """A click on part ``ref``'s name in the parts panel (Ctrl held when ``ctrl``)."""
    label = window.parts.rows[ref].label
    mod = Qt.KeyboardModifier.ControlModifier if ctrl else Qt.KeyboardModifier.NoModifier
    QTest.mouseClick(label, Qt.MouseButton.LeftButton, mod, label.rect().center())
    qtbot.wait(10)


def menu_entry(qtbot, window, widget, menu_attr: str, name: str) -> QAction:
    """Right-click ``widget`` (a part's name or a network's heading); the entry ``name`` of
    the menu that pops up (submenus searched too)."""
    centre = widget.rect().center()
    QApplication.sendEvent(widget, QContextMenuEvent(QContextMenuEvent.Reason.Mouse, centre,
                                                     widget.mapToGlobal(centre)))
    qtbot.waitUntil(lambda: getattr(window, menu_attr, None) is not None and getattr(window, menu_attr).isVisible())
    menu = getattr(window, menu_attr)
    hits = [a for m in [menu, *menu.findChildren(QMenu)] for a in m.actions() if a.objectName() == name]
    assert len(hits) == 1, f"no single {name!r} in the menu"
    return hits[0]


def part_entry(qtbot, window, ref: str, name: str) -> None:
    """Right-click part ``ref``'s name and click the entry ``name``."""
    a = menu_entry(qtbot, window, window.parts.rows[ref].label, "part_menu", name)
    assert a.isEnabled(), name
    window.part_menu.close()
    a.trigger()


def heading_entry(qtbot, window, network: str, name: str) -> None:
    """Right-click network ``network``'s heading in the parts panel and click the entry ``name``."""
    a = menu_entry(qtbot, window, window.parts.group_labels[network], "network_menu", name)
    window.network_menu.close()
    a.trigger()


def retype(qtbot, edit, text: str) -> None:
    """Click into a field, select what it holds, delete it, type ``text``."""
    QTest.mouseClick(edit, Qt.MouseButton.LeftButton)
    QTest.keyClick(edit, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClick(edit, Qt.Key.Key_Backspace)
    QTest.keyClicks(edit, text)


def click_ok(dlg) -> None:
    QTest.mouseClick(dlg.ok, Qt.MouseButton.LeftButton)


def tick(dlg, ref: str) -> None:
    """Tick (or untick) ``ref`` in the dialog's members list: a click on its line, then Space."""
    lst = dlg.members
    row = next(i for i in range(lst.count()) if lst.item(i).text().split()[0] == ref)
    rect = lst.visualItemRect(lst.item(row))
    QTest.mouseClick(lst.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    QTest.keyClick(lst, Qt.Key.Key_Space)


def fill_dialog(steps):
    """Answer the next network dialog with ``steps(dlg, seen)`` (``seen``: a dict the steps
    fill with what the dialog showed); returns the state of :func:`close_later` and ``seen``."""
    seen: dict = {}

    def answer(dlg):
        seen["title"] = dlg.windowTitle()
        steps(dlg, seen)
    return close_later(QDialog, answer), seen


def undo_key(qtbot, window) -> None:
    """Ctrl+Z on the window (brought forward first, as after a dialog closes); one step undone."""
    n = window.session.undo_stack.index()
    window.activateWindow()
    qtbot.waitUntil(window.isActiveWindow, timeout=5000)
    QTest.keyClick(window, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    qtbot.waitUntil(lambda: window.session.undo_stack.index() == n - 1, timeout=5000)


def networks_held(window) -> list[dict]:
    return json.loads(window.session.text()).get("networks", [])


# --- 1. making networks on parts bought separately ---------------------------------------------------
@pytest.mark.slow  # about 5 s on a loaded machine (two 'tolspread analyze' processes); run by default
def test_design_menu_makes_a_network_of_the_chosen_parts(starter, qtbot, answers, shown, tmp_path):
    """RN1 from four chosen resistors (Design menu), CP1 from a part's menu: the same file as
    the example's; each is one undoable edit; the yield is analyze's for the saved file."""
    separate = design_file(tmp_path, networks=False)
    w = starter.launch(str(separate))
    wait_idle(qtbot, w)
    original = w.session.text()
    separate_yield = yield_shown(w)

    # choose R1, then Ctrl+click R2, RF, RG; a plain click on C1 would choose it alone
    click_name(qtbot, w, "R1")
    for ref in ("R2", "RF", "RG"):
        click_name(qtbot, w, ref, ctrl=True)
    assert w.parts.chosen == ["R1", "R2", "RF", "RG"]
    assert "R1, R2, RF, RG" in w.status_text.text()

    def rn1(dlg, seen):
        seen["kind"] = dlg.kind.text()
        seen["ticked"] = dlg.ticked()
        seen["tolerance"] = dlg.tolerance.text()   # the members' grade tolerance to start from
        retype(qtbot, dlg.name, "RN1")
        retype(qtbot, dlg.ratio, "0.05 %")
        retype(qtbot, dlg.tracking, "5 ppm/K")
        click_ok(dlg)
    state, seen = fill_dialog(rn1)
    action(w, "design_network_new").trigger()
    assert not state["stuck"] and seen["title"] == "New network or matched pair"
    assert seen["ticked"] == ["R1", "R2", "RF", "RG"] and "network" in seen["kind"] and "4 resistors" in seen["kind"]
    assert seen["tolerance"] == "0.5"  # R-thin-0.5: +-0.5 % (the catalog's grade)
    assert networks_held(w) == [RN1]
    assert w.parts.chosen == []  # the choice is used up
    assert "RN1" in w.parts.group_labels and not w.parts.rows["RF"].slider.isEnabled()

    # a matched pair from C1's own menu with C2 chosen; a bad ratio first: refused, named, marked
    click_name(qtbot, w, "C2")

    def cp1(dlg, seen):
        seen["kind"] = dlg.kind.text()
        seen["name"] = dlg.name.text()
        retype(qtbot, dlg.tolerance, "2")
        retype(qtbot, dlg.ratio, "3")      # above sqrt(2) x 2 % = 2.83 %: the loader's rule
        retype(qtbot, dlg.tracking, "10")
        click_ok(dlg)
        seen["problem"] = dlg.problem.text() if dlg.problem.isVisible() else ""
        seen["ratio_style"] = dlg.ratio.styleSheet()
        seen["open_after_bad"] = dlg.isVisible()
        retype(qtbot, dlg.ratio, "abc")
        click_ok(dlg)
        seen["problem_text"] = dlg.problem.text()
        retype(qtbot, dlg.ratio, "0.5")
        click_ok(dlg)
    state, seen = fill_dialog(cp1)
    part_entry(qtbot, w, "C1", "network_new")
    assert not state["stuck"]
    assert "matched pair" in seen["kind"] and "2 capacitors" in seen["kind"] and seen["name"] == "CP1"
    assert seen["open_after_bad"] and "ratio tolerance (networks[1].ratio_pct)" in seen["problem"]
    assert "sqrt(2)" in seen["problem"] and "#D55E00" in seen["ratio_style"]
    assert "ratio tolerance (networks[1].ratio_pct): 'abc' is not a number" in seen["problem_text"]
    assert networks_held(w) == [RN1, CP1]

    # the same networks as the example file: the window's yield is analyze's for it, and higher than
    # for separate parts (Q hangs on ratios, which the networks hold tight: common practice)
    saved = assert_window_yield_is_analyzes(qtbot, w, answers, tmp_path, "made.json")
    assert saved["networks"] == [RN1, CP1]
    example_yield = analyzed_yield(design_file(tmp_path, networks=True), tmp_path)
    assert math.isclose(yield_shown(w), round(example_yield, 4), abs_tol=1e-9)
    assert yield_shown(w) > separate_yield + 0.1

    # Ctrl+Z twice: exactly the file opened, and its yield
    assert w.session.undo_stack.count() == 2
    undo_key(qtbot, w)
    assert networks_held(w) == [RN1]
    undo_key(qtbot, w)
    assert w.session.text() == original
    assert not w.parts.group_labels
    wait_idle(qtbot, w)
    qtbot.waitUntil(lambda: yield_shown(w) == separate_yield, timeout=30_000)
    assert not shown.errors()


# --- 2. changing networks ------------------------------------------------------------------------------
@pytest.mark.slow  # about 5 s on a loaded machine (two 'tolspread analyze' processes); run by default
def test_add_take_out_edit_and_dissolve_are_each_one_undoable_edit(starter, qtbot, answers, shown, tmp_path):
    path = design_file(tmp_path, networks=True)
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    original = w.session.text()

    # a pair keeps two members: taking C1 out is refused in words, nothing changes
    part_entry(qtbot, w, "C1", "network_take_out")
    refusal = [s for s in shown.shown if s.kind == "message"][-1]
    assert "CP1 would keep only C2" in refusal.text and "dissolve CP1" in refusal.text
    assert w.session.text() == original and w.session.undo_stack.count() == 0

    # RF out of RN1: it stands on its own again (its own slider), the file says so
    part_entry(qtbot, w, "RF", "network_take_out")
    assert networks_held(w)[0]["members"] == ["R1", "R2", "RG"]
    assert w.parts.rows["RF"].slider.isEnabled()
    saved = assert_window_yield_is_analyzes(qtbot, w, answers, tmp_path, "rf_out.json")
    assert saved["networks"][0]["members"] == ["R1", "R2", "RG"]

    # RF into the capacitors' pair: refused, naming RF and the kinds
    part_entry(qtbot, w, "RF", "network_add:CP1")
    refusal = [s for s in shown.shown if s.kind == "message"][-1]
    assert "RF is a resistor, not a capacitor like C1" in refusal.text
    assert networks_held(w)[1] == CP1

    # RF back into RN1 from its menu
    part_entry(qtbot, w, "RF", "network_add:RN1")
    assert networks_held(w)[0]["members"] == ["R1", "R2", "RG", "RF"]

    # RN1's figures from its heading's menu: a tolerance beyond the loader's limit is refused, named
    def edit(dlg, seen):
        seen["fields"] = (dlg.name.text(), dlg.tolerance.text(), dlg.ratio.text(), dlg.tracking.text())
        retype(qtbot, dlg.tolerance, "20")
        click_ok(dlg)
        seen["problem"] = dlg.problem.text()
        seen["style"] = dlg.tolerance.styleSheet()
        retype(qtbot, dlg.tolerance, "1")
        retype(qtbot, dlg.ratio, "0.1")
        retype(qtbot, dlg.tracking, "25")
        click_ok(dlg)
    state, seen = fill_dialog(edit)
    heading_entry(qtbot, w, "RN1", "network_edit")
    assert not state["stuck"] and seen["title"] == "Network RN1"
    assert seen["fields"] == ("RN1", "0.5", "0.05", "5")
    assert seen["problem"].startswith("tolerance (networks[0].tolerance_pct): must be above 0 to 10 %")
    assert "#D55E00" in seen["style"]
    assert networks_held(w)[0] == {"name": "RN1", "members": ["R1", "R2", "RG", "RF"], "tolerance_pct": 1.0,
                                   "ratio_pct": 0.1, "tracking_ppm": 25.0}
    assert "±1 %" in w.parts.group_labels["RN1"].text() and "25 ppm/K" in w.parts.group_labels["RN1"].text()

    # dissolve CP1 from C2's menu: C1 and C2 are parts on their own
    part_entry(qtbot, w, "C2", "network_dissolve")
    assert [n["name"] for n in networks_held(w)] == ["RN1"]
    assert "CP1" not in w.parts.group_labels and w.parts.rows["C2"].slider.isEnabled()
    saved = assert_window_yield_is_analyzes(qtbot, w, answers, tmp_path, "changed.json")
    assert saved["networks"] == networks_held(w)

    # every change was one edit: four Ctrl+Z give back exactly the file opened
    assert w.session.undo_stack.count() == 4
    for _ in range(4):
        undo_key(qtbot, w)
    assert w.session.text() == original
    assert set(w.parts.group_labels) == {"RN1", "CP1"}
    # and the file saved reopens with what was saved
    answers.open_paths.append(str(tmp_path / "changed.json"))
    action(w, "file_open").trigger()
    qtbot.waitUntil(lambda: w.session.path == tmp_path / "changed.json", timeout=5000)
    assert networks_held(w) == saved["networks"]
    assert [s.title for s in shown.errors()] == ["C1 stays in CP1", "Not added to CP1"]  # the two refusals only


def test_a_chosen_op_amp_is_not_offered_and_mixed_kinds_are_refused(starter, qtbot, answers, shown, tmp_path):
    w = starter.launch(str(design_file(tmp_path, networks=False)))
    wait_idle(qtbot, w)
    click_name(qtbot, w, "R1")
    click_name(qtbot, w, "C1", ctrl=True)
    click_name(qtbot, w, "U1", ctrl=True)

    def mixed(dlg, seen):
        seen["listed"] = [dlg.members.item(i).text().split()[0] for i in range(dlg.members.count())]
        seen["ticked"] = dlg.ticked()
        seen["kind"] = dlg.kind.text()
        retype(qtbot, dlg.ratio, "0.1")
        click_ok(dlg)
        seen["problem"] = dlg.problem.text()
        seen["members_style"] = dlg.members.styleSheet()
        tick(dlg, "C1")   # untick the capacitor, tick R2: two resistors
        tick(dlg, "R2")
        seen["kind_after"] = dlg.kind.text()
        click_ok(dlg)
    state, seen = fill_dialog(mixed)
    part_entry(qtbot, w, "R1", "network_new")
    assert not state["stuck"]
    assert "U1" not in seen["listed"] and seen["ticked"] == ["R1", "C1"]  # an op-amp is no network member
    assert "mixed kinds" in seen["kind"]
    assert "members (networks[0].members): C1 is a capacitor, not a resistor like R1" in seen["problem"]
    assert "#D55E00" in seen["members_style"]
    assert "matched pair" in seen["kind_after"]
    # the tolerance offered was the largest grade tolerance of the parts first ticked (C-C0G-2: +-2 %)
    assert networks_held(w) == [{"name": "RP1", "members": ["R1", "R2"], "tolerance_pct": 2.0, "ratio_pct": 0.1,
                                 "tracking_ppm": 0.0}]
    # the op-amp's own menu has no network entries
    a = menu_entry(qtbot, w, w.parts.rows["U1"].label, "part_menu", "part_lock")
    assert not [x for x in w.part_menu.actions() if x.objectName().startswith("network")]
    w.part_menu.close()
    assert a is not None and not shown.errors()


# --- 3. a stage's DC bias ---------------------------------------------------------------------------------
def test_stage_dc_bias_field_is_checked_undoable_and_saved(starter, qtbot, answers, shown, tmp_path):
    """The pair's capacitors as X7R: the stage's bias moves their values (the grade's bias
    curve), so the yield follows the field; the window's yield is analyze's for the saved file."""
    path = design_file(tmp_path, networks=False, C1="C-X7R-10", C2="C-X7R-10")
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    original = w.session.text()
    ed = w.stage_editor
    bring_tab_forward(qtbot, w, "Stages")
    assert ed.bias.text() == "" and ed.bias.placeholderText() == "not stated"

    # text that is no number: marked, named, the stage keeps "not stated"
    retype(qtbot, ed.bias, "twelve")
    QTest.keyClick(ed.bias, Qt.Key.Key_Return)
    assert "#D55E00" in ed.bias.styleSheet() and ed.problem.isVisible()
    assert "stages[0].bias_v" in ed.problem.text() and "still using not stated" in ed.problem.text()
    assert w.session.text() == original

    # 3 V: one edit, saved as the file states it
    retype(qtbot, ed.bias, "3 V")
    QTest.keyClick(ed.bias, Qt.Key.Key_Return)
    qtbot.waitUntil(lambda: json.loads(w.session.text())["stages"][0].get("bias_v") == 3.0, timeout=5000)
    assert ed.bias.styleSheet() == "" and ed.bias.text() == "3 V"
    saved = assert_window_yield_is_analyzes(qtbot, w, answers, tmp_path, "biased.json")
    assert saved["stages"][0]["bias_v"] == 3.0
    biased_yield = yield_shown(w)

    # beyond the loader's limit: refused by its rule, named; the stage keeps 3 V
    retype(qtbot, ed.bias, "20000")
    QTest.keyClick(ed.bias, Qt.Key.Key_Return)
    assert "stages[0].bias_v" in ed.problem.text() and "10000" in ed.problem.text()
    assert "#D55E00" in ed.bias.styleSheet()
    assert json.loads(w.session.text())["stages"][0]["bias_v"] == 3.0

    # another topology keeps the stage's bias (it is the stage's, not the topology's)
    choose(qtbot, ed.topology, "mfb_lowpass")
    qtbot.waitUntil(lambda: json.loads(w.session.text())["stages"][0]["topology"] == "mfb_lowpass",
                    timeout=5000)
    assert json.loads(w.session.text())["stages"][0]["bias_v"] == 3.0
    undo_key(qtbot, w)
    assert json.loads(w.session.text())["stages"][0]["topology"] == "sallen_key_lowpass"

    # emptied: not stated again (no bias_v in the file)
    retype(qtbot, ed.bias, "")
    QTest.keyClick(ed.bias, Qt.Key.Key_Return)
    qtbot.waitUntil(lambda: "bias_v" not in json.loads(w.session.text())["stages"][0], timeout=5000)
    wait_idle(qtbot, w)
    assert yield_shown(w) != biased_yield  # X7R at 3 V loses value: the response moves (the grade's curve)

    # Ctrl+Z twice: 3 V, then exactly the file opened
    undo_key(qtbot, w)
    assert json.loads(w.session.text())["stages"][0]["bias_v"] == 3.0 and ed.bias.text() == "3 V"
    undo_key(qtbot, w)
    assert w.session.text() == original and ed.bias.text() == ""
    assert not shown.errors()


def test_one_package_for_every_channel_is_edited_in_the_dialog(starter, qtbot, answers, shown, tmp_path):
    """The I/Q example (two channels, RN1 one package for both): untick "one package serves
    every channel" in RN1's dialog; the file says so, the yield is analyze's, Ctrl+Z restores."""
    data = json.loads((EXAMPLE.parent / "matched_iq_channels.json").read_text(encoding="utf-8"))
    data["analysis"]["samples"] = 1000
    path = tmp_path / "iq.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    original = w.session.text()

    def untick(dlg, seen):
        seen["shown"], seen["ticked"] = dlg.across.isVisible(), dlg.across.isChecked()
        QTest.mouseClick(dlg.across, Qt.MouseButton.LeftButton)
        click_ok(dlg)
    state, seen = fill_dialog(untick)
    heading_entry(qtbot, w, "RN1", "network_edit")
    assert not state["stuck"] and seen == {"title": "Network RN1", "shown": True, "ticked": True}
    assert "across_channels" not in networks_held(w)[0]
    saved = assert_window_yield_is_analyzes(qtbot, w, answers, tmp_path, "iq_two_packages.json")
    assert "across_channels" not in saved["networks"][0] and saved["networks"][0]["members"] == ["R1", "R2"]
    undo_key(qtbot, w)
    assert w.session.text() == original
    assert not shown.errors()


def test_stage_edits_carry_network_members_along(starter, qtbot, answers, shown, tmp_path):
    """A network's members follow the Stages tab's edits: a topology that drops RG takes it
    out of RN1, a part renamed in a circuit's table stays in its network under its new name
    (both were refused before: the network named a part no longer there)."""
    w = starter.launch(str(design_file(tmp_path, networks=True)))
    wait_idle(qtbot, w)
    original = w.session.text()
    ed = w.stage_editor
    bring_tab_forward(qtbot, w, "Stages")
    choose(qtbot, ed.topology, "mfb_lowpass")   # a multiple-feedback low-pass: three resistors, two capacitors
    qtbot.waitUntil(lambda: json.loads(w.session.text())["stages"][0]["topology"] == "mfb_lowpass", timeout=5000)
    parts = {p["ref"] for p in json.loads(w.session.text())["parts"]}
    assert "RG" not in parts
    assert networks_held(w)[0]["members"] == [m for m in RN1["members"] if m in parts]
    undo_key(qtbot, w)
    assert w.session.text() == original

    choose(qtbot, ed.topology, "circuit")
    qtbot.waitUntil(lambda: json.loads(w.session.text())["stages"][0]["topology"] == "circuit", timeout=5000)
    row = next(r for r in range(ed.elements.rowCount()) if ed.elements.item(r, 0).text() == "C2")
    retype_cell(qtbot, ed.elements, row, 0, "CX")
    qtbot.waitUntil(lambda: "CX" in {p["ref"] for p in json.loads(w.session.text())["parts"]}, timeout=5000)
    assert networks_held(w)[1]["members"] == ["C1", "CX"] and not ed.problem.isVisible()
    assert "CX" in w.parts.rows and "CP1" in w.parts.group_labels
    assert not shown.errors()
