"""The window's core behaviour, driven the way a person drives it (issue 10: 1, 2, 4-8, 12).

The window is started by the acceptance layer's starter (tests/program_start.py): through
the console script's own function, ``tolspread.app.cli.main`` (what ``tolspread`` runs),
with ``QApplication.exec`` returning at once; from then on ``qtbot`` runs the real event
loop while the test waits, as a person waits, for figures to appear.
``Session.evaluate_now`` is replaced by a call that fails the test: nothing here may
compute on the window's behalf. Actions are triggered through their ``QAction`` (what a
menu click or its shortcut does), keys through key events, buttons through mouse clicks;
file dialogs and message boxes are answered with temporary paths and chosen buttons.
"""
from __future__ import annotations

import ast
import csv
import math
import os
import re
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPointF, Qt, QTimer  # noqa: E402
from PySide6.QtGui import QAction, QKeySequence, QMouseEvent  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402
from PySide6.QtWidgets import (QApplication, QDialog, QMenu, QMessageBox, QToolBar,  # noqa: E402
                               QToolButton)

from tolspread.designfile import dumps, load, load_demo  # noqa: E402
from tolspread.stats import yield_estimate  # noqa: E402
from tolspread.temperature import judged_boards  # noqa: E402
from program_start import answers, shown, starter, wait_for_figures, yield_shown  # noqa: E402,F401 - fixtures

pytestmark = pytest.mark.gui

ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "assets" / "examples" / "ultrasonic_bandpass.json"
WAIT_MS = 60_000  # a person's patience on a loaded machine; the tests do not measure speed


# --- starting the program as `tolspread` does: tests/program_start.py (shared with tests/acceptance)


def library_yield_text(design) -> str:
    """The yield the library computes for ``design``, as the window prints it (judged as the
    analysis judges: over the operating range when the design has one, as the demo does)."""
    a = design.analysis
    y = yield_estimate(judged_boards(design).passed, None, a.confidence, a.interval)
    return f"yield {100 * y.estimate:.2f} %"


def action(w, name: str) -> QAction:
    a = w.findChild(QAction, name)
    assert a is not None, f"no action named {name!r}"
    return a


def click(widget) -> None:
    QTest.mouseClick(widget, Qt.MouseButton.LeftButton)


def new_boards_edit(qtbot, w) -> None:
    """One edit as a person makes it: click "New boards" (the next seed), wait for figures."""
    click(w.parts.redraw)
    wait_for_figures(qtbot, w)


# --- 1: the window computes on start, after Open, New and restore ---------------------------
def test_window_computes_on_start_without_an_edit(starter, qtbot):
    w = starter.launch()
    qtbot.waitUntil(lambda: yield_shown(w) is not None, timeout=WAIT_MS)
    # the figure is the library's own for the demo (tolspread.evaluate + tolspread.stats)
    assert library_yield_text(load_demo()) in w.results.yield_label.text()
    assert not w.session.dirty


def test_window_computes_a_design_given_on_the_command_line(starter, qtbot):
    w = starter.launch(str(EXAMPLE))
    qtbot.waitUntil(lambda: yield_shown(w) is not None, timeout=WAIT_MS)
    assert library_yield_text(load(EXAMPLE)) in w.results.yield_label.text()


def test_open_new_and_new_from_response_compute_without_an_edit(starter, qtbot, tmp_path):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    starter.answers.open_paths.append(str(EXAMPLE))
    action(w, "file_open").trigger()
    wait_for_figures(qtbot, w, load(EXAMPLE))
    assert library_yield_text(load(EXAMPLE)) in w.results.yield_label.text()

    action(w, "file_new").trigger()
    qtbot.waitUntil(lambda: w.session.last_view is not None and w.session.last_view.design == w.session.design
                    and not w.session.design.mask, timeout=WAIT_MS)
    assert "no spec mask" in w.results.yield_label.text()

    def accept_synthesis():
        dlg = QApplication.activeModalWidget()
        if isinstance(dlg, QDialog):
            dlg.accept()
        else:
            QTimer.singleShot(50, accept_synthesis)

    QTimer.singleShot(50, accept_synthesis)
    action(w, "new_from_response").trigger()
    assert w.session.design.name != load_demo().name
    wait_for_figures(qtbot, w)


def test_restored_recovery_file_is_computed(starter, qtbot):
    from tolspread.app import userfiles

    d = load_demo()
    kept = d.with_analysis(seed=d.analysis.seed + 7)
    userfiles.recovery_path().write_text(dumps(kept), encoding="utf-8")
    starter.answers.recovery_answer = QMessageBox.StandardButton.Yes  # "Restore unsaved work?" -> Yes
    w = starter.launch()
    assert any("Restore" in title for title, _text in starter.answers.questions)
    wait_for_figures(qtbot, w, kept)
    assert library_yield_text(kept) in w.results.yield_label.text()
    assert w.session.dirty


def test_screenshot_starts_the_window_normally_and_waits(starter, monkeypatch, tmp_path):
    """``tolspread --screenshot`` must show the first real result, not compute it itself."""
    from tolspread.app.cli import main
    from tolspread.app.qt_mainwindow import MainWindow

    seen: list[str] = []
    grab = MainWindow.grab

    def grab_and_note(self, *args):
        seen.append(self.results.yield_label.text())
        return grab(self, *args)

    monkeypatch.setattr(MainWindow, "grab", grab_and_note)
    png = tmp_path / "shot.png"
    assert main(["--screenshot", str(png)]) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (PNG specification)
    assert len(seen) == 1 and library_yield_text(load_demo()) in seen[0]


# --- 2: actions never receive `checked` as an argument --------------------------------------
FILE_ACTIONS = [("export_csv", "boards.csv"), ("export_png", "plots.png"), ("export_svg", "plots.svg"),
                ("file_save_as", "design.json"), ("report_html", "report.html")]


@pytest.mark.parametrize("name, filename", FILE_ACTIONS)
def test_file_actions_write_the_file_the_dialog_names(starter, qtbot, tmp_path, name, filename):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    target = tmp_path / filename
    starter.answers.save_paths.append(str(target))
    action(w, name).trigger()
    qtbot.waitUntil(target.exists, timeout=WAIT_MS)
    assert target.stat().st_size > 0
    assert "error" not in w.status_text.text().lower()


def test_board_metrics_csv_from_the_menu_has_a_row_per_board(starter, qtbot, tmp_path):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    target = tmp_path / "boards.csv"
    starter.answers.save_paths.append(str(target))
    action(w, "export_csv").trigger()  # Ctrl+Shift+M: failed with "not bool" (issue 10 #2)
    with target.open(encoding="utf-8-sig", newline="") as f:
        rows = list(csv.reader(f))
    assert len(rows) == 1 + load_demo().analysis.samples


def _signal_connections(tree: ast.AST):
    """(line, signal name, slot expression) for every ``x.<signal>.connect(slot)``."""
    for node in ast.walk(tree):
        if not isinstance(node, ast.Call) or not isinstance(node.func, ast.Attribute):
            continue
        f = node.func
        if f.attr == "connect" and isinstance(f.value, ast.Attribute) and node.args:
            yield node.lineno, f.value.attr, node.args[0]


BOOL_SIGNALS = {"triggered", "clicked", "toggled"}  # Qt passes `checked` (bool) to the slot


def test_no_bool_signal_reaches_a_slot_with_a_default_argument():
    """Static audit of app/: a triggered/clicked/toggled signal connected straight to a
    function whose parameters have defaults would hand it ``checked`` (DESIGN.md, known traps)."""
    problems = []
    for path in sorted((ROOT / "app").glob("*.py")):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        defaults = {n.name: n for n in ast.walk(tree) if isinstance(n, ast.FunctionDef)
                    and (n.args.defaults or n.args.kw_defaults and any(n.args.kw_defaults))}
        for line, sig, slot in _signal_connections(tree):
            if sig not in BOOL_SIGNALS:
                continue
            name = slot.attr if isinstance(slot, ast.Attribute) else slot.id if isinstance(slot, ast.Name) else None
            if name in defaults and defaults[name].args.defaults:
                problems.append(f"{path.name}:{line}: {sig} -> {name} (has default arguments)")
            if isinstance(slot, ast.Lambda) and slot.args.defaults and not slot.args.vararg:
                first = slot.args.args[0].arg if slot.args.args else ""
                if not first.startswith("_") and first not in ("on", "checked"):
                    problems.append(f"{path.name}:{line}: {sig} -> lambda with default {first!r}")
    assert not problems, "\n".join(problems)


# --- 4: Quit with unsaved changes, Discard -------------------------------------------------
QUIT_SCRIPT = textwrap.dedent("""
    import sys
    from PySide6.QtCore import Qt, QTimer
    from PySide6.QtGui import QAction
    from PySide6.QtTest import QTest
    from PySide6.QtWidgets import QApplication, QMessageBox
    from tolspread.app.cli import main

    app = QApplication(sys.argv[:1])

    def window():
        return next(w for w in QApplication.topLevelWidgets() if w.objectName() == "tolspread_main")

    def answer_discard():
        box = QApplication.activeModalWidget()
        if isinstance(box, QMessageBox):
            print("asked:", box.text(), flush=True)
            QTest.mouseClick(box.button(QMessageBox.StandardButton.Discard), Qt.MouseButton.LeftButton)
        else:
            QTimer.singleShot(50, answer_discard)

    def start_long_run_then_quit():
        w = window()
        if w.session.last_view is None:
            QTimer.singleShot(100, start_long_run_then_quit)
            return
        box = w.parts.samples  # the boards box: a long run, still going at Quit
        box.setFocus()
        box.selectAll()
        QTest.keyClicks(box, "{boards}")
        QTest.keyClick(box, Qt.Key.Key_Return)
        QTimer.singleShot(50, answer_discard)
        QTimer.singleShot(300, w.findChild(QAction, "quit").trigger)

    QTimer.singleShot(0, start_long_run_then_quit)
    rc = main([])
    print("exit", rc, flush=True)
    sys.exit(rc)
""")


@pytest.mark.parametrize("boards", ["900000", "6000"])
def test_quit_with_unsaved_changes_discard_exits_without_an_error(tmp_path, boards):
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", TOLSPREAD_CONFIG_DIR=str(tmp_path))
    proc = subprocess.run([sys.executable, "-c", QUIT_SCRIPT.replace("{boards}", boards)], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=120)
    assert "asked: The design has unsaved changes" in proc.stdout
    assert proc.returncode == 0, proc.stderr
    assert "exit 0" in proc.stdout
    assert "Traceback" not in proc.stderr and "has been deleted" not in proc.stderr, proc.stderr
    log = tmp_path / "tolspread.log"
    assert not log.exists() or " ERROR " not in log.read_text(encoding="utf-8")


# --- 5: Cancel of a long run ---------------------------------------------------------------
def test_cancel_says_the_run_was_cancelled_and_whose_figures_are_shown(starter, qtbot):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    d = w.session.design
    box = w.parts.samples
    box.setFocus()
    box.selectAll()
    QTest.keyClicks(box, "900000")
    QTest.keyClick(box, Qt.Key.Key_Return)
    qtbot.waitUntil(w.cancel_button.isVisible, timeout=WAIT_MS)  # progress of the long run
    click(w.cancel_button)
    qtbot.waitUntil(lambda: not w.session.busy, timeout=WAIT_MS)
    detail = w.results.detail.text()
    assert "cancelled" in detail and "900,000 boards" in detail
    assert f"previous run: {d.analysis.samples:,} boards, seed {d.analysis.seed}" in detail
    assert "cancelled" in w.status_text.text()
    assert w.session.last_view.samples == d.analysis.samples  # the figures really are the old run's
    # Undo returns the boards box to the run shown (one edit, Ctrl+Z)
    QTest.keyClick(w, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    qtbot.waitUntil(lambda: w.session.design == d, timeout=WAIT_MS)
    wait_for_figures(qtbot, w, d)
    assert "cancelled" not in w.results.detail.text()


# --- 6 (part): stale readout and zoom after Open or a switch of the second plot ----------------
def _move_mouse_over_gain_plot(w) -> None:
    vb = w.plots.vb_mag
    centre = vb.mapViewToScene(vb.viewRect().center())
    p = w.plots.canvas.mapFromScene(centre)
    ev = QMouseEvent(QMouseEvent.Type.MouseMove, QPointF(p), QPointF(w.plots.canvas.viewport().mapToGlobal(p)),
                     Qt.MouseButton.NoButton, Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(w.plots.canvas.viewport(), ev)


def test_open_fits_the_plots_and_clears_the_old_readout(starter, qtbot):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    w.plots.vb_mag.setXRange(1.0, 1.3, padding=0)  # zoomed in on 10-20 Hz, as with the wheel
    _move_mouse_over_gain_plot(w)
    qtbot.waitUntil(lambda: "nominal" in w.plots.readout.text(), timeout=WAIT_MS)
    starter.answers.open_paths.append(str(EXAMPLE))
    action(w, "file_open").trigger()
    assert "nominal" not in w.plots.readout.text()  # no value of the old design stays
    wait_for_figures(qtbot, w, load(EXAMPLE))
    qtbot.wait(50)
    a = load(EXAMPLE).analysis
    (x0, x1), _ = w.plots.vb_mag.viewRange()
    # the whole analysed range of the new design is on screen (log10 of the frequency)
    assert x0 <= math.log10(a.f_start) + 0.01 and x1 >= math.log10(a.f_stop) - 0.01
    assert "nominal" not in w.plots.readout.text()


def test_switching_phase_and_delay_clears_the_readout(starter, qtbot):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    _move_mouse_over_gain_plot(w)
    qtbot.waitUntil(lambda: "nominal" in w.plots.readout.text(), timeout=WAIT_MS)
    action(w, "show_delay").trigger()
    assert "nominal" not in w.plots.readout.text()
    qtbot.waitUntil(lambda: w.session.last_view.second == "delay" and not w.session.busy, timeout=WAIT_MS)
    assert "deg" not in w.plots.readout.text()


# --- 7: toolbar buttons stay put --------------------------------------------------------------
def _toolbar_geometry(w) -> list[tuple[str, tuple[int, int, int, int]]]:
    tb = w.findChild(QToolBar, "toolbar_main")
    out = []
    for a in tb.actions():
        b = tb.widgetForAction(a)
        if isinstance(b, QToolButton):
            g = b.geometry()
            out.append((a.objectName(), (g.x(), g.y(), g.width(), g.height())))
    return out


def test_toolbar_buttons_do_not_move_after_an_edit(starter, qtbot):
    w = starter.launch()
    w.resize(1600, 950)
    wait_for_figures(qtbot, w)
    qtbot.wait(50)
    before = _toolbar_geometry(w)
    new_boards_edit(qtbot, w)
    qtbot.wait(50)
    assert _toolbar_geometry(w) == before
    undo = action(w, "undo")
    assert undo.text().startswith("Undo ") and len(undo.text()) > len("Undo ")  # the menu names the edit
    assert undo.toolTip().startswith(undo.text().replace("&", "")[:10])
    tb = w.findChild(QToolBar, "toolbar_main")
    assert tb.widgetForAction(undo).text() == "Undo"


# --- 8: Ctrl+Y redoes -------------------------------------------------------------------------
@pytest.mark.parametrize("redo_key", ["Ctrl+Y", "Ctrl+Shift+Z"])
def test_redo_keys(starter, qtbot, redo_key):
    w = starter.launch()
    wait_for_figures(qtbot, w)
    d0 = w.session.design
    new_boards_edit(qtbot, w)
    d1 = w.session.design
    w.activateWindow()
    w.setFocus()
    QTest.keyClick(w, Qt.Key.Key_Z, Qt.KeyboardModifier.ControlModifier)
    qtbot.waitUntil(lambda: w.session.design == d0, timeout=WAIT_MS)
    seq = QKeySequence(redo_key)[0]
    QTest.keyClick(w, seq.key(), seq.keyboardModifiers())
    qtbot.waitUntil(lambda: w.session.design == d1, timeout=WAIT_MS)


# --- 12: the Help menu ------------------------------------------------------------------------
def test_help_menu_guide_shortcuts_and_about(starter, qtbot):
    from tolspread import __version__
    from tolspread.app import userfiles

    w = starter.launch()
    menus = [a.text().replace("&", "") for a in w.menuBar().actions()]
    assert menus[-1] == "Help"

    action(w, "help_guide").trigger()
    guide = w.findChild(QDialog, "help_guide")
    assert guide.isVisible()
    text = guide.findChild(object, "help_guide_text").toPlainText()
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    window_section = readme.split("## The window", 1)[1].split("\n## ", 1)[0]
    for heading in re.findall(r"^- \*\*(.+?)\*\*", window_section, flags=re.M):
        assert heading.split(" (")[0].lower() in text.lower(), heading

    action(w, "help_shortcuts").trigger()
    table = w.findChild(QDialog, "help_shortcuts").findChild(object, "help_shortcuts_table")
    rows = {(table.item(i, 1).text(), table.item(i, 2).text()) for i in range(table.rowCount())}
    native = QKeySequence.SequenceFormat.NativeText
    in_menus = [a for m in w.menuBar().findChildren(QMenu) for a in m.actions() if a.shortcuts()]
    assert len(in_menus) >= 20
    for a in in_menus:  # every shortcut the menus really have is listed (keys found only on
        # some keyboards, such as F14 or a dedicated "Undo" key, only when nothing else is)
        texts = [k.toString(native) for k in a.shortcuts()]
        usual = [t for t in texts if "+" in t or t == "Del" or (t.startswith("F") and t[1:].isdigit()
                                                                  and int(t[1:]) <= 12) or len(t) == 1] or texts
        assert any(r[1] == " or ".join(usual) for r in rows), (a.objectName(), usual)
    assert not any("F14" in keys for _, keys in rows)
    assert any(name == "Redo" and QKeySequence("Ctrl+Y").toString(native) in keys for name, keys in rows)

    action(w, "help_about").trigger()
    about = w.findChild(QDialog, "help_about").findChild(object, "help_about_text").text()
    assert __version__ in about and "MIT" in about
    assert str(userfiles.log_path()) in about and str(userfiles.settings_path()) in about


def test_every_action_has_an_object_name(starter):
    w = starter.launch()
    unnamed = [a.text() for a in w.findChildren(QAction)
               if a.objectName() == "" and not a.isSeparator() and a.menu() is None
               and a.parent() is w and a not in w.recent_menu.actions()]
    assert not unnamed
