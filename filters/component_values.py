"""Component values of one synthesized section: the practical range, the exact values
(capacitors from a series around an impedance level, resistors solved), and snapped
candidates evaluated with the project's engine.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

:func:`section_values` gives the exact values for one section (the design equations of
each topology are in its docstring); :func:`section_choices` gives snapped candidates,
best first, for the joint refinement in :mod:`tolspread.synthesis`.

Units: f0 in Hz, resistors in ohm, capacitors in F; value arrays are (rows, roles).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np

from .design import Design, Part, Stage
from .engine import compile_design, dc_gain2, stage_coefficients
from .errors import InputError
from .metric_names import stage_metric_name
from .metrics import stage_metrics
from .nominal_measure import notch_hz
from .prototypes import TWO_PI
from .topologies import NOTCHES
from .synthesis_result import hz_text
from .values import series_neighbours, series_values, snap as snap_value

__all__ = [
    "R_MIN",
    "R_MAX",
    "C_MIN",
    "C_MAX",
    "C_LEVEL_1KHZ",
    "LEVELS_TRIED",
    "NEIGHBOURS",
    "F0_WEIGHT",
    "KEPT",
    "R_SHUNT_MIN",
    "ROLES",
    "R_INVERTER",
    "FIXED",
    "SectionChoice",
    "section_values",
    "section_choices",
    "choose_values",
    "section_coeffs",
    "stage_options",
]


R_MIN, R_MAX = 1e3, 1e6        # ohm: the practical resistor range every synthesized part keeps
C_MIN, C_MAX = 100e-12, 1e-6   # F: the practical C0G capacitor range
C_LEVEL_1KHZ = 10e-9           # F: preferred impedance level, 10 nF at 1 kHz, scaled as 1/f0
LEVELS_TRIED = 6               # impedance levels (capacitor values) tried per section when snapping
NEIGHBOURS = 2                 # series values tried on each side of every exact resistor
F0_WEIGHT = 2.0                # cost weight of f0 against Q: w = max(2.5, F0_WEIGHT Q)
KEPT = 8                       # candidates per section kept for the joint refinement
R_SHUNT_MIN = 100.0            # ohm: the multiple-feedback band-pass's shunt resistor R2 may go this low
_RANGE_WORDS = "resistors of 1 kohm to 1 Mohm and capacitors of 100 pF to 1 uF"
_NOTCH_ROLES = ("R1", "R2", "R3", "R4", "R5", "R6", "C1", "C2", "C3")
ROLES = {
    "sallen_key_lowpass": ("R1", "R2", "C1", "C2"),
    "mfb_lowpass": ("R1", "R2", "R3", "C1", "C2"),
    "sallen_key_highpass": ("C1", "C2", "R1", "R2"),
    "mfb_highpass": ("C1", "C2", "C3", "R1", "R2"),
    "mfb_bandpass": ("R1", "R2", "R3", "C1", "C2"),
    "rc_lowpass": ("R1", "C1"),
    "rc_highpass": ("R1", "C1"),
    "notch_lowpass": _NOTCH_ROLES,
    "notch_highpass": _NOTCH_ROLES,
    "notch": _NOTCH_ROLES,
}
R_INVERTER = 10e3              # ohm: a notch section's inverter resistors R5 = R6 (not snapped: a series value)
FIXED = ("R5", "R6")           # notch roles whose value does not scale with f0 and is never snapped


def _at_least(x: float, series: str, step: int = 0) -> float:
    """The smallest value of ``series`` that is not below ``x`` (within 1e-9), or the
    ``step``-th value above that one."""
    vals = series_values(series, x * (1 - 1e-9), x * 1e3)
    return float(vals[step])


def _level_scale(topology: str, q: float | None) -> float:
    """The level capacitor's share of the impedance level (see :func:`section_values`)."""
    if topology == "sallen_key_lowpass":
        return 1.0 / (2 * q)  # type: ignore[operator]
    if topology == "mfb_lowpass":
        return 1.0 / (2 * math.sqrt(2) * q)  # type: ignore[operator]
    return 1.0


def _preferred_level(topology: str, f0_hz: float, q: float | None) -> float:
    """The preferred level capacitor (F): 10 nF x (1 kHz / f0) x its share, unsnapped."""
    return C_LEVEL_1KHZ * (1e3 / f0_hz) * _level_scale(topology, q)


def _cap_sets(topology: str, q: float | None, level: float, cap_series: str,
              choices: int = 1, zr: float | None = None) -> list[dict[str, float]]:
    """Capacitor values (F) by role for one level capacitor ``level`` (a series value).

    Sallen-Key and multiple-feedback low-pass: C2 = level, C1 the first (``choices`` > 1:
    also the next) series value at or above 4 Q^2 C2 (8 Q^2 C2), the condition for real
    resistors. Notch sections (``zr`` = wz/w0): C1 = C2 = level, C3 the nearest series
    value to level x min(1, 1/zr^2) (so neither the DC nor the high-frequency gain
    exceeds 1 by more than the series' rounding). Every other topology uses ``level`` for all its capacitors.
    """
    if topology in NOTCHES:
        assert zr is not None
        return [{"C1": level, "C2": level, "C3": float(snap_value(level * min(1.0, zr ** -2), cap_series))}]
    if topology in ("sallen_key_lowpass", "mfb_lowpass"):
        k = 4.0 if topology == "sallen_key_lowpass" else 8.0
        return [{"C1": _at_least(k * q * q * level, cap_series, j), "C2": level}  # type: ignore[operator]
                for j in range(choices)]
    caps = [r for r in ROLES[topology] if r.startswith("C")]
    return [{r: level for r in caps}]


def _sqrt_disc(d: float, scale: float) -> float:
    # a discriminant that is zero in exact arithmetic may come out a hair below zero
    return math.sqrt(d) if d > 0 else 0.0 if d > -1e-9 * scale else math.nan


def _resistors(topology: str, f0_hz: float, q: float | None, caps: dict[str, float],
               gain: float, zr: float | None = None) -> dict[str, float]:
    """The exact resistors (ohm) for capacitors ``caps`` (F): see :func:`section_values`."""
    w0 = TWO_PI * f0_hz
    if topology in ("rc_lowpass", "rc_highpass"):
        return {"R1": 1.0 / (w0 * caps["C1"])}
    assert q is not None
    if topology in NOTCHES:
        assert zr is not None
        r = 1.0 / (w0 * caps["C1"])
        wz = zr * w0
        return {"R1": q * r, "R2": r, "R3": r, "R4": 1.0 / (wz * wz * r * caps["C2"] * caps["C3"]),
                "R5": R_INVERTER, "R6": R_INVERTER}
    if topology == "sallen_key_lowpass":
        c1, c2 = caps["C1"], caps["C2"]
        prod = 1.0 / (w0 * w0 * c1 * c2)      # R1 R2
        total = 1.0 / (w0 * q * c2)            # R1 + R2
        r2 = 0.5 * (total + _sqrt_disc(total * total - 4 * prod, total * total))
        return {"R1": prod / r2, "R2": r2}
    if topology == "mfb_lowpass":
        c1, c2 = caps["C1"], caps["C2"]
        prod = 1.0 / (w0 * w0 * c1 * c2)      # R R3
        total = 1.0 / (w0 * q * c2)            # R + 2 R3
        r = 0.5 * (total + _sqrt_disc(total * total - 8 * prod, total * total))
        return {"R1": r, "R2": r, "R3": prod / r}
    c = caps["C1"]
    if topology == "sallen_key_highpass":
        return {"R1": 1.0 / (2 * q * w0 * c), "R2": 2 * q / (w0 * c)}
    if topology == "mfb_highpass":
        return {"R1": 1.0 / (3 * q * w0 * c), "R2": 3 * q / (w0 * c)}
    r3 = 2 * q / (w0 * c)
    return {"R1": r3 / (2 * gain), "R2": 1.0 / (w0 * c * (2 * q - gain / q)), "R3": r3}


def _ordered(topology: str, vals: dict[str, float]) -> dict[str, float]:
    return {r: vals[r] for r in ROLES[topology]}


def section_values(topology: str, f0_hz: float, q: float | None, cap_series: str = "E12",
                   gain: float = 1.0, level: float | None = None, fz_hz: float | None = None) -> dict[str, float]:
    """Exact part values (ohm, F) for one section, by role, before resistor snapping.

    Capacitors are chosen from ``cap_series`` around an impedance level (``level``, the
    level capacitor in F; default 10 nF at 1 kHz scaled as 1/f0, kept in 100 pF..1 uF and
    snapped to the series); the resistors are then solved exactly, so the section has f0
    (Hz) and Q exactly with these values:

    - ``sallen_key_lowpass`` (unity gain; tests/REFERENCES.md section 6: w0^2 = 1/(R1R2C1C2),
      Q = sqrt(R1R2C1C2)/(C2(R1+R2))): C2 = level/(2Q), C1 = the next series value at or
      above 4 Q^2 C2 (the condition for real R), R1 < R2 the roots of the quadratic.
    - ``mfb_lowpass`` (DC gain -1: R1 = R2 = R; Q = sqrt(R R3 C1 C2)/(C2 (R + 2 R3))):
      C2 = level/(2 sqrt(2) Q), C1 at or above 8 Q^2 C2, R the larger root, R3 = 1/(w0^2 R C1 C2).
    - ``sallen_key_highpass`` (unity gain, C1 = C2 = C; Q = 1/2 sqrt(R2/R1),
      w0 = 1/(C sqrt(R1 R2))): R1 = 1/(2 Q w0 C), R2 = 2 Q/(w0 C).
    - ``mfb_highpass`` (C1 = C2 = C3 = C, high-frequency gain -C1/C3 = -1): by nodal
      analysis H = -s^2 (C1/C3)/(s^2 + s (C1+C2+C3)/(C2 C3 R2) + 1/(R1 R2 C2 C3)), so
      R2 = 3 Q/(w0 C), R1 = 1/(3 Q w0 C).
    - ``mfb_bandpass`` (C1 = C2 = C; f_m = (1/2piC) sqrt((R1+R2)/(R1 R3 R2)),
      Q = pi f_m R3 C, A_m = -R3/(2 R1)): midband gain magnitude ``gain`` (below 2 Q^2):
      R3 = 2 Q/(w0 C), R1 = R3/(2 gain), R2 = 1/(w0 C (2Q - gain/Q)).
    - ``rc_lowpass`` / ``rc_highpass`` one section (first order, ``q`` None):
      R = 1/(w C).
    - ``notch_lowpass``, ``notch_highpass``, ``notch`` (notch frequency ``fz_hz``;
      tests/REFERENCES.md section 16: w0^2 = R6/(R2 R3 R5 C1 C2), Q = w0 R1 C1,
      wz^2 = R6/(R2 R4 R5 C2 C3)): C1 = C2 = level, C3 the nearest series value to
      level x min(1, (f0/fz)^2), R2 = R3 = R = 1/(w0 C1), R1 = Q R, R5 = R6 =
      :data:`R_INVERTER`, R4 = 1/(wz^2 R C2 C3). DC gain R3/R4 and high-frequency gain
      C3/C1, the larger of them 1 within the capacitor series' rounding.

    Parameters
    ----------
    topology : str
        The section's topology name.
    f0_hz : float
        Natural frequency in Hz.
    q : float or None
        Q, None for a first-order section.
    cap_series : str
        E-series the capacitors come from.
    gain : float
        Passband gain magnitude (no unit).
    level : float, optional
        The level capacitor in F.
    fz_hz : float, optional
        Notch (zero) frequency in Hz, for a notch section.

    Returns
    -------
    dict[str, float]
        Role -> value in SI units (ohm, F).
    """
    if topology not in ROLES:
        raise InputError(f"no synthesis rule for topology {topology!r}", "topology")
    if not topology.startswith("rc_") and (q is None or not q > 0):
        raise InputError(f"{topology} needs a Q above 0", "q")
    if topology == "mfb_bandpass" and not 0 < gain < 2 * q * q:  # type: ignore[operator]
        raise InputError(f"the midband gain must lie between 0 and 2 Q^2 = {2 * q * q:.4g}", "gain")  # type: ignore[operator]
    zr = _zero_ratio(topology, f0_hz, fz_hz)
    if level is None:
        c = _preferred_level(topology, f0_hz, q)
        level = float(snap_value(min(max(c, C_MIN), C_MAX), cap_series))
    caps = _cap_sets(topology, q, level, cap_series, zr=zr)[0]
    return _ordered(topology, {**caps, **_resistors(topology, f0_hz, q, caps, gain, zr)})


def _zero_ratio(topology: str, f0_hz: float, fz_hz: float | None) -> float | None:
    """fz/f0 for a notch section (refused without a notch frequency above 0), else None."""
    if topology not in NOTCHES:
        if fz_hz is not None:
            raise InputError(f"{topology} has no notch frequency", "fz_hz")
        return None
    if fz_hz is None or not fz_hz > 0:
        raise InputError(f"{topology} needs a notch frequency above 0 Hz", "fz_hz")
    return fz_hz / f0_hz


def _in_range(vals: np.ndarray, topology: str) -> np.ndarray:
    """Rows of ``vals`` (rows, roles of ``topology``) whose every part lies in the practical
    range: resistors 1 kohm..1 Mohm (the shunt resistor R2 of a multiple-feedback band-pass
    down to 100 ohm: it sets Q and spreads 4 Q^2 : 1 from R3), capacitors 100 pF..1 uF."""
    roles = ROLES[topology]
    lo = np.array([(R_SHUNT_MIN if (topology, r) == ("mfb_bandpass", "R2") else R_MIN)
                   if r.startswith("R") else C_MIN for r in roles]) * (1 - 1e-9)
    hi = np.array([R_MAX if r.startswith("R") else C_MAX for r in roles]) * (1 + 1e-9)
    return np.all(np.isfinite(vals) & (vals >= lo) & (vals <= hi), axis=1)


def _refusal(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
             cap_series: str, gain: float, zr: float | None = None) -> InputError:
    """Why no impedance level keeps section ``index``'s values in the practical range."""
    exact = section_values(topology, f0_hz, q, cap_series, gain, fz_hz=None if zr is None else zr * f0_hz)
    rs = [v for r, v in exact.items() if r.startswith("R")]
    cs = [v for r, v in exact.items() if r.startswith("C")]
    r_spread, c_spread = max(rs) / min(rs), max(cs) / min(cs)
    where = f"section {index} (f0 {hz_text(f0_hz)}" + (f", Q {q:.3g})" if q is not None else ")")
    if topology == "mfb_bandpass" and r_spread > R_MAX / R_SHUNT_MIN:
        return InputError(
            f"{where} would spread its resistors {r_spread:,.0f} : 1 (a multiple-feedback band-pass "
            "section spreads them 4 Q^2 : 1), more than 100 ohm to 1 Mohm hold (Q at most about 50): "
            "widen the bandwidth or lower the order", "bandwidth_hz")
    if topology != "mfb_bandpass" and (r_spread > R_MAX / R_MIN or c_spread > C_MAX / C_MIN):
        spread = max(r_spread, c_spread)
        return InputError(
            f"{where} would spread its values {spread:,.0f} : 1, more than {_RANGE_WORDS} hold: "
            "lower the order (or the ripple), or use the other topology", "order")
    lo, hi = _f0_window(topology, q, cap_series, gain, zr)
    span = (f"such a section from about {hz_text(lo)} to {hz_text(hi)}" if lo <= hi
            else f"sections from about {hz_text(1 / (TWO_PI * R_MAX * C_MAX))} to {hz_text(1 / (TWO_PI * R_MIN * C_MIN))}")
    return InputError(
        f"{where} cannot be built from {_RANGE_WORDS} at any impedance level; these ranges hold {span}",
        "cutoff_hz")


def _f0_window(topology: str, q: float | None, cap_series: str, gain: float,
               zr: float | None = None) -> tuple[float, float]:
    """The f0 range (Hz) over which some level keeps a section of this Q in range.

    Resistors scale as 1/f0 at a fixed level (the capacitors do not change), so each
    level allows f0 from max(R at 1 Hz)/R_MAX to min(R at 1 Hz)/R_MIN; the union over
    levels is returned (lo > hi: none)."""
    lo, hi = math.inf, 0.0
    for level in series_values(cap_series, C_MIN, C_MAX):
        caps = _cap_sets(topology, q, float(level), cap_series, zr=zr)[0]
        if max(caps.values()) > C_MAX * (1 + 1e-9) or min(caps.values()) < C_MIN * (1 - 1e-9):
            continue
        rs = {r: v for r, v in _resistors(topology, 1.0, q, caps, gain, zr).items() if r not in FIXED}
        r_low = {r: (R_SHUNT_MIN if (topology, r) == ("mfb_bandpass", "R2") else R_MIN) for r in rs}
        f_lo = max(v / R_MAX for v in rs.values())
        f_hi = min(v / r_low[r] for r, v in rs.items())
        if f_lo <= f_hi:
            lo, hi = min(lo, f_lo), max(hi, f_hi)
    return lo, hi


def stage_options(topology: str) -> dict[str, Any]:
    """The stage options a synthesized section of ``topology`` is built with.

    Parameters
    ----------
    topology : str
        The section's topology name.

    Returns
    -------
    dict[str, Any]
        One RC section for ``rc_*``, unity gain for Sallen-Key, none otherwise.
    """
    return ({"sections": 1} if topology.startswith("rc_")
            else {"gain": "unity"} if topology.startswith("sallen_key") else {})


def section_coeffs(topology: str, roles: Sequence[str], vals: np.ndarray):
    """The engine's (circuit, coefficients) of one section for every row of ``vals``
    (rows, roles): one batch, no loop over rows.

    Parameters
    ----------
    topology : str
        The section's topology name.
    roles : sequence of str
        Its roles, the columns of ``vals``.
    vals : np.ndarray
        (rows, roles) part values in SI units.

    Returns
    -------
    tuple[Circuit, list[StageCoefficients]]
        The compiled section and its coefficients for every row.
    """
    d = Design(tuple(Part(r, r[0], float(vals[0, j]), "EXACT") for j, r in enumerate(roles)),
               (Stage(topology, {r: r for r in roles}, stage_options(topology), "section"),))
    circuit = compile_design(d)
    return circuit, stage_coefficients(circuit, vals)


def _section_fq(topology: str, roles: Sequence[str], vals: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray | None, np.ndarray, np.ndarray | None]:
    """f0 (Hz), Q (None for first order), passband |H|^2 and notch frequency (Hz; None
    but for a notch section) of one section for every row of ``vals`` (rows, roles), from
    the project's engine (one batch, no loop over rows)."""
    circuit, coeffs = section_coeffs(topology, roles, vals)
    m = stage_metrics(circuit, coeffs)
    fc = stage_metric_name(1, "fc_hz")
    if fc in m:
        return m[fc], None, np.ones(vals.shape[0]), None
    notch = topology in NOTCHES
    g2 = dc_gain2(coeffs) if circuit.kind == "lowpass" and not notch else np.ones(vals.shape[0])
    fz = notch_hz(coeffs[0].unscaled()[0]) if notch else None
    return m[stage_metric_name(1, "f0_hz")], m[stage_metric_name(1, "q")], g2, fz


def section_choices(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
                    series: str = "E24", cap_series: str = "E12", gain: float = 1.0,
                    snap: bool = True, fz_hz: float | None = None) -> list[SectionChoice]:
    """Candidate part values for section ``index`` (from 1), best first (at most :data:`KEPT`).

    Impedance level: every capacitor value of ``cap_series`` within 100 pF..1 uF is tried
    as the level capacitor; the levels whose exact values (resistors solved, see
    :func:`section_values`) all lie in the practical range (resistors 1 kohm..1 Mohm,
    capacitors 100 pF..1 uF) are kept, nearest the preferred level first. None left:
    :class:`InputError` naming the cutoff (the range cannot reach f0) or the bandwidth /
    order (the section's Q spreads its values wider than the range).

    Snapping (``snap``): for the :data:`LEVELS_TRIED` nearest levels (and, for low-pass
    sections, the next C1 as well), every combination of the :data:`NEIGHBOURS` series
    values on each side of every exact resistor is evaluated with the engine in one batch;
    the combination in range with the smallest cost
    (w ln(f0/f0t))^2 + (ln(Q/Qt))^2 + (ln |gain/gain_t|)^2, w = max(2.5, 2 Q), is chosen
    (the weight: a 1 % f0 error moves the response Q times as far as a 1 % Q error, in
    units of the section's bandwidth); the :data:`KEPT` cheapest are returned for
    ``synthesis._refine_jointly``. A notch section (``fz_hz``) adds (w ln(fz/fzt))^2 and
    leaves its gain to the cascade; its inverter resistors R5 = R6 are not snapped.
    Without ``snap``: one choice, the exact values at the nearest level.

    Parameters
    ----------
    index : int
        Section number, from 1 (names its parts in messages).
    topology : str
        The section's topology name.
    f0_hz : float
        Natural frequency in Hz.
    q : float or None
        Q, None for a first-order section.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    series : str
        E-series the resistors are snapped to.
    cap_series : str
        E-series the capacitors come from.
    gain : float
        Passband gain magnitude (no unit).
    snap : bool
        Snap the resistors to ``series``.
    fz_hz : float, optional
        Notch (zero) frequency in Hz, for a notch section.

    Returns
    -------
    list[SectionChoice]
        Candidates (exact and snapped values by role, their f0 in Hz, Q and notch
        frequency in Hz), best first.
    """
    zr = _zero_ratio(topology, f0_hz, fz_hz)
    pref = _preferred_level(topology, f0_hz, q)
    feasible: list[tuple[float, dict[str, float]]] = []
    for level in series_values(cap_series, C_MIN, C_MAX):
        for caps in _cap_sets(topology, q, float(level), cap_series, 2 if snap else 1, zr):
            vals = _ordered(topology, {**caps, **_resistors(topology, f0_hz, q, caps, gain, zr)})
            row = np.array([[vals[r] for r in ROLES[topology]]])
            if _in_range(row, topology)[0]:
                feasible.append((abs(math.log(level / pref)) + 1e-9 * len(feasible), vals))  # ties: first C1
    if not feasible:
        raise _refusal(index, topology, f0_hz, q, kind, cap_series, gain, zr)
    feasible.sort(key=lambda t: t[0])
    if not snap:
        return [SectionChoice(feasible[0][1], feasible[0][1], f0_hz, q, fz_hz)]
    roles = ROLES[topology]
    r_roles = [r for r in roles if r.startswith("R") and not (zr is not None and r in FIXED)]
    blocks, exacts, dist = [], [], []
    for b, (d_level, vals) in enumerate(feasible[:2 * LEVELS_TRIED]):
        grids = np.meshgrid(*[series_neighbours(vals[r], series, NEIGHBOURS) for r in r_roles], indexing="ij")
        combos = np.stack([g.ravel() for g in grids], axis=1)
        block = np.empty((combos.shape[0], len(roles)))
        for j, r in enumerate(roles):
            block[:, j] = combos[:, r_roles.index(r)] if r in r_roles else vals[r]
        blocks.append(block)
        exacts += [b] * block.shape[0]
        dist.append(np.full(block.shape[0], d_level))
    cand = np.concatenate(blocks)
    which = np.array(exacts)
    level_d = np.concatenate(dist)
    keep = _in_range(cand, topology)
    if not keep.any():
        raise _refusal(index, topology, f0_hz, q, kind, cap_series, gain, zr)
    cand, which, level_d = cand[keep], which[keep], level_d[keep]
    f0, qq, g2, fz = _section_fq(topology, roles, cand)
    w = 1.0 if q is None else max(2.5, F0_WEIGHT * q)
    cost = (w * np.log(f0 / f0_hz)) ** 2 + 0.25 * np.log(g2) ** 2 + 1e-7 * level_d ** 2
    if qq is not None:
        cost = cost + np.log(np.abs(qq) / q) ** 2
    if fz is not None:
        cost = cost + (w * np.log(fz / fz_hz)) ** 2
    cost = np.where(np.isfinite(cost), cost, np.inf)
    order = np.argsort(cost, kind="stable")[:KEPT]
    order = order[np.isfinite(cost[order])] if np.isfinite(cost[order[0]]) else order[:1]
    levels = feasible[:2 * LEVELS_TRIED]
    return [SectionChoice(levels[int(which[i])][1], {r: float(cand[i, j]) for j, r in enumerate(roles)},
                          float(f0[i]), None if qq is None else float(qq[i]),
                          None if fz is None else float(fz[i])) for i in order]


def choose_values(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
                  series: str = "E24", cap_series: str = "E12", gain: float = 1.0,
                  snap: bool = True, fz_hz: float | None = None) -> tuple[dict[str, float], dict[str, float]]:
    """(exact, chosen) part values (ohm, F) by role for section ``index`` (from 1): the
    best of :func:`section_choices` (see there).

    Parameters
    ----------
    index : int
        Section number, from 1 (names its parts in messages).
    topology : str
        The section's topology name.
    f0_hz : float
        Natural frequency in Hz.
    q : float or None
        Q, None for a first-order section.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    series : str
        E-series the resistors are snapped to.
    cap_series : str
        E-series the capacitors come from.
    gain : float
        Passband gain magnitude (no unit).
    snap : bool
        Snap the resistors to ``series``.
    fz_hz : float, optional
        Notch (zero) frequency in Hz, for a notch section.

    Returns
    -------
    tuple[dict[str, float], dict[str, float]]
        Exact and chosen values, role -> value in SI units (ohm, F).
    """
    best = section_choices(index, topology, f0_hz, q, kind, series, cap_series, gain, snap, fz_hz)[0]
    return best.exact, best.values


@dataclass(frozen=True)
class SectionChoice:
    """One candidate for a section: ``exact`` values (the chosen capacitors, exact
    resistors), the snapped ``values`` (ohm, F, by role), and their f0 (Hz), Q and notch
    frequency (Hz; None but for a notch section)."""

    exact: dict[str, float]
    values: dict[str, float]
    f0_hz: float
    q: float | None
    fz_hz: float | None = None

