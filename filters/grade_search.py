"""The search for the cheapest set of grades: the evaluator every candidate set goes
through, and the two searches (every combination in order of cost, or guided descent).

:class:`Evaluator` evaluates a set of grades (one grade index per part, into the
candidate lists of :func:`filters.recommend.candidate_grades`) on the search's boards,
keeps what it found in a :class:`SearchCache` shared by every target of a cost-yield
curve, and gives each part's spread-budget share for the guided steps.
:func:`exhaustive_search` and :func:`guided_search` return the chosen grade indices;
:func:`filters.recommend.recommend` states the rules and checks the inputs. Yields are
fractions in [0, 1]; costs the catalog's relative costs (no unit).
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import numpy as np

from .budget import spread_budget
from .design import Design
from .errors import Cancelled
from .evaluate import Ensemble, Prepared, evaluate
from .grades import Grade
from .metric_names import margin_names
from .stats import lower_bound
from .temperature import judge_service_life, judged_ensemble

__all__ = [
    "FRESH_SEED_OFFSET",
    "COST_EPS",
    "Candidate",
    "Capped",
    "SearchCache",
    "Evaluator",
    "exhaustive_search",
    "guided_search",
    "cheapest_seen",
]

#: The verification run uses this seed offset from the search's seed.
FRESH_SEED_OFFSET = 1_000_003
#: Cost differences below this (relative cost units) count as equal.
COST_EPS = 1e-12


@dataclass(frozen=True)
class Candidate:
    """One evaluated set of grades.

    ``grades``: grade name per part, in design order; ``cost``: sum of the grades'
    relative costs; ``passed`` of ``samples`` boards met the mask; ``lower``: one-sided
    lower confidence bound of the yield (fraction) at the search's confidence;
    ``estimate`` = passed / samples. These are what the search judged by: at delivery, or
    at delivery and after the service life when the target applies after it too.

    When the design states a service life and the figures were taken, ``delivery_passed`` /
    ``delivery_lower`` count the boards meeting the mask at every judged temperature at
    delivery and ``after_passed`` / ``after_lower`` those meeting it at every judged
    temperature after the life (the same boards); None otherwise.
    """

    grades: tuple[str, ...]
    cost: float
    passed: int
    samples: int
    lower: float
    estimate: float
    delivery_passed: int | None = None
    delivery_lower: float | None = None
    after_passed: int | None = None
    after_lower: float | None = None

    @property
    def delivery_estimate(self) -> float | None:
        """Yield at delivery (fraction), None when the life figures were not taken."""
        return None if self.delivery_passed is None else self.delivery_passed / self.samples

    @property
    def after_estimate(self) -> float | None:
        """Yield after the service life (fraction), None when not taken."""
        return None if self.after_passed is None else self.after_passed / self.samples

    def to_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = {"grades": list(self.grades), "cost": float(self.cost), "passed": int(self.passed),
                               "samples": int(self.samples), "lower": float(self.lower),
                               "estimate": float(self.estimate)}
        if self.after_passed is not None:
            out["at_delivery"] = {"passed": self.delivery_passed, "estimate": self.delivery_estimate,
                                  "lower": self.delivery_lower}
            out["after_life"] = {"passed": self.after_passed, "estimate": self.after_estimate,
                                 "lower": self.after_lower}
        return out



# --- the evaluator shared by the searches ------------------------------------------------

class Capped(Exception):
    pass


class SearchCache:
    """Evaluated candidates keyed by grade-name tuple, for one design, seed, sample count,
    confidence and interval method (the boards are the same, so results carry over)."""

    def __init__(self, key: tuple) -> None:
        self.key = key
        self.found: dict[tuple[str, ...], Candidate] = {}
        self.shares: dict[tuple[str, ...], np.ndarray] = {}
        self.verified: dict[tuple[str, ...], Candidate] = {}


class Evaluator:
    def __init__(self, design: Design, prep: Prepared, cands: list[list[Grade]], samples: int,
                 seed: int, confidence: float, method: str, cache: SearchCache, max_evaluations: int,
                 total: int, progress: Callable[[int, int], None] | None,
                 should_stop: Callable[[], bool] | None) -> None:
        self.design, self.prep, self.cands = design, prep, cands
        self.samples, self.seed, self.confidence, self.method = samples, seed, confidence, method
        self.cache = cache
        self.max_evaluations, self.total = max_evaluations, total
        self.progress, self.should_stop = progress, should_stop
        #: the target applies after the service life too: every candidate is judged both ways
        self.after_life = False
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

    def _run(self, grades: tuple[Grade, ...], samples: int, seed: int,
             life: bool | None = None) -> tuple[Ensemble, np.ndarray | None, np.ndarray | None]:
        """The boards judged; with ``life`` (default: the search judges after the life) also
        after the design's service life. Returns the ensemble whose margins (S, spans) are
        what the search judges by (the smallest over the judged temperatures, and over
        delivery and after the life when the target applies after it), and the pass arrays
        (S,) at delivery and after the life (None when not taken)."""
        self._check_stop()
        # pass/fail and margins are all a candidate needs (the shares read span margins); the
        # metrics only without a mask (the shares then fall back to the cutoff)
        base = evaluate(self.design, samples=samples, seed=seed, grades=grades, curves=False,
                        metrics=not self.design.mask, prepared=self.prep, should_stop=self.should_stop)
        # with an operating range a board passes only at every judged temperature, as in analyze
        ens = judged_ensemble(self.design, self.prep, base, self.should_stop)
        want = self.after_life if life is None else life
        if not want or not self.design.analysis.service_hours:
            return ens, None, None
        delivery = ens.passed
        lived = judge_service_life(self.design, self.prep, base, None, self.should_stop)  # type: ignore[arg-type]
        after_m = lived.worst_margins  # type: ignore[union-attr]
        after = np.all(after_m >= 0, axis=1)
        if self.after_life:
            ens = replace(ens, margins=np.minimum(ens.margins, after_m))
        return ens, delivery, after

    def _candidate(self, grades: tuple[Grade, ...], ens: Ensemble, delivery: np.ndarray | None = None,
                   after: np.ndarray | None = None) -> Candidate:
        k, n = int(np.count_nonzero(ens.passed)), ens.samples
        life: tuple = ()
        if delivery is not None and after is not None:
            kd, ka = int(np.count_nonzero(delivery)), int(np.count_nonzero(after))
            life = (kd, self._lower(kd, n), ka, self._lower(ka, n))
        return Candidate(tuple(g.name for g in grades), math.fsum(g.cost for g in grades), k, n,
                         self._lower(k, n), k / n, *life)

    def _lower(self, k: int, n: int) -> float:
        return lower_bound(k, n, self.confidence, self.method)  # type: ignore[arg-type]

    def look(self, idx: Sequence[int], target: float) -> Candidate:
        """The candidate for grade indices ``idx`` (from the cache, or evaluated now)."""
        key = self.names(idx)
        hit = self.cache.found.get(key)
        if hit is None:
            if self.evaluations >= self.max_evaluations:
                raise Capped
            grades = self.grades(idx)
            ens, delivery, after = self._run(grades, self.samples, self.seed)
            hit = self._candidate(grades, ens, delivery, after)
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
            ens = self._run(self.grades(idx), self.samples, self.seed)[0]
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
                    if e.ref in refs:  # a network's shared error is no part's grade (filters/networks.py)
                        total[refs.index(e.ref)] += e.share if math.isfinite(e.share) else 0.0
        self.cache.shares[key] = total
        return total

    def with_life(self, idx: Sequence[int]) -> Candidate:
        """The candidate ``idx`` on the search's boards with its after-life figures (the
        cached one when the search took them; else evaluated again, the same boards)."""
        hit = self.cache.found[self.names(idx)]
        if hit.after_passed is not None or not self.design.analysis.service_hours:
            return hit
        grades = self.grades(idx)
        return self._candidate(grades, *self._run(grades, self.samples, self.seed, life=True))

    def verify(self, idx: Sequence[int], factor: int) -> Candidate:
        """The candidate ``idx`` on ``factor`` times the boards from a fresh seed, with its
        after-life figures when the design states a service life."""
        key = self.names(idx)
        hit = self.cache.verified.get(key)
        if hit is None:
            grades = self.grades(idx)
            hit = self.cache.verified[key] = self._candidate(
                grades, *self._run(grades, factor * self.samples, self.seed + FRESH_SEED_OFFSET, life=True))
        return hit


# --- the searches -------------------------------------------------------------------------

def exhaustive_search(ev: Evaluator, target: float) -> tuple[tuple[int, ...] | None, str]:
    """Every combination of the candidate grades in order of total cost (ties in index
    order), evaluated until the first one meets the target: it is the cheapest.

    Parameters
    ----------
    ev : Evaluator
        The evaluator of the search (its candidate lists, boards and cache).
    target : float
        Target yield, a fraction in (0, 1); a set meets it when its one-sided lower
        confidence bound is at least ``target``.

    Returns
    -------
    tuple[tuple[int, ...] | None, str]
        The chosen grade indices (one per part, into ``ev.cands``) and an empty note, or
        None and a note saying that no combination meets the target.
    """
    combos = list(itertools.product(*[range(len(c)) for c in ev.cands]))
    combos.sort(key=lambda idx: (ev.cost(idx), idx))
    for idx in combos:
        if ev.look(idx, target).lower >= target:
            return idx, ""
    return None, (f"no set of catalog grades meets the target: all {len(combos)} combinations were "
                  "evaluated")


def _step(state: tuple[int, ...], i: int, by: int = -1) -> tuple[int, ...]:
    return state[:i] + (state[i] + by,) + state[i + 1:]


def _best_step(ev: Evaluator, state: tuple[int, ...], target: float, rule: str,
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
        if saving[i] > COST_EPS:
            ratio = loss / saving[i]
        else:
            ratio = -math.inf if loss <= 0 else math.inf
        key = (ratio, -saving[i], shares[i], i)
        if key < best_key:
            best, best_key = _step(state, i), key
    return best


def _descend(ev: Evaluator, state: tuple[int, ...], target: float,
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


def _local_search(ev: Evaluator, state: tuple[int, ...], target: float, rule: str,
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


def _jump(ev: Evaluator, state: tuple[int, ...], target: float) -> tuple[int, ...] | None:
    """One part moved two or more steps cheaper (past a next grade that failed: catalogs
    sorted by cost need not be sorted by tolerance), the largest saving first, the first
    that meets the target; None if there is none."""
    here = ev.cost(state)
    moves = []
    for i, k in enumerate(state):
        for j in range(k - 1):
            new = state[:i] + (j,) + state[i + 1:]
            saving = here - ev.cost(new)
            if saving > COST_EPS:
                moves.append((-saving, i, j, new))
    for _, _, _, new in sorted(moves):
        if ev.look(new, target).lower >= target:
            return new
    return None


def _exchange(ev: Evaluator, state: tuple[int, ...], target: float) -> tuple[int, ...] | None:
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
            if saving > COST_EPS:
                moves.append((-saving, i, j, tuple(new)))
    for _, _, _, new in sorted(moves):
        if ev.look(new, target).lower >= target:
            return new
    return None


def guided_search(ev: Evaluator, target: float) -> tuple[tuple[int, ...] | None, str]:
    """The guided search of :func:`filters.recommend.recommend` (steps 1-5 of its
    docstring): descents from the tightest grades by single cheaper steps, jumps and pair
    exchanges, a second descent by boards lost per cost saved, then polishing from any
    cheaper set seen.

    Parameters
    ----------
    ev : Evaluator
        The evaluator of the search (its candidate lists, boards and cache).
    target : float
        Target yield, a fraction in (0, 1), met by the lower confidence bound.

    Returns
    -------
    tuple[tuple[int, ...] | None, str]
        The chosen grade indices (one per part, into ``ev.cands``) and a note ("" unless
        the improvement passes were cut short at ``max_evaluations``), or None and why
        when even the tightest grades miss the target.

    Raises
    ------
    Capped
        When the first descent reaches ``max_evaluations``.
    """
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
        if ev.cost(other) < ev.cost(best) - COST_EPS:
            best = other
        while True:
            cheaper = cheapest_seen(ev, target, below=ev.cost(best), exclude=tried)
            if cheaper is None:
                return best, ""
            end = _local_search(ev, cheaper, target, "saving", tried)
            if ev.cost(end) < ev.cost(best) - COST_EPS:
                best = end
    except Capped:
        return best, ("the improvement passes stopped at max_evaluations: the set shown is "
                      "locally minimal, but a cheaper one may exist")


def cheapest_seen(ev: Evaluator, target: float, below: float = math.inf,
                   exclude: frozenset | set = frozenset()) -> tuple[int, ...] | None:
    """Grade indices of the cheapest cached set that meets ``target`` below cost ``below``.

    Parameters
    ----------
    ev : Evaluator
        The evaluator whose cache (``ev.cache.found``) is searched.
    target : float
        Target yield, a fraction in (0, 1), met by the lower confidence bound.
    below : float
        Only sets cheaper than this total cost (the catalog's cost units) count.
    exclude : set of tuple[int, ...]
        Grade-index tuples to pass over (sets a descent already started from).

    Returns
    -------
    tuple[int, ...] or None
        Grade indices (one per part, into ``ev.cands``), or None when no cached set
        qualifies.
    """
    index = [{g.name: k for k, g in enumerate(c)} for c in ev.cands]
    best, best_cost = None, below - COST_EPS
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
