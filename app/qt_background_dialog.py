"""A dialog that runs one library job in the background and shows its result.

The base of the decision dialogs (centre values, distribution shapes): a row with the
dialog's run button, Cancel and a busy bar, a status line, and :meth:`BackgroundDialog.run`,
which starts a :class:`~tolspread.app.qt_tasks.BackgroundTask` so the window never freezes.
A job that cannot check ``should_stop`` runs to its end after Cancel; its result is then
dropped. The main window stops every running task when it closes (``stop_background_work``).
"""
from __future__ import annotations

from typing import Any, Callable

from PySide6.QtCore import QTimer
from PySide6.QtWidgets import (QDialog, QDoubleSpinBox, QHBoxLayout, QHeaderView, QLabel, QLayout, QProgressBar,
                               QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout)

from ..report.numbers import format_pct
from .qt_tasks import BackgroundTask


class BackgroundDialog(QDialog):
    """``intro`` heads the dialog; ``self.lay`` (a QVBoxLayout) takes the dialog's own widgets; ``self.run_row`` has the run
    button (``self.run_button``), Cancel and the busy bar; ``self.status`` says what happens."""

    def __init__(self, title: str, name: str, run_text: str, intro: str, window) -> None:
        super().__init__(window)
        self.window_ = window  # the main window: its session and apply_edit
        self.setWindowTitle(title)
        self.setObjectName(name)
        self.task: BackgroundTask | None = None
        self._wanted = 0  # the run whose result is still wanted (Cancel drops older ones)
        self.lay = QVBoxLayout(self)
        self.lay.setSizeConstraint(QLayout.SizeConstraint.SetMinimumSize)  # grows with its tables
        self.run_row = QHBoxLayout()
        self.run_button = QPushButton(run_text)
        self.run_button.setObjectName(f"{name}_run")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setObjectName(f"{name}_cancel")
        self.cancel_button.setEnabled(False)
        self.busy = QProgressBar()
        self.busy.setRange(0, 0)
        self.busy.hide()
        self.run_row.addWidget(self.run_button)
        self.run_row.addWidget(self.cancel_button)
        self.run_row.addWidget(self.busy, 1)
        self.status = QLabel("")
        self.status.setObjectName(f"{name}_status")
        self.status.setWordWrap(True)
        self.cancel_button.clicked.connect(self.cancel)
        self.add_note(f"{name}_intro").setText(intro)

    def add_note(self, name: str) -> QLabel:
        """A word-wrapped label for the result (rich text), added to the layout."""
        label = note_label(name)
        self.lay.addWidget(label)
        return label

    def add_bottom(self, caution: str, *buttons: QPushButton) -> None:
        """The grey caution line, then ``buttons`` on the left and Close on the right."""
        self.lay.addWidget(caution_label(caution))
        row = QHBoxLayout()
        for b in buttons:
            row.addWidget(b)
        row.addStretch(1)
        close = QPushButton("Close")
        close.clicked.connect(self.reject)
        row.addWidget(close)
        self.lay.addLayout(row)

    def fit_height(self) -> None:
        """Grow to show a new result whole (once the layout has taken it in)."""
        QTimer.singleShot(0, lambda: self.resize(self.width(), max(self.height(), self.sizeHint().height())))

    def run(self, job: Callable[..., Any], done: Callable[[Any], None], busy_text: str) -> None:
        """Run ``job(progress, should_stop)`` on a thread; ``done(result)`` on the GUI thread."""
        self._wanted += 1
        run_id = self._wanted
        task = BackgroundTask(job, self)
        task.finished.connect(lambda out: run_id == self._wanted and (self._idle(), done(out)))
        task.failed.connect(lambda msg, _d: run_id == self._wanted and self._idle(f"could not finish: {msg}"))
        task.cancelled.connect(lambda: run_id == self._wanted and self._idle("cancelled; nothing was changed"))
        task.progress.connect(lambda d, t: run_id == self._wanted and self.status.setText(
            f"{busy_text} ({d:,} of {t:,})"))
        self.task = task
        self.status.setText(busy_text)
        self.run_button.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.busy.show()
        task.start()

    def cancel(self) -> None:
        """Stop waiting for the running job; its result, if it still comes, is dropped."""
        if self.task is not None and self.task.running:
            self.task.cancel()
            self._wanted += 1
            self._idle("cancelled; nothing was changed")

    @property
    def running(self) -> bool:
        return self.task is not None and self.task.running

    def _idle(self, text: str | None = None) -> None:
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)
        self.busy.hide()
        if text is not None:
            self.status.setText(text)


def caution_label(text: str) -> QLabel:
    """The grey caution line under a decision's figures."""
    label = QLabel(text)
    label.setWordWrap(True)
    label.setStyleSheet("color: #555;")
    return label


def percent_box(name: str, low: float, high: float, decimals: int, value: float) -> QDoubleSpinBox:
    """A spin box of percent (a yield target, a confidence) named ``name``."""
    box = QDoubleSpinBox()
    box.setObjectName(name)
    box.setRange(low, high)
    box.setDecimals(decimals)
    box.setSuffix(" %")
    box.setValue(value)
    return box


def open_decision(window, make: Callable[[Any], BackgroundDialog], attr: str, why: str):
    """Open the decision dialog ``make(window)`` (kept as ``window.<attr>``) and start its run;
    a design without a spec mask gets ``why`` in the status bar instead (no yield to judge)."""
    if not window.session.design.mask:
        window.show_status(f"draw a spec mask first: {why}")
        return None
    dlg = make(window)
    setattr(window, attr, dlg)
    dlg.show()
    dlg.start()
    return dlg


def result_table(name: str, headers: list[str]) -> QTableWidget:
    """A read-only table named ``name``, columns as wide as their text, the last one stretched."""
    t = QTableWidget(0, len(headers))
    t.setObjectName(name)
    t.setHorizontalHeaderLabels(headers)
    t.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
    t.horizontalHeader().setStretchLastSection(True)
    t.verticalHeader().hide()
    t.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
    return t


def fill_table(table: QTableWidget, rows: list[list[str]]) -> None:
    """Put ``rows`` of text in ``table``."""
    table.setRowCount(len(rows))
    for i, row in enumerate(rows):
        for j, text in enumerate(row):
            table.setItem(i, j, QTableWidgetItem(text))
    table.resizeColumnsToContents()
    # every row in sight: a handful of rows never scroll
    table.setFixedHeight(table.horizontalHeader().sizeHint().height() + 2 * table.frameWidth() +
                         table.verticalHeader().length())


#: A fraction as a percentage for the dialogs: the report's one writer.
pct = format_pct


def note_label(name: str) -> QLabel:
    """An empty word-wrapped label named ``name`` (its text set when a result arrives)."""
    label = QLabel("")
    label.setObjectName(name)
    label.setWordWrap(True)
    return label
