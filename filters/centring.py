"""Centred values: neighbouring preferred values that raise the yield at no cost.

A part marked 10k in a 1 % grade could as well be 9.76k or 10.2k (its E96 neighbours) at the
same price. When the nominal design sits near one edge of the mask, moving a few parts one
step along their series can move it back towards the middle and raise the yield without a
tighter grade. :func:`centre_values` searches these moves:

* every part whose value belongs to a series (resistors, capacitors, inductors; not op-amp
  gain-bandwidths) may keep its value or take the series value one step below or above
  (the series is the one its grade's tolerance is usually sold in: 1 % -> E96, 5 % -> E24);
* up to :data:`MAX_EXHAUSTIVE` movable parts, every combination (3^n) is screened; beyond,
  a guided search moves one part at a time to the best neighbour until nothing improves;
* screening runs on common random numbers: the same standard scores for every combination,
  so two combinations differ only by their values, never by luck of the draw;
* the best few screened sets are then confirmed on the design's full number of boards, each
  with its own nominal design (a relative mask follows its own passband), against the
  current values on the same boards.

Caution: the gain is an estimate under the modelled part distributions; with lot sharing,
parts are grouped into reels by their present marked values. Confirm by measurement of real
parts and qualified review before changing a parts list.
"""
from __future__ import annotations

import itertools
import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .design import Design
from .errors import Cancelled, InputError
from .evaluate import evaluate_values, prepare, scores_for
from .grades import Grade
from .sampling import part_values
from .stats import YieldEstimate, yield_estimate
from .temperature import judged_boards
from .values import format_value, series_for_tolerance, series_values

__all__ = [
    "MAX_EXHAUSTIVE",
    "Move",
    "CentringResult",
    "neighbours",
    "centre_values",
]

MAX_EXHAUSTIVE = 10      # movable parts searched exhaustively (3^10 = 59,049 combinations)
SCREEN_ROWS = 1_500_000  # boards x combinations screened at once at most (memory and time)
CONFIRM = 4              # best screened sets confirmed on the full number of boards


@dataclass(frozen=True)
class Move:
    """One part's new value: ``ref``, ``old`` and ``new`` values (SI units), ``series``."""

    ref: str
    old: float
    new: float
    series: str

    def text(self, unit: str = "") -> str:
        """``R3 10k -> 10.2k (E96)``."""
        return f"{self.ref} {format_value(self.old, unit)} -> {format_value(self.new, unit)} ({self.series})"


@dataclass(frozen=True)
class CentringResult:
    """What the search found.

    ``moves`` the best set (empty when no set beat the current values); ``before`` and
    ``after`` the yields of the current and the best values on the same boards (the
    confirmation run); ``combinations`` screened, ``screen_boards`` per combination;
    ``exhaustive`` whether every combination was screened; ``movable`` the parts that could
    move; ``design`` the design with the moves applied (the current design when none);
    ``only_after``/``only_before`` the boards whose verdict the moves changed.
    """

    moves: tuple[Move, ...]
    before: YieldEstimate
    after: YieldEstimate
    combinations: int
    screen_boards: int
    exhaustive: bool
    movable: tuple[str, ...]
    design: Design
    only_after: int = 0   # boards that pass only with the new values (same boards)
    only_before: int = 0  # boards that pass only with the current values

    @property
    def gain_standard_error(self) -> float:
        """Standard error of the paired gain (a fraction): sqrt(b + c - (b - c)^2 / n) / n,
        with b, c the boards that changed either way (McNemar's paired proportions)."""
        n, b, c = self.after.samples, self.only_after, self.only_before
        return math.sqrt(max(b + c - (b - c) ** 2 / n, 0.0)) / n if n else 0.0

    @property
    def gain(self) -> float:
        """Yield gain, a fraction (after - before on the same boards)."""
        return self.after.estimate - self.before.estimate

    def search_text(self, refs: bool = True) -> str:
        """One line saying how the search went, for the terminal and the window.

        Parameters
        ----------
        refs : bool
            Also list the movable parts' references.

        Returns
        -------
        str
            ``searched every combination: 6,561 combinations of 8 parts (R1, ...), 228 boards each, ...``.
        """
        how = "searched every combination" if self.exhaustive else "guided search (one part at a time)"
        n = len(self.movable)
        which = f" ({', '.join(self.movable)})" if refs else ""
        return (f"{how}: {self.combinations:,} combinations of {n} part{'s' if n != 1 else ''}{which}, "
                f"{self.screen_boards:,} boards each, the same boards for all")

    def to_dict(self) -> dict:
        """Plain numbers for the JSON output."""
        return {"moves": [{"ref": m.ref, "old": m.old, "new": m.new, "series": m.series} for m in self.moves],
                "yield_before": self.before.to_dict(), "yield_after": self.after.to_dict(),
                "gain": self.gain, "gain_standard_error": self.gain_standard_error, "combinations": self.combinations,
                "screen_boards": self.screen_boards, "exhaustive": self.exhaustive,
                "movable": list(self.movable)}


def stop_if_asked(should_stop: Callable[[], bool] | None) -> None:
    """Raise :class:`~tolspread.errors.Cancelled` when ``should_stop()`` says so."""
    if should_stop is not None and should_stop():
        raise Cancelled()


def neighbours(value: float, grade: Grade) -> tuple[str, float, float] | None:
    """The series of ``grade``'s tolerance and the values one step below and above ``value``.

    Parameters
    ----------
    value : float
        The marked value, SI units.
    grade : Grade
        The part's grade (its tolerance picks the series, common practice: 1 % -> E96).

    Returns
    -------
    (series, below, above) or None
        None for op-amps and grades without a tolerance (exact parts).
    """
    if grade.kind not in ("R", "C", "L") or not grade.tolerance_pct > 0:
        return None
    series = series_for_tolerance(grade.tolerance_pct)
    vals = series_values(series, value / 2, value * 2)
    below = vals[vals < value * (1 - 1e-9)]
    above = vals[vals > value * (1 + 1e-9)]
    if not below.size or not above.size:
        return None
    return series, float(below[-1]), float(above[0])


def _score(margins: np.ndarray, scale: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Passing boards and the mean worst scaled margin, per combination.

    ``margins`` (K, S, J); ``scale`` (J,) each span's margin spread at the current values.
    """
    passed = np.all(margins >= 0, axis=2).sum(axis=1)
    worst = np.min(margins / scale, axis=2).mean(axis=1)
    return passed, worst


def centre_values(design: Design, *, samples: int | None = None, seed: int | None = None,
                  screen_boards: int | None = None,
                  progress: Callable[[int, int], None] | None = None,
                  should_stop: Callable[[], bool] | None = None) -> CentringResult:
    """Search neighbouring preferred values for a higher yield at the same grades.

    Parameters
    ----------
    design : Design
        The design; its grades stay as they are.
    samples : int, optional
        Boards of the confirmation run (default: the design's analysis samples).
    seed : int, optional
        Seed of the boards (default: the design's); screening and confirmation share it.
    screen_boards : int, optional
        Boards per combination while screening (default: as many as fit
        :data:`SCREEN_ROWS`, between 128 and 2,000).
    progress : callable, optional
        ``progress(done, total)`` after each block of screened combinations.
    should_stop : callable, optional
        Asked after each block and each confirmation; True raises
        :class:`~tolspread.errors.Cancelled` (nothing is changed).

    Returns
    -------
    CentringResult
        The best set of moves with the yields before and after on the same boards.
    """
    a = design.analysis
    seed = a.seed if seed is None else int(seed)
    samples = a.samples if samples is None else int(samples)
    grades = design.part_grades()
    nominal = np.array([p.value for p in design.parts])
    options: list[tuple[int, str, np.ndarray]] = []  # part index, series, values [now, below, above]
    for i, (p, g) in enumerate(zip(design.parts, grades)):
        nb = neighbours(p.value, g)
        if nb is not None:
            options.append((i, nb[0], np.array([p.value, nb[1], nb[2]])))
    if not options:
        raise InputError("no part can move to a neighbouring preferred value (every part is exact or an "
                         "op-amp)", "parts")
    n_mov = len(options)
    exhaustive = n_mov <= MAX_EXHAUSTIVE
    total = 3 ** n_mov if exhaustive else 1 + 2 * n_mov
    if screen_boards is None:
        screen_boards = int(min(2000, max(128, SCREEN_ROWS // total)))
    prep = prepare(design)
    scores = scores_for(design, screen_boards, seed, a.method)
    # each part's sampled values for each of its three marked values: (3, S, P)
    noms = np.repeat(nominal[None, :], 3, axis=0)
    for i, _, vals in options:
        noms[:, i] = vals
    sampled = np.stack([part_values(noms[c], grades, scores, a.conditions) for c in range(3)])
    base = evaluate_values(prep, sampled[0], metrics=False).margins
    scale = np.maximum(np.std(base, axis=0), 1e-12)
    cols = np.array([i for i, _, _ in options])

    def screen(choices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Pass counts and mean worst scaled margins of combinations ``choices`` (K, n_mov)."""
        k = choices.shape[0]
        vals = np.broadcast_to(sampled[0], (k,) + sampled[0].shape).copy()  # (K, S, P)
        s_idx = np.arange(screen_boards)
        for m, col in enumerate(cols):  # movable parts, not boards
            vals[:, :, col] = sampled[choices[:, m][:, None], s_idx[None, :], col]
        marg = evaluate_values(prep, vals.reshape(-1, nominal.size), metrics=False).margins
        return _score(marg.reshape(k, screen_boards, -1), scale)

    block = max(1, SCREEN_ROWS // (4 * screen_boards))
    if exhaustive:
        all_choices = np.array(list(itertools.product(range(3), repeat=n_mov)), dtype=np.intp)
        passed = np.empty(len(all_choices), dtype=np.int64)
        worst = np.empty(len(all_choices))
        for lo in range(0, len(all_choices), block):  # blocks of combinations, memory bounded
            stop_if_asked(should_stop)
            passed[lo:lo + block], worst[lo:lo + block] = screen(all_choices[lo:lo + block])
            if progress is not None:
                progress(min(lo + block, len(all_choices)), len(all_choices))
        order = np.lexsort((-worst, -passed))
        finalists = all_choices[order[:CONFIRM]]
    else:
        state = np.zeros(n_mov, dtype=np.intp)
        p0, w0 = screen(state[None, :])
        best_key = (int(p0[0]), float(w0[0]))
        total = 1
        for _ in range(2 * n_mov):  # each round moves one part to its best value
            trial = np.array([np.where(np.arange(n_mov) == m, c, state)
                              for m in range(n_mov) for c in range(3) if c != state[m]])
            stop_if_asked(should_stop)
            p_, w_ = screen(trial)
            total += len(trial)
            j = int(np.lexsort((-w_, -p_))[0])
            key = (int(p_[j]), float(w_[j]))
            if key <= best_key:
                break
            state, best_key = trial[j], key
            if progress is not None:
                progress(total, total)
        finalists = state[None, :]
    # confirmation: full boards, each set with its own nominal design, same seed
    before_ens = judged_boards(design, samples=samples, seed=seed, should_stop=should_stop)
    before = yield_estimate(before_ens.passed, None, a.confidence, a.interval)  # type: ignore[arg-type]
    best_design, best_est, best_moves, changed = design, before, (), (0, 0)
    for ch in finalists:
        stop_if_asked(should_stop)
        if not ch.any():
            continue
        moves = tuple(Move(design.parts[i].ref, float(vals[0]), float(vals[c]), series)
                      for (i, series, vals), c in zip(options, ch) if c)
        cand = design
        for mv in moves:
            cand = cand.with_part(mv.ref, value=mv.new, text="")
        ens = judged_boards(cand, samples=samples, seed=seed, should_stop=should_stop)
        est = yield_estimate(ens.passed, None, a.confidence, a.interval)  # type: ignore[arg-type]
        if est.passed > best_est.passed:
            only_after = int(np.sum(ens.passed & ~before_ens.passed))
            only_before = int(np.sum(before_ens.passed & ~ens.passed))
            best_design, best_est, best_moves, changed = cand, est, moves, (only_after, only_before)
    return CentringResult(best_moves, before, best_est, total, screen_boards, exhaustive,
                          tuple(design.parts[i].ref for i, _, _ in options), best_design, *changed)
