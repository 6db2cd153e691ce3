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
    "RIPPLED",
    "STOPBAND_RESPONSES",
    "RIPPLES_DB",
    "STOPBAND_DB",
    "MAX_ORDER",
    "Section",
    "check_family",
    "prototype_zpk",
    "pair_poles",
    "pair_sections",
    "passband_edge",
    "stopband_edge",
    "prototype_sections",
    "cheby_omega_c",
    "target_zpk",
    "omega_edges",
]

signal = LazyModule("scipy.signal")  # imported on first use: each takes a good part of a second
optimize = LazyModule("scipy.optimize")

TWO_PI = 2 * math.pi
RESPONSES = ("butterworth", "chebyshev", "bessel", "linkwitz_riley", "elliptic", "inverse_chebyshev")
RIPPLED = ("chebyshev", "elliptic")             # responses with a passband ripple
STOPBAND_RESPONSES = ("elliptic", "inverse_chebyshev")  # responses with zeros: a stopband attenuation
RIPPLES_DB = (0.1, 0.5, 1.0, 2.0, 3.0)
STOPBAND_DB = (20.0, 120.0)                     # dB: the stopband attenuation a design may ask for
MAX_ORDER = 10
_WORDS = {"chebyshev": "a Chebyshev", "elliptic": "an elliptic", "inverse_chebyshev": "an inverse Chebyshev"}


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


def check_family(response: str, order: Any, ripple_db: float | None, stopband_db: float | None = None) -> None:
    """Refuse an unknown response, an order outside 1..:data:`MAX_ORDER` (or odd, for
    Linkwitz-Riley), a ripple or a stopband attenuation that does not fit the response
    (:class:`InputError`). Chebyshev and elliptic need ``ripple_db`` (one of
    :data:`RIPPLES_DB`); elliptic and inverse Chebyshev need ``stopband_db`` (dB, within
    :data:`STOPBAND_DB`; elliptic: at least the ripple + 10 dB).

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : Any
        Filter order as given.
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Raises
    ------
    InputError
        Naming the field that does not fit.
    """
    if response not in RESPONSES:
        raise InputError(f"unknown response {response!r}; known: {', '.join(RESPONSES)}", "response")
    if isinstance(order, bool) or not isinstance(order, (int, np.integer)) or not 1 <= order <= MAX_ORDER:
        raise InputError(f"must be a whole number from 1 to {MAX_ORDER}, not {order!r}", "order")
    if response == "linkwitz_riley" and order % 2:
        raise InputError(f"a Linkwitz-Riley response has an even order (2, 4, ...), not {order}", "order")
    if response in RIPPLED:
        if ripple_db is None:
            raise InputError(f"{_WORDS[response]} response needs the passband ripple in dB: "
                             + ", ".join(f"{r:g}" for r in RIPPLES_DB), "ripple_db")
        if not any(abs(ripple_db - r) < 1e-12 for r in RIPPLES_DB):
            raise InputError(f"must be one of {', '.join(f'{r:g}' for r in RIPPLES_DB)} dB, not {ripple_db!r}",
                             "ripple_db")
    elif ripple_db is not None:
        raise InputError(f"a ripple applies to a Chebyshev or elliptic response only, not {response}", "ripple_db")
    if response in STOPBAND_RESPONSES and order < 2:
        raise InputError(f"{_WORDS[response]} response has order 2 or more (its zeros need a pole pair), "
                         f"not {order}", "order")
    if response in STOPBAND_RESPONSES:
        lo, hi = STOPBAND_DB
        if stopband_db is None:
            raise InputError(f"{_WORDS[response]} response needs the stopband attenuation in dB "
                             f"({lo:g} to {hi:g})", "stopband_db")
        if isinstance(stopband_db, bool) or not isinstance(stopband_db, (int, float, np.floating)) \
                or not lo <= stopband_db <= hi:
            raise InputError(f"must be a number of dB from {lo:g} to {hi:g}, not {stopband_db!r}", "stopband_db")
        if response == "elliptic" and ripple_db is not None and stopband_db < ripple_db + 10:
            raise InputError(f"must be at least the ripple + 10 dB ({ripple_db + 10:g} dB), not {stopband_db:g}",
                             "stopband_db")
    elif stopband_db is not None:
        raise InputError(f"a stopband attenuation applies to an elliptic or inverse Chebyshev response only, "
                         f"not {response}", "stopband_db")


def prototype_zpk(response: str, order: int, ripple_db: float | None = None, stopband_db: float | None = None
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
    - Elliptic (Cauer; ``ripple_db`` in the passband, at least ``stopband_db`` below the
      passband's peak in the stopband): ``scipy.signal.ellip`` puts Omega = 1 at the ripple
      edge; inverse Chebyshev (Chebyshev type II, flat passband, ``stopband_db``):
      ``scipy.signal.cheby2`` puts Omega = 1 at the stopband edge. Both are scaled so that
      |H|^2 is half the DC value at Omega = 1 (found by ``scipy.optimize.brentq`` between
      the ripple edge, or 0, and the lowest zero); :func:`stopband_edge` gives where the
      stopband then starts. An even order's DC gain is the bottom of the elliptic ripple.

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : int
        Filter order.
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Returns
    -------
    tuple[np.ndarray, np.ndarray, float]
        Zeros (Z,) and poles (N,) complex, normalized rad/s, and the gain.
    """
    check_family(response, order, ripple_db, stopband_db)
    if response == "butterworth":
        z, p, k = signal.butter(order, 1.0, analog=True, output="zpk")
    elif response == "bessel":
        z, p, k = signal.bessel(order, 1.0, analog=True, norm="mag", output="zpk")
    elif response == "chebyshev":
        assert ripple_db is not None
        z, p, k = signal.cheby1(order, ripple_db, 1.0, analog=True, output="zpk")
        z, p, k = signal.lp2lp_zpk(z, p, k, wo=1.0 / cheby_omega_c(order, ripple_db))
    elif response in STOPBAND_RESPONSES:
        assert stopband_db is not None
        if response == "elliptic":
            assert ripple_db is not None
            z, p, k = signal.ellip(order, ripple_db, stopband_db, 1.0, analog=True, output="zpk")
        else:
            z, p, k = signal.cheby2(order, stopband_db, 1.0, analog=True, output="zpk")
        z, p, k = signal.lp2lp_zpk(z, p, k, wo=1.0 / _half_power_omega(z, p, k))
    else:
        z1, p1, k1 = signal.butter(order // 2, 1.0, analog=True, output="zpk")
        z, p, k = np.concatenate([z1, z1]), np.concatenate([p1, p1]), k1 * k1
    return np.asarray(z, dtype=complex), np.asarray(p, dtype=complex), float(k)


def _gain2(z: np.ndarray, p: np.ndarray, k: float, w: float) -> float:
    """|H(j w)|^2 of a zeros-poles-gain low-pass (w in rad/s)."""
    s = 1j * w
    return float(abs(k * np.prod(s - z) / np.prod(s - p)) ** 2)


def _falling_to(z: np.ndarray, p: np.ndarray, k: float, level2: float, w_lo: float) -> float:
    """The lowest w above ``w_lo`` where the prototype falls to |H|^2 = ``level2``: between
    ``w_lo`` and its lowest zero the response of an elliptic or inverse Chebyshev low-pass
    falls monotonically."""
    w_hi = float(np.min(np.abs(z))) * (1 - 1e-9)
    return float(optimize.brentq(lambda w: math.log(_gain2(z, p, k, w) / level2), w_lo, w_hi, xtol=1e-15,
                                 rtol=1e-14))


def _half_power_omega(z: np.ndarray, p: np.ndarray, k: float) -> float:
    """Omega where |H|^2 is half its DC value (scipy's normalization: ripple or stopband edge at 1)."""
    dc2 = _gain2(z, p, k, 0.0)
    passband_edge = 1.0 if _gain2(z, p, k, 1.0) > 0.5 * dc2 else 1e-6
    return _falling_to(z, p, k, 0.5 * dc2, passband_edge)


def passband_edge(response: str, order: int, ripple_db: float | None = None,
                  stopband_db: float | None = None) -> float:
    """Omega (normalized: the -3 dB point at 1) up to which the passband checks look: the
    ripple edge of a Chebyshev or elliptic prototype, 1/2 for the others.

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : int
        Filter order.
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Returns
    -------
    float
        Omega (normalized, no unit).
    """
    if response == "chebyshev":
        assert ripple_db is not None
        return 1 / cheby_omega_c(order, ripple_db)
    if response == "elliptic":
        assert ripple_db is not None and stopband_db is not None
        return 1 / _half_power_omega(*signal.ellip(order, ripple_db, stopband_db, 1.0, analog=True, output="zpk"))
    return 0.5


def stopband_edge(response: str, order: int, ripple_db: float | None, stopband_db: float) -> float:
    """Omega (normalized: the -3 dB point at 1) where an elliptic or inverse Chebyshev
    low-pass prototype first falls ``stopband_db`` below its passband peak (0 dB); above it
    the response never rises past that level (the stopband the response guarantees).

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : int
        Filter order.
    ripple_db : float or None
        Passband ripple in dB (elliptic).
    stopband_db : float
        Stopband attenuation in dB.

    Returns
    -------
    float
        Omega (normalized, no unit).
    """
    z, p, k = prototype_zpk(response, order, ripple_db, stopband_db)
    peak2 = 1.0 if response == "inverse_chebyshev" or order % 2 else _gain2(z, p, k, 0.0) * 10 ** (ripple_db / 10)
    return _falling_to(z, p, k, peak2 * 10 ** (-stopband_db / 10), 1.0)


def pair_poles(poles: np.ndarray) -> list[tuple[float, float | None]]:
    """Group poles (rad/s, left half-plane) into sections: (w0, Q) or (w, None).

    Each complex conjugate pair gives one second-order section: w0 = |p|,
    Q = |p| / (2 |Re p|). Real poles are combined two at a time (smallest magnitudes
    together) into second-order sections with Q <= 1/2: w0 = sqrt(p1 p2),
    Q = sqrt(p1 p2)/(p1 + p2); a real pole left over is a first-order section.

    Order (common practice): the first-order section first, then the second-order
    sections by ascending Q (ties by ascending w0), so the highest-Q stage comes last.

    Parameters
    ----------
    poles : np.ndarray
        (N,) complex poles in rad/s, left half-plane.

    Returns
    -------
    list[tuple[float, float or None]]
        (w0 in rad/s, Q), Q None for a first-order section.
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


def pair_sections(zeros: np.ndarray, poles: np.ndarray) -> list[tuple[float, float | None, float | None]]:
    """Sections (w0, Q, wz) of a filter with zeros on the imaginary axis (rad/s): the
    sections of :func:`pair_poles`, in its order, each complex pole pair with the nearest
    zero pair +-j wz (None: no zero pair is left for it). Pole pairs take their zeros
    highest Q first (the pole nearest the axis gets the zero nearest it: common practice,
    it keeps each section's gain peaks low); distance |p - j wz| in the s-plane. Zeros at
    the origin (a high-pass's) belong to no pair and are left out; a first-order section
    has wz None.

    Parameters
    ----------
    zeros : np.ndarray
        (Z,) complex zeros in rad/s on the imaginary axis.
    poles : np.ndarray
        (N,) complex poles in rad/s, left half-plane.

    Returns
    -------
    list[tuple[float, float or None, float or None]]
        (w0 in rad/s, Q, wz in rad/s) per section.
    """
    z = np.asarray(zeros, dtype=complex)
    z = z[np.abs(z) > 1e-9 * max(1.0, float(np.max(np.abs(poles))))]
    if np.any(np.abs(z.real) > 1e-6 * np.abs(z)):
        raise InputError("every zero must lie on the imaginary axis", "zeros")
    free = sorted(float(abs(x)) for x in z if x.imag > 0)
    sections = pair_poles(poles)
    wz: dict[int, float | None] = {}
    for i in sorted(range(len(sections)), key=lambda i: -(sections[i][1] or 0.0)):
        w0, q = sections[i]
        if q is None or not free:
            wz[i] = None
            continue
        pole = w0 * complex(-1 / (2 * q), math.sqrt(max(0.0, 1 - 1 / (4 * q * q))))
        j = min(range(len(free)), key=lambda j: abs(pole - 1j * free[j]))
        wz[i] = free.pop(j)
    if free:
        raise InputError(f"{len(free)} zero pair(s) left without a pole pair", "zeros")
    return [(w0, q, wz[i]) for i, (w0, q) in enumerate(sections)]


def prototype_sections(response: str, order: int, ripple_db: float | None = None,
                       stopband_db: float | None = None) -> list[Section]:
    """The normalized low-pass prototype as sections, in the order they are built.

    ``response``: "butterworth", "chebyshev" (``ripple_db`` 0.1, 0.5, 1, 2 or 3 dB),
    "bessel", "linkwitz_riley" (even orders only), "elliptic" (``ripple_db`` and
    ``stopband_db``) or "inverse_chebyshev" (``stopband_db``); ``order`` 1 to 10. The
    sections hold the poles only; :func:`pair_sections` pairs them with the zeros.

    Normalization: the whole filter's -3 dB point (|H|^2 = half the DC value) is at
    Omega = 1 rad/s, as in the published tables: Butterworth and Bessel (``norm='mag'``)
    natively, Chebyshev scaled from ``scipy.signal.cheby1`` (which puts Omega = 1 at the
    ripple edge). A Linkwitz-Riley filter is two cascaded Butterworth filters of order
    n/2 and is -6 dB at Omega = 1: its cutoff is the -6 dB crossover frequency, NOT a
    -3 dB point. See :func:`prototype_zpk`.

    An odd order has one first-order section (``q`` None, ``f0_norm`` = its real pole),
    placed first; second-order sections follow by ascending Q (see :func:`pair_poles`).

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : int
        Filter order.
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Returns
    -------
    list[Section]
        Sections with normalized f0 (Omega) and Q.
    """
    _, p, _ = prototype_zpk(response, order, ripple_db, stopband_db)
    return [Section(w, q) for w, q in pair_poles(p)]


def cheby_omega_c(order: int, ripple_db: float) -> float:
    """Omega of the -3 dB point of a Chebyshev prototype whose ripple edge is at 1 rad/s.

    Parameters
    ----------
    order : int
        Filter order.
    ripple_db : float
        Passband ripple in dB.

    Returns
    -------
    float
        Omega (normalized, no unit).
    """
    eps = math.sqrt(10 ** (ripple_db / 10) - 1)
    t0 = 1.0 if order % 2 == 0 else 0.0
    return math.cosh(math.acosh(math.sqrt(1 + 2 * eps ** 2 * t0) / eps) / order)


def target_zpk(response: str, order: int, cutoff_hz: float, kind: str = "lowpass",
               bandwidth_hz: float | None = None, ripple_db: float | None = None,
               stopband_db: float | None = None) -> tuple[np.ndarray, np.ndarray, float]:
    """The target filter's zeros, poles (rad/s) and gain: the prototype of
    :func:`prototype_zpk` moved to ``cutoff_hz`` with ``scipy.signal.lp2lp_zpk``,
    ``lp2hp_zpk``, or (centre ``cutoff_hz``, ``bandwidth_hz`` between the -3 dB edges)
    ``lp2bp_zpk`` (band-pass) or ``lp2bs_zpk`` (band-stop).

    Parameters
    ----------
    response : str
        Response family (:data:`RESPONSES`).
    order : int
        Filter order.
    cutoff_hz : float
        Cutoff or centre in Hz.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    bandwidth_hz : float, optional
        Bandwidth between the -3 dB edges in Hz (band-pass, band-stop).
    ripple_db : float, optional
        Passband ripple in dB (Chebyshev, elliptic).
    stopband_db : float, optional
        Stopband attenuation in dB (elliptic, inverse Chebyshev).

    Returns
    -------
    tuple[np.ndarray, np.ndarray, float]
        Zeros and poles (complex, rad/s) and the gain.
    """
    z, p, k = prototype_zpk(response, order, ripple_db, stopband_db)
    wo = TWO_PI * cutoff_hz
    if kind == "lowpass":
        return signal.lp2lp_zpk(z, p, k, wo=wo)
    if kind == "highpass":
        return signal.lp2hp_zpk(z, p, k, wo=wo)
    assert bandwidth_hz is not None
    if kind == "bandstop":
        return signal.lp2bs_zpk(z, p, k, wo=wo, bw=TWO_PI * bandwidth_hz)
    return signal.lp2bp_zpk(z, p, k, wo=wo, bw=TWO_PI * bandwidth_hz)


def omega_edges(fc: float, bw: float, omega: float) -> tuple[float, float]:
    """The band-pass frequencies (Hz) where the low-pass prototype is at +-``omega`` (a
    band-stop's: at +-1/``omega``).

    Parameters
    ----------
    fc : float
        Centre frequency in Hz.
    bw : float
        Bandwidth in Hz.
    omega : float
        Prototype frequency Omega (normalized, positive).

    Returns
    -------
    tuple[float, float]
        (low, high) frequencies in Hz.
    """
    hi = 0.5 * omega * bw + math.sqrt((0.5 * omega * bw) ** 2 + fc * fc)
    return fc * fc / hi, hi

