"""The Help menu: a quick guide to the window, the keyboard shortcuts, and About.

The shortcuts table is built from the window's own actions (their menus, texts and key
sequences as Qt reports them), so it cannot drift from what the keys really do. Each help
window is a non-modal dialog, opened once and raised again on the next request. The three
help windows (guide, shortcuts, About) are one plain dialog each around a text or a table,
built by one function (``_dialog``), so they share this module rather than a file each.
"""
from __future__ import annotations

import platform

from PySide6 import __version__ as pyside_version
from PySide6.QtCore import Qt, qVersion
from PySide6.QtGui import QAction, QKeySequence
from PySide6.QtWidgets import (QDialog, QDialogButtonBox, QHeaderView, QLabel, QMainWindow, QMenu,
                               QTableWidget, QTableWidgetItem, QTextBrowser, QVBoxLayout, QWidget)

from .. import __version__

from . import userfiles

LICENCE = "MIT"

# README's "The window" section, condensed for reading beside the window. The headings are
# the README's own (tests/test_window_core.py checks that each README heading is here).
GUIDE_HTML = """
<h2>The tolspread window</h2>
<p>tolspread samples many boards from the tolerance grades you choose, holds every board's
response against the spec mask you draw, and shows the yield with its confidence interval,
which parts cause the spread and the cheapest grades that meet a target. The window
evaluates on its own after every change; nothing needs to be started.</p>
<h3>Parts and grades (left)</h3>
<p>Each part's value (type <code>4k7</code>, <code>4.7k</code>, <code>10n</code>,
<code>2n2</code>…; invalid text is marked and the last good value stays in use), its grade
from the catalog, and a tolerance slider: dragging it redraws the spread live on the first
1,000 boards ("preview"); letting go evaluates every board and makes one undoable edit.
Number of boards, seed, sampling (random or Sobol) and New boards sit above the parts.
Right-click a part's name to lock its grade, forbid technologies for it, or give it measured
values from a CSV (shown instead of its slider; one reel says nothing about other lots).</p>
<h3>Networks and matched pairs (in the parts panel)</h3>
<p>A network's members sit together under its heading. Click a part's name to choose it,
Ctrl+click more, then right-click one of them &gt; New network or matched pair… (or Design
&gt; New network or matched pair…): name, members of one kind (two make a matched pair),
tolerance (±%), ratio tolerance (±%) and tracking (ppm/K), checked as the design file is. A
part's menu also adds it to a network, takes it out, edits or dissolves its network; so does
a right-click on the heading. Each change is one undoable edit.</p>
<h3>Circuit (above the parts)</h3>
<p>The schematic of the stage chosen in its box, drawn from the netlist the analysis uses:
each part with its reference, value and grade; a circuit stage as labelled node lines, each
part between its two nodes (a line crossing another without a dot is not connected). Click a
part to select it in the parts panel and see its share in the spread budget.</p>
<h3>Stages (a tab beside the parts)</h3>
<p>Add, remove and reorder stages; change a stage's name, topology, options, whether the
next stage loads it and its DC bias (V: the class II capacitors of the stage that state none
of their own sit at it; empty: not stated). A circuit stage has tables of elements (ref, node, node) and op-amps
(ref, +, −, output): double-click a cell and type. A refused edit is marked red with its
reason and the design keeps its last good state; every change can be undone.</p>
<h3>Channels (a tab beside the parts)</h3>
<p>How many identical channels each board carries, which parts one physical part serves in
every channel, and whether one network package serves every channel. From two channels on,
the span table's Add match span limits the gain, phase or group-delay difference between
channels, and the Channel match tab beside the spread plots (View &gt; Channel match)
shows the boards' largest difference between channels with each match span's limit, the
yield of the matched set and the mismatch budget.</p>
<h3>Spread plots (middle)</h3>
<p>Gain and phase or group delay (View menu) over log frequency: the nominal response
(black), the central 98 % of boards (dark blue), every board (light blue), a few sample
boards and the failing boards (orange-red). The line under the plots reads out the values
under the mouse. View &gt; Fit plots frames the response again.</p>
<h3>Drawing the mask</h3>
<p>Press <b>Draw floor span</b> or <b>Draw ceiling span</b> and drag on the gain plot over
the zone the response must not enter. Drag a span's line to move it, its end handles to
slope it; click a span to select it, Delete removes it. The span table under the plots
edits every number and adds phase and group-delay-variation spans.</p>
<h3>Yield and spread budget (right)</h3>
<p>The yield with its interval and board count, failures per span, a histogram of any
metric with the failing boards marked, and the spread budget: which part explains how
much of that metric's variance. When few boards fail, the high-yield estimate by importance
sampling follows the yield, with its interval and the plain boards it would take.</p>
<h3>Files</h3>
<p>New, Open, Open recent, Save, Save As; a prompt before unsaved changes are discarded;
Undo and Redo for every edit. Window size and layout are remembered.</p>
<h3>Design menu</h3>
<p>New design from a response, Grades and costs, Find cheapest grades (target yield,
confidence, the cost-yield curve, apply the result as one undoable edit, save the parts
list; the class II warning and the grade sets side by side), Temperature and service life,
Purchase and signal path (boards bought and currency: money per board), Distribution shapes
(the yield under five readings of the tolerances), Centre values (neighbouring series values
for a higher yield, applied as one edit), and the report as HTML or PDF.</p>
<h3>Exports</h3>
<p>File menu: the plots as PNG or SVG, and every board's part values, metrics and
pass/fail as CSV.</p>
<h3>Long runs</h3>
<p>50,000 boards and more show progress and a Cancel button. After a cancel the results
say so and name the run the figures on screen come from; View &gt; Evaluate again runs
the current design.</p>
<h3>Help menu</h3>
<p>This guide, the keyboard shortcuts (read from the menus themselves) and About: the
version, the licence, and where the error log, settings and recovery file live.</p>
<p><i>Every figure is an estimate under the grades' stated distributions: confirm it by
measuring real parts and by qualified review before committing to production.</i></p>
"""


def _dedicated_key(text: str) -> bool:
    """True for a key found only on some keyboards: F13 and above, or a named key such as
    "Undo" or "Redo" without a modifier."""
    if "+" in text:
        return False
    if text.startswith("F") and text[1:].isdigit():
        return int(text[1:]) > 12
    return len(text) > 3 and text.isalpha()


def shortcut_rows(window: QMainWindow) -> list[tuple[str, str, str]]:
    """(menu, action, keys) for every action in the window's menus that has a shortcut,
    in menu order; keys in the platform's native text, alternatives joined by " or "."""
    rows: list[tuple[str, str, str]] = []

    def walk(menu: QMenu, path: str) -> None:
        for a in menu.actions():
            if a.menu() is not None:
                walk(a.menu(), f"{path} > {a.menu().title().replace('&', '')}")
            elif not a.isSeparator() and a.shortcuts():
                texts = [k.toString(QKeySequence.SequenceFormat.NativeText) for k in a.shortcuts()]
                # the platform adds dedicated keys (F14, "Undo") that few keyboards have: list
                # them only when they are the action's only keys
                usual = [t for t in texts if not _dedicated_key(t)] or texts
                rows.append((path, _plain(a), " or ".join(usual)))

    for top in window.menuBar().actions():
        if top.menu() is not None:
            walk(top.menu(), top.menu().title().replace("&", ""))
    return rows


def _plain(action: QAction) -> str:
    """An action's name without mnemonics or the undo stack's changing detail."""
    if action.objectName() in ("undo", "redo"):
        return action.iconText()
    return action.text().replace("&", "").rstrip("…")


def about_html() -> str:
    return (f"<h2>tolspread {__version__}</h2>"
            "<p>Tolerance spread and yield of analog filters: Monte Carlo sampling of the parts' "
            "tolerance grades, held against a spec mask.</p>"
            f"<p>Licence: {LICENCE}. The demo designs, their scenarios and the built-in grade costs are "
            "invented.</p>"
            "<p>Results are estimates under the grades' stated distributions; confirm them with measured "
            "parts and qualified review.</p>"
            "<table cellspacing='4'>"
            f"<tr><td>error log</td><td><code>{userfiles.log_path()}</code></td></tr>"
            f"<tr><td>settings</td><td><code>{userfiles.settings_path()}</code></td></tr>"
            f"<tr><td>unsaved-work recovery (one file per window)</td><td><code>{userfiles.recovery_dir()}</code></td></tr>"
            "</table>"
            "<p>Set <code>TOLSPREAD_CONFIG_DIR</code> to keep these files elsewhere.</p>"
            f"<p style='color:#555'>Qt {qVersion()}, PySide6 {pyside_version}, Python "
            f"{platform.python_version()}</p>")


def _dialog(parent: QWidget, name: str, title: str, body: QWidget) -> QDialog:
    dlg = QDialog(parent)
    dlg.setObjectName(name)
    dlg.setWindowTitle(title)
    lay = QVBoxLayout(dlg)
    lay.addWidget(body)
    buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Close)
    buttons.rejected.connect(dlg.reject)
    lay.addWidget(buttons)
    return dlg


def guide_dialog(parent: QWidget) -> QDialog:
    text = QTextBrowser()
    text.setObjectName("help_guide_text")
    text.setHtml(GUIDE_HTML)
    dlg = _dialog(parent, "help_guide", "tolspread: quick guide", text)
    dlg.resize(640, 640)
    return dlg


def shortcuts_dialog(window: QMainWindow) -> QDialog:
    rows = shortcut_rows(window)
    table = QTableWidget(len(rows), 3)
    table.setObjectName("help_shortcuts_table")
    table.setHorizontalHeaderLabels(["menu", "action", "keys"])
    table.verticalHeader().hide()
    table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
    for i, row in enumerate(rows):
        for j, text in enumerate(row):
            table.setItem(i, j, QTableWidgetItem(text))
    table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    table.horizontalHeader().setStretchLastSection(True)
    dlg = _dialog(window, "help_shortcuts", "tolspread: keyboard shortcuts", table)
    dlg.resize(620, 560)
    return dlg


def about_dialog(parent: QWidget) -> QDialog:
    label = QLabel(about_html())
    label.setObjectName("help_about_text")
    label.setTextFormat(Qt.TextFormat.RichText)
    label.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
    label.setWordWrap(True)
    dlg = _dialog(parent, "help_about", f"About tolspread {__version__}", label)
    dlg.resize(560, 360)
    return dlg


def build_help_menu(window: QMainWindow) -> QMenu:
    """Add the Help menu (guide, shortcuts, about) to ``window``'s menu bar; each action
    opens its dialog (non-modal) or raises it when it is already open."""
    menu = window.menuBar().addMenu("&Help")
    opened: dict[str, QDialog] = {}

    def show(name: str, make) -> QDialog:
        dlg = opened.get(name)
        if dlg is not None and name == "help_shortcuts":  # rebuilt each time: the keys of now
            dlg.close()
            dlg.deleteLater()
            dlg = None
        if dlg is None:
            dlg = opened[name] = make()
        dlg.show()
        dlg.raise_()
        dlg.activateWindow()
        return dlg

    for text, name, keys, make in (
            ("Quick guide", "help_guide", QKeySequence.StandardKey.HelpContents, lambda: guide_dialog(window)),
            ("Keyboard shortcuts", "help_shortcuts", None, lambda: shortcuts_dialog(window)),
            ("About tolspread", "help_about", None, lambda: about_dialog(window))):
        a = QAction(text, window)
        a.setObjectName(name)
        if keys is not None:
            a.setShortcuts(QKeySequence.keyBindings(keys))
        a.triggered.connect(lambda *_checked, n=name, m=make: show(n, m))
        menu.addAction(a)
    window.help_dialogs = opened  # type: ignore[attr-defined]
    return menu
