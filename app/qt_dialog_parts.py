"""What the window's dialogs share: the colour of a problem, a marked field, the reason of
an input error without its path, and OK / Cancel buttons."""
from __future__ import annotations

from PySide6.QtWidgets import QDialog, QDialogButtonBox, QPushButton, QWidget

from ..errors import InputError, ValidationError

from .qt_style import VERMILION

PROBLEM_STYLE = f"color: {VERMILION};"
_MARK = "{cls} {{ background: #fde2d6; border: 1px solid " + VERMILION + "; }}"


def mark(widget: QWidget, on: bool) -> None:
    """Mark ``widget`` as holding a problem (``on``) or clear the mark."""
    widget.setStyleSheet(_MARK.format(cls=type(widget).__name__) if on else "")


def reason(exc: InputError) -> str:
    """The reason of ``exc`` without its path (for a ValidationError, its first problem's)."""
    if isinstance(exc, ValidationError) and exc.problems:
        first = exc.problems[0]
        more = len(exc.problems) - 1
        return first.reason + (f" (and {more} more problem{'s' if more > 1 else ''})" if more else "")
    return exc.reason


def ok_cancel(dialog: QDialog) -> tuple[QDialogButtonBox, QPushButton]:
    """OK and Cancel buttons wired to the dialog's accept and reject."""
    buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
    ok = buttons.button(QDialogButtonBox.StandardButton.Ok)
    ok.setObjectName("ok")
    buttons.accepted.connect(dialog.accept)
    buttons.rejected.connect(dialog.reject)
    return buttons, ok
