"""The window's channel views: the Channels panel (a tab beside the parts) and the
Channel match tab beside the spread plots.

:func:`install_channel_views` puts the spread plots in a tab widget whose second tab,
"Channel match" (:class:`~tolspread.app.qt_mismatch_plot.MismatchPlots`), is there while
the design has two channels or more (with one tab the tab bar hides itself, so a design of
one channel looks as before); adds the "Channels" dock
(:class:`~tolspread.app.qt_channel_editor.ChannelEditor`) tabified with the parts; and
wires both to the session: each new view is drawn, each design shown, and the span
table's Add match span menu follows the channel count. Selecting a match span in the
span table draws its limit selected in the channel-match plot, and a click on a limit line
selects its span's row.
"""
from __future__ import annotations

from typing import TYPE_CHECKING

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDockWidget, QScrollArea, QTabWidget

from ..design import Design

from .qt_channel_editor import ChannelEditor
from .qt_mismatch_plot import MismatchPlots

if TYPE_CHECKING:
    from .qt_mainwindow import MainWindow

MATCH_TAB = "Channel match"
SPREAD_TAB = "Spread"


def show_channel_match(window: "MainWindow") -> None:
    """View > Channel match: bring the Channel match tab forward, or say why there is none."""
    tabs = window.centre_tabs
    i = tabs.indexOf(window.mismatch)
    if i >= 0:
        tabs.setCurrentIndex(i)
    else:
        window.show_status("the design has one channel: set the channels on each board in the Channels tab "
                           "(beside the parts) to compare channels")


def show_budget(window: "MainWindow", metric: str) -> None:
    """Show ``metric``'s spread budget in the results panel, as choosing it in the metric
    box does (a link in the Channel match summary)."""
    chooser = window.results.chooser
    i = chooser.findData(metric)
    if i >= 0:
        window.dock_results.raise_()
        chooser.setCurrentIndex(i)
        chooser.activated.emit(i)  # what a choice made in the box sends


def install_channel_views(window: "MainWindow") -> None:
    """Add the channel views to ``window``; sets ``window.centre_tabs``, ``window.mismatch``,
    ``window.channel_editor`` and ``window.dock_channels``."""
    tabs = QTabWidget()
    tabs.setObjectName("centre_tabs")
    tabs.setDocumentMode(True)  # no frame: with one tab the plots look as they did
    tabs.setTabBarAutoHide(True)
    window.centre.replaceWidget(window.centre.indexOf(window.plots), tabs)
    tabs.addTab(window.plots, SPREAD_TAB)
    mismatch = MismatchPlots()
    editor = ChannelEditor(window.apply_edit)
    window.centre_tabs, window.mismatch, window.channel_editor = tabs, mismatch, editor
    scroll = QScrollArea()
    scroll.setWidgetResizable(True)
    scroll.setWidget(editor)
    dock = QDockWidget("Channels", window)
    dock.setObjectName("dock_channels")
    dock.setWidget(scroll)
    dock.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
    window.addDockWidget(Qt.DockWidgetArea.LeftDockWidgetArea, dock)
    window.tabifyDockWidget(window.dock_parts, dock)
    window.dock_parts.raise_()
    window.dock_channels = dock

    def design_changed(design: Design) -> None:
        several = design.channels.count > 1
        shown = tabs.indexOf(mismatch) >= 0
        if several and not shown:
            tabs.addTab(mismatch, MATCH_TAB)
        elif shown and not several:
            tabs.removeTab(tabs.indexOf(mismatch))
        tabs.setTabText(0, SPREAD_TAB + (" (channel 1)" if several else ""))  # the spread plots show channel 1
        editor.show_design(design)
        window.span_table.set_channel_count(design.channels.count)

    def view_ready(view) -> None:
        if view.design.channels.count > 1:
            mismatch.show_view(view)

    session = window.session
    session.design_changed.connect(design_changed)
    session.view_ready.connect(view_ready)
    editor.problem_shown.connect(window.show_status)
    mismatch.budget_requested.connect(lambda metric: show_budget(window, metric))
    window.span_table.span_selected.connect(mismatch.select)
    mismatch.span_selected.connect(window.span_table.select)  # a click on a limit line selects its row
    design_changed(session.design)
    if session.last_view is not None:
        view_ready(session.last_view)
