"""The channel-match view: how far the channels of one board differ, over frequency.

For a design of several channels with match spans (:mod:`filters.channel_match`) one plot
per quantity the match spans limit: gain difference (dB), phase difference (deg) or
group-delay difference (s, shown with one SI prefix). Each shows the largest difference
between any two channels of a board at each frequency (max over the channels minus min:
exactly what a match span judges) as bands over the boards whose curves the view kept
(the central 98 % dark, every board light, as the spread plots), and each match span's
allowed limit as a line over its band with the forbidden side hatched. Above the plots:
the yield of the matched set, and for each match span its failing boards and the budget
of its mismatch (:func:`filters.budget.spread_budget`: a match span's margin is budgeted
on the parts' channel-to-channel differences).

Nothing here computes: the differences and their bands come with the view
(:attr:`filters.analysis.Curves.spread_bands`).
"""
from __future__ import annotations

import html

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import QPointF, Qt, Signal
from PySide6.QtGui import QPolygonF
from PySide6.QtWidgets import QGraphicsPolygonItem, QLabel, QSizePolicy, QVBoxLayout, QWidget

from ..liveview import ViewData
from ..mask import Span
from ..metric_names import SPAN_UNIT, margin_name, mismatch_name
from ..report.numbers import format_pct
from ..values import format_value

from . import qt_style as st
from .qt_maskitems import to_view_x
from .qt_plots import _FrequencyAxis
from .qt_units import eng, prefix_for

AXIS_WORDS = {"gain": "gain difference", "phase": "phase difference", "delay": "group-delay difference"}
AXIS_LABELS = {"gain": "Δ gain", "phase": "Δ phase", "delay": "Δ group delay"}  # short: three plots may share the height
HEADROOM = 1.25  # the y range reaches this far above the highest band or limit


class MismatchPlots(QWidget):
    """One plot per matched quantity: bands of the boards' largest channel difference and
    the match spans' limits. ``items[quantity]`` holds the drawn items by name ("low",
    "high", "inner_low", "inner_high": band edges; "limits": one line per match span).
    ``budget_requested`` carries the metric whose spread budget a link in the summary asks
    the window to show (a match span's margin, budgeted on its mismatch)."""

    budget_requested = Signal(str)
    span_selected = Signal(int)  # a click on a match span's limit line: its index in the mask

    def __init__(self) -> None:
        super().__init__()
        self.summary = QLabel("")
        self.summary.setObjectName("match_summary")
        self.summary.setWordWrap(True)
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.summary.setTextInteractionFlags(Qt.TextInteractionFlag.LinksAccessibleByMouse
                                             | Qt.TextInteractionFlag.LinksAccessibleByKeyboard)
        self.summary.linkActivated.connect(lambda link: self._on_link(link))
        self._mask: tuple[Span, ...] = ()
        self.canvas = pg.GraphicsLayoutWidget()
        self.canvas.setObjectName("mismatch_plots")
        self.readout = QLabel(" ")
        self.readout.setObjectName("match_readout")
        self.readout.setSizePolicy(QSizePolicy.Policy.Ignored, QSizePolicy.Policy.Fixed)  # never widens the window
        self.readout.setWordWrap(True)  # two lines of a fixed height: the plots never move under the mouse
        self.readout.setFixedHeight(2 * self.readout.fontMetrics().lineSpacing() + 4)
        self.readout.setTextInteractionFlags(Qt.TextInteractionFlag.TextSelectableByMouse)
        self.canvas.scene().sigMouseMoved.connect(lambda pos: self._on_mouse_moved(pos))
        self.caption = QLabel("")
        self.caption.setObjectName("match_caption")
        self.caption.setWordWrap(True)
        self.caption.setStyleSheet("color: #555;")
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        lay.addWidget(self.summary)
        lay.addWidget(self.canvas, 1)
        lay.addWidget(self.readout)
        lay.addWidget(self.caption)
        self.plots: dict[str, pg.PlotItem] = {}
        self.items: dict[str, dict] = {}
        self.scale: dict[str, float] = {}  # quantity -> factor the plot divides by (1e-6 for µs)
        self.selected = -1
        self._pending: ViewData | None = None  # the newest view, drawn when the tab is shown
        self._limits_key: dict[str, tuple] = {}  # what each plot's limit items were drawn for
        self._shown: tuple[np.ndarray, dict, tuple[Span, ...]] | None = None  # freqs, bands, mask drawn

    # --- drawing -------------------------------------------------------------------------
    def show_view(self, view: ViewData) -> None:
        """Draw ``view``'s channel differences, limits and summary (nothing when the
        design has one channel or no match span). While the tab is hidden the view is kept
        and drawn when it is shown: a slider's previews cost nothing here meanwhile."""
        self._pending = view
        if self.isVisible():
            self._draw()

    def showEvent(self, event) -> None:  # noqa: N802 - Qt override
        super().showEvent(event)
        self._draw()

    def _draw(self) -> None:
        view, self._pending = self._pending, None
        if view is None:
            return
        curves = view.result.curves
        bands = {} if curves is None else curves.spread_bands
        quantities = tuple(bands)
        if quantities != tuple(self.plots):
            self._build(quantities)
        if not quantities:
            self.summary.setText(f"<b>Yield: {format_pct(view.yield_.estimate)}</b>. No match span yet: "
                                 "Add match span (under the span table) limits the gain, phase or group-delay "
                                 "difference between channels.")
            self.caption.setText("")
            return
        x = to_view_x(view.freqs_hz)
        mask = view.design.mask
        self._shown = (view.freqs_hz, bands, mask)
        for q in quantities:
            b = bands[q]
            limits = [(j, s) for j, s in enumerate(mask) if s.kind == "match" and s.quantity == q]
            top = max([float(np.max(b.high))] + [max(s.limit1, s.end_limit) for _, s in limits])
            _, factor = prefix_for(top) if q == "delay" else ("", 1.0)
            self.scale[q] = factor
            it = self.items[q]
            for name in ("low", "high", "inner_low", "inner_high"):
                it[name].setData(x, getattr(b, name) / factor)
            self._draw_limits(q, view.freqs_hz, limits, factor)
            plot = self.plots[q]
            unit = SPAN_UNIT[q]
            plot.setLabel("left", f"{AXIS_LABELS[q]} ({prefix_for(top)[0] if q == 'delay' else ''}{unit})")
            plot.setXRange(float(x[0]), float(x[-1]), padding=0)
            plot.setYRange(0.0, HEADROOM * top / factor, padding=0)
        self._show_summary(view)
        boards = 0 if curves is None else curves.boards
        self.caption.setText(
            f"Largest difference between any two channels of a board at each frequency, over the first "
            f"{boards:,} boards: the central 98 % of boards dark blue, every board light blue; each match "
            "span's limit is the purple line over its band (hatched above: not allowed). Estimates under the grades' stated distributions: "
            "confirm by measuring real boards.")

    def _build(self, quantities: tuple[str, ...]) -> None:
        self.canvas.clear()
        self.plots, self.items, self._limits_key = {}, {}, {}
        for row, q in enumerate(quantities):
            plot = self.canvas.addPlot(row=row, col=0, axisItems={"bottom": _FrequencyAxis("bottom")})
            plot.setMenuEnabled(False)
            plot.setMouseEnabled(x=False, y=False)
            plot.hideButtons()  # no auto-range button: the ranges are set here
            plot.disableAutoRange()
            plot.showGrid(x=True, y=True, alpha=st.GRID_ALPHA)
            for side in ("left", "bottom"):
                plot.getAxis(side).enableAutoSIPrefix(False)
            if row == len(quantities) - 1:  # one frequency label, under the lowest plot
                plot.setLabel("bottom", "frequency (Hz)")
            if row:
                plot.setXLink(self.plots[quantities[0]])
            edges = {name: pg.PlotCurveItem(pen=pg.mkPen(None)) for name in ("low", "high", "inner_low", "inner_high")}
            outer = pg.FillBetweenItem(edges["low"], edges["high"], brush=st.OUTER_BRUSH)
            inner = pg.FillBetweenItem(edges["inner_low"], edges["inner_high"], brush=st.INNER_BRUSH)
            outer.setZValue(1)
            inner.setZValue(2)
            for item in (*edges.values(), outer, inner):
                plot.addItem(item)
            self.plots[q] = plot
            self.items[q] = dict(edges, outer=outer, inner=inner, limits=[])

    def _draw_limits(self, q: str, freqs: np.ndarray, limits: list[tuple[int, Span]], factor: float) -> None:
        key = (tuple(limits), factor, freqs.size, float(freqs[0]), float(freqs[-1]))
        if self._limits_key.get(q) == key:  # the same limits on the same grid: the items stay
            return
        self._limits_key[q] = key
        plot, it = self.plots[q], self.items[q]
        for old in it["limits"]:
            for item in (old["line"], old["hatch"], old["label"]):
                plot.removeItem(item)
        it["limits"] = []
        for j, span in limits:
            inside = freqs[(freqs >= span.f1 * (1 - 1e-9)) & (freqs <= span.f2 * (1 + 1e-9))]
            f = inside if inside.size >= 2 else np.array([span.f1, span.f2])
            x, y = to_view_x(f), span.limit_at(f) / factor
            selected = j == self.selected
            line = pg.PlotCurveItem(x, y, pen=pg.mkPen(st.SELECTED_COLOUR if selected else st.CEILING_COLOUR,
                                                       width=st.SELECTED_WIDTH if selected else st.SPAN_WIDTH))
            line.setZValue(20)
            line.setClickable(True, width=8)  # a click near the line selects its span
            line.sigClicked.connect(lambda _item, _ev, j=j: self._on_clicked(j))
            reach = 0.5 * float(np.max(y))
            hatch = QGraphicsPolygonItem(QPolygonF([QPointF(float(a), float(b)) for a, b in zip(x, y)]
                                                   + [QPointF(float(x[-1]), float(y[-1] + reach)),
                                                      QPointF(float(x[0]), float(y[0] + reach))]))
            brush = pg.mkBrush(st.rgba(st.CEILING_COLOUR, 150))
            brush.setStyle(Qt.BrushStyle.BDiagPattern)
            hatch.setBrush(brush)
            hatch.setPen(pg.mkPen(None))
            hatch.setZValue(5)
            label = pg.TextItem(f"{span.label}: ≤ {_limit_text(span)}", color=st.CEILING_COLOUR, anchor=(0, 0))
            label.setPos(float(x[0]), float(y[0]))  # under the line's left end (the hatch is above)
            label.setZValue(21)
            for item in (line, hatch, label):
                plot.addItem(item, ignoreBounds=True)
            it["limits"].append(dict(index=j, span=span, line=line, hatch=hatch, label=label))

    def _on_mouse_moved(self, pos) -> None:
        """The readout: at the frequency under the mouse, the band values of the plot under
        it and the limit of each match span there."""
        if self._shown is None:
            return
        for q, plot in self.plots.items():
            if plot.sceneBoundingRect().contains(pos):
                f = float(10 ** plot.vb.mapSceneToView(pos).x())
                self.readout.setText(self.readout_text(q, f))
                return

    def readout_text(self, quantity: str, f_hz: float) -> str:
        """What the readout says for ``quantity`` at the grid frequency nearest ``f_hz``."""
        assert self._shown is not None
        freqs, bands, mask = self._shown
        k = int(np.argmin(np.abs(np.log(freqs / f_hz))))
        b, unit = bands[quantity], SPAN_UNIT[quantity]
        text = (f"{format_value(float(freqs[k]), 'Hz', 4)}: {AXIS_WORDS[quantity]} of the central 98 % of "
                f"boards {eng(float(b.inner_low[k]), unit, 3)} to {eng(float(b.inner_high[k]), unit, 3)}, "
                f"of every board up to {eng(float(b.high[k]), unit, 3)}")
        for s in mask:
            if s.kind == "match" and s.quantity == quantity and s.f1 * (1 - 1e-9) <= freqs[k] <= s.f2 * (1 + 1e-9):
                text += f"; {s.label} allows {eng(float(s.limit_at(freqs[k])), unit, 3)}"
        return text

    def _on_clicked(self, index: int) -> None:
        self.select(index)
        self.span_selected.emit(index)

    def select(self, index: int) -> None:
        """Draw match span ``index`` (of the mask) selected; -1 for none."""
        self.selected = index
        for it in self.items.values():
            for lim in it["limits"]:
                on = lim["index"] == index
                lim["line"].setPen(pg.mkPen(st.SELECTED_COLOUR if on else st.CEILING_COLOUR,
                                            width=st.SELECTED_WIDTH if on else st.SPAN_WIDTH))

    def _on_link(self, link: str) -> None:
        j = int(link.removeprefix("budget:"))
        if 0 <= j < len(self._mask):
            self.budget_requested.emit(margin_name(self._mask[j]))

    def _show_summary(self, view: ViewData) -> None:
        y = view.yield_
        d = view.design
        self._mask = d.mask
        lines = [f"<b>Yield of the matched set: {format_pct(y.estimate)}</b> "
                 f"({format_pct(y.confidence, 0)} interval {format_pct(y.low)} to {format_pct(y.high)}; "
                 f"{y.passed:,} of {y.samples:,} boards of {d.channels.count} channels meet the mask in "
                 "every channel and match)" + (" <i>preview</i>" if view.preview else "")]
        failures = {s.name: s for s in view.spans}
        for j, span in enumerate(d.mask):
            if span.kind != "match":
                continue
            fails = failures.get(span.label)
            failed = "" if fails is None else f"{fails.failed:,} boards fail ({format_pct(fails.fraction)})"
            # a match span's margin is budgeted on its signed mismatch (filters/budget.py)
            budget = view.budget.get(mismatch_name(span)) or view.budget.get(margin_name(span))
            parts = "" if budget is None else ", ".join(
                f"{ref} {pct:.1f} %" for ref, pct in budget.rounded_percent(top=3))
            limit = f"≤ {_limit_text(span)}"
            band = f"{format_value(span.f1, 'Hz', 4)} to {format_value(span.f2, 'Hz', 4)}"
            lines.append(f"<b>{_html(span.label)}</b> ({AXIS_WORDS[span.quantity]} {limit}, {band}): {failed}"
                         + (f"; mismatch budget: {parts} (<a href='budget:{j}'>bars</a>)" if parts else ""))
        self.summary.setText("<br>".join(lines))


def _limit_text(span: Span) -> str:
    """"0.1 dB", or "2.5 µs to 4 µs" for a sloped limit."""
    unit = SPAN_UNIT[span.quantity]
    if span.limit2 is None or span.limit2 == span.limit1:
        return eng(span.limit1, unit, 4)
    return f"{eng(span.limit1, unit, 4)} to {eng(span.limit2, unit, 4)}"


def _html(text: str) -> str:
    return html.escape(text)
