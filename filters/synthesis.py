"""Filter synthesis: from a response family, an order and a cutoff to a buildable design.

:func:`prototype_sections` splits a normalized low-pass prototype into first- and
second-order sections (f0 and Q). :func:`synthesize` transforms the prototype to the
requested cutoff (low-pass, high-pass or band-pass), picks one topology per section,
chooses capacitors from a preferred-value series, solves the resistors exactly, snaps
them to their series, and returns the :class:`~filters.design.Design` with a report of
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
from dataclasses import dataclass, field
from typing import Any, Sequence

import numpy as np
from scipy import optimize, signal

from .design import Design, Part, Stage, design_from_dict
from .engine import compile_design, dc_gain2, gain2_at, hf_gain2, stage_coefficients
from .errors import InputError
from .evaluate import prepare
from .grades import builtin_catalog
from .mask import Span
from .metrics import pole_pairs, stage_metrics
from .values import E_SERIES, format_value, series_values, snap as snap_value

TWO_PI = 2 * math.pi
HALF_POWER_DB = 10 * math.log10(2)   # 3.0103 dB: |H|^2 halves
LR_CROSSOVER_DB = 20 * math.log10(2)  # 6.0206 dB: |H| halves (Linkwitz-Riley crossover)

RESPONSES = ("butterworth", "chebyshev", "bessel", "linkwitz_riley")
KINDS = ("lowpass", "highpass", "bandpass")
RIPPLES_DB = (0.1, 0.5, 1.0, 2.0, 3.0)
MAX_ORDER = 10
TOPOLOGY_CHOICES = {
    "lowpass": ("sallen_key_lowpass", "mfb_lowpass"),
    "highpass": ("sallen_key_highpass", "mfb_highpass"),
    "bandpass": ("mfb_bandpass",),
}
C_MIN, C_MAX = 100e-12, 1e-6  # F: range for the chosen impedance-level capacitor
C_LEVEL_1KHZ = 10e-9          # F: impedance level, 10 nF at 1 kHz, scaled as 1/f0
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

    Normalization (the -3 dB convention of the published tables, REFERENCES.md section 5):
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
        eps = math.sqrt(10 ** (ripple_db / 10) - 1)
        t0 = 1.0 if order % 2 == 0 else 0.0
        omega_c = math.cosh(math.acosh(math.sqrt(1 + 2 * eps ** 2 * t0) / eps) / order)
        z, p, k = signal.lp2lp_zpk(z, p, k, wo=1.0 / omega_c)
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

def _at_least(x: float, series: str) -> float:
    """The smallest value of ``series`` that is not below ``x`` (within 1e-9)."""
    vals = series_values(series, x * (1 - 1e-9), x * 10.5)
    return float(vals[0])


def _level_cap(f0_hz: float, cap_series: str, scale: float = 1.0) -> float:
    """The impedance-level capacitor: 10 nF x (1 kHz / f0) x scale in [100 pF, 1 uF],
    snapped to ``cap_series`` (F)."""
    c = C_LEVEL_1KHZ * (1e3 / f0_hz) * scale
    return float(snap_value(min(max(c, C_MIN), C_MAX), cap_series))


def _sqrt_disc(d: float, scale: float) -> float:
    # a discriminant that is zero in exact arithmetic may come out a hair below zero
    return math.sqrt(d) if d > 0 else 0.0 if d > -1e-9 * scale else math.nan


def section_values(topology: str, f0_hz: float, q: float | None, cap_series: str = "E12",
                   gain: float = 1.0) -> dict[str, float]:
    """Exact part values (ohm, F) for one section, by role, before resistor snapping.

    Capacitors are chosen from ``cap_series`` around an impedance level of 10 nF at 1 kHz
    (scaled as 1/f0, kept in 100 pF..1 uF); the resistors are then solved exactly, so the
    section has f0 (Hz) and Q exactly with these values:

    - ``sallen_key_lowpass`` (unity gain; REFERENCES.md section 6: w0^2 = 1/(R1R2C1C2),
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
    w0 = TWO_PI * f0_hz
    if topology in ("rc_lowpass", "rc_highpass"):
        c = _level_cap(f0_hz, cap_series)
        return {"R1": 1.0 / (w0 * c), "C1": c}
    if q is None or not q > 0:
        raise InputError(f"{topology} needs a Q above 0", "q")
    if topology == "sallen_key_lowpass":
        c2 = _level_cap(f0_hz, cap_series, 1.0 / (2 * q))
        c1 = _at_least(4 * q * q * c2, cap_series)
        prod = 1.0 / (w0 * w0 * c1 * c2)      # R1 R2
        total = 1.0 / (w0 * q * c2)            # R1 + R2
        r2 = 0.5 * (total + _sqrt_disc(total * total - 4 * prod, total * total))
        return {"R1": prod / r2, "R2": r2, "C1": c1, "C2": c2}
    if topology == "mfb_lowpass":
        c2 = _level_cap(f0_hz, cap_series, 1.0 / (2 * math.sqrt(2) * q))
        c1 = _at_least(8 * q * q * c2, cap_series)
        prod = 1.0 / (w0 * w0 * c1 * c2)      # R R3
        total = 1.0 / (w0 * q * c2)            # R + 2 R3
        r = 0.5 * (total + _sqrt_disc(total * total - 8 * prod, total * total))
        return {"R1": r, "R2": r, "R3": prod / r, "C1": c1, "C2": c2}
    if topology == "sallen_key_highpass":
        c = _level_cap(f0_hz, cap_series)
        return {"C1": c, "C2": c, "R1": 1.0 / (2 * q * w0 * c), "R2": 2 * q / (w0 * c)}
    if topology == "mfb_highpass":
        c = _level_cap(f0_hz, cap_series)
        return {"C1": c, "C2": c, "C3": c, "R1": 1.0 / (3 * q * w0 * c), "R2": 3 * q / (w0 * c)}
    if topology == "mfb_bandpass":
        if not 0 < gain < 2 * q * q:
            raise InputError(f"the midband gain must lie between 0 and 2 Q^2 = {2 * q * q:.4g}", "gain")
        c = _level_cap(f0_hz, cap_series)
        r3 = 2 * q / (w0 * c)
        return {"R1": r3 / (2 * gain), "R2": 1.0 / (w0 * c * (2 * q - gain / q)), "R3": r3,
                "C1": c, "C2": c}
    raise InputError(f"no synthesis rule for topology {topology!r}", "topology")


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
    gain, which is about G Q; Op Amps for Everyone ch. 16, as in REFERENCES.md section 7).
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
        lines.append(f"{what} ({self.cutoff_db:.2f} dB below the reference): target "
                     f"{_hz(self.cutoff_target_hz)}, exact {_hz(self.cutoff_unsnapped_hz)}, "
                     f"snapped {_hz(self.cutoff_snapped_hz)} ({_pct(self.cutoff_error)} from snapping)")
        if self.bandwidth_target_hz is not None:
            lines.append(f"bandwidth: target {_hz(self.bandwidth_target_hz)}, exact "
                         f"{_hz(self.bandwidth_unsnapped_hz)}, snapped {_hz(self.bandwidth_snapped_hz)} "
                         f"({_pct(self.bandwidth_error)} from snapping)")
        if self.gbw:
            lines.append("")
            lines.append(opamp_table_text(self.gbw))
            if self.cutoff_gbw_hz is not None:
                lines.append(f"{what} with the op-amps' gain-bandwidth: {_hz(self.cutoff_gbw_hz)} "
                             f"({_pct(self.cutoff_gbw_hz / self.cutoff_target_hz - 1)} from target)")
        lines.append("")
        lines.append("The mask is a starting point (passband floor, stopband ceiling 6 dB above the "
                     "nominal response); edit it to your specification.")
        return "\n".join(lines)


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
               opamp_grade: str = "OPAMP-GBW-50") -> SynthesisResult:
    """Build a design realising ``response`` of ``order`` at ``cutoff_hz`` (Hz).

    ``kind``: "lowpass", "highpass" or "bandpass". A low-pass or high-pass cutoff is the
    -3 dB point (|H|^2 half the passband reference, see :func:`prototype_sections`;
    Linkwitz-Riley: the -6 dB crossover). A band-pass is the low-pass prototype moved by
    ``scipy.signal.lp2bp_zpk`` to centre ``cutoff_hz`` (geometric mean of the band edges)
    with ``bandwidth_hz`` between the edges; an order-N band-pass has 2N poles and is
    built as N multiple-feedback band-pass sections, one per pole pair, each with midband
    gain magnitude min(1, Q^2) (so the overall midband gain is not 0 dB in general; the
    mask is relative). Linkwitz-Riley is for low-pass and high-pass only.

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
    3.01 + ripple dB below its peak). Mask (a **starting point** for the user to edit),
    relative to the passband reference: a floor over [f_start, cutoff/2] (high-pass
    [2 cutoff, f_stop]; band-pass where the prototype is at Omega <= 1/2) at -1 dB
    (Chebyshev -(ripple + 0.5) dB), lowered if the nominal response needs it, and a
    stopband ceiling from 4 x cutoff (Omega >= 4) to the range's end, at the nominal
    response there + 6 dB, rounded to 1 dB.
    """
    _check_family(response, order, ripple_db)
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

    # Stages and exact values.
    stages: list[dict[str, Any]] = []
    for i, (f0, q) in enumerate(targets, 1):
        if q is None:
            t = "rc_lowpass" if kind == "lowpass" else "rc_highpass"
            vals = section_values(t, f0, None, cap_series)
            name = f"S{i} first order, fc {_hz(f0)}"
        else:
            t = topo
            gain = min(1.0, q * q) if t == "mfb_bandpass" else 1.0
            vals = section_values(t, f0, q, cap_series, gain)
            name = f"S{i} f0 {_hz(f0)}, Q {q:.3f}"
        if not all(math.isfinite(v) and v > 0 for v in vals.values()):
            raise InputError(f"no real part values for section {i} (f0 {f0:g} Hz, Q {q})", "order")
        stages.append({"topology": t, "name": name, "values": vals, "target": (f0, q)})

    label = _LABEL[response] + (f" {ripple_db:g} dB" if ripple_db is not None else "")
    title = (f"{label} {_KIND_LABEL[kind]}, order {order}, "
             + (f"centre {_hz(fc)}, bandwidth {_hz(bw)}" if bw is not None else f"cutoff {_hz(fc)}")
             + " (synthesized)")
    analysis = {"samples": 5000, "seed": 1, "f_start": f_start, "f_stop": f_stop, "points": 400,
                "cutoff_db": cutoff_db}
    grades = {"R": resistor_grade, "C": capacitor_grade, "opamp": opamp_grade}

    exact = _build(stages, False, series, grades, None, analysis, title, "")
    snapped = _build(stages, snap, series, grades, None, analysis, title, "")
    exact_m = _stage_fq(exact)
    snapped_m = _stage_fq(snapped)
    reports = tuple(
        SectionReport(st["name"], st["topology"], st["target"][0], st["target"][1],
                      exact_m[i][0], exact_m[i][1], snapped_m[i][0], snapped_m[i][1])
        for i, st in enumerate(stages))

    c_exact, b_exact = measure_cutoff(exact)
    c_snap, b_snap = measure_cutoff(snapped)

    description = (
        f"Synthesized: {label} {_KIND_LABEL[kind]} prototype (scipy.signal poles), one section per "
        "pole pair, lowest Q first. Capacitors from " + cap_series + ", resistors "
        + (f"snapped to {series}" if snap else "exact") + ". Stages are taken as buffered; a first-order "
        "RC section needs a high-impedance load (a follower) on the board. The mask is a starting "
        "point: edit it to your specification.")
    final = _build(stages, snap, series, grades, gbw_hz, analysis, title, description)
    final = final.with_mask(_starting_mask(final, kind, response, ripple_db, fc, bw))
    final = design_from_dict(final.to_dict())  # checked like a loaded file
    c_gbw = None
    rows: tuple[GbwWarning, ...] = ()
    if gbw_hz is not None:
        c_gbw = measure_cutoff(final)[0]
        rows = tuple(gbw_warnings(final))
    return SynthesisResult(final, response, kind, order, ripple_db, cutoff_db, reports, fc, c_exact,
                           c_snap, bw, b_exact, b_snap, c_gbw, rows, series, cap_series, snap)


def _build(stages: list[dict[str, Any]], snap: bool, series: str, grades: dict[str, str],
           gbw_hz: float | None, analysis: dict[str, Any], name: str, description: str) -> Design:
    counters = {"R": 0, "C": 0, "U": 0}
    parts: list[dict[str, Any]] = []
    out_stages: list[dict[str, Any]] = []
    for st in stages:
        roles: dict[str, str] = {}
        for role, v in st["values"].items():
            kind = role[0]
            counters[kind] += 1
            ref = f"{kind}{counters[kind]}"
            value = float(snap_value(v, series)) if snap and kind == "R" else float(v)
            parts.append({"ref": ref, "value": value, "grade": grades[kind]})
            roles[role] = ref
        if gbw_hz is not None and not st["topology"].startswith("rc_"):
            counters["U"] += 1
            ref = f"U{counters['U']}"
            parts.append({"ref": ref, "value": gbw_hz, "grade": grades["opamp"]})
            roles["U1"] = ref
        options = ({"sections": 1} if st["topology"].startswith("rc_")
                   else {"gain": "unity"} if st["topology"].startswith("sallen_key") else {})
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
        if f"s{k}.fc_hz" in m:
            out.append((float(m[f"s{k}.fc_hz"][0]), None))
        else:
            out.append((float(m[f"s{k}.f0_hz"][0]), float(m[f"s{k}.q"][0])))
    return out


def measure_cutoff(design: Design) -> tuple[float, float | None]:
    """The nominal design's cutoff (Hz) at ``analysis.cutoff_db`` below its reference.

    Low-pass and high-pass: the analysis' own ``cutoff_hz`` metric (reference DC or high
    frequency gain), with None for the bandwidth. Band-pass: (centre, bandwidth) from the
    outermost crossings of the level ``cutoff_db`` below the exact peak (found on a dense
    grid and refined), centre = sqrt(lower x upper), bandwidth = upper - lower.
    """
    circuit, coeffs = _nominal_coeffs(design)
    if circuit.kind != "bandpass":
        return float(prepare(design.with_mask(())).nominal.metrics["cutoff_hz"]), None
    a = design.analysis
    f = np.geomspace(a.f_start, a.f_stop, 8001)

    def g2(x: np.ndarray) -> np.ndarray:
        return gain2_at(coeffs, np.atleast_1d(np.asarray(x, dtype=float))[None, :])[0]

    grid = g2(f)
    i = int(np.argmax(grid))
    lo_i, hi_i = max(i - 1, 0), min(i + 1, f.size - 1)
    res = optimize.minimize_scalar(lambda lf: -math.log(g2(math.exp(lf))[0]),
                                   bounds=(math.log(f[lo_i]), math.log(f[hi_i])), method="bounded",
                                   options={"xatol": 1e-12})
    peak2 = max(float(grid[i]), float(g2(math.exp(res.x))[0]))
    level = peak2 * 10 ** (-a.cutoff_db / 10)
    above = np.nonzero(grid >= level)[0]
    first, last = int(above[0]), int(above[-1])
    if first == 0 or last == f.size - 1:
        raise InputError("the band edges lie outside the analysed range", "analysis")

    def h(lf: float) -> float:
        return math.log(g2(math.exp(lf))[0] / level)

    lower = math.exp(optimize.brentq(h, math.log(f[first - 1]), math.log(f[first]), xtol=1e-14))
    upper = math.exp(optimize.brentq(h, math.log(f[last]), math.log(f[last + 1]), xtol=1e-14))
    return math.sqrt(lower * upper), upper - lower


def _rel_db(design: Design, freqs: np.ndarray) -> np.ndarray:
    """Nominal gain (dB) at ``freqs`` relative to the analysis' passband reference."""
    prep = prepare(design.with_mask(()))
    ref = prep.nominal.metrics["reference_db"]
    _, coeffs = _nominal_coeffs(design)
    g2 = gain2_at(coeffs, np.asarray(freqs, dtype=float)[None, :])[0]
    return 10 * np.log10(np.maximum(g2, 1e-300)) - ref


def _starting_mask(design: Design, kind: str, response: str, ripple_db: float | None,
                   fc: float, bw: float | None) -> tuple:
    a = design.analysis
    base = -(ripple_db + 0.5) if ripple_db is not None else -1.0

    def omega_edges(omega: float) -> tuple[float, float]:
        # the band-pass frequencies where the low-pass prototype is at +-omega
        assert bw is not None
        hi = 0.5 * omega * bw + math.sqrt((0.5 * omega * bw) ** 2 + fc * fc)
        return fc * fc / hi, hi

    if kind == "lowpass":
        passband = [(a.f_start, 0.5 * fc)]
        stops = [(4 * fc, a.f_stop)]
    elif kind == "highpass":
        passband = [(2 * fc, a.f_stop)]
        stops = [(a.f_start, fc / 4)]
    else:
        passband = [omega_edges(0.5)]
        lo4, hi4 = omega_edges(4.0)
        stops = [(a.f_start, lo4), (hi4, a.f_stop)]
    spans = []
    for f1, f2 in passband:
        worst = float(np.min(_rel_db(design, np.geomspace(f1, f2, 200))))
        limit = min(base, math.floor(2 * (worst - 0.5)) / 2)
        spans.append(Span("floor", f1, f2, limit, relative=True, name="passband floor"))
    for j, (f1, f2) in enumerate(stops):
        if not f1 < f2:
            continue
        worst = float(np.max(_rel_db(design, np.geomspace(f1, f2, 200))))
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
    Rule (REFERENCES.md section 7, after Op Amps for Everyone ch. 16): open-loop gain at
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
