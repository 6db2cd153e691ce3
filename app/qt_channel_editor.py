"""The Channels panel: how many identical channels a board carries and what they share.

As the design file holds it (:mod:`filters.channels`): ``channels.count`` (1 to
:data:`~filters.channels.MAX_CHANNELS`), the parts one physical part serves in every
channel (``channels.shared``), and for each resistor network whether one package serves
every channel (``across_channels``). Each change is one undoable edit through the window's
``apply_edit`` (the loader's rules); a refused one is marked red, its reason (naming the
field) shown under the panel, and the panel goes back to the design's last good state.
Match spans are added in the span table once the design has two channels or more.
"""
from __future__ import annotations

from dataclasses import replace
from typing import Callable

from PySide6.QtCore import Signal
from PySide6.QtWidgets import QCheckBox, QFormLayout, QGroupBox, QLabel, QSpinBox, QVBoxLayout, QWidget

from ..channels import MAX_CHANNELS, Channels
from ..design import Design
from ..values import format_value

from . import qt_style as st

INVALID_STYLE = "background: #fde2d6;"  # the parts panel's colour for a refused entry


class ChannelEditor(QWidget):
    """Edit ``design.channels`` and the networks' ``across_channels``; emits
    ``problem_shown`` with a refusal's one line."""

    problem_shown = Signal(str)

    def __init__(self, apply_edit: Callable[[Design, str], str | None]) -> None:
        super().__init__()
        self._apply = apply_edit
        self._design: Design | None = None
        self._loading = False
        self._marked: QWidget | None = None  # the box a refusal marked red, and its own tooltip
        self._marked_tip = ""
        lay = QVBoxLayout(self)
        form = QFormLayout()
        self.count = QSpinBox()
        self.count.setObjectName("channel_count")
        self.count.setRange(1, MAX_CHANNELS)
        self.count.setKeyboardTracking(False)  # one edit on Enter or an arrow, not one per digit
        self.count.setToolTip("identical channels on each board (same parts list); 1: no channels")
        form.addRow("channels on each board", self.count)
        lay.addLayout(form)
        self.parts_box = QGroupBox("one part serves every channel (shared)")
        self.parts_box.setObjectName("shared_parts")
        self.parts_layout = QVBoxLayout(self.parts_box)
        lay.addWidget(self.parts_box)
        self.networks_box = QGroupBox("one network package serves every channel")
        self.networks_box.setObjectName("shared_networks")
        self.networks_layout = QVBoxLayout(self.networks_box)
        lay.addWidget(self.networks_box)
        self.problem = st.problem_label("channel_problem")
        lay.addWidget(self.problem)
        hint = QLabel("Every other part is drawn on its own in each channel (parts of one reel share "
                      "the lot share). Match spans (gain, phase or group-delay difference between channels) "
                      "are added in the span table: Add match span.")
        hint.setWordWrap(True)
        hint.setStyleSheet("color: #555;")
        lay.addWidget(hint)
        lay.addStretch(1)
        self.shared: dict[str, QCheckBox] = {}
        self.across: dict[str, QCheckBox] = {}
        self.count.valueChanged.connect(lambda n: self._on_count(n))

    def show_design(self, design: Design) -> None:
        """Show ``design``'s channels (rebuilding the check boxes when parts or networks change)."""
        self._design = design
        if self._marked is not None:  # an earlier refusal's mark goes
            self._marked.setStyleSheet("")
            self._marked.setToolTip(self._marked_tip)
            self._marked = None
        self.problem.hide()
        self._loading = True
        self.count.setValue(design.channels.count)
        refs = [p.ref for p in design.parts]
        if list(self.shared) != refs:
            self.shared = self._boxes(self.parts_layout, self.shared, refs, "shared_")
        names = [n.name for n in design.networks]
        if list(self.across) != names:
            self.across = self._boxes(self.networks_layout, self.across, names, "across_")
        for p in design.parts:
            box = self.shared[p.ref]
            box.setText(f"{p.ref}  {format_value(p.value, digits=4)}  ({p.grade})")
            box.setChecked(p.ref in design.channels.shared)
        for n in design.networks:
            self.across[n.name].setText(f"{n.name}: {', '.join(n.members)}")
            self.across[n.name].setChecked(n.across_channels)
        self.networks_box.setVisible(bool(design.networks))
        several = design.channels.count > 1
        self.parts_box.setEnabled(several)
        self.networks_box.setEnabled(several)
        self._loading = False

    def _boxes(self, layout, old: dict[str, QCheckBox], names: list[str], prefix: str) -> dict[str, QCheckBox]:
        for box in old.values():
            layout.removeWidget(box)
            box.deleteLater()
        boxes = {}
        for name in names:
            box = QCheckBox(name)
            box.setObjectName(prefix + name)
            box.toggled.connect(lambda on, n=name, shared=prefix == "shared_": self._on_toggled(n, on, shared))
            layout.addWidget(box)
            boxes[name] = box
        return boxes

    def _edit(self, design: Design, text: str, widget: QWidget) -> None:
        reason = self._apply(design, text)  # applied: the session shows the new design (show_design)
        if reason is None:
            return
        self.show_design(self._design if self._design is not None else design)  # back to the last good state
        self._marked, self._marked_tip = widget, widget.toolTip()
        widget.setStyleSheet(INVALID_STYLE)
        widget.setToolTip(reason)
        self.problem.setText(f"{reason} (kept the previous value)")
        self.problem.show()
        self.problem_shown.emit(f"not applied ({text}): {reason}")

    def _on_count(self, n: int) -> None:
        d = self._design
        if self._loading or d is None or n == d.channels.count:
            return
        self._edit(replace(d, channels=Channels(n, d.channels.shared)), f"{n} channel{'s' if n > 1 else ''}",
                   self.count)

    def _on_toggled(self, name: str, on: bool, shared: bool) -> None:
        d = self._design
        if self._loading or d is None:
            return
        if shared:
            refs = [p.ref for p in d.parts if (p.ref == name and on) or (p.ref != name and p.ref in d.channels.shared)]
            text = f"{name} {'shared by every channel' if on else 'own part in each channel'}"
            self._edit(replace(d, channels=Channels(d.channels.count, tuple(refs))), text, self.shared[name])
        else:
            nets = tuple(replace(n, across_channels=on) if n.name == name else n for n in d.networks)
            text = f"{name} {'one package for every channel' if on else 'one package per channel'}"
            self._edit(replace(d, networks=nets), text, self.across[name])
