"""Editing the circuit in the window, the way a person does it (issue 14 items 5 and 6).

The window is started through the console script's function (conftest). A person brings
the "Stages" tab forward, turns the demo's first stage into a circuit with the topology
box, adds an element, retypes nodes in the element table with the keyboard (a half-built
circuit is marked red and refused, the design keeping its last good state; finishing it
applies it), undoes and redoes it (Edit > Undo, Redo), saves it with Save As and
opens the file again; and clicks a part in the schematic to find it in the parts panel.
The checks read the design the window holds and the file on disk with the standard
library's json reader (independent of the program's loader).
"""
from __future__ import annotations

import json

import pytest
from PySide6.QtCore import QPoint, Qt
from PySide6.QtGui import QAction
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QComboBox, QLineEdit, QTabBar

from .conftest import wait_idle

pytestmark = pytest.mark.gui


def action(window, name: str) -> QAction:
    hits = [a for a in window.findChildren(QAction) if a.objectName() == name]
    assert len(hits) == 1, name
    return hits[0]


def click(qtbot, widget) -> None:
    QTest.mouseClick(widget, Qt.MouseButton.LeftButton)
    qtbot.wait(20)


def bring_tab_forward(qtbot, window, title: str) -> None:
    """Click the dock tab called ``title``."""
    for bar in window.findChildren(QTabBar):
        for i in range(bar.count()):
            if bar.tabText(i) == title and bar.isVisible():
                QTest.mouseClick(bar, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                                 bar.tabRect(i).center())
                qtbot.wait(50)
                return
    raise AssertionError(f"no tab {title!r}")


def choose(qtbot, combo: QComboBox, text: str) -> None:
    """Pick ``text`` in a combo box as a person does: a click opens its list, the arrow
    keys move to the entry, Enter takes it (one choice, not one per entry passed)."""
    target = combo.findText(text)
    assert target >= 0, text
    QTest.mouseClick(combo, Qt.MouseButton.LeftButton)
    view = combo.view()
    qtbot.waitUntil(view.isVisible, timeout=2000)
    while view.currentIndex().row() != target:
        QTest.keyClick(view, Qt.Key.Key_Down if view.currentIndex().row() < target else Qt.Key.Key_Up)
    QTest.keyClick(view, Qt.Key.Key_Return)
    qtbot.waitUntil(lambda: not view.isVisible(), timeout=2000)
    assert combo.currentText() == text


def retype_cell(qtbot, table, row: int, col: int, text: str) -> None:
    """Double-click a cell, select what it holds, type ``text``, press Enter."""
    table.scrollToItem(table.item(row, col))  # as a person scrolls to the row
    rect = table.visualRect(table.model().index(row, col))
    QTest.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    QTest.mouseDClick(table.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    editors = lambda: [w for w in table.viewport().findChildren(QLineEdit) if w.isVisible()]  # noqa: E731
    qtbot.waitUntil(lambda: len(editors()) == 1, timeout=2000)
    editor = editors()[0]
    QTest.keyClick(editor, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(editor, text)
    QTest.keyClick(editor, Qt.Key.Key_Return)
    qtbot.wait(30)


def rows(table) -> list[list[str]]:
    return [[table.item(r, c).text() for c in range(table.columnCount())] for r in range(table.rowCount())]


def stage0(window) -> dict:
    """The first stage as the window's design holds it, in file form (read with json)."""
    return json.loads(window.session.text())["stages"][0]


def test_build_a_circuit_stage_undo_save_and_reopen(window, qtbot, answers, tmp_path, shown):
    ed = window.stage_editor
    bring_tab_forward(qtbot, window, "Stages")
    assert ed.isVisible()
    demo = json.loads(window.session.text())

    # 1. the first stage becomes a circuit of its own netlist (Sallen-Key: R1 in-a, R2 a-b, C1 a-out, C2 b-0)
    choose(qtbot, ed.topology, "circuit")
    qtbot.waitUntil(lambda: stage0(window)["topology"] == "circuit", timeout=5000)
    s = stage0(window)
    assert [e["ref"] for e in s["elements"]] == ["R1", "R2", "C1", "C2"]
    assert {tuple(e["between"]) for e in s["elements"]} == {("in", "a"), ("a", "b"), ("a", "out"), ("b", "0")}
    assert ed.elements.isVisible() and rows(ed.elements)[0] == ["R1", "in", "a"]

    # 2. a new resistor (a new part, from out to ground)
    choose(qtbot, ed.element_kind, "resistor")
    click(qtbot, ed.add_element)
    qtbot.waitUntil(lambda: len(stage0(window)["elements"]) == 5, timeout=5000)
    new = stage0(window)["elements"][4]
    assert new["between"] == ["out", "0"]
    ref = new["ref"]
    assert ref in window.parts.rows  # the parts panel follows

    # 3. half way: the new resistor to a new node n9 alone -> refused and marked, design unchanged
    retype_cell(qtbot, ed.elements, 4, 1, "n9")
    assert stage0(window)["elements"][4]["between"] == ["out", "0"]
    assert ed.problem.isVisible() and "n9" in ed.problem.text() and "stages[0].elements" in ed.problem.text()
    assert ed.elements.item(4, 1).background().color().name() == "#fde2d6"
    assert ed.elements.item(4, 1).text() == "n9"  # what was typed stays, marked
    assert ed.elements.item(4, 1).toolTip().endswith("still using out")  # and what the design keeps

    # 4. finishing it: C2 now goes from b to n9 (C2 in series with the new resistor) -> applied
    retype_cell(qtbot, ed.elements, 3, 2, "n9")
    qtbot.waitUntil(lambda: stage0(window)["elements"][4]["between"] == ["n9", "0"], timeout=5000)
    assert stage0(window)["elements"][3]["between"] == ["b", "n9"]
    assert not ed.problem.isVisible()
    assert "n9" in window.circuit_view.canvas.schematic.svg  # the schematic follows
    wait_idle(qtbot, window)
    built = json.loads(window.session.text())

    # 5. undo the three edits (Edit > Undo): the demo again, its new part gone
    assert window.session.undo_stack.count() == 3
    for _ in range(3):
        action(window, "undo").trigger()
    assert json.loads(window.session.text()) == demo
    assert ref not in window.parts.rows and ed.pages.currentIndex() == 0
    for _ in range(3):
        action(window, "redo").trigger()
    assert json.loads(window.session.text()) == built

    # 6. save as, then open the file again
    path = tmp_path / "circuit.json"
    answers.save_paths.append(str(path))
    action(window, "file_save_as").trigger()
    qtbot.waitUntil(path.exists, timeout=5000)
    on_disk = json.loads(path.read_text(encoding="utf-8"))
    assert on_disk["stages"][0] == built["stages"][0]
    answers.open_paths.append(str(path))
    action(window, "file_open").trigger()
    qtbot.waitUntil(lambda: window.session.path == path, timeout=5000)
    assert json.loads(window.session.text())["stages"][0] == built["stages"][0]
    assert rows(ed.elements)[4] == [ref, "n9", "0"]
    wait_idle(qtbot, window)
    assert not shown.errors()


def test_click_a_part_in_the_schematic_selects_it(window, qtbot):
    canvas = window.circuit_view.canvas
    qtbot.waitUntil(lambda: canvas.schematic is not None, timeout=5000)
    centre = canvas.part_centre("C2").toPoint()
    QTest.mouseClick(canvas, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, centre)
    qtbot.waitUntil(lambda: window.parts.selected == "C2", timeout=2000)
    assert window.parts.rows["C2"].value.hasFocus()
    assert "#D55E00" in window.parts.rows["C2"].label.styleSheet()
    assert window.circuit_view.selected == "C2"
    assert "C2" in window.status_text.text()
    # the spread budget: C2's bar in the highlight colour, the others blue, its share in the title
    import pyqtgraph as pg

    plot = window.results.budget_plot
    bars = [i for i in plot.getPlotItem().items if isinstance(i, pg.BarGraphItem)][0]
    ticks = dict((lab, y) for y, lab in plot.getAxis("left")._tickLevels[0])
    colours = {lab: pg.mkBrush(bars.opts["brushes"][list(bars.opts["y"]).index(y)]).color().name()
               for lab, y in ticks.items() if lab != "unexplained"}
    assert colours["C2"] == "#d55e00" and {c for lab, c in colours.items() if lab != "C2"} == {"#0072b2"}
    assert "C2" in plot.getPlotItem().titleLabel.text


def test_add_move_and_remove_stages(window, qtbot):
    ed = window.stage_editor
    bring_tab_forward(qtbot, window, "Stages")
    before = json.loads(window.session.text())
    click(qtbot, ed.add_stage)
    qtbot.waitUntil(lambda: len(window.session.design.stages) == 3, timeout=5000)
    d = json.loads(window.session.text())
    added = d["stages"][2]
    assert added["topology"] == "sallen_key_lowpass"
    assert len(d["parts"]) == len(before["parts"]) + 4  # R, R, C, C of its own
    assert ed.stage_list.currentRow() == 2
    click(qtbot, ed.up)
    qtbot.waitUntil(lambda: json.loads(window.session.text())["stages"][1] == added, timeout=5000)
    # options: gain set by resistors adds RF and RG
    ed.options.setFocus()
    QTest.keyClick(ed.options, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(ed.options, '{"gain": "resistors"}')
    QTest.keyClick(ed.options, Qt.Key.Key_Return)
    qtbot.waitUntil(lambda: set(json.loads(window.session.text())["stages"][1]["parts"]) >= {"RF", "RG"},
                    timeout=5000)
    # bad options: marked, the design keeps them
    QTest.keyClick(ed.options, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(ed.options, '{"gain": "twice"}')
    QTest.keyClick(ed.options, Qt.Key.Key_Return)
    qtbot.waitUntil(ed.problem.isVisible, timeout=2000)
    assert "gain" in ed.problem.text() and "#fde2d6" in ed.options.styleSheet()
    assert json.loads(window.session.text())["stages"][1]["options"] == {"gain": "resistors"}
    click(qtbot, ed.remove_stage)
    qtbot.waitUntil(lambda: len(window.session.design.stages) == 2, timeout=5000)
    assert json.loads(window.session.text())["parts"] == before["parts"]  # its parts went with it


def test_circuit_opamp_part_response_and_loading(window, qtbot):
    """A circuit's op-amp gets its gain-bandwidth from a part of its name (Space on its
    'GBW part' box) and is ideal again; the response it is judged as is chosen; a stage
    loaded by the next one says so in the file. Each one edit, undone by Edit > Undo."""
    ed = window.stage_editor
    bring_tab_forward(qtbot, window, "Stages")
    choose(qtbot, ed.topology, "circuit")
    qtbot.waitUntil(lambda: stage0(window)["topology"] == "circuit", timeout=5000)
    amp = stage0(window)["opamps"][0]["ref"]
    parts = lambda: {p["ref"]: p for p in json.loads(window.session.text())["parts"]}  # noqa: E731
    assert amp not in parts()  # ideal, as the Sallen-Key stage's op-amp was

    box = ed.opamps.item(0, 4)
    rect = ed.opamps.visualItemRect(box)
    QTest.mouseClick(ed.opamps.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    QTest.keyClick(ed.opamps.viewport(), Qt.Key.Key_Space)
    qtbot.waitUntil(lambda: amp in parts(), timeout=5000)
    assert parts()[amp]["value"] == "10M"  # a 10 MHz gain-bandwidth to start from
    assert amp in window.parts.rows
    QTest.mouseClick(ed.opamps.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     ed.opamps.visualItemRect(ed.opamps.item(0, 4)).center())
    QTest.keyClick(ed.opamps.viewport(), Qt.Key.Key_Space)
    qtbot.waitUntil(lambda: amp not in parts(), timeout=5000)

    # remove an element: select its row with the mouse, press Remove element; its part goes too
    click(qtbot, ed.add_element)
    qtbot.waitUntil(lambda: len(stage0(window)["elements"]) == 5, timeout=5000)
    extra = stage0(window)["elements"][4]["ref"]
    assert extra in parts()
    QTest.mouseClick(ed.elements.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     ed.elements.visualItemRect(ed.elements.item(4, 0)).center())
    click(qtbot, ed.remove_element)
    qtbot.waitUntil(lambda: len(stage0(window)["elements"]) == 4, timeout=5000)
    assert extra not in parts() and extra not in window.parts.rows

    choose(qtbot, ed.response, "lowpass")
    qtbot.waitUntil(lambda: stage0(window).get("response") == "lowpass", timeout=5000)

    QTest.mouseClick(ed.buffered, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     QPoint(8, ed.buffered.height() // 2))
    qtbot.wait(200)
    assert not ed.problem.isVisible(), ed.problem.text()
    qtbot.waitUntil(lambda: stage0(window).get("buffered") is False, timeout=5000)
    assert "loaded by the next" in ed.stage_list.item(0).text()
    action(window, "undo").trigger()
    assert stage0(window).get("buffered", True) is True
    wait_idle(qtbot, window)
