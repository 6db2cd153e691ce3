"""Keyboard helpers shared by the window tests: they act as a person does (no program logic)."""
from __future__ import annotations

from PySide6.QtCore import Qt


def choose(qtbot, combo, data) -> None:
    """Pick the entry of ``combo`` holding ``data`` with the keyboard, as a person does: focus,
    Home, then Down until it is current."""
    combo.setFocus()
    qtbot.keyClick(combo, Qt.Key.Key_Home)
    for _ in range(combo.count()):
        if combo.currentData() == data:
            return
        qtbot.keyClick(combo, Qt.Key.Key_Down)
    assert combo.currentData() == data, data
