"""Design > Report details…: the design's name, revision and author, which the report's
title block prints (and its sign-off block, for the preparer). OK applies the three as one
undoable edit checked by the loader's rules (one line each for revision and author)."""
from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

from PySide6.QtWidgets import QDialog, QDialogButtonBox, QFormLayout, QLabel, QLineEdit, QVBoxLayout

if TYPE_CHECKING:
    from .qt_mainwindow import MainWindow

#: The design fields the dialog edits, with their labels.
FIELDS = (("name", "Design name"), ("revision", "Revision"), ("author", "Author"))


class ReportDetailsDialog(QDialog):
    """Three line edits (``edits[field]``) over the window's design; :meth:`accept`
    applies them as one undoable edit, or shows why the loader refuses them."""

    def __init__(self, window: "MainWindow") -> None:
        super().__init__(window)
        self.setObjectName("report_details_dialog")
        self.setWindowTitle("Report details")
        self.window_ = window
        design = window.session.design
        lay = QVBoxLayout(self)
        lay.addWidget(QLabel("Printed in the title block of the design-review report."))
        form = QFormLayout()
        self.edits: dict[str, QLineEdit] = {}
        for key, label in FIELDS:
            e = QLineEdit(getattr(design, key))
            e.setObjectName(f"report_{key}")
            e.setMaxLength(200)
            e.setCursorPosition(0)  # a long name shows its start
            e.setMinimumWidth(420)
            form.addRow(label, e)
            self.edits[key] = e
        lay.addLayout(form)
        self.problem = QLabel("")
        self.problem.setObjectName("report_details_problem")
        self.problem.setStyleSheet("color: #b00000")
        self.problem.setVisible(False)
        lay.addWidget(self.problem)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.accepted.connect(lambda: self.accept())
        buttons.rejected.connect(lambda: self.reject())
        lay.addWidget(buttons)

    def accept(self) -> None:
        """Apply the fields (one undoable edit "Report details"); stay open on a refusal."""
        session = self.window_.session
        changes = {k: e.text().strip() for k, e in self.edits.items()}
        design = replace(session.design, **changes)
        if design != session.design:
            reason = session.apply_checked(design, "Report details")
            if reason is not None:
                self.problem.setText(reason)
                self.problem.setVisible(True)
                return
        super().accept()


def open_report_details(window: "MainWindow") -> ReportDetailsDialog:
    """Show the dialog (modeless, so tests and the user can type into it); returns it."""
    dialog = ReportDetailsDialog(window)
    window.report_details_dialog = dialog
    dialog.show()
    return dialog
