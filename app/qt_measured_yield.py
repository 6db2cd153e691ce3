"""The yield panel's interval that counts the measurement (filters/measured.py).

With measured parts, the panel's headline interval counts only the boards' binomial spread.
After each full evaluation, :class:`MeasuredYieldLine` runs
:func:`filters.measured.measured_yield` on a worker thread (:data:`REPLICATES` resampled
measured sets on the same boards and seed as the evaluation shown) and shows the wider
interval that also counts having measured only n parts, with the lot-to-lot caution. Never
on a drag preview; a newer evaluation cancels it (:meth:`MeasuredYieldLine.cancel`); closing
the window stops it (the window stops every BackgroundTask among its children).
"""
from __future__ import annotations

from PySide6.QtCore import QObject
from PySide6.QtWidgets import QLabel

from ..liveview import ViewData
from ..measured import measured_yield
from .qt_high_yield import measured_html
from .qt_tasks import BackgroundTask

REPLICATES = 20  # resampled measured sets: a few seconds at most on the window's boards


class MeasuredYieldLine(QObject):
    """Keeps ``label`` (rich text) showing the measured parts and, once computed, the yield
    interval that counts the measurement; hidden without measured parts or without a mask."""

    def __init__(self, label: QLabel, parent: QObject | None = None) -> None:
        super().__init__(parent)
        self.label = label
        self.task: BackgroundTask | None = None
        self._ending: list[BackgroundTask] = []  # cancelled tasks kept alive until their thread ends

    def cancel(self) -> None:
        """Stop the running computation (a newer evaluation started); the label says so."""
        if self.task is None:
            return
        self.task.cancel()
        self._ending.append(self.task)
        self.task = None
        self._ending = [t for t in self._ending if t.running or t.deleteLater()]
        if self.label.isVisible():
            self.label.setText(self.label.text().replace("computing", "waiting for the evaluation"))

    def show_view(self, view: ViewData) -> None:
        """A new view: cancel the computation for the previous one and, for a full
        evaluation with measured parts, start one for this view's boards and seed."""
        self.cancel()
        design = view.design
        if not design.mask or not any(p.measured is not None for p in design.parts):
            self.label.hide()
            self.label.setText("")
            return
        self.label.setText(measured_html(design, state="after the release" if view.preview else "computing"))
        self.label.show()
        if view.preview:
            return
        samples, seed = view.samples, view.seed
        task = BackgroundTask(lambda _progress, should_stop: measured_yield(
            design, samples=samples, seed=seed, replicates=REPLICATES, should_stop=should_stop), self)
        task.finished.connect(lambda my: self._show(task, design, my))
        task.failed.connect(lambda message, _details: self._show(task, design, None, f"not computed: {message}"))
        self.task = task
        task.start()

    def _show(self, task: BackgroundTask, design, my, state: str = "") -> None:
        if task is not self.task:  # a result that arrived after a newer view
            return
        self.task = None
        self._ending.append(task)
        self.label.setText(measured_html(design, my, state))
