"""The spread plots: magnitude (dB) and phase or group delay over log frequency.

Both plots share the frequency axis. Each shows the nominal response, the central 98 %
of boards and the full range as bands, and a handful of sample traces drawn as one item
each (NaN-separated). On the magnitude plot the user draws the spec mask: in a drawing
mode a left-drag always paints the forbidden zone of a new floor or ceiling span (existing
spans take no mouse input then). Outside a drawing mode each span's limit line has two end
handles (drag to move an end, drag the line to move it whole); a click selects a span (drawn
thicker, in the selection colour, with filled handles) and the Delete key removes it. Phase
spans are drawn the same way on the phase plot; delay-variation spans as boxes on the
group-delay plot. No axis is SI-scaled automatically: dB and degrees stay as they are, the
delay axis gets one prefix chosen from the nominal delay (µs for a few hundred µs).

View coordinates on the x axis are log10(frequency / Hz) (:mod:`app.qt_maskitems`'s
:func:`to_view_x` and :func:`from_view_x`, the only conversion); the spans' items live there too.
"""
from __future__ import annotations

import math

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtGui import QPainterPath, QPen
from PySide6.QtWidgets import QGraphicsPathItem, QLabel, QSizePolicy, QVBoxLayout, QWidget

from ..liveview import ViewData
from ..mask import Span
from ..metric_names import unique_span_name
from ..values import format_value

from . import qt_style as st
from .qt_maskitems import (FILL_REACH_DEG, DelaySpanItem, DrawKind, MaskViewBox, SpanItem, from_view_x,
                           round_frequency, to_view_x)
from .qt_units import eng, prefix_for

class _FrequencyAxis(pg.AxisItem):
    """x axis in log10(f) coordinates, labelled in Hz with SI prefixes."""

    def tickStrings(self, values, scale, spacing):  # noqa: N802 - pyqtgraph override
        return [format_value(10 ** v, digits=3) if abs(v - round(v)) < 1e-6 or spacing < 1 else ""
                for v in values]

    def tickValues(self, minVal, maxVal, size):  # noqa: N802,N803 - pyqtgraph override
        lo, hi = math.floor(minVal), math.ceil(maxVal)
        decades = [float(v) for v in range(lo, hi + 1) if minVal <= v <= maxVal]
        minor = [math.log10(m) + d for d in range(lo - 1, hi + 1) for m in (2, 3, 5)
                 if minVal <= math.log10(m) + d <= maxVal]
        if hi - lo > 6:
            return [(1.0, decades)]
        return [(1.0, decades), (0.1, minor)]


class SpreadPlots(QWidget):
    """Magnitude and phase/delay plots with bands, traces, the mask and a cursor readout."""

    span_added = Signal(object)          # Span
    span_edited = Signal(int, object)    # index, Span
    span_changing = Signal(int, object)  # index, Span (while dragging)
    span_selected = Signal(int)          # index or -1
    delete_requested = Signal(int)

    def __init__(self) -> None:
        super().__init__()
        pg.setConfigOptions(antialias=False, background="w", foreground=st.INK)  # fills and traces: speed
        self.canvas = pg.GraphicsLayoutWidget()
        self.canvas.setObjectName("spread_plots")
        self.vb_mag = MaskViewBox()
        self.mag = self.canvas.addPlot(row=0, col=0, viewBox=self.vb_mag,
                                       axisItems={"bottom": _FrequencyAxis("bottom")})
        self.second = self.canvas.addPlot(row=1, col=0, axisItems={"bottom": _FrequencyAxis("bottom")})
        self.second.setXLink(self.mag)
        self.canvas.ci.layout.setRowStretchFactor(0, 3)
        self.canvas.ci.layout.setRowStretchFactor(1, 2)
        for p in (self.mag, self.second):
            p.setMenuEnabled(False)
        # Our own grid, one light line item per plot: the axes' built-in grid costs about
        # ten times the rest of a repaint here, which would slow the live slider.
        self._grids = {}
        for name, plot in (("mag", self.mag), ("second", self.second)):
            g = pg.PlotCurveItem(pen=pg.mkPen(st.GRID_COLOUR, width=1), connect="pairs")
            g.setZValue(-10)
            plot.addItem(g, ignoreBounds=True)
            self._grids[name] = g
        # Every axis is labelled with its unit in the text and no automatic SI scaling:
        # pyqtgraph would otherwise write "gain (mdB)" or "frequency (Hz) (x0.001)" (the x
        # axis is log10 f). The delay axis gets a fixed prefix of our own (show_view).
        for plot in (self.mag, self.second):
            for side in ("left", "bottom"):
                plot.getAxis(side).enableAutoSIPrefix(False)
            steady_width(plot.getAxis("left"))
        self.mag.setLabel("left", "gain (dB)")
        self.mag.setLabel("bottom", "frequency (Hz)")
        self.second.setLabel("bottom", "frequency (Hz)")
        self.second.setLabel("left", "phase (deg)")
        self.legend = self.mag.addLegend(offset=(10, -10), labelTextSize="8pt")
        self._items: dict[str, dict[str, pg.GraphicsObject]] = {}
        for name, plot in (("mag", self.mag), ("second", self.second)):
            # each band is one filled polygon built from its two edges in one go (two curves
            # and a fill between them would rebuild the fill once per edge)
            outer, inner = _band_item(st.OUTER_BRUSH), _band_item(st.INNER_BRUSH)
            # the sample traces (thousands of points) are plain Qt path items: Qt paints them
            # without calling into Python, so the evaluation threads keep the GIL meanwhile
            passing, failing = _trace_item(st.PASS_TRACE_PEN), _trace_item(st.FAIL_TRACE_PEN)
            nominal = pg.PlotDataItem(pen=pg.mkPen(**st.NOMINAL_PEN), antialias=True)
            # every range is set by this widget (fit, _frame_second): no automatic ranging,
            # which would move an axis, and paint the plot a second time, after every result
            for it in (outer, inner, passing, failing, nominal):
                plot.addItem(it, ignoreBounds=True)
            plot.disableAutoRange()
            outer.setZValue(1)
            inner.setZValue(2)
            passing.setZValue(3)
            failing.setZValue(4)
            nominal.setZValue(10)
            self._items[name] = dict(outer=outer, inner=inner, passing=passing, failing=failing, nominal=nominal)
        it = self._items["mag"]
        self.legend.addItem(it["nominal"], "nominal")
        # the legend cannot draw a fill item; thick lines in the band colours stand in
        self._legend_proxies = [pg.PlotDataItem([], [], pen=pg.mkPen(st.INNER_BRUSH, width=9)),
                                pg.PlotDataItem([], [], pen=pg.mkPen(st.OUTER_BRUSH, width=9))]
        self.legend.addItem(self._legend_proxies[0], "central 98 % of boards")
        self.legend.addItem(self._legend_proxies[1], "all boards")
        self._legend_proxies += [pg.PlotDataItem([], [], pen=pg.mkPen(**st.PASS_TRACE_PEN)),
                                 pg.PlotDataItem([], [], pen=pg.mkPen(**st.FAIL_TRACE_PEN))]
        self.legend.addItem(self._legend_proxies[2], "sample boards")
        self.legend.addItem(self._legend_proxies[3], "failing boards")
        self.readout = QLabel(" ")
        self.readout.setObjectName("cursor_readout")
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        # two lines, wrapped, of a fixed height: a long readout must neither widen the window
        # nor move the plots while the mouse moves over them
        self.readout.setWordWrap(True)
        self.readout.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)
        self.readout.setFixedHeight(2 * self.readout.fontMetrics().lineSpacing() + 4)
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        lay.addWidget(self.canvas, 1)
        lay.addWidget(self.readout)
        self.vb_mag.span_drawn.connect(self._on_span_drawn)
        self.canvas.scene().sigMouseMoved.connect(self._on_mouse_moved)
        self.spans: list[SpanItem | DelaySpanItem] = []
        self._mask_key: tuple | None = None
        self.selected = -1
        self.delay_prefix: tuple[str, float] = ("", 1.0)  # the delay axis' SI prefix and its factor
        self.view: ViewData | None = None
        self.show_failing = True
        self._ranged = False
        self._reference_db = 0.0
        self._nominal_shown: dict[str, tuple[np.ndarray, np.ndarray]] = {}  # plot -> (x, y) drawn

    # --- data ----------------------------------------------------------------------------
    def show_view(self, view: ViewData) -> None:
        """Draw one evaluation's curves and bands."""
        if self.view is not None and self.view.second != view.second:
            self.clear_readout()  # the readout spoke of the other quantity
        self.view = view
        x = to_view_x(view.freqs_hz)
        for name, nominal, b, tp, tf in (
                ("mag", view.nominal_gain_db, view.gain_bands, view.pass_traces_gain, view.fail_traces_gain),
                ("second", view.nominal_second, view.second_bands, view.pass_traces_second,
                 view.fail_traces_second)):
            it = self._items[name]
            if not _same(self._nominal_shown.get(name), (x, nominal)):  # a drag leaves the nominal as it is
                it["nominal"].setData(x, nominal)
                self._nominal_shown[name] = (x, nominal)
            it["outer"].setPath(_band_path(x, b.low, b.high))
            it["inner"].setPath(_band_path(x, b.inner_low, b.inner_high))
            it["passing"].setPath(_trace_path(x, tp))
            it["failing"].setPath(_trace_path(x, tf) if self.show_failing else QPainterPath())
        axis = self.second.getAxis("left")
        if view.second == "delay":
            finite = np.abs(view.nominal_second[np.isfinite(view.nominal_second)])
            self.delay_prefix = prefix_for(float(np.max(finite)) if finite.size else 0.0)
            prefix, factor = self.delay_prefix
            axis.setScale(1.0 / factor)
            set_axis_label(axis, f"group delay ({prefix}s)")
        else:
            axis.setScale(1.0)
            set_axis_label(axis, "phase (deg)")
        self._reference_db = view.nominal_metrics.get("reference_db", 0.0)
        self._draw_grids(view)
        self.set_mask(view.design.mask, self._reference_db)
        if not self._ranged:
            self.fit()
            self._ranged = True
        else:
            self._frame_second(refit=False)

    def _frame_second(self, refit: bool) -> None:
        """Frame the second plot's y axis on the bands and the nominal curve (see
        :func:`hold_range`: while a slider is dragged the axis stays put)."""
        v = self.view
        if v is None:
            return
        b = v.second_bands
        vals = np.concatenate([b.low, b.high, v.nominal_second])
        vals = vals[np.isfinite(vals)]
        if vals.size:
            hold_range(self.second.vb, 1, float(vals.min()), float(vals.max()), 0.05, refit)

    def _draw_grids(self, view: ViewData) -> None:
        """Vertical lines at 1-2-3-5 per decade, horizontal lines every 10 dB (gain) and
        every 45 deg (phase) or at round delays, across the analysed range."""
        lo, hi = float(np.nanmin(view.second_bands.low)), float(np.nanmax(view.second_bands.high))
        if view.second == "delay":
            span = max(hi - lo, 1e-12)
            step = 10 ** math.floor(math.log10(span / 2))
            second = (math.floor((lo - span) / step) * step, math.ceil((hi + span) / step) * step, step)
        else:
            second = (min(math.floor(lo / 45.0) * 45.0, -360.0) - 90, max(math.ceil(hi / 45.0) * 45.0, 0.0) + 90, 45.0)
        # the lines are drawn again only when they change (not on every result of a drag)
        key = (float(view.freqs_hz[0]), float(view.freqs_hz[-1]), view.second, second)
        if getattr(self, "_grid_key", None) == key:
            return
        self._grid_key = key
        x0, x1 = float(to_view_x(view.freqs_hz[0])), float(to_view_x(view.freqs_hz[-1]))
        xs = [d + math.log10(m) for d in range(math.floor(x0) - 1, math.ceil(x1) + 1) for m in (1, 2, 3, 5)]
        xs = [x for x in xs if x0 - 1e-9 <= x <= x1 + 1e-9]

        def lines(ylo: float, yhi: float, step: float) -> tuple[np.ndarray, np.ndarray]:
            ys = np.arange(math.floor(ylo / step) * step, yhi + step, step)
            vx = np.repeat(xs, 2)
            vy = np.tile([ylo, yhi], len(xs))
            hx = np.tile([x0, x1], len(ys))
            hy = np.repeat(ys, 2)
            return np.concatenate([vx, hx]), np.concatenate([vy, hy])

        self._grids["mag"].setData(*lines(-600.0, 200.0, 10.0))
        self._grids["second"].setData(*lines(*second))

    def fit(self) -> None:
        """Frame the nominal response: the whole frequency range, a sensible dB window."""
        if self.view is None:
            return
        x = to_view_x(self.view.freqs_hz)
        top = float(np.max(self.view.gain_bands.high))
        self.mag.setXRange(float(x[0]), float(x[-1]), padding=0)
        self.mag.setYRange(max(top - 80.0, float(np.min(self.view.gain_bands.low))), top + 5.0, padding=0.02)
        self._frame_second(refit=True)

    def set_mask(self, mask: tuple[Span, ...], reference_db: float) -> None:
        """Rebuild the span items (after an edit, undo or load): gain spans on the gain
        plot, phase spans on the phase plot and delay-variation spans on the group-delay
        plot (whichever the second plot shows)."""
        second = self.view.second if self.view is not None else "phase"
        delay = self.view.nominal_second if self.view is not None and second == "delay" else None
        key = (tuple(mask), reference_db, second, None if delay is None else id(self.view))
        if key == self._mask_key:
            return
        self._mask_key = key
        for s in self.spans:
            s.remove()
        self.spans = []
        for i, span in enumerate(mask):
            if span.kind == "match":  # a difference between channels: no line on one curve (the table lists it)
                continue
            if span.quantity == "gain":
                self.spans.append(SpanItem(self.mag, i, span, reference_db, self._on_span_changing,
                                           self._on_span_finished, self._on_span_clicked))
            elif span.quantity == "phase" and second == "phase":
                self.spans.append(SpanItem(self.second, i, span, 0.0, self._on_span_changing,
                                           self._on_span_finished, self._on_span_clicked, FILL_REACH_DEG))
            elif span.quantity == "delay" and delay is not None:
                self.spans.append(DelaySpanItem(self.second, i, span, self.view.freqs_hz, delay,
                                                self._on_span_clicked))
        if self.selected >= len(mask):
            self.selected = -1
        self._mark_selected()
        self._freeze_spans()

    def redraw_mask(self, mask: tuple[Span, ...]) -> None:
        """Draw ``mask`` again even if it did not change (a dragged span whose edit was
        refused goes back to where the design has it)."""
        self._mask_key = None
        self.set_mask(mask, self._reference_db)

    def item_for(self, index: int) -> SpanItem | DelaySpanItem | None:
        """The drawn item of mask span ``index`` (None if its plot is not shown)."""
        return next((s for s in self.spans if s.index == index), None)

    def set_draw_kind(self, kind: DrawKind | None) -> None:
        """Turn a drawing mode on ("floor", "ceiling") or off (None). While it is on, a drag
        on the gain plot always draws a new span: existing spans take no mouse input."""
        self.vb_mag.draw_kind = kind
        self.canvas.setCursor(Qt.CursorShape.CrossCursor if kind else Qt.CursorShape.ArrowCursor)
        self._freeze_spans()

    def _freeze_spans(self) -> None:
        for s in self.spans:
            s.set_frozen(self.vb_mag.draw_kind is not None)

    def clear_readout(self) -> None:
        """Empty the cursor readout (after Open, or when the second plot changes quantity)."""
        self.readout.setText(" ")

    def select(self, index: int) -> None:
        self.selected = index
        self._mark_selected()
        self.span_selected.emit(index)

    def _mark_selected(self) -> None:
        for s in self.spans:
            s.set_selected(s.index == self.selected)

    # --- mouse ---------------------------------------------------------------------------
    def _on_span_drawn(self, kind: str, x0: float, x1: float, y0: float, y1: float) -> None:
        if self.view is None:
            return
        xa, xb = sorted((x0, x1))
        fmin, fmax = self.view.freqs_hz[0], self.view.freqs_hz[-1]
        f1 = round_frequency(float(np.clip(from_view_x(xa), fmin, fmax)))
        f2 = round_frequency(float(np.clip(from_view_x(xb), fmin, fmax)))
        if not f2 > f1 * 1.001:
            return  # a click, not a drag
        # the rectangle paints the forbidden zone: a ceiling's limit is its lower edge
        level = min(y0, y1) if kind == "ceiling" else max(y0, y1)
        limit = round(level - self._reference_db, 2)
        mask = self.view.design.mask  # "floor 3": numbered after the spans of its kind, never a name in use
        name = unique_span_name(kind, mask, first=sum(1 for s in mask if s.kind == kind) + 1)
        self.span_added.emit(Span(kind=kind, f1=f1, f2=f2, limit1=limit, relative=True,  # type: ignore[arg-type]
                                  name=name))

    def _on_span_changing(self, item: SpanItem) -> None:
        span = item.current_span()
        if span is not None:
            self.span_changing.emit(item.index, span)

    def _on_span_finished(self, item: SpanItem) -> None:
        span = item.current_span()
        if span is not None and span != item.span:
            self.span_edited.emit(item.index, span)

    def _on_span_clicked(self, item: SpanItem) -> None:
        self.select(item.index)

    def _on_mouse_moved(self, pos) -> None:
        if self.view is None:
            return
        for plot, name, unit in ((self.mag, "mag", "dB"), (self.second, "second", None)):
            if plot.sceneBoundingRect().contains(pos):
                p = plot.vb.mapSceneToView(pos)
                self.readout.setText(self.readout_text(float(from_view_x(p.x())), name))
                return

    def readout_text(self, f_hz: float, which: str = "mag") -> str:
        """The cursor readout at ``f_hz``: nominal and band values there."""
        v = self.view
        if v is None:
            return ""
        f = v.freqs_hz
        # the grid point nearest the cursor on the log axis (not the next one above it)
        i = int(np.argmin(np.abs(np.log10(f) - math.log10(f_hz)))) if f_hz > 0 else 0
        if which == "mag":
            b, nom, unit = v.gain_bands, v.nominal_gain_db, "dB"
        else:
            b, nom = v.second_bands, v.nominal_second
            unit = "s" if v.second == "delay" else "deg"

        def fmt(y: float) -> str:
            return eng(y, "s", 4) if unit == "s" else f"{y:.2f} {unit}"

        return (f"{format_value(f[i], 'Hz', 4)}:  nominal {fmt(nom[i])},  central {round(100 * b.share)} % "
                f"{fmt(b.inner_low[i])} to {fmt(b.inner_high[i])},  all boards {fmt(b.low[i])} to {fmt(b.high[i])}")


def hold_range(vb: pg.ViewBox, axis: int, lo: float, hi: float, padding: float, refit: bool = False) -> None:
    """Show [lo, hi] on ``vb``'s ``axis`` (0: x, 1: y), widened by ``padding`` of its width
    on each side; unless ``refit``, only when the data leave the range shown or fill less
    than half of it. A plot's range then stays put while a slider is dragged, and the view
    is not moved (which makes pyqtgraph paint it a second time) for every result. A new
    range is applied to the items at once: pyqtgraph would move them while painting, and
    paint the plot again."""
    pad = padding * max(hi - lo, 1e-9 * max(abs(lo), abs(hi)), 1e-300)
    lo, hi = lo - pad, hi + pad
    y0, y1 = vb.viewRange()[axis]
    if refit or lo < y0 or hi > y1 or (hi - lo) < 0.5 * (y1 - y0):
        (vb.setXRange if axis == 0 else vb.setYRange)(lo, hi, padding=0)
        vb.updateMatrix()  # now, not lazily while painting (which has the view painted twice)


def _same(shown: tuple[np.ndarray, ...] | None, new: tuple[np.ndarray, ...]) -> bool:
    """True when the arrays ``new`` equal those ``shown`` (None: nothing shown yet)."""
    return shown is not None and all(a.shape == b.shape and np.array_equal(a, b, equal_nan=True)
                                     for a, b in zip(shown, new))


def steady_width(axis: pg.AxisItem) -> None:
    """Let ``axis`` (a vertical one) widen for longer tick labels but never narrow again:
    otherwise ticks such as "50" and "100" taking turns while a slider is dragged resize
    the plot, which is laid out and painted a second time for that result."""
    axis.setStyle(autoReduceTextSpace=False)


def set_axis_label(axis: pg.AxisItem, text: str) -> None:
    """Label ``axis`` with ``text`` unless it already reads so: pyqtgraph sets the label's
    HTML, resizes the axis and draws its ticks again on every call, which for each result
    of a drag cost a repaint of the plot."""
    if axis.labelText != text or not axis.label.isVisible():
        axis.setLabel(text)


def _band_item(brush) -> QGraphicsPathItem:
    """A filled polygon without an outline (one spread band)."""
    item = QGraphicsPathItem()
    item.setBrush(brush)
    item.setPen(QPen(Qt.PenStyle.NoPen))
    return item


def _band_path(x: np.ndarray, low: np.ndarray, high: np.ndarray) -> QPainterPath:
    """The region between ``low`` and ``high`` (F,) over ``x`` (F,) as one closed polygon:
    along ``low``, back along ``high``."""
    path = pg.arrayToQPath(np.concatenate([x, x[::-1]]), np.concatenate([low, high[::-1]]), connect="finite")
    path.closeSubpath()
    return path


def _trace_item(pen: dict) -> QGraphicsPathItem:
    """Sample traces drawn as one path (NaN-separated rows), pen ``pen`` (cosmetic: its
    width in pixels whatever the zoom). A one-pixel pen is given as Qt's width 0 (drawn one
    pixel wide, the same pixels): for any other width Qt finds the item's bounds by
    stroking the whole path, about 2.5 ms for each new path of 20 traces, 10 ms a result."""
    item = QGraphicsPathItem()
    qpen = pg.mkPen(**pen)
    if qpen.isCosmetic() and qpen.widthF() <= 1:
        qpen.setWidthF(0)
    item.setPen(qpen)
    return item


def _trace_path(x: np.ndarray, rows: np.ndarray) -> QPainterPath:
    """Rows (K, F) over ``x`` (F,) as one path, a separate polyline per row."""
    if len(rows) == 0:
        return QPainterPath()
    return pg.arrayToQPath(*_flat(x, rows), connect="finite")


def _flat(x: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    if len(rows) == 0:
        return np.array([]), np.array([])
    k, f = rows.shape
    xs = np.tile(np.append(x, np.nan), k)
    ys = np.concatenate([rows, np.full((k, 1), np.nan)], axis=1).ravel()
    return xs, ys
