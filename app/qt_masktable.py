"""The span table: every mask span with its numbers, editable, for what the mouse does
roughly (sloped limits, exact edges, phase and delay spans, and the match spans of a
design of several channels: gain, phase or group-delay difference between channels, added
by the Add match span menu, which is enabled from two channels on).

Each limit cell carries its unit: dB (gain), deg (phase) or seconds with an SI prefix
(delay, e.g. "100 µs"). A number typed without a unit is in the unit the cell shows; an SI
suffix or the unit may be typed ("150", "0.15m", "150 µs"). A bad entry marks the cell
(red, with the reason as its tooltip and under the table), names the field typed and keeps
the last good value. Limits are checked with the loader's own rule
(:func:`filters.design.check_span_limits`), and the window checks the whole design as the
loader does before it accepts an edit (:meth:`SpanTable.refuse` marks the cell then).
"""
from __future__ import annotations

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QBrush, QColor
from PySide6.QtWidgets import (QHBoxLayout, QHeaderView, QLabel, QMenu, QPushButton, QTableWidget,
                               QTableWidgetItem, QVBoxLayout, QWidget)

from ..design import check_span_limits
from ..errors import InputError, ValidationError
from ..mask import Span
from ..metric_names import SPAN_UNIT, unique_span_name
from ..values import format_value

from . import qt_style as st
from .qt_units import eng, parse_in_unit, prefix_for

COLUMNS = ["name", "quantity", "kind", "f1 (Hz)", "f2 (Hz)", "limit at f1", "limit at f2", "relative"]
NAME_COLUMN, F1_COLUMN, F2_COLUMN, LIMIT1_COLUMN, LIMIT2_COLUMN, RELATIVE_COLUMN = 0, 3, 4, 5, 6, 7
INVALID_BRUSH = QBrush(QColor("#fde2d6"))  # the parts panel's colour for a refused entry
#: A new match span's limit by quantity (dB, deg, s) and its menu entry
MATCH_DEFAULTS = {"gain": (0.1, "gain difference (dB)"), "phase": (1.0, "phase difference (deg)"),
                  "delay": (1e-6, "group-delay difference (s)")}
FIELD_WORDS = {F1_COLUMN: "f1", F2_COLUMN: "f2", LIMIT1_COLUMN: "the limit at f1", LIMIT2_COLUMN: "the limit at f2"}


class SpanTable(QWidget):
    """Edit the mask numerically. Emits whole spans; the session validates and applies."""

    span_edited = Signal(int, object)   # index, Span
    span_added = Signal(object)         # Span
    span_deleted = Signal(int)
    span_selected = Signal(int)
    problem = Signal(str)

    NAME_COLUMN, F1_COLUMN, F2_COLUMN = NAME_COLUMN, F1_COLUMN, F2_COLUMN
    LIMIT1_COLUMN, LIMIT2_COLUMN = LIMIT1_COLUMN, LIMIT2_COLUMN

    def __init__(self) -> None:
        super().__init__()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.table = QTableWidget(0, len(COLUMNS))
        self.table.setObjectName("span_table")
        self.table.setHorizontalHeaderLabels(COLUMNS)
        self.table.verticalHeader().hide()
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Interactive)
        self.table.horizontalHeader().setStretchLastSection(True)
        self.table.setTextElideMode(Qt.TextElideMode.ElideNone)
        self.table.setWordWrap(False)
        self.table.setSelectionBehavior(QTableWidget.SelectionBehavior.SelectRows)
        self.table.setSelectionMode(QTableWidget.SelectionMode.SingleSelection)
        lay.addWidget(self.table, 1)
        self.problem_label = QLabel("")
        self.problem_label.setObjectName("span_problem")
        self.problem_label.setWordWrap(True)
        self.problem_label.setStyleSheet(f"color: {st.VERMILION};")
        self.problem_label.hide()
        lay.addWidget(self.problem_label)
        row = QHBoxLayout()
        self.add_phase = QPushButton("Add phase span")
        self.add_delay = QPushButton("Add delay-variation span")
        self.add_match = QPushButton("Add match span")
        self.add_match.setObjectName("add_match_span")
        self.match_menu = QMenu(self.add_match)
        self.match_actions = {}
        for q, (_, words) in MATCH_DEFAULTS.items():
            a = self.match_menu.addAction(words)
            a.setObjectName(f"add_match_{q}")
            a.triggered.connect(lambda _checked=False, q=q: self._add_match(q))
            self.match_actions[q] = a
        self.add_match.setMenu(self.match_menu)
        self.set_channel_count(1)
        self.delete = QPushButton("Delete span")
        self.delete.setObjectName("delete_span")
        self.hint = QLabel("Draw gain spans on the gain plot; edit any number here (Enter applies). "
                           "Limits are in the unit shown (dB, deg, µs); an SI suffix may be typed.")
        self.hint.setObjectName("span_hint")
        self.hint.setWordWrap(True)
        self.hint.setStyleSheet("color: #555;")
        for w in (self.add_phase, self.add_delay, self.delete):
            row.addWidget(w)
        row.addStretch(1)
        lay.addLayout(row)
        match_row = QHBoxLayout()  # a row of its own: beside the others it set the window's minimum width
        match_row.addWidget(self.add_match)
        match_row.addStretch(1)
        lay.addLayout(match_row)
        lay.addWidget(self.hint)  # a line of its own: beside the buttons it set the window's minimum width
        self._spans: tuple[Span, ...] = ()
        self._f_range = (1.0, 1e6)
        self._loading = False
        self._bad: tuple[int, int, str, Span] | None = None  # row, column, reason, span it was for
        self._last_edit: tuple[int, int, Span] | None = None  # row, column, span before the edit
        self.table.itemChanged.connect(self._on_item_changed)
        self.table.itemSelectionChanged.connect(self._on_selection)
        self.delete.clicked.connect(self._on_delete)
        self.add_phase.clicked.connect(lambda: self._add("phase"))
        self.add_delay.clicked.connect(lambda: self._add("delay"))

    def sizeHint(self):  # noqa: N802 - Qt override
        from PySide6.QtCore import QSize

        return QSize(900, 190)

    def height_for_rows(self, rows: int) -> int:
        """The height (px) this panel needs to show ``rows`` rows of the table whole, with
        its header, scroll bar, buttons and hint at the current width."""
        t, lay = self.table, self.layout()
        m = lay.contentsMargins()
        table_h = (t.horizontalHeader().sizeHint().height() + rows * t.verticalHeader().defaultSectionSize()
                   + 2 * t.frameWidth() + t.horizontalScrollBar().sizeHint().height())
        hint_h = self.hint.heightForWidth(max(100, self.width() - m.left() - m.right()))
        return m.top() + m.bottom() + table_h + self.delete.sizeHint().height() + hint_h + 3 * lay.spacing()

    def show_mask(self, spans: tuple[Span, ...], f_range: tuple[float, float]) -> None:
        self._spans = tuple(spans)
        self._f_range = f_range
        self._loading = True
        sel = self.selected()
        self.table.setRowCount(len(spans))
        for i, s in enumerate(spans):
            unit = SPAN_UNIT[s.quantity]
            gain = s.quantity == "gain"
            match = s.kind == "match"
            gain = gain and not match  # a match span is a difference: never relative
            limit2 = "" if s.limit2 is None or (s.quantity == "delay" and not match) else eng(s.limit2, unit, 6)
            cells = [s.label, s.quantity, s.kind, format_value(s.f1, digits=5), format_value(s.f2, digits=5),
                     eng(s.limit1, unit, 6), limit2, ("yes" if s.relative else "no") if gain else ""]
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                fixed = j in (1, 2) or (j == LIMIT2_COLUMN and s.quantity == "delay" and not match) or (
                    j == RELATIVE_COLUMN and not gain)
                if fixed:
                    item.setFlags(item.flags() & ~Qt.ItemFlag.ItemIsEditable)
                self.table.setItem(i, j, item)
        if self._bad is not None:
            row, col, reason, span = self._bad
            if row < len(spans) and spans[row] == span:
                self._mark(row, col, reason)
            else:
                self._clear_problem()
        self.table.resizeColumnsToContents()
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

    def _mark(self, row: int, col: int, reason: str) -> None:
        item = self.table.item(row, col)
        if item is not None:
            item.setBackground(INVALID_BRUSH)
            item.setToolTip(reason)
        self.problem_label.setText(reason)
        self.problem_label.show()

    def _clear_problem(self) -> None:
        self._bad = None
        self.problem_label.hide()
        self.problem_label.setText("")

    def _read(self, i: int, j: int, text: str) -> Span:
        """The span of row ``i`` with column ``j`` set to ``text``; raises InputError whose
        reason names the field typed and the span ("f1 of 'passband floor' must be ...")."""
        old = self._spans[i]
        field = f"{FIELD_WORDS.get(j, COLUMNS[j])} of '{old.label}'"
        d = old.to_dict()
        if j == NAME_COLUMN:
            d["name"] = text
        elif j in (F1_COLUMN, F2_COLUMN):
            f = parse_in_unit(text, "Hz", 1.0, field)
            lo, hi = self._f_range
            if not f > 0:
                raise InputError(f"{field} must be above 0 Hz", field)
            if j == F1_COLUMN and not f < old.f2:
                raise InputError(f"{field} must be below f2 ({eng(old.f2, 'Hz', 4)})", field)
            if j == F2_COLUMN and not f > old.f1:
                raise InputError(f"{field} must be above f1 ({eng(old.f1, 'Hz', 4)})", field)
            if f < lo * (1 - 1e-12) or f > hi * (1 + 1e-12):  # the loader's tolerance
                raise InputError(f"{field} must lie inside the analysed range {eng(lo, 'Hz', 4)} to "
                                 f"{eng(hi, 'Hz', 4)}", field)
            d["f1" if j == F1_COLUMN else "f2"] = f
        elif j in (LIMIT1_COLUMN, LIMIT2_COLUMN):
            unit = SPAN_UNIT[old.quantity]
            if j == LIMIT2_COLUMN and text == "":
                d.pop("limit2", None)
            else:
                shown = old.limit1 if j == LIMIT1_COLUMN or old.limit2 is None else old.limit2
                v = parse_in_unit(text, unit, prefix_for(shown)[1], field)
                if (old.quantity == "delay" or old.kind == "match") and not v > 0:
                    raise InputError(f"{field} must be above 0 {unit}"
                                     + (" (a difference between channels)" if old.kind == "match" else ""), field)
                d["limit1" if j == LIMIT1_COLUMN else "limit2"] = v
        elif j == RELATIVE_COLUMN:
            d["relative"] = text.lower() in ("yes", "y", "true", "1", "relative")
        try:
            span = Span.from_dict(d, f"mask[{i}]")
            check_span_limits(span, f"mask[{i}]")  # the loader's rule: within +-1000 dB, ...
        except ValidationError as exc:
            raise InputError(f"{field}: {exc.lines()[0]}", field) from None
        except InputError as exc:
            raise InputError(f"{field}: {exc.reason}", field) from None
        return span

    def _on_item_changed(self, item: QTableWidgetItem) -> None:
        if self._loading:
            return
        i, j = item.row(), item.column()
        try:
            span = self._read(i, j, item.text().strip())
        except InputError as exc:
            reason = exc.reason
            self._bad = (i, j, reason, self._spans[i])
            self.show_mask(self._spans, self._f_range)  # back to the last good value, marked
            self.problem.emit(f"{reason} (kept the previous value)")
            return
        self._clear_problem()
        self._last_edit = (i, j, self._spans[i])
        self.span_edited.emit(i, span)

    def refuse(self, index: int, reason: str) -> None:
        """The window refused the edit of row ``index`` just emitted (the whole design did
        not pass the loader's rules): mark the cell typed, say why, show the last good value."""
        if self._last_edit is None or self._last_edit[0] != index:
            self.show_mask(self._spans, self._f_range)
            return
        i, j, before = self._last_edit
        self._bad = (i, j, reason, before)
        self.show_mask(self._spans, self._f_range)
        self.problem.emit(f"{reason} (kept the previous value)")

    def _on_delete(self) -> None:
        i = self.selected()
        if i >= 0:
            self.span_deleted.emit(i)

    def set_channel_count(self, n: int) -> None:
        """Match spans need two channels or more: the Add match span menu follows ``n``."""
        self.add_match.setEnabled(n > 1)
        self.add_match.setVisible(n > 1)  # one channel: nothing to match, and no room taken
        self.add_match.setToolTip("a limit on the difference between channels (gain, phase or group delay)"
                                  if n > 1 else "needs two channels or more (the Channels tab)")

    def _add_match(self, quantity: str) -> None:
        lo, hi = self._f_range
        limit, _ = MATCH_DEFAULTS[quantity]
        span = Span(kind="match", f1=lo, f2=lo * (hi / lo) ** 0.4, limit1=limit, quantity=quantity,  # type: ignore[arg-type]
                    name=unique_span_name(f"{quantity} match", self._spans))
        self.span_added.emit(span)

    def _add(self, quantity: str) -> None:
        lo, hi = self._f_range
        f1, f2 = lo * (hi / lo) ** 0.2, lo * (hi / lo) ** 0.4
        if quantity == "phase":
            span = Span(kind="floor", f1=f1, f2=f2, limit1=-180.0, quantity="phase",
                        name=unique_span_name("phase floor", self._spans))
        else:
            span = Span(kind="variation", f1=f1, f2=f2, limit1=1e-4, quantity="delay",
                        name=unique_span_name("delay variation", self._spans))
        self.span_added.emit(span)
