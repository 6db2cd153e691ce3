"""The window's circuit docks: the schematic of a stage (:mod:`app.qt_circuit_view`) above
the parts, and the stage editor (:mod:`app.qt_stage_editor`) in a tab beside the parts.

:func:`install_circuit_docks` builds both on a :class:`~tolspread.app.qt_mainwindow.MainWindow`
and wires them: both follow the session's design; choosing a stage in the editor shows its
schematic; a click on a part in the schematic selects that part in the parts panel (its tab
brought forward) and highlights it in the spread budget; the editor's edits go through the
window's ``apply_edit`` (the loader's rules, one undoable edit each).
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDockWidget, QScrollArea

from .qt_circuit_view import CircuitView
from .qt_stage_editor import StageEditor

if TYPE_CHECKING:
    from .qt_mainwindow import MainWindow


def _dock(window: "MainWindow", widget, title: str, name: str) -> QDockWidget:
    d = QDockWidget(title, window)
    d.setObjectName(name)
    d.setWidget(widget)
    d.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
    return d


def select_part(window: "MainWindow", ref: str) -> None:
    """Part ``ref`` chosen (a click in the schematic): selected in the parts panel, whose
    tab comes forward, and highlighted in the spread budget."""
    window.dock_parts.raise_()
    for panel, method in ((window.parts, "select_part"), (window.results, "highlight_part")):
        mark = getattr(panel, method, None)
        if mark is not None:
            mark(ref)
    window.show_status(f"{ref} selected")


def install_circuit_docks(window: "MainWindow") -> None:
    """Add the "Circuit" dock (above the parts) and the "Stages" dock (a tab beside the
    parts) to ``window``; sets ``window.circuit_view``, ``window.stage_editor``,
    ``window.dock_circuit`` and ``window.dock_stages``."""
    view = CircuitView()
    editor = StageEditor(window.apply_edit)
    window.circuit_view, window.stage_editor = view, editor
    window.dock_circuit = _dock(window, view, "Circuit", "dock_circuit")
    # the editor scrolls rather than squeezing the drawing above the tabs or widening the parts
    scroll = QScrollArea()
    scroll.setWidgetResizable(True)
    scroll.setWidget(editor)
    window.dock_stages = _dock(window, scroll, "Stages", "dock_stages")
    window.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, window.dock_circuit)
    window.splitDockWidget(window.dock_circuit, window.dock_parts, Qt.Orientation.Vertical)
    window.tabifyDockWidget(window.dock_parts, window.dock_stages)
    window.dock_parts.raise_()
    session = window.session
    session.design_changed.connect(view.show_design)
    session.design_changed.connect(editor.show_design)
    view.part_clicked.connect(lambda ref: select_part(window, ref))
    editor.stage_selected.connect(view.show_stage)
    editor.problem_shown.connect(window.show_status)
    view.show_design(session.design)
    editor.show_design(session.design)
