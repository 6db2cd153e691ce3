"""Measuring a design at its nominal values with the project's engine: per-stage
coefficients, |H|^2 at any frequency, every stage's f0 and Q, the peak, the crossings of a
level and the cutoff (band-pass: centre and bandwidth).

Used by synthesis (what snapping did), its error checks and the op-amp check. Units:
frequencies in Hz, gains as |H|^2 (not dB) unless the name says dB.
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np

from .design import Design
from .engine import compile_design, gain2_at, stage_coefficients
from .errors import InputError
from .evaluate import prepare
from .lazyimport import LazyModule
from .metric_names import stage_metric_name
from .metrics import stage_metrics
from .prototypes import TWO_PI
from .topologies import NOTCHES

__all__ = ["nominal_coeffs", "stage_fq", "notch_hz", "stage_notches", "peak_gain2", "level_crossings", "stop_edges",
           "nominal_gain2", "measure_cutoff"]

optimize = LazyModule("scipy.optimize")  # imported on first use


def nominal_coeffs(design: Design):
    """The engine's (circuit, per-stage coefficients) of ``design`` at its nominal values (one board).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    tuple[Circuit, list[StageCoefficients]]
        The compiled design and its coefficients for one board (1, K) per stage.
    """
    circuit = compile_design(design)
    values = np.array([[p.value for p in design.parts]])
    return circuit, stage_coefficients(circuit, values)


def stage_fq(design: Design) -> list[tuple[float, float | None]]:
    """(f0 Hz, Q) of every stage of ``design`` at nominal values; first order: (fc, None).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[tuple[float, float or None]]
        One (f0 in Hz, Q) per stage.
    """
    circuit, coeffs = nominal_coeffs(design)
    m = stage_metrics(circuit, coeffs)
    out: list[tuple[float, float | None]] = []
    for k in range(1, len(design.stages) + 1):
        fc = stage_metric_name(k, "fc_hz")
        if fc in m:
            out.append((float(m[fc][0]), None))
        else:
            out.append((float(m[stage_metric_name(k, "f0_hz")][0]), float(m[stage_metric_name(k, "q")][0])))
    return out


def notch_hz(num: np.ndarray) -> np.ndarray:
    """The notch frequency (Hz) of numerators n0 + n1 s + n2 s^2 (rows, 3; ascending powers
    of s in rad/s): sqrt(n0/n2) / 2 pi (NaN where n0/n2 is not positive).

    Parameters
    ----------
    num : np.ndarray
        (rows, 3) numerator coefficients, ascending powers of s (rad/s).

    Returns
    -------
    np.ndarray
        (rows,) float notch frequencies in Hz.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = num[:, 0] / num[:, 2]
    return np.sqrt(np.where(ratio > 0, ratio, np.nan)) / TWO_PI


def stage_notches(design: Design) -> list[float | None]:
    """The notch frequency (Hz) of every stage of ``design`` at nominal values (ideal
    op-amps assumed: the numerator of a notch section is n0 + n2 s^2); None for a stage
    that is not a notch section.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[float or None]
        One entry per stage, Hz.
    """
    _, coeffs = nominal_coeffs(design)
    return [float(notch_hz(c.unscaled()[0])[0]) if st.topology in NOTCHES else None
            for st, c in zip(design.stages, coeffs)]


def peak_gain2(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray) -> float:
    """The largest |H|^2 near the grid's maximum, refined between its neighbours.

    Parameters
    ----------
    g2 : callable
        ``g2(f_hz)`` -> |H|^2 (no unit) at frequencies in Hz (1-D).
    f : np.ndarray
        (F,) grid frequencies in Hz, ascending.
    grid : np.ndarray
        (F,) |H|^2 on ``f``.

    Returns
    -------
    float
        |H|^2 (no unit).
    """
    i = int(np.argmax(grid))
    lo_i, hi_i = max(i - 1, 0), min(i + 1, f.size - 1)
    res = optimize.minimize_scalar(lambda lf: -math.log(g2(np.array([math.exp(lf)]))[0]),
                                   bounds=(math.log(f[lo_i]), math.log(f[hi_i])), method="bounded",
                                   options={"xatol": 1e-12})
    return max(float(grid[i]), float(g2(np.array([math.exp(res.x)]))[0]))


def level_crossings(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray,
           level: float) -> tuple[float, float]:
    """The outermost frequencies (Hz) where |H|^2 crosses ``level`` (refined by brentq).

    Parameters
    ----------
    g2 : callable
        ``g2(f_hz)`` -> |H|^2 (no unit) at frequencies in Hz (1-D).
    f : np.ndarray
        (F,) grid frequencies in Hz, ascending.
    grid : np.ndarray
        (F,) |H|^2 on ``f``.
    level : float
        The level as |H|^2 (no unit).

    Returns
    -------
    tuple[float, float]
        (lowest, highest) crossing in Hz.
    """
    above = np.nonzero(grid >= level)[0]
    if above.size == 0:
        raise InputError("the response never reaches its cutoff level in the analysed range", "analysis")
    first, last = int(above[0]), int(above[-1])

    def h(lf: float) -> float:
        return math.log(g2(np.array([math.exp(lf)]))[0] / level)

    def root(a: float, b: float) -> float:
        la, lb = math.log(a), math.log(b)
        ha, hb = h(la), h(lb)
        if ha * hb > 0:  # a crossing on a grid point, within rounding
            return a if abs(ha) < abs(hb) else b
        return math.exp(optimize.brentq(h, la, lb, xtol=1e-14))

    lower = root(f[first - 1], f[first]) if first > 0 else math.nan
    upper = root(f[last], f[last + 1]) if last < f.size - 1 else math.nan
    return lower, upper


def stop_edges(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray,
               level: float) -> tuple[float, float]:
    """A band-stop's edges (Hz): where |H|^2 falls below ``level`` on the way down to the
    grid's minimum and where it rises back above it after, nearest the minimum (refined).

    Parameters
    ----------
    g2 : callable
        ``g2(f_hz)`` -> |H|^2 (no unit) at frequencies in Hz (1-D).
    f : np.ndarray
        (F,) grid frequencies in Hz, ascending.
    grid : np.ndarray
        (F,) |H|^2 on ``f``.
    level : float
        The level as |H|^2 (no unit).

    Returns
    -------
    tuple[float, float]
        (lower, upper) edge in Hz.
    """
    i = int(np.argmin(grid))
    lower = level_crossings(g2, f[:i + 1], grid[:i + 1], level)[1]
    upper = level_crossings(g2, f[i:], grid[i:], level)[0]
    return lower, upper


def nominal_gain2(design: Design) -> Callable[[np.ndarray], np.ndarray]:
    """|H(j 2 pi f)|^2 of the nominal design at frequencies f (Hz, 1-D), from the engine.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    callable
        ``g2(f_hz)`` -> (F,) |H|^2 (no unit) for (F,) frequencies in Hz.
    """
    _, coeffs = nominal_coeffs(design)
    return lambda x: gain2_at(coeffs, np.atleast_1d(np.asarray(x, dtype=float))[None, :])[0]


def measure_cutoff(design: Design) -> tuple[float, float | None]:
    """The nominal design's cutoff (Hz) at ``analysis.cutoff_db`` below its reference.

    Low-pass and high-pass: the analysis' own ``cutoff_hz`` metric (reference DC or high
    frequency gain), with None for the bandwidth. Band-pass: (centre, bandwidth) from the
    outermost crossings of the level ``cutoff_db`` below the exact peak (found on a dense
    grid and refined), centre = sqrt(lower x upper), bandwidth = upper - lower. Band-stop:
    the same from the stop band's edges (:func:`stop_edges`) at ``cutoff_db`` below the
    DC gain.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    tuple[float, float or None]
        Cutoff or centre in Hz, and the bandwidth in Hz (None for low-pass and high-pass).
    """
    circuit = compile_design(design)
    if circuit.kind not in ("bandpass", "bandstop"):
        return float(prepare(design.with_mask(())).nominal.metrics["cutoff_hz"]), None
    a = design.analysis
    f = np.geomspace(a.f_start, a.f_stop, 8001)
    g2 = nominal_gain2(design)
    grid = g2(f)
    if circuit.kind == "bandstop":
        lower, upper = stop_edges(g2, f, grid, float(g2(np.array([0.0]))[0]) * 10 ** (-a.cutoff_db / 10))
    else:
        lower, upper = level_crossings(g2, f, grid, peak_gain2(g2, f, grid) * 10 ** (-a.cutoff_db / 10))
    if not (math.isfinite(lower) and math.isfinite(upper)):
        raise InputError("the band edges lie outside the analysed range", "analysis")
    return math.sqrt(lower * upper), upper - lower

