"""Sampling part values: standard scores drawn once, mapped through each part's grade.

Common random numbers: :func:`draw_scores` depends only on the seed, the method, the
number of parts and the sample range, never on the grades. A grade maps the same scores
to values, so changing a tolerance rescales the same sampled boards, and two grade
choices are compared on the same boards.

Scores come in fixed blocks of :data:`BLOCK` samples, block ``k`` from its own child of
``numpy.random.SeedSequence(seed)``. Samples ``[start, stop)`` are therefore the same
whether drawn at once or in chunks, and a run of N samples is a prefix of a run of more.

Columns of the score array, for P parts: ``[0, P)`` value, ``[P, 2P)`` lot, ``[2P, 3P)``
temperature coefficient, ``[3P, 4P)`` drift, ``4P`` board temperature.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Literal, Sequence

import numpy as np

from .errors import InputError
from .grades import Grade
from .lazyimport import LazyModule
from .temperature_physics import (REFERENCE_CELSIUS, ageing_factor, bias_change, has_temperature,
                                  life_fraction, temperature_change)

__all__ = [
    "Method",
    "METHODS",
    "BLOCK",
    "REFERENCE_CELSIUS",
    "columns",
    "draw_scores",
    "relative_deviation",
    "Conditions",
    "part_values",
    "limits",
]

special = LazyModule("scipy.special")  # imported on first use (ndtr, ndtri): about 0.3 s

Method = Literal["random", "sobol"]
METHODS: tuple[str, ...] = ("random", "sobol")
BLOCK = 4096
_U_EPS = 1e-12


def columns(n_parts: int) -> int:
    """Number of score columns for ``n_parts`` parts.

    Parameters
    ----------
    n_parts : int
        Number of parts P.

    Returns
    -------
    int
        Score columns per board, 4P + 1: value, lot, temperature coefficient and
        drift of each part, then the board temperature.
    """
    return 4 * n_parts + 1


def draw_scores(seed: int, n_parts: int, start: int, stop: int, method: Method = "random") -> np.ndarray:
    """Standard normal scores for samples ``[start, stop)``, shape (stop - start, 4P + 1).

    ``method`` is ``random`` (numpy PCG64) or ``sobol`` (scrambled Sobol points from
    scipy.stats.qmc, seeded by ``seed``, mapped through the normal inverse CDF).

    Parameters
    ----------
    seed : int
        Seed of the boards.
    n_parts : int
        Number of parts P.
    start : int
        First board index.
    stop : int
        One past the last board index.
    method : str
        ``"random"`` or ``"sobol"``.

    Returns
    -------
    np.ndarray
        (stop - start, 4P + 1) float standard scores (no unit).
    """
    if not 0 <= start <= stop:
        raise InputError(f"bad sample range [{start}, {stop})", "samples")
    ncol = columns(n_parts)
    if method == "sobol":
        from scipy.stats import qmc  # imported here: scipy.stats takes long to import

        engine = qmc.Sobol(d=ncol, scramble=True, seed=np.random.default_rng(seed))
        if start:
            engine.fast_forward(start)
        with warnings.catch_warnings():
            # Balance is best at powers of two; other counts are still valid QMC points.
            warnings.simplefilter("ignore", UserWarning)
            u = engine.random(stop - start)
        return special.ndtri(np.clip(u, _U_EPS, 1 - _U_EPS))
    if method != "random":
        raise InputError(f"unknown sampling method {method!r}; use random or sobol", "analysis.method")
    out = np.empty((stop - start, ncol))
    first, last = start // BLOCK, (stop - 1) // BLOCK if stop > start else start // BLOCK - 1
    for k in range(first, last + 1):  # blocks, not samples: at most stop/BLOCK iterations
        rng = np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed, spawn_key=(k,))))
        block = rng.standard_normal((BLOCK, ncol))
        lo, hi = max(start, k * BLOCK), min(stop, (k + 1) * BLOCK)
        out[lo - start:hi - start] = block[lo - k * BLOCK:hi - k * BLOCK]
    return out


def relative_deviation(grade: Grade, z: np.ndarray) -> np.ndarray:
    """Relative deviation (fraction) of parts of ``grade`` from standard normal scores ``z``.

    Parameters
    ----------
    grade : Grade
        The grade (its tolerance in %, distribution, coverage, truncation).
    z : np.ndarray
        Standard normal scores, any shape.

    Returns
    -------
    np.ndarray
        Relative deviations (fractions), of the shape of ``z``.
    """
    if grade.measured:  # a measured part: each board takes one measured deviation (bootstrap)
        dev = np.asarray(grade.measured)
        idx = np.minimum((special.ndtr(z) * dev.size).astype(np.intp), dev.size - 1)
        return dev[idx]
    tol = grade.tolerance_pct / 100.0
    if tol == 0:
        return np.zeros_like(z)
    if grade.distribution == "uniform":
        return tol * (2 * special.ndtr(z) - 1)
    c = grade.coverage  # the tolerance limit in standard deviations
    sigma = tol / c
    if grade.distribution == "binned":
        b = grade.bin_inner_pct / 100.0 / sigma
        lo_c, lo_b = special.ndtr(-c), special.ndtr(-b)
        mass = lo_b - lo_c  # probability of one hump
        u = special.ndtr(z)
        low = special.ndtri(np.clip(lo_c + 2 * u * mass, _U_EPS, 1 - _U_EPS))
        high = special.ndtri(np.clip(special.ndtr(b) + (2 * u - 1) * mass, _U_EPS, 1 - _U_EPS))
        return sigma * np.where(u < 0.5, low, high)
    if grade.truncate:
        lo, hi = special.ndtr(-c), special.ndtr(c)
        u = lo + special.ndtr(z) * (hi - lo)
        return sigma * np.clip(special.ndtri(np.clip(u, _U_EPS, 1 - _U_EPS)), -c, c)
    return sigma * np.clip(z, -8.0, 8.0)  # 8 standard deviations: ~1e-15 of boards lie beyond


@dataclass(frozen=True)
class Conditions:
    """Board conditions: temperature range in deg C (equal ends: fixed), lot share 0..1,
    time in service (hours at ``service_temp_c`` deg C; 0 = as delivered).

    ``lot_share`` is the fraction of a part's value variance shared by parts of the same
    marked value and grade on one board (taken from one reel); 0 means independent parts.
    """

    temp_low_c: float = REFERENCE_CELSIUS
    temp_high_c: float = REFERENCE_CELSIUS
    lot_share: float = 0.0
    service_hours: float = 0.0
    service_temp_c: float = REFERENCE_CELSIUS


def part_values(nominal: Sequence[float], grades: Sequence[Grade], scores: np.ndarray,
                conditions: Conditions = Conditions()) -> np.ndarray:
    """Sampled part values, shape (samples, parts), in SI units (ohm, F, H, Hz).

    ``scores`` comes from :func:`draw_scores` with the same number of parts; each grade
    applies as given (:meth:`filters.design.Design.part_grades` has already applied it to
    the part's value and bias: pF tolerances of small capacitors, tempco by resistance
    range, class II bias). A part's factor is ``(1 + tolerance deviation) (1 + temperature
    change) (1 + drift) (1 + life drift) (ageing) (1 + DC-bias change)``; its temperature
    score and its drift score are drawn once per board, so the same board is judged at
    every temperature and after its service life with the same parts.

    Parameters
    ----------
    nominal : sequence of float
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part.
    scores : np.ndarray
        (S, 4P + 1) standard scores from :func:`draw_scores`.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.

    Returns
    -------
    np.ndarray
        (S, P) float part values in SI units (ohm, F, H; an op-amp's gain-bandwidth in Hz).
    """
    nom = np.asarray(nominal, dtype=float)
    p = nom.size
    if scores.shape[1] != columns(p) or len(grades) != p:
        raise ValueError("scores, nominal values and grades disagree on the number of parts")
    rho = conditions.lot_share
    z_value = scores[:, :p]
    if rho > 0:
        leader: dict[tuple[float, str], int] = {}
        lot_cols = [leader.setdefault((float(nom[i]), grades[i].name), i) for i in range(p)]
        z_value = np.sqrt(1 - rho) * z_value + np.sqrt(rho) * scores[:, p:2 * p][:, lot_cols]
    hours = conditions.service_hours
    life = [life_fraction(g, hours, conditions.service_temp_c) for g in grades]
    # columns only drawn into values when some grade or the temperature range uses them
    t_span = conditions.temp_high_c - conditions.temp_low_c
    fixed_at_reference = t_span == 0 and conditions.temp_low_c == REFERENCE_CELSIUS
    uses_tc = any(has_temperature(g) for g in grades) and not fixed_at_reference
    uses_drift = any(g.drift_pct for g in grades) or any(life)
    u_tc = 2 * special.ndtr(scores[:, 2 * p:3 * p]) - 1 if uses_tc else None
    u_drift = 2 * special.ndtr(scores[:, 3 * p:4 * p]) - 1 if uses_drift else None
    temp = conditions.temp_low_c + t_span * special.ndtr(scores[:, 4 * p]) if t_span else \
        np.full(scores.shape[0], conditions.temp_low_c)
    out = np.empty((scores.shape[0], p))
    for i, g in enumerate(grades):  # parts, not samples
        factor = 1 + relative_deviation(g, z_value[:, i])
        if has_temperature(g) and not fixed_at_reference:
            factor = factor * (1 + temperature_change(g, u_tc[:, i], temp))
        if g.drift_pct:
            factor = factor * (1 + g.drift_pct / 100.0 * u_drift[:, i])
        if life[i]:  # load-life drift: the same drift score, so a part drifts one way
            factor = factor * (1 + life[i] * u_drift[:, i])
        if hours and g.ageing_pct_per_decade:
            factor = factor * ageing_factor(g, hours)
        if g.bias_v and g.bias_curve_pct:  # class II at the DC bias its part states
            factor = factor * (1 + bias_change(g))
        out[:, i] = nom[i] * np.maximum(factor, 1e-6)  # guard: a value never reaches zero or below
    return out


def limits(nominal: Sequence[float], grades: Sequence[Grade], conditions: Conditions = Conditions()
           ) -> tuple[np.ndarray, np.ndarray]:
    """The lowest and highest value each part can take, shape (parts,) each.

    Includes the tolerance, the temperature change's extreme at either end of the
    temperature range (and at the class II curve's points between them), drift and, after
    a service life, the life drift and ageing. Used for worst-case corners.

    Parameters
    ----------
    nominal : sequence of float
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        (low, high), each (P,) float in SI units.
    """
    nom = np.asarray(nominal, dtype=float)
    lo = np.empty_like(nom)
    hi = np.empty_like(nom)
    t_ends = [conditions.temp_low_c, conditions.temp_high_c]
    for i, g in enumerate(grades):
        tol = g.tolerance_pct / 100.0
        temps = np.array(t_ends + [t for t, _ in g.temp_curve_pct if t_ends[0] < t < t_ends[1]])
        tcs = [float(x) for s in (-1, 1) for x in temperature_change(g, np.full(temps.size, float(s)), temps)]
        drift = g.drift_pct / 100.0 + life_fraction(g, conditions.service_hours, conditions.service_temp_c)
        age = ageing_factor(g, conditions.service_hours) * (1 + bias_change(g))
        lo[i] = nom[i] * (1 - tol) * (1 + min(tcs)) * (1 - drift) * age
        hi[i] = nom[i] * (1 + tol) * (1 + max(tcs)) * (1 + drift) * age
    return lo, hi
