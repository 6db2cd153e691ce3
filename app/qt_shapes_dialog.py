"""Design > Distribution shapes…: is the decision robust to what we do not know of the parts?

The yield of the present grades under each distribution shape of
:data:`filters.robustness.SHAPES` (same boards for all), and, with a target yield entered, the
cheapest grades under each shape with "changed" (differs from the first shape's set) and
whether the first shape's set still holds there. Computed in the background
(:func:`filters.robustness.shape_yields`, :func:`filters.robustness.shape_recommendations`).
"""
from __future__ import annotations

from PySide6.QtWidgets import QCheckBox, QFormLayout, QSpinBox

from ..design import MAX_SAMPLES
from .qt_background_dialog import BackgroundDialog, pct, fill_table, open_decision, percent_box, result_table

INTRO = ("The same grades read five ways: a catalog's tolerance says where parts may lie, not how "
         "they are spread. Every shape uses the same sampled boards.")
CAUTION = ("Each yield is an estimate under the stated model of the parts; measurement of real parts says which "
           "model holds, and a qualified review should confirm the choice.")


class ShapesDialog(BackgroundDialog):
    """The five shapes side by side for the present grades, and the recommendation under each."""

    def __init__(self, window) -> None:
        super().__init__("Distribution shapes", "shapes_dialog", "Compare shapes", INTRO, window)
        d = window.session.design
        form = QFormLayout()
        self.samples = QSpinBox()
        self.samples.setObjectName("shapes_samples")
        self.samples.setRange(200, MAX_SAMPLES)
        self.samples.setSingleStep(1000)
        self.samples.setValue(d.analysis.samples)
        self.with_target = QCheckBox("also find the cheapest grades under each shape for a yield target")
        self.with_target.setObjectName("shapes_with_target")
        self.target = percent_box("shapes_target", 50.0, 99.99, 2, 95.0)
        self.confidence = percent_box("shapes_confidence", 50.0, 99.9, 1, 95.0)
        form.addRow("boards", self.samples)
        form.addRow("", self.with_target)
        form.addRow("yield target (lower confidence bound)", self.target)
        form.addRow("confidence of the bound", self.confidence)
        self.lay.addLayout(form)
        self.lay.addLayout(self.run_row)
        self.lay.addWidget(self.status)
        conf = f"{100 * d.analysis.confidence:g} %"
        self.yields = result_table("shapes_yields", ["shape", "model", "yield", f"{conf} interval", "lower bound"])
        self.lay.addWidget(self.yields)
        self.choices = result_table("shapes_choices", ["shape", "cheapest grades (in parts order)", "relative cost",
                                                 "vs first", "first set here"])
        self.choices.hide()
        self.lay.addWidget(self.choices)
        self.note = self.add_note("shapes_note")
        self.lay.addStretch(1)
        self.add_bottom(CAUTION)
        self.run_button.clicked.connect(lambda *_c: self.start())
        self.resize(820, 560)

    def start(self) -> None:
        from ..robustness import SHAPES, shape_recommendations, shape_yields

        design = self.window_.session.design
        samples = self.samples.value()
        target = self.target.value() / 100 if self.with_target.isChecked() else None
        confidence = self.confidence.value() / 100

        def job(progress, should_stop):
            yields = shape_yields(design, samples=samples, should_stop=should_stop)
            choices = None
            if target is not None:
                choices = shape_recommendations(
                    design, target, confidence=confidence, samples=samples,
                    progress=lambda shape: progress(SHAPES.index(shape), len(SHAPES)), should_stop=should_stop)
            return yields, choices, target

        self.note.setText("")
        self.run(job, self.show_result,
                 "searching grades under each shape…" if target is not None else "evaluating each shape…")

    def show_result(self, out) -> None:
        from ..robustness import SHAPE_TEXT

        yields, choices, target = out
        fill_table(self.yields, [[y.shape, SHAPE_TEXT[y.shape], pct(y.yield_.estimate),
                             f"{pct(y.yield_.low)} to {pct(y.yield_.high)}", pct(y.lower)] for y in yields])
        self.status.setText(f"present grades under each shape, the same {yields[0].yield_.samples:,} boards "
                            f"for each")
        self.choices.setVisible(choices is not None)
        self.fit_height()
        if choices is None:
            return
        rows = []
        for c in choices:
            rows.append([c.shape, "no set found" if c.grades is None else ", ".join(c.grades),
                         "" if c.cost is None else f"{c.cost:.2f}", "changed" if c.changed else "",
                         "" if c.reference_holds is None else ("holds" if c.reference_holds else "MISSES")])
        fill_table(self.choices, rows)
        if any(c.changed for c in choices) or any(c.reference_holds is False for c in choices):
            self.note.setText(f"<b>The recommendation for {pct(target)} depends on the distribution "
                              "assumed</b>: measure a sample of the parts, or buy a set that holds under every "
                              "shape.")
        else:
            self.note.setText(f"The recommendation for {pct(target)} is the same under every shape.")


def open_shapes(window) -> ShapesDialog | None:
    """Design > Distribution shapes…: the dialog, the table of yields started at once."""
    return open_decision(window, ShapesDialog, "shapes_dialog", "the shapes are compared by their yield")
