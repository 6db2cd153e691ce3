"""Design > Centre values…: neighbouring values of each part's series that raise the yield.

:func:`filters.centring.centre_values` runs in the background (the window stays live); the
dialog shows the moves, the yield now and centred on the same boards, the gain with its
standard error, and **Apply** makes every move one undoable edit (Undo restores every value).
"""
from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QPushButton

from ..centring import CentringResult
from ..design import Design
from ..values import PART_UNITS, format_value
from .qt_background_dialog import BackgroundDialog, pct, fill_table, open_decision, result_table

INTRO = ("Tries each part's neighbouring values of its series (one below, one above) on the same "
         "sampled boards, every combination for up to 10 parts and a guided search beyond; the "
         "grades stay as they are.")
CAUTION = ("Same grades, same cost. The gain is an estimate under the grades' stated distributions and the "
           "spec mask as entered; confirm it with measured parts and qualified review.")


class CentreDialog(BackgroundDialog):
    """Search, see the moves and both yields, apply them as one edit."""

    def __init__(self, window) -> None:
        super().__init__("Centre values", "centre_dialog", "Search neighbouring values", INTRO, window)
        self.result_: CentringResult | None = None
        self.searched: Design | None = None
        self.lay.addLayout(self.run_row)
        self.lay.addWidget(self.status)
        self.table = result_table("centre_moves", ["part", "now", "centred", "series"])
        self.lay.addWidget(self.table)
        self.summary = self.add_note("centre_summary")
        self.summary.setTextFormat(Qt.TextFormat.RichText)
        self.apply_button = QPushButton("Apply all moves")
        self.apply_button.setObjectName("centre_apply")
        self.apply_button.setEnabled(False)
        self.lay.addStretch(1)
        self.add_bottom(CAUTION, self.apply_button)
        self.run_button.clicked.connect(lambda *_c: self.start())
        self.apply_button.clicked.connect(lambda *_c: self.apply())
        window.session.design_changed.connect(self._on_design_changed)
        self.resize(620, 480)

    def start(self) -> None:
        from ..centring import centre_values

        design = self.window_.session.design
        self.searched = design
        self.apply_button.setEnabled(False)
        self.run(lambda progress, stop: centre_values(design, progress=progress, should_stop=stop), self.show_result,
                 "screening combinations on the same boards…")

    def show_result(self, res: CentringResult) -> None:
        self.result_ = res
        d = res.design
        kinds = {p.ref: p.kind for p in d.parts}
        units = {m.ref: PART_UNITS.get(kinds[m.ref], "") for m in res.moves}
        fill_table(self.table, [[m.ref, format_value(m.old, units[m.ref]), format_value(m.new, units[m.ref]), m.series]
                                for m in res.moves])
        self.status.setText(res.search_text(refs=False))
        b, a = res.before, res.after
        if not res.moves:
            self.summary.setText(f"No neighbouring values beat the present ones (yield {pct(b.estimate)} on "
                                 f"{b.samples:,} boards).")
        else:
            self.summary.setText(
                f"yield now <b>{pct(b.estimate)}</b> [{pct(b.low)}, {pct(b.high)}]<br>"
                f"yield centred <b>{pct(a.estimate)}</b> [{pct(a.low)}, {pct(a.high)}] "
                f"({a.samples:,} boards, the same for both)<br>"
                f"gain <b>{100 * res.gain:+.2f} points</b>, standard error {100 * res.gain_standard_error:.2f} "
                f"(boards changed: {res.only_after:,} now pass, {res.only_before:,} now fail)")
        self._on_design_changed(self.window_.session.design)
        self.fit_height()

    def _on_design_changed(self, design: Design) -> None:
        res = self.result_
        fresh = res is not None and bool(res.moves) and design is self.searched
        self.apply_button.setEnabled(fresh)
        if res is not None and res.moves and not fresh and not self.running:
            self.apply_button.setToolTip("the design changed since the search: search again")
        else:
            self.apply_button.setToolTip("")

    def apply(self) -> None:
        """Every move as one undoable edit on the design that was searched."""
        res, d = self.result_, self.window_.session.design
        if res is None or not res.moves or d is not self.searched:
            return
        for m in res.moves:
            d = d.with_part(m.ref, value=m.new, text="")
        reason = self.window_.apply_edit(d, f"centre values ({len(res.moves)} parts)")
        if reason is None:  # Undo brings back the searched design and with it the button
            self.summary.setText(self.summary.text() + "<br>Applied to the design (Undo restores every value).")
        else:
            self.summary.setText(self.summary.text() + f"<br>Not applied: {reason}")


def open_centre(window) -> CentreDialog | None:
    """Design > Centre values…: the dialog, its search started at once."""
    return open_decision(window, CentreDialog, "centre_dialog", "centring needs a yield to raise")
