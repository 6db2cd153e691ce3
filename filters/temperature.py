"""Boards judged over an operating temperature range and after a time in service.

A design's analysis may name an operating range (``operating_range_c``, deg C) and extra
temperatures to judge at (``judge_at_c``); every board is then judged at each of the
:func:`judged_temperatures` (the range's ends, 25 deg C when inside it, and the extra
points) with its own parts: the tolerance, temperature and drift scores are drawn once
per board (:mod:`filters.sampling`), so only the temperature changes between the runs. A
board passes only if it meets the mask at every judged temperature.

A design may also name a time in service (``service_life``: hours at a temperature); the
same boards are then judged again with each grade's life drift and ageing applied
(:mod:`filters.temperature_physics`), giving the yield at delivery and after the service
life side by side.

Boards are vectorized (one :func:`filters.evaluate.evaluate` per temperature); the loop
runs over the handful of temperatures only.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any, Callable

import numpy as np

from .sampling import Conditions
from .stats import YieldEstimate, yield_estimate
from .summary import MetricSummary, summarize
from .temperature_physics import REFERENCE_CELSIUS, temperature_change
from .temperature_settings import HOURS_PER_YEAR, judged_temperatures

__all__ = [
    "judged_temperatures",
    "judged_conditions",
    "TemperaturePoint",
    "OverTemperature",
    "ServiceLife",
    "judge_over_range",
    "judge_service_life",
    "nominal_at",
    "passed_over_range",
    "judged_boards",
    "judged_ensemble",
    "lived_budgets",
]

# per-temperature metric summaries kept for the f0/Q shift table and the cutoff over temperature
_SHIFT_METRICS = ("cutoff_hz", "centre_hz")


@dataclass(frozen=True)
class TemperaturePoint:
    """The boards judged at one temperature: yield, boards failing each span (in mask
    order), and the cutoff / stage f0 and Q summaries there (nominal = the nominal board
    at that temperature, typical temperature coefficients)."""

    temperature_c: float
    yield_: YieldEstimate
    span_failed: tuple[int, ...]
    summaries: dict[str, MetricSummary]

    def to_dict(self) -> dict[str, Any]:
        return {"temperature_c": self.temperature_c, "yield": self.yield_.to_dict(),
                "span_failed": list(self.span_failed),
                "metrics": {k: v.to_dict() for k, v in self.summaries.items()}}


@dataclass(frozen=True)
class OverTemperature:
    """Boards judged at every temperature of the range. ``overall`` counts boards that
    pass at every point; ``worst_margins`` (S, spans) is each board's smallest margin over
    the points (what the overall pass/fail reads); ``worst_index`` (S, spans) int8, the
    index into ``points`` of the temperature each board's margin is smallest at (the first
    on a tie; what the spread budget over the range reads its part values at)."""

    range_c: tuple[float, float]
    points: tuple[TemperaturePoint, ...]
    overall: YieldEstimate
    span_names: tuple[str, ...]
    worst_margins: np.ndarray
    worst_index: np.ndarray | None = None

    @property
    def temperatures_c(self) -> tuple[float, ...]:
        return tuple(p.temperature_c for p in self.points)

    def to_dict(self) -> dict[str, Any]:
        return {"range_c": list(self.range_c), "temperatures_c": list(self.temperatures_c),
                "overall": self.overall.to_dict(), "spans": list(self.span_names),
                "points": [p.to_dict() for p in self.points]}


@dataclass(frozen=True)
class ServiceLife:
    """The same boards at delivery and after ``hours`` at ``temp_c`` (each judged at the
    judged temperatures when the design has a range, else at its board temperature).
    ``worst_margins`` (S, spans) and ``worst_index`` (S, spans) are the margins after the
    life, smallest over the judged temperatures, and where (as in :class:`OverTemperature`);
    :func:`filters.analysis.analyze` drops them once the after-life spread budget is taken."""

    hours: float
    temp_c: float
    delivery: YieldEstimate
    after: YieldEstimate
    after_points: tuple[TemperaturePoint, ...]
    worst_margins: np.ndarray | None = None
    worst_index: np.ndarray | None = None

    @property
    def years(self) -> float:
        return self.hours / HOURS_PER_YEAR

    def to_dict(self) -> dict[str, Any]:
        return {"hours": self.hours, "years": self.years, "temperature_c": self.temp_c,
                "delivery": self.delivery.to_dict(), "after": self.after.to_dict(),
                "after_points": [p.to_dict() for p in self.after_points]}


def nominal_at(prep: Any, grades: Any, temp_c: float, hours: float = 0.0, service_temp_c: float = 25.0
               ) -> np.ndarray:
    """Part values (1, P) of the nominal board at ``temp_c``: typical temperature change
    (score 0), no tolerance, ageing after ``hours`` (life drift is symmetric: none), class II
    parts at their stated DC bias.

    Parameters
    ----------
    prep : Prepared
        The prepared design.
    grades : sequence of Grade
        (P,) one grade per part.
    temp_c : float
        Board temperature, deg C.
    hours : float
        Hours in service.
    service_temp_c : float
        Temperature in service, deg C.

    Returns
    -------
    np.ndarray
        (1, P) float part values in SI units.
    """
    from .temperature_physics import ageing_factor, bias_change

    nom = prep.nominal.values
    t = np.array([float(temp_c)])
    zero = np.zeros(1)
    f = [float(1 + temperature_change(g, zero, t)[0]) * ageing_factor(g, hours) * (1 + bias_change(g))
         for g in grades]
    return (nom * np.array(f))[None, :]


def _points(design: Any, prep: Any, ens: Any, temps: tuple[float, ...], hours: float, service_temp_c: float,
            should_stop: Callable[[], bool] | None, metrics: bool = True
            ) -> tuple[list[TemperaturePoint], np.ndarray, np.ndarray]:
    """Judge the ensemble's boards at each of ``temps``; the points, the worst margins
    (S, spans) and the index (S, spans) int8 of the temperature each is smallest at.
    ``metrics=False``: pass/fail only (the points' summaries are empty).

    ``ens`` was evaluated at the design's own board conditions (every caller's base run), so
    a judged point with exactly those conditions (25 deg C, at delivery, for a board
    temperature of [25, 25]) reads ``ens`` itself instead of evaluating the same boards
    again: the same numbers, one evaluation fewer per run (a grade search's candidate: 3
    instead of 4)."""
    from .evaluate import evaluate, evaluate_values

    a = design.analysis
    worst = None
    where = np.zeros((ens.samples, len(design.mask)), dtype=np.int8)
    points = []
    for k, t in enumerate(temps):  # a handful of temperatures; the boards are vectorized inside evaluate
        cond = judged_conditions(design, t, hours, service_temp_c)
        if cond == a.conditions and (ens.metrics or not metrics):
            e = ens  # these boards at these conditions: the base run itself
        else:
            e = evaluate(design, samples=ens.samples, seed=ens.seed, method=ens.method, start=ens.start,
                         grades=ens.grades, curves=False, metrics=metrics, prepared=prep, conditions=cond,
                         should_stop=should_stop)
        if worst is None:
            worst = e.margins.copy()
        else:
            where[e.margins < worst] = k
            np.minimum(worst, e.margins, out=worst)
        keep = [n for n in e.metrics if n in _SHIFT_METRICS or n.endswith((".f0_hz", ".q"))]
        summaries = {}
        if keep:
            with np.errstate(all="ignore"):
                nominal = evaluate_values(prep, nominal_at(prep, ens.grades, t, hours, service_temp_c))
            summaries = {n: replace(summarize(e, n), nominal=float(nominal.metrics[n][0])) for n in keep}
        est = yield_estimate(e.passed, None, a.confidence, a.interval)
        points.append(TemperaturePoint(t, est, tuple(int(x) for x in (e.margins < 0).sum(axis=0)), summaries))
    assert worst is not None
    return points, worst, where


def judged_conditions(design: Any, temp_c: float, hours: float = 0.0,
                      service_temp_c: float = REFERENCE_CELSIUS) -> Conditions:
    """The board conditions one judged temperature is evaluated at.

    Parameters
    ----------
    design : Design
        The design (its lot share).
    temp_c : float
        The judged temperature, deg C.
    hours : float
        Hours in service (0: at delivery).
    service_temp_c : float
        Temperature in service, deg C.

    Returns
    -------
    Conditions
        The board at ``temp_c`` (a fixed temperature), after ``hours`` in service.
    """
    return Conditions(temp_c, temp_c, design.analysis.lot_share, hours, service_temp_c)


def judge_over_range(design: Any, prep: Any, ens: Any,
                     should_stop: Callable[[], bool] | None = None) -> OverTemperature | None:
    """Judge the boards of ``ens`` at every judged temperature of ``design``; None without
    an operating range.

    Parameters
    ----------
    design : Design
        The design (its operating range and service life).
    prep : Prepared
        The prepared design.
    ens : Ensemble
        The sampled boards.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    OverTemperature or None
        Yield and failures at each judged temperature (deg C) and over the whole range.
    """
    temps = judged_temperatures(design.analysis)
    if not temps:
        return None
    a = design.analysis
    points, worst, where = _points(design, prep, ens, temps, 0.0, REFERENCE_CELSIUS, should_stop)
    overall = yield_estimate(np.all(worst >= 0, axis=1), None, a.confidence, a.interval)
    return OverTemperature(a.operating_range_c, tuple(points), overall, tuple(s.label for s in design.mask), worst,
                           where)


def judge_service_life(design: Any, prep: Any, ens: Any, delivery: YieldEstimate,
                       should_stop: Callable[[], bool] | None = None) -> ServiceLife | None:
    """The boards of ``ens`` after the design's service life, judged as at delivery (at
    every judged temperature, or at the board temperature without a range); None when
    the design states no service life.

    Parameters
    ----------
    design : Design
        The design (its operating range and service life).
    prep : Prepared
        The prepared design.
    ens : Ensemble
        The sampled boards.
    delivery : YieldEstimate
        The yield at delivery (fractions).
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    ServiceLife or None
        The yield after the service life and what changed since delivery.
    """
    a = design.analysis
    if not a.service_hours:
        return None
    temps = judged_temperatures(a)
    if temps:
        points, worst, where = _points(design, prep, ens, temps, a.service_hours, a.service_temp_c, should_stop,
                                       metrics=False)
        passed = np.all(worst >= 0, axis=1)
    else:
        from .evaluate import evaluate

        cond = replace(a.conditions, service_hours=a.service_hours, service_temp_c=a.service_temp_c)
        e = evaluate(design, samples=ens.samples, seed=ens.seed, method=ens.method, start=ens.start,
                     grades=ens.grades, curves=False, metrics=False, prepared=prep, conditions=cond,
                     should_stop=should_stop)
        points, passed, worst = [], e.passed, e.margins
        where = np.zeros(worst.shape, dtype=np.int8)
    after = yield_estimate(passed, None, a.confidence, a.interval)
    return ServiceLife(a.service_hours, a.service_temp_c, delivery, after, tuple(points), worst, where)


def passed_over_range(design: Any, prep: Any, grades: Any, seed: int | None, method: str | None, start: int,
                      stop: int, should_stop: Callable[[], bool] | None = None) -> np.ndarray | None:
    """Whether boards ``[start, stop)`` meet the mask at every judged temperature, shape
    (stop - start,), judged without metrics (what an adaptive run's stopping rule reads);
    None without an operating range.

    Parameters
    ----------
    design : Design
        The design (its operating range and service life).
    prep : Prepared
        The prepared design.
    grades : sequence of Grade
        (P,) one grade per part.
    seed : int or None
        Seed of the boards (default: the design's).
    method : str or None
        Sampling method (default: the design's).
    start : int
        First board index.
    stop : int
        One past the last board index.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    np.ndarray or None
        (stop - start,) bool.
    """
    from .evaluate import evaluate

    temps = judged_temperatures(design.analysis)
    if not temps:
        return None
    ok = np.ones(stop - start, dtype=bool)
    for t in temps:
        cond = judged_conditions(design, t)
        e = evaluate(design, samples=stop - start, start=start, seed=seed, method=method, grades=grades,
                     curves=False, metrics=False, prepared=prep, conditions=cond, should_stop=should_stop)
        ok &= e.passed
    return ok


def judged_ensemble(design: Any, prep: Any, ens: Any, should_stop: Callable[[], bool] | None = None) -> Any:
    """``ens`` judged over the design's operating range: its margins the smallest over the
    judged temperatures (pass/fail only, no metrics), so ``passed`` means at every one;
    ``ens`` itself without a range. What a grade search compares candidates by.

    Parameters
    ----------
    design : Design
        The design (its operating range and service life).
    prep : Prepared
        The prepared design.
    ens : Ensemble
        The sampled boards.
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.

    Returns
    -------
    Ensemble
        The ensemble with margins (S, spans) the smallest over the judged temperatures.
    """
    temps = judged_temperatures(design.analysis)
    if not temps:
        return ens
    _, worst, _ = _points(design, prep, ens, temps, 0.0, REFERENCE_CELSIUS, should_stop, metrics=False)
    return replace(ens, margins=worst)


def judged_boards(design: Any, *, prepared: Any = None, should_stop: Callable[[], bool] | None = None,
                  **evaluate_args: Any) -> Any:
    """Pass/fail boards of ``design`` judged as a plain analysis judges them: over its
    operating range when it has one (:func:`judged_ensemble`), else at its conditions.

    Parameters
    ----------
    design : Design
        The design.
    prepared : Prepared, optional
        Its prepared evaluation (default: prepared here).
    should_stop : callable, optional
        ``should_stop()`` returning True cancels the run.
    **evaluate_args
        Passed to :func:`filters.evaluate.evaluate` (samples, seed, grades, ...); curves and
        metrics are off.

    Returns
    -------
    Ensemble
        Its ``passed`` (S,) means "meets the mask at every judged temperature".
    """
    from .evaluate import evaluate, prepare

    prep = prepared if prepared is not None else prepare(design)
    ens = evaluate(design, curves=False, metrics=False, prepared=prep, should_stop=should_stop, **evaluate_args)
    return judged_ensemble(design, prep, ens, should_stop)



def lived_budgets(design: Any, prep: Any, ens: Any, budget: dict, over: OverTemperature | None,
                  life: ServiceLife | None) -> tuple[dict, dict, ServiceLife | None]:
    """The spread budgets of a design judged as the board lives.

    Over an operating range each span's margin budget is that of the board's worst margin
    over the judged temperatures, fitted on its parts at the temperature where that margin
    is smallest (:func:`filters.budget.worst_budget`), in place of the board-temperature
    one; the metrics' budgets (cutoff, stage f0 and Q) stay at the board temperature and
    say so. With a service life the same is taken after it. Without either, ``budget`` as it is.

    Parameters
    ----------
    design : Design
        The design (its operating range and service life).
    prep : Prepared
        The prepared design.
    ens : Ensemble
        The sampled boards (margins (S, spans) the worst over the range, when it has one).
    budget : dict of str to Budget
        The budgets at the board temperature (:func:`filters.budget.spread_budget`); empty
        when none were asked for.
    over : OverTemperature or None
        The boards over the operating range.
    life : ServiceLife or None
        The boards after the service life.

    Returns
    -------
    tuple[dict, dict, ServiceLife or None]
        The budgets (metric name -> Budget, fractions), the after-life margins' budgets
        (empty without a service life), and ``life`` without its per-board arrays once
        they are read (kept when no budget was asked for).
    """
    from .budget import worst_budget
    from .temperature_text import DEGREE

    if not budget or (over is None and life is None):
        return budget, {}, life
    a = design.analysis
    temps = judged_temperatures(a)
    where = ""
    if over is not None:
        lo, hi = over.range_c
        where = f"{lo:g} to {hi:g} {DEGREE}"
        ranged = worst_budget(ens, prep, over.worst_margins, over.worst_index,
                              [judged_conditions(design, t) for t in temps],
                              f"over {where}, worst judged temperature")
        board_t = (f"at {a.conditions.temp_low_c:g} {DEGREE}" if a.conditions.temp_low_c == a.conditions.temp_high_c
                   else "at the board temperature")
        budget = {n: ranged.get(n) or replace(b, basis=b.basis or board_t) for n, b in budget.items()}
    after: dict = {}
    if life is not None and life.worst_margins is not None:
        conds = ([judged_conditions(design, t, life.hours, life.temp_c) for t in temps] if temps else
                 [replace(a.conditions, service_hours=life.hours, service_temp_c=life.temp_c)])
        after = worst_budget(ens, prep, life.worst_margins, life.worst_index, conds,
                             f"after {life.years:.3g} years" + (f", worst of {where}" if where else ""))
        life = replace(life, worst_margins=None, worst_index=None)
    return budget, after, life
