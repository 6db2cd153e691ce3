"""The window's menus, their actions and the toolbar (File, Edit, Design, View, Help).

:func:`build_menus` makes every :class:`~PySide6.QtGui.QAction` of the window, sets it on
the window as ``act_<name>`` (tests and the Help menu's shortcut table find them there and
by object name), puts it in its menu and the chosen ones on the toolbar. A new menu entry
goes here; what it does is a method of the window (or of the object that owns the work,
such as :class:`~tolspread.app.qt_exports.WindowExports`).
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from PySide6.QtGui import QAction, QActionGroup, QKeySequence
from PySide6.QtWidgets import QToolBar

from .qt_centre_dialog import open_centre
from .qt_channel_dock import show_channel_match
from .qt_help import build_help_menu
from .qt_network_menu import new_network
from .qt_part_menu import install_part_menu
from .qt_purchase_dialog import open_purchase
from .qt_shapes_dialog import open_shapes
from .qt_signoff import open_report_details

if TYPE_CHECKING:
    from .qt_mainwindow import MainWindow


def window_action(w: "MainWindow", text: str, slot, shortcut=None, name: str = "",
                  checkable: bool = False) -> QAction:
    """A window action; ``slot()`` is called without arguments, or ``slot(checked)`` for a
    checkable action. ``triggered`` passes a ``checked`` flag, which would otherwise land
    in a slot's first default argument (a path, say)."""
    a = QAction(text, w)
    if shortcut is not None:
        a.setShortcut(QKeySequence(shortcut))
    a.setCheckable(checkable)
    a.setObjectName(name or text.lower().replace(" ", "_").replace("…", ""))
    if checkable:
        a.triggered.connect(lambda checked: slot(bool(checked)))
    else:
        a.triggered.connect(lambda *_checked: slot())
    return a


def build_menus(w: "MainWindow") -> None:
    """Make the window's actions (``w.act_*``), its menus, the recent-files submenu
    (``w.recent_menu``), the Help menu (``w.help_menu``) and the main toolbar."""

    def act(text: str, slot, shortcut=None, name: str = "", checkable: bool = False) -> QAction:
        return window_action(w, text, slot, shortcut, name, checkable)

    m = w.menuBar()
    S = QKeySequence.StandardKey
    w.act_new = act("New", w.file_new, S.New, "file_new")
    w.act_open = act("Open…", w.file_open, S.Open, "file_open")
    w.act_save = act("Save", w.file_save, S.Save, "file_save")
    w.act_save_as = act("Save As…", w.file_save_as, S.SaveAs, "file_save_as")
    ex = w.exports
    w.act_png = act("Export plots as PNG…", lambda: ex.plots("png"), "Ctrl+E", "export_png")
    w.act_svg = act("Export plots as SVG…", lambda: ex.plots("svg"), "Ctrl+Shift+E", "export_svg")
    w.act_csv = act("Export board metrics as CSV…", ex.board_metrics, "Ctrl+Shift+M", "export_csv")
    w.act_quit = act("Quit", w.close, S.Quit, "quit")
    fm = m.addMenu("&File")
    for a in (w.act_new, w.act_open):
        fm.addAction(a)
    w.recent_menu = fm.addMenu("Open recent")
    fm.addSeparator()
    for a in (w.act_save, w.act_save_as):
        fm.addAction(a)
    fm.addSeparator()
    for a in (w.act_png, w.act_svg, w.act_csv):
        fm.addAction(a)
    fm.addSeparator()
    fm.addAction(w.act_quit)
    # The menu shows what will be undone ("Undo R1 value 2k7"); the toolbar button keeps
    # the short icon text, so the buttons never move; the tooltip has the full text.
    w.act_undo = w.session.undo_stack.createUndoAction(w, "Undo")
    w.act_undo.setShortcuts(QKeySequence.keyBindings(S.Undo))
    w.act_undo.setIconText("Undo")
    w.act_undo.setObjectName("undo")
    w.act_redo = w.session.undo_stack.createRedoAction(w, "Redo")
    redo_keys = QKeySequence.keyBindings(S.Redo)
    if QKeySequence("Ctrl+Y") not in redo_keys:
        redo_keys.append(QKeySequence("Ctrl+Y"))  # README promises Ctrl+Y on every platform
    w.act_redo.setShortcuts(redo_keys)
    w.act_redo.setIconText("Redo")
    w.act_redo.setObjectName("redo")
    em = m.addMenu("&Edit")
    em.addAction(w.act_undo)
    em.addAction(w.act_redo)
    em.addSeparator()
    w.act_floor = act("Draw floor span", lambda on: w._set_draw("floor", on), "F", "draw_floor", True)
    w.act_ceiling = act("Draw ceiling span", lambda on: w._set_draw("ceiling", on), "C",
                        "draw_ceiling", True)
    w.act_delete = act("Delete selected span", w.delete_selected_span, S.Delete, "delete_span")
    for a in (w.act_floor, w.act_ceiling, w.act_delete):
        em.addAction(a)
    dm = m.addMenu("&Design")
    w.act_synth = act("New design from a response…", w.new_from_response, "Ctrl+Shift+N",
                      "new_from_response")
    w.act_catalog = act("Grades and costs…", w.edit_catalog, "Ctrl+G", "edit_catalog")
    w.act_recommend = act("Find cheapest grades…", w.open_recommend, "Ctrl+R", "recommend")
    w.act_temperature = act("Temperature and service life…", w.open_temperature, "Ctrl+T", "temperature")
    w.act_shapes = act("Distribution shapes…", lambda: open_shapes(w), None, "shapes")
    w.act_centre = act("Centre values…", lambda: open_centre(w), None, "centre_values")
    w.act_purchase = act("Purchase and signal path…", lambda: open_purchase(w), None, "purchase")
    w.act_network = act("New network or matched pair…", lambda: new_network(w), None, "design_network_new")
    w.act_report_details = act("Report details…", lambda: open_report_details(w), None, "report_details")
    w.act_report_html = act("Export report (HTML)…", lambda: ex.report("html"),
                            "Ctrl+P", "report_html")
    w.act_report_pdf = act("Export report (PDF)…", lambda: ex.report("pdf"),
                           "Ctrl+Shift+P", "report_pdf")
    for a in (w.act_synth, w.act_catalog, w.act_recommend, w.act_temperature, w.act_purchase, w.act_network,
              w.act_shapes,
              w.act_centre,
              None, w.act_report_details, w.act_report_html,
              w.act_report_pdf):
        dm.addSeparator() if a is None else dm.addAction(a)
    vm = m.addMenu("&View")
    group = QActionGroup(w)
    w.act_phase = act("Phase", lambda on: on and w._set_second("phase"), "Ctrl+1",
                      "show_phase", True)
    w.act_delay = act("Group delay", lambda on: on and w._set_second("delay"), "Ctrl+2",
                      "show_delay", True)
    w.act_phase.setChecked(True)
    for a in (w.act_phase, w.act_delay):
        group.addAction(a)
        vm.addAction(a)
    vm.addSeparator()
    w.act_failing = act("Highlight failing boards", w._on_failing_toggled, "Ctrl+H",
                        "highlight_failing", True)
    w.act_failing.setChecked(True)
    w.act_fit = act("Fit plots", w.plots.fit, "Ctrl+0", "fit_plots")
    w.act_channel_match = act("Channel match", lambda: show_channel_match(w), "Ctrl+3", "show_channel_match")
    w.act_evaluate = act("Evaluate again", w.session.request, "F5", "evaluate")
    w.act_evaluate.setToolTip("Evaluate the current design again (after a cancelled run)")
    vm.addAction(w.act_failing)
    vm.addAction(w.act_fit)
    vm.addAction(w.act_channel_match)
    vm.addSeparator()
    vm.addAction(w.act_evaluate)
    w.help_menu = build_help_menu(w)
    tb = QToolBar("Main tools")
    tb.setObjectName("toolbar_main")
    for a in (w.act_open, w.act_save, None, w.act_undo, w.act_redo, None, w.act_floor,
              w.act_ceiling, w.act_delete, None, w.act_phase, w.act_delay, w.act_failing,
              w.act_fit, None, w.act_recommend):
        tb.addSeparator() if a is None else tb.addAction(a)
    w.addToolBar(tb)
    w._refresh_recent()
    install_part_menu(w)  # a part's own menu in the parts panel (lock, forbid, measured values)
