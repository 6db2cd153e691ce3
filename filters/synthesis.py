"""Filter synthesis: from a response family, an order and a cutoff to a buildable design.

Over 500 lines until issue 12 #3 moves the op-amp check and the prototype maths into modules of their own.

:func:`prototype_sections` splits a normalized low-pass prototype into first- and
second-order sections (f0 and Q). :func:`synthesize` transforms the prototype to the
requested cutoff (low-pass, high-pass or band-pass), picks one topology per section,
chooses capacitors from a preferred-value series, solves the resistors exactly, snaps
them to their series, and returns the :class:`~tolspread.design.Design` with a report of
what snapping did to every section's f0 and Q and to the cutoff. :func:`gbw_warnings`
and :func:`opamp_shift_table` show how far a single-pole op-amp moves each active stage.

The poles come from ``scipy.signal`` (``butter``, ``cheby1``, ``bessel`` with
``analog=True``, ``output='zpk'``) and its frequency transforms (``lp2lp_zpk``,
``lp2hp_zpk``, ``lp2bp_zpk``); nothing here re-derives a prototype.

Units: frequencies in Hz (normalized prototypes in rad/s, ``Omega``), resistors in ohm,
capacitors in F, op-amp gain-bandwidth in Hz.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence

import numpy as np

from .design import Analysis, Design, Part, Stage, design_from_dict
from .engine import compile_design, dc_gain2, gain2_at, hf_gain2, stage_coefficients
from .errors import InputError
from .evaluate import prepare
from .grades import builtin_catalog
from .mask import Span
from .metric_names import stage_metric_name
from .metrics import pole_pairs, stage_metrics
from .lazyimport import LazyModule
from .values import E_SERIES, format_value, series_neighbours, series_values, snap as snap_value

__all__ = [
    "TWO_PI",
    "HALF_POWER_DB",
    "LR_CROSSOVER_DB",
    "CEILING_ALLOWANCE_DB",
    "RESPONSES",
    "KINDS",
    "RIPPLES_DB",
    "MAX_ORDER",
    "TOPOLOGY_CHOICES",
    "Section",
    "prototype_zpk",
    "pair_poles",
    "prototype_sections",
    "C_LEVEL_1KHZ",
    "LEVELS_TRIED",
    "NEIGHBOURS",
    "F0_WEIGHT",
    "KEPT",
    "R_SHUNT_MIN",
    "section_values",
    "section_choices",
    "choose_values",
    "SectionChoice",
    "SectionReport",
    "GbwWarning",
    "ErrorLimits",
    "ErrorCheck",
    "SynthesisResult",
    "opamp_table_text",
    "target_zpk",
    "synthesize",
    "measure_cutoff",
    "IdealResponse",
    "omega_edges",
    "error_checks",
    "opamp_shift_table",
    "gbw_warnings",
]

# imported on first use: each takes a good part of a second to import
optimize = LazyModule("scipy.optimize")
signal = LazyModule("scipy.signal")

TWO_PI = 2 * math.pi
HALF_POWER_DB = 10 * math.log10(2)   # 3.0103 dB: |H|^2 halves
LR_CROSSOVER_DB = 20 * math.log10(2)  # 6.0206 dB: |H| halves (Linkwitz-Riley crossover)
CEILING_ALLOWANCE_DB = 0.5            # dB above the ideal passband peak for the starting passband ceiling

RESPONSES = ("butterworth", "chebyshev", "bessel", "linkwitz_riley")
KINDS = ("lowpass", "highpass", "bandpass")
RIPPLES_DB = (0.1, 0.5, 1.0, 2.0, 3.0)
MAX_ORDER = 10
TOPOLOGY_CHOICES = {
    "lowpass": ("sallen_key_lowpass", "mfb_lowpass"),
    "highpass": ("sallen_key_highpass", "mfb_highpass"),
    "bandpass": ("mfb_bandpass",),
}
_LABEL = {"butterworth": "Butterworth", "chebyshev": "Chebyshev", "bessel": "Bessel",
          "linkwitz_riley": "Linkwitz-Riley"}
_KIND_LABEL = {"lowpass": "low-pass", "highpass": "high-pass", "bandpass": "band-pass"}


# --- prototypes ------------------------------------------------------------------------

@dataclass(frozen=True)
class Section:
    """One section of a normalized low-pass prototype.

    ``f0_norm``: natural frequency in rad/s relative to the whole filter's cutoff
    (Omega); for a first-order section the magnitude of its real pole. ``q``: the pole
    pair's Q, or None for a first-order section. The section is 1 + a s + b s^2 in the
    notation of the published tables: a = 1/(Q f0), b = 1/f0^2 (first order: a = 1/f0).
    """

    f0_norm: float
    q: float | None

    @property
    def order(self) -> int:
        return 1 if self.q is None else 2

    @property
    def a(self) -> float:
        return 1.0 / self.f0_norm if self.q is None else 1.0 / (self.q * self.f0_norm)

    @property
    def b(self) -> float:
        return 0.0 if self.q is None else 1.0 / self.f0_norm ** 2


def _check_family(response: str, order: Any, ripple_db: float | None) -> None:
    if response not in RESPONSES:
        raise InputError(f"unknown response {response!r}; known: {', '.join(RESPONSES)}", "response")
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 1 <= order <= MAX_ORDER:
        raise InputError(f"must be a whole number from 1 to {MAX_ORDER}, not {order!r}", "order")
    if response == "linkwitz_riley" and order % 2:
        raise InputError(f"a Linkwitz-Riley response has an even order (2, 4, ...), not {order}", "order")
    if response == "chebyshev":
        if ripple_db is None:
            raise InputError("a Chebyshev response needs the passband ripple in dB: "
                             + ", ".join(f"{r:g}" for r in RIPPLES_DB), "ripple_db")
        if not any(abs(ripple_db - r) < 1e-12 for r in RIPPLES_DB):
            raise InputError(f"must be one of {', '.join(f'{r:g}' for r in RIPPLES_DB)} dB, not {ripple_db!r}",
                             "ripple_db")
    elif ripple_db is not None:
        raise InputError(f"a ripple applies to a Chebyshev response only, not {response}", "ripple_db")


def prototype_zpk(response: str, order: int, ripple_db: float | None = None
                  ) -> tuple[np.ndarray, np.ndarray, float]:
    """Zeros, poles (rad/s, normalized) and gain of the low-pass prototype.

    Normalization (the -3 dB convention of the published tables, tests/REFERENCES.md section 5):
    Omega = 1 where |H|^2 is half the DC value, that is 3.01 dB below DC.

    - Butterworth: ``scipy.signal.butter`` natively.
    - Bessel: ``scipy.signal.bessel`` with ``norm='mag'`` natively.
    - Chebyshev (type I): ``scipy.signal.cheby1`` puts Omega = 1 at the ripple edge; the
      poles are scaled by 1/Omega_c, Omega_c = cosh(arccosh(sqrt(1 + 2 e^2 T0^2)/e)/n),
      e = sqrt(10^(ripple/10) - 1), T0^2 = 1 for even orders and 0 for odd ones, so that
      |H|^2 is half the DC value at Omega = 1. For even orders the DC gain is the bottom
      of the ripple, so the level is 3.01 dB below DC, (3.01 - ripple) dB below the peak.
    - Linkwitz-Riley of even order n: two cascaded Butterworth filters of order n/2 (every
      pole twice). Its cutoff is the **-6 dB crossover** (|H| = 1/2 at Omega = 1); it is
      NOT normalized to -3 dB.
    """
    _check_family(response, order, ripple_db)
    if response == "butterworth":
        z, p, k = signal.butter(order, 1.0, analog=True, output="zpk")
    elif response == "bessel":
        z, p, k = signal.bessel(order, 1.0, analog=True, norm="mag", output="zpk")
    elif response == "chebyshev":
        assert ripple_db is not None
        z, p, k = signal.cheby1(order, ripple_db, 1.0, analog=True, output="zpk")
        z, p, k = signal.lp2lp_zpk(z, p, k, wo=1.0 / _cheby_omega_c(order, ripple_db))
    else:
        z1, p1, k1 = signal.butter(order // 2, 1.0, analog=True, output="zpk")
        z, p, k = np.concatenate([z1, z1]), np.concatenate([p1, p1]), k1 * k1
    return np.asarray(z), np.asarray(p, dtype=complex), float(k)


def pair_poles(poles: np.ndarray) -> list[tuple[float, float | None]]:
    """Group poles (rad/s, left half-plane) into sections: (w0, Q) or (w, None).

    Each complex conjugate pair gives one second-order section: w0 = |p|,
    Q = |p| / (2 |Re p|). Real poles are combined two at a time (smallest magnitudes
    together) into second-order sections with Q <= 1/2: w0 = sqrt(p1 p2),
    Q = sqrt(p1 p2)/(p1 + p2); a real pole left over is a first-order section.

    Order (common practice): the first-order section first, then the second-order
    sections by ascending Q (ties by ascending w0), so the highest-Q stage comes last.
    """
    p = np.asarray(poles, dtype=complex)
    if np.any(p.real >= 0):
        raise InputError("every pole must lie in the left half-plane", "poles")
    tol = 1e-9 * np.abs(p)
    upper = p[p.imag > tol]
    real = np.sort(-p[np.abs(p.imag) <= tol].real)
    out: list[tuple[float, float | None]] = []
    seconds = [(float(abs(x)), float(abs(x) / (-2 * x.real))) for x in upper]
    i = 0
    while i + 1 < real.size:
        a, b = float(real[i]), float(real[i + 1])
        seconds.append((math.sqrt(a * b), math.sqrt(a * b) / (a + b)))
        i += 2
    if i < real.size:
        out.append((float(real[i]), None))
    seconds.sort(key=lambda s: (float(f"{s[1]:.9g}"), s[0]))  # Q ties (to 9 digits) by w0
    out += seconds
    return out


def prototype_sections(response: str, order: int, ripple_db: float | None = None) -> list[Section]:
    """The normalized low-pass prototype as sections, in the order they are built.

    ``response``: "butterworth", "chebyshev" (``ripple_db`` 0.1, 0.5, 1, 2 or 3 dB),
    "bessel" or "linkwitz_riley" (even orders only); ``order`` 1 to 10.

    Normalization: the whole filter's -3 dB point (|H|^2 = half the DC value) is at
    Omega = 1 rad/s, as in the published tables: Butterworth and Bessel (``norm='mag'``)
    natively, Chebyshev scaled from ``scipy.signal.cheby1`` (which puts Omega = 1 at the
    ripple edge). A Linkwitz-Riley filter is two cascaded Butterworth filters of order
    n/2 and is -6 dB at Omega = 1: its cutoff is the -6 dB crossover frequency, NOT a
    -3 dB point. See :func:`prototype_zpk`.

    An odd order has one first-order section (``q`` None, ``f0_norm`` = its real pole),
    placed first; second-order sections follow by ascending Q (see :func:`pair_poles`).
    """
    _, p, _ = prototype_zpk(response, order, ripple_db)
    return [Section(w, q) for w, q in pair_poles(p)]


# --- component values ------------------------------------------------------------------

R_MIN, R_MAX = 1e3, 1e6        # ohm: the practical resistor range every synthesized part keeps
C_MIN, C_MAX = 100e-12, 1e-6   # F: the practical C0G capacitor range
C_LEVEL_1KHZ = 10e-9           # F: preferred impedance level, 10 nF at 1 kHz, scaled as 1/f0
LEVELS_TRIED = 6               # impedance levels (capacitor values) tried per section when snapping
NEIGHBOURS = 2                 # series values tried on each side of every exact resistor
F0_WEIGHT = 2.0                # cost weight of f0 against Q: w = max(2.5, F0_WEIGHT Q)
KEPT = 8                       # candidates per section kept for the joint refinement
R_SHUNT_MIN = 100.0            # ohm: the multiple-feedback band-pass's shunt resistor R2 may go this low
_RANGE_WORDS = "resistors of 1 kohm to 1 Mohm and capacitors of 100 pF to 1 uF"
_ROLES = {
    "sallen_key_lowpass": ("R1", "R2", "C1", "C2"),
    "mfb_lowpass": ("R1", "R2", "R3", "C1", "C2"),
    "sallen_key_highpass": ("C1", "C2", "R1", "R2"),
    "mfb_highpass": ("C1", "C2", "C3", "R1", "R2"),
    "mfb_bandpass": ("R1", "R2", "R3", "C1", "C2"),
    "rc_lowpass": ("R1", "C1"),
    "rc_highpass": ("R1", "C1"),
}


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
              choices: int = 1) -> list[dict[str, float]]:
    """Capacitor values (F) by role for one level capacitor ``level`` (a series value).

    Sallen-Key and multiple-feedback low-pass: C2 = level, C1 the first (``choices`` > 1:
    also the next) series value at or above 4 Q^2 C2 (8 Q^2 C2), the condition for real
    resistors. Every other topology uses ``level`` for all its capacitors.
    """
    if topology in ("sallen_key_lowpass", "mfb_lowpass"):
        k = 4.0 if topology == "sallen_key_lowpass" else 8.0
        return [{"C1": _at_least(k * q * q * level, cap_series, j), "C2": level}  # type: ignore[operator]
                for j in range(choices)]
    caps = [r for r in _ROLES[topology] if r.startswith("C")]
    return [{r: level for r in caps}]


def _sqrt_disc(d: float, scale: float) -> float:
    # a discriminant that is zero in exact arithmetic may come out a hair below zero
    return math.sqrt(d) if d > 0 else 0.0 if d > -1e-9 * scale else math.nan


def _resistors(topology: str, f0_hz: float, q: float | None, caps: dict[str, float],
               gain: float) -> dict[str, float]:
    """The exact resistors (ohm) for capacitors ``caps`` (F): see :func:`section_values`."""
    w0 = TWO_PI * f0_hz
    if topology in ("rc_lowpass", "rc_highpass"):
        return {"R1": 1.0 / (w0 * caps["C1"])}
    assert q is not None
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
    return {r: vals[r] for r in _ROLES[topology]}


def section_values(topology: str, f0_hz: float, q: float | None, cap_series: str = "E12",
                   gain: float = 1.0, level: float | None = None) -> dict[str, float]:
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
    """
    if topology not in _ROLES:
        raise InputError(f"no synthesis rule for topology {topology!r}", "topology")
    if not topology.startswith("rc_") and (q is None or not q > 0):
        raise InputError(f"{topology} needs a Q above 0", "q")
    if topology == "mfb_bandpass" and not 0 < gain < 2 * q * q:  # type: ignore[operator]
        raise InputError(f"the midband gain must lie between 0 and 2 Q^2 = {2 * q * q:.4g}", "gain")  # type: ignore[operator]
    if level is None:
        c = _preferred_level(topology, f0_hz, q)
        level = float(snap_value(min(max(c, C_MIN), C_MAX), cap_series))
    caps = _cap_sets(topology, q, level, cap_series)[0]
    return _ordered(topology, {**caps, **_resistors(topology, f0_hz, q, caps, gain)})


def _in_range(vals: np.ndarray, topology: str) -> np.ndarray:
    """Rows of ``vals`` (rows, roles of ``topology``) whose every part lies in the practical
    range: resistors 1 kohm..1 Mohm (the shunt resistor R2 of a multiple-feedback band-pass
    down to 100 ohm: it sets Q and spreads 4 Q^2 : 1 from R3), capacitors 100 pF..1 uF."""
    roles = _ROLES[topology]
    lo = np.array([(R_SHUNT_MIN if (topology, r) == ("mfb_bandpass", "R2") else R_MIN)
                   if r.startswith("R") else C_MIN for r in roles]) * (1 - 1e-9)
    hi = np.array([R_MAX if r.startswith("R") else C_MAX for r in roles]) * (1 + 1e-9)
    return np.all(np.isfinite(vals) & (vals >= lo) & (vals <= hi), axis=1)


def _refusal(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
             cap_series: str, gain: float) -> InputError:
    """Why no impedance level keeps section ``index``'s values in the practical range."""
    exact = section_values(topology, f0_hz, q, cap_series, gain)
    rs = [v for r, v in exact.items() if r.startswith("R")]
    cs = [v for r, v in exact.items() if r.startswith("C")]
    r_spread, c_spread = max(rs) / min(rs), max(cs) / min(cs)
    where = f"section {index} (f0 {_hz(f0_hz)}" + (f", Q {q:.3g})" if q is not None else ")")
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
    lo, hi = _f0_window(topology, q, cap_series, gain)
    span = (f"such a section from about {_hz(lo)} to {_hz(hi)}" if lo <= hi
            else f"sections from about {_hz(1 / (TWO_PI * R_MAX * C_MAX))} to {_hz(1 / (TWO_PI * R_MIN * C_MIN))}")
    return InputError(
        f"{where} cannot be built from {_RANGE_WORDS} at any impedance level; these ranges hold {span}",
        "cutoff_hz")


def _f0_window(topology: str, q: float | None, cap_series: str, gain: float) -> tuple[float, float]:
    """The f0 range (Hz) over which some level keeps a section of this Q in range.

    Resistors scale as 1/f0 at a fixed level (the capacitors do not change), so each
    level allows f0 from max(R at 1 Hz)/R_MAX to min(R at 1 Hz)/R_MIN; the union over
    levels is returned (lo > hi: none)."""
    lo, hi = math.inf, 0.0
    for level in series_values(cap_series, C_MIN, C_MAX):
        caps = _cap_sets(topology, q, float(level), cap_series)[0]
        if max(caps.values()) > C_MAX * (1 + 1e-9):
            continue
        rs = _resistors(topology, 1.0, q, caps, gain)
        r_low = {r: (R_SHUNT_MIN if (topology, r) == ("mfb_bandpass", "R2") else R_MIN) for r in rs}
        f_lo = max(v / R_MAX for v in rs.values())
        f_hi = min(v / r_low[r] for r, v in rs.items())
        if f_lo <= f_hi:
            lo, hi = min(lo, f_lo), max(hi, f_hi)
    return lo, hi


def _stage_options(topology: str) -> dict[str, Any]:
    return ({"sections": 1} if topology.startswith("rc_")
            else {"gain": "unity"} if topology.startswith("sallen_key") else {})


def _section_coeffs(topology: str, roles: Sequence[str], vals: np.ndarray):
    """The engine's (circuit, coefficients) of one section for every row of ``vals``
    (rows, roles): one batch, no loop over rows."""
    d = Design(tuple(Part(r, r[0], float(vals[0, j]), "EXACT") for j, r in enumerate(roles)),
               (Stage(topology, {r: r for r in roles}, _stage_options(topology), "section"),))
    circuit = compile_design(d)
    return circuit, stage_coefficients(circuit, vals)


def _section_fq(topology: str, roles: Sequence[str], vals: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray | None, np.ndarray]:
    """f0 (Hz), Q (None for first order) and passband |H|^2 of one section for every row
    of ``vals`` (rows, roles), from the project's engine (one batch, no loop over rows)."""
    circuit, coeffs = _section_coeffs(topology, roles, vals)
    m = stage_metrics(circuit, coeffs)
    fc = stage_metric_name(1, "fc_hz")
    if fc in m:
        return m[fc], None, np.ones(vals.shape[0])
    g2 = dc_gain2(coeffs) if circuit.kind == "lowpass" else np.ones(vals.shape[0])
    return m[stage_metric_name(1, "f0_hz")], m[stage_metric_name(1, "q")], g2


def section_choices(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
                    series: str = "E24", cap_series: str = "E12", gain: float = 1.0,
                    snap: bool = True) -> list[SectionChoice]:
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
    :func:`_refine_jointly`. Without ``snap``: one choice, the exact values at the
    nearest level.
    """
    pref = _preferred_level(topology, f0_hz, q)
    feasible: list[tuple[float, dict[str, float]]] = []
    for level in series_values(cap_series, C_MIN, C_MAX):
        for caps in _cap_sets(topology, q, float(level), cap_series, 2 if snap else 1):
            vals = _ordered(topology, {**caps, **_resistors(topology, f0_hz, q, caps, gain)})
            row = np.array([[vals[r] for r in _ROLES[topology]]])
            if _in_range(row, topology)[0]:
                feasible.append((abs(math.log(level / pref)) + 1e-9 * len(feasible), vals))  # ties: first C1
    if not feasible:
        raise _refusal(index, topology, f0_hz, q, kind, cap_series, gain)
    feasible.sort(key=lambda t: t[0])
    if not snap:
        return [SectionChoice(feasible[0][1], feasible[0][1], f0_hz, q)]
    roles = _ROLES[topology]
    r_roles = [r for r in roles if r.startswith("R")]
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
        raise _refusal(index, topology, f0_hz, q, kind, cap_series, gain)
    cand, which, level_d = cand[keep], which[keep], level_d[keep]
    f0, qq, g2 = _section_fq(topology, roles, cand)
    w = 1.0 if q is None else max(2.5, F0_WEIGHT * q)
    cost = (w * np.log(f0 / f0_hz)) ** 2 + 0.25 * np.log(g2) ** 2 + 1e-7 * level_d ** 2
    if qq is not None:
        cost = cost + np.log(np.abs(qq) / q) ** 2
    cost = np.where(np.isfinite(cost), cost, np.inf)
    order = np.argsort(cost, kind="stable")[:KEPT]
    order = order[np.isfinite(cost[order])] if np.isfinite(cost[order[0]]) else order[:1]
    levels = feasible[:2 * LEVELS_TRIED]
    return [SectionChoice(levels[int(which[i])][1], {r: float(cand[i, j]) for j, r in enumerate(roles)},
                          float(f0[i]), None if qq is None else float(qq[i])) for i in order]


def choose_values(index: int, topology: str, f0_hz: float, q: float | None, kind: str,
                  series: str = "E24", cap_series: str = "E12", gain: float = 1.0,
                  snap: bool = True) -> tuple[dict[str, float], dict[str, float]]:
    """(exact, chosen) part values (ohm, F) by role for section ``index`` (from 1): the
    best of :func:`section_choices` (see there)."""
    best = section_choices(index, topology, f0_hz, q, kind, series, cap_series, gain, snap)[0]
    return best.exact, best.values


def _cross(rel: np.ndarray, f: np.ndarray, level: float, rising: bool) -> np.ndarray:
    """Per row of ``rel`` (rows, F) in dB on ascending ``f`` (Hz): where it crosses
    ``level`` (rising: the first crossing from below; else the last from above), by
    log-linear interpolation; clipped to the window's ends."""
    mask = rel >= level
    n = f.size
    j = np.argmax(mask, axis=1) - 1 if rising else n - 1 - np.argmax(mask[:, ::-1], axis=1)
    a = np.clip(j, 0, n - 2)
    rows = np.arange(rel.shape[0])
    ya, yb = rel[rows, a], rel[rows, a + 1]
    with np.errstate(divide="ignore", invalid="ignore"):
        t = np.clip(np.nan_to_num((level - ya) / (yb - ya)), 0.0, 1.0)
    lf = np.log(f)
    return np.exp(lf[a] + t * (lf[a + 1] - lf[a]))


def _refine_jointly(stages: list[dict[str, Any]], choices: list[list["SectionChoice"]],
                    ideal: "IdealResponse", limits: "ErrorLimits", fc: float, bw: float | None,
                    passes: int = 4) -> list[int]:
    """Which candidate of every section to build: coordinate descent over the sections,
    starting from each section's own best, on the whole cascade's worst error relative to
    its limit (cutoff or centre and bandwidth from interpolated crossings, passband shape
    and ripple against ``ideal``, each section's own f0 and Q error). Responses come from
    the engine on one frequency grid per section candidate; each step evaluates one
    section's candidates together (no loop over candidates). Per-section choices alone let
    every section err the same way (a Bessel order 6 cutoff 2 % low)."""
    n = len(stages)
    if all(len(c) == 1 for c in choices):
        return [0] * n
    kind, level = ideal.kind, -ideal.cutoff_db
    pas = ideal.passband[::8]
    if kind == "lowpass":
        ref_f, windows = np.array([fc * 1e-3]), [np.geomspace(0.7 * fc, 1.4 * fc, 161)]
    elif kind == "highpass":
        ref_f, windows = np.array([fc * 1e3]), [np.geomspace(fc / 1.4, fc / 0.7, 161)]
    else:
        assert bw is not None
        lo, hi = omega_edges(fc, bw, 1.0)
        ref_f = np.empty(0)
        windows = [np.geomspace(lo / 1.1, lo * 1.1, 161), np.geomspace(hi / 1.1, hi * 1.1, 161)]
    f = np.concatenate([ref_f, pas, *windows])
    sl_pas = slice(ref_f.size, ref_f.size + pas.size)
    sl_win = [slice(ref_f.size + pas.size + k * 161, ref_f.size + pas.size + (k + 1) * 161)
              for k in range(len(windows))]
    sec_db, sec_err = [], []
    for st, cs in zip(stages, choices):
        roles = _ROLES[st["topology"]]
        _, coeffs = _section_coeffs(st["topology"], roles, np.array([[c.values[r] for r in roles] for c in cs]))
        g2 = gain2_at(coeffs, np.broadcast_to(f, (len(cs), f.size)))
        sec_db.append(10 * np.log10(np.maximum(g2, 1e-300)))
        f0t, qt = st["target"]
        sec_err.append(np.array([max(abs(c.f0_hz / f0t - 1) / limits.cutoff,
                                     0.0 if qt is None or c.q is None else abs(c.q / qt - 1) / limits.q)
                                 for c in cs]))
    ideal_db = 10 * np.log10(np.maximum(ideal.g2(f), 1e-300) / ideal.ref2)
    c_ideal, b_ideal = ideal.cutoff()

    def objective(total: np.ndarray, sec_worst: np.ndarray) -> np.ndarray:
        ref = np.max(total[:, ref_f.size:], axis=1) if kind == "bandpass" else total[:, 0]
        rel = total - ref[:, None]
        p = rel[:, sl_pas]
        terms = [np.max(np.abs(p - ideal_db[sl_pas]), axis=1) / limits.gain_db,
                 np.abs(np.ptp(p, axis=1) - np.ptp(ideal_db[sl_pas])) / limits.gain_db, sec_worst]
        if kind == "bandpass":
            lower = _cross(rel[:, sl_win[0]], windows[0], level, rising=True)
            upper = _cross(rel[:, sl_win[1]], windows[1], level, rising=False)
            terms += [np.abs(np.sqrt(lower * upper) / c_ideal - 1) / limits.cutoff,
                      np.abs((upper - lower) / b_ideal - 1) / limits.bandwidth]  # type: ignore[operator]
        else:
            c = _cross(rel[:, sl_win[0]], windows[0], level, rising=kind == "highpass")
            terms += [np.abs(c / c_ideal - 1) / limits.cutoff, np.abs(ref) / limits.gain_db]
        t = np.stack(terms)
        return np.max(t, axis=0) + 1e-3 * np.sum(t * t, axis=0)

    choice = [0] * n
    total = np.sum([d[0] for d in sec_db], axis=0)
    best = float(objective(total[None, :], np.array([max(e[0] for e in sec_err)]))[0])
    for _ in range(passes):
        improved = False
        for i in range(n):
            if len(choices[i]) == 1:
                continue
            rows = (total - sec_db[i][choice[i]])[None, :] + sec_db[i]
            others = max([sec_err[j][choice[j]] for j in range(n) if j != i], default=0.0)
            o = objective(rows, np.maximum(others, sec_err[i]))
            k = int(np.argmin(o))
            if o[k] < best - 1e-12:
                choice[i], total, best, improved = k, rows[k], float(o[k]), True
        if not improved:
            break
    return choice


@dataclass(frozen=True)
class SectionChoice:
    """One candidate for a section: ``exact`` values (the chosen capacitors, exact
    resistors), the snapped ``values`` (ohm, F, by role), and their f0 (Hz) and Q."""

    exact: dict[str, float]
    values: dict[str, float]
    f0_hz: float
    q: float | None


# --- results ---------------------------------------------------------------------------

@dataclass(frozen=True)
class SectionReport:
    """One stage: target, exact (resistors as solved) and snapped f0 (Hz) and Q.

    ``q`` fields are None for a first-order stage (its f0 is the -3 dB corner).
    The exact and snapped values are measured on the built design with ideal op-amps.
    """

    stage: str
    topology: str
    target_f0_hz: float
    target_q: float | None
    unsnapped_f0_hz: float
    unsnapped_q: float | None
    snapped_f0_hz: float
    snapped_q: float | None

    @property
    def f0_error(self) -> float:
        """Relative f0 change snapping introduced (snapped / target - 1)."""
        return self.snapped_f0_hz / self.target_f0_hz - 1

    @property
    def q_error(self) -> float | None:
        if self.target_q is None or self.snapped_q is None:
            return None
        return self.snapped_q / self.target_q - 1


@dataclass(frozen=True)
class GbwWarning:
    """How a single-pole op-amp moves one active stage (f0 in Hz, GBW in Hz).

    ``ideal_*`` with an ideal op-amp, ``gbw_*`` with the op-amp's gain-bandwidth
    (the dominant pole pair: the complex pair, else the two slowest real poles).
    ``gain`` G is the stage's passband gain magnitude (DC for a low-pass, high-frequency
    for a high-pass, at f0 for a band-pass), ``peak_gain`` the largest |H| on a grid.
    ``required_gbw_hz`` = 100 G Q f0 (open-loop gain at f0 40 dB above the stage's peak
    gain, which is about G Q; Op Amps for Everyone ch. 16, as in tests/REFERENCES.md section 7).
    ``too_low``: the op-amp's GBW is below that. GBW fields are None when the stage has
    no op-amp part and no GBW was given.
    """

    stage: str
    topology: str
    ideal_f0_hz: float
    ideal_q: float
    gain: float
    peak_gain: float
    required_gbw_hz: float
    gbw_hz: float | None = None
    gbw_f0_hz: float | None = None
    gbw_q: float | None = None
    f0_shift: float | None = None
    q_shift: float | None = None
    too_low: bool = False


@dataclass(frozen=True)
class ErrorLimits:
    """How far the snapped design may stray from the ideal response before a warning.

    ``cutoff``: relative error of the cutoff (band-pass: centre) and of every section's
    f0 (0.02 = 2 %); ``bandwidth``: relative error of a band-pass bandwidth; ``q``:
    relative error of every section's Q; ``gain_db``: dB, the passband gain (low-pass and
    high-pass), the passband's shape and its ripple.
    """

    cutoff: float = 0.02
    bandwidth: float = 0.05
    q: float = 0.05
    gain_db: float = 0.5

    def checked(self) -> "ErrorLimits":
        for name in ("cutoff", "bandwidth", "q", "gain_db"):
            v = getattr(self, name)
            if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v) or v <= 0:
                raise InputError(f"must be a number above 0, not {v!r}", f"limits.{name}")
        return self


@dataclass(frozen=True)
class ErrorCheck:
    """One figure of the snapped design against the ideal response.

    ``unit`` "%": ``ideal``/``actual`` in ``quantity_unit`` (Hz or none), ``error`` the
    relative error (0.01 = 1 %), ``limit`` relative. ``unit`` "dB": ``ideal``/``actual``
    in dB, ``error`` the difference in dB (magnitude), ``limit`` in dB.
    """

    what: str
    ideal: float
    actual: float
    error: float
    limit: float
    unit: str
    quantity_unit: str = ""

    @property
    def exceeded(self) -> bool:
        return not abs(self.error) <= self.limit


@dataclass(frozen=True)
class SynthesisResult:
    """A synthesized design and what snapping did to it.

    ``cutoff_*_hz``: the cutoff (band-pass: the geometric centre of the band edges),
    target / exact resistors / snapped resistors, measured with ideal op-amps at
    ``cutoff_db`` below the reference gain (DC for a low-pass, high frequency for a
    high-pass, the peak for a band-pass). ``cutoff_error`` = snapped / target - 1.
    Band-pass: ``bandwidth_*_hz`` between the band edges. ``cutoff_gbw_hz``: the snapped
    design's cutoff with the op-amps' gain-bandwidth (None without op-amp parts).
    """

    design: Design
    response: str
    kind: str
    order: int
    ripple_db: float | None
    cutoff_db: float
    sections: tuple[SectionReport, ...]
    cutoff_target_hz: float
    cutoff_unsnapped_hz: float
    cutoff_snapped_hz: float
    bandwidth_target_hz: float | None = None
    bandwidth_unsnapped_hz: float | None = None
    bandwidth_snapped_hz: float | None = None
    cutoff_gbw_hz: float | None = None
    gbw: tuple[GbwWarning, ...] = field(default_factory=tuple)
    series: str = "E24"
    cap_series: str = "E12"
    snapped: bool = True
    checks: tuple[ErrorCheck, ...] = ()
    limits: ErrorLimits = ErrorLimits()

    @property
    def exceeded(self) -> tuple[ErrorCheck, ...]:
        """The checks whose error is beyond its limit (empty: the design is as asked)."""
        return tuple(c for c in self.checks if c.exceeded)

    def warning_text(self) -> str:
        """A warning in words when a check exceeds its limit, else ""."""
        bad = self.exceeded
        if not bad:
            return ""
        items = "; ".join(f"{c.what} {_err(c)} (limit {_lim(c)})" for c in bad)
        hint = ("a finer resistor series (E96, E192) or capacitor series usually brings them down"
                if self.snapped else "the exact values should not stray: please report this design")
        return (f"WARNING: the built design strays from the ideal {_KIND_LABEL[self.kind]} response beyond "
                f"the limits: {items}. It will not filter as asked; {hint}.")

    @property
    def cutoff_error(self) -> float:
        """Relative cutoff change snapping introduced (snapped / target - 1)."""
        return self.cutoff_snapped_hz / self.cutoff_target_hz - 1

    @property
    def bandwidth_error(self) -> float | None:
        if self.bandwidth_target_hz is None or self.bandwidth_snapped_hz is None:
            return None
        return self.bandwidth_snapped_hz / self.bandwidth_target_hz - 1

    def text_report(self) -> str:
        """A readable table: every stage's f0 and Q before and after snapping, the cutoff."""
        lines = [self.design.name]
        snap_text = (f"resistors snapped to {self.series}" if self.snapped
                     else "resistors exact (not snapped)")
        lines.append(f"capacitors from {self.cap_series}, {snap_text}")
        lines.append("")
        head = (f"  {'stage':<34} {'target f0':>11} {'Q':>7}   {'exact f0':>11} {'Q':>7}   "
                f"{'snapped f0':>11} {'Q':>7}   {'f0 err':>8} {'Q err':>8}")
        lines.append(head)
        for s in self.sections:
            lines.append(
                f"  {s.stage:<34} {_hz(s.target_f0_hz):>11} {_q(s.target_q):>7}   "
                f"{_hz(s.unsnapped_f0_hz):>11} {_q(s.unsnapped_q):>7}   "
                f"{_hz(s.snapped_f0_hz):>11} {_q(s.snapped_q):>7}   "
                f"{_pct(s.f0_error):>8} {_pct(s.q_error):>8}")
        lines.append("")
        what = "centre" if self.kind == "bandpass" else "cutoff"
        level = (f"geometric mean of the band edges {self.cutoff_db:.2f} dB below the peak"
                 if self.kind == "bandpass" else f"{self.cutoff_db:.2f} dB below the passband gain")
        lines.append(f"{what} ({level}): target "
                     f"{_hz(self.cutoff_target_hz)}, exact {_hz(self.cutoff_unsnapped_hz)}, "
                     f"snapped {_hz(self.cutoff_snapped_hz)} ({_pct(self.cutoff_error)} from snapping)")
        if self.bandwidth_target_hz is not None:
            lines.append(f"bandwidth: target {_hz(self.bandwidth_target_hz)}, exact "
                         f"{_hz(self.bandwidth_unsnapped_hz)}, snapped {_hz(self.bandwidth_snapped_hz)} "
                         f"({_pct(self.bandwidth_error)} from snapping)")
        if self.kind == "bandpass":
            lines.extend(self.centre_gain_lines())
        if self.gbw:
            lines.append("")
            lines.append(opamp_table_text(self.gbw))
            if self.cutoff_gbw_hz is not None:
                lines.append(f"{what} with the op-amps' gain-bandwidth: {_hz(self.cutoff_gbw_hz)} "
                             f"({_pct(self.cutoff_gbw_hz / self.cutoff_target_hz - 1)} from target)")
        lines.append("")
        lines.append(self.errors_text())
        warning = self.warning_text()
        if warning:
            lines.append("")
            lines.append(warning)
        lines.append("")
        lines.append("The mask is a starting point (passband floor, passband ceiling "
                     f"{CEILING_ALLOWANCE_DB:g} dB above the ideal response, stopband ceiling 6 dB above "
                     "it); edit it to your specification.")
        return "\n".join(lines)


    def centre_gain_lines(self) -> list[str]:
        """Band-pass only: the built design's gain at its centre (dB), which its sections'
        own gains set (each at most Q^2), and a plain word when it is far below 0 dB."""
        g2 = float(_design_g2(self.design)(np.array([self.cutoff_snapped_hz]))[0])
        g_db = 10 * math.log10(max(g2, 1e-300))
        out = [f"gain at the centre: {g_db:+.2f} dB (set by the sections' own gains, each at most Q^2; "
               "not held against a limit)"]
        if g_db < -6:
            out.append("NOTE: this band-pass loses {:.1f} dB at its centre: multiple-feedback band-pass "
                       "sections of low Q cannot reach 0 dB there. For a band this wide, consider a "
                       "high-pass design followed by a low-pass design, or add gain after the filter; "
                       "check the signal levels and noise on your board.".format(-g_db))
        return out

    def errors_text(self) -> str:
        """The error table: every check's ideal and built value, error, limit and verdict."""
        lines = ["Errors of the built design against the ideal response (scipy.signal);",
                 "the built design at its nominal values, ideal op-amps, this program's engine:",
                 f"  {'figure':<18} {'ideal':>12} {'built':>12} {'error':>10} {'limit':>9}"]
        for c in self.checks:
            if c.unit == "dB":
                ideal, built = f"{c.ideal:+.3f} dB", f"{c.actual:+.3f} dB"
            elif c.quantity_unit == "Hz":
                ideal, built = _hz(c.ideal), _hz(c.actual)
            else:
                ideal, built = f"{c.ideal:.4f}", f"{c.actual:.4f}"
            lines.append(f"  {c.what:<18} {ideal:>12} {built:>12} {_err(c):>10} {_lim(c):>9}"
                         + ("  EXCEEDS" if c.exceeded else ""))
        return "\n".join(lines)


def _err(c: ErrorCheck) -> str:
    return f"{c.error:+.2f} dB" if c.unit == "dB" else _pct(c.error)


def _lim(c: ErrorCheck) -> str:
    return f"{c.limit:g} dB" if c.unit == "dB" else f"{100 * c.limit:g}%"


def _hz(x: float | None) -> str:
    return "n/a" if x is None or not math.isfinite(x) else format_value(x, "Hz", digits=5)


def _q(x: float | None) -> str:
    return "-" if x is None else f"{x:.4f}"


def _pct(x: float | None) -> str:
    return "-" if x is None or not math.isfinite(x) else f"{100 * x:+.3f}%"


def opamp_table_text(rows: Sequence[GbwWarning]) -> str:
    """The op-amp shift table as text."""
    out = [f"  {'stage':<34} {'GBW':>10} {'needed':>10} {'ideal f0':>11} {'Q':>7} "
           f"{'with GBW f0':>11} {'Q':>7} {'f0 shift':>9} {'Q shift':>9}"]
    for r in rows:
        flag = "  GBW TOO LOW" if r.too_low else ""
        out.append(f"  {r.stage:<34} {_hz(r.gbw_hz):>10} {_hz(r.required_gbw_hz):>10} "
                   f"{_hz(r.ideal_f0_hz):>11} {r.ideal_q:>7.4f} {_hz(r.gbw_f0_hz):>11} {_q(r.gbw_q):>7} "
                   f"{_pct(r.f0_shift):>9} {_pct(r.q_shift):>9}{flag}")
    return "\n".join(out)


# --- synthesis -------------------------------------------------------------------------

def _positive(x: Any, path: str) -> float:
    if isinstance(x, bool) or not isinstance(x, (int, float, np.floating)) or not math.isfinite(x) or x <= 0:
        raise InputError(f"must be a finite frequency above 0 Hz, not {x!r}", path)
    return float(x)


def _check_grade(name: str, kind: str, path: str) -> None:
    cat = builtin_catalog()
    if name not in cat or not cat[name].fits(kind):
        raise InputError(f"unknown {kind} grade {name!r}; use one of "
                         f"{', '.join(g.name for g in cat.for_kind(kind))}", path)


def target_zpk(response: str, order: int, cutoff_hz: float, kind: str = "lowpass",
               bandwidth_hz: float | None = None, ripple_db: float | None = None
               ) -> tuple[np.ndarray, np.ndarray, float]:
    """The target filter's zeros, poles (rad/s) and gain: the prototype of
    :func:`prototype_zpk` moved to ``cutoff_hz`` with ``scipy.signal.lp2lp_zpk``,
    ``lp2hp_zpk`` or (centre ``cutoff_hz``, ``bandwidth_hz`` between the -3 dB edges)
    ``lp2bp_zpk``."""
    z, p, k = prototype_zpk(response, order, ripple_db)
    wo = TWO_PI * cutoff_hz
    if kind == "lowpass":
        return signal.lp2lp_zpk(z, p, k, wo=wo)
    if kind == "highpass":
        return signal.lp2hp_zpk(z, p, k, wo=wo)
    assert bandwidth_hz is not None
    return signal.lp2bp_zpk(z, p, k, wo=wo, bw=TWO_PI * bandwidth_hz)


def synthesize(response: str, order: int, cutoff_hz: float, kind: str = "lowpass",
               bandwidth_hz: float | None = None, topology: str | None = None,
               series: str = "E24", cap_series: str = "E12", gbw_hz: float | None = None,
               ripple_db: float | None = None, snap: bool = True,
               resistor_grade: str = "R-thick-1", capacitor_grade: str = "C-C0G-5",
               opamp_grade: str = "OPAMP-GBW-50", limits: ErrorLimits | None = None) -> SynthesisResult:
    """Build a design realising ``response`` of ``order`` at ``cutoff_hz`` (Hz).

    ``kind``: "lowpass", "highpass" or "bandpass". A low-pass or high-pass cutoff is the
    -3 dB point (|H|^2 half the passband reference, see :func:`prototype_sections`;
    Linkwitz-Riley: the -6 dB crossover). A band-pass is the low-pass prototype moved by
    ``scipy.signal.lp2bp_zpk`` to centre ``cutoff_hz`` (geometric mean of the band edges)
    with ``bandwidth_hz`` between the edges; an order-N band-pass has 2N poles and is
    built as N multiple-feedback band-pass sections, one per pole pair, each with midband
    gain magnitude enough to make up its own loss at the centre, at most Q^2 (so the
    overall gain at the centre is about 0 dB unless low-Q sections of a wide band cannot
    reach it; the report then says so; the mask is relative). Linkwitz-Riley is for low-pass and high-pass only.

    ``topology``: the second-order section type: low-pass "sallen_key_lowpass" (default)
    or "mfb_lowpass"; high-pass "sallen_key_highpass" (default) or "mfb_highpass";
    band-pass "mfb_bandpass". Sallen-Key sections are unity gain; multiple-feedback
    sections have passband gain -1. An odd order's first-order section is a passive
    "rc_lowpass"/"rc_highpass" with one section. **Assumption:** like every stage, it is
    taken as buffered (it drives a high-impedance input); a Sallen-Key input is not one,
    so on the board put a follower after the RC (or keep the RC's resistance far below the
    next stage's input resistance).

    Component values: see :func:`section_values`. Capacitors come from ``cap_series``;
    resistors are solved exactly and, with ``snap`` (default), snapped to ``series``.
    Grades: ``resistor_grade``, ``capacitor_grade``. With ``gbw_hz`` (Hz) every active
    stage gets an op-amp part U1, U2 ... (value ``gbw_hz``, grade ``opamp_grade``) on its
    role U1. Reference designators R1.., C1.., U1.. run across the whole design.

    Analysis range: cutoff/100 to cutoff x 100 Hz, 400 points (band-pass: wide enough for
    the band edges too); ``cutoff_db`` set so the analysis measures the same cutoff as the
    target (3.01 dB; Linkwitz-Riley 6.02 dB; an even-order Chebyshev band-pass
    3.01 + ripple dB below its peak). Mask: a **starting point** for the user to edit,
    implied by the ideal response (see :func:`_starting_mask`), with a passband ceiling.

    Part values stay in the practical range (:data:`R_MIN`..:data:`R_MAX`,
    :data:`C_MIN`..:data:`C_MAX`; see :func:`section_choices`), else :class:`InputError`
    naming ``cutoff_hz``, ``bandwidth_hz`` or ``order``. Snapping keeps the best few
    candidates per section and picks among them for the whole cascade
    (:func:`_refine_jointly`). ``limits`` (default :class:`ErrorLimits`) are what the
    result's :attr:`SynthesisResult.checks` are held against: errors of the snapped design
    (ideal op-amps, the engine) against the ideal ``scipy.signal`` response.
    """
    _check_family(response, order, ripple_db)
    limits = (limits or ErrorLimits()).checked()
    if kind not in KINDS:
        raise InputError(f"must be one of {', '.join(KINDS)}, not {kind!r}", "kind")
    fc = _positive(cutoff_hz, "cutoff_hz")
    if not 1e-3 <= fc <= 1e10:
        raise InputError(f"must be from 1 mHz to 10 GHz, not {fc:g} Hz", "cutoff_hz")
    if kind == "bandpass":
        if response == "linkwitz_riley":
            raise InputError("a Linkwitz-Riley response is a low-pass or high-pass crossover", "kind")
        if bandwidth_hz is None:
            raise InputError("a band-pass needs its bandwidth in Hz", "bandwidth_hz")
        bw = _positive(bandwidth_hz, "bandwidth_hz")
        if not 1e-3 * fc <= bw <= 10 * fc:
            raise InputError(f"must be from 1/1000 of the centre frequency to 10 times it, not {bw:g} Hz",
                             "bandwidth_hz")
    else:
        if bandwidth_hz is not None:
            raise InputError("a bandwidth applies to a band-pass only", "bandwidth_hz")
        bw = None
    topo = topology or TOPOLOGY_CHOICES[kind][0]
    if topo not in TOPOLOGY_CHOICES[kind]:
        raise InputError(f"a {_KIND_LABEL[kind]} is built from {' or '.join(TOPOLOGY_CHOICES[kind])}, "
                         f"not {topo!r}", "topology")
    for name, path in ((series, "series"), (cap_series, "cap_series")):
        if name not in E_SERIES:
            raise InputError(f"unknown series {name!r}; use one of {', '.join(E_SERIES)}", path)
    _check_grade(resistor_grade, "R", "resistor_grade")
    _check_grade(capacitor_grade, "C", "capacitor_grade")
    if gbw_hz is not None:
        gbw_hz = _positive(gbw_hz, "gbw_hz")
        if not 1e3 <= gbw_hz <= 1e12:
            raise InputError(f"must be from 1 kHz to 1 THz, not {gbw_hz:g} Hz", "gbw_hz")
        _check_grade(opamp_grade, "opamp", "opamp_grade")

    # Target: poles moved to the cutoff, paired into sections (Hz).
    _, poles, _ = target_zpk(response, order, fc, kind, bw, ripple_db)
    targets = [(w / TWO_PI, q) for w, q in pair_poles(poles)]

    # Cutoff level and analysis range.
    if response == "linkwitz_riley":
        cutoff_db = LR_CROSSOVER_DB
    elif kind == "bandpass" and response == "chebyshev" and order % 2 == 0:
        assert ripple_db is not None
        cutoff_db = HALF_POWER_DB + ripple_db
    else:
        cutoff_db = HALF_POWER_DB
    if kind == "bandpass":
        assert bw is not None
        f_hi = 0.5 * bw + math.sqrt(0.25 * bw * bw + fc * fc)
        f_lo = fc * fc / f_hi
        f_start, f_stop = min(fc / 100, f_lo / 10), max(fc * 100, f_hi * 10)
    else:
        f_start, f_stop = fc / 100, fc * 100
    if f_stop / f_start > 1e12:
        raise InputError("the band is too wide for the analysed range (at most 12 decades)", "bandwidth_hz")

    # Stages: values in the practical range, snapped to keep f0 and Q (choose_values).
    stages: list[dict[str, Any]] = []
    refusals: list[tuple[float, InputError]] = []
    choices: list[list[SectionChoice]] = []
    for i, (f0, q) in enumerate(targets, 1):
        if q is None:
            t = "rc_lowpass" if kind == "lowpass" else "rc_highpass"
            gain = 1.0
            name = f"S{i} first order, fc {_hz(f0)}"
        else:
            t = topo
            gain = _bandpass_section_gain(f0, q, fc) if t == "mfb_bandpass" else 1.0
            name = f"S{i} f0 {_hz(f0)}, Q {q:.3f}"
        try:
            choices.append(section_choices(i, t, f0, q, kind, series, cap_series, gain, snap))
        except InputError as exc:  # name the hardest section (highest Q), not the first
            refusals.append((q or 0.0, exc))
            continue
        stages.append({"topology": t, "name": name, "target": (f0, q)})
    if refusals:
        raise max(refusals, key=lambda r: r[0])[1]
    ideal = IdealResponse.of(response, order, fc, kind, bw, ripple_db, cutoff_db,
                             Analysis(f_start=f_start, f_stop=f_stop))
    picks = _refine_jointly(stages, choices, ideal, limits, fc, bw)
    for st, cs, k in zip(stages, choices, picks):
        st["exact"], st["values"] = cs[k].exact, cs[k].values

    label = _LABEL[response] + (f" {ripple_db:g} dB" if ripple_db is not None else "")
    title = (f"{label} {_KIND_LABEL[kind]}, order {order}, "
             + (f"centre {_hz(fc)}, bandwidth {_hz(bw)}" if bw is not None else f"cutoff {_hz(fc)}")
             + " (synthesized)")
    analysis = {"samples": 5000, "seed": 1, "f_start": f_start, "f_stop": f_stop, "points": 400,
                "cutoff_db": cutoff_db}
    grades = {"R": resistor_grade, "C": capacitor_grade, "opamp": opamp_grade}

    exact = _build(stages, "exact", grades, None, analysis, title, "")
    snapped = _build(stages, "values", grades, None, analysis, title, "")
    exact_m = _stage_fq(exact)
    snapped_m = _stage_fq(snapped)
    reports = tuple(
        SectionReport(st["name"], st["topology"], st["target"][0], st["target"][1],
                      exact_m[i][0], exact_m[i][1], snapped_m[i][0], snapped_m[i][1])
        for i, st in enumerate(stages))

    c_exact, b_exact = measure_cutoff(exact)
    c_snap, b_snap = measure_cutoff(snapped)
    checks = error_checks(snapped, ideal, reports, limits, exact)

    description = (
        f"Synthesized: {label} {_KIND_LABEL[kind]} prototype (scipy.signal poles), one section per "
        "pole pair, lowest Q first. Capacitors from " + cap_series + ", resistors "
        + (f"chosen from {series}" if snap else "exact") + ". Stages are taken as buffered; a first-order "
        "RC section needs a high-impedance load (a follower) on the board. The mask is a starting "
        "point: edit it to your specification.")
    final = _build(stages, "values", grades, gbw_hz, analysis, title, description)
    final = final.with_mask(_starting_mask(ideal, kind, ripple_db, fc, bw))
    final = design_from_dict(final.to_dict())  # checked like a loaded file
    c_gbw = None
    rows: tuple[GbwWarning, ...] = ()
    if gbw_hz is not None:
        c_gbw = measure_cutoff(final)[0]
        rows = tuple(gbw_warnings(final))
    return SynthesisResult(final, response, kind, order, ripple_db, cutoff_db, reports, fc, c_exact,
                           c_snap, bw, b_exact, b_snap, c_gbw, rows, series, cap_series, snap,
                           checks, limits)


def _build(stages: list[dict[str, Any]], key: str, grades: dict[str, str],
           gbw_hz: float | None, analysis: dict[str, Any], name: str, description: str) -> Design:
    """The design with every stage's values ``stages[i][key]`` (ohm, F)."""
    counters = {"R": 0, "C": 0, "U": 0}
    parts: list[dict[str, Any]] = []
    out_stages: list[dict[str, Any]] = []
    for st in stages:
        roles: dict[str, str] = {}
        for role, v in st[key].items():
            kind = role[0]
            counters[kind] += 1
            ref = f"{kind}{counters[kind]}"
            parts.append({"ref": ref, "value": float(v), "grade": grades[kind]})
            roles[role] = ref
        if gbw_hz is not None and not st["topology"].startswith("rc_"):
            counters["U"] += 1
            ref = f"U{counters['U']}"
            parts.append({"ref": ref, "value": gbw_hz, "grade": grades["opamp"]})
            roles["U1"] = ref
        options = _stage_options(st["topology"])
        d: dict[str, Any] = {"topology": st["topology"], "name": st["name"], "parts": roles}
        if options:
            d["options"] = options
        out_stages.append(d)
    data: dict[str, Any] = {"format": "tolspread-design", "version": 1, "name": name,
                            "parts": parts, "stages": out_stages, "analysis": dict(analysis)}
    if description:
        data["description"] = description
    return design_from_dict(data)


def _nominal_coeffs(design: Design):
    circuit = compile_design(design)
    values = np.array([[p.value for p in design.parts]])
    return circuit, stage_coefficients(circuit, values)


def _stage_fq(design: Design) -> list[tuple[float, float | None]]:
    """(f0 Hz, Q) of every stage of ``design`` at nominal values; first order: (fc, None)."""
    circuit, coeffs = _nominal_coeffs(design)
    m = stage_metrics(circuit, coeffs)
    out: list[tuple[float, float | None]] = []
    for k in range(1, len(design.stages) + 1):
        fc = stage_metric_name(k, "fc_hz")
        if fc in m:
            out.append((float(m[fc][0]), None))
        else:
            out.append((float(m[stage_metric_name(k, "f0_hz")][0]), float(m[stage_metric_name(k, "q")][0])))
    return out


def _peak2(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray) -> float:
    """The largest |H|^2 near the grid's maximum, refined between its neighbours."""
    i = int(np.argmax(grid))
    lo_i, hi_i = max(i - 1, 0), min(i + 1, f.size - 1)
    res = optimize.minimize_scalar(lambda lf: -math.log(g2(np.array([math.exp(lf)]))[0]),
                                   bounds=(math.log(f[lo_i]), math.log(f[hi_i])), method="bounded",
                                   options={"xatol": 1e-12})
    return max(float(grid[i]), float(g2(np.array([math.exp(res.x)]))[0]))


def _edges(g2: Callable[[np.ndarray], np.ndarray], f: np.ndarray, grid: np.ndarray,
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


def _design_g2(design: Design) -> Callable[[np.ndarray], np.ndarray]:
    """|H(j 2 pi f)|^2 of the nominal design at frequencies f (Hz, 1-D), from the engine."""
    _, coeffs = _nominal_coeffs(design)
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
    g2 = _design_g2(design)
    grid = g2(f)
    level = _peak2(g2, f, grid) * 10 ** (-a.cutoff_db / 10)
    lower, upper = _edges(g2, f, grid, level)
    if not (math.isfinite(lower) and math.isfinite(upper)):
        raise InputError("the band edges lie outside the analysed range", "analysis")
    return math.sqrt(lower * upper), upper - lower


# --- errors of the built design against the ideal response ------------------------------

def _cheby_omega_c(order: int, ripple_db: float) -> float:
    """Omega of the -3 dB point of a Chebyshev prototype whose ripple edge is at 1 rad/s."""
    eps = math.sqrt(10 ** (ripple_db / 10) - 1)
    t0 = 1.0 if order % 2 == 0 else 0.0
    return math.cosh(math.acosh(math.sqrt(1 + 2 * eps ** 2 * t0) / eps) / order)


@dataclass(frozen=True)
class IdealResponse:
    """The ideal target from ``scipy.signal`` (zeros, poles in rad/s, gain) and its figures.

    ``ref2``: the passband reference |H|^2 (DC for a low-pass, high frequency for a
    high-pass, the peak for a band-pass). ``passband``: frequencies (Hz) of the passband
    the gain checks use: up to Omega_p = 1/2 of the cutoff (Chebyshev: the ripple edge),
    mapped to high-pass and band-pass like the poles.
    """

    z: np.ndarray
    p: np.ndarray
    k: float
    kind: str
    cutoff_db: float
    f: np.ndarray
    passband: np.ndarray
    ref2: float
    pass_edges: tuple[float, float]

    @classmethod
    def of(cls, response: str, order: int, fc: float, kind: str, bw: float | None,
           ripple_db: float | None, cutoff_db: float, analysis: Any) -> "IdealResponse":
        z, p, k = target_zpk(response, order, fc, kind, bw, ripple_db)
        omega_p = 1 / _cheby_omega_c(order, ripple_db) if ripple_db is not None else 0.5
        f = np.geomspace(analysis.f_start, analysis.f_stop, 8001)
        if kind == "lowpass":
            edges = (analysis.f_start, omega_p * fc)
        elif kind == "highpass":
            edges = (fc / omega_p, analysis.f_stop)
        else:
            assert bw is not None
            edges = omega_edges(fc, bw, omega_p)
        self = cls(np.asarray(z), np.asarray(p), float(k), kind, cutoff_db, f,
                   np.geomspace(edges[0], edges[1], 400), 1.0, edges)
        if kind == "lowpass":
            ref2 = float(self.g2(np.array([0.0]))[0])
        elif kind == "highpass":
            ref2 = float(k) ** 2
        else:
            ref2 = _peak2(self.g2, f, self.g2(f))
        return replace(self, ref2=ref2)

    def g2(self, f_hz: np.ndarray) -> np.ndarray:
        """|H|^2 at ``f_hz`` (Hz) by ``scipy.signal.freqs_zpk``."""
        _, h = signal.freqs_zpk(self.z, self.p, self.k, worN=TWO_PI * np.atleast_1d(f_hz))
        return np.abs(h) ** 2

    def cutoff(self) -> tuple[float, float | None]:
        """(cutoff, None) or band-pass (centre, bandwidth) in Hz at ``cutoff_db``."""
        grid = self.g2(self.f)
        lower, upper = _edges(self.g2, self.f, grid, self.ref2 * 10 ** (-self.cutoff_db / 10))
        if self.kind == "lowpass":
            return upper, None
        if self.kind == "highpass":
            return lower, None
        return math.sqrt(lower * upper), upper - lower


def omega_edges(fc: float, bw: float, omega: float) -> tuple[float, float]:
    """The band-pass frequencies (Hz) where the low-pass prototype is at +-``omega``."""
    hi = 0.5 * omega * bw + math.sqrt((0.5 * omega * bw) ** 2 + fc * fc)
    return fc * fc / hi, hi


def _ref2(design: Design, kind: str, g2: Callable[[np.ndarray], np.ndarray]) -> float:
    if kind == "bandpass":
        f = np.geomspace(design.analysis.f_start, design.analysis.f_stop, 8001)
        return _peak2(g2, f, g2(f))
    return 10 ** (float(prepare(design.with_mask(())).nominal.metrics["reference_db"]) / 10)


def _bandpass_section_gain(f0_hz: float, q: float, centre_hz: float) -> float:
    """Midband gain magnitude of one multiple-feedback band-pass section: enough to make up
    its own loss at the filter's centre (a stagger-tuned section is off its peak there), so
    the cascade is near 0 dB at the centre, but at most Q^2 (the section needs
    gain < 2 Q^2; Q^2 keeps R2 in a practical ratio)."""
    x = centre_hz / f0_hz - f0_hz / centre_hz
    loss = math.sqrt(1.0 + (q * x) ** 2)   # |H(centre)| = gain / loss for a second-order band-pass
    return min(loss, q * q)


def error_checks(design: Design, ideal: IdealResponse, sections: Sequence[SectionReport],
                 limits: ErrorLimits, exact: Design | None = None) -> tuple[ErrorCheck, ...]:
    """Every figure of ``design`` (nominal, ideal op-amps, the project's engine) against
    ``ideal`` (``scipy.signal``): cutoff or centre and bandwidth, each section's f0 and Q
    (against the scipy poles), the largest passband difference after both are referred
    to their own reference ("passband shape"), and the ripple (largest minus smallest gain
    over the passband). Low-pass and high-pass with ``exact`` (the same sections with exact
    resistors): also the passband reference gain against the sections' designed gain
    (scipy's prototype gain is a normalization: an even-order Chebyshev starts at -ripple).
    A band-pass's level is set by its sections' gains and is not checked."""
    out: list[ErrorCheck] = []
    c_ideal, b_ideal = ideal.cutoff()
    c_act, b_act = measure_cutoff(design)
    what = "centre" if ideal.kind == "bandpass" else "cutoff"
    out.append(ErrorCheck(what, c_ideal, c_act, c_act / c_ideal - 1, limits.cutoff, "%", "Hz"))
    if b_ideal is not None and b_act is not None:
        out.append(ErrorCheck("bandwidth", b_ideal, b_act, b_act / b_ideal - 1, limits.bandwidth, "%", "Hz"))
    for s in sections:
        short = s.stage.split(" ")[0]
        out.append(ErrorCheck(f"{short} f0", s.target_f0_hz, s.snapped_f0_hz, s.f0_error, limits.cutoff,
                              "%", "Hz"))
        if s.target_q is not None and s.snapped_q is not None:
            out.append(ErrorCheck(f"{short} Q", s.target_q, s.snapped_q, s.snapped_q / s.target_q - 1,
                                  limits.q, "%"))
    g2 = _design_g2(design)
    ref2 = _ref2(design, ideal.kind, g2)
    ours = 10 * np.log10(np.maximum(g2(ideal.passband), 1e-300) / ref2)
    theirs = 10 * np.log10(np.maximum(ideal.g2(ideal.passband), 1e-300) / ideal.ref2)
    if exact is not None and ideal.kind != "bandpass":  # the sections' designed gain, not scipy's
        a_db = 10 * math.log10(ref2)
        e_db = 10 * math.log10(_ref2(exact, ideal.kind, _design_g2(exact)))
        out.append(ErrorCheck("passband gain", e_db, a_db, a_db - e_db, limits.gain_db, "dB"))
    worst = int(np.argmax(np.abs(ours - theirs)))
    out.append(ErrorCheck("passband shape", float(theirs[worst]), float(ours[worst]),
                          float(ours[worst] - theirs[worst]), limits.gain_db, "dB"))
    r_ours, r_ideal = float(np.ptp(ours)), float(np.ptp(theirs))
    out.append(ErrorCheck("passband ripple", r_ideal, r_ours, r_ours - r_ideal, limits.gain_db, "dB"))
    return tuple(out)


def _starting_mask(ideal: IdealResponse, kind: str, ripple_db: float | None,
                   fc: float, bw: float | None) -> tuple:
    """Spans implied by the ideal response (relative to the passband reference, dB):

    - passband floor over Omega <= 1/2: -1 dB (Chebyshev -(ripple + 0.5)), lower if the
      ideal response dips below (its minimum - 0.5, rounded down to 0.5 dB);
    - passband ceiling up to the cutoff (band-pass: between the band edges): the ideal
      response's maximum there + :data:`CEILING_ALLOWANCE_DB`, rounded up to 0.1 dB
      (a Chebyshev ripple peak above the reference shows here);
    - stopband ceiling from Omega >= 4 to the range's end: the ideal response there +
      6 dB, rounded to 1 dB.
    """
    f_start, f_stop = float(ideal.f[0]), float(ideal.f[-1])
    base = -(ripple_db + 0.5) if ripple_db is not None else -1.0
    if kind == "lowpass":
        passband, top = [(f_start, 0.5 * fc)], (f_start, fc)
        stops = [(4 * fc, f_stop)]
    elif kind == "highpass":
        passband, top = [(2 * fc, f_stop)], (fc, f_stop)
        stops = [(f_start, fc / 4)]
    else:
        assert bw is not None
        passband, top = [omega_edges(fc, bw, 0.5)], omega_edges(fc, bw, 1.0)
        lo4, hi4 = omega_edges(fc, bw, 4.0)
        stops = [(f_start, lo4), (hi4, f_stop)]

    def rel_db(f1: float, f2: float) -> np.ndarray:
        return 10 * np.log10(np.maximum(ideal.g2(np.geomspace(f1, f2, 400)), 1e-300) / ideal.ref2)

    spans = []
    for f1, f2 in passband:
        worst = float(np.min(rel_db(f1, f2)))
        limit = min(base, math.floor(2 * (worst - 0.5)) / 2)
        spans.append(Span("floor", f1, f2, limit, relative=True, name="passband floor"))
    peak = float(np.max(rel_db(*top)))
    spans.append(Span("ceiling", top[0], top[1], math.ceil(10 * (peak + CEILING_ALLOWANCE_DB) - 1e-6) / 10,
                      relative=True, name="passband ceiling"))
    for j, (f1, f2) in enumerate(stops):
        if not f1 < f2:
            continue
        worst = float(np.max(rel_db(f1, f2)))
        spans.append(Span("ceiling", f1, f2, float(round(worst + 6)), relative=True,
                          name="stopband ceiling" + ("" if len(stops) == 1 else (" low", " high")[j])))
    return tuple(spans)


# --- op-amp gain-bandwidth -------------------------------------------------------------

def _dominant_pair(den: np.ndarray, w_ref: float) -> tuple[float, float]:
    """(w0 rad/s, Q) of the dominant pole pair of one denominator (ascending, scaled)."""
    roots = np.roots(den[::-1]) * w_ref
    upper = roots[roots.imag > 1e-9 * np.abs(roots)]
    if upper.size:
        r = upper[np.argmin(np.abs(upper))]
        return float(abs(r)), float(abs(r) / (-2 * r.real))
    real = np.sort(np.abs(roots.real))[:2]
    return float(math.sqrt(real[0] * real[1])), float(math.sqrt(real[0] * real[1]) / (real[0] + real[1]))


def _stage_design(design: Design, k: int, gbw_hz: float | None) -> tuple[Design, Design | None]:
    """Stage ``k`` alone: with an ideal op-amp, and with ``gbw_hz`` on role U1 (or None)."""
    st = design.stages[k]
    parts = {p.ref: p for p in design.parts}
    ideal_roles = {r: ref for r, ref in st.roles.items() if r != "U1"}
    ideal = Design(tuple(parts[ref] for ref in ideal_roles.values()),
                   (Stage(st.topology, ideal_roles, dict(st.options), st.name),), design.analysis)
    if gbw_hz is None:
        return ideal, None
    amp = Part("U?", "opamp", gbw_hz, "EXACT")
    roles = dict(ideal_roles, U1=amp.ref)
    real = Design(ideal.parts + (amp,), (Stage(st.topology, roles, dict(st.options), st.name),),
                  design.analysis)
    return ideal, real


def opamp_shift_table(design: Design, gbw_hz: float | None = None) -> list[GbwWarning]:
    """For every active second-order stage: ideal f0/Q, f0/Q with a single-pole op-amp,
    their relative shifts, the GBW the rule asks for, and whether the op-amp's is too low.

    The op-amp's GBW (Hz) is the value of the part on the stage's role U1, else
    ``gbw_hz`` (a what-if for stages without op-amp parts), else the GBW fields are None.
    Rule (tests/REFERENCES.md section 7, after Op Amps for Everyone ch. 16): open-loop gain at
    f0 at least 40 dB above the stage's peak gain, i.e. GBW >= 100 G Q f0 with G the
    stage's passband gain (see :class:`GbwWarning`). Passive stages are left out.
    """
    values = {p.ref: p.value for p in design.parts}
    rows: list[GbwWarning] = []
    for k, st in enumerate(design.stages):
        topo = st.built()
        if "U1" not in topo.optional_roles:
            continue
        gbw = values[st.roles["U1"]] if "U1" in st.roles else gbw_hz
        ideal, real = _stage_design(design, k, gbw)
        circuit, coeffs = _nominal_coeffs(ideal)
        sc = coeffs[0]
        f0a, qa = pole_pairs(sc.den, sc.w_ref)
        f0, q = float(f0a[0, 0]), float(qa[0, 0])
        if topo.kind == "lowpass":
            g = math.sqrt(float(dc_gain2(coeffs)[0]))
        elif topo.kind == "highpass":
            g = math.sqrt(float(hf_gain2(coeffs)[0]))
        else:
            g = math.sqrt(float(gain2_at(coeffs, np.array([f0]))[0]))
        grid = np.geomspace(f0 / 100, f0 * 100, 4001)
        peak = math.sqrt(float(np.max(gain2_at(coeffs, grid[None, :]))))
        required = 100 * g * q * f0
        name = st.name or f"stage {k + 1}"
        if real is None:
            rows.append(GbwWarning(name, st.topology, f0, q, g, peak, required))
            continue
        _, rc = _nominal_coeffs(real)
        w0r, qr = _dominant_pair(rc[0].den[0], rc[0].w_ref)
        f0r = w0r / TWO_PI
        rows.append(GbwWarning(name, st.topology, f0, q, g, peak, required, float(gbw), f0r, qr,
                               f0r / f0 - 1, qr / q - 1, bool(gbw < required)))
    return rows


def gbw_warnings(design: Design) -> list[GbwWarning]:
    """:func:`opamp_shift_table` for the stages that have an op-amp part (role U1).

    Every row carries ``too_low``; ``[w for w in gbw_warnings(d) if w.too_low]`` are the
    stages whose op-amp is too slow by the rule GBW >= 100 G Q f0.
    """
    return [r for r in opamp_shift_table(design) if r.gbw_hz is not None]
