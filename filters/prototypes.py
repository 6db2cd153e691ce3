"""Analog prototypes: the normalized low-pass prototype of each response, moved to a
cutoff, and its poles paired into first- and second-order sections.

The poles come from ``scipy.signal`` (``butter``, ``cheby1``, ``bessel`` with
``analog=True``, ``output='zpk'``) and its frequency transforms (``lp2lp_zpk``,
``lp2hp_zpk``, ``lp2bp_zpk``); nothing here re-derives a prototype.
:func:`prototype_sections` gives the sections (f0 and Q) of the normalized prototype,
:func:`target_zpk` the target filter at its cutoff, :func:`pair_poles` the sections of any
set of left half-plane poles.

Units: normalized prototypes in rad/s (``Omega``, the filter's cutoff at 1), targets in
rad/s, frequencies in Hz where the name says so.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

import numpy as np

from .errors import InputError
from .lazyimport import LazyModule

__all__ = [
    "TWO_PI",
    "RESPONSES",
    "RIPPLES_DB",
    "MAX_ORDER",
    "Section",
    "check_family",
    "prototype_zpk",
    "pair_poles",
    "prototype_sections",
    "cheby_omega_c",
    "target_zpk",
    "omega_edges",
]

signal = LazyModule("scipy.signal")  # imported on first use: it takes a good part of a second

TWO_PI = 2 * math.pi
RESPONSES = ("butterworth", "chebyshev", "bessel", "linkwitz_riley")
RIPPLES_DB = (0.1, 0.5, 1.0, 2.0, 3.0)
MAX_ORDER = 10


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


def check_family(response: str, order: Any, ripple_db: float | None) -> None:
    """Refuse an unknown response, an order outside 1..:data:`MAX_ORDER` (or odd, for
    Linkwitz-Riley) or a ripple that does not fit the response (:class:`InputError`)."""
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
    check_family(response, order, ripple_db)
    if response == "butterworth":
        z, p, k = signal.butter(order, 1.0, analog=True, output="zpk")
    elif response == "bessel":
        z, p, k = signal.bessel(order, 1.0, analog=True, norm="mag", output="zpk")
    elif response == "chebyshev":
        assert ripple_db is not None
        z, p, k = signal.cheby1(order, ripple_db, 1.0, analog=True, output="zpk")
        z, p, k = signal.lp2lp_zpk(z, p, k, wo=1.0 / cheby_omega_c(order, ripple_db))
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


def cheby_omega_c(order: int, ripple_db: float) -> float:
    """Omega of the -3 dB point of a Chebyshev prototype whose ripple edge is at 1 rad/s."""
    eps = math.sqrt(10 ** (ripple_db / 10) - 1)
    t0 = 1.0 if order % 2 == 0 else 0.0
    return math.cosh(math.acosh(math.sqrt(1 + 2 * eps ** 2 * t0) / eps) / order)


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


def omega_edges(fc: float, bw: float, omega: float) -> tuple[float, float]:
    """The band-pass frequencies (Hz) where the low-pass prototype is at +-``omega``."""
    hi = 0.5 * omega * bw + math.sqrt((0.5 * omega * bw) ** 2 + fc * fc)
    return fc * fc / hi, hi

