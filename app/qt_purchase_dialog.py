"""Design > Purchase and signal path…: how many boards are bought, in which currency the
catalog's price breaks are, and whether class II dielectrics are kept out of every capacitor
the response depends on (``purchase`` in the design file, filters/constraints.py).

OK makes the change one undoable edit through the window's ``apply_edit`` (the loader's rules).
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtWidgets import QCheckBox, QDialog, QDialogButtonBox, QFormLayout, QLabel, QLineEdit, QSpinBox

from ..constraints import MAX_BOARDS, Purchase

CLASS_II = "class II"


class PurchaseDialog(QDialog):
    """Boards bought, currency, and the class II rule for signal-path capacitors."""

    def __init__(self, window) -> None:
        super().__init__(window)
        self.window_ = window
        self.setWindowTitle("Purchase and signal path")
        self.setObjectName("purchase_dialog")
        p = window.session.design.purchase
        form = QFormLayout(self)
        note = QLabel("With a quantity and price breaks in the catalog (\"prices\": [[quantity, unit price], …]), "
                      "costs are money per board; otherwise the catalog's relative costs are used.")
        note.setWordWrap(True)
        form.addRow(note)
        self.boards = QSpinBox()
        self.boards.setObjectName("purchase_boards")
        self.boards.setRange(0, min(MAX_BOARDS, 2**31 - 1))
        self.boards.setGroupSeparatorShown(True)
        self.boards.setSpecialValueText("not stated")
        self.boards.setValue(p.boards)
        self.currency = QLineEdit(p.currency)
        self.currency.setObjectName("purchase_currency")
        self.currency.setMaxLength(12)
        self.currency.setPlaceholderText("e.g. EUR")
        self.no_class_ii = QCheckBox("keep class II ceramics (X7R, X5R …) out of every capacitor the response "
                                     "depends on")
        self.no_class_ii.setObjectName("purchase_no_class_ii")
        self.no_class_ii.setChecked(CLASS_II in p.signal_path_forbid)
        form.addRow("boards bought", self.boards)
        form.addRow("currency of the prices", self.currency)
        form.addRow("", self.no_class_ii)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.setObjectName("purchase_buttons")
        buttons.accepted.connect(self.accept)
        buttons.rejected.connect(self.reject)
        form.addRow(buttons)
        self.accepted.connect(self.apply)

    def purchase(self) -> Purchase:
        """The purchase the dialog's fields describe."""
        old = self.window_.session.design.purchase
        others = tuple(x for x in old.signal_path_forbid if x != CLASS_II)
        forbid = others + ((CLASS_II,) if self.no_class_ii.isChecked() else ())
        return Purchase(self.boards.value(), self.currency.text().strip(), forbid)

    def apply(self) -> None:
        d = self.window_.session.design
        new = self.purchase()
        if new == d.purchase:
            return
        reason = self.window_.apply_edit(replace(d, purchase=new), "purchase and signal path")
        if reason is not None:
            self.window_.show_problem("The purchase was not changed", reason)


def open_purchase(window) -> PurchaseDialog:
    """Design > Purchase and signal path…: the dialog (non-modal; OK applies)."""
    dlg = PurchaseDialog(window)
    window.purchase_dialog = dlg
    dlg.show()
    return dlg
