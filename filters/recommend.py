"""The cheapest set of catalog grades whose yield meets a target, and the cost-yield curve.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

:func:`recommend` looks for the set of grades (one per part) with the lowest total
relative cost such that the one-sided lower confidence bound of the yield is at least the
target. Yields are fractions in [0, 1]; costs are the catalog's relative costs (no unit);
frequencies in Hz; part values in SI units (ohm, farad, henry, hertz).

Every candidate set is evaluated on the same boards (the same seed and sample count:
:func:`filters.evaluate.evaluate` draws the same standard scores whatever the grades,
"common random numbers"), so two candidates differ only by their grades, never by luck of
the draw. The lower bound is :func:`filters.stats.lower_bound` (one-sided, at the
requested confidence, Wilson or Clopper-Pearson).

Candidates per part are the catalog grades that fit the part's kind, cheapest first,
without ideal (zero-tolerance) grades such as ``EXACT``: nothing real is exact.

Search (see :func:`recommend` for the details):

* few combinations (product of the candidate counts at most ``exhaustive_limit``): every
  combination in order of cost, stopping at the first that meets the target - it is the
  cheapest;
* more: a guided search from the tightest grades down, by single cheaper steps (ties
  ordered by the spread budget), then jumps and pair exchanges, until no single part can
  move to a cheaper grade with the target still met.

The chosen set is then re-evaluated on a fresh seed with more boards, to show that the
yield was not an accident of the boards the search used.

Modules: this one checks the inputs, chooses the search and builds the
:class:`Recommendation`; the evaluator and the searches are :mod:`filters.grade_search`;
the parts list and its CSV file :mod:`filters.parts_list`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence

import numpy as np

from .constraints import allowed, priced, signal_path_capacitors
from .design import MAX_SAMPLES, Design
from .errors import InputError
from .evaluate import Prepared, prepare
from .grades import Catalog, Grade
from .grade_search import (FRESH_SEED_OFFSET, Candidate, Capped, Evaluator, SearchCache, cheapest_seen,
                           exhaustive_search, guided_search)
from .memory import check_boards
# the parts list lives in filters/parts_list.py; its names stay importable from here too
from .parts_list import (FORMULA_STARTS, PARTS_COLUMNS, parts_list_rows, smallest_series,  # noqa: F401
                         worst_margin_metric, write_parts_csv)
from .sampling import REFERENCE_CELSIUS
from .stats import INTERVAL_METHODS, lower_bound, samples_to_show

__all__ = [
    "FRESH_SEED_OFFSET",
    "DEFAULT_TARGETS",
    "Candidate",
    "Recommendation",
    "candidate_grades",
    "boards_needed",
    "current_cost",
    "recommend",
    "design_with_grades",
    "cost_yield_curve",
]

DEFAULT_TARGETS: tuple[float, ...] = (0.5, 0.8, 0.9, 0.95, 0.99, 0.995, 0.999)


@dataclass(frozen=True)
class Recommendation:
    """The result of :func:`recommend`.

    ``chosen`` is the cheapest set found that meets ``target_yield`` (fraction) at
    ``confidence`` (fraction), or None when no set of catalog grades does (``note`` says
    why). ``verified`` is the chosen set re-evaluated on seed ``seed + 1_000_003`` with
    ``verify_factor`` times the boards; ``meets_on_fresh_seed`` says whether its lower
    bound there still meets the target. ``design`` is the design with the chosen grades
    (what-if tolerances cleared), or the input design when nothing was chosen.
    ``evaluations`` counts candidate sets evaluated by this search (sets taken from a
    shared cache and the verification run are not counted); ``history`` lists every
    candidate the search looked at, in order. ``search`` is ``"exhaustive"`` or
    ``"guided"``; ``capped`` is True when the search stopped at ``max_evaluations``
    (then the chosen set meets the target but may not be the cheapest or locally minimal).

    ``current_grades`` are the input design's grade names per part (design order) and
    ``current_cost`` their total relative cost in the catalog searched (a grade the catalog
    lacks counts at the design's own cost); compare them with ``chosen``.

    When nothing is chosen, ``reason`` says why: ``"boards"`` - too few boards to show
    the target (the best set's estimated yield exceeds it, or nothing could be shown even
    with every board passing; ``boards_needed`` boards would show it at the yield
    measured, or with every board passing), ``"catalog"`` - even the best set of catalog
    grades (``best``: the highest lower bound seen) has an estimated yield at or below the
    target, ``"capped"`` - the search stopped at ``max_evaluations`` first. Empty when a
    set is chosen.
    """

    target_yield: float
    confidence: float
    chosen: Candidate | None
    verified: Candidate | None
    meets_on_fresh_seed: bool
    design: Design
    evaluations: int
    history: list[Candidate] = field(default_factory=list)
    search: str = "exhaustive"
    capped: bool = False
    note: str = ""
    method: str = "wilson"
    seed: int = 0
    current_grades: tuple[str, ...] = ()
    current_cost: float = float("nan")
    reason: str = ""
    boards_needed: int | None = None
    best: Candidate | None = None
    target_after_life: bool = False
    service_hours: float = 0.0
    service_temp_c: float = 25.0

    @property
    def after_life_short(self) -> bool:
        """True when the design states a service life and the chosen set's after-life yield
        lower bound (on the search's boards) is below the target: the caution to show."""
        c = self.chosen
        return c is not None and c.after_lower is not None and c.after_lower < self.target_yield

    def to_dict(self) -> dict[str, Any]:
        refs = [p.ref for p in self.design.parts]
        return {
            "target_after_life": bool(self.target_after_life),
            "service_life": ({"hours": self.service_hours, "temperature_c": self.service_temp_c}
                             if self.service_hours else None),
            "after_life_below_target": self.after_life_short,
            "current_grades": dict(zip(refs, self.current_grades)),
            "current_cost": float(self.current_cost),
            "reason": self.reason,
            "boards_needed": self.boards_needed,
            "best": self.best.to_dict() if self.best else None,
            "target_yield": float(self.target_yield),
            "confidence": float(self.confidence),
            "method": self.method,
            "seed": int(self.seed),
            "search": self.search,
            "chosen": self.chosen.to_dict() if self.chosen else None,
            "grades": dict(zip(refs, self.chosen.grades)) if self.chosen else None,
            "verified": self.verified.to_dict() if self.verified else None,
            "meets_on_fresh_seed": bool(self.meets_on_fresh_seed),
            "evaluations": int(self.evaluations),
            "capped": bool(self.capped),
            "note": self.note,
            "history": [c.to_dict() for c in self.history],
        }


# --- input checks ----------------------------------------------------------------------

def _fraction(value: object, path: str, lo: float, lo_closed: bool) -> float:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise InputError(f"must be a number, not {value!r}", path)
    v = float(value)
    ok = math.isfinite(v) and (v >= lo if lo_closed else v > lo) and v < 1.0
    if not ok:
        raise InputError(f"must be {'at least' if lo_closed else 'above'} {lo:g} and below 1, not {v:g}", path)
    return v


def _whole(value: object, path: str, lo: int, hi: int | None = None) -> int:
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, (int, np.integer)):
        raise InputError(f"must be a whole number, not {value!r}", path)
    v = int(value)
    if v < lo or (hi is not None and v > hi):
        raise InputError(f"must be from {lo} to {hi}, not {v}" if hi is not None
                         else f"must be at least {lo}, not {v}", path)
    return v


def candidate_grades(design: Design, catalog: Catalog | None = None) -> list[list[Grade]]:
    """Per part (design order), the catalog grades that fit its kind, cheapest first,
    without ideal zero-tolerance grades. Raises :class:`InputError` (path ``catalog``)
    when a part has none.

    Parameters
    ----------
    design : Design
        The design; its parts in design order, its temperature range (deg C) for dominance.
    catalog : Catalog, optional
        The grades to choose from (default: the design's catalog).

    Returns
    -------
    list[list[Grade]]
        One list per part (P lists), each ordered cheapest first, with grades that another
        grade dominates (dearer, no tighter in tolerance, temperature effect or drift, same
        shape) left out.
    """
    cat = design.catalog if catalog is None else catalog
    a = design.analysis
    lists = []
    own = design.part_grades()
    signal = signal_path_capacitors(design) if design.purchase.signal_path_forbid else set()
    members = {m for net in design.networks for m in net.members}  # filters/networks.py
    for i, p in enumerate(design.parts):
        # constraints (filters/constraints.py) keep the grade; so does a network member, whose
        # spread is its network's (another grade would name a different part, not a cheaper one)
        if p.locked or p.measured is not None or p.ref in members:
            lists.append([own[i]])
            continue
        gs = [g for g in cat.for_kind(p.kind) if g.tolerance_pct > 0]
        if not gs:
            raise InputError(f"no grade in the catalog fits part {p.ref} ({p.kind}) other than an "
                             "ideal one", "catalog")
        ok = [g for g in gs if allowed(design, i, g, signal)]
        if not ok:
            raise InputError(f"every catalog grade for part {p.ref} is forbidden (forbid: "
                             f"{', '.join(p.forbid + design.purchase.signal_path_forbid)})", f"parts[{i}].forbid")
        lists.append(ok)
    # with a purchase quantity and prices, costs are unit prices (before the dominance rule)
    lists = priced(lists, design.purchase.boards) or lists
    return [[g for g in gs if not any(_dominates(h, g, a.temp_low_c, a.temp_high_c, a.service_hours,
                                                 a.service_temp_c) for h in gs)] for gs in lists]


def _temperature_extent(g: Grade, t_low: float, t_high: float) -> float:
    """Largest relative value change the temperature coefficient can cause over the range."""
    dt = max(abs(t_low - REFERENCE_CELSIUS), abs(t_high - REFERENCE_CELSIUS))
    return (abs(g.tempco_ppm) + g.tempco_spread_ppm) * 1e-6 * dt


def _life_extent(g: Grade, hours: float, temp_c: float) -> float:
    """Largest relative value change the grade's life drift and ageing cause after ``hours``
    in service at ``temp_c`` (deg C); 0 when the design states no service life."""
    from .temperature_physics import ageing_factor, life_fraction

    return life_fraction(g, hours, temp_c) + abs(1.0 - ageing_factor(g, hours))


def _dominates(h: Grade, g: Grade, t_low: float, t_high: float, hours: float = 0.0, temp_c: float = 25.0) -> bool:
    """True when grade ``h`` is never worse than ``g`` and strictly better somewhere: no
    dearer, the same distribution shape, no wider tolerance, temperature effect or drift
    (with a service life of ``hours`` at ``temp_c``: nor life drift and ageing).
    Such a ``g`` can never be the cheapest choice, so the search leaves it out."""
    if h is g or h.name == g.name:
        return False
    same_shape = (h.distribution, h.coverage, h.truncate, h.bin_inner_pct) == \
        (g.distribution, g.coverage, g.truncate, g.bin_inner_pct)
    if not same_shape or h.tempco_ppm != g.tempco_ppm and _temperature_extent(g, t_low, t_high) > 0:
        return False
    keys_h = (h.cost, h.tolerance_pct, _temperature_extent(h, t_low, t_high), h.drift_pct,
              _life_extent(h, hours, temp_c))
    keys_g = (g.cost, g.tolerance_pct, _temperature_extent(g, t_low, t_high), g.drift_pct,
              _life_extent(g, hours, temp_c))
    return all(x <= y for x, y in zip(keys_h, keys_g)) and keys_h != keys_g


def boards_needed(target_yield: float, confidence: float = 0.95, method: str = "wilson") -> int:
    """The fewest boards n whose lower bound can reach ``target_yield`` at all (all n pass).

    Parameters
    ----------
    target_yield : float
        Target yield, a fraction in (0, 1).
    confidence : float
        Confidence of the one-sided lower bound, a fraction in [0.5, 1).
    method : str
        Interval method, ``"wilson"`` or ``"exact"`` (:func:`filters.stats.lower_bound`).

    Returns
    -------
    int
        The number of boards (at least 1).
    """
    return samples_to_show(target_yield, 1.0, confidence, method)  # type: ignore[arg-type]


def current_cost(design: Design, catalog: Catalog | None = None) -> float:
    """Total cost of the design's own grades, priced from ``catalog`` (default the design's);
    a grade the catalog lacks counts at the design's own figure. With a purchase quantity and
    prices for every grade it is money per board (:func:`filters.constraints.priced`), as the
    search counts it; otherwise the catalog's relative cost.

    Parameters
    ----------
    design : Design
        The design whose own grades are priced.
    catalog : Catalog, optional
        The catalog to price them from (default: the design's).

    Returns
    -------
    float
        Total cost per board: money per board at the purchase quantity, else the sum of
        the catalog's relative costs (no unit).
    """
    cat = design.catalog if catalog is None else catalog
    grades = [[cat[g.name] if g.name in cat else g] for g in design.part_grades()]
    grades = priced(grades, design.purchase.boards) or grades
    return math.fsum(gs[0].cost for gs in grades)


# --- public entry points -------------------------------------------------------------------

def _cache_key(design: Design, cands: list[list[Grade]], samples: int, seed: int,
               confidence: float, method: str, after_life: bool = False) -> tuple:
    return (id(design), tuple(tuple(cs) for cs in cands), samples, seed, confidence, method, after_life)


def recommend(design: Design, target_yield: float, *, confidence: float = 0.95,
              samples: int | None = None, seed: int | None = None, catalog: Catalog | None = None,
              method: str = "wilson", verify_factor: int = 4, max_evaluations: int = 400,
              exhaustive_limit: int = 256, progress: Callable[[int, int], None] | None = None,
              should_stop: Callable[[], bool] | None = None, target_after_life: bool = False) -> Recommendation:
    """The cheapest set of catalog grades whose yield lower bound meets ``target_yield``.

    ``target_yield`` is a fraction in (0, 1); ``confidence`` a fraction in [0.5, 1): the
    one-sided lower confidence bound of the yield (:func:`filters.stats.lower_bound`, by
    ``method`` ``"wilson"`` or ``"exact"``) must be at least the target. ``samples``
    (default: the design's) boards from ``seed`` (default: the design's) are evaluated for
    every candidate set - the same boards for all. ``catalog`` defaults to the design's.

    Candidates per part: :func:`candidate_grades` (fitting grades, cheapest first, no
    ideal grades). If even every board passing could not give a lower bound at the target
    with this many boards, nothing is evaluated and ``note`` says how many boards it needs.

    Search. When the product of the candidate counts is at most ``exhaustive_limit``,
    every combination is evaluated in order of total cost (ties in a fixed order) until
    the first one meets the target; it is the cheapest. Otherwise a guided search:

    1. start from the costliest (tightest) grade of every part; if that fails, no set is
       chosen;
    2. greedy descent: of the moves of one part one step to its next cheaper grade that
       still meet the target, take the one that saves the most cost; equal savings go to
       the part with the smallest spread-budget share (each part's share of the variance,
       :func:`filters.budget.spread_budget` on the current set's boards, summed over the
       margins of the spans some board fails - over every span if none fails, over the
       cutoff without a mask). Moves are evaluated largest saving first, so the first that
       meets the target is taken; a part whose move failed is skipped while others succeed
       and tried again before the descent ends. Repeat until no single cheaper step meets
       the target;
    3. jumps, then pair exchanges: try every move of one part two or more steps cheaper
       (a catalog sorted by cost need not be sorted by tolerance: a 2 % film capacitor
       can cost more than a 1 % ceramic one), then every move of one part one step cheaper
       and another one step dearer that lowers the total cost, each the largest saving
       first; take the first that meets the target and go back to 2; stop when none does;
    4. a second run of 2-3 from the tightest set whose descent takes the step that loses
       the fewest passing boards per unit of cost saved (the largest-saving rule can spend
       the yield margin on one big step and get stuck); the cheaper of the two ends is kept
       (sets already evaluated are not evaluated again);
    5. polish: if any set evaluated so far on these boards meets the target more cheaply
       than the set reached, run 2-3 from it; repeat until none does.

    The guided result therefore never keeps a costlier grade where a cheaper one of the
    same part also meets the target (every such single-part move from it was evaluated
    and failed), unless the first run of 2-3 stopped at ``max_evaluations`` (``capped``;
    then the cheapest set seen that meets the target is shown). When only steps 4-5 are
    cut short, the cheapest completed local optimum is kept and ``note`` says so. It is a
    local optimum, not always the global one.

    The chosen set is re-evaluated on seed ``seed + 1_000_003`` with ``verify_factor``
    times the boards (``verified``, ``meets_on_fresh_seed``). ``progress(done, total)``
    is called after each evaluated candidate (``total`` is an upper bound: the number of
    combinations or ``max_evaluations``); ``should_stop()`` returning True raises
    :class:`filters.errors.Cancelled` between (and inside) evaluations. Bad inputs raise
    :class:`InputError` naming the argument (``target_yield``, ``confidence``, ...).

    Parameters
    ----------
    design : Design
        The design to choose grades for (its mask defines passing).
    target_yield : float
        Target yield, a fraction in (0, 1).
    confidence : float
        Confidence of the one-sided lower bound, a fraction in [0.5, 1).
    samples : int, optional
        Boards per candidate set (default: the design's ``analysis.samples``).
    seed : int, optional
        Seed of the boards (default: the design's ``analysis.seed``).
    catalog : Catalog, optional
        Grades to choose from (default: the design's catalog).
    method : str
        Interval method, ``"wilson"`` or ``"exact"``.
    verify_factor : int
        The check on a fresh seed uses this many times ``samples`` boards (at least 1).
    max_evaluations : int
        Most candidate sets this search evaluates (at least 1).
    exhaustive_limit : int
        Largest number of combinations searched exhaustively (0: always guided).
    progress : callable, optional
        ``progress(done, total)`` after each evaluated set (counts of sets).
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the search.
    target_after_life : bool
        When the design states a service life, a board passes only if it meets the mask at
        every judged temperature at delivery and after the life (the target then applies
        after the life too). Default False: the target applies at delivery; the after-life
        yield of the chosen set is shown beside it either way (``after_life_short``).

    Returns
    -------
    Recommendation
        The chosen set (or None and why), its check on a fresh seed, the design with the
        chosen grades, and every candidate looked at.

    Raises
    ------
    InputError
        A bad argument, named in the error's path.
    Cancelled
        When ``should_stop()`` returned True.
    """
    return _recommend(design, target_yield, confidence=confidence, samples=samples, seed=seed,
                      catalog=catalog, method=method, verify_factor=verify_factor,
                      max_evaluations=max_evaluations, exhaustive_limit=exhaustive_limit,
                      progress=progress, should_stop=should_stop, target_after_life=target_after_life)


def _recommend(design: Design, target_yield: float, *, confidence: float = 0.95,
               samples: int | None = None, seed: int | None = None, catalog: Catalog | None = None,
               method: str = "wilson", verify_factor: int = 4, max_evaluations: int = 400,
               exhaustive_limit: int = 256, progress: Callable[[int, int], None] | None = None,
               should_stop: Callable[[], bool] | None = None, target_after_life: bool = False,
               _caches: dict[tuple, SearchCache] | None = None,
               _prep: Prepared | None = None) -> Recommendation:
    target = _fraction(target_yield, "target_yield", 0.0, lo_closed=False)
    conf = _fraction(confidence, "confidence", 0.5, lo_closed=True)
    if method not in INTERVAL_METHODS:
        raise InputError(f"must be one of {', '.join(INTERVAL_METHODS)}, not {method!r}", "method")
    n = _whole(design.analysis.samples if samples is None else samples, "samples", 1, MAX_SAMPLES)
    seed_ = _whole(design.analysis.seed if seed is None else seed, "seed", 0)
    factor = _whole(verify_factor, "verify_factor", 1)
    if n * factor > MAX_SAMPLES:
        raise InputError(f"samples x verify_factor must be at most {MAX_SAMPLES}", "verify_factor")
    cap = _whole(max_evaluations, "max_evaluations", 1)
    limit = _whole(exhaustive_limit, "exhaustive_limit", 0)
    cands = candidate_grades(design, catalog)
    if not isinstance(target_after_life, (bool, np.bool_)):
        raise InputError(f"must be true or false, not {target_after_life!r}", "target_after_life")
    a = design.analysis
    life_on = bool(target_after_life) and bool(a.service_hours)
    key = _cache_key(design, cands, n, seed_, conf, method, life_on)
    cache = (_caches if _caches is not None else {}).setdefault(key, SearchCache(key))
    combos = math.prod(len(c) for c in cands)
    exhaustive = combos <= limit
    search = "exhaustive" if exhaustive else "guided"

    now = (tuple(p.grade for p in design.parts), current_cost(design, catalog))
    life = (life_on, a.service_hours, a.service_temp_c)

    def empty(note: str, reason: str, evaluations: int = 0, history: list[Candidate] | None = None,
              capped: bool = False, need: int | None = None, best: Candidate | None = None) -> Recommendation:
        return Recommendation(target, conf, None, None, False, design, evaluations, history or [],
                              search, capped, note, method, seed_, *now, reason, need, best, *life)

    if lower_bound(n, n, conf, method) < target:  # type: ignore[arg-type]
        need = boards_needed(target, conf, method)
        return empty(f"the target {target:.4g} cannot be shown with {n:,} boards: even if every board "
                     f"passes, the lower bound at {conf:g} confidence is "
                     f"{lower_bound(n, n, conf, method):.4f}; it needs at least {need:,} boards",  # type: ignore[arg-type]
                     "boards", need=need)

    prep = _prep if _prep is not None else prepare(design)
    try:  # the memory rule (filters/memory.py) for the check on a fresh seed, before any search
        check_boards(prep, n * factor, "samples")
    except InputError as exc:
        raise InputError(f"{exc.reason} ({n:,} boards x verify_factor {factor} for the check on a fresh "
                         "seed)", "samples") from None
    ev = Evaluator(design, prep, cands, n, seed_, conf, method, cache, cap,
                    min(combos, cap) if exhaustive else cap, progress, should_stop)
    ev.after_life = life_on
    capped = False
    try:
        idx, note = (exhaustive_search if exhaustive else guided_search)(ev, target)
    except Capped:
        capped = True
        idx = cheapest_seen(ev, target)
        note = (f"stopped after {cap} evaluations (max_evaluations); "
                + ("the cheapest set seen that meets the target is shown, not necessarily the cheapest"
                   if idx is not None else "no set seen so far meets the target"))
    if idx is None:
        return _nothing_chosen(empty, note, ev, target, conf, method, capped)
    chosen = ev.with_life(idx)  # with its after-life figures when the design states a life
    verified = ev.verify(idx, factor)
    return Recommendation(target, conf, chosen, verified, verified.lower >= target,
                          design_with_grades(design, ev.grades(idx)), ev.evaluations, ev.history,
                          search, capped, note, method, seed_, *now, target_after_life=life_on,
                          service_hours=a.service_hours, service_temp_c=a.service_temp_c)


def _nothing_chosen(empty: Callable[..., Recommendation], note: str, ev: Evaluator, target: float,
                    conf: float, method: str, capped: bool) -> Recommendation:
    """Why no set was chosen: the search was capped, the boards are too few to show a set
    whose estimated yield exceeds the target, or the catalog cannot reach it."""
    best = max(ev.history, key=lambda c: (c.lower, c.estimate, -c.cost), default=None)
    if capped or best is None:
        return empty(note, "capped", ev.evaluations, ev.history, capped, best=best)
    if best.estimate > target:
        need = samples_to_show(target, best.estimate, conf, method)  # type: ignore[arg-type]
        note = (f"the best set found has an estimated yield of {best.estimate:.4f} ({best.passed:,} of "
                f"{best.samples:,} boards pass), above the target {target:.4g}, but its lower bound at "
                f"{conf:g} confidence is {best.lower:.4f}: too few boards to show it; about {need:,} "
                "boards would, if the yield holds")
        return empty(note, "boards", ev.evaluations, ev.history, capped, need, best)
    return empty(note, "catalog", ev.evaluations, ev.history, capped, best=best)


def design_with_grades(design: Design, grades: Sequence[Grade]) -> Design:
    """``design`` with part i given ``grades[i]`` (what-if tolerances cleared). Grades the
    design's catalog lacks, or holds under the same name with other figures, are added to
    the design's own grades so the design file stays self-contained. A cost that differs
    only because the search priced the grade at the purchase quantity is not a new grade;
    locked and measured parts keep their grade.

    Parameters
    ----------
    design : Design
        The design to change.
    grades : sequence of Grade
        One grade per part, in design order (P grades).

    Returns
    -------
    Design
        A new design; ``design`` is unchanged.
    """
    cat = design.catalog
    keep = [p.locked or p.measured is not None for p in design.parts]
    extra = {g.name: g for g, k in zip(grades, keep)
             if not k and (g.name not in cat or cat[g.name] != replace(g, cost=cat[g.name].cost))}
    out = design
    if extra:
        own = tuple(g for g in design.grades if g.name not in extra) + tuple(extra.values())
        out = replace(design, grades=own)
    parts = tuple(p if k else replace(p, grade=g.name, tolerance_pct=None)
                  for p, g, k in zip(design.parts, grades, keep))
    return replace(out, parts=parts)


def cost_yield_curve(design: Design, targets: Sequence[float] = DEFAULT_TARGETS,
                     **kwargs: Any) -> list[tuple[float, Recommendation]]:
    """The cheapest set found for each target yield (fractions), as (target, recommendation)
    in the order given; keyword arguments go to :func:`recommend`.

    Every target uses the same boards, so evaluations are shared through one cache keyed
    by the grade-name tuple (each recommendation's ``evaluations`` counts only the sets it
    evaluated itself). Targets run from the highest down; a guided search restarts from any
    cheaper cached set that meets its target, so the cost never rises as the target falls.

    Parameters
    ----------
    design : Design
        The design to choose grades for.
    targets : sequence of float
        Target yields, fractions in (0, 1), in any order.
    **kwargs
        Any keyword argument of :func:`recommend` (``confidence``, ``samples``, ...).

    Returns
    -------
    list[tuple[float, Recommendation]]
        One (target, recommendation) pair per target, in the order given.
    """
    if isinstance(targets, (str, bytes)) or not isinstance(targets, Sequence) or not targets:
        raise InputError("must be a non-empty list of target yields", "targets")
    checked = [_fraction(t, f"targets[{i}]", 0.0, lo_closed=False) for i, t in enumerate(targets)]
    for private in ("_caches", "_prep"):
        kwargs.pop(private, None)
    caches: dict[tuple, SearchCache] = {}
    prep = prepare(design)
    results: dict[int, Recommendation] = {}
    for i in sorted(range(len(checked)), key=lambda i: -checked[i]):
        results[i] = _recommend(design, checked[i], _caches=caches, _prep=prep, **kwargs)
    return [(checked[i], results[i]) for i in range(len(checked))]
