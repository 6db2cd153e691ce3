"""The results panel: yield with its interval, failures per span, a histogram of a chosen
metric, and the spread budget of that metric as a ranked bar chart."""
from __future__ import annotations

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt, Signal
from PySide6.QtWidgets import (QComboBox, QHBoxLayout, QHeaderView, QLabel, QTableWidget, QTableWidgetItem,
                               QVBoxLayout, QWidget)

from ..liveview import ViewData, board_temperature_text
from ..temperature_text import point_yields_note, yield_note
from .qt_high_yield import high_yield_html
from .qt_measured_yield import MeasuredYieldLine
from .. import metric_names
from ..metric_names import SPAN_UNIT, is_pair_metric, metric_label

from . import qt_style as st
from .qt_plots import hold_range, set_axis_label, steady_width
from .qt_units import eng, prefix_for
from ..report.numbers import format_pct

MAX_TABLE_ROWS = 8  # the failure table grows to this many rows, then scrolls
#: the metric shown first: a low- or high-pass's cutoff, a band-pass's centre
FIRST_METRICS = ("cutoff_hz", "centre_hz")
CAUTION = ("Estimate under the grades' stated distributions; confirm with measured parts "
           "and qualified review.")


def _judged_how(design) -> str:
    """How a full run judges ``design``'s boards beyond the board temperature."""
    a = design.analysis
    if a.operating_range_c is not None:
        return "over the range and after the life" if a.service_hours else "over the operating range"
    return "after the service life"


class ResultsPanel(QWidget):
    """Yield, failure breakdown, histogram and spread budget of the latest evaluation."""

    metric_chosen = Signal(str)

    def __init__(self) -> None:
        super().__init__()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(4, 4, 4, 4)
        self.yield_label = QLabel("yield: evaluating…")
        self.yield_label.setObjectName("yield_label")
        self.yield_label.setTextFormat(Qt.TextFormat.RichText)
        self.yield_label.setWordWrap(True)
        self.detail = QLabel("")
        self.detail.setObjectName("yield_detail")
        self.detail.setWordWrap(True)
        self.detail.setStyleSheet("color: #555;")
        self.high_yield = QLabel("")  # the importance estimate when few boards fail (app/qt_high_yield.py)
        self.high_yield.setObjectName("high_yield_label")
        self.high_yield.setTextFormat(Qt.TextFormat.RichText)
        self.high_yield.setWordWrap(True)
        self.high_yield.hide()
        self.measured = QLabel("")  # measured parts, the interval with the measurement (app/qt_measured_yield.py)
        self.measured.setObjectName("measured_yield_label")
        self.measured.setTextFormat(Qt.TextFormat.RichText)
        self.measured.setWordWrap(True)
        self.measured.hide()
        self.measured_line = MeasuredYieldLine(self.measured, self)
        # over a range or after a life: the way to the yield against temperature (app/qt_temperature.py)
        from .qt_temperature import TEMPERATURE_LINK

        self.temperature_link = QLabel(TEMPERATURE_LINK)
        self.temperature_link.setObjectName("temperature_link")
        self.temperature_link.setWordWrap(True)
        self.temperature_link.hide()
        lay.addWidget(self.yield_label)
        lay.addWidget(self.temperature_link)
        lay.addWidget(self.high_yield)
        lay.addWidget(self.measured)
        lay.addWidget(self.detail)
        self.table = QTableWidget(0, 4)
        self.table.setObjectName("failure_table")
        # two-line headers keep the columns narrow; every column is as wide as its longest
        # text (nothing elided), and the table is as tall as its rows up to MAX_TABLE_ROWS
        self.table.setHorizontalHeaderLabels(["span", "failing\nboards", "share of\nfailures", "worst\nmargin"])
        self.table.verticalHeader().hide()
        # widths from _fit_table_height once per result (ResizeToContents would measure
        # every column again for each cell set: about 2 ms a result with four spans)
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Fixed)
        self.table.horizontalHeader().setStretchLastSection(False)
        self.table.setTextElideMode(Qt.TextElideMode.ElideNone)
        self.table.setWordWrap(False)
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        lay.addWidget(self.table)
        row = QHBoxLayout()
        row.addWidget(QLabel("metric"))
        self.chooser = QComboBox()
        self.chooser.setObjectName("metric_chooser")
        row.addWidget(self.chooser, 1)
        lay.addLayout(row)
        self.hist = pg.PlotWidget()
        self.hist.setObjectName("histogram")
        self.hist.setMenuEnabled(False)
        self.hist.setMouseEnabled(x=False, y=False)
        self.hist.setLabel("left", "boards")
        self.hist.disableAutoRange()  # _draw_metric sets the ranges
        # the bars and the nominal line are made once and given new data for each result
        # (new items for each result of a drag cost a scene update and a paint each)
        self._bars_all = pg.BarGraphItem(x=[0.0], height=[0.0], width=1.0, brush=st.rgba(st.BLUE, 160), pen=None,
                                         name="all boards")
        self._bars_fail = pg.BarGraphItem(x=[0.0], height=[0.0], width=1.0, brush=st.rgba(st.VERMILION, 200),
                                          pen=None)
        self._nominal_line = pg.InfiniteLine(0.0, angle=90, pen=pg.mkPen(st.INK, width=2, style=st.DASH))
        for it in (self._bars_all, self._bars_fail, self._nominal_line):
            it.hide()
            self.hist.addItem(it)
        for side in ("left", "bottom"):
            self.hist.getAxis(side).enableAutoSIPrefix(False)  # never "(x0.001)" on dB
        steady_width(self.hist.getAxis("left"))

        lay.addWidget(self.hist, 2)
        self.budget_plot = pg.PlotWidget()
        self.budget_plot.setObjectName("budget_chart")
        self.budget_plot.setMenuEnabled(False)
        self.budget_plot.setMouseEnabled(x=False, y=False)
        self.budget_plot.setLabel("bottom", "share of the metric's variance (%)")
        for side in ("left", "bottom"):
            self.budget_plot.getAxis(side).enableAutoSIPrefix(False)
        self.budget_heading = QLabel("<b>spread budget</b> (which part explains how much of the spread)")
        self.budget_heading.setObjectName("budget_heading")
        self.budget_heading.setWordWrap(True)
        lay.addWidget(self.budget_heading)
        self.lived_budget = QLabel("")  # over a range: what the budget is of; after a life: that budget
        self.lived_budget.setObjectName("lived_budget")
        self.lived_budget.setWordWrap(True)
        self.lived_budget.hide()
        lay.addWidget(self.lived_budget)
        lay.addWidget(self.budget_plot, 2)
        self.opamp_note = QLabel("")
        self.opamp_note.setObjectName("opamp_note")
        self.opamp_note.setWordWrap(True)
        self.opamp_note.hide()
        lay.addWidget(self.opamp_note)
        self.caution = QLabel(CAUTION)
        self.caution.setWordWrap(True)
        self.caution.setStyleSheet("color: #555; font-size: 9pt;")
        lay.addWidget(self.caution)
        self.chooser.activated.connect(lambda _i: self._on_metric_chosen())
        self.view: ViewData | None = None
        self._budget_titled = False  # the budget chart's title row shown (setTitle called once)
        self.metric_name = "cutoff_hz"
        self.highlighted: str | None = None  # the part chosen in the circuit view

    def sizeHint(self):  # noqa: N802 - Qt override
        from PySide6.QtCore import QSize

        return QSize(520, 700)

    def show_view(self, view: ViewData) -> None:
        self.view = view
        y = view.yield_
        if view.design.mask:
            # what the yield covers: over a range, after a life; a drag's preview of such a
            # design judges its boards at the board temperature only, and says so
            note = (f"preview, {view.samples:,} boards at {board_temperature_text(view.design)}"
                    if view.reference_only else yield_note(view.result))
            self.yield_label.setText(
                f"<span style='font-size:16pt'><b>yield {format_pct(y.estimate)}</b></span><br>"
                f"{round(100 * y.confidence)} % interval {format_pct(y.low)} to {format_pct(y.high)} "
                f"({'Wilson' if y.method == 'wilson' else 'exact'}), {y.passed:,} of {y.samples:,} boards pass"
                + (f"<br>{note}" if note else "")
                + (f"<br>{alone}" if (alone := point_yields_note(view.result)) else ""))  # over a range
        else:
            self.yield_label.setText("<b>no spec mask yet</b>: draw floor or ceiling spans on the gain plot")
        rare = high_yield_html(view.result) if view.design.mask and not view.preview else ""
        self.measured_line.show_view(view)
        self.high_yield.setText(rare)
        self.high_yield.setVisible(bool(rare))
        bands_note = (f"; bands drawn from the first {view.curve_boards:,} boards"
                      if view.curve_boards and view.curve_boards < view.samples else "")
        if view.preview:
            self.detail.setText(f"preview while dragging: the first {view.samples:,} of "
                                f"{view.design.analysis.samples:,} boards"
                                + (f" at {board_temperature_text(view.design)} only (release to judge "
                                   f"all {_judged_how(view.design)})" if view.reference_only
                                   else " (release to evaluate all)"))
        else:
            self.detail.setText(f"{view.samples:,} boards, seed {view.seed}, {view.method} sampling; "
                                f"computed in {1000 * view.elapsed_s:.0f} ms{bands_note}")
        self.table.setRowCount(len(view.spans))
        for i, s in enumerate(view.spans):
            unit = SPAN_UNIT[view.design.mask[i].quantity]
            cells = [s.name, f"{s.failed:,} ({format_pct(s.fraction)})", format_pct(s.share_of_failures),
                     eng(s.worst_margin_db, unit, 3, signed=True)]
            for j, text in enumerate(cells):
                item = QTableWidgetItem(text)
                if j and s.failed:
                    item.setForeground(pg.mkColor(st.VERMILION))
                self.table.setItem(i, j, item)
        self._fit_table_height()
        names = [s.name for s in view.design.stages]
        wanted = [n for n in view.metrics if not is_pair_metric(n)]
        current = [self.chooser.itemData(i) for i in range(self.chooser.count())]
        if current != wanted:
            self.chooser.blockSignals(True)
            self.chooser.clear()
            for n in wanted:
                self.chooser.addItem(metric_label(n, names, view.design.mask), n)
            self.chooser.blockSignals(False)
        if self.metric_name not in wanted:  # e.g. a band-pass opened after a low-pass
            self.metric_name = next((n for n in FIRST_METRICS if n in wanted),
                                    next((n for n in wanted if n in view.budget), wanted[0]))
        self.chooser.setCurrentIndex(max(0, self.chooser.findData(self.metric_name)))
        self._draw_metric()

    def _fit_table_height(self) -> None:
        """As tall as the header and the rows, up to MAX_TABLE_ROWS rows (then it scrolls)."""
        t = self.table
        t.resizeColumnsToContents()
        t.resizeRowsToContents()
        rows = min(t.rowCount(), MAX_TABLE_ROWS)
        h = t.horizontalHeader().height() + sum(t.rowHeight(r) for r in range(rows)) + 2 * t.frameWidth()
        if t.horizontalScrollBar().isVisible() or t.horizontalHeader().length() > t.viewport().width():
            h += t.horizontalScrollBar().sizeHint().height()
        t.setFixedHeight(h)

    def show_opamps(self, rows) -> None:
        """Op-amp gain-bandwidth effects (tolspread.opamp_check.GbwWarning rows)."""
        if not rows:
            self.opamp_note.hide()
            return
        lines = []
        for r in rows:
            shift = f"f0 {100 * (r.f0_shift or 0):+.2f} %, Q {100 * (r.q_shift or 0):+.2f} %"
            warn = (f" <span style='color:{st.VERMILION}'><b>GBW too low</b> (needs ≥ "
                    f"{r.required_gbw_hz / 1e6:.3g} MHz)</span>" if r.too_low else "")
            lines.append(f"{r.stage}: {shift}{warn}")
        self.opamp_note.setText("<b>op-amp gain-bandwidth moves</b> (rule GBW ≥ 100·G·Q·f0):<br>" + "<br>".join(lines))
        self.opamp_note.show()

    def _on_metric_chosen(self) -> None:
        self.metric_name = self.chooser.currentData()
        self._draw_metric()
        self.metric_chosen.emit(self.metric_name)

    def _draw_metric(self) -> None:
        v = self.view
        if v is None or self.metric_name not in v.metrics:
            return
        names = [s.name for s in v.design.stages]
        data = v.metrics[self.metric_name]
        ok = np.isfinite(data)
        drawn = bool(ok.sum() >= 2)
        nom = v.nominal_metrics.get(self.metric_name)
        with_nominal = drawn and nom is not None and bool(np.isfinite(nom))
        self._bars_all.setVisible(drawn)
        self._nominal_line.setVisible(with_nominal)
        self._bars_fail.hide()
        if drawn:
            lo, hi = float(np.min(data[ok])), float(np.max(data[ok]))
            if hi <= lo:
                hi = lo + 1e-12 * max(1.0, abs(lo))
            edges = np.linspace(lo, hi, 41)
            passed = v.ensemble.passed
            all_counts, _ = np.histogram(data[ok], edges)
            fail_counts, _ = np.histogram(data[ok & ~passed], edges)
            width = edges[1] - edges[0]
            centres = 0.5 * (edges[1:] + edges[:-1])
            self._bars_all.setOpts(x=centres, height=all_counts, width=width * 0.95)
            if fail_counts.any():
                self._bars_fail.setOpts(x=centres, height=fail_counts, width=width * 0.95)
                self._bars_fail.show()
            if with_nominal:
                self._nominal_line.setValue(nom)
                lo, hi = min(lo, nom), max(hi, nom)
            # ranges set here, and moved only when the bars leave them or fill less than
            # half (automatic ranging moved them for every result and painted twice)
            hold_range(self.hist.getViewBox(), 0, lo, hi, 0.02)
            hold_range(self.hist.getViewBox(), 1, 0.0, float(all_counts.max()), 0.05)
        self._label_metric_axis(self.hist.getAxis("bottom"), self.metric_name, names, data[ok])
        b = v.budget.get(self.metric_name)
        if b is None and v.preview:
            return  # a drag preview has no budget: keep the last one shown
        from .qt_temperature import lived_budget_html

        lived = lived_budget_html(v.result, self.metric_name)  # over a range, after a life
        self.lived_budget.setText(lived)
        self.lived_budget.setVisible(bool(lived))
        self.temperature_link.setVisible(v.result is not None and (v.result.temperature is not None
                                                                   or v.result.life is not None))
        self.budget_plot.clear()
        if b is None:
            self._budget_frame("no budget for this metric", [])  # no part names left from another metric
            self.budget_plot.setXRange(0, 100, padding=0)
            return
        chosen = next((e for e in b.entries if e.ref == self.highlighted), None)
        title = ("" if chosen is None else
                 f"<span style='color:{st.VERMILION}'>{chosen.ref}: {100 * chosen.share:.3g} %</span>")
        entries = [e for e in b.entries if e.share > 0][:10]
        labels = [e.ref for e in entries] + (["unexplained"] if b.remainder > 0.005 else [])
        shares = [100 * e.share for e in entries] + ([100 * b.remainder] if b.remainder > 0.005 else [])
        ys = np.arange(len(shares))[::-1]
        if shares:
            brushes = ([st.rgba(st.VERMILION if e.ref == self.highlighted else st.BLUE, 200) for e in entries]
                       + [st.rgba("#888888", 160)] * (len(shares) - len(entries)))
            self.budget_plot.addItem(pg.BarGraphItem(x0=0, y=ys, height=0.7, width=shares, brushes=brushes,
                                                     pen=None))
            self._budget_frame(title, [[(float(y), lab) for y, lab in zip(ys, labels)]])
            self.budget_plot.setXRange(0, max(shares) * 1.1, padding=0)
            self.budget_plot.setYRange(-0.6, len(shares) - 0.4, padding=0)
            self.budget_plot.getViewBox().updateMatrix()  # now, not while painting (a second paint)
        else:
            self._budget_frame(title, None)

    def _budget_frame(self, title: str, ticks: list | None) -> None:
        """The budget chart's title and part-name ticks (None: as they are), each set only
        when it changes: pyqtgraph lays the chart out again for each, and paints it again."""
        if self.budget_plot.getPlotItem().titleLabel.text != title or not self._budget_titled:
            self.budget_plot.setTitle(title)
            self._budget_titled = True
        axis = self.budget_plot.getAxis("left")
        if ticks is not None and ticks != axis._tickLevels:
            axis.setTicks(ticks)

    def _label_metric_axis(self, axis, name: str, stage_names: list[str], values: np.ndarray) -> None:
        """Label ``axis`` with the metric and its unit. dB, degrees, Q and % are never
        SI-scaled; Hz and seconds get one fixed prefix chosen from the data (kHz, µs).
        Over an operating range the label says where the boards' numbers are from: a metric
        at the board temperature ("at 25 °C"), a margin the worst over the judged temperatures."""
        base = metric_names.metric_words(name, stage_names)
        v = self.view
        if v is not None and v.design.analysis.operating_range_c is not None:
            judged = v.result is not None and v.result.temperature is not None  # a preview is not
            base += (" (worst over the range)" if judged and metric_names.is_margin(name)
                     else f" at {board_temperature_text(v.design)}")
        unit = metric_names.unit(name, self.view.design.mask if self.view is not None else None)
        if unit in ("Hz", "s") and values.size:
            prefix, factor = prefix_for(float(np.max(np.abs(values))))
            axis.setScale(1.0 / factor)
            set_axis_label(axis, f"{base} ({prefix}{unit})")
        else:
            axis.setScale(1.0)
            set_axis_label(axis, f"{base} ({unit})" if unit else base)

    def highlight_part(self, ref: str | None) -> None:
        """Draw part ``ref``'s bar of the spread budget in the highlight colour, its share in
        the budget's title (a part chosen in the circuit view); None clears it."""
        self.highlighted = ref
        if self.view is not None:
            self._draw_metric()

    def show_message(self, text: str) -> None:
        self.yield_label.setText(f"<span style='color:{st.VERMILION}'><b>{text}</b></span>")

