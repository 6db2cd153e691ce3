"""The parts panel: each part's reference designator, value, grade and tolerance.

Value text is parsed on Enter or when the field loses focus with the loader's own rule
(:func:`filters.design.check_part_value`); invalid text is marked and explained beside the
field and the design keeps its last good value. The seed is text too (0 to 2^63-1, as in a
design file: :func:`filters.design.check_seed`), so any seed a file holds can be shown. Dragging a
tolerance slider previews the what-if tolerance live; releasing it makes one edit.
"""
from __future__ import annotations

import math

from PySide6.QtCore import QEvent, QRegularExpression, Qt, Signal
from PySide6.QtGui import QRegularExpressionValidator
from PySide6.QtWidgets import (QComboBox, QGridLayout, QLabel, QLineEdit, QPushButton,
                               QScrollArea, QSlider, QSpinBox, QVBoxLayout, QWidget, QComboBox as _Combo)

from ..design import MAX_SAMPLES, MAX_SEED, Design, check_part_value, check_seed
from ..errors import InputError
from ..values import PART_UNITS, format_value
from . import qt_style as st
from .qt_part_menu import show_constraints, show_measured

SLIDER_STEPS = 1000
TOL_MIN, TOL_MAX = 0.05, 30.0  # percent, log scale
INVALID_STYLE = "QLineEdit { background: #fde2d6; border: 1px solid #D55E00; }"
SELECTED_STYLE = "QLabel { background: #D55E00; color: white; font-weight: bold; padding: 1px 3px; }"
CHOSEN_STYLE = "QLabel { background: #0072B2; color: white; padding: 1px 3px; }"  # chosen for a network


def slider_to_pct(pos: int) -> float:
    """Slider position to tolerance (%), on a log scale from 0.05 % to 30 %."""
    t = pos / SLIDER_STEPS
    return round(10 ** (math.log10(TOL_MIN) + t * (math.log10(TOL_MAX) - math.log10(TOL_MIN))), 3)


def pct_to_slider(pct: float) -> int:
    if pct <= TOL_MIN:
        return 0
    t = (math.log10(pct) - math.log10(TOL_MIN)) / (math.log10(TOL_MAX) - math.log10(TOL_MIN))
    return int(round(min(1.0, t) * SLIDER_STEPS))


def part_groups(design: Design) -> list[tuple[str, str, tuple[str, ...]]]:
    """The parts panel's layout: (network name, heading, member refs) for each network, its
    members together under the heading; ("", "", refs) for the parts on their own, in design
    order before the networks (headed by the channel count when the board has several)."""
    members = {m for net in design.networks for m in net.members}
    ch = design.channels
    heading = "" if ch.count < 2 else (f"<b>{ch.count} channels</b> on each board, each with its own parts"
                                       + (f"; shared by all: {', '.join(ch.shared)}" if ch.shared else ""))
    out = [("channels" if heading else "", heading, tuple(p.ref for p in design.parts if p.ref not in members))]
    for net in design.networks:
        where = ", one package for all channels" if net.across_channels and design.channels.count > 1 else ""
        what = "matched pair" if len(net.members) == 2 else "network"
        out.append((net.name, f"<b>{net.name}</b> {what}: ±{net.tolerance_pct:g} %, ratio ±{net.ratio_pct:g} %, "
                              f"tracking {net.tracking_ppm:g} ppm/K{where}", net.members))
    return out


class PartRow:
    """The widgets of one part."""

    def __init__(self, panel: "PartsPanel", ref: str) -> None:
        self.ref = ref
        self.label = QLabel(ref)
        self.label.setObjectName(f"ref_{ref}")
        self.value = QLineEdit()
        self.value.setObjectName(f"value_{ref}")
        self.value.setMaximumWidth(90)
        self.grade = QComboBox()
        self.grade.setObjectName(f"grade_{ref}")
        self.grade.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToContents)
        self.slider = QSlider(Qt.Orientation.Horizontal)
        self.slider.setObjectName(f"tolerance_{ref}")
        self.slider.setRange(0, SLIDER_STEPS)
        self.slider.setMinimumWidth(110)
        self.readout = QLabel()
        self.readout.setObjectName(f"tolerance_readout_{ref}")
        self.readout.setMinimumWidth(70)
        self.problem = st.problem_label(f"problem_{ref}")
        self.value.editingFinished.connect(lambda: panel._on_value_edited(self))
        self.grade.activated.connect(lambda _i: panel._on_grade_chosen(self))
        self.slider.valueChanged.connect(lambda pos: panel._on_slider_moved(self, pos))
        self.slider.sliderReleased.connect(lambda: panel._on_slider_released(self))
        # right-click on the part's name: lock, forbid, measured values (app/qt_part_menu.py)
        self.label.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
        self.label.customContextMenuRequested.connect(
            lambda pos: panel.part_menu_requested.emit(ref, self.label.mapToGlobal(pos)))
        self.label.installEventFilter(panel)  # a click chooses the part, Ctrl+click several (networks)


class PartsPanel(QWidget):
    """Every part with its value, grade and tolerance, plus sample count and seed."""

    value_committed = Signal(str, float, str)   # ref, value (SI), text
    grade_chosen = Signal(str, str)             # ref, grade name
    tolerance_dragging = Signal(str, float)     # ref, tolerance %
    tolerance_released = Signal(str, float)     # ref, tolerance %
    sampling_changed = Signal(int, object, str)  # samples, seed (a Python int: up to 2^63-1), method
    problem_shown = Signal(str)                 # a message for the status bar
    part_menu_requested = Signal(str, object)   # ref, global QPoint (a right-click on the part's name)
    network_menu_requested = Signal(str, object)  # network name, global QPoint (a right-click on its heading)
    chosen_changed = Signal(list)               # refs chosen by clicks on their names (for a network)

    def __init__(self) -> None:
        super().__init__()
        self.rows: dict[str, PartRow] = {}
        self._design: Design | None = None
        self._dragging: str | None = None
        self._keyboard_slide = False
        outer = QVBoxLayout(self)
        outer.setContentsMargins(4, 4, 4, 4)
        samp = QGridLayout()
        self.samples = QSpinBox()
        self.samples.setObjectName("samples")
        self.samples.setRange(10, MAX_SAMPLES)
        self.samples.setSingleStep(1000)
        self.samples.setGroupSeparatorShown(True)
        self.seed = QLineEdit()
        self.seed.setObjectName("seed")
        # digits only, at most as many as 2^63-1 has; check_seed rules on the value
        self.seed.setValidator(QRegularExpressionValidator(QRegularExpression(rf"\d{{0,{len(str(MAX_SEED))}}}")))
        self.seed.setToolTip(f"random seed: a whole number from 0 to {MAX_SEED:,}")
        self.seed.setMinimumWidth(self.seed.fontMetrics().horizontalAdvance("0" * 12))
        self.seed_problem = st.problem_label("seed_problem")
        self.samples_problem = st.problem_label("samples_problem")  # a boards count the memory rule refuses
        self.method = _Combo()
        self.method.setObjectName("method")
        self.method.addItem("random", "random")
        self.method.addItem("Sobol (QMC)", "sobol")
        self.redraw = QPushButton("New boards")
        self.redraw.setObjectName("redraw")
        self.redraw.setToolTip("Draw a fresh set of boards (next seed)")
        samp.addWidget(QLabel("boards"), 0, 0)
        samp.addWidget(self.samples, 0, 1)
        samp.addWidget(QLabel("seed"), 0, 2)
        samp.addWidget(self.seed, 0, 3)
        samp.addWidget(QLabel("sampling"), 1, 0)
        samp.addWidget(self.method, 1, 1)
        samp.addWidget(self.redraw, 1, 2, 1, 2)
        samp.addWidget(self.seed_problem, 2, 0, 1, 4)
        samp.addWidget(self.samples_problem, 3, 0, 1, 4)
        outer.addLayout(samp)
        self.samples.editingFinished.connect(self._emit_sampling)
        self.seed.editingFinished.connect(self._on_seed_edited)
        self.method.activated.connect(lambda _i: self._emit_sampling())
        self.redraw.clicked.connect(self._on_redraw)
        self.grid_host = QWidget()
        self.grid = QGridLayout(self.grid_host)
        self.grid.setContentsMargins(0, 0, 0, 0)
        self.grid.setVerticalSpacing(2)
        for col, head in enumerate(("part", "value", "grade", "tolerance", "")):
            h = QLabel(f"<b>{head}</b>")
            self.grid.addWidget(h, 0, col)
        scroll = QScrollArea()
        scroll.setWidgetResizable(True)
        scroll.setWidget(self.grid_host)
        outer.addWidget(scroll, 1)
        self.scroll = scroll
        self.group_labels: dict[str, QLabel] = {}  # network name -> its heading
        self._layout: list = []
        self.selected: str | None = None  # the part chosen in the circuit view
        self.chosen: list[str] = []  # parts chosen by clicks on their names (for a new network)

    def sizeHint(self):  # noqa: N802 - Qt override
        from PySide6.QtCore import QSize

        return QSize(520, 600)

    # --- model to view -------------------------------------------------------------------
    def show_design(self, design: Design) -> None:
        """Show ``design``'s parts (rebuilding rows only when the parts list changed)."""
        self._design = design
        layout = part_groups(design)
        if layout != self._layout:
            self._rebuild(layout)
        members = {m: net for net in design.networks for m in net.members}
        cat = design.catalog
        grades = design.part_grades()
        for p, g in zip(design.parts, grades):
            row = self.rows[p.ref]
            if not row.value.hasFocus() or not row.problem.isVisible():
                row.value.setText(p.value_text)
                row.value.setStyleSheet("")
                row.value.setToolTip(f"{format_value(p.value, PART_UNITS.get(p.kind, ''), 6)}")
                row.problem.hide()
            row.grade.blockSignals(True)
            row.grade.clear()
            for cg in cat.for_kind(p.kind):
                row.grade.addItem(f"{cg.name}  (±{cg.tolerance_pct:g} %)", cg.name)
            row.grade.setCurrentIndex(max(0, row.grade.findData(p.grade)))
            row.grade.setToolTip(cat[p.grade].technology)
            row.grade.blockSignals(False)
            net = members.get(p.ref)
            row.slider.setEnabled(net is None)  # a member's spread is its network's, not its grade's
            show_constraints(row.label, p)
            row.slider.setVisible(p.measured is None)  # measured values replace the grade's spread
            self._place_readout(row, wide=p.measured is not None)
            if p.measured is not None:
                show_measured(row.readout, p.measured)
            elif net is not None:
                row.slider.blockSignals(True)
                row.slider.setValue(pct_to_slider(net.tolerance_pct))
                row.slider.blockSignals(False)
                row.readout.setText(f"±{net.tolerance_pct:.3g} % {net.name}")
                row.readout.setToolTip(f"the tolerance of network {net.name}; its grade sets the temperature "
                                       "coefficient, drift and cost")
            elif self._dragging != p.ref:
                row.slider.blockSignals(True)
                row.slider.setValue(pct_to_slider(g.tolerance_pct))
                row.slider.blockSignals(False)
                self._set_readout(row, g.tolerance_pct, p.tolerance_pct is not None)
        a = design.analysis
        if a.samples != self.samples.value():
            self.samples.setStyleSheet("")
            self.samples_problem.hide()
        self.samples.blockSignals(True)
        self.samples.setValue(a.samples)
        self.samples.blockSignals(False)
        if not self.seed.hasFocus() or not self.seed_problem.isVisible():
            self.seed.setText(str(a.seed))
            self.seed.setStyleSheet("")
            self.seed_problem.hide()
        self.method.setCurrentIndex(max(0, self.method.findData(a.method)))

    def _rebuild(self, layout: list[tuple[str, str, tuple[str, ...]]]) -> None:
        """Rows for ``layout`` (:func:`part_groups`): each group's heading (if any) above its parts."""
        for row in self.rows.values():
            for w in (row.label, row.value, row.grade, row.slider, row.readout, row.problem):
                w.setParent(None)
                w.deleteLater()
        for w in self.group_labels.values():
            w.setParent(None)
            w.deleteLater()
        self.rows, self.group_labels, self._layout = {}, {}, layout
        r = 1
        for name, heading, refs in layout:
            if heading:
                head = QLabel(heading)
                head.setObjectName(f"group_{name}")
                head.setStyleSheet("QLabel { border-top: 1px solid #888; padding-top: 2px; }")
                if name != "channels":  # a network's heading: right-click for its menu (app/qt_network_menu.py)
                    head.setToolTip(f"right-click: edit or dissolve {name}, add the chosen parts")
                    head.setContextMenuPolicy(Qt.ContextMenuPolicy.CustomContextMenu)
                    head.customContextMenuRequested.connect(
                        lambda pos, name=name, head=head: self.network_menu_requested.emit(name, head.mapToGlobal(pos)))
                self.grid.addWidget(head, r, 0, 1, 5)
                self.group_labels[name] = head
                r += 1
            for ref in refs:
                r = self._add_row(ref, r)
        self.grid.setRowStretch(r, 1)
        self.chosen = [ref for ref in self.chosen if ref in self.rows]

    def _add_row(self, ref: str, r: int) -> int:
        """One part's widgets at grid row ``r`` (and its problem line below); the next free row."""
        row = PartRow(self, ref)
        self.grid.addWidget(row.label, r, 0)
        self.grid.addWidget(row.value, r, 1)
        self.grid.addWidget(row.grade, r, 2)
        self.grid.addWidget(row.slider, r, 3)
        self.grid.addWidget(row.readout, r, 4)
        self.grid.addWidget(row.problem, r + 1, 1, 1, 4)
        self.rows[ref] = row
        self._style_label(ref)
        return r + 2

    def _style_label(self, ref: str) -> None:
        """The part's name: on the highlight colour when chosen in the circuit view, on blue
        when chosen for a network, plain otherwise."""
        style = SELECTED_STYLE if ref == self.selected else CHOSEN_STYLE if ref in self.chosen else ""
        self.rows[ref].label.setStyleSheet(style)

    def choose(self, refs: list[str]) -> None:
        """Choose ``refs`` (parts on which a new network is made; [] clears the choice)."""
        self.chosen = [r for r in refs if r in self.rows]
        for ref in self.rows:
            self._style_label(ref)
        self.chosen_changed.emit(list(self.chosen))

    def eventFilter(self, obj, event) -> bool:  # noqa: N802 - Qt override
        """A left click on a part's name chooses that part alone (again: none); with Ctrl
        it adds the part to the choice or takes it out."""
        if event.type() == QEvent.Type.MouseButtonPress and event.button() == Qt.MouseButton.LeftButton:
            ref = next((r for r, row in self.rows.items() if row.label is obj), None)
            if ref is not None:
                if event.modifiers() & Qt.KeyboardModifier.ControlModifier:
                    self.choose([r for r in self.chosen if r != ref] + ([] if ref in self.chosen else [ref]))
                else:
                    self.choose([] if self.chosen == [ref] else [ref])
                return True
        return super().eventFilter(obj, event)

    def _place_readout(self, row: PartRow, wide: bool) -> None:
        """A measured part's readout takes the hidden slider's column too (its text is longer)."""
        r, c, _rows, _cols = self.grid.getItemPosition(self.grid.indexOf(row.readout))
        if (c == 3) != wide:
            self.grid.addWidget(row.readout, r, 3 if wide else 4, 1, 2 if wide else 1)

    def select_part(self, ref: str | None) -> None:
        """Mark part ``ref``'s row as chosen (its name on the highlight colour), scroll to it
        and put the cursor in its value field; None clears the mark."""
        self.selected = ref
        for r in self.rows:
            self._style_label(r)
        row = self.rows.get(ref) if ref else None
        if row is not None:
            self.scroll.ensureWidgetVisible(row.value)
            row.value.setFocus()

    def _set_readout(self, row: PartRow, pct: float, what_if: bool) -> None:
        row.readout.setText(f"±{pct:.3g} %" + (" *" if what_if else ""))
        row.readout.setToolTip("what-if tolerance (not the grade's); choose a grade to reset" if what_if
                               else "the grade's tolerance")

    # --- view to model -------------------------------------------------------------------
    def _on_value_edited(self, row: PartRow) -> None:
        if self._design is None:
            return
        part = self._design.parts[self._design.part_index(row.ref)]
        text = row.value.text().strip()
        if text == part.value_text:
            row.value.setStyleSheet("")
            row.problem.hide()
            return
        try:
            value, text = check_part_value(text, f"{row.ref} value")  # the loader's own rule
        except InputError as exc:
            self.mark_invalid(row.ref, exc.reason)
            return
        row.value.setStyleSheet("")
        row.problem.hide()
        self.value_committed.emit(row.ref, value, text)

    def mark_invalid(self, ref: str, reason: str) -> None:
        """Mark ``ref``'s value field and explain; the design is not changed."""
        row = self.rows[ref]
        row.value.setStyleSheet(INVALID_STYLE)
        row.value.setToolTip(reason)
        row.problem.setText(f"{reason}; still using {self._design.parts[self._design.part_index(ref)].value_text}"
                            if self._design else reason)
        row.problem.show()
        self.problem_shown.emit(f"{ref}: {reason}")

    def _on_grade_chosen(self, row: PartRow) -> None:
        name = row.grade.currentData()
        if name:
            self.grade_chosen.emit(row.ref, name)

    def _on_slider_moved(self, row: PartRow, pos: int) -> None:
        pct = slider_to_pct(pos)
        self._set_readout(row, pct, True)
        if row.slider.isSliderDown():
            self._dragging = row.ref
            self.tolerance_dragging.emit(row.ref, pct)
        else:  # keyboard, wheel or a click on the groove: one edit per step
            self.tolerance_released.emit(row.ref, pct)

    def _on_slider_released(self, row: PartRow) -> None:
        self._dragging = None
        self.tolerance_released.emit(row.ref, slider_to_pct(row.slider.value()))

    def seed_value(self) -> int:
        """The seed the design holds (the box's text may be an entry not yet accepted)."""
        return self._design.analysis.seed if self._design is not None else 1

    def _on_seed_edited(self) -> None:
        try:
            check_seed(self.seed.text(), "seed")
        except InputError as exc:
            self.mark_seed_invalid(exc.reason)
            return
        self.seed.setStyleSheet("")
        self.seed_problem.hide()
        self._emit_sampling()

    def mark_seed_invalid(self, reason: str) -> None:
        """Mark the seed box and explain; the design keeps its seed."""
        self.seed.setStyleSheet(INVALID_STYLE)
        self.seed_problem.setText(f"seed {reason}; still using {self.seed_value()}")
        self.seed_problem.show()
        self.problem_shown.emit(f"seed: {reason}")

    def mark_samples_invalid(self, reason: str) -> None:
        """Mark the boards box and explain (``reason``: one line); the design keeps its boards."""
        self.samples.setStyleSheet(INVALID_STYLE)
        self.samples_problem.setText(f"boards: {reason}; still using {self.samples.value():,}")
        self.samples_problem.show()
        self.problem_shown.emit(f"boards: {reason}")

    def _emit_sampling(self) -> None:
        self.samples.setStyleSheet("")
        self.samples_problem.hide()
        try:
            seed = check_seed(self.seed.text(), "seed")
        except InputError:
            seed = self.seed_value()  # a refused entry is marked; the design's seed stays
        self.sampling_changed.emit(self.samples.value(), seed, self.method.currentData())

    def _on_redraw(self) -> None:
        seed = self.seed_value()
        self.seed.setText(str(seed + 1 if seed < MAX_SEED else 0))
        self.seed.setStyleSheet("")
        self.seed_problem.hide()
        self._emit_sampling()
