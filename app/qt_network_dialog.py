"""The dialog of one resistor network or matched pair: its name, its members (ticked in a
list of the parts it may hold) and the figures the design file holds for it: absolute
tolerance (±%), ratio tolerance (±%), temperature-coefficient tracking (ppm/K) and, on a
board of several channels, whether one package serves every channel.

OK checks the entry with the loader's own rules (:func:`filters.designfile.check_design`)
before the dialog closes: a refused field turns red and the line under the form names it
(its label and its path in the design file, e.g. ``ratio tolerance (networks[1].ratio_pct)``)
and the reason; the design is not touched until the entry is accepted. The window then
applies :attr:`NetworkDialog.design` as one undoable edit (:mod:`app.qt_network_menu`).
"""
from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import (QCheckBox, QDialog, QDialogButtonBox, QFormLayout, QHBoxLayout, QLabel, QLineEdit,
                               QListWidget, QListWidgetItem, QVBoxLayout, QWidget)

from ..design import Design
from ..designfile import check_design
from ..errors import InputError, ValidationError
from ..values import PART_UNITS, format_value
from ..networks import COVERAGE, MAX_TOLERANCE_PCT, MAX_TRACKING_PPM, Network
from . import qt_network_edits as edits
from . import qt_style as st
from .qt_parts import INVALID_STYLE

# field of the design file -> (label in the dialog, the widget's attribute)
FIELDS = {"name": ("name", "name"), "members": ("members", "members"),
          "tolerance_pct": ("tolerance", "tolerance"), "ratio_pct": ("ratio tolerance", "ratio"),
          "tracking_ppm": ("tracking", "tracking"), "across_channels": ("one package", "across")}
BAD_LIST = "QListWidget { border: 1px solid #D55E00; background: #fde2d6; }"


def _with_unit(edit: QLineEdit, unit: str) -> QWidget:
    box = QWidget()
    lay = QHBoxLayout(box)
    lay.setContentsMargins(0, 0, 0, 0)
    lay.addWidget(edit, 1)
    label = QLabel(unit)
    label.setMinimumWidth(label.fontMetrics().horizontalAdvance("ppm/K"))  # the fields line up
    lay.addWidget(label)
    return box


class NetworkDialog(QDialog):
    """New network (``editing`` None: the parts of ``chosen`` ticked) or the figures and
    members of network ``editing``. After ``exec()`` returns Accepted, :attr:`design` is the
    design with the change (checked by the loader) and :attr:`text` names the edit."""

    def __init__(self, design: Design, editing: Network | None = None, chosen: list[str] | None = None,
                 parent=None) -> None:
        super().__init__(parent)
        self.setObjectName("network_dialog")
        self.original = design
        self.editing = editing
        self.design: Design | None = None
        self.text = ""
        self.setWindowTitle(f"Network {editing.name}" if editing else "New network or matched pair")
        lay = QVBoxLayout(self)
        self.kind = QLabel()
        self.kind.setObjectName("network_kind")
        lay.addWidget(self.kind)
        form = QFormLayout()
        self.name = QLineEdit()
        self.name.setObjectName("network_name")
        self.members = QListWidget()
        self.members.setObjectName("network_members")
        self.members.setToolTip("tick the parts in one package (two for a matched pair); all of one kind")
        parts = {p.ref: p for p in design.parts}
        ticked = set(editing.members if editing else (chosen or []))
        for ref in edits.candidates(design, editing.name if editing else ""):
            p = parts[ref]
            value = p.value_text or format_value(p.value, PART_UNITS.get(p.kind, ""))
            item = QListWidgetItem(f"{ref}   {value}   {p.grade}")
            item.setData(Qt.ItemDataRole.UserRole, ref)
            item.setFlags(Qt.ItemFlag.ItemIsEnabled | Qt.ItemFlag.ItemIsUserCheckable)
            item.setCheckState(Qt.CheckState.Checked if ref in ticked else Qt.CheckState.Unchecked)
            self.members.addItem(item)
        rows = max(3, min(8, self.members.count()))
        self.members.setFixedHeight(rows * (self.members.fontMetrics().height() + 4) + 8)
        self.tolerance = QLineEdit()
        self.tolerance.setObjectName("network_tolerance")
        self.tolerance.setToolTip(f"each member's absolute tolerance, ± % of its marked value, above 0 and at most "
                                  f"{MAX_TOLERANCE_PCT:g} % (read as {COVERAGE:g} standard deviations)")
        self.ratio = QLineEdit()
        self.ratio.setObjectName("network_ratio")
        self.ratio.setPlaceholderText("from the data sheet")
        self.ratio.setToolTip("tolerance of the ratio of any two members, ± % of the marked ratio: 0 to √2 × the "
                              "tolerance (at √2 × the tolerance nothing is shared)")
        self.tracking = QLineEdit()
        self.tracking.setObjectName("network_tracking")
        self.tracking.setPlaceholderText("empty: 0")
        self.tracking.setToolTip(f"the members' temperature coefficients differ by at most this, 0 to "
                                 f"{MAX_TRACKING_PPM:g} ppm/K (empty: 0, identical coefficients)")
        self.across = QCheckBox("one package serves every channel")
        self.across.setObjectName("network_across")
        form.addRow("name", self.name)
        form.addRow("members", self.members)
        form.addRow("tolerance ±", _with_unit(self.tolerance, "%"))
        form.addRow("ratio tolerance ±", _with_unit(self.ratio, "%"))
        form.addRow("tracking", _with_unit(self.tracking, "ppm/K"))
        form.addRow("", self.across)
        form.setRowVisible(self.across, design.channels.count > 1)
        lay.addLayout(form)
        note = QLabel(f"Each figure is read as {COVERAGE:g} standard deviations; a member keeps its grade for its "
                      "temperature coefficient, drift and cost. Use the maker's figures for the package: the "
                      "yield is an estimate under these assumptions, to be confirmed on real parts.")
        note.setWordWrap(True)
        lay.addWidget(note)
        self.problem = st.problem_label("network_problem")
        lay.addWidget(self.problem)
        buttons = QDialogButtonBox(QDialogButtonBox.StandardButton.Ok | QDialogButtonBox.StandardButton.Cancel)
        buttons.setObjectName("network_buttons")
        buttons.accepted.connect(self._on_ok)
        buttons.rejected.connect(self.reject)
        self.ok = buttons.button(QDialogButtonBox.StandardButton.Ok)
        lay.addWidget(buttons)
        self._tips: dict[str, str] = {}  # each field's own tooltip (a refusal's reason replaces it meanwhile)
        self._fill(design, editing)
        self.members.itemChanged.connect(lambda _i: self._show_kind())
        self._show_kind()
        self.resize(460, self.sizeHint().height())

    def _fill(self, design: Design, editing: Network | None) -> None:
        refs = self.ticked()
        if editing is not None:
            net = editing
            self.name.setText(net.name)
            self.tolerance.setText(f"{net.tolerance_pct:g}")
            self.ratio.setText(f"{net.ratio_pct:g}")
            self.tracking.setText(f"{net.tracking_ppm:g}")
            self.across.setChecked(net.across_channels)
            return
        kinds = {p.ref: p.kind for p in design.parts}
        self.name.setText(edits.new_name(design, kinds[refs[0]] if refs else "R", len(refs)))
        grades = dict(zip((p.ref for p in design.parts), design.part_grades()))
        if refs:  # the members' grade tolerance as a start: the package's own figure replaces it
            self.tolerance.setText(f"{min(MAX_TOLERANCE_PCT, max(grades[r].tolerance_pct for r in refs)):g}")

    # --- reading -------------------------------------------------------------------------
    def ticked(self) -> list[str]:
        """The refs ticked in the members list (list order)."""
        return [self.members.item(i).data(Qt.ItemDataRole.UserRole) for i in range(self.members.count())
                if self.members.item(i).checkState() == Qt.CheckState.Checked]

    def _show_kind(self) -> None:
        refs = self.ticked()
        kinds = {p.ref: p.kind for p in self.original.parts}
        found = {kinds[r] for r in refs}
        if len(found) == 1:
            word = edits.kind_word(found.pop(), len(refs))
            self.kind.setText(f"<b>{'matched pair' if len(refs) == 2 else 'network'}</b> of {len(refs)} {word}"
                              if len(refs) > 1 else f"tick at least one more {edits.kind_word(kinds[refs[0]])}")
        else:
            self.kind.setText("tick two or more parts of one kind" if not found else
                              "<b>mixed kinds</b>: the parts of one network must be of one kind")

    def _figure(self, edit: QLineEdit, key: str, units: tuple[str, ...], example: str,
                default: float | None) -> float:
        v = edits.read_figure(edit.text(), units, self._path(key), example)
        if v is None:
            if default is None:
                raise InputError(f"is empty; enter it in {units[0]} ({example})", self._path(key))
            return default
        return v

    def _path(self, key: str) -> str:
        i = next((k for k, n in enumerate(self.original.networks) if self.editing and n.name == self.editing.name),
                 len(self.original.networks))
        return f"networks[{i}].{key}"

    def _on_ok(self) -> None:
        self._clear_marks()
        try:
            ticked = self.ticked()
            kept = [m for m in self.editing.members if m in ticked] if self.editing else []
            members = tuple(kept + [r for r in ticked if r not in kept])  # members keep their order in the file
            net = Network(self.name.text().strip(), members,
                          self._figure(self.tolerance, "tolerance_pct", ("%",), "0.5 or 0.5 %", None),
                          self._figure(self.ratio, "ratio_pct", ("%",), "0.05 or 0.05 %", None),
                          self._figure(self.tracking, "tracking_ppm", ("ppm/K", "ppm"), "5 or 5 ppm/K", 0.0),
                          self.across.isChecked() and self.original.channels.count > 1)
            refs = list(net.members)
            if len(refs) < 2:
                raise InputError("tick at least two parts of one kind (two make a matched pair)",
                                 self._path("members"))
            problem = edits.member_problem(self.original, refs, self.editing.name if self.editing else "")
            if problem is not None:
                raise InputError(problem, self._path("members"))
            if self.editing is None:
                changed, text = edits.with_new(self.original, net), f"new network {net.name} ({', '.join(refs)})"
            else:
                changed, text = edits.with_replaced(self.original, self.editing.name, net), f"edit network {net.name}"
            checked = check_design(changed)
        except ValidationError as exc:
            self._mark(exc.problems)
            return
        except InputError as exc:
            self._mark([exc])
            return
        if self.editing is not None and net == self.editing:
            self.reject()  # nothing changed: no edit
            return
        self.design, self.text = checked, text
        self.accept()

    # --- marks ---------------------------------------------------------------------------
    def _clear_marks(self) -> None:
        self.problem.hide()
        for _label, attr in FIELDS.values():
            w = getattr(self, attr)
            w.setStyleSheet("")
            w.setToolTip(self._tips.setdefault(attr, w.toolTip()))

    def _mark(self, problems: list[InputError]) -> None:
        """Each problem's field red; the first problem's field, path and reason under the form."""
        first = None
        for p in problems:
            key = p.path.rsplit(".", 1)[-1] if p.path.startswith("networks[") else ""
            label, attr = FIELDS.get(key, ("", ""))
            if attr:
                w = getattr(self, attr)
                w.setStyleSheet(BAD_LIST if isinstance(w, QListWidget) else INVALID_STYLE)
                w.setToolTip(p.reason)
            if first is None:
                first = f"{label} ({p.path}): {p.reason}" if label else (f"{p.path}: {p.reason}" if p.path else p.reason)
        more = f" (and {len(problems) - 1} more)" if len(problems) > 1 else ""
        self.problem.setText(f"{first}{more}; nothing is changed until OK is accepted")
        self.problem.show()
        self.resize(self.width(), max(self.height(), self.sizeHint().height()))  # room for the message
