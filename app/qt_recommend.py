"""The recommendation dialog: find the cheapest grades that meet a yield target, see the
cost-yield trade-off, apply the grades to the design, export the parts list."""
from __future__ import annotations

import pyqtgraph as pg
from PySide6.QtCore import Signal
from PySide6.QtWidgets import (QCheckBox, QDialog, QFileDialog, QFormLayout, QHBoxLayout,
                               QHeaderView, QLabel, QLineEdit, QProgressBar, QPushButton, QSpinBox, QTableWidget,
                               QTableWidgetItem, QVBoxLayout)

from ..constraints import unit_price
from ..design import Design
from ..errors import InputError
from ..parts_list import parts_list_rows, worst_margin_metric, write_parts_csv
from ..recommend import Recommendation, cost_yield_curve, recommend

from . import qt_style as st
from .qt_background_dialog import percent_box
from .cli_recommend import life_words
from .qt_grade_sets import Extras, GradeSetsView, decision_extras, own_sets
from ..report.numbers import format_pct
from .qt_tasks import BackgroundTask


COST_NOTE = "Relative costs come from the catalog (built-in costs are invented demo figures). "
YIELD_CAUTION = ("The yield is an estimate under the grades' stated distributions; confirm with measured parts and "
                 "qualified review.")


class RecommendDialog(QDialog):
    """Target yield and confidence in; the cheapest grade set (and trade-off curve) out."""

    apply_requested = Signal(object)  # Design with the recommended grades

    def __init__(self, design: Design, parent=None) -> None:
        super().__init__(parent)
        self.setWindowTitle("Cheapest grades for a yield target")
        self.setObjectName("recommend_dialog")
        self.design = design
        self.recommendation: Recommendation | None = None
        self.curve: list | None = None
        self.task: BackgroundTask | None = None
        lay = QVBoxLayout(self)
        form = QFormLayout()
        self.target = percent_box("target_yield", 50.0, 99.99, 2, 95.0)
        self.confidence = percent_box("confidence", 50.0, 99.9, 1, 95.0)
        self.samples = QSpinBox()
        self.samples.setObjectName("recommend_samples")
        self.samples.setRange(200, 200_000)
        self.samples.setSingleStep(1000)
        self.samples.setValue(min(design.analysis.samples, 5000))
        self.with_curve = QCheckBox("also find the cheapest set for a range of targets (trade-off curve)")
        form.addRow("yield target (lower confidence bound)", self.target)
        form.addRow("confidence of the bound", self.confidence)
        form.addRow("boards per candidate", self.samples)
        form.addRow("", self.with_curve)
        self.after_life = QCheckBox("the target applies after the service life too")
        self.after_life.setObjectName("target_after_life")
        life = life_words(design)
        self.after_life.setEnabled(bool(life))
        self.after_life.setToolTip(f"a board passes only if it meets the mask at every judged temperature at delivery "
                                   f"and {life}" if life else "the design states no service life (Settings)")
        form.addRow("", self.after_life)
        self.own_set = QLineEdit()  # compared beside the current and recommended sets (app/qt_grade_sets.py)
        self.own_set.setObjectName("own_set")
        self.own_set.setPlaceholderText("optional, e.g. C1=C-C0G-2, R1=R-thin-1 (other parts keep their grade)")
        form.addRow("your own set to compare", self.own_set)
        lay.addLayout(form)
        row = QHBoxLayout()
        self.run_button = QPushButton("Find cheapest grades")
        self.run_button.setObjectName("run_recommend")
        self.cancel_button = QPushButton("Cancel")
        self.cancel_button.setEnabled(False)
        self.progress = QProgressBar()
        self.progress.setRange(0, 0)
        self.progress.hide()
        row.addWidget(self.run_button)
        row.addWidget(self.cancel_button)
        row.addWidget(self.progress, 1)
        lay.addLayout(row)
        self.summary = QLabel("Grades are compared on the same sampled boards; the choice is then checked "
                              "on fresh boards.")
        self.summary.setObjectName("recommend_summary")
        self.summary.setWordWrap(True)
        lay.addWidget(self.summary)
        self.table = QTableWidget(0, 5)
        self.table.setObjectName("recommend_table")
        self.table.setHorizontalHeaderLabels(["part", "value", "current grade", "recommended", "relative cost"])
        self.table.horizontalHeader().setSectionResizeMode(QHeaderView.ResizeMode.Stretch)
        self.table.verticalHeader().hide()
        self.table.setEditTriggers(QTableWidget.EditTrigger.NoEditTriggers)
        lay.addWidget(self.table, 2)
        self.sets_view = GradeSetsView()  # the class II warning and the sets side by side (app/qt_grade_sets.py)
        lay.addWidget(self.sets_view)
        self.curve_plot = pg.PlotWidget()
        self.curve_plot.setObjectName("cost_yield_plot")
        self.curve_plot.setBackground("w")
        self.curve_plot.setLabel("bottom", "yield target", units="%")
        self.curve_plot.setLabel("left", "total relative cost")
        self.curve_plot.showGrid(x=True, y=True, alpha=st.GRID_ALPHA)
        self.curve_plot.hide()
        lay.addWidget(self.curve_plot, 2)
        buttons = QHBoxLayout()
        self.apply_button = QPushButton("Use these grades in the design")
        self.apply_button.setObjectName("apply_recommendation")
        self.apply_button.setEnabled(False)
        self.csv_button = QPushButton("Save parts list (CSV)…")
        self.csv_button.setEnabled(False)
        close = QPushButton("Close")
        buttons.addWidget(self.apply_button)
        buttons.addWidget(self.csv_button)
        buttons.addStretch(1)
        buttons.addWidget(close)
        lay.addLayout(buttons)
        caution = QLabel(COST_NOTE + YIELD_CAUTION)
        caution.setObjectName("recommend_caution")
        caution.setWordWrap(True)
        caution.setStyleSheet("color: #555;")
        lay.addWidget(caution)
        self.caution = caution
        self.run_button.clicked.connect(self.start)
        self.cancel_button.clicked.connect(self.cancel)
        self.apply_button.clicked.connect(self._on_apply)
        self.csv_button.clicked.connect(lambda *_checked: self._on_csv())  # not `checked` as the path
        close.clicked.connect(self.reject)
        self.resize(760, 720)

    def start(self) -> None:
        design = self.design
        target = self.target.value() / 100
        confidence = self.confidence.value() / 100
        samples = self.samples.value()
        want_curve = self.with_curve.isChecked()
        after_life = self.after_life.isChecked()
        try:
            own = own_sets(design, self.own_set.text())
        except InputError as exc:
            self.summary.setText(f"<span style='color:#D55E00'>{exc}</span>; nothing was searched")
            return

        def job(progress, should_stop):
            rec = recommend(design, target, confidence=confidence, samples=samples, progress=progress,
                            should_stop=should_stop, target_after_life=after_life)
            curve = cost_yield_curve(design, confidence=confidence, samples=samples, should_stop=should_stop,
                                     target_after_life=after_life) if want_curve else None
            return rec, curve, decision_extras(design, rec, target, confidence, samples, should_stop, own,
                                               after_life=after_life)

        self.task = BackgroundTask(job, self)
        self.task.finished.connect(self._on_finished)
        self.task.failed.connect(lambda msg, _d: self._done(f"could not recommend: {msg}"))
        self.task.cancelled.connect(lambda: self._done("cancelled; nothing was changed"))
        self.task.progress.connect(lambda d, t: self.summary.setText(f"tried {d} grade sets…"))
        self.run_button.setEnabled(False)
        self.cancel_button.setEnabled(True)
        self.progress.show()
        self.task.start()

    def cancel(self) -> None:
        if self.task is not None:
            self.task.cancel()

    def _done(self, text: str) -> None:
        self.summary.setText(text)
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)
        self.progress.hide()

    def _on_finished(self, out) -> None:
        rec, curve, extras = out
        self.recommendation, self.curve = rec, curve
        self.extras = extras  # the grade sets side by side, also for the report (app/qt_reportexport.py)
        self.run_button.setEnabled(True)
        self.cancel_button.setEnabled(False)
        self.progress.hide()
        self.show_recommendation(rec, curve, extras)

    def show_recommendation(self, rec: Recommendation, curve=None, extras: Extras | None = None) -> None:
        pct = format_pct
        d = self.design
        if rec.chosen is None:
            self.summary.setText(f"No set of grades in the catalog meets the target. {getattr(rec, 'note', '')}")
            self.table.setRowCount(0)
            self.apply_button.setEnabled(False)
            self.csv_button.setEnabled(False)
        else:
            c = rec.chosen
            cat = d.catalog
            check = ""
            if rec.verified is not None:
                check = (f" On {rec.verified.samples:,} fresh boards: yield {pct(rec.verified.estimate)}, lower bound "
                         f"{pct(rec.verified.lower)} — the target {'holds' if rec.meets_on_fresh_seed else 'does NOT hold'}.")
            cost = (f"<b>{c.cost:.4g} {extras.currency or 'money'} per board</b> at {extras.boards:,} boards"
                    if extras is not None and extras.money else
                    f"<b>total relative cost {c.cost:.2f}</b> (current grades {rec.current_cost:.2f})")
            life = life_words(d)
            both = " at delivery and after the service life" if rec.target_after_life else ""
            after = ""
            if c.after_passed is not None:
                after = (f"<br>At delivery {pct(c.delivery_estimate)}; <b>{life}: yield {pct(c.after_estimate)}</b>, "
                         f"lower bound {pct(c.after_lower)} ({c.after_passed:,} of {c.samples:,}, the same boards, "
                         "every judged temperature).")
                if rec.after_life_short:
                    after += (f"<br><span style='color:#D55E00'><b>Caution:</b> {life} this set's yield lower bound "
                              f"{pct(c.after_lower)} is below the target {pct(rec.target_yield)}: it was searched at "
                              "delivery only. Tick \u201cthe target applies after the service life too\u201d and search "
                              "again before choosing these grades.</span>")
            self.summary.setText(f"{cost}; "
                                 f"yield{both} {pct(c.estimate)}, lower bound "
                                 f"{pct(c.lower)} ({c.passed:,} of {c.samples:,} boards; {rec.evaluations} grade "
                                 f"sets tried).{check}{after}")
            self.table.setRowCount(len(d.parts))
            money = extras is not None and extras.money
            self.table.setHorizontalHeaderItem(4, QTableWidgetItem(
                f"unit price ({extras.currency or 'money'})" if money else "relative cost"))
            for i, (p, g) in enumerate(zip(d.parts, c.grades)):
                price = unit_price(cat[g], extras.boards) if money else None
                cells = [p.ref + (" (locked)" if p.locked or p.measured is not None else ""), p.value_text,
                         p.grade, g, f"{cat[g].cost:.2f}" if price is None else f"{price:.4g}"]
                for j, text in enumerate(cells):
                    item = QTableWidgetItem(text)
                    if j == 3 and g != p.grade:
                        item.setForeground(pg.mkColor(st.BLUE))
                        font = item.font()
                        font.setBold(True)
                        item.setFont(font)
                    self.table.setItem(i, j, item)
            self.apply_button.setEnabled(True)
            self.csv_button.setEnabled(True)
        if extras is not None:
            self.sets_view.show_extras(d, extras, rec.target_yield, rec.target_after_life)
            self.caution.setText((f"Prices come from the catalog's price breaks at {extras.boards:,} parts of each. "
                                  if extras.money else COST_NOTE) + YIELD_CAUTION)
        if curve:
            self.curve_plot.show()
            self.curve_plot.clear()
            xs = [100 * t for t, r in curve if r.chosen is not None]
            ys = [r.chosen.cost for t, r in curve if r.chosen is not None]
            self.curve_plot.plot(xs, ys, pen=pg.mkPen(st.BLUE, width=2), symbol="o", symbolBrush=st.BLUE)
            missed = [100 * t for t, r in curve if r.chosen is None]
            if missed and ys:
                self.curve_plot.plot(missed, [max(ys)] * len(missed), pen=None, symbol="x",
                                     symbolPen=pg.mkPen(st.VERMILION, width=2))

    def _on_apply(self) -> None:
        if self.recommendation is not None and self.recommendation.chosen is not None:
            self.apply_requested.emit(self.recommendation.design)
            self.summary.setText(self.summary.text() + "<br>Applied to the design (Undo takes it back).")

    def _on_csv(self, path: str | None = None) -> None:
        """Save the parts list of the recommended grades, with each part's share of the spread
        budget of the worst span (an analysis of the recommended design on the search's boards,
        as ``tolspread recommend --csv`` does)."""
        rec = self.recommendation
        if rec is None or rec.chosen is None:
            return
        if not path:
            path, _ = QFileDialog.getSaveFileName(self, "Save parts list", "parts.csv", "*.csv")
        if not path:
            return
        design = self.design

        def job(progress, should_stop):
            from ..analysis import analyze

            result = analyze(rec.design, samples=rec.chosen.samples, seed=rec.seed, progress=progress,
                             should_stop=should_stop)
            return parts_list_rows(design, rec, result.budget, metric=worst_margin_metric(result.ensemble))

        def done(rows) -> None:
            try:
                write_parts_csv(rows, path)
            except InputError as exc:
                self.summary.setText(self.summary.text() + f"<br>Could not save the parts list: {exc}")
                return
            self.summary.setText(self.summary.text() + f"<br>Parts list written to {path}.")

        self.csv_task = BackgroundTask(job, self)
        self.csv_task.finished.connect(done)
        self.csv_task.failed.connect(lambda msg, _d: self.summary.setText(
            self.summary.text() + f"<br>Could not save the parts list: {msg}"))
        self.csv_task.start()
