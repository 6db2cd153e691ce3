"""The span table: every mask span with its numbers, editable, for what the mouse does
roughly (sloped limits, exact edges, phase and delay spans)."""
from __future__ import annotations

import math

from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QHBoxLayout, QHeaderView, QLabel, QPushButton, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from filters.errors import InputError, ValidationError
from filters.mask import Span
from filters.values import format_value, parse_value

COLUMNS = ["name", "quantity", "kind", "f1 (Hz)", "f2 (Hz)", "limit at f1", "limit at f2", "relative"]


class SpanTable(QWidget):
    """Edit the mask numerically. Emits whole spans; the session validates and applies."""

    span_edited = Signal(int, object)   # index, Span
    span_added = Signal(object)         # Span
    span_deleted = Signal(int)
    span_selected = Signal(int)
    problem = Signal(str)

    def __init__(self) -> None:
        super().__init__()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setObjectName("span_table")
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.verticalHeader().hide()
        self.table.horizontalHeader().setSectionResizeMode(0, QHeaderView.ResizeMode.Stretch)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QTableWidget.SelectionMode.SingleSelection)
        lay.addWidget(self.table)
        row = QHBoxLayout()
        self.add_phase = QPushButton("Add phase span")
        self.add_delay = QPushButton("Add delay-variation span")
        self.delete = QPushButton("Delete span")
        self.delete.setObjectName("delete_span")
        self.hint = QLabel("Draw gain spans on the gain plot; edit any number here (Enter applies).")
        self.hint.setStyleSheet("color: #555;")
        for w in (self.add_phase, self.add_delay, self.delete):
            row.addWidget(w)
        row.addWidget(self.hint, 1)
        lay.addLayout(row)
        self._spans: tuple[Span, ...] = ()
        self._f_range = (1.0, 1e6)
        self._loading = False
        self.table.itemChanged.connect(self._on_item_changed)
        self.table.itemSelectionChanged.connect(self._on_selection)
        self.delete.clicked.connect(self._on_delete)
        self.add_phase.clicked.connect(lambda: self._add("phase"))
        self.add_delay.clicked.connect(lambda: self._add("delay"))

    def sizeHint(self):  # noqa: N802 - Qt override
        from PySide6.QtCore import QSize

        return QSize(900, 190)

    def show_mask(self, spans: tuple[Span, ...], f_range: tuple[float, float]) -> None:
        self._spans = tuple(spans)
        self._f_range = f_range
        self._loading = True
        sel = self.selected()
        self.table.setRowCount(len(spans))
        for i, s in enumerate(spans):
            cells = [s.label, s.quantity, s.kind, format_value(s.f1, digits=5), format_value(s.f2, digits=5),
                     f"{s.limit1:g}", "" if s.limit2 is None else f"{s.limit2:g}",
                     "yes" if s.relative else "no"]
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if j in (1, 2):
                    item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
                self.table.setItem(i, j, item)
        if 0 <= sel < len(spans):
            self.table.selectRow(sel)
        self._loading = False

    def selected(self) -> int:
        rows = self.table.selectionModel().selectedRows() if self.table.selectionModel() else []
        return rows[0].row() if rows else -1

    def select(self, index: int) -> None:
        self._loading = True
        if 0 <= index < self.table.rowCount():
            self.table.selectRow(index)
        else:
            self.table.clearSelection()
        self._loading = False

    def _on_selection(self) -> None:
        if not self._loading:
            self.span_selected.emit(self.selected())

    def _on_item_changed(self, item: QTableWidgetItem) -> None:
        if self._loading:
            return
        i, j = item.row(), item.column()
        old = self._spans[i]
        text = item.text().strip()
        try:
            d = old.to_dict()
            if j == 0:
                d["name"] = text
            elif j in (3, 4):
                d["f1" if j == 3 else "f2"] = parse_value(text, COLUMNS[j])
            elif j in (5, 6):
                key = "limit1" if j == 5 else "limit2"
                if j == 6 and text == "":
                    d.pop("limit2", None)
                else:
                    v = float(text)
                    if not math.isfinite(v):
                        raise InputError("must be a finite number", COLUMNS[j])
                    d[key] = v
            elif j == 7:
                d["relative"] = text.lower() in ("yes", "y", "true", "1", "relative")
            span = Span.from_dict(d, f"mask[{i}]")
            lo, hi = self._f_range
            if span.f1 < lo * (1 - 1e-9) or span.f2 > hi * (1 + 1e-9):
                raise InputError(f"must lie inside the analysed range {format_value(lo)}Hz to "
                                 f"{format_value(hi)}Hz", f"mask[{i}]")
        except ValueError as exc:
            msg = exc.lines()[0] if isinstance(exc, ValidationError) else str(exc)
            self.problem.emit(f"{msg} (kept the previous value)")
            self.show_mask(self._spans, self._f_range)
            return
        self.span_edited.emit(i, span)

    def _on_delete(self) -> None:
        i = self.selected()
        if i >= 0:
            self.span_deleted.emit(i)

    def _add(self, quantity: str) -> None:
        lo, hi = self._f_range
        f1, f2 = lo * (hi / lo) ** 0.2, lo * (hi / lo) ** 0.4
        if quantity == "phase":
            span = Span(kind="floor", f1=f1, f2=f2, limit1=-180.0, quantity="phase", name="phase floor")
        else:
            span = Span(kind="variation", f1=f1, f2=f2, limit1=1e-4, quantity="delay", name="delay variation")
        self.span_added.emit(span)
