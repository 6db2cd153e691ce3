"""The circuit view: the schematic of one stage (``filters/schematic.py``), drawn as SVG by
Qt's own renderer (``QSvgRenderer``), with a chooser for the stage.

A click on a part's symbol or label emits :attr:`CircuitView.part_clicked` with its
reference designator (the click is mapped to the boxes the drawing recorded for each
part); the window then selects the part in the parts panel and highlights it in the
spread budget. The selected part is drawn in the highlight colour.
"""
from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import QByteArray, QPointF, QRectF, QSize, Qt, QTimer, Signal
from PySide6.QtGui import QPainter
from PySide6.QtSvg import QSvgRenderer
from PySide6.QtWidgets import QComboBox, QHBoxLayout, QLabel, QScrollArea, QSizePolicy, QVBoxLayout, QWidget

from ..design import Design
from ..schematic import Schematic, stage_schematic
from . import qt_style as st

MAX_ZOOM = 1.5   # never draw the schematic larger than 1.5 x its natural size (points -> px)
MIN_ZOOM = 0.75  # nor smaller than 0.75 x (9 px text): a larger circuit scrolls instead
VIEW_HEIGHT = 300  # the drawing's area is at least this tall (px): a Sallen-Key stage whole


class SchematicCanvas(QWidget):
    """Paints one :class:`~filters.schematic.Schematic`, kept in proportion and centred;
    maps clicks to parts."""

    part_clicked = Signal(str)

    def __init__(self) -> None:
        super().__init__()
        self.setObjectName("schematic_canvas")
        self.schematic: Schematic | None = None
        self._renderer = QSvgRenderer(self)
        self.setMouseTracking(True)
        self.setMinimumSize(220, 140)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Expanding)

    def set_schematic(self, schematic: Schematic | None) -> None:
        self.schematic = schematic
        self._renderer.load(QByteArray(schematic.svg.encode("utf-8")) if schematic else QByteArray())
        if schematic is not None:  # never smaller than MIN_ZOOM: the scroll area scrolls
            self.setMinimumSize(int(schematic.width_pt * MIN_ZOOM), int(schematic.height_pt * MIN_ZOOM))
        self.updateGeometry()
        self.update()

    def sizeHint(self) -> QSize:  # noqa: N802 - Qt override
        if self.schematic is None:
            return QSize(420, 300)
        return QSize(int(self.schematic.width_pt), int(self.schematic.height_pt))

    def picture_rect(self) -> QRectF:
        """Where the drawing sits in the widget (pixels): in proportion, centred."""
        if self.schematic is None:
            return QRectF()
        w, h = self.schematic.width_pt, self.schematic.height_pt
        k = min(self.width() / w, self.height() / h, MAX_ZOOM)
        return QRectF((self.width() - k * w) / 2, (self.height() - k * h) / 2, k * w, k * h)

    def part_at(self, pos: QPointF) -> str | None:
        """The part drawn at widget position ``pos`` (pixels), or None."""
        r = self.picture_rect()
        if self.schematic is None or r.isEmpty():
            return None
        return self.schematic.part_at((pos.x() - r.x()) / r.width(), (pos.y() - r.y()) / r.height())

    def part_centre(self, ref: str) -> QPointF:
        """The widget position (pixels) of the middle of part ``ref``'s box."""
        r = self.picture_rect()
        h = next(h for h in self.schematic.hotspots if h.ref == ref)
        return QPointF(r.x() + r.width() * (h.x0 + h.x1) / 2, r.y() + r.height() * (h.y0 + h.y1) / 2)

    def paintEvent(self, _event) -> None:  # noqa: N802 - Qt override
        p = QPainter(self)
        p.fillRect(self.rect(), Qt.GlobalColor.white)
        if self.schematic is not None and self._renderer.isValid():
            self._renderer.render(p, self.picture_rect())
        p.end()

    def mouseMoveEvent(self, event) -> None:  # noqa: N802 - Qt override
        ref = self.part_at(event.position())
        self.setCursor(Qt.CursorShape.PointingHandCursor if ref else Qt.CursorShape.ArrowCursor)
        self.setToolTip(f"{ref}: click to select it in the parts and the spread budget" if ref else "")

    def mousePressEvent(self, event) -> None:  # noqa: N802 - Qt override
        if event.button() == Qt.MouseButton.LeftButton:
            ref = self.part_at(event.position())
            if ref:
                self.part_clicked.emit(ref)


class CircuitView(QWidget):
    """A stage chooser, the stage's title and its schematic."""

    part_clicked = Signal(str)

    def __init__(self) -> None:
        super().__init__()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        row = QHBoxLayout()
        row.addWidget(QLabel("stage"))
        self.stage_box = QComboBox()
        self.stage_box.setObjectName("schematic_stage")
        # a long stage name never widens the dock (the parts panel sets its width)
        self.stage_box.setSizeAdjustPolicy(QComboBox.SizeAdjustPolicy.AdjustToMinimumContentsLengthWithIcon)
        self.stage_box.setMinimumContentsLength(16)
        row.addWidget(self.stage_box, 1)
        lay.addLayout(row)
        self.title = QLabel()
        self.title.setObjectName("schematic_title")
        self.title.setWordWrap(True)
        lay.addWidget(self.title)
        self.canvas = SchematicCanvas()
        self.scroll = QScrollArea()
        self.scroll.setObjectName("schematic_scroll")
        self.scroll.setWidgetResizable(True)
        self.scroll.setWidget(self.canvas)
        self.scroll.setMinimumHeight(VIEW_HEIGHT)
        lay.addWidget(self.scroll, 1)
        self.problem = st.problem_label("schematic_problem")
        lay.addWidget(self.problem)
        self.design: Design | None = None
        self.selected: str | None = None
        self._shown_key: tuple | None = None
        self.stage_box.currentIndexChanged.connect(lambda _i: self._draw())
        self.canvas.part_clicked.connect(self._on_part_clicked)

    @property
    def stage_index(self) -> int:
        return max(0, self.stage_box.currentIndex())

    def show_design(self, design: Design) -> None:
        """Show ``design``: the same stage as before where it still exists."""
        self.design = design
        names = [f"{i + 1}: {s.name or s.topology}" for i, s in enumerate(design.stages)]
        if names != [self.stage_box.itemText(i) for i in range(self.stage_box.count())]:
            keep = self.stage_index
            self.stage_box.blockSignals(True)
            self.stage_box.clear()
            self.stage_box.addItems(names)
            self.stage_box.setCurrentIndex(min(keep, len(names) - 1))
            self.stage_box.blockSignals(False)
        self._draw()

    def show_stage(self, index: int) -> None:
        self.stage_box.setCurrentIndex(index)

    def select_part(self, ref: str | None) -> None:
        """Draw part ``ref`` in the highlight colour, showing the stage that holds it."""
        self.selected = ref
        if self.design is not None and ref is not None:
            holding = [i for i, s in enumerate(self.design.stages) if ref in s.roles.values()]
            if holding and self.stage_index not in holding:
                self.stage_box.setCurrentIndex(holding[0])  # redraws
                return
        self._draw()

    def _draw(self) -> None:
        d = self.design
        if d is None or not d.stages:
            self.canvas.set_schematic(None)
            self.title.setText("no stages")
            return
        i = min(self.stage_index, len(d.stages) - 1)
        stage = d.stages[i]
        # the drawing names each part's value and grade, not a tolerance set on the part:
        # releasing a tolerance slider does not draw the stage again
        used = tuple(replace(p, tolerance_pct=None) for p in d.parts if p.ref in stage.roles.values())
        key = (i, stage, used, self.selected)
        if key == self._shown_key:
            return
        try:
            sch = stage_schematic(d, i, highlight=self.selected)
        except Exception as exc:  # noqa: BLE001 - a drawing problem never stops the window
            self.canvas.set_schematic(None)
            self.problem.setText(f"stage {i + 1} cannot be drawn: {exc}")
            self.problem.show()
            self._shown_key = None
            return
        self.problem.hide()
        self._shown_key = key
        self.title.setText(sch.title)
        self.canvas.set_schematic(sch)
        if self.selected in sch.refs():  # a large circuit scrolls to the chosen part
            QTimer.singleShot(0, self._scroll_to_selected)

    def _scroll_to_selected(self) -> None:
        sch = self.canvas.schematic
        if sch is not None and self.selected in sch.refs():
            p = self.canvas.part_centre(self.selected)
            self.scroll.ensureVisible(int(p.x()), int(p.y()), 80, 60)

    def _on_part_clicked(self, ref: str) -> None:
        self.select_part(ref)
        self.part_clicked.emit(ref)
