"""Is the decision robust to what we do not know? The yield under other part distributions.

A grade says "+-5 %", not how the values spread inside it. The default model reads the
tolerance as two standard deviations of a normal distribution truncated at the limits
(common practice; JCGM 100 for the coverage factor). A reviewer will ask what happens if that
is wrong. :func:`shape_yields` evaluates the same grades on the same boards (common random
numbers) under each of these readings:

=====================  ==================================================================
``as graded``          each grade as its catalog entry states (normal, 2 sigma, truncated)
``3 sigma``            normal with the tolerance read as 3 standard deviations, truncated
``uniform``            equally likely anywhere inside the tolerance
``binned``             the centre sorted out (sold as the next tighter grade: 5 % parts
                       without those inside +-2 %), two humps near the limits
``shared reel``        half of each part's variance shared by parts of the same marked
                       value and grade on one board (one reel per value), the lot offset
=====================  ==================================================================

With a recommendation, :func:`shape_recommendations` runs the search again under each
reading and says where the chosen grades would change. Exact parts (tolerance 0) and op-amps
keep their model. The numbers are estimates under each stated model; measurement of real
parts says which model holds.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable, Sequence

from .design import Design
from .evaluate import prepare
from .grades import Grade
from .stats import YieldEstimate, lower_bound, yield_estimate
from .temperature import judged_boards

__all__ = [
    "SHAPES",
    "SHAPE_TEXT",
    "ShapeYield",
    "reshaped",
    "design_under",
    "shape_yields",
    "shapes_for_report",
    "ShapeChoice",
    "shape_recommendations",
]

SHAPES: tuple[str, ...] = ("as graded", "3 sigma", "uniform", "binned", "shared reel")
SHAPE_TEXT = {
    "as graded": "each grade as its catalog entry states",
    "3 sigma": "normal, tolerance = 3 standard deviations, truncated",
    "uniform": "uniform inside the tolerance",
    "binned": "centre sorted out as the next tighter grade",
    "shared reel": "half of each part's variance shared by parts from one reel",
}
# Standard tolerances in percent (IEC 60062 letters B to M): the next tighter one is what a
# maker sorts out of a wider grade (common practice).
_STANDARD_TOLERANCES = (0.1, 0.25, 0.5, 1.0, 2.0, 5.0, 10.0, 20.0)
SHARED_REEL = 0.5


def _tighter(tol_pct: float) -> float | None:
    tighter = [t for t in _STANDARD_TOLERANCES if t < tol_pct * (1 - 1e-9)]
    return tighter[-1] if tighter else None


def reshaped(grade: Grade, shape: str) -> Grade:
    """``grade`` under the distribution ``shape`` (one of :data:`SHAPES`).

    Parameters
    ----------
    grade : Grade
        A catalog grade.
    shape : str
        One of :data:`SHAPES`; ``as graded`` and ``shared reel`` leave the grade as it is.

    Returns
    -------
    Grade
        The same grade (name, cost, temperature and life figures) with its distribution
        replaced; exact grades and op-amps unchanged.
    """
    if shape not in SHAPES:
        raise ValueError(f"unknown shape {shape!r}")
    if grade.tolerance_pct <= 0 or grade.kind == "opamp" or shape in ("as graded", "shared reel"):
        return grade
    if shape == "3 sigma":
        return replace(grade, distribution="normal", coverage=3.0, truncate=True, bin_inner_pct=0.0)
    if shape == "uniform":
        return replace(grade, distribution="uniform", bin_inner_pct=0.0)
    inner = _tighter(grade.tolerance_pct)
    if inner is None:
        return grade
    return replace(grade, distribution="binned", bin_inner_pct=inner, coverage=2.0, truncate=True)


def design_under(design: Design, shape: str) -> Design:
    """``design`` with every grade of its catalog (built-in and its own) under ``shape``.

    Parameters
    ----------
    design : Design
        The design.
    shape : str
        One of :data:`SHAPES`.

    Returns
    -------
    Design
        The design whose catalog holds the reshaped grades under their own names (so a
        recommendation searches the same grades), with the lot share set for ``shared reel``.
    """
    out = replace(design, grades=tuple(reshaped(g, shape) for g in design.catalog.grades))
    if shape == "shared reel":
        out = out.with_analysis(lot_share=max(design.analysis.lot_share, SHARED_REEL))
    return out


@dataclass(frozen=True)
class ShapeYield:
    """The yield of one design under one ``shape``, with its interval and lower bound
    (fractions) at the design's confidence."""

    shape: str
    yield_: YieldEstimate
    lower: float

    def to_dict(self) -> dict:
        """Plain numbers for the JSON output."""
        return {"shape": self.shape, "model": SHAPE_TEXT[self.shape], "yield": self.yield_.to_dict(),
                "lower_bound": self.lower}


def shape_yields(design: Design, *, samples: int | None = None, seed: int | None = None,
                 shapes: Sequence[str] = SHAPES,
                 should_stop: Callable[[], bool] | None = None) -> list[ShapeYield]:
    """The yield of ``design``'s present grades under each distribution shape, same boards.

    Parameters
    ----------
    design : Design
        The design with the grades to judge.
    samples, seed : int, optional
        Boards and seed (default: the design's); every shape uses the same standard scores.
    shapes : sequence of str
        Which of :data:`SHAPES`.
    should_stop : callable, optional
        ``should_stop()`` returning True stops the run (:class:`~tolspread.errors.Cancelled`).

    Returns
    -------
    list of ShapeYield
        One per shape, in the order asked.
    """
    a = design.analysis
    out = []
    prep = prepare(design)  # the nominal design does not depend on the shape
    for shape in shapes:
        d = design_under(design, shape)
        ens = judged_boards(d, samples=samples, seed=seed, prepared=prep if shape != "shared reel" else None,
                            should_stop=should_stop)
        est = yield_estimate(ens.passed, None, a.confidence, a.interval)  # type: ignore[arg-type]
        lb = float(lower_bound(int(est.passed), int(est.samples), a.confidence, a.interval))  # type: ignore[arg-type]
        out.append(ShapeYield(shape, est, lb))
    return out


def shapes_for_report(result) -> list[ShapeYield]:
    """The grades of an analysis ``result`` under the other shapes, on its boards (its
    samples, seed and sampling method), for the report's robustness table. "As graded" is
    the analysis's own yield and is left out, unless the analysis judged more than the
    reference temperature (an operating range, a service life) or other grades than the
    design's: then all five are evaluated here, as delivered (over the operating range when
    the design has one, :func:`filters.temperature.judged_boards`).

    Parameters
    ----------
    result : AnalysisResult
        The analysis the report is built from.

    Returns
    -------
    list of ShapeYield
        One per shape evaluated, in :data:`SHAPES` order.
    """
    d = result.design
    if result.ensemble.method != d.analysis.method:
        d = d.with_analysis(method=result.ensemble.method)
    own = (result.temperature is None and result.life is None
           and tuple(result.ensemble.grades) == d.part_grades())
    return shape_yields(d, samples=result.samples, seed=result.seed, shapes=SHAPES[1:] if own else SHAPES)


@dataclass(frozen=True)
class ShapeChoice:
    """The recommendation under one ``shape``: the chosen grade names (None: no set found),
    its relative cost, its yield's lower bound on the search boards, and whether it differs
    from the recommendation under the grades as stated."""

    shape: str
    grades: tuple[str, ...] | None
    cost: float | None
    lower: float | None
    changed: bool
    reference_lower: float | None = None  # the first shape's set judged under this shape
    reference_holds: bool | None = None   # ... and whether its lower bound meets the target

    def to_dict(self) -> dict:
        """Plain values for the JSON output."""
        return {"shape": self.shape, "model": SHAPE_TEXT[self.shape], "grades": self.grades,
                "cost": self.cost, "lower_bound": self.lower, "changed": self.changed,
                "reference_lower_bound": self.reference_lower, "reference_holds": self.reference_holds}


def shape_recommendations(design: Design, target_yield: float, *, confidence: float = 0.95,
                          samples: int | None = None, seed: int | None = None,
                          shapes: Sequence[str] = SHAPES,
                          progress: Callable[[str], None] | None = None,
                          should_stop: Callable[[], bool] | None = None) -> list[ShapeChoice]:
    """The cheapest grades meeting ``target_yield`` under each shape; flags where they change.

    Parameters
    ----------
    design : Design
        The design (its catalog's grades are reshaped for each run).
    target_yield, confidence : float
        As for :func:`filters.recommend.recommend` (fractions).
    samples, seed : int, optional
        Boards per candidate and their seed (default: the design's).
    shapes : sequence of str
        Which of :data:`SHAPES`; the first is the reference the others are compared with.
    progress : callable, optional
        Called with each shape's name before its search.
    should_stop : callable, optional
        ``should_stop()`` returning True stops the searches (:class:`~tolspread.errors.Cancelled`).

    Returns
    -------
    list of ShapeChoice
        One per shape; ``changed`` is True where the chosen grade names differ from the first;
        ``reference_lower``/``reference_holds`` judge the first shape's set under each shape
        on the same boards (does the set bought on the first model still meet the target?).
    """
    from .recommend import design_with_grades, recommend

    out: list[ShapeChoice] = []
    reference: tuple[str, ...] | None = None
    ref_design: Design | None = None
    for k, shape in enumerate(shapes):
        if progress is not None:
            progress(shape)
        shaped = design_under(design, shape)
        rec = recommend(shaped, target_yield, confidence=confidence, samples=samples, seed=seed,
                        should_stop=should_stop)
        c = rec.chosen
        names = None if c is None else tuple(c.grades)
        if k == 0:
            reference = names
            if names is not None:
                ref_design = design_with_grades(design, [design.catalog[n] for n in names])
        ref_lower = holds = None
        if ref_design is not None:
            n_boards = c.samples if c is not None else samples
            [sy] = shape_yields(ref_design, samples=n_boards, seed=rec.seed, shapes=(shape,),
                                should_stop=should_stop)
            ref_lower = float(lower_bound(int(sy.yield_.passed), int(sy.yield_.samples), confidence,
                                          design.analysis.interval))  # type: ignore[arg-type]
            holds = ref_lower >= target_yield
        out.append(ShapeChoice(shape, names, None if c is None else c.cost, None if c is None else c.lower,
                               k > 0 and names != reference, ref_lower, holds))
    return out
