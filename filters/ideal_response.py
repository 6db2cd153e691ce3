"""The ideal response a synthesized design is held against, and what it implies.

:class:`IdealResponse` is the target from ``scipy.signal`` (zeros, poles, gain) with its
cutoff and passband; :func:`error_checks` measures a built design against it within
:class:`ErrorLimits`; :func:`starting_mask` gives the spans the ideal response implies.

Units: frequencies in Hz, zeros and poles in rad/s, gains as |H|^2 or in dB where named.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Callable, Sequence

import numpy as np

from .design import Design
from .errors import InputError
from .evaluate import prepare
from .lazyimport import LazyModule
from .mask import Span
from .nominal_measure import level_crossings, measure_cutoff, nominal_gain2, peak_gain2, stop_edges
from .prototypes import TWO_PI, omega_edges, passband_edge, stopband_edge, target_zpk

if TYPE_CHECKING:
    from .synthesis_result import SectionReport

__all__ = ["CEILING_ALLOWANCE_DB", "IdealResponse", "ErrorLimits", "ErrorCheck", "reference_gain2",
           "error_checks", "stop_grid", "starting_mask"]

signal = LazyModule("scipy.signal")  # imported on first use

CEILING_ALLOWANCE_DB = 0.5            # dB above the ideal passband peak for the starting passband ceiling


@dataclass(frozen=True)
class IdealResponse:
    """The ideal target from ``scipy.signal`` (zeros, poles in rad/s, gain) and its figures.

    ``ref2``: the passband reference |H|^2 (DC for a low-pass and a band-stop, high
    frequency for a high-pass, the peak for a band-pass). ``passband``: frequencies (Hz)
    of the passband the gain checks use: up to Omega_p = 1/2 of the cutoff (Chebyshev and
    elliptic: the ripple edge), mapped to high-pass, band-pass and band-stop (both sides)
    like the poles. ``stop``: (first, last) frequency (Hz) of the stopband an elliptic or
    inverse Chebyshev response guarantees (``stopband_db`` below the passband's peak),
    None for the others; ``stop_db`` that level relative to ``ref2`` (dB).
    """

    z: np.ndarray
    p: np.ndarray
    k: float
    kind: str
    cutoff_db: float
    f: np.ndarray
    passband: np.ndarray
    ref2: float
    stop: tuple[float, float] | None = None
    stop_db: float | None = None

    @classmethod
    def of(cls, response: str, order: int, fc: float, kind: str, bw: float | None,
           ripple_db: float | None, cutoff_db: float, analysis: Any,
           stopband_db: float | None = None) -> "IdealResponse":
        z, p, k = target_zpk(response, order, fc, kind, bw, ripple_db, stopband_db)
        omega_p = passband_edge(response, order, ripple_db, stopband_db)
        f = np.geomspace(analysis.f_start, analysis.f_stop, 8001)
        f0, f1 = float(analysis.f_start), float(analysis.f_stop)
        if kind == "lowpass":
            passband = np.geomspace(f0, omega_p * fc, 400)
        elif kind == "highpass":
            passband = np.geomspace(fc / omega_p, f1, 400)
        elif kind == "bandstop":
            assert bw is not None
            lo, hi = omega_edges(fc, bw, 1 / omega_p)
            passband = np.concatenate([np.geomspace(f0, lo, 200), np.geomspace(hi, f1, 200)])
        else:
            assert bw is not None
            passband = np.geomspace(*omega_edges(fc, bw, omega_p), 400)
        self = cls(np.asarray(z), np.asarray(p), float(k), kind, cutoff_db, f, passband, 1.0)
        if kind in ("lowpass", "bandstop"):
            ref2 = float(self.g2(np.array([0.0]))[0])
        elif kind == "highpass":
            ref2 = float(k) ** 2
        else:
            ref2 = peak_gain2(self.g2, f, self.g2(f))
        stop, stop_db = None, None
        if stopband_db is not None:
            omega_s = stopband_edge(response, order, ripple_db, stopband_db)
            stop = {"lowpass": (omega_s * fc, f1), "highpass": (f0, fc / omega_s)}.get(kind) \
                or omega_edges(fc, bw, 1 / omega_s)  # type: ignore[arg-type]
            peak2 = float(np.max(self.g2(passband)))
            stop_db = 10 * math.log10(peak2 / ref2) - stopband_db
        return replace(self, ref2=ref2, stop=stop, stop_db=stop_db)

    def g2(self, f_hz: np.ndarray) -> np.ndarray:
        """|H|^2 at ``f_hz`` (Hz) by ``scipy.signal.freqs_zpk``."""
        _, h = signal.freqs_zpk(self.z, self.p, self.k, worN=TWO_PI * np.atleast_1d(f_hz))
        return np.abs(h) ** 2

    def cutoff(self) -> tuple[float, float | None]:
        """(cutoff, None) or band-pass and band-stop (centre, bandwidth) in Hz at ``cutoff_db``."""
        grid = self.g2(self.f)
        level = self.ref2 * 10 ** (-self.cutoff_db / 10)
        crossings = stop_edges if self.kind == "bandstop" else level_crossings
        lower, upper = crossings(self.g2, self.f, grid, level)
        if self.kind == "lowpass":
            return upper, None
        if self.kind == "highpass":
            return lower, None
        return math.sqrt(lower * upper), upper - lower


def reference_gain2(design: Design, kind: str, g2: Callable[[np.ndarray], np.ndarray]) -> float:
    """The passband reference |H|^2 of ``design`` (``g2`` its |H|^2 at Hz): the peak for a
    band-pass, the DC gain for a band-stop, else the analysis' reference gain (DC or high
    frequency).

    Parameters
    ----------
    design : Design
        The design.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    g2 : callable
        ``g2(f_hz)`` -> |H|^2 (no unit) of the design at frequencies in Hz, any shape.

    Returns
    -------
    float
        |H|^2 (no unit).
    """
    if kind == "bandstop":
        return float(g2(np.array([0.0]))[0])
    if kind == "bandpass":
        f = np.geomspace(design.analysis.f_start, design.analysis.f_stop, 8001)
        return peak_gain2(g2, f, g2(f))
    return 10 ** (float(prepare(design.with_mask(())).nominal.metrics["reference_db"]) / 10)


def error_checks(design: Design, ideal: IdealResponse, sections: Sequence[SectionReport],
                 limits: ErrorLimits, exact: Design | None = None) -> tuple[ErrorCheck, ...]:
    """Every figure of ``design`` (nominal, ideal op-amps, the project's engine) against
    ``ideal`` (``scipy.signal``): cutoff or centre and bandwidth, each section's f0 and Q
    (against the scipy poles), the largest passband difference after both are referred
    to their own reference ("passband shape"), and the ripple (largest minus smallest gain
    over the passband). Low-pass and high-pass with ``exact`` (the same sections with exact
    resistors): also the passband reference gain against the sections' designed gain
    (scipy's prototype gain is a normalization: an even-order Chebyshev starts at -ripple).
    A band-pass's level is set by its sections' gains and is not checked. Notch sections:
    each one's notch frequency against the scipy zeros ("fz"). Elliptic and inverse
    Chebyshev: the highest gain over the guaranteed stopband against the level it
    guarantees ("stopband"; the built design may lie below it, only a rise counts).

    Parameters
    ----------
    design : Design
        The snapped design.
    ideal : IdealResponse
        The ideal target.
    sections : sequence of SectionReport
        The design's sections with their ideal f0 (Hz) and Q.
    limits : ErrorLimits
        Limits each figure is held to (fractions, dB).
    exact : Design, optional
        The design before snapping, checked the same way when given.

    Returns
    -------
    tuple[ErrorCheck, ...]
        One check per figure: ideal and actual values, the error and its limit.
    """
    out: list[ErrorCheck] = []
    c_ideal, b_ideal = ideal.cutoff()
    c_act, b_act = measure_cutoff(design)
    what = "centre" if ideal.kind in ("bandpass", "bandstop") else "cutoff"
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
        if s.target_fz_hz is not None and s.snapped_fz_hz is not None:
            out.append(ErrorCheck(f"{short} fz", s.target_fz_hz, s.snapped_fz_hz,
                                  s.snapped_fz_hz / s.target_fz_hz - 1, limits.cutoff, "%", "Hz"))
    g2 = nominal_gain2(design)
    ref2 = reference_gain2(design, ideal.kind, g2)
    ours = 10 * np.log10(np.maximum(g2(ideal.passband), 1e-300) / ref2)
    theirs = 10 * np.log10(np.maximum(ideal.g2(ideal.passband), 1e-300) / ideal.ref2)
    if exact is not None and ideal.kind != "bandpass":  # the sections' designed gain, not scipy's
        a_db = 10 * math.log10(ref2)
        e_db = 10 * math.log10(reference_gain2(exact, ideal.kind, nominal_gain2(exact)))
        out.append(ErrorCheck("passband gain", e_db, a_db, a_db - e_db, limits.gain_db, "dB"))
    worst = int(np.argmax(np.abs(ours - theirs)))
    out.append(ErrorCheck("passband shape", float(theirs[worst]), float(ours[worst]),
                          float(ours[worst] - theirs[worst]), limits.gain_db, "dB"))
    r_ours, r_ideal = float(np.ptp(ours)), float(np.ptp(theirs))
    out.append(ErrorCheck("passband ripple", r_ideal, r_ours, r_ours - r_ideal, limits.gain_db, "dB"))
    if ideal.stop is not None and ideal.stop_db is not None:
        worst = float(np.max(10 * np.log10(np.maximum(g2(stop_grid(ideal.stop)), 1e-300) / ref2)))
        out.append(ErrorCheck("stopband", ideal.stop_db, worst, max(0.0, worst - ideal.stop_db), limits.gain_db,
                              "dB"))
    return tuple(out)


def stop_grid(stop: tuple[float, float]) -> np.ndarray:
    """Frequencies (Hz) the stopband checks look at: 2001 log-spaced points over ``stop``
    (the gain's highest points lie between the zeros, where it changes slowly).

    Parameters
    ----------
    stop : tuple of float
        (first, last) stopband frequency in Hz.

    Returns
    -------
    np.ndarray
        (2001,) float frequencies in Hz.
    """
    return np.geomspace(stop[0], stop[1], 2001)


def starting_mask(ideal: IdealResponse, kind: str, ripple_db: float | None,
                   fc: float, bw: float | None) -> tuple:
    """Spans implied by the ideal response (relative to the passband reference, dB):

    - passband floor over Omega <= 1/2: -1 dB (Chebyshev -(ripple + 0.5)), lower if the
      ideal response dips below (its minimum - 0.5, rounded down to 0.5 dB);
    - passband ceiling up to the cutoff (band-pass: between the band edges): the ideal
      response's maximum there + :data:`CEILING_ALLOWANCE_DB`, rounded up to 0.1 dB
      (a Chebyshev ripple peak above the reference shows here);
    - stopband ceiling from Omega >= 4 to the range's end: the ideal response there +
      6 dB, rounded to 1 dB;
    - elliptic and inverse Chebyshev: instead, the stopband the response guarantees
      (``ideal.stop``, from the stopband edge on) at the level it guarantees
      (``stopband_db`` below the passband's peak, rounded up to 0.1 dB);
    - band-stop: a passband floor and a passband ceiling on each side (``low``, ``high``)
      and the stopband ceiling between the frequencies where the prototype is at
      Omega = 4 (or the guaranteed stopband).

    Parameters
    ----------
    ideal : IdealResponse
        The ideal target.
    kind : str
        ``"lowpass"``, ``"highpass"``, ``"bandpass"`` or ``"bandstop"``.
    ripple_db : float or None
        Passband ripple in dB (Chebyshev, elliptic).
    fc : float
        Cutoff or centre in Hz.
    bw : float or None
        Bandwidth in Hz (band-pass, band-stop).

    Returns
    -------
    tuple
        The spans (:class:`~tolspread.mask.Span`), limits in dB relative to the passband
        reference.
    """
    f_start, f_stop = float(ideal.f[0]), float(ideal.f[-1])
    base = -(ripple_db + 0.5) if ripple_db is not None else -1.0
    tops = None
    if kind == "lowpass":
        passband, top = [(f_start, 0.5 * fc)], (f_start, fc)
        stops = [(4 * fc, f_stop)]
    elif kind == "highpass":
        passband, top = [(2 * fc, f_stop)], (fc, f_stop)
        stops = [(f_start, fc / 4)]
    elif kind == "bandstop":
        assert bw is not None
        (lo2, hi2), (lo1, hi1) = omega_edges(fc, bw, 2.0), omega_edges(fc, bw, 1.0)
        passband, tops = [(f_start, lo2), (hi2, f_stop)], [(f_start, lo1), (hi1, f_stop)]
        top = (f_start, f_stop)
        stops = [omega_edges(fc, bw, 0.25)]
    else:
        assert bw is not None
        passband, top = [omega_edges(fc, bw, 0.5)], omega_edges(fc, bw, 1.0)
        lo4, hi4 = omega_edges(fc, bw, 4.0)
        stops = [(f_start, lo4), (hi4, f_stop)]

    def rel_db(f1: float, f2: float) -> np.ndarray:
        return 10 * np.log10(np.maximum(ideal.g2(np.geomspace(f1, f2, 400)), 1e-300) / ideal.ref2)

    def side(j: int, count: int) -> str:
        return "" if count == 1 else (" low", " high")[j]

    spans = []
    for j, (f1, f2) in enumerate(passband):
        worst = float(np.min(rel_db(f1, f2)))
        limit = min(base, math.floor(2 * (worst - 0.5)) / 2)
        spans.append(Span("floor", f1, f2, limit, relative=True, name="passband floor" + side(j, len(passband))))
    for j, (f1, f2) in enumerate(tops or [top]):
        peak = float(np.max(rel_db(f1, f2)))
        spans.append(Span("ceiling", f1, f2, math.ceil(10 * (peak + CEILING_ALLOWANCE_DB) - 1e-6) / 10,
                          relative=True, name="passband ceiling" + side(j, len(tops or [top]))))
    if ideal.stop is not None and ideal.stop_db is not None:
        spans.append(Span("ceiling", ideal.stop[0], ideal.stop[1], math.ceil(10 * ideal.stop_db - 1e-6) / 10,
                          relative=True, name="stopband ceiling"))
        return tuple(spans)
    for j, (f1, f2) in enumerate(stops):
        if not f1 < f2:
            continue
        worst = float(np.max(rel_db(f1, f2)))
        spans.append(Span("ceiling", f1, f2, float(round(worst + 6)), relative=True,
                          name="stopband ceiling" + side(j, len(stops))))
    return tuple(spans)


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

