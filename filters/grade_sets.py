"""Grade sets side by side, and the class II check on a recommendation.

A design review compares a few sets of grades: the present one, the recommended one, the
cheapest without class II dielectrics in the signal path, and the engineer's own. Each is
judged on the same boards (the same seed: common random numbers), with its relative cost,
its money per board when the catalog has prices for the purchase quantity, its yield with
its interval and its one-sided lower bound. Estimates under the grades' stated models; to
be confirmed by measurement of real parts and qualified review.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from .constraints import is_class_ii, priced, signal_path_capacitors
from .design import Design
from .errors import InputError
from .evaluate import prepare
from .stats import YieldEstimate, lower_bound, yield_estimate
from .temperature import judge_service_life, judged_boards

__all__ = [
    "SetResult",
    "parse_set",
    "compare_sets",
    "class_ii_in_signal_path",
]


@dataclass(frozen=True)
class SetResult:
    """One grade set judged: ``label``, grade names in parts order, relative ``cost``, money
    per board (``money``, None without prices), the yield and its one-sided ``lower`` bound.

    When the design states a service life: ``after`` the yield of the same boards after it
    (each judged at every judged temperature), its ``after_lower`` bound, and ``both_lower``
    the bound of the boards that pass at delivery and after the life; None otherwise."""

    label: str
    grades: tuple[str, ...]
    cost: float
    money: float | None
    yield_: YieldEstimate
    lower: float
    after: YieldEstimate | None = None
    after_lower: float | None = None
    both_lower: float | None = None

    def meets(self, target: float, after_life: bool = False) -> bool:
        """Whether the lower bound meets ``target`` (fraction): at delivery, or with
        ``after_life`` at delivery and after the service life on the same boards."""
        lb = self.both_lower if after_life and self.both_lower is not None else self.lower
        return lb >= target

    def to_dict(self) -> dict:
        """Plain values for the JSON output."""
        out = {"label": self.label, "grades": list(self.grades), "relative_cost": self.cost,
               "money_per_board": self.money, "yield": self.yield_.to_dict(), "lower_bound": self.lower}
        if self.after is not None:
            out.update({"after_life_yield": self.after.to_dict(), "after_life_lower_bound": self.after_lower,
                        "delivery_and_after_life_lower_bound": self.both_lower})
        return out


def parse_set(design: Design, text: str, path: str = "--compare") -> tuple[str, ...]:
    """A grade set from ``R1=R-thin-0.5,C1=C-C0G-2`` (parts not named keep their grade).

    Parameters
    ----------
    design : Design
        The design (its parts and catalog).
    text : str
        Comma-separated ``REF=GRADE`` pairs.
    path : str
        The option's name for messages.

    Returns
    -------
    tuple of str
        Grade names in parts order.
    """
    names = [p.grade for p in design.parts]
    cat = design.catalog
    for item in text.split(","):
        ref, sep, grade = (x.strip() for x in item.partition("="))
        if not sep or not ref or not grade:
            raise InputError(f"write REF=GRADE pairs separated by commas, not {item.strip()!r}", path)
        try:
            i = design.part_index(ref)
        except InputError:
            raise InputError(f"no part {ref!r} in the design", path) from None
        if grade not in cat:
            raise InputError(f"unknown grade {grade!r} for {ref}", path)
        if not cat[grade].fits(design.parts[i].kind):
            raise InputError(f"grade {grade} is for {cat[grade].kind} parts; {ref} is a {design.parts[i].kind} part",
                             path)
        names[i] = grade
    return tuple(names)


def compare_sets(design: Design, sets: Sequence[tuple[str, Sequence[str]]], *, samples: int | None = None,
                 seed: int | None = None, confidence: float | None = None) -> list[SetResult]:
    """Judge each grade set on the same boards.

    Parameters
    ----------
    design : Design
        The design (values, mask, catalog, purchase).
    sets : sequence of (label, grade names in parts order)
        The sets to compare.
    samples, seed : int, optional
        Boards and seed (default: the design's); the same for every set.
    confidence : float, optional
        Confidence of the interval and bound (default: the design's).

    Returns
    -------
    list of SetResult
        In the order given.
    """
    from .recommend import design_with_grades

    a = design.analysis
    conf = a.confidence if confidence is None else confidence
    cat = design.catalog
    prep = prepare(design)
    out = []
    for label, names in sets:
        d = design_with_grades(design, [cat[n] for n in names])
        grades = d.part_grades()
        ens = judged_boards(d, samples=samples, seed=seed, grades=grades, prepared=prep)
        est = yield_estimate(ens.passed, None, conf, a.interval)  # type: ignore[arg-type]
        lb = float(lower_bound(int(est.passed), int(est.samples), conf, a.interval))  # type: ignore[arg-type]
        life: tuple = ()
        if a.service_hours:  # the same boards after the service life, at every judged temperature
            after_m = judge_service_life(d, prep, ens, est).worst_margins  # type: ignore[union-attr]
            after_ok = np.all(after_m >= 0, axis=1)
            after = yield_estimate(after_ok, None, conf, a.interval)  # type: ignore[arg-type]
            both = int(np.count_nonzero(after_ok & ens.passed))
            life = (after, float(lower_bound(int(after.passed), int(after.samples), conf, a.interval)),  # type: ignore[arg-type]
                    float(lower_bound(both, int(est.samples), conf, a.interval)))  # type: ignore[arg-type]
        cost = math.fsum(cat[n].cost for n in names)
        money_rows = priced([[cat[n]] for n in names], design.purchase.boards)
        money = None if money_rows is None else math.fsum(r[0].cost for r in money_rows)
        out.append(SetResult(label, tuple(names), cost, money, est, lb, *life))
    return out


def class_ii_in_signal_path(design: Design, names: Sequence[str]) -> list[str]:
    """References of capacitors given a class II grade in ``names`` although the response
    depends on them (:func:`filters.constraints.signal_path_capacitors`).

    Parameters
    ----------
    design : Design
        The design.
    names : sequence of str
        Grade names, one per part in design order.

    Returns
    -------
    list[str]
        Part refs.
    """
    cat = design.catalog
    suspects = [p.ref for p, n in zip(design.parts, names) if n in cat and is_class_ii(cat[n])]
    if not suspects:
        return []
    signal = signal_path_capacitors(design)
    return [r for r in suspects if r in signal]
