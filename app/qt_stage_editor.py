"""The stage editor: the design's stages and, for the chosen stage, its topology, options
and parts, or, for a circuit stage, its tables of elements (ref, node, node) and op-amps
(ref, +, -, output).

Every change is made on the design file's dict form (:mod:`app.qt_stage_edits`), read
back with the loader's own rules (:func:`filters.design.design_from_dict`) and handed to
the window as one undoable edit; the parts panel and the circuit view follow the design.
A change the rules refuse is marked where it was typed, as the value fields mark theirs:
the cell or field turns red, a line under the editor names the field and the reason, and
the design keeps its last good state. A circuit can be refused half way through (a new
node with only one element on it); its table keeps what was typed, marked, until the
circuit is whole again, and is then applied in one edit.
"""
from __future__ import annotations

import json
import re
from typing import Callable

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QColor
from PySide6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QFormLayout, QGridLayout, QHBoxLayout,
                               QHeaderView, QLabel, QLineEdit, QListWidget, QPushButton, QStackedWidget,
                               QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from ..design import Design, design_from_dict
from ..designfile import design_to_dict
from ..errors import InputError, ValidationError
from ..topologies import TOPOLOGIES
from . import qt_stage_edits as edits
from . import qt_style as st
from .qt_network_edits import read_figure
from .qt_parts import INVALID_STYLE

BAD_CELL = QColor("#fde2d6")   # the value fields' invalid colour (qt_parts.INVALID_STYLE)
KINDS = (("resistor", "R"), ("capacitor", "C"), ("inductor", "L"))
_ROW_PATH = re.compile(r"stages\[(\d+)\]\.(elements|opamps)\[(\d+)\](?:\.(\w+))?")
_NODE = re.compile(r"\bnode (\S+)")
_OPAMP_COLUMNS = {"ref": 0, "plus": 1, "minus": 2, "output": 3}

Apply = Callable[[Design, str], "str | None"]


def _response_kinds() -> tuple[str, ...]:
    from ..circuit import response_kinds

    return response_kinds()


def _bias_text(volts: float) -> str:
    """A stage's DC bias as its field shows it: "12 V"; "" when not stated (0)."""
    return f"{volts:g} V" if volts else ""


def _buffered(stage) -> bool:
    return getattr(stage, "buffered", True)


def _note(html: str) -> QLabel:
    label = QLabel(html)
    label.setWordWrap(True)
    return label


def _button(text: str, name: str, tip: str) -> QPushButton:
    b = QPushButton(text)
    b.setObjectName(name)
    b.setToolTip(tip)
    return b


def _table(name: str, headers: list[str]) -> QTableWidget:
    t = QTableWidget(0, len(headers))
    t.setObjectName(name)
    t.setHorizontalHeaderLabels(headers)
    t.verticalHeader().hide()
    t.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
    t.setSelectionBehavior(QAbstractItemView.SelectionBehavior.SelectRows)
    t.setSelectionMode(QAbstractItemView.SelectionMode.SingleSelection)
    t.setEditTriggers(QAbstractItemView.EditTrigger.DoubleClicked | QAbstractItemView.EditTrigger.EditKeyPressed
                      | QAbstractItemView.EditTrigger.AnyKeyPressed)
    t.verticalHeader().setDefaultSectionSize(t.fontMetrics().height() + 8)  # compact rows
    t.setMinimumHeight(90)
    return t


class StageEditor(QWidget):
    """Stages, the chosen stage's topology, options and parts, and a circuit's tables."""

    stage_selected = Signal(int)
    problem_shown = Signal(str)

    def __init__(self, apply_design: Apply) -> None:
        super().__init__()
        self._apply_design = apply_design
        self.design: Design | None = None
        self._loading = False
        self._select_next: int | None = None
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.stage_list = QListWidget()
        self.stage_list.setObjectName("stage_list")
        self.stage_list.setMaximumHeight(110)
        lay.addWidget(self.stage_list)
        side = QHBoxLayout()  # under the list: the dock is as narrow as the parts panel
        self.add_stage = _button("Add stage", "stage_add", "add a Sallen-Key low-pass stage with new parts at the end")
        self.remove_stage = _button("Remove", "stage_remove", "remove the chosen stage and the parts only it uses")
        self.up = _button("Up", "stage_up", "move the chosen stage one place towards the input")
        self.down = _button("Down", "stage_down", "move the chosen stage one place towards the output")
        for b in (self.add_stage, self.remove_stage, self.up, self.down):
            side.addWidget(b)
        side.addStretch(1)
        lay.addLayout(side)
        form = QFormLayout()
        self.name = QLineEdit()
        self.name.setObjectName("stage_name")
        self.topology = QComboBox()
        self.topology.setObjectName("stage_topology")
        for t in (*TOPOLOGIES, edits.CIRCUIT):
            self.topology.addItem(t, t)
        self.options = QLineEdit()
        self.options.setObjectName("stage_options")
        self.options.setToolTip('the topology\'s options as JSON, e.g. {"gain": "resistors"} or {"sections": 2}')
        self.buffered = QCheckBox("buffered (the next stage does not load it)")
        self.buffered.setObjectName("stage_buffered")
        self.opamp_part = QCheckBox("op-amp gain-bandwidth from a part (else ideal)")
        self.opamp_part.setObjectName("stage_opamp_part")
        self.response = QComboBox()
        self.response.setObjectName("stage_response")
        self.response.setToolTip("the response a circuit stage is judged as (cutoff, band edges...)")
        self.response.addItem("from the circuit's shape", "")
        self.bias = QLineEdit()
        self.bias.setObjectName("stage_bias")
        self.bias.setPlaceholderText("not stated")
        self.bias.setToolTip("the DC bias across the stage's capacitors (V): every class II capacitor of the stage "
                             "that states no bias of its own loses value as its grade's bias curve says; empty: not "
                             "stated (a further spread stands for the bias loss)")
        bias_box = QWidget()
        bias_row = QHBoxLayout(bias_box)
        bias_row.setContentsMargins(0, 0, 0, 0)
        bias_row.addWidget(self.bias, 1)
        bias_row.addWidget(QLabel("V"))
        for kind in _response_kinds():
            self.response.addItem(kind, kind)
        form.addRow("name", self.name)
        form.addRow("topology", self.topology)
        form.addRow("options", self.options)
        form.addRow("", self.buffered)
        form.addRow("", self.opamp_part)
        form.addRow("response", self.response)
        form.addRow("DC bias", bias_box)
        self.form = form
        lay.addLayout(form)
        self.pages = QStackedWidget()
        self.roles = _table("role_table", ["role", "part", "value", "grade"])
        self.roles.setEditTriggers(QAbstractItemView.EditTrigger.NoEditTriggers)
        self.pages.addWidget(self.roles)
        circuit = QWidget()
        grid = QGridLayout(circuit)
        grid.setContentsMargins(0, 0, 0, 0)
        self.elements = _table("element_table", ["ref", "node", "node"])
        self.opamps = _table("opamp_table", ["ref", "+", "−", "output", "GBW part"])
        self.element_kind = QComboBox()
        self.element_kind.setObjectName("element_kind")
        for label, kind in KINDS:
            self.element_kind.addItem(label, kind)
        self.add_element = _button("Add element", "element_add", "a new part of the chosen kind, from out to ground")
        self.remove_element = _button("Remove element", "element_remove", "remove the selected element and its part")
        self.add_opamp = _button("Add op-amp", "opamp_add", "a new ideal op-amp following out")
        self.remove_opamp = _button("Remove op-amp", "opamp_remove", "remove the selected op-amp")
        grid.addWidget(_note("<b>elements</b>: a part between two nodes (in = source, 0 = ground, out = output)"),
                       0, 0, 1, 4)
        grid.addWidget(self.elements, 1, 0, 1, 4)
        grid.addWidget(self.element_kind, 2, 0)
        grid.addWidget(self.add_element, 2, 1)
        grid.addWidget(self.remove_element, 2, 2)
        grid.addWidget(_note("<b>op-amps</b>: ideal, or with the gain-bandwidth of a part of their name"),
                       3, 0, 1, 4)
        grid.addWidget(self.opamps, 4, 0, 1, 4)
        grid.addWidget(self.add_opamp, 5, 1)
        grid.addWidget(self.remove_opamp, 5, 2)
        self.pages.addWidget(circuit)
        lay.addWidget(self.pages, 1)
        self.problem = st.problem_label("stage_problem")
        lay.addWidget(self.problem)
        self.stage_list.currentRowChanged.connect(self._on_stage_chosen)
        self.add_stage.clicked.connect(lambda: self._edit(lambda d: edits.new_stage(d, self._catalog(), self._kinds()),
                                                          "add stage", select=-1))
        self.remove_stage.clicked.connect(lambda: self._edit(lambda d: edits.remove_stage(d, self.index),
                                                             "remove stage", select=max(0, self.index - 1)))
        self.up.clicked.connect(lambda: self._edit(lambda d: edits.move_stage(d, self.index, -1), "move stage up",
                                                   select=max(0, self.index - 1)))
        self.down.clicked.connect(lambda: self._edit(lambda d: edits.move_stage(d, self.index, 1),
                                                     "move stage down", select=self.index + 1))
        self.name.editingFinished.connect(self._on_name)
        self.topology.activated.connect(lambda _i: self._on_topology())
        self.options.editingFinished.connect(self._on_options)
        self.bias.editingFinished.connect(self._on_bias)
        self.buffered.clicked.connect(lambda on: self._on_buffered(on))
        self.opamp_part.clicked.connect(lambda on: self._edit(
            lambda d: edits.set_opamp_part(d, self.index, on, self._catalog()), "op-amp part"))
        self.elements.itemChanged.connect(lambda _item: self._on_table_edited())
        self.opamps.itemChanged.connect(self._on_opamp_item)
        self.response.activated.connect(lambda _i: self._edit(
            lambda d: edits.set_response(d, self.index, self.response.currentData()), "response"))
        self.add_element.clicked.connect(lambda: self._edit(
            lambda d: edits.add_element(d, self.index, self.element_kind.currentData(), self._catalog())[0],
            "add element"))
        self.add_opamp.clicked.connect(lambda: self._edit(lambda d: edits.add_opamp(d, self.index)[0], "add op-amp"))
        self.remove_element.clicked.connect(lambda: self._remove_row(self.elements, "elements"))
        self.remove_opamp.clicked.connect(lambda: self._remove_row(self.opamps, "opamps"))

    # --- model to view -------------------------------------------------------------------
    @property
    def index(self) -> int:
        return max(0, self.stage_list.currentRow())

    def _catalog(self):
        return self.design.catalog

    def _kinds(self) -> dict[str, str]:
        return {p.ref: p.kind for p in self.design.parts}

    def show_design(self, design: Design) -> None:
        """Show ``design`` (after any edit, undo or open): drafts and marks are dropped."""
        self.design = design
        self._loading = True
        try:
            keep = self.index if self._select_next is None else self._select_next
            items = [f"{i + 1}: {s.name or s.topology}" + ("" if _buffered(s) else " (loaded by the next)")
                     for i, s in enumerate(design.stages)]
            if items != [self.stage_list.item(i).text() for i in range(self.stage_list.count())]:
                self.stage_list.clear()
                self.stage_list.addItems(items)
            self.stage_list.setCurrentRow(min(keep, len(items) - 1))
            self._show_stage()
        finally:
            self._loading = False
        self._clear_marks()

    def _show_stage(self) -> None:
        d = self.design
        if d is None or not d.stages:
            return
        i = min(self.index, len(d.stages) - 1)
        s = d.stages[i]
        data = design_to_dict(d)["stages"][i]
        self.name.setText(s.name)
        self.topology.setCurrentIndex(max(0, self.topology.findData(s.topology)))
        self.options.setText(json.dumps(s.options) if s.options else "")
        self.bias.setText(_bias_text(s.bias_v))
        circuit = s.topology == edits.CIRCUIT
        self.options.setEnabled(not circuit)
        self.buffered.setChecked(_buffered(s))
        self.buffered.setEnabled(i < len(d.stages) - 1 or not _buffered(s))
        self.opamp_part.setVisible(not circuit and bool(s.built().optional_roles))
        self.form.setRowVisible(self.response, circuit)
        self.opamp_part.setChecked("U1" in s.roles)
        self.remove_stage.setEnabled(len(d.stages) > 1)
        self.up.setEnabled(i > 0)
        self.down.setEnabled(i < len(d.stages) - 1)
        parts = {p.ref: p for p in d.parts}
        if circuit:
            self.pages.setCurrentIndex(1)
            self._fill(self.elements, edits.element_rows(data))
            self._fill(self.opamps, edits.opamp_rows(data))
            self.opamps.blockSignals(True)
            for r in range(self.opamps.rowCount()):
                box = QTableWidgetItem("GBW from part" if self.opamps.item(r, 0).text() in parts else "ideal")
                box.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable)
                box.setCheckState(Qt.CheckState.Checked if self.opamps.item(r, 0).text() in parts
                                  else Qt.CheckState.Unchecked)
                self.opamps.setItem(r, 4, box)
            self.opamps.blockSignals(False)
            self.response.setCurrentIndex(max(0, self.response.findData(getattr(s, "response", ""))))
        else:
            self.pages.setCurrentIndex(0)
            rows = [[role, ref, parts[ref].value_text, parts[ref].grade] for role, ref in s.roles.items()]
            self._fill(self.roles, rows)

    def _fill(self, table: QTableWidget, rows: list[list[str]]) -> None:
        table.blockSignals(True)
        table.setRowCount(len(rows))
        for r, row in enumerate(rows):
            for c, text in enumerate(row):
                table.setItem(r, c, QTableWidgetItem(text))
        table.blockSignals(False)

    def _on_stage_chosen(self, row: int) -> None:
        if row < 0 or self.design is None:
            return
        if not self._loading:
            self._loading = True
            try:
                self._show_stage()
            finally:
                self._loading = False
            self._clear_marks()
        self.stage_selected.emit(row)

    # --- view to model -------------------------------------------------------------------
    def _edit(self, change: Callable[[dict], dict], text: str, select: int | None = None,
              mark: Callable[[list[InputError]], None] | None = None) -> str | None:
        """Apply ``change`` to the design's dict form as one undoable edit named ``text``;
        on refusal mark it (``mark``, default: the message line) and return the reason."""
        if self.design is None:
            return None
        try:
            data = change(design_to_dict(self.design))
            design = design_from_dict(data)
        except ValidationError as exc:
            problems = exc.problems
        except InputError as exc:
            problems = [exc]
        else:
            if select is not None:  # the stage to show once the edited design arrives
                self._select_next = select if select >= 0 else len(design.stages) - 1
            reason = self._apply_design(design, f"{text} (stage {self.index + 1})")
            self._select_next = None
            if reason is None:
                self.stage_selected.emit(self.index)
                return None
            problems = [InputError(reason, "")]
        self._show_problem(problems, text)
        if mark is not None:
            mark(problems)
        return problems[0].reason

    def _show_problem(self, problems: list[InputError], text: str) -> None:
        p = problems[0]
        where = f"{p.path}: " if p.path else ""
        more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
        self.problem.setText(f"{text}: {where}{p.reason}{more}; the design keeps its last accepted state")
        self.problem.show()
        self.problem_shown.emit(f"{text}: {where}{p.reason}")

    def _clear_marks(self) -> None:
        self.problem.hide()
        for w in (self.name, self.options, self.bias):
            w.setStyleSheet("")
        for t in (self.elements, self.opamps):
            t.blockSignals(True)
            for r in range(t.rowCount()):
                for c in range(t.columnCount()):
                    item = t.item(r, c)
                    if item is not None:
                        item.setBackground(QColor(0, 0, 0, 0))
                        item.setToolTip("")
            t.blockSignals(False)

    def _on_name(self) -> None:
        if self.design is None or self.name.text() == self.design.stages[self.index].name:
            return

        def change(d):
            d["stages"][self.index]["name"] = self.name.text().strip()
            return d
        self._edit(change, "stage name", mark=lambda _p: self.name.setStyleSheet(INVALID_STYLE))

    def _on_topology(self) -> None:
        name = self.topology.currentData()
        if self.design is None or name == self.design.stages[self.index].topology:
            return
        if self._edit(lambda d: edits.set_topology(d, self.index, name, self._catalog(), self._kinds()),
                      f"topology {name}") is not None:
            self.topology.setCurrentIndex(self.topology.findData(self.design.stages[self.index].topology))

    def _on_options(self) -> None:
        if self.design is None:
            return
        stage = self.design.stages[self.index]
        text = self.options.text().strip()
        try:
            options = json.loads(text) if text else {}
            if not isinstance(options, dict):
                raise ValueError("must be a JSON object such as {\"sections\": 2}")
        except ValueError as exc:
            reason = str(exc).splitlines()[0]
            self.options.setStyleSheet(INVALID_STYLE)
            self._show_problem([InputError(reason, f"stages[{self.index}].options")], "options")
            return
        if options == stage.options:
            self.options.setStyleSheet("")
            return
        self._edit(lambda d: edits.set_topology(d, self.index, stage.topology, self._catalog(), self._kinds(),
                                                options), "options",
                   mark=lambda _p: self.options.setStyleSheet(INVALID_STYLE))

    def _on_bias(self) -> None:
        """The stage's DC bias (V; empty: not stated) as one edit; a bad entry is marked and
        the stage keeps its last good bias."""
        if self.design is None:
            return
        i = self.index
        path = f"stages[{i}].bias_v"
        kept = _bias_text(self.design.stages[i].bias_v) or "not stated"
        try:
            bias = read_figure(self.bias.text(), ("V",), path, "5 or 5 V") or 0.0
        except InputError as exc:
            self.bias.setStyleSheet(INVALID_STYLE)
            self._show_problem([InputError(f"{exc.reason}; still using {kept}", path)], "DC bias")
            return
        if bias == self.design.stages[i].bias_v:
            self.bias.setStyleSheet("")
            self.bias.setText(_bias_text(bias))
            return

        def change(d):
            if bias:
                d["stages"][i]["bias_v"] = bias
            else:
                d["stages"][i].pop("bias_v", None)
            return d
        self._edit(change, f"DC bias {_bias_text(bias) or 'not stated'}",
                   mark=lambda _p: self.bias.setStyleSheet(INVALID_STYLE))

    def _on_buffered(self, on: bool) -> None:
        def change(d):
            if on:
                d["stages"][self.index].pop("buffered", None)
            else:
                d["stages"][self.index]["buffered"] = False
            return d
        if self._edit(change, "buffered" if on else "loaded by the next stage") is not None:
            self.buffered.setChecked(not on)

    @staticmethod
    def _rows(table: QTableWidget) -> list[list[str]]:
        cols = 4 if table.columnCount() > 4 else table.columnCount()  # an op-amp's GBW box is no node
        return [[(table.item(r, c).text() if table.item(r, c) else "").strip() for c in range(cols)]
                for r in range(table.rowCount())]

    def _on_table_edited(self) -> None:
        if self._loading or self.design is None:
            return
        elements, opamps = self._rows(self.elements), self._rows(self.opamps)
        self._clear_marks()
        self._edit(lambda d: edits.set_circuit(d, self.index, elements, opamps), "circuit",
                   mark=self._mark_cells)

    def _on_opamp_item(self, item: QTableWidgetItem) -> None:
        if item.column() != 4:
            self._on_table_edited()
            return
        if self._loading or self.design is None:
            return
        on = item.checkState() == Qt.CheckState.Checked
        row = item.row()
        if self._edit(lambda d: edits.set_gbw_part(d, self.index, row, on, self._catalog()),
                      "op-amp part" if on else "ideal op-amp") is not None:
            self._show_stage_quietly()

    def _show_stage_quietly(self) -> None:
        """The stage as the design holds it (a refused toggle goes back)."""
        self._loading = True
        try:
            self._show_stage()
        finally:
            self._loading = False

    def _mark_cells(self, problems: list[InputError]) -> None:
        """Each problem's cell (its row's ref cell when the problem names a whole row) red,
        with the reason and the value the design still uses as its tooltip."""
        stage = design_to_dict(self.design)["stages"][self.index] if self.design is not None else {}
        good = {"elements": edits.element_rows(stage), "opamps": edits.opamp_rows(stage)}
        for p in problems:
            m = _ROW_PATH.match(p.path)
            if m is None or int(m.group(1)) != self.index:
                continue
            table = self.elements if m.group(2) == "elements" else self.opamps
            row, field = int(m.group(3)), m.group(4)
            node = _NODE.search(p.reason)
            if field == "between":
                cols = [1, 2]
            elif m.group(2) == "opamps" and field in _OPAMP_COLUMNS:
                cols = [_OPAMP_COLUMNS[field]]
            elif field is None and node is not None:  # "node n9 connects only to R5": n9's cells
                cols = [c for c in range(1, table.columnCount())
                        if table.item(row, c) is not None and table.item(row, c).text().strip() == node.group(1)] or [0]
            else:
                cols = [0]
            table.blockSignals(True)
            for c in cols:
                item = table.item(row, c)
                if item is not None:
                    item.setBackground(BAD_CELL)
                    kept = good[m.group(2)][row][c] if row < len(good[m.group(2)]) else None
                    item.setToolTip(p.reason + (f"; still using {kept}" if kept is not None else
                                                "; not in the design yet"))
            table.blockSignals(False)

    def _remove_row(self, table: QTableWidget, name: str) -> None:
        row = table.currentRow()
        if row < 0:
            self._show_problem([InputError("select a row first", "")], f"remove {name[:-1]}")
            return
        self._edit(lambda d: edits.remove_row(d, self.index, name, row), f"remove {name[:-1]}")
