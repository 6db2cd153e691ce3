"""Issue 15 item 2 in the window: the recommend dialog shows the chosen set's yield after the
design's service life, cautions when it is below the target, and its check box "the target
applies after the service life too" makes the search require the target after the life.

The window is started by its entry point (tests/program_start.py through the acceptance
conftest); the dialog is opened by its QAction, the check box and buttons clicked with the mouse,
the target typed. The figures are checked against ``tolspread recommend --json`` run as a process
on the same boards (the demo's seed, the same sample count): the window and the command line must
show the same after-life counts; and the after-life yield of the chosen set against ``tolspread
analyze --json`` of that set written back to a design file.
"""
from __future__ import annotations

import json
import re

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QAction
from PySide6.QtTest import QTest

from .conftest import log_errors, run_cli, wait_idle

pytestmark = [pytest.mark.gui, pytest.mark.slow]  # about 13 s: two searches in the window, three by the command line

BOARDS = 500
PCT = r"([0-9.]+) %"


def action(window, name: str) -> QAction:
    hits = [a for a in window.findChildren(QAction) if a.objectName() == name]
    assert len(hits) == 1, f"no single action named {name!r}"
    return hits[0]


def click(widget) -> None:
    QTest.mouseClick(widget, Qt.MouseButton.LeftButton)


def cli_recommend(tmp_path, *extra: str) -> dict:
    out = tmp_path / "rec.json"
    run = run_cli("recommend", "--target-yield", "97%", "--samples", str(BOARDS), "--json", str(out), *extra,
                  timeout=300)
    assert run.returncode == 0, run.stderr
    return json.loads(out.read_text("utf-8"))


def search(qtbot, dlg) -> str:
    click(dlg.run_button)
    qtbot.waitUntil(lambda: dlg.run_button.isEnabled() and dlg.apply_button.isEnabled(), timeout=300_000)
    return dlg.summary.text()


def test_recommend_dialog_after_life_figures_caution_and_check_box(starter, qtbot, tmp_path):
    w = starter.launch()  # the built-in demo: -40..85 °C, 20 years at 40 °C
    wait_idle(qtbot, w)
    action(w, "recommend").trigger()
    dlg = w.recommend_dialog
    assert dlg.after_life.isEnabled() and not dlg.after_life.isChecked()
    dlg.samples.setValue(BOARDS)
    dlg.target.lineEdit().selectAll()
    QTest.keyClicks(dlg.target.lineEdit(), "97")
    QTest.keyClick(dlg.target.lineEdit(), Qt.Key.Key_Tab)

    # searched at delivery: the after-life yield is shown beside it, with the caution
    text = search(qtbot, dlg)
    data = cli_recommend(tmp_path)  # the same boards by the command line
    want = data["recommendation"]
    after = want["chosen"]["after_life"]
    m = re.search(rf"after 20 years at 40 °C: yield {PCT}</b>, lower bound {PCT} \(([0-9,]+) of", text)
    assert m and int(m.group(3).replace(",", "")) == after["passed"]
    assert want["after_life_below_target"] and "Caution:" in text and "after the service life too" in text
    rows = {dlg.sets_view.table.item(i, 0).text(): i for i in range(dlg.sets_view.table.rowCount())}
    assert not dlg.sets_view.table.isColumnHidden(5)
    for c in data["compared"]:  # each set's after-life yield beside its yield: the command line's figures
        assert dlg.sets_view.table.item(rows[c["label"]], 5).text() == f"{100 * c['after_life_yield']['estimate']:.2f} %"
    shown = dlg.sets_view.table.item(rows["recommended"], 5).text()
    assert shown != dlg.sets_view.table.item(rows["recommended"], 2).text()  # differs from delivery

    # the check box: the target at delivery and after the life
    click(dlg.after_life)
    assert dlg.after_life.isChecked()
    text = search(qtbot, dlg)
    want = cli_recommend(tmp_path, "--target-after-life")["recommendation"]
    assert "Caution:" not in text and "at delivery and after the service life" in text
    chosen = [dlg.table.item(i, 3).text() for i in range(dlg.table.rowCount())]
    assert chosen == [want["grades"][dlg.table.item(i, 0).text().split()[0]] for i in range(dlg.table.rowCount())]
    m = re.search(rf"after 20 years at 40 °C: yield {PCT}</b>, lower bound {PCT} \(([0-9,]+) of", text)
    assert m and float(m.group(2)) >= 97.0
    # analyze, by the command line, of the set chosen in the window written back: the same boards
    # pass after the life, at every judged temperature
    design = tmp_path / "chosen.json"
    run = run_cli("recommend", "--target-yield", "97%", "--samples", str(BOARDS), "--target-after-life", "-o",
                  str(design), timeout=300)
    assert run.returncode == 0, run.stderr
    got = json.loads(run_cli("analyze", str(design), "--samples", str(BOARDS), "--json", "-").stdout)
    assert got["service_life"]["after"]["passed"] == int(m.group(3).replace(",", ""))
    assert "delivery and life" in dlg.sets_view.table.horizontalHeaderItem(7).text()
    dlg.reject()
    assert not log_errors()
