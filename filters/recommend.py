"""The cheapest set of catalog grades whose yield meets a target, and the parts list.

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
"""
from __future__ import annotations

import csv
import io
import itertools
import math
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from .budget import Budget, spread_budget
from .design import MAX_SAMPLES, Design
from .designfile import write_text_atomic
from .errors import Cancelled, InputError
from .evaluate import Ensemble, Prepared, evaluate, prepare
from .grades import Catalog, Grade
from .memory import check_boards
from .metric_names import is_margin, margin_names, metric_label
from .sampling import REFERENCE_CELSIUS
from .stats import INTERVAL_METHODS, lower_bound, samples_to_show
from .values import E_SERIES, PART_UNITS, format_value, series_for_tolerance, snap, tolerance_letter

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
    "PARTS_COLUMNS",
    "FORMULA_STARTS",
    "worst_margin_metric",
    "smallest_series",
    "parts_list_rows",
    "write_parts_csv",
]

#: The verification run uses this seed offset from the search's seed.
FRESH_SEED_OFFSET = 1_000_003
DEFAULT_TARGETS: tuple[float, ...] = (0.5, 0.8, 0.9, 0.95, 0.99, 0.995, 0.999)
_COST_EPS = 1e-12


@dataclass(frozen=True)
class Candidate:
    """One evaluated set of grades.

    ``grades``: grade name per part, in design order; ``cost``: sum of the grades'
    relative costs; ``passed`` of ``samples`` boards met the mask; ``lower``: one-sided
    lower confidence bound of the yield (fraction) at the search's confidence;
    ``estimate`` = passed / samples.
    """

    grades: tuple[str, ...]
    cost: float
    passed: int
    samples: int
    lower: float
    estimate: float

    def to_dict(self) -> dict[str, Any]:
        return {"grades": list(self.grades), "cost": float(self.cost), "passed": int(self.passed),
                "samples": int(self.samples), "lower": float(self.lower),
                "estimate": float(self.estimate)}


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

    def to_dict(self) -> dict[str, Any]:
        refs = [p.ref for p in self.design.parts]
        return {
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
    when a part has none."""
    cat = design.catalog if catalog is None else catalog
    a = design.analysis
    out = []
    for p in design.parts:
        gs = [g for g in cat.for_kind(p.kind) if g.tolerance_pct > 0]
        if not gs:
            raise InputError(f"no grade in the catalog fits part {p.ref} ({p.kind}) other than an "
                             "ideal one", "catalog")
        out.append([g for g in gs if not any(_dominates(h, g, a.temp_low_c, a.temp_high_c) for h in gs)])
    return out


def _temperature_extent(g: Grade, t_low: float, t_high: float) -> float:
    """Largest relative value change the temperature coefficient can cause over the range."""
    dt = max(abs(t_low - REFERENCE_CELSIUS), abs(t_high - REFERENCE_CELSIUS))
    return (abs(g.tempco_ppm) + g.tempco_spread_ppm) * 1e-6 * dt


def _dominates(h: Grade, g: Grade, t_low: float, t_high: float) -> bool:
    """True when grade ``h`` is never worse than ``g`` and strictly better somewhere: no
    dearer, the same distribution shape, no wider tolerance, temperature effect or drift.
    Such a ``g`` can never be the cheapest choice, so the search leaves it out."""
    if h is g or h.name == g.name:
        return False
    same_shape = (h.distribution, h.coverage, h.truncate, h.bin_inner_pct) == \
        (g.distribution, g.coverage, g.truncate, g.bin_inner_pct)
    if not same_shape or h.tempco_ppm != g.tempco_ppm and _temperature_extent(g, t_low, t_high) > 0:
        return False
    keys_h = (h.cost, h.tolerance_pct, _temperature_extent(h, t_low, t_high), h.drift_pct)
    keys_g = (g.cost, g.tolerance_pct, _temperature_extent(g, t_low, t_high), g.drift_pct)
    return all(x <= y for x, y in zip(keys_h, keys_g)) and keys_h != keys_g


def boards_needed(target_yield: float, confidence: float = 0.95, method: str = "wilson") -> int:
    """The fewest boards n whose lower bound can reach ``target_yield`` at all (all n pass)."""
    return samples_to_show(target_yield, 1.0, confidence, method)  # type: ignore[arg-type]


def current_cost(design: Design, catalog: Catalog | None = None) -> float:
    """Total relative cost of the design's own grades, priced from ``catalog`` (default the
    design's); a grade the catalog lacks counts at the design's own figure."""
    cat = design.catalog if catalog is None else catalog
    return math.fsum(cat[g.name].cost if g.name in cat else g.cost for g in design.part_grades())


# --- the evaluator shared by the searches ------------------------------------------------

class _Capped(Exception):
    pass


class _Cache:
    """Evaluated candidates keyed by grade-name tuple, for one design, seed, sample count,
    confidence and interval method (the boards are the same, so results carry over)."""

    def __init__(self, key: tuple) -> None:
        self.key = key
        self.found: dict[tuple[str, ...], Candidate] = {}
        self.shares: dict[tuple[str, ...], np.ndarray] = {}
        self.verified: dict[tuple[str, ...], Candidate] = {}


class _Evaluator:
    def __init__(self, design: Design, prep: Prepared, cands: list[list[Grade]], samples: int,
                 seed: int, confidence: float, method: str, cache: _Cache, max_evaluations: int,
                 total: int, progress: Callable[[int, int], None] | None,
                 should_stop: Callable[[], bool] | None) -> None:
        self.design, self.prep, self.cands = design, prep, cands
        self.samples, self.seed, self.confidence, self.method = samples, seed, confidence, method
        self.cache = cache
        self.max_evaluations, self.total = max_evaluations, total
        self.progress, self.should_stop = progress, should_stop
        self.evaluations = 0
        self.history: list[Candidate] = []
        self._ens: dict[tuple[str, ...], Ensemble] = {}  # feasible sets of the current round

    def grades(self, idx: Sequence[int]) -> tuple[Grade, ...]:
        return tuple(self.cands[i][k] for i, k in enumerate(idx))

    def names(self, idx: Sequence[int]) -> tuple[str, ...]:
        return tuple(g.name for g in self.grades(idx))

    def cost(self, idx: Sequence[int]) -> float:
        return math.fsum(g.cost for g in self.grades(idx))

    def _check_stop(self) -> None:
        if self.should_stop is not None and self.should_stop():
            raise Cancelled("recommendation cancelled")

    def _run(self, grades: tuple[Grade, ...], samples: int, seed: int) -> Ensemble:
        self._check_stop()
        # pass/fail and margins are all a candidate needs (the shares read span margins); the
        # metrics only without a mask (the shares then fall back to the cutoff)
        return evaluate(self.design, samples=samples, seed=seed, grades=grades, curves=False,
                        metrics=not self.design.mask, prepared=self.prep, should_stop=self.should_stop)

    def _candidate(self, grades: tuple[Grade, ...], ens: Ensemble) -> Candidate:
        k, n = int(np.count_nonzero(ens.passed)), ens.samples
        return Candidate(tuple(g.name for g in grades), math.fsum(g.cost for g in grades), k, n,
                         lower_bound(k, n, self.confidence, self.method), k / n)  # type: ignore[arg-type]

    def look(self, idx: Sequence[int], target: float) -> Candidate:
        """The candidate for grade indices ``idx`` (from the cache, or evaluated now)."""
        key = self.names(idx)
        hit = self.cache.found.get(key)
        if hit is None:
            if self.evaluations >= self.max_evaluations:
                raise _Capped
            grades = self.grades(idx)
            ens = self._run(grades, self.samples, self.seed)
            hit = self._candidate(grades, ens)
            self.cache.found[key] = hit
            self.evaluations += 1
            if hit.lower >= target:
                self._ens[key] = ens
            if self.progress is not None:
                self.progress(self.evaluations, self.total)
        self.history.append(hit)
        return hit

    def shares(self, idx: Sequence[int]) -> np.ndarray:
        """Each part's summed spread-budget share (0..1 per metric) at the set ``idx``: over
        the margins of the spans some board fails, else every span, else the cutoff."""
        key = self.names(idx)
        ens = self._ens.pop(key, None)
        self._ens.clear()  # a new state: the other sets of the last round are not needed
        got = self.cache.shares.get(key)
        if got is not None:
            return got
        if ens is None:  # taken from the cache of another search: evaluate again (same boards)
            ens = self._run(self.grades(idx), self.samples, self.seed)
        names = margin_names(ens.design.mask)
        if names:
            failing = [n for j, n in enumerate(names) if np.any(ens.margins[:, j] < 0)]
            names = failing or names
        else:
            names = [n for n in ("cutoff_hz", "centre_hz") if n in ens.metrics][:1]
        refs = [p.ref for p in self.design.parts]
        total = np.zeros(len(refs))
        if names:
            budget = spread_budget(ens, self.prep, list(dict.fromkeys(names)))
            for b in budget.values():
                for e in b.entries:
                    total[refs.index(e.ref)] += e.share if math.isfinite(e.share) else 0.0
        self.cache.shares[key] = total
        return total

    def verify(self, idx: Sequence[int], factor: int) -> Candidate:
        key = self.names(idx)
        hit = self.cache.verified.get(key)
        if hit is None:
            grades = self.grades(idx)
            ens = self._run(grades, factor * self.samples, self.seed + FRESH_SEED_OFFSET)
            hit = self.cache.verified[key] = self._candidate(grades, ens)
        return hit


# --- the searches -------------------------------------------------------------------------

def _exhaustive(ev: _Evaluator, target: float) -> tuple[tuple[int, ...] | None, str]:
    combos = list(itertools.product(*[range(len(c)) for c in ev.cands]))
    combos.sort(key=lambda idx: (ev.cost(idx), idx))
    for idx in combos:
        if ev.look(idx, target).lower >= target:
            return idx, ""
    return None, (f"no set of catalog grades meets the target: all {len(combos)} combinations were "
                  "evaluated")


def _step(state: tuple[int, ...], i: int, by: int = -1) -> tuple[int, ...]:
    return state[:i] + (state[i] + by,) + state[i + 1:]


def _best_step(ev: _Evaluator, state: tuple[int, ...], target: float, rule: str,
               parts: list[int], shares: np.ndarray, blocked: set[int]) -> tuple[int, ...] | None:
    """The best single cheaper step of ``parts`` that meets the target, by ``rule``; every
    part whose step fails is added to ``blocked``. None if no step meets the target."""
    here_cost = ev.cost(state)
    saving = {i: here_cost - ev.cost(_step(state, i)) for i in parts}
    if rule == "saving":
        # The largest saving first, so the first step that meets the target is the answer.
        for i in sorted(parts, key=lambda i: (-saving[i], shares[i], i)):
            if ev.look(_step(state, i), target).lower >= target:
                return _step(state, i)
            blocked.add(i)
        return None
    here_passed = ev.cache.found[ev.names(state)].passed
    best, best_key = None, (math.inf, math.inf, math.inf, 0)
    for i in sorted(parts, key=lambda i: (shares[i], i)):
        cand = ev.look(_step(state, i), target)
        if cand.lower < target:
            blocked.add(i)
            continue
        loss = here_passed - cand.passed
        if saving[i] > _COST_EPS:
            ratio = loss / saving[i]
        else:
            ratio = -math.inf if loss <= 0 else math.inf
        key = (ratio, -saving[i], shares[i], i)
        if key < best_key:
            best, best_key = _step(state, i), key
    return best


def _descend(ev: _Evaluator, state: tuple[int, ...], target: float,
             rule: str = "saving") -> tuple[int, ...]:
    """Greedy descent by single steps to the next cheaper grade until none meets the target.

    Of the steps that still meet the target, rule ``"saving"`` takes the one that saves the
    most cost, rule ``"efficiency"`` the one that loses the fewest passing boards per unit
    of cost saved (then the larger saving); remaining ties go to the smaller budget share.
    A part whose step failed is not tried again while other steps succeed (a looser set
    rarely passes where a tighter one failed); before stopping, every such step is tried
    again from the final set, so no single cheaper step from it meets the target.
    """
    blocked: set[int] = set()
    while True:
        shares = ev.shares(state)
        movable = [i for i in range(len(state)) if state[i] > 0]
        new = _best_step(ev, state, target, rule, [i for i in movable if i not in blocked],
                         shares, blocked)
        if new is None:
            recheck = [i for i in movable if i in blocked]
            blocked.difference_update(recheck)
            new = _best_step(ev, state, target, rule, recheck, shares, blocked)
            if new is None:
                return state
        state = new


def _local_search(ev: _Evaluator, state: tuple[int, ...], target: float, rule: str,
                  tried: set[tuple[int, ...]]) -> tuple[int, ...]:
    """Descent, then a jump or a pair exchange, repeated until none finds a cheaper set."""
    while True:
        state = _descend(ev, state, target, rule)
        tried.add(state)
        new = _jump(ev, state, target)
        if new is None:
            new = _exchange(ev, state, target)
        if new is None:
            return state
        state = new


def _jump(ev: _Evaluator, state: tuple[int, ...], target: float) -> tuple[int, ...] | None:
    """One part moved two or more steps cheaper (past a next grade that failed: catalogs
    sorted by cost need not be sorted by tolerance), the largest saving first, the first
    that meets the target; None if there is none."""
    here = ev.cost(state)
    moves = []
    for i, k in enumerate(state):
        for j in range(k - 1):
            new = state[:i] + (j,) + state[i + 1:]
            saving = here - ev.cost(new)
            if saving > _COST_EPS:
                moves.append((-saving, i, j, new))
    for _, _, _, new in sorted(moves):
        if ev.look(new, target).lower >= target:
            return new
    return None


def _exchange(ev: _Evaluator, state: tuple[int, ...], target: float) -> tuple[int, ...] | None:
    """One pair exchange (one part a step cheaper, another a step dearer) that lowers the
    total cost and meets the target, the largest saving first; None if there is none."""
    here = ev.cost(state)
    moves = []
    for i, j in itertools.permutations(range(len(state)), 2):
        if state[i] > 0 and state[j] < len(ev.cands[j]) - 1:
            new = list(state)
            new[i] -= 1
            new[j] += 1
            saving = here - ev.cost(new)
            if saving > _COST_EPS:
                moves.append((-saving, i, j, tuple(new)))
    for _, _, _, new in sorted(moves):
        if ev.look(new, target).lower >= target:
            return new
    return None


def _guided(ev: _Evaluator, target: float) -> tuple[tuple[int, ...] | None, str]:
    start = tuple(len(c) - 1 for c in ev.cands)
    first = ev.look(start, target)
    if first.lower < target:
        return None, (f"even the tightest grades give a yield lower bound of {first.lower:.4f} "
                      f"({first.passed} of {first.samples} boards pass), below the target {target:g}")
    tried: set[tuple[int, ...]] = set()
    best = _local_search(ev, start, target, "saving", tried)
    try:
        # A second descent from the tightest set, by boards lost per cost saved; then
        # polish: restart from any set already seen on these boards (this search's or a
        # shared cache's) that meets the target more cheaply than the best end so far.
        other = _local_search(ev, start, target, "efficiency", tried)
        if ev.cost(other) < ev.cost(best) - _COST_EPS:
            best = other
        while True:
            cheaper = _cheapest_seen(ev, target, below=ev.cost(best), exclude=tried)
            if cheaper is None:
                return best, ""
            end = _local_search(ev, cheaper, target, "saving", tried)
            if ev.cost(end) < ev.cost(best) - _COST_EPS:
                best = end
    except _Capped:
        return best, ("the improvement passes stopped at max_evaluations: the set shown is "
                      "locally minimal, but a cheaper one may exist")


def _cheapest_seen(ev: _Evaluator, target: float, below: float = math.inf,
                   exclude: frozenset | set = frozenset()) -> tuple[int, ...] | None:
    """Grade indices of the cheapest cached set that meets ``target`` below cost ``below``."""
    index = [{g.name: k for k, g in enumerate(c)} for c in ev.cands]
    best, best_cost = None, below - _COST_EPS
    for names, cand in ev.cache.found.items():
        if cand.lower < target or cand.cost >= best_cost:
            continue
        try:
            idx = tuple(index[i][n] for i, n in enumerate(names))
        except KeyError:
            continue
        if idx not in exclude:
            best, best_cost = idx, cand.cost
    return best


# --- public entry points -------------------------------------------------------------------

def _cache_key(design: Design, cands: list[list[Grade]], samples: int, seed: int,
               confidence: float, method: str) -> tuple:
    return (id(design), tuple(tuple(cs) for cs in cands), samples, seed, confidence, method)


def recommend(design: Design, target_yield: float, *, confidence: float = 0.95,
              samples: int | None = None, seed: int | None = None, catalog: Catalog | None = None,
              method: str = "wilson", verify_factor: int = 4, max_evaluations: int = 400,
              exhaustive_limit: int = 256, progress: Callable[[int, int], None] | None = None,
              should_stop: Callable[[], bool] | None = None) -> Recommendation:
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
    """
    return _recommend(design, target_yield, confidence=confidence, samples=samples, seed=seed,
                      catalog=catalog, method=method, verify_factor=verify_factor,
                      max_evaluations=max_evaluations, exhaustive_limit=exhaustive_limit,
                      progress=progress, should_stop=should_stop)


def _recommend(design: Design, target_yield: float, *, confidence: float = 0.95,
               samples: int | None = None, seed: int | None = None, catalog: Catalog | None = None,
               method: str = "wilson", verify_factor: int = 4, max_evaluations: int = 400,
               exhaustive_limit: int = 256, progress: Callable[[int, int], None] | None = None,
               should_stop: Callable[[], bool] | None = None,
               _caches: dict[tuple, _Cache] | None = None,
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
    key = _cache_key(design, cands, n, seed_, conf, method)
    cache = (_caches if _caches is not None else {}).setdefault(key, _Cache(key))
    combos = math.prod(len(c) for c in cands)
    exhaustive = combos <= limit
    search = "exhaustive" if exhaustive else "guided"

    now = (tuple(p.grade for p in design.parts), current_cost(design, catalog))

    def empty(note: str, reason: str, evaluations: int = 0, history: list[Candidate] | None = None,
              capped: bool = False, need: int | None = None, best: Candidate | None = None) -> Recommendation:
        return Recommendation(target, conf, None, None, False, design, evaluations, history or [],
                              search, capped, note, method, seed_, *now, reason, need, best)

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
    ev = _Evaluator(design, prep, cands, n, seed_, conf, method, cache, cap,
                    min(combos, cap) if exhaustive else cap, progress, should_stop)
    capped = False
    try:
        idx, note = (_exhaustive if exhaustive else _guided)(ev, target)
    except _Capped:
        capped = True
        idx = _cheapest_seen(ev, target)
        note = (f"stopped after {cap} evaluations (max_evaluations); "
                + ("the cheapest set seen that meets the target is shown, not necessarily the cheapest"
                   if idx is not None else "no set seen so far meets the target"))
    if idx is None:
        return _nothing_chosen(empty, note, ev, target, conf, method, capped)
    chosen = cache.found[ev.names(idx)]
    verified = ev.verify(idx, factor)
    return Recommendation(target, conf, chosen, verified, verified.lower >= target,
                          design_with_grades(design, ev.grades(idx)), ev.evaluations, ev.history,
                          search, capped, note, method, seed_, *now)


def _nothing_chosen(empty: Callable[..., Recommendation], note: str, ev: _Evaluator, target: float,
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
    the design's own grades so the design file stays self-contained."""
    cat = design.catalog
    extra = {g.name: g for g in grades if g.name not in cat or cat[g.name] != g}
    out = design
    if extra:
        own = tuple(g for g in design.grades if g.name not in extra) + tuple(extra.values())
        out = replace(design, grades=own)
    parts = tuple(replace(p, grade=g.name, tolerance_pct=None) for p, g in zip(design.parts, grades))
    return replace(out, parts=parts)


def cost_yield_curve(design: Design, targets: Sequence[float] = DEFAULT_TARGETS,
                     **kwargs: Any) -> list[tuple[float, Recommendation]]:
    """The cheapest set found for each target yield (fractions), as (target, recommendation)
    in the order given; keyword arguments go to :func:`recommend`.

    Every target uses the same boards, so evaluations are shared through one cache keyed
    by the grade-name tuple (each recommendation's ``evaluations`` counts only the sets it
    evaluated itself). Targets run from the highest down; a guided search restarts from any
    cheaper cached set that meets its target, so the cost never rises as the target falls.
    """
    if isinstance(targets, (str, bytes)) or not isinstance(targets, Sequence) or not targets:
        raise InputError("must be a non-empty list of target yields", "targets")
    checked = [_fraction(t, f"targets[{i}]", 0.0, lo_closed=False) for i, t in enumerate(targets)]
    for private in ("_caches", "_prep"):
        kwargs.pop(private, None)
    caches: dict[tuple, _Cache] = {}
    prep = prepare(design)
    results: dict[int, Recommendation] = {}
    for i in sorted(range(len(checked)), key=lambda i: -checked[i]):
        results[i] = _recommend(design, checked[i], _caches=caches, _prep=prep, **kwargs)
    return [(checked[i], results[i]) for i in range(len(checked))]


# --- the parts list ------------------------------------------------------------------------

PARTS_COLUMNS: tuple[str, ...] = (
    "ref", "nominal value", "series", "nearest preferred value", "grade", "tolerance (\u00b1 %)",
    "IEC 60062 letter", "tempco (ppm/K)", "technology", "relative cost",
    "share of spread budget (%)", "budget metric")
#: First characters that make a spreadsheet program read a cell as a formula.
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")


def worst_margin_metric(ens: Ensemble) -> str | None:
    """``"margin.<label>"`` of the span most boards fail (ties: the smallest margin),
    or None without a mask - a ``metric`` for :func:`parts_list_rows`."""
    names = margin_names(ens.design.mask)
    if not names:
        return None
    fails = np.count_nonzero(ens.margins < 0, axis=0)
    worst = ens.margins.min(axis=0)
    j = min(range(len(names)), key=lambda j: (-int(fails[j]), float(worst[j]), j))
    return names[j]


def smallest_series(value: float) -> str | None:
    """The smallest IEC 60063 series (E3, E6, E12, E24, E48, E96, E192, in that order) that
    holds ``value`` (SI units, any decade), or None when no series does: 4.7 nF -> "E3",
    15 nF -> "E6", 2.67 kohm -> "E96"."""
    return next((name for name in E_SERIES
                 if math.isclose(float(snap(value, name)), value, rel_tol=1e-9)), None)


def parts_list_rows(design: Design, recommendation: Recommendation | None,
                    budget: Mapping[str, Budget] | None = None, *,
                    metric: str | None = None) -> list[dict[str, Any]]:
    """The parts list, one dict per part (keys :data:`PARTS_COLUMNS`), for the CSV file.

    With a recommendation that chose a set, its design's grades are listed; else the
    design's own (what-if tolerances applied). ``nominal value`` is the marked value in
    SI units with its unit (``2.67 kΩ``); ``series`` the smallest IEC 60063 series that
    holds it (:func:`smallest_series`; "none" when no series does; blank for op-amps and
    ideal grades). A value of any series counts as a preferred value (common practice: E24
    values are sold at 1 % and 2 % too); only a value in no series gets a ``nearest
    preferred value``: the nearest value of the series usual for the grade's tolerance,
    named with that series (a different value changes the design and needs a new
    analysis). ``tolerance (± %)`` with its IEC 60062 letter (blank if it has none);
    ``tempco (ppm/K)`` as ``nominal ± spread``; ``relative cost`` the catalog's.
    ``share of spread budget (%)`` is the part's share of ``metric``'s variance in
    ``budget`` (from :func:`filters.budget.spread_budget`), by default ``cutoff_hz`` (else
    the first span margin); pass ``metric=worst_margin_metric(ens)`` for the worst span.
    ``budget metric`` names that metric in words (``margin of 'corner floor' (dB)``).
    Blank without a budget.
    """
    shown = recommendation.design if recommendation is not None and recommendation.chosen else design
    grades = shown.part_grades()
    if budget and metric is None:
        metric = "cutoff_hz" if "cutoff_hz" in budget else next(
            (k for k in budget if is_margin(k)), next(iter(budget)))
    shares: dict[str, float] = {}
    if budget and metric is not None:
        if metric not in budget:
            raise InputError(f"no spread budget for {metric!r}; have {', '.join(budget)}", "metric")
        shares = {e.ref: e.share for e in budget[metric].entries}
    metric_words = (metric_label(metric, [s.name for s in shown.stages], shown.mask)
                    if shares and metric else "")
    rows = []
    for p, g in zip(shown.parts, grades):
        unit = PART_UNITS.get(p.kind, "")
        nearest, series = "", ""
        if p.kind in ("R", "C", "L") and g.tolerance_pct > 0:
            series = smallest_series(p.value) or "none"
            if series == "none":
                usual = series_for_tolerance(g.tolerance_pct)
                nearest = (f"{format_value(float(snap(p.value, usual)), unit)} "
                           f"({usual}, the series usual for \u00b1{g.tolerance_pct:g} %)")
        share = shares.get(p.ref)
        rows.append({
            "ref": p.ref,
            "nominal value": format_value(p.value, unit),
            "series": series,
            "nearest preferred value": nearest,
            "grade": p.grade,
            "tolerance (\u00b1 %)": g.tolerance_pct,
            "IEC 60062 letter": tolerance_letter(g.tolerance_pct) or "",
            "tempco (ppm/K)": f"{g.tempco_ppm:g} \u00b1 {g.tempco_spread_ppm:g}",
            "technology": g.technology,
            "relative cost": g.cost,
            "share of spread budget (%)": "" if share is None else round(100.0 * share, 1),
            "budget metric": metric_words,
        })
    return rows


def _as_text_cell(value: Any) -> Any:
    """A cell a spreadsheet program would run as a formula (text starting with = + - @,
    tab or carriage return) gets a leading apostrophe, so it is shown as text."""
    if isinstance(value, str) and value.startswith(FORMULA_STARTS):
        return "'" + value
    return value


def write_parts_csv(rows: Sequence[Mapping[str, Any]], path: str | Path) -> None:
    """Write parts-list rows (from :func:`parts_list_rows`) as a CSV file with a header,
    atomically (:func:`filters.designfile.write_text_atomic`). The file is UTF-8 with a
    byte-order mark (``utf-8-sig``), so spreadsheet programs show ohm and ± signs; text
    cells that a spreadsheet would run as a formula are written with a leading apostrophe."""
    columns = list(PARTS_COLUMNS)
    for r in rows:
        columns += [k for k in r if k not in columns]
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=columns, lineterminator="\n")
    writer.writerow({k: _as_text_cell(k) for k in columns})
    for r in rows:
        writer.writerow({k: _as_text_cell(v) for k, v in r.items()})
    write_text_atomic(Path(path), "\ufeff" + buf.getvalue(), backup=False)
