"""The recommend dialog's second half: the class II check and the grade sets side by side.

After a recommendation, :func:`decision_extras` (run on the dialog's worker thread) checks the
recommended set for class II dielectrics where the response depends on the capacitor
(:func:`filters.grade_sets.class_ii_in_signal_path`); when there are some, it searches the
cheapest set without them. The current, recommended and class-II-free sets are then judged on
the same boards with the user's own set, if given (:func:`filters.grade_sets.compare_sets`): cost (money per board when the
catalog's prices cover the purchase quantity, else relative cost), yield, interval and lower
bound. :class:`GradeSetsView` shows the warning and the table.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from PySide6.QtWidgets import QTableWidget, QVBoxLayout, QWidget

from ..constraints import money_text, priced, with_constraints
from ..design import Design
from ..recommend import Recommendation, candidate_grades, recommend
from .cli_recommend import life_words
from .qt_background_dialog import fill_table, note_label, pct, result_table

CLASS_II_WARNING = ("common practice keeps class II ceramics (X7R, X5R …) out of filter signal paths, as their "
                    "value moves with temperature, DC bias and age")


HEADS = ["set", "cost", "yield", "interval", "lower bound", "yield after the service life", "its lower bound",
         "target", "grades changed from current"]


@dataclass
class Extras:
    """What :func:`decision_extras` found: the capacitors given class II grades where the
    response depends on them, whether a set without them was found, the sets judged, and
    whether costs are money per board (``currency``) or relative."""

    suspects: list[str] = field(default_factory=list)
    alternative_found: bool | None = None  # None: not searched (no suspects)
    sets: list = field(default_factory=list)  # filters.grade_sets.SetResult, in order
    money: bool = False
    currency: str = ""
    boards: int = 0


def own_sets(design: Design, text: str) -> list[tuple[str, tuple[str, ...]]]:
    """The user's own set from ``C1=C-C0G-2, R1=R-thin-1`` ([] for blank text); raises
    :class:`~tolspread.errors.InputError` naming the field ("your own set") and the pair."""
    from ..grade_sets import parse_set

    return [("yours", parse_set(design, text, "your own set"))] if text.strip() else []


def decision_extras(design: Design, rec: Recommendation, target: float, confidence: float, samples: int,
                    should_stop, own: list | None = None, after_life: bool = False) -> Extras:
    """The class II check, the class-II-free alternative and the comparison of sets (with the
    user's ``own`` sets, from :func:`own_sets`, last)."""
    from ..grade_sets import class_ii_in_signal_path, compare_sets

    p = design.purchase
    out = Extras(money=priced(candidate_grades(design), p.boards) is not None, currency=p.currency,
                 boards=p.boards)
    if rec.chosen is None:
        return out
    sets = [("current", tuple(rec.current_grades)), ("recommended", tuple(rec.chosen.grades))]
    out.suspects = class_ii_in_signal_path(design, rec.chosen.grades)
    if out.suspects:
        alt = recommend(with_constraints(design, signal_path_forbid=["class II"]), target, confidence=confidence,
                        samples=samples, should_stop=should_stop, target_after_life=after_life)
        out.alternative_found = alt.chosen is not None
        if alt.chosen is not None:
            sets.append(("no class II", tuple(alt.chosen.grades)))
    out.sets = compare_sets(design, sets + list(own or []), samples=samples, confidence=confidence)
    return out


class GradeSetsView(QWidget):
    """The class II warning (``warning``) above the sets side by side (``table``)."""

    def __init__(self) -> None:
        super().__init__()
        lay = QVBoxLayout(self)
        lay.setContentsMargins(0, 0, 0, 0)
        self.warning = note_label("class_ii_warning")
        self.warning.hide()
        self.heading = note_label("grade_sets_heading")
        self.table: QTableWidget = result_table("grade_sets", HEADS)
        lay.addWidget(self.warning)
        lay.addWidget(self.heading)
        lay.addWidget(self.table)
        self.hide()

    def show_extras(self, design: Design, ex: Extras, target: float, after_life: bool = False) -> None:
        if not ex.sets:
            self.hide()
            return
        self.show()
        if ex.suspects:
            alt = ("the cheapest set without them is compared below" if ex.alternative_found else
                   "no set without them meets the target")
            self.warning.setText(f"<span style='color:#D55E00'><b>Warning:</b> {', '.join(ex.suspects)} would get "
                                 f"class II dielectrics, yet the response depends on them; {CLASS_II_WARNING}. "
                                 f"{alt[0].upper() + alt[1:]}.</span>")
        self.warning.setVisible(bool(ex.suspects))
        unit = (f"{ex.currency or 'money'} per board at {ex.boards:,} boards" if ex.money else "relative cost")
        self.heading.setText(f"<b>grade sets side by side</b> ({ex.sets[0].yield_.samples:,} boards, the same for "
                             f"each; cost in {unit})")
        current = ex.sets[0].grades
        rows = []
        for r in ex.sets:
            cost = money_text(r.money, ex.currency) if ex.money and r.money is not None else f"{r.cost:.2f}"
            changed = [f"{p.ref} {g}" for p, g, now in zip(design.parts, r.grades, current) if g != now]
            life = [pct(r.after.estimate), pct(r.after_lower)] if r.after is not None else ["", ""]
            rows.append([r.label, cost, pct(r.yield_.estimate), f"{pct(r.yield_.low)} to {pct(r.yield_.high)}",
                         pct(r.lower), *life, "meets" if r.meets(target, after_life) else "misses",
                         ", ".join(changed) if r is not ex.sets[0] else ""])
        has_life = any(r.after is not None for r in ex.sets)
        life = life_words(design)  # "after 20 years at 40 °C"
        target_head = ("target (delivery and life)" if after_life else "target (at delivery)" if has_life
                       else "target")
        self.table.setHorizontalHeaderLabels(HEADS[:5] + [f"yield {life}" if life else HEADS[5], HEADS[6],
                                                          target_head, HEADS[8]])
        for col in (5, 6):  # the after-life columns beside the yield, only when the design states a service life
            self.table.setColumnHidden(col, not has_life)
        fill_table(self.table, rows)
