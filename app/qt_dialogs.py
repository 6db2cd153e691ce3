"""Two dialogs of the window: a new design from a response, and the grades with their costs.

:class:`SynthesisDialog` collects what :func:`filters.synthesis.synthesize` needs, runs it
on every valid change and shows its report as a preview, with the errors of the built
design against the ideal response; bad input is explained beside the field that holds it
and the OK button stays disabled until it is fixed. When an error exceeds its limit the
warning is shown in words and OK waits until the user ticks that they accept it.

:class:`CatalogDialog` lists every grade; tolerance and cost can be edited in place, and a
catalog can be read from or written to a file. :meth:`CatalogDialog.changed_grades` gives
the grades that differ from the built-in catalog (the design's own grades).

Neither dialog computes anything itself: values are read with
:func:`filters.values.parse_value`, checked and built by the library.
"""
from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Any

from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QBrush, QFont, QFontDatabase
from PySide6.QtWidgets import (QAbstractItemView, QCheckBox, QComboBox, QDialog, QDialogButtonBox,
                               QFileDialog, QGridLayout, QHBoxLayout, QHeaderView, QLabel, QLineEdit,
                               QPlainTextEdit, QPushButton, QSpinBox, QTableWidget, QTableWidgetItem,
                               QVBoxLayout, QWidget)

from filters.designfile import problems_text, write_text_atomic
from filters.errors import InputError, ValidationError
from filters.grades import Catalog, Grade, builtin_catalog, load_catalog
from filters.synthesis import MAX_ORDER, RIPPLES_DB, TOPOLOGY_CHOICES, SynthesisResult, synthesize
from filters.values import E_SERIES, parse_value

from .qt_style import VERMILION, rgba

PROBLEM_STYLE = f"color: {VERMILION};"
_MARK = "{cls} {{ background: #fde2d6; border: 1px solid " + VERMILION + "; }}"

RESPONSE_LABELS = (("Butterworth", "butterworth"), ("Chebyshev", "chebyshev"), ("Bessel", "bessel"),
                   ("Linkwitz-Riley", "linkwitz_riley"))
KIND_LABELS = (("low-pass", "lowpass"), ("high-pass", "highpass"), ("band-pass", "bandpass"))
TOPOLOGY_LABELS = {
    "sallen_key_lowpass": "Sallen-Key, unity gain",
    "mfb_lowpass": "multiple feedback, gain -1",
    "sallen_key_highpass": "Sallen-Key, unity gain",
    "mfb_highpass": "multiple feedback, gain -1",
    "mfb_bandpass": "multiple feedback",
}
DEFAULT_RIPPLE_DB = 1.0
DEFAULT_SERIES, DEFAULT_CAP_SERIES = "E24", "E12"


def _mark(widget: QWidget, on: bool) -> None:
    widget.setStyleSheet(_MARK.format(cls=type(widget).__name__) if on else "")


def _reason(exc: InputError) -> str:
    """The reason of ``exc`` without its path (for a ValidationError, its first problem's)."""
    if isinstance(exc, ValidationError) and exc.problems:
        first = exc.problems[0]
        more = len(exc.problems) - 1
        return first.reason + (f" (and {more} more problem{'s' if more > 1 else ''})" if more else "")
    return exc.reason


# --- new design from a response ----------------------------------------------------------


def _ok_cancel(dialog: QDialog) -> tuple[QDialogButtonBox, QPushButton]:
    """OK and Cancel buttons wired to the dialog's accept and reject."""
    buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
    ok = buttons.button(QDialogButtonBox.StandardButton.Ok)
    ok.setObjectName("ok")
    buttons.accepted.connect(dialog.accept)
    buttons.rejected.connect(dialog.reject)
    return buttons, ok

class SynthesisDialog(QDialog):
    """"New design from a response": response, order, kind, cutoff ... and a live preview.

    ``result()`` is the last valid :class:`~filters.synthesis.SynthesisResult` (its
    ``.design`` is what the window loads); it is kept while the input is invalid.
    ``result_changed(object)`` is emitted with every new valid result;
    ``problem_changed(str)`` with the current problem ("" when the input is valid).
    Note: ``result()`` replaces ``QDialog.result()``; ``exec()`` still returns the code.
    """

    result_changed = Signal(object)   # SynthesisResult
    problem_changed = Signal(str)     # "" when valid

    # synthesize() argument -> (field widget attribute, words naming the field)
    _FIELDS = {"response": ("response", "response"), "order": ("order", "order"),
               "ripple_db": ("ripple", "ripple"), "kind": ("kind", "kind"),
               "cutoff_hz": ("cutoff", "cutoff"), "bandwidth_hz": ("bandwidth", "bandwidth"),
               "topology": ("topology", "topology"), "series": ("series", "resistor series"),
               "cap_series": ("cap_series", "capacitor series"), "gbw_hz": ("gbw", "op-amp GBW")}

    def __init__(self, parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("New design from a response")
        self.setObjectName("synthesis_dialog")
        self._result: SynthesisResult | None = None
        self._problem = ""
        self._problem_path = ""
        self._filling = False

        self.response = QComboBox()
        for label, name in RESPONSE_LABELS:
            self.response.addItem(label, name)
        self.ripple = QComboBox()
        for r in RIPPLES_DB:
            self.ripple.addItem(f"{r:g} dB", r)
        self.ripple.setCurrentIndex(RIPPLES_DB.index(DEFAULT_RIPPLE_DB))
        self.order = QSpinBox()
        self.order.setRange(1, MAX_ORDER)
        self.order.setValue(4)
        self.kind = QComboBox()
        for label, name in KIND_LABELS:
            self.kind.addItem(label, name)
        self.cutoff = QLineEdit("1k")
        self.cutoff.setPlaceholderText("e.g. 2k or 1.5MHz")
        self.bandwidth = QLineEdit()
        self.bandwidth.setPlaceholderText("e.g. 200")
        self.topology = QComboBox()
        self.series = QComboBox()
        self.cap_series = QComboBox()
        for combo, default in ((self.series, DEFAULT_SERIES), (self.cap_series, DEFAULT_CAP_SERIES)):
            for name in E_SERIES:
                combo.addItem(name, name)
            combo.setCurrentIndex(list(E_SERIES).index(default))
        self.gbw = QLineEdit()
        self.gbw.setPlaceholderText("empty: ideal op-amps")
        self.snap = QCheckBox("snap resistors to preferred values")
        self.snap.setChecked(True)

        self.labels: dict[str, QLabel] = {}
        self.problems: dict[str, QLabel] = {}
        grid = QGridLayout()
        rows = (("response", "response", self.response), ("ripple", "ripple", self.ripple),
                ("order", "order", self.order), ("kind", "kind", self.kind),
                ("cutoff", "cutoff (Hz)", self.cutoff), ("bandwidth", "bandwidth (Hz)", self.bandwidth),
                ("topology", "topology", self.topology), ("series", "resistor series", self.series),
                ("cap_series", "capacitor series", self.cap_series), ("gbw", "op-amp GBW (Hz)", self.gbw))
        for i, (key, text, widget) in enumerate(rows):
            widget.setObjectName(key)
            label = QLabel(text)
            label.setBuddy(widget)
            problem = QLabel()
            problem.setObjectName(f"problem_{key}")
            problem.setStyleSheet(PROBLEM_STYLE)
            problem.setWordWrap(True)
            problem.hide()
            self.labels[key], self.problems[key] = label, problem
            grid.addWidget(label, i, 0)
            grid.addWidget(widget, i, 1)
            grid.addWidget(problem, i, 2)
        self.snap.setObjectName("snap")
        grid.addWidget(self.snap, len(rows), 1, 1, 2)
        grid.setColumnStretch(2, 1)

        self.preview = QPlainTextEdit()
        self.preview.setObjectName("preview")
        self.preview.setReadOnly(True)
        self.preview.setLineWrapMode(QPlainTextEdit.LineWrapMode.NoWrap)
        font = QFontDatabase.systemFont(QFontDatabase.SystemFont.FixedFont)
        font.setStyleHint(QFont.StyleHint.Monospace)
        self.preview.setFont(font)
        self.preview.setMinimumSize(880, 330)  # the section table and the error table without scrolling at 1280x800

        self.buttons, self.ok_button = _ok_cancel(self)
        self.warning = QLabel()
        self.warning.setObjectName("warning")
        self.warning.setStyleSheet(PROBLEM_STYLE)
        self.warning.setWordWrap(True)
        self.warning.hide()
        self.accept_errors = QCheckBox("use this design although it strays beyond the error limits")
        self.accept_errors.setObjectName("accept_errors")
        self.accept_errors.hide()

        layout = QVBoxLayout(self)
        layout.addLayout(grid)
        layout.addWidget(QLabel("Preview"))
        layout.addWidget(self.preview, 1)
        layout.addWidget(self.warning)
        layout.addWidget(self.accept_errors)
        layout.addWidget(self.buttons)

        self._fill_topologies()
        self._update_enabled()
        for combo in (self.response, self.ripple, self.topology, self.series, self.cap_series):
            combo.currentIndexChanged.connect(self._changed)
        self.kind.currentIndexChanged.connect(self._kind_changed)
        self.order.valueChanged.connect(self._changed)
        for edit in (self.cutoff, self.bandwidth, self.gbw):
            edit.textChanged.connect(self._changed)
        self.snap.toggled.connect(self._changed)
        self.accept_errors.toggled.connect(self._update_ok)
        self.refresh()

    # --- public ---------------------------------------------------------------------------
    def result(self) -> SynthesisResult | None:  # type: ignore[override]
        """The last valid synthesis (None only if the input was never valid)."""
        return self._result

    def problem(self) -> str:
        """The current problem as shown in the preview ("" when the input is valid)."""
        return self._problem

    def is_valid(self) -> bool:
        return not self._problem

    def inputs(self) -> dict[str, Any]:
        """Everything typed or chosen, as text and choices (to restore with :meth:`set_inputs`)."""
        return {"response": self.response.currentData(), "ripple_db": self.ripple.currentData(),
                "order": self.order.value(), "kind": self.kind.currentData(),
                "cutoff": self.cutoff.text(), "bandwidth": self.bandwidth.text(),
                "topology": self.topology.currentData(), "series": self.series.currentData(),
                "cap_series": self.cap_series.currentData(), "gbw": self.gbw.text(),
                "snap": self.snap.isChecked()}

    def set_inputs(self, data: dict[str, Any]) -> None:
        """Restore what :meth:`inputs` returned (unknown keys and choices are skipped)."""
        self._filling = True
        try:
            for key, combo in (("response", self.response), ("ripple_db", self.ripple), ("kind", self.kind),
                               ("series", self.series), ("cap_series", self.cap_series)):
                i = combo.findData(data.get(key)) if key in data else -1
                if i >= 0:
                    combo.setCurrentIndex(i)
            self._fill_topologies()
            i = self.topology.findData(data.get("topology"))
            if i >= 0:
                self.topology.setCurrentIndex(i)
            if isinstance(data.get("order"), int):
                self.order.setValue(data["order"])
            for key, edit in (("cutoff", self.cutoff), ("bandwidth", self.bandwidth), ("gbw", self.gbw)):
                if isinstance(data.get(key), str):
                    edit.setText(data[key])
            if isinstance(data.get("snap"), bool):
                self.snap.setChecked(data["snap"])
        finally:
            self._filling = False
        self._update_enabled()
        self.refresh()

    def request(self) -> dict[str, Any]:
        """The keyword arguments for :func:`filters.synthesis.synthesize` from the fields.

        Raises :class:`InputError` (path = the synthesize argument) for unreadable text.
        """
        response = self.response.currentData()
        kind = self.kind.currentData()
        gbw_text = self.gbw.text().strip()
        return {
            "response": response,
            "order": self.order.value(),
            "cutoff_hz": parse_value(self.cutoff.text(), "cutoff_hz"),
            "kind": kind,
            "bandwidth_hz": parse_value(self.bandwidth.text(), "bandwidth_hz") if kind == "bandpass" else None,
            "topology": self.topology.currentData(),
            "series": self.series.currentData(),
            "cap_series": self.cap_series.currentData(),
            "gbw_hz": parse_value(gbw_text, "gbw_hz") if gbw_text else None,
            "ripple_db": self.ripple.currentData() if response == "chebyshev" else None,
            "snap": self.snap.isChecked(),
        }

    def refresh(self) -> None:
        """Run the synthesis on the current fields and show the report or the problem."""
        try:
            result = synthesize(**self.request())
        except InputError as exc:
            self._show_problem(exc.path, _reason(exc))
            return
        except Exception as exc:  # noqa: BLE001 - the library failed on extreme numbers; never a traceback
            self._show_problem("", f"no design can be built from these values ({exc})")
            return
        self._result = result
        self._show_problem("", "")
        self.preview.setStyleSheet("")
        self.preview.setPlainText(result.text_report())
        warning = result.warning_text()
        self.warning.setText(warning)
        self.warning.setVisible(bool(warning))
        self.accept_errors.setVisible(bool(warning))
        blocked = self.accept_errors.blockSignals(True)
        self.accept_errors.setChecked(False)  # an acceptance holds for the design it was given for
        self.accept_errors.blockSignals(blocked)
        self._update_ok()
        self.result_changed.emit(result)

    def needs_acceptance(self) -> bool:
        """True while the shown design strays beyond the error limits and that is not accepted."""
        return bool(self._result is not None and not self._problem and self._result.exceeded
                    and not self.accept_errors.isChecked())

    def accept(self) -> None:
        """Close with OK, only while the input is valid and any error beyond the limits is accepted."""
        if self._problem or self._result is None or self.needs_acceptance():
            return
        super().accept()

    # --- internals ------------------------------------------------------------------------
    def _changed(self, *_args: Any) -> None:
        if self._filling:
            return
        self._update_enabled()
        self.refresh()

    def _kind_changed(self, *_args: Any) -> None:
        if self._filling:
            return
        self._fill_topologies()
        self._changed()

    def _fill_topologies(self) -> None:
        """The topologies valid for the chosen kind, keeping the choice when it still fits."""
        previous = self.topology.currentData()
        choices = TOPOLOGY_CHOICES[self.kind.currentData()]
        blocked = self.topology.blockSignals(True)
        self.topology.clear()
        for name in choices:
            self.topology.addItem(TOPOLOGY_LABELS.get(name, name), name)
            self.topology.setItemData(self.topology.count() - 1, name, Qt.ItemDataRole.ToolTipRole)
        self.topology.setCurrentIndex(max(0, self.topology.findData(previous)))
        self.topology.blockSignals(blocked)

    def _update_ok(self, *_args: Any) -> None:
        self.ok_button.setEnabled(not self._problem and self._result is not None and not self.needs_acceptance())

    def _update_enabled(self) -> None:
        self.ripple.setEnabled(self.response.currentData() == "chebyshev")
        bandpass = self.kind.currentData() == "bandpass"
        self.bandwidth.setEnabled(bandpass)
        self.labels["cutoff"].setText("centre (Hz)" if bandpass else "cutoff (Hz)")

    def _field_words(self, path: str) -> str:
        if path == "cutoff_hz" and self.kind.currentData() == "bandpass":
            return "centre (cutoff)"
        return self._FIELDS[path][1] if path in self._FIELDS else ""

    def _show_problem(self, path: str, reason: str) -> None:
        key = self._FIELDS[path][0] if path in self._FIELDS else ""
        for k, label in self.problems.items():
            on = bool(reason) and k == key
            label.setText(reason if on else "")
            label.setVisible(on)
            _mark(getattr(self, k), on)
        words = self._field_words(path)
        message = f"{words}: {reason}" if reason and words else reason
        self._problem, self._problem_path = message, path if reason else ""
        self._update_ok()
        if message:
            self.warning.hide()
            self.accept_errors.hide()
            self.preview.setStyleSheet(f"QPlainTextEdit {{ color: {VERMILION}; }}")
            self.preview.setPlainText(message + "\n\nFix the marked field to see the new design; "
                                      "OK is available again once the input is valid.")
        self.problem_changed.emit(message)


# --- grades and costs --------------------------------------------------------------------

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
        self.buttons, self.ok_button = _ok_cancel(self)

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
                problem = _reason(exc)
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
