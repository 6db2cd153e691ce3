""""Grades and costs": the dialog.

:class:`CatalogDialog` lists every grade; tolerance and cost can be edited in place, and a
catalog can be read from or written to a file. :meth:`CatalogDialog.changed_grades` gives
the grades that differ from the built-in catalog (the design's own grades). Grades are
checked and built by the library (:meth:`filters.grades.Grade.from_dict`).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QBrush
from PySide6.QtWidgets import (QAbstractItemView, QDialog, QFileDialog, QHBoxLayout, QHeaderView, QLabel,
                               QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from ..designfile import problems_text, write_text_atomic
from ..errors import InputError
from ..grades import Catalog, Grade, builtin_catalog, load_catalog

from .qt_dialog_parts import PROBLEM_STYLE, ok_cancel, reason
from .qt_style import VERMILION, rgba

COLUMNS = ("grade", "kind", "tolerance %", "distribution", "tempco ppm/K", "technology", "relative cost")
COL_NAME, COL_KIND, COL_TOL, COL_DIST, COL_TEMPCO, COL_TECH, COL_COST = range(len(COLUMNS))
_EDITABLE = {COL_TOL: ("tolerance_pct", "tolerance"), COL_COST: ("cost", "cost")}
_MARK_BRUSH = QBrush(rgba(VERMILION, 70))


def _number(text: str) -> float | None:
    s = text.strip().removesuffix("%").strip()
    try:
        v = float(s)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


class CatalogDialog(QDialog):
    """"Grades and costs": every grade of ``catalog`` with ``design_grades`` applied over it
    (by name), tolerance and cost editable in place, load and save of catalog files.

    An invalid edit stays in its cell, marked, with a message below the table; the grade
    keeps its previous value and OK is disabled until the cell is fixed.
    ``grades_changed()`` is emitted after every accepted edit or load.
    """

    grades_changed = Signal()

    def __init__(self, catalog: Catalog, design_grades: tuple[Grade, ...] = (),
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Grades and costs")
        self.setObjectName("catalog_dialog")
        self._builtin = builtin_catalog()
        merged = catalog
        for g in design_grades:
            merged = merged.with_grade(g)
        self._grades: list[Grade] = list(merged.grades)
        self._invalid: dict[tuple[str, int], tuple[str, str]] = {}  # (grade, column) -> (message, typed text)
        self._status: tuple[str, bool] = ("", False)  # last load/save message, is it an error
        self._filling = False

        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setObjectName("grades_table")
        self.table.setHorizontalHeaderLabels(list(COLUMNS))
        self.table.verticalHeader().setVisible(False)
        self.table.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectItems)
        self.table.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked
                                   | QAbstractItemView.EditTrigger.EditKeyPressed
                                   | QAbstractItemView.EditTrigger.AnyKeyPressed)
        header = self.table.horizontalHeader()
        header.setSectionResizeMode(QHeaderView.ResizeMode.ResizeToContents)
        header.setSectionResizeMode(COL_TECH, QHeaderView.ResizeMode.Stretch)
        self.table.itemChanged.connect(self._on_item_changed)

        self.hint = QLabel("Double-click a tolerance or a cost to change it. Values that differ from "
                           "the built-in catalog are shown in bold and are kept with the design.")
        self.hint.setWordWrap(True)
        self.message = QLabel()
        self.message.setObjectName("catalog_message")
        self.message.setWordWrap(True)
        self.message.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.message.hide()
        self.load_button = QPushButton("Load catalog file…")
        self.load_button.setObjectName("load_catalog")
        self.save_button = QPushButton("Save catalog file…")
        self.save_button.setObjectName("save_catalog")
        self.load_button.clicked.connect(self._choose_load)
        self.save_button.clicked.connect(self._choose_save)
        self.buttons, self.ok_button = ok_cancel(self)

        files = QHBoxLayout()
        files.addWidget(self.load_button)
        files.addWidget(self.save_button)
        files.addStretch(1)
        layout = QVBoxLayout(self)
        layout.addWidget(self.hint)
        layout.addWidget(self.table, 1)
        layout.addWidget(self.message)
        layout.addLayout(files)
        layout.addWidget(self.buttons)
        self.resize(900, 520)
        self._fill()

    # --- public ---------------------------------------------------------------------------
    def grades(self) -> tuple[Grade, ...]:
        """Every grade as the table holds it (invalid cells keep their previous value)."""
        return tuple(self._grades)

    def catalog(self) -> Catalog:
        return Catalog(tuple(self._grades))

    def changed_grades(self) -> tuple[Grade, ...]:
        """The grades that differ from the built-in catalog (any field, so also cost or
        tolerance) or that are not in it: the design's own grades (``Design.grades``)."""
        return tuple(g for g in self._grades if g.name not in self._builtin or self._builtin[g.name] != g)

    def row_of(self, name: str) -> int:
        """The table row of grade ``name`` (-1 if absent)."""
        return next((i for i, g in enumerate(self._grades) if g.name == name), -1)

    def problems(self) -> list[str]:
        """The messages of the cells marked invalid."""
        return [m for m, _ in self._invalid.values()]

    def load_catalog_file(self, path: str | Path) -> bool:
        """Read a catalog file: its grades replace those of the same name, new ones are added.

        On a problem the table is kept as it was and the message says why; returns success.
        """
        try:
            loaded = load_catalog(path)
        except InputError as exc:
            lines = problems_text(exc)
            more = len(lines) - 8
            text = "\n".join(lines[:8]) + (f"\n... and {more} more" if more > 0 else "")
            self._set_status(f"Could not load {Path(path).name}; the table is unchanged.\n{text}", error=True)
            return False
        except RecursionError:
            self._set_status(f"Could not load {Path(path).name}: the file is nested too deeply; "
                             "the table is unchanged.", error=True)
            return False
        current = Catalog(tuple(self._grades))
        new = sum(1 for g in loaded.grades if g.name not in current)
        for g in loaded.grades:
            current = current.with_grade(g)
        self._grades = list(current.grades)
        self._invalid = {k: m for k, m in self._invalid.items() if k[0] not in loaded}
        self._fill()
        self._set_status(f"Loaded {len(loaded.grades)} grade(s) from {Path(path).name} "
                         f"({new} new); they replace grades of the same name.", error=False)
        self.grades_changed.emit()
        return True

    def save_catalog_file(self, path: str | Path) -> bool:
        """Write every grade of the table as a catalog file (JSON); returns success."""
        text = json.dumps(self.catalog().to_dict(), indent=2, ensure_ascii=False) + "\n"
        try:
            write_text_atomic(Path(path), text)
        except InputError as exc:
            self._set_status(f"Could not save the catalog: {exc.reason}", error=True)
            return False
        note = " Cells marked invalid were saved with their previous values." if self._invalid else ""
        self._set_status(f"Saved {len(self._grades)} grades to {Path(path).name}.{note}", error=False)
        return True

    def accept(self) -> None:
        """Close with OK, only while no cell is marked invalid."""
        if self._invalid:
            return
        super().accept()

    # --- internals ------------------------------------------------------------------------
    def _choose_load(self) -> None:
        path, _ = QFileDialog.getOpenFileName(self, "Load catalog file", "",
                                              "Catalog files (*.json);;All files (*)")
        if path:
            self.load_catalog_file(path)

    def _choose_save(self) -> None:
        path, _ = QFileDialog.getSaveFileName(self, "Save catalog file", "catalog.json",
                                              "Catalog files (*.json);;All files (*)")
        if path:
            self.save_catalog_file(path)

    def _set_status(self, text: str, *, error: bool) -> None:
        self._status = (text, error)
        self._update_message()

    def _cell_text(self, g: Grade, col: int) -> str:
        return {COL_NAME: g.name, COL_KIND: g.kind, COL_TOL: f"{g.tolerance_pct:g}",
                COL_DIST: g.distribution, COL_TEMPCO: f"{g.tempco_ppm:g} ± {g.tempco_spread_ppm:g}",
                COL_TECH: g.technology, COL_COST: f"{g.cost:g}"}[col]

    def _fill(self) -> None:
        self._filling = True
        try:
            self.table.setRowCount(len(self._grades))
            for r, g in enumerate(self._grades):
                for c in range(len(COLUMNS)):
                    typed = self._invalid.get((g.name, c))
                    item = QTableWidgetItem(typed[1] if typed else self._cell_text(g, c))
                    flags = Qt.ItemFlag.ItemIsSelectable | Qt.ItemFlag.ItemIsEnabled
                    if c in _EDITABLE:
                        flags |= Qt.ItemFlag.ItemIsEditable
                        item.setTextAlignment(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
                    item.setFlags(flags)
                    if c == COL_TECH:
                        item.setToolTip(g.technology)
                    self.table.setItem(r, c, item)
                    self._style_cell(r, c)
        finally:
            self._filling = False
        self._update_message()

    def _style_cell(self, row: int, col: int) -> None:
        item = self.table.item(row, col)
        if item is None or col not in _EDITABLE:
            return
        g = self._grades[row]
        field = _EDITABLE[col][0]
        problem = self._invalid.get((g.name, col))
        if problem:
            item.setBackground(_MARK_BRUSH)
            item.setToolTip(problem[0])
        else:
            item.setData(Qt.ItemDataRole.BackgroundRole, None)
            item.setToolTip("")
        base = self._builtin[g.name] if g.name in self._builtin else None
        font = item.font()
        font.setBold(base is None or getattr(base, field) != getattr(g, field))
        item.setFont(font)

    def _on_item_changed(self, item: QTableWidgetItem) -> None:
        if self._filling or item.column() not in _EDITABLE:
            return
        row, col = item.row(), item.column()
        g = self._grades[row]
        field, words = _EDITABLE[col]
        old = getattr(g, field)
        value = _number(item.text())
        problem = ""
        new = g
        if value is None:
            problem = f"'{item.text().strip()}' is not a number"
        else:
            try:
                new = Grade.from_dict(dict(g.to_dict(), **{field: value}), g.name)
            except InputError as exc:
                problem = reason(exc)
        key = (g.name, col)
        self._filling = True
        try:
            if problem:
                self._invalid[key] = (f"{g.name}, {words}: {problem}; it stays {old:g}", item.text())
            else:
                self._invalid.pop(key, None)
                self._grades[row] = new
                item.setText(self._cell_text(new, col))
            self._style_cell(row, col)
        finally:
            self._filling = False
        self._update_message()
        if not problem:
            self.grades_changed.emit()

    def _update_message(self) -> None:
        """The message below the table: every invalid cell first, then the last load or save."""
        self.ok_button.setEnabled(not self._invalid)
        lines = [m for m, _ in self._invalid.values()]
        status, error = self._status
        if status:
            lines.append(status)
        self.message.setStyleSheet(PROBLEM_STYLE if self._invalid or error else "")
        self.message.setText("\n".join(lines))
        self.message.setVisible(bool(lines))
