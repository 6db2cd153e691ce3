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

__all__ = ["nominal_coeffs", "stage_fq", "peak_gain2", "level_crossings", "nominal_gain2", "measure_cutoff"]

optimize = LazyModule("scipy.optimize")  # imported on first use


def nominal_coeffs(design: Design):
    """The engine's (circuit, per-stage coefficients) of ``design`` at its nominal values (one board)."""
    circuit = compile_design(design)
    values = np.array([[p.value for p in design.parts]])
    return circuit, stage_coefficients(circuit, values)


def stage_fq(design: Design) -> list[tuple[float, float | None]]:
    """(f0 Hz, Q) of every stage of ``design`` at nominal values; first order: (fc, None)."""
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


def peak_gain2(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray) -> float:
    """The largest |H|^2 near the grid's maximum, refined between its neighbours."""
    i = int(np.argmax(grid))
    lo_i, hi_i = max(i - 1, 0), min(i + 1, f.size - 1)
    res = optimize.minimize_scalar(lambda lf: -math.log(g2(np.array([math.exp(lf)]))[0]),
                                   bounds=(math.log(f[lo_i]), math.log(f[hi_i])), method="bounded",
                                   options={"xatol": 1e-12})
    return max(float(grid[i]), float(g2(np.array([math.exp(res.x)]))[0]))


def level_crossings(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray,
           level: float) -> tuple[float, float]:
    """The outermost frequencies (Hz) where |H|^2 crosses ``level`` (refined by brentq)."""
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


def nominal_gain2(design: Design) -> Callable[[np.ndarray], np.ndarray]:
    """|H(j 2 pi f)|^2 of the nominal design at frequencies f (Hz, 1-D), from the engine."""
    _, coeffs = nominal_coeffs(design)
    return lambda x: gain2_at(coeffs, np.atleast_1d(np.asarray(x, dtype=float))[None, :])[0]


def measure_cutoff(design: Design) -> tuple[float, float | None]:
    """The nominal design's cutoff (Hz) at ``analysis.cutoff_db`` below its reference.

    Low-pass and high-pass: the analysis' own ``cutoff_hz`` metric (reference DC or high
    frequency gain), with None for the bandwidth. Band-pass: (centre, bandwidth) from the
    outermost crossings of the level ``cutoff_db`` below the exact peak (found on a dense
    grid and refined), centre = sqrt(lower x upper), bandwidth = upper - lower.
    """
    circuit = compile_design(design)
    if circuit.kind != "bandpass":
        return float(prepare(design.with_mask(())).nominal.metrics["cutoff_hz"]), None
    a = design.analysis
    f = np.geomspace(a.f_start, a.f_stop, 8001)
    g2 = nominal_gain2(design)
    grid = g2(f)
    level = peak_gain2(g2, f, grid) * 10 ** (-a.cutoff_db / 10)
    lower, upper = level_crossings(g2, f, grid, level)
    if not (math.isfinite(lower) and math.isfinite(upper)):
        raise InputError("the band edges lie outside the analysed range", "analysis")
    return math.sqrt(lower * upper), upper - lower

