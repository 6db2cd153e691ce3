"""The "Temperature and service life" window: the design's operating range, judged
temperatures and service life, the yield against temperature, and the spread bands at a
chosen temperature.

The settings go into the design as one undoable edit (the window's ``apply_edit``, which
checks them with the loader's rules). The yield plot reads the last shown analysis
(``ViewData.result.temperature``, :mod:`filters.temperature`). The bands at a chosen
temperature come from the same boards evaluated at that temperature
(:func:`filters.evaluate.evaluate` with ``conditions``), at most :data:`BAND_BOARDS` of them.
"""
from __future__ import annotations

from typing import Callable

import numpy as np
import pyqtgraph as pg
from PySide6.QtCore import Qt
from PySide6.QtWidgets import (QCheckBox, QDialog, QDoubleSpinBox, QFormLayout, QGroupBox, QHBoxLayout, QLabel,
                               QLineEdit, QPushButton, QTableWidget, QTableWidgetItem, QVBoxLayout, QWidget)

from ..bands import bands
from ..design import Design
from ..evaluate import evaluate, prepare
from ..liveview import ViewData
from ..temperature import judged_conditions
from ..temperature_settings import HOURS_PER_YEAR
from ..report.numbers import format_pct
from ..temperature_text import temperature_tables
from . import qt_style as st

__all__ = ["BAND_BOARDS", "TemperatureDialog", "parse_points", "lived_budget_html", "TEMPERATURE_LINK"]

#: The results panel's link under the yield (shown over a range or after a life) that opens
#: this window (Design > Temperature and service life).
TEMPERATURE_LINK = "<a href='temperature'>yield against temperature, bands at a chosen temperature…</a>"


def lived_budget_html(result, metric: str) -> str:
    """What the budget of ``metric`` shown is of over a range (its basis) and, after the
    service life, that budget's largest shares; "" at one temperature."""
    if result is None:
        return ""
    b = result.budget.get(metric)
    lines = [f"<i>{b.basis}</i>"] if b is not None and b.basis else []
    after = result.life_budget.get(metric)
    if after is not None:
        shares = ", ".join(f"{ref} {v:.1f} %" for ref, v in after.rounded_percent(3))
        lines.append(f"{after.basis}: {shares or 'no spread'}")
    return "<br>".join(lines)

BAND_BOARDS = 2000  # boards behind the bands at a chosen temperature (the design's first ones)


def parse_points(text: str) -> tuple[float, ...]:
    """Extra judged temperatures typed as ``0, 60`` (deg C); ValueError names the bad entry."""
    out = []
    for piece in text.replace(";", ",").split(","):
        piece = piece.strip()
        if not piece:
            continue
        try:
            out.append(float(piece))
        except ValueError:
            raise ValueError(f"extra temperatures: {piece!r} is not a number in deg C") from None
    return tuple(out)


def _spin(lo: float, hi: float, value: float, suffix: str, name: str, decimals: int = 1) -> QDoubleSpinBox:
    box = QDoubleSpinBox()
    box.setRange(lo, hi)
    box.setDecimals(decimals)
    box.setValue(value)
    box.setSuffix(suffix)
    box.setObjectName(name)
    return box


class TemperatureDialog(QDialog):
    """Settings of the operating range and service life, the yield against temperature,
    and the spread bands at a chosen temperature. ``apply_edit(design, text)`` makes a
    design current and returns None or the reason it was refused."""

    def __init__(self, design: Design, apply_edit: Callable[[Design, str], str | None],
                 parent: QWidget | None = None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Temperature and service life")
        self.setObjectName("temperature_dialog")
        self._design = design
        self._apply_edit = apply_edit
        a = design.analysis
        rng = a.operating_range_c or (-40.0, 85.0)

        settings = QGroupBox("Judged over")
        form = QFormLayout(settings)
        self.use_range = QCheckBox("an operating range (each board must pass at every judged temperature)")
        self.use_range.setObjectName("use_range")
        self.use_range.setChecked(a.operating_range_c is not None)
        self.low = _spin(-270.0, 999.0, rng[0], " °C", "range_low")
        self.high = _spin(-270.0, 999.0, rng[1], " °C", "range_high")
        row = QHBoxLayout()
        row.addWidget(self.low)
        row.addWidget(QLabel("to"))
        row.addWidget(self.high)
        self.points = QLineEdit(", ".join(f"{t:g}" for t in a.judge_at_c))
        self.points.setObjectName("judge_at")
        self.points.setPlaceholderText("extra points, e.g. 0, 60 (the ends and 25 °C are always judged)")
        self.use_life = QCheckBox("after a service life of")
        self.use_life.setObjectName("use_life")
        self.use_life.setChecked(bool(a.service_hours))
        self.years = _spin(0.01, 100.0, a.service_hours / HOURS_PER_YEAR if a.service_hours else 10.0, " years",
                           "life_years", 2)
        self.life_temp = _spin(-270.0, 999.0, a.service_temp_c, " °C", "life_temp")
        life = QHBoxLayout()
        life.addWidget(self.use_life)
        life.addWidget(self.years)
        life.addWidget(QLabel("at"))
        life.addWidget(self.life_temp)
        form.addRow(self.use_range)
        form.addRow("range", row)
        form.addRow("extra points", self.points)
        form.addRow(life)
        self.apply_button = QPushButton("Apply to the design")
        self.apply_button.setObjectName("apply_temperature")
        self.apply_button.clicked.connect(self.apply)
        self.problem = st.problem_label("temperature_problem", hidden=False)
        form.addRow(self.apply_button)
        form.addRow(self.problem)

        self.summary = QLabel("")
        self.summary.setObjectName("temperature_summary")
        self.summary.setWordWrap(True)
        self.yield_plot = pg.PlotWidget()
        self.yield_plot.setObjectName("yield_temperature_plot")
        self.yield_plot.setBackground("w")
        self.yield_plot.setLabel("bottom", "temperature (°C)")
        self.yield_plot.setLabel("left", "yield (%)")
        self.yield_plot.showGrid(x=True, y=True, alpha=0.3)

        self.shift_table = QTableWidget(0, 0)  # stage f0 and Q at each judged temperature
        self.shift_table.setObjectName("stage_shift_table")
        self.shift_table.verticalHeader().setVisible(False)

        band_row = QHBoxLayout()
        self.band_temp = _spin(-270.0, 999.0, rng[0], " °C", "band_temperature")
        self.band_button = QPushButton("Show bands at this temperature")
        self.band_button.setObjectName("show_bands")
        self.band_button.clicked.connect(self.show_bands)
        band_row.addWidget(QLabel("spread at"))
        band_row.addWidget(self.band_temp)
        band_row.addWidget(self.band_button)
        band_row.addStretch(1)
        self.band_plot = pg.PlotWidget()
        self.band_plot.setObjectName("band_temperature_plot")
        self.band_plot.setBackground("w")
        self.band_plot.setLogMode(x=True, y=False)
        self.band_plot.setLabel("bottom", "frequency (Hz)")
        self.band_plot.setLabel("left", "gain (dB)")
        self.band_plot.showGrid(x=True, y=True, alpha=0.3)
        self.band_note = QLabel("")
        self.band_note.setObjectName("band_note")
        self.band_note.setWordWrap(True)

        lay = QVBoxLayout(self)
        lay.addWidget(settings)
        lay.addWidget(self.summary)
        lay.addWidget(self.yield_plot, 1)
        lay.addWidget(self.shift_table)
        lay.addLayout(band_row)
        lay.addWidget(self.band_plot, 1)
        lay.addWidget(self.band_note)
        self.resize(720, 820)

    # --- settings to the design ------------------------------------------------------------
    def settings_design(self) -> Design:
        """The design with this window's settings (ValueError for unreadable extra points)."""
        d = self._design
        if self.use_range.isChecked():
            rng = (float(self.low.value()), float(self.high.value()))
            pts = parse_points(self.points.text())
        else:
            rng, pts = None, ()
        hours = float(self.years.value()) * HOURS_PER_YEAR if self.use_life.isChecked() else 0.0
        temp = float(self.life_temp.value()) if self.use_life.isChecked() else d.analysis.service_temp_c
        return d.with_analysis(operating_range_c=rng, judge_at_c=pts, service_hours=hours, service_temp_c=temp)

    def apply(self) -> None:
        """Make the settings the design's (one undoable edit) or show why not."""
        try:
            d = self.settings_design()
        except ValueError as exc:
            self.problem.setText(str(exc))
            return
        if d == self._design:
            self.problem.setText("")
            return
        reason = self._apply_edit(d, "temperature and service life")
        self.problem.setText(reason or "")
        if reason is None:
            self._design = d

    # --- results ---------------------------------------------------------------------------
    def show_view(self, view: ViewData) -> None:
        """Draw the yield against temperature of the analysis behind ``view``."""
        self._design = view.design
        self.yield_plot.clear()
        res = view.result
        over = None if res is None else res.temperature
        life = None if res is None else res.life
        lines = []
        if over is not None:
            t = np.array(over.temperatures_c)
            y = np.array([100 * p.yield_.estimate for p in over.points])
            lo = np.array([100 * p.yield_.low for p in over.points])
            hi = np.array([100 * p.yield_.high for p in over.points])
            self.yield_plot.addItem(pg.ErrorBarItem(x=t, y=y, top=hi - y, bottom=y - lo, beam=2.0, pen=pg.mkPen("k")))
            self.yield_plot.plot(t, y, pen=pg.mkPen("#0072B2", width=2), symbol="o", symbolBrush="#0072B2",
                                 name="at each temperature")
            overall = 100 * over.overall.estimate
            dashed = pg.mkPen("#D55E00", width=2, style=Qt.PenStyle.DashLine)
            self.yield_plot.addItem(pg.InfiniteLine(pos=overall, angle=0, pen=dashed))
            lines.append("yield at " + ", ".join(f"{p.temperature_c:g} °C {format_pct(p.yield_.estimate)}"
                                                 for p in over.points)
                         + f"; at every judged temperature {format_pct(over.overall.estimate)} (dashed line)")
        else:
            lines.append("no operating range: each board is judged at the design's board temperature")
        if life is not None:
            each = ""
            if over is not None and life.after_points:  # the same boards after the life, at each temperature
                ta = np.array([p.temperature_c for p in life.after_points])
                ya = np.array([100 * p.yield_.estimate for p in life.after_points])
                self.yield_plot.plot(ta, ya, pen=pg.mkPen("#009E73", width=2, style=Qt.PenStyle.DotLine),
                                     symbol="s", symbolBrush="#009E73")
                each = " (green squares: " + ", ".join(f"{p.temperature_c:g} °C {format_pct(p.yield_.estimate)}"
                                                       for p in life.after_points) + ")"
            lines.append(f"after {life.years:.3g} years at {life.temp_c:g} °C: {format_pct(life.after.estimate)}"
                         f"{each}; at delivery {format_pct(life.delivery.estimate)}; life drift is a cautious "
                         "estimate from the grades' load-life ratings")
        self.summary.setText("\n".join(lines))
        self._fill_shift_table(res)

    def _fill_shift_table(self, res) -> None:
        """The stage f0/Q (and cutoff) table over temperature, as the command line prints it."""
        tables = [] if res is None else [t for t in temperature_tables(res) if t.title.startswith("STAGE")]
        t = tables[0] if tables else None
        self.shift_table.clear()
        self.shift_table.setColumnCount(len(t.headers) if t else 0)
        self.shift_table.setRowCount(len(t.rows) if t else 0)
        self.shift_table.setVisible(t is not None)
        if t is None:
            return
        self.shift_table.setHorizontalHeaderLabels(t.headers)
        for i, row in enumerate(t.rows):
            for j, cell in enumerate(row):
                self.shift_table.setItem(i, j, QTableWidgetItem(cell))
        self.shift_table.resizeColumnsToContents()

    def show_bands(self) -> None:
        """The gain bands of the design's first boards at the chosen temperature."""
        d = self._design
        t = float(self.band_temp.value())
        n = min(d.analysis.samples, BAND_BOARDS)
        prep = prepare(d)
        e = evaluate(d, samples=n, curves=True, phase=False, metrics=False, conditions=judged_conditions(d, t),
                     prepared=prep)
        b = bands(e.gain_db)
        f = e.freqs_hz
        p = self.band_plot
        p.clear()
        outer_lo = p.plot(f, b.low, pen=pg.mkPen("#56B4E9"))
        outer_hi = p.plot(f, b.high, pen=pg.mkPen("#56B4E9"))
        p.addItem(pg.FillBetweenItem(outer_lo, outer_hi, brush=pg.mkBrush(86, 180, 233, 60)))
        p.plot(f, b.inner_low, pen=pg.mkPen("#0072B2"))
        p.plot(f, b.inner_high, pen=pg.mkPen("#0072B2"))
        # the mask's gain limits (relative spans at the nominal design's reference, as judged)
        limits = [pl for pl in prep.plans if pl.span.quantity == "gain" and pl.index.size]
        for pl in limits:
            p.plot(f[pl.index], pl.limit, pen=pg.mkPen("#D55E00", width=2))
        # gain from a little above the highest curve down to the lowest limit (or -60 dB
        # below the top without a mask): the spread at the mask stays readable
        top = max([float(np.nanmax(b.high))] + [float(pl.limit.max()) for pl in limits]) + 1.0
        bottom = min(float(pl.limit.min()) for pl in limits) - 10.0 if limits else top - 60.0
        p.setYRange(bottom, top, padding=0.02)
        passed = int(np.count_nonzero(e.passed))
        self.band_note.setText(f"{n:,} boards at {t:g} °C: {100 * b.share:g} % band (dark) and min to max (light), "
                               "the mask's gain limits in orange; "
                               f"{passed:,} of them meet the mask at this temperature")
