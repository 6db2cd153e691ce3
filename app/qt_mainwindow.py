"""The main window: parts on the left, spread plots in the middle, results on the right,
the span table below: every signal between the panels and the session, wired in one place.

Built from modules of their own: the menus, actions and toolbar (:mod:`app.qt_window_menus`),
the file commands (:mod:`app.qt_window_files`), the exports (:mod:`app.qt_exports`), each
dialog (``app/qt_*_dialog.py``, :mod:`app.qt_recommend`, :mod:`app.qt_help`).

The window observes the :class:`~tolspread.app.qt_session.Session`; every edit goes through
``session.apply_checked`` (the loader's rules) so it can be undone.
"""
from __future__ import annotations

import os
import logging
from dataclasses import replace

from PySide6.QtCore import QSettings, Qt, QTimer
from PySide6.QtWidgets import QDockWidget, QLabel, QMainWindow, QProgressBar, QPushButton, QSplitter

from .. import __version__
from ..design import Design
from ..errors import InputError
from ..liveview import ViewData
from ..mask import Span

from . import userfiles
from .qt_channel_dock import install_channel_views
from .qt_circuit_dock import install_circuit_docks
from .qt_exports import WindowExports
from .qt_masktable import SpanTable
from .qt_parts import PartsPanel
from .qt_plots import SpreadPlots
from .qt_recovery import RecoveryFile
from .qt_results import ResultsPanel
from .qt_session import Session
from .qt_window_files import WindowFiles
from .qt_window_menus import build_menus
from .qt_style import VERMILION
from ..metric_names import SPAN_UNIT
from .qt_units import eng

log = logging.getLogger("tolspread")
AUTOSAVE_MS = 60_000
SPAN_ROWS_SHOWN = 4  # the span table shows this many rows whole at first (the demo's spans)


class MainWindow(QMainWindow, WindowFiles):
    """The tolspread window."""

    def __init__(self, session: Session, settings: QSettings | None = None) -> None:
        super().__init__()
        self.session = session
        # this window's own recovery file, locked while it lives (a second window or a
        # second tolspread never takes it for a crashed one's)
        self.recovery = RecoveryFile.for_new_window()
        self.settings = settings or QSettings(str(userfiles.settings_path()), QSettings.Format.IniFormat)
        self.setObjectName("tolspread_main")
        self.plots = SpreadPlots()
        self.span_table = SpanTable()
        self.centre = QSplitter(Qt.Orientation.Vertical)
        self.centre.setObjectName("centre_splitter")
        self.centre.addWidget(self.plots)
        self.centre.addWidget(self.span_table)
        self.centre.setStretchFactor(0, 5)
        self.centre.setStretchFactor(1, 1)
        self.setCentralWidget(self.centre)
        self.parts = PartsPanel()
        self.parts.setMinimumWidth(440)
        self.results = ResultsPanel()
        self.results.setMinimumWidth(380)
        self.dock_parts = self._dock(self.parts, "Parts and grades", "dock_parts",
                                     Qt.DockWidgetArea.LeftDockWidgetArea)
        self.dock_results = self._dock(self.results, "Yield and spread budget", "dock_results",
                                       Qt.DockWidgetArea.RightDockWidgetArea)
        install_circuit_docks(self)  # the stage's schematic above the parts, the stage editor beside them
        install_channel_views(self)  # the Channels tab beside the parts, Channel match beside the plots
        self.exports = WindowExports(self)
        self.recommend_dialog = None  # the Find cheapest grades dialog, once opened (its result goes in the report)
        build_menus(self)
        self._build_status()
        self._connect()
        self._restore_layout()
        self._fit_next_view = False  # a newly opened design is framed when its figures arrive
        self._notice_after_view = ""  # a refusal that the next figures' status line keeps
        self._on_design_changed(session.design)
        self._on_busy_changed(session.busy)
        if session.last_view is not None:
            self._on_view_ready(session.last_view)
        self._update_title()
        self.autosave = QTimer(self)
        self.autosave.setInterval(int(os.environ.get("TOLSPREAD_AUTOSAVE_MS", AUTOSAVE_MS)))
        self.autosave.timeout.connect(self.write_recovery)
        self.autosave.start()

    # --- construction --------------------------------------------------------------------
    def _dock(self, widget, title: str, name: str, area) -> QDockWidget:
        d = QDockWidget(title, self)
        d.setObjectName(name)
        d.setWidget(widget)
        d.setFeatures(QDockWidget.DockWidgetFeature.DockWidgetMovable | QDockWidget.DockWidgetFeature.DockWidgetFloatable)
        self.addDockWidget(area, d)
        return d

    def _build_status(self) -> None:
        sb = self.statusBar()
        self.status_text = QLabel("")
        self.status_text.setObjectName("status_text")
        self.progress = QProgressBar()
        self.progress.setMaximumWidth(160)
        self.progress.hide()
        self.cancel_button = QPushButton("Cancel run")
        self.cancel_button.setObjectName("cancel_run")
        self.cancel_button.hide()
        self.cancel_button.clicked.connect(self._on_cancel_clicked)
        self.busy_label = QLabel("")
        self.busy_label.setObjectName("busy_label")
        sb.addWidget(self.status_text, 1)
        sb.addPermanentWidget(self.busy_label)
        sb.addPermanentWidget(self.progress)
        sb.addPermanentWidget(self.cancel_button)

    def _connect(self) -> None:
        s = self.session
        s.design_changed.connect(self._on_design_changed)
        s.view_ready.connect(self._on_view_ready)
        s.evaluation_failed.connect(self._on_evaluation_failed)
        s.busy_changed.connect(self._on_busy_changed)
        s.busy_changed.connect(lambda busy: busy and self.results.measured_line.cancel())  # a newer evaluation
        self.results.temperature_link.linkActivated.connect(lambda _link: self.open_temperature())
        s.progress.connect(self._on_progress)
        s.dirty_changed.connect(self._on_dirty_changed)
        s.path_changed.connect(self._on_path_changed)
        s.run_cancelled.connect(self._on_run_cancelled)
        s.design_replaced.connect(self._on_design_replaced)
        s.edit_refused.connect(lambda text, reason: self.show_status(f"not applied ({text}): {reason}"))
        self.parts.value_committed.connect(self._on_value_committed)
        self.parts.grade_chosen.connect(self._on_grade_chosen)
        self.parts.tolerance_dragging.connect(self._on_tolerance_dragging)
        self.parts.tolerance_released.connect(self._on_tolerance_released)
        self.parts.sampling_changed.connect(self._on_sampling_changed)
        self.parts.problem_shown.connect(self.show_status)
        self.plots.span_added.connect(self._on_span_added)
        self.plots.span_edited.connect(self._on_span_edited)
        self.plots.span_changing.connect(self._on_span_changing)
        self.plots.span_selected.connect(self.span_table.select)
        self.span_table.span_selected.connect(self.plots.select)
        self.span_table.span_edited.connect(self._on_table_span_edited)
        self.span_table.span_added.connect(self._on_span_added)
        self.span_table.span_deleted.connect(self._delete_span)
        self.span_table.problem.connect(self.show_status)
        # Delete works while the plot has focus through act_delete's window-wide shortcut; a
        # second Delete shortcut on the canvas would make the key ambiguous and do nothing.

    # --- model to view -------------------------------------------------------------------
    def _on_design_changed(self, design: Design) -> None:
        try:
            from ..opamp_check import gbw_warnings

            self.results.show_opamps(gbw_warnings(design))
        except InputError as exc:
            self.show_status(str(exc))
        self.parts.show_design(design)
        a = design.analysis
        self.span_table.show_mask(design.mask, (a.f_start, a.f_stop))
        self._update_title()

    def _on_view_ready(self, view: ViewData) -> None:
        self.plots.show_view(view)
        self.results.show_view(view)
        if self._fit_next_view and not view.preview:
            self._fit_next_view = False
            self.plots.fit()
            self._clear_readout()
        notice, self._notice_after_view = self._notice_after_view, ""
        self.show_status(f"{view.samples:,} boards evaluated in {1000 * view.elapsed_s:.0f} ms"
                         + (f"; {notice}" if notice and not view.preview else ""))

    def _on_design_replaced(self, _design: Design) -> None:
        """New, Open, restore: frame the new design once its figures arrive; the cursor
        readout of the old design is gone at once."""
        self._fit_next_view = True
        self._clear_readout()

    def _set_second(self, second: str) -> None:
        self._clear_readout()  # the readout of the other quantity would be stale
        self.session.set_second(second)  # type: ignore[arg-type]

    def _clear_readout(self) -> None:
        self.plots.clear_readout()

    def _on_cancel_clicked(self) -> None:
        self.session.cancel()

    def _on_run_cancelled(self, design: Design | None, shown: ViewData | None) -> None:
        """Say that the run was cancelled and which run the figures on screen belong to."""
        a = design.analysis if design is not None else self.session.design.analysis
        stopped = f"Run of {a.samples:,} boards (seed {a.seed}) cancelled"
        if shown is None:
            text = f"{stopped}: no figures yet. View > Evaluate again (F5) starts it again."
        else:
            now = self.session.design
            # only the sampling differs (the boards box, the seed): no need to mention the design
            same = replace(now, analysis=shown.design.analysis) == shown.design
            text = (f"{stopped}. The figures shown are from the previous run: {shown.samples:,} boards, "
                    f"seed {shown.seed}, {shown.method} sampling"
                    f"{'' if same else ', of the design before your last change'}. "
                    "View > Evaluate again (F5) runs the current design; Undo returns to the one shown.")
        self.results.detail.setText(f"<span style='color:{VERMILION}'><b>{text}</b></span>")
        self.show_status(text.split(". View >")[0])

    def _on_dirty_changed(self, _dirty: bool) -> None:
        self._update_title()

    def _on_path_changed(self, _path) -> None:
        self._update_title()

    def _on_evaluation_failed(self, message: str, details: str) -> None:
        self.results.show_message(message)
        self.show_status(message)
        if details:
            log.error("evaluation failed: %s\n%s", message, details)

    def _on_busy_changed(self, busy: bool) -> None:
        self.busy_label.setText("evaluating…" if busy else "")
        if not busy:
            self.progress.hide()
            self.cancel_button.hide()

    def _on_progress(self, done: int, total: int) -> None:
        self.progress.setRange(0, total)
        self.progress.setValue(done)
        self.progress.show()
        self.cancel_button.show()

    def show_status(self, text: str) -> None:
        self.status_text.setText(text)

    def _update_title(self) -> None:
        name = self.session.path.name if self.session.path else (self.session.design.name or "untitled")
        self.setWindowTitle(f"{'* ' if self.session.dirty else ''}{name} — tolspread {__version__}")

    # --- view to model -------------------------------------------------------------------
    def apply_edit(self, design: Design, text: str) -> str | None:
        """Make ``design`` the current design as one undoable edit named ``text`` if the
        loader accepts it (:func:`filters.designfile.check_design`: the rules a saved file is
        opened with), so whatever the window accepts saves into a file that opens.

        Returns None, or the reason it was refused (one line; the design is unchanged and
        the status bar says why: :meth:`Session.apply_checked`)."""
        return self.session.apply_checked(design, text)

    def _on_value_committed(self, ref: str, value: float, text: str) -> None:
        d = self.session.design
        reason = self.apply_edit(d.with_part(ref, value=value, text=text), f"{ref} value {text}")
        if reason is not None:
            self.parts.mark_invalid(ref, reason)

    def _on_grade_chosen(self, ref: str, grade: str) -> None:
        d = self.session.design
        p = d.parts[d.part_index(ref)]
        if p.grade == grade and p.tolerance_pct is None:
            return
        if self.apply_edit(d.with_part(ref, grade=grade, tolerance_pct=None), f"{ref} grade {grade}"):
            self.parts.show_design(self.session.design)  # the grade box goes back

    def _on_tolerance_dragging(self, ref: str, pct: float) -> None:
        reason = self.session.try_tolerance(ref, pct)  # the session holds what is being tried
        if reason is not None:
            self.show_status(f"{ref} tolerance ±{pct:g} %: {reason}")

    def _on_tolerance_released(self, ref: str, pct: float) -> None:
        reason = self.session.commit_tolerance(ref, pct)
        if reason is not None:
            self.parts.show_design(self.session.design)  # the slider goes back
            # the figures of the unchanged design follow; their status line keeps the reason
            self._notice_after_view = f"not applied ({ref} tolerance ±{pct:g} %): {reason}"

    def _on_sampling_changed(self, samples: int, seed: int, method: str) -> None:
        d = self.session.design
        a = d.analysis
        if (samples, seed, method) == (a.samples, a.seed, a.method):
            return
        reason = self.apply_edit(d.with_analysis(samples=samples, seed=seed, method=method),
                                 f"{samples} boards, seed {seed}")
        if reason is not None:
            self.parts.show_design(self.session.design)
            if samples != a.samples and reason.startswith("analysis.samples: "):  # the memory rule
                self.parts.mark_samples_invalid(reason.removeprefix("analysis.samples: "))
            else:
                self.parts.mark_seed_invalid(reason)

    def _set_draw(self, kind: str, on: bool) -> None:
        other = self.act_ceiling if kind == "floor" else self.act_floor
        if on:
            other.setChecked(False)
        self.plots.set_draw_kind(kind if on else None)  # type: ignore[arg-type]
        if on:
            self.show_status(f"drag on the gain plot over the zone the response must not enter ({kind} span)")

    def _on_span_added(self, span: Span) -> None:
        d = self.session.design
        refused = self.apply_edit(d.with_mask(d.mask + (span,)), f"add {span.label}")
        self.act_floor.setChecked(False)
        self.act_ceiling.setChecked(False)
        self.plots.set_draw_kind(None)
        if refused is None:
            self.plots.select(len(d.mask))

    def _on_span_edited(self, index: int, span: Span) -> None:
        d = self.session.design
        mask = list(d.mask)
        mask[index] = span
        if self.apply_edit(d.with_mask(tuple(mask)), f"edit {span.label}") is not None:
            self.plots.redraw_mask(d.mask)  # a dragged span goes back where the design has it
            self.span_table.show_mask(d.mask, (d.analysis.f_start, d.analysis.f_stop))

    def _on_table_span_edited(self, index: int, span: Span) -> None:
        d = self.session.design
        mask = list(d.mask)
        mask[index] = span
        reason = self.apply_edit(d.with_mask(tuple(mask)), f"edit {span.label}")
        if reason is not None:
            self.span_table.refuse(index, reason)

    def _on_span_changing(self, index: int, span: Span) -> None:
        unit = SPAN_UNIT[span.quantity]
        self.show_status(f"{span.label}: {eng(span.f1, 'Hz', 4)} to {eng(span.f2, 'Hz', 4)}, limit "
                         f"{eng(span.limit1, unit, 4)}"
                         f"{'' if span.limit2 is None else f' to {eng(span.limit2, unit, 4)}'}"
                         f"{' relative' if span.relative else ''} (release to apply)")

    def delete_selected_span(self) -> None:
        i = self.plots.selected if self.plots.selected >= 0 else self.span_table.selected()
        if i >= 0:
            self._delete_span(i)

    def _delete_span(self, index: int) -> None:
        d = self.session.design
        if not 0 <= index < len(d.mask):
            return
        span = d.mask[index]
        self.apply_edit(d.with_mask(d.mask[:index] + d.mask[index + 1:]), f"delete {span.label}")
        self.plots.select(-1)

    def _on_failing_toggled(self, on: bool) -> None:
        self.plots.show_failing = on
        if self.session.last_view is not None:
            self.plots.show_view(self.session.last_view)

    # --- design tools --------------------------------------------------------------------
    def new_from_response(self) -> None:
        """Synthesize a design from a response (a dialog), replacing the open design."""
        from .qt_synthesis_dialog import SynthesisDialog

        if not self.confirm_discard():
            return
        dlg = SynthesisDialog(self)
        if dlg.exec() and dlg.result() is not None:
            self.session.replace_design(dlg.result().design, None)
            self.session.undo_stack.resetClean()
            self._update_title()
            self.show_status("new design from a response: review the mask before trusting the yield")

    def edit_catalog(self) -> None:
        """Edit grade costs and tolerances; changes become the design's own grades."""
        from .qt_catalog_dialog import CatalogDialog

        d = self.session.design
        dlg = CatalogDialog(d.catalog, d.grades, self)
        if dlg.exec():
            grades = tuple(dlg.changed_grades())
            if grades != d.grades:
                reason = self.apply_edit(replace(d, grades=grades), "edit grades and costs")
                if reason is not None:
                    self.show_problem("The grades were not changed", reason)

    def open_temperature(self) -> None:
        """The operating range, judged temperatures and service life; yield against temperature."""
        from .qt_temperature import TemperatureDialog

        dlg = TemperatureDialog(self.session.design, self.apply_edit, self)
        if self.session.last_view is not None:
            dlg.show_view(self.session.last_view)
        self.session.view_ready.connect(dlg.show_view)
        dlg.finished.connect(lambda _r: self.session.view_ready.disconnect(dlg.show_view))
        self.temperature_dialog = dlg
        dlg.show()

    def open_recommend(self) -> None:
        from .qt_recommend import RecommendDialog

        if not self.session.design.mask:
            self.show_status("draw a spec mask first: the recommendation needs a yield to meet")
            return
        dlg = RecommendDialog(self.session.design, self)
        dlg.apply_requested.connect(lambda design: self.apply_edit(design, "use the recommended grades"))
        self.recommend_dialog = dlg
        dlg.show()

    # --- recovery, layout ----------------------------------------------------------------
    def write_recovery(self) -> None:
        """Write unsaved work to this window's recovery file (every minute while there is
        some; :attr:`recovery`)."""
        if not self.session.dirty:
            return
        try:
            self.recovery.write(self.session.text(), str(self.session.path) if self.session.path else "")
        except InputError as exc:
            log.warning("could not write the recovery file: %s", exc)

    def _restore_layout(self) -> None:
        geo = self.settings.value("geometry")
        state = self.settings.value("window_state")
        if geo is not None:
            self.restoreGeometry(geo)
        else:
            self.resize(1500, 900)
        if state is not None:
            self.restoreState(state)
        self._size_docks = state is None  # at the first show: the docks at their content's width

        splitter = self.settings.value("centre_splitter")
        self._size_span_table = splitter is None  # at the first show: room for every demo span
        if splitter is not None:
            self.centre.restoreState(splitter)

    def showEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().showEvent(event)
        if self._size_docks:
            self._size_docks = False
            QTimer.singleShot(0, self._fit_docks)
        if self._size_span_table:
            self._size_span_table = False
            QTimer.singleShot(0, self._fit_span_table)

    def _fit_docks(self) -> None:
        """Give the parts and results docks the width their content needs and the plots the
        rest (Qt's own split would give each dock as much room as the plots)."""
        docks = [self.dock_parts, self.dock_results]
        self.resizeDocks(docks, [d.minimumSizeHint().width() for d in docks], Qt.Orientation.Horizontal)

    def _fit_span_table(self) -> None:
        """Give the span table the height of its rows (at least SPAN_ROWS_SHOWN, at most
        SPAN_ROWS_SHOWN + 2; more scroll), the plots the rest."""
        total = sum(self.centre.sizes())
        rows = min(max(self.span_table.table.rowCount(), SPAN_ROWS_SHOWN), SPAN_ROWS_SHOWN + 2)
        need = min(self.span_table.height_for_rows(rows), total // 2)
        self.centre.setSizes([total - need, need])

    def closeEvent(self, event) -> None:  # noqa: N802 - Qt override
        if not self.confirm_discard():
            event.ignore()
            return
        self.settings.setValue("geometry", self.saveGeometry())
        self.settings.setValue("window_state", self.saveState())
        self.settings.setValue("centre_splitter", self.centre.saveState())
        self.settings.sync()
        self.autosave.stop()
        self.recovery.discard()  # saved, or the user chose to discard it just now
        self.recovery.release()
        self.stop_background_work()
        event.accept()

    def stop_background_work(self) -> None:
        """Cancel the report and recommendation jobs and the evaluation worker, and wait
        for their threads, so nothing reports back into a window that is going away."""
        self.exports.stop()
        task = getattr(self.recommend_dialog, "task", None)
        if task is not None:
            task.stop()
        from .qt_tasks import BackgroundTask

        for task in self.findChildren(BackgroundTask):  # the decision dialogs' jobs (centre, shapes)
            task.stop()
        self.session.shutdown()
