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
    "TemperaturePoint",
    "OverTemperature",
    "ServiceLife",
    "judge_over_range",
    "judge_service_life",
    "nominal_at",
    "passed_over_range",
    "judged_boards",
    "judged_ensemble",
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
    the points (what the overall pass/fail reads)."""

    range_c: tuple[float, float]
    points: tuple[TemperaturePoint, ...]
    overall: YieldEstimate
    span_names: tuple[str, ...]
    worst_margins: np.ndarray

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
    judged temperatures when the design has a range, else at its board temperature)."""

    hours: float
    temp_c: float
    delivery: YieldEstimate
    after: YieldEstimate
    after_points: tuple[TemperaturePoint, ...]

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
            should_stop: Callable[[], bool] | None, metrics: bool = True) -> tuple[list[TemperaturePoint], np.ndarray]:
    """Judge the ensemble's boards at each of ``temps``; the points and the worst margins.
    ``metrics=False``: pass/fail only (the points' summaries are empty)."""
    from .evaluate import evaluate, evaluate_values

    a = design.analysis
    worst = None
    points = []
    for t in temps:  # a handful of temperatures; the boards are vectorized inside evaluate
        cond = Conditions(t, t, a.lot_share, hours, service_temp_c)
        e = evaluate(design, samples=ens.samples, seed=ens.seed, method=ens.method, start=ens.start,
                     grades=ens.grades, curves=False, metrics=metrics, prepared=prep, conditions=cond,
                     should_stop=should_stop)
        worst = e.margins.copy() if worst is None else np.minimum(worst, e.margins)
        keep = [n for n in e.metrics if n in _SHIFT_METRICS or n.endswith((".f0_hz", ".q"))]
        summaries = {}
        if keep:
            with np.errstate(all="ignore"):
                nominal = evaluate_values(prep, nominal_at(prep, ens.grades, t, hours, service_temp_c))
            summaries = {n: replace(summarize(e, n), nominal=float(nominal.metrics[n][0])) for n in keep}
        est = yield_estimate(e.passed, None, a.confidence, a.interval)
        points.append(TemperaturePoint(t, est, tuple(int(x) for x in (e.margins < 0).sum(axis=0)), summaries))
    assert worst is not None
    return points, worst


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
    points, worst = _points(design, prep, ens, temps, 0.0, REFERENCE_CELSIUS, should_stop)
    overall = yield_estimate(np.all(worst >= 0, axis=1), None, a.confidence, a.interval)
    return OverTemperature(a.operating_range_c, tuple(points), overall, tuple(s.label for s in design.mask), worst)


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
        points, worst = _points(design, prep, ens, temps, a.service_hours, a.service_temp_c, should_stop,
                                metrics=False)
        passed = np.all(worst >= 0, axis=1)
    else:
        from .evaluate import evaluate

        cond = replace(a.conditions, service_hours=a.service_hours, service_temp_c=a.service_temp_c)
        e = evaluate(design, samples=ens.samples, seed=ens.seed, method=ens.method, start=ens.start,
                     grades=ens.grades, curves=False, metrics=False, prepared=prep, conditions=cond,
                     should_stop=should_stop)
        points, passed = [], e.passed
    after = yield_estimate(passed, None, a.confidence, a.interval)
    return ServiceLife(a.service_hours, a.service_temp_c, delivery, after, tuple(points))


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
        cond = Conditions(t, t, design.analysis.lot_share)
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
    _, worst = _points(design, prep, ens, temps, 0.0, REFERENCE_CELSIUS, should_stop, metrics=False)
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

