"""The mask's spans as the plots draw them: limit lines with end handles and a hatched
forbidden zone (gain and phase spans), boxes (delay-variation spans), and the view box in
which a left-drag draws a new span.

View coordinates on the x axis are log10(frequency / Hz): :func:`to_view_x` and
:func:`from_view_x` are the only conversion. A dragged span's frequencies are rounded to
4 significant figures and its limits to 4 decimals (what a person would type).
"""
from __future__ import annotations

import math
from dataclasses import replace
from typing import Literal

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QPolygonF
from PySide6.QtWidgets import QGraphicsPolygonItem, QGraphicsRectItem

from ..mask import Span

from . import qt_style as st
from .qt_units import eng

DrawKind = Literal["floor", "ceiling"]
FILL_REACH_DB = 6.0  # depth (dB) of the hatched forbidden zone drawn beside the limit line
FILL_REACH_DEG = 30.0  # the same on the phase plot (degrees)


def to_view_x(f_hz):
    """Frequency (Hz) to the plots' x coordinate, log10(f)."""
    return np.log10(f_hz)


def from_view_x(x):
    """The plots' x coordinate back to frequency (Hz)."""
    return np.power(10.0, x)


class MaskViewBox(pg.ViewBox):
    """A ViewBox that, in drawing mode, turns a left-drag into a new mask span."""

    span_drawn = Signal(str, float, float, float, float)  # kind, x0, x1, y0, y1 (view coords)

    def __init__(self) -> None:
        super().__init__()
        self.draw_kind: DrawKind | None = None
        self._rubber = QGraphicsRectItem()
        self._rubber.setPen(pg.mkPen(st.INK, width=1, style=Qt.PenStyle.DashLine))
        self._rubber.setBrush(pg.mkBrush(st.rgba(st.ORANGE, 40)))
        self._rubber.setZValue(50)
        self._rubber.hide()
        self.addItem(self._rubber, ignoreBounds=True)

    def mouseDragEvent(self, ev, axis=None):  # noqa: N802 - Qt override
        if self.draw_kind is None or ev.button() != Qt.MouseButton.LeftButton or axis is not None:
            super().mouseDragEvent(ev, axis)
            return
        ev.accept()
        a = self.mapSceneToView(ev.buttonDownScenePos())
        b = self.mapSceneToView(ev.scenePos())
        rect = QRectF(QPointF(a.x(), a.y()), QPointF(b.x(), b.y())).normalized()
        self._rubber.setRect(rect)
        self._rubber.show()
        if ev.isFinish():
            self._rubber.hide()
            self.span_drawn.emit(self.draw_kind, a.x(), b.x(), a.y(), b.y())


class _Freezable:
    """Mouse handling of a span's line or handle that can be switched off: while ``frozen``
    (a drawing mode is on) it takes no hover, click or drag, so a drag that starts on it
    reaches the view box and draws a new span instead of moving this one."""

    frozen = False

    def hoverEvent(self, ev):  # noqa: N802 - pyqtgraph override
        if not self.frozen:
            super().hoverEvent(ev)

    def mouseDragEvent(self, ev):  # noqa: N802 - pyqtgraph override
        if self.frozen:
            ev.ignore()
        else:
            super().mouseDragEvent(ev)

    def mouseClickEvent(self, ev):  # noqa: N802 - pyqtgraph override
        if self.frozen:
            ev.ignore()
        else:
            super().mouseClickEvent(ev)


class _SpanHandle(_Freezable, pg.graphicsItems.ROI.Handle):
    """An end handle of a span's limit line, filled (``brush``) when its span is selected."""

    def __init__(self, colour: str) -> None:
        super().__init__(st.HANDLE_RADIUS, typ="f", pen=pg.mkPen(colour, width=1.5),
                         hoverPen=pg.mkPen(st.SELECTED_COLOUR, width=2))
        self.brush = None

    def paint(self, p, opt, widget):
        if self.brush is not None:
            p.setBrush(self.brush)
        super().paint(p, opt, widget)


class _SpanLine(_Freezable, pg.LineSegmentROI):
    """A span's limit line between two :class:`_SpanHandle` ends."""

    def __init__(self, points, colour: str) -> None:
        super().__init__(points, pen=pg.mkPen(colour, width=st.SPAN_WIDTH),
                         hoverPen=pg.mkPen(colour, width=st.SELECTED_WIDTH),
                         handles=(_SpanHandle(colour), _SpanHandle(colour)))
        for h in self.getHandles():
            h.setParentItem(self)  # handles passed in are not parented by pyqtgraph

    def set_frozen(self, on: bool) -> None:
        self.frozen = on
        for h in self.getHandles():
            h.frozen = on
        if on:
            self.setMouseHover(False)


class SpanItem:
    """One gain or phase span on its plot: a limit line with end handles and a forbidden
    fill. ``reach`` is the depth of the fill in the plot's unit (dB or degrees)."""

    def __init__(self, plot: pg.PlotItem, index: int, span: Span, reference_db: float,
                 on_changing, on_finished, on_clicked, reach: float = FILL_REACH_DB) -> None:
        self.plot = plot
        self.index = index
        self.span = span
        self.reference_db = reference_db
        self.reach = reach
        colour = st.FLOOR_COLOUR if span.kind == "floor" else st.CEILING_COLOUR
        self.colour = colour
        off = reference_db if span.relative and span.quantity == "gain" else 0.0
        self._offset = off
        p1 = (float(to_view_x(span.f1)), span.limit1 + off)
        p2 = (float(to_view_x(span.f2)), span.end_limit + off)
        self.roi = _SpanLine([p1, p2], colour)
        self.roi.setZValue(40)
        self.roi.setAcceptedMouseButtons(Qt.MouseButton.LeftButton)
        self.fill = QGraphicsPolygonItem()
        self.fill.setPen(pg.mkPen(None))
        brush = pg.mkBrush(st.rgba(colour, 150))
        brush.setStyle(Qt.BrushStyle.BDiagPattern)  # hatched: "the response must not enter here"
        self.fill.setBrush(brush)
        self.tint = QGraphicsPolygonItem()
        self.tint.setPen(pg.mkPen(None))
        self.tint.setBrush(pg.mkBrush(st.rgba(colour, st.FORBIDDEN_ALPHA)))
        self.tint.setZValue(4)
        plot.addItem(self.tint, ignoreBounds=True)
        self.fill.setZValue(5)
        self.edge = pg.PlotCurveItem(pen=pg.mkPen(colour, width=1, style=st.DASH))
        self.edge.setZValue(6)
        plot.addItem(self.fill, ignoreBounds=True)
        plot.addItem(self.edge, ignoreBounds=True)
        plot.addItem(self.roi, ignoreBounds=True)
        self.roi.sigRegionChanged.connect(lambda *_: (self._refill(), on_changing(self)))
        self.roi.sigRegionChangeFinished.connect(lambda *_: on_finished(self))
        self.roi.sigClicked.connect(lambda *_: on_clicked(self))
        self.selected = False
        self._refill()

    def points(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """The two ends in view coordinates (log10 f, dB or deg), left end first."""
        pts = [self.roi.mapToParent(h.pos()) for h in self.roi.getHandles()]
        (x1, y1), (x2, y2) = [(p.x(), p.y()) for p in pts]
        return ((x1, y1), (x2, y2)) if x1 <= x2 else ((x2, y2), (x1, y1))

    def current_span(self) -> Span | None:
        """The span as the handles now place it; None if it has collapsed to a point."""
        (x1, y1), (x2, y2) = self.points()
        f1, f2 = float(from_view_x(x1)), float(from_view_x(x2))
        if not f2 > f1 * (1 + 1e-9):
            return None
        l1, l2 = round(y1 - self._offset, 4), round(y2 - self._offset, 4)
        return replace(self.span, f1=round_frequency(f1), f2=round_frequency(f2), limit1=l1,
                       limit2=None if l1 == l2 else l2)

    def _refill(self) -> None:
        (x1, y1), (x2, y2) = self.points()
        reach = self.reach if self.span.kind == "ceiling" else -self.reach
        poly = QPolygonF([QPointF(x1, y1), QPointF(x2, y2), QPointF(x2, y2 + reach), QPointF(x1, y1 + reach)])
        self.fill.setPolygon(poly)
        self.tint.setPolygon(poly)
        self.edge.setData([x1, x1, float("nan"), x2, x2], [y1, y1 + reach, float("nan"), y2, y2 + reach],
                          connect="finite")

    def set_selected(self, on: bool) -> None:
        """The selected span: a thicker line in the selection colour and filled handles."""
        self.selected = on
        pen = (pg.mkPen(st.SELECTED_COLOUR, width=st.SELECTED_WIDTH) if on
               else pg.mkPen(self.colour, width=st.SPAN_WIDTH))
        self.roi.setPen(pen)
        for h in self.roi.getHandles():
            h.pen = pg.mkPen(st.SELECTED_COLOUR if on else self.colour, width=2 if on else 1.5)
            h.currentPen = h.pen
            h.brush = pg.mkBrush(st.SELECTED_COLOUR) if on else None
            h.update()

    def set_frozen(self, on: bool) -> None:
        self.roi.set_frozen(on)

    def remove(self) -> None:
        for item in (self.roi, self.fill, self.tint, self.edge):
            self.plot.removeItem(item)


class _ClickableRect(QGraphicsRectItem):
    """A rectangle the plot's scene reports clicks on (pyqtgraph calls ``mouseClickEvent``)."""

    def __init__(self, on_clicked) -> None:
        super().__init__()
        self._on_clicked = on_clicked
        self.frozen = False

    def mouseClickEvent(self, ev):  # noqa: N802 - pyqtgraph override
        if self.frozen or ev.button() != Qt.MouseButton.LeftButton:
            ev.ignore()
            return
        ev.accept()
        self._on_clicked()


class DelaySpanItem:
    """A delay-variation span on the group-delay plot: a box ``limit1`` seconds tall over
    f1..f2, centred on the nominal delay's middle in that band (any board's delay must fit
    in a box this tall, wherever it sits), labelled with its limit. Edited in the span table."""

    def __init__(self, plot: pg.PlotItem, index: int, span: Span, freqs_hz: np.ndarray,
                 nominal_delay_s: np.ndarray, on_clicked) -> None:
        self.plot = plot
        self.index = index
        self.span = span
        self.colour = st.DELAY_COLOUR
        inside = (freqs_hz >= span.f1 * (1 - 1e-9)) & (freqs_hz <= span.f2 * (1 + 1e-9))
        band = nominal_delay_s[inside] if inside.any() else nominal_delay_s
        centre = 0.5 * (float(np.nanmax(band)) + float(np.nanmin(band)))
        x1, x2 = float(to_view_x(span.f1)), float(to_view_x(span.f2))
        self.rect = QRectF(QPointF(x1, centre - span.limit1 / 2), QPointF(x2, centre + span.limit1 / 2)).normalized()
        self.box = _ClickableRect(lambda: on_clicked(self))
        self.box.setRect(self.rect)
        self.box.setBrush(pg.mkBrush(st.rgba(self.colour, st.FORBIDDEN_ALPHA)))
        self.box.setZValue(40)
        self.label = pg.TextItem(f"{span.label}: variation ≤ {eng(span.limit1, 's')}", color=self.colour,
                                 anchor=(0, 1))
        self.label.setPos(x1, self.rect.bottom())
        self.label.setZValue(41)
        plot.addItem(self.box, ignoreBounds=True)
        plot.addItem(self.label, ignoreBounds=True)
        self.selected = False
        self.set_selected(False)

    def points(self) -> tuple[tuple[float, float], tuple[float, float]]:
        """Lower-left and upper-right corners in view coordinates (log10 f, s)."""
        r = self.rect
        return (r.left(), r.top()), (r.right(), r.bottom())

    def set_selected(self, on: bool) -> None:
        self.selected = on
        self.box.setPen(pg.mkPen(st.SELECTED_COLOUR if on else self.colour,
                                 width=st.SELECTED_WIDTH if on else st.SPAN_WIDTH, style=st.DASH))

    def set_frozen(self, on: bool) -> None:
        self.box.frozen = on

    def remove(self) -> None:
        for item in (self.box, self.label):
            self.plot.removeItem(item)


def round_frequency(f: float) -> float:
    """Round a dragged frequency to 4 significant figures (what a person would type)."""
    if f <= 0:
        return f
    digits = 3 - int(math.floor(math.log10(f)))
    return float(round(f, digits))
