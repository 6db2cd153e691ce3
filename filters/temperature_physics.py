"""Part physics by technology: how a part's value moves with temperature, bias and time.

Every function is vectorized over boards; the numbers come from the grade
(:class:`filters.grades.Grade`), whose catalog sources are named in assets/sources.md.

- :func:`for_value`: the grade as it applies to one marked value: capacitors below 10 pF
  take the grade's absolute tolerance in pF (IEC 60062 letters B, C, D = plus/minus 0.1,
  0.25, 0.5 pF), a thick-film grade its temperature-coefficient spread for the value's range.
- :func:`temperature_change`: relative change at a temperature: a class II curve
  (typical change times a part-to-part scale, clipped to the code's limit) or the linear
  coefficient ``tc (T - 25 degC)``.
- :func:`life_fraction`: load-life drift after ``hours`` at ``temp_c`` from the grade's
  rating: ``d = d_rated sqrt(hours AF / rated_hours)`` with the Arrhenius acceleration
  ``AF = exp(Ea / k (1 / T_rated - 1 / T))`` (temperatures in kelvin).
- :func:`ageing_factor`: class II capacitance ageing, a loss of ``a`` % per decade of hours
  since the last heating: ``1 - a/100 log10((t0 + hours) / t0)``, ``t0`` the part's age at
  delivery (:data:`AGE_AT_DELIVERY_H`).
- :func:`bias_change`: class II capacitance change at a DC bias, interpolated in the grade's
  bias curve.
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .grades import Grade

__all__ = [
    "REFERENCE_CELSIUS",
    "SMALL_CAPACITOR_F",
    "BOLTZMANN_EV",
    "AGE_AT_DELIVERY_H",
    "for_value",
    "has_temperature",
    "temperature_change",
    "life_fraction",
    "ageing_factor",
    "bias_change",
]

REFERENCE_CELSIUS = 25.0
SMALL_CAPACITOR_F = 10e-12   # below this a capacitor's tolerance is absolute (IEC 60062)
BOLTZMANN_EV = 8.617333262e-5  # eV/K (CODATA 2018 exact value)
# Age of a class II capacitor at delivery, hours since its last heating above the Curie
# point; the tolerance is taken to hold then. An assumption (from memory: makers measure
# capacitance some hundreds to a thousand hours after the last heating).
AGE_AT_DELIVERY_H = 1000.0
KELVIN = 273.15


def for_value(grade: Grade, kind: str, value: float, bias_v: float = 0.0) -> Grade:
    """``grade`` as it applies to a part of ``kind`` with marked value ``value`` (SI) at
    DC bias ``bias_v`` (V).

    A capacitor below 10 pF with ``tolerance_pf`` set gets that absolute tolerance as a
    percentage of its value; a grade with ``tempco_by_value`` gets the spread (ppm/K) of the
    first row whose [low, high) holds the value; a grade with a bias curve, on a part that
    states its bias, gets that bias (its change is applied by :func:`bias_change`) and loses
    its ``drift_pct``, which stood for the loss at a bias nobody stated. Otherwise the grade
    itself.

    Parameters
    ----------
    grade : Grade
        The grade.
    kind : str
        Part kind (``"R"``, ``"C"``, ``"L"``, ``"opamp"``).
    value : float
        Marked value in SI units.
    bias_v : float
        DC bias in V.

    Returns
    -------
    Grade
        The grade as it applies to that part.
    """
    g = grade
    if bias_v and g.bias_curve_pct:
        g = replace(g, bias_v=float(bias_v), drift_pct=0.0)
    if g.tolerance_pf and kind == "C" and value < SMALL_CAPACITOR_F:
        g = replace(g, tolerance_pct=min(99.0, 100.0 * g.tolerance_pf * 1e-12 / value))
    for low, high, spread in g.tempco_by_value:
        if low <= value < high:
            g = replace(g, tempco_spread_ppm=spread)
            break
    return g


def has_temperature(grade: Grade) -> bool:
    """Whether the grade's value depends on temperature at all.

    Parameters
    ----------
    grade : Grade
        The grade.

    Returns
    -------
    bool
        True when the value changes with temperature.
    """
    return bool(grade.tempco_ppm or grade.tempco_spread_ppm or grade.temp_curve_pct)


def temperature_change(grade: Grade, u: np.ndarray, temp_c: np.ndarray) -> np.ndarray:
    """Relative change (fraction) at ``temp_c`` (deg C, shape (S,)) of parts whose
    temperature score is ``u`` (uniform in -1..1, shape (S,)).

    Class II (``temp_curve_pct`` set): the typical curve at ``temp_c`` (linear
    interpolation, flat beyond its ends) times ``1 + temp_curve_spread u``, clipped to the
    code's limit ``temp_limit_pct``. Otherwise ``(tempco + spread u) 1e-6 (T - 25)``.

    Parameters
    ----------
    grade : Grade
        The grade.
    u : np.ndarray
        (S,) temperature scores, uniform in -1..1.
    temp_c : np.ndarray
        (S,) temperatures in deg C.

    Returns
    -------
    np.ndarray
        (S,) float relative changes (fractions).
    """
    if grade.temp_curve_pct:
        t, pct = np.array(grade.temp_curve_pct).T
        change = np.interp(temp_c, t, pct) / 100.0 * (1 + grade.temp_curve_spread * u)
        if grade.temp_limit_pct:
            lim = grade.temp_limit_pct / 100.0
            change = np.clip(change, -lim, lim)
        return change
    tc = (grade.tempco_ppm + grade.tempco_spread_ppm * u) * 1e-6
    return tc * (temp_c - REFERENCE_CELSIUS)


def life_fraction(grade: Grade, hours: float, temp_c: float) -> float:
    """Load-life drift limit (fraction, plus/minus) after ``hours`` at ``temp_c``.

    ``d_rated sqrt(hours AF / life_hours)``, ``AF = exp(Ea / k (1 / T_rated - 1 / T))``
    with T in kelvin and k Boltzmann's constant in eV/K; ``activation_ev = 0`` gives no
    temperature acceleration. The square-root time law and the Arrhenius factor are
    common practice for film resistor drift (from memory; see assets/sources.md).

    Parameters
    ----------
    grade : Grade
        The grade.
    hours : float
        Hours in service.
    temp_c : float
        Temperature in service, deg C.

    Returns
    -------
    float
        Drift limit as a fraction.
    """
    if not grade.life_drift_pct or hours <= 0:
        return 0.0
    af = math.exp(grade.activation_ev / BOLTZMANN_EV
                  * (1 / (grade.life_temp_c + KELVIN) - 1 / (temp_c + KELVIN)))
    return grade.life_drift_pct / 100.0 * math.sqrt(hours * af / grade.life_hours)


def ageing_factor(grade: Grade, hours: float) -> float:
    """Class II ageing: the value after ``hours`` more in service, relative to delivery.

    Parameters
    ----------
    grade : Grade
        The grade.
    hours : float
        Hours in service.

    Returns
    -------
    float
        Value after / value at delivery (no unit).
    """
    if not grade.ageing_pct_per_decade or hours <= 0:
        return 1.0
    return 1 - grade.ageing_pct_per_decade / 100.0 * math.log10((AGE_AT_DELIVERY_H + hours) / AGE_AT_DELIVERY_H)


def bias_change(grade: Grade, bias_v: float | None = None) -> float:
    """Relative change (fraction) of a class II capacitor at DC bias ``bias_v`` (V, the
    grade's own ``bias_v`` set by :func:`for_value` when None): the grade's bias curve
    interpolated (flat beyond its ends); 0 without a curve.

    Parameters
    ----------
    grade : Grade
        The grade.
    bias_v : float, optional
        DC bias in V.

    Returns
    -------
    float
        Relative change (fraction).
    """
    bias_v = grade.bias_v if bias_v is None else bias_v
    if not grade.bias_curve_pct or bias_v == 0:
        return 0.0
    v, pct = np.array(grade.bias_curve_pct).T
    return float(np.interp(abs(bias_v), v, pct)) / 100.0
