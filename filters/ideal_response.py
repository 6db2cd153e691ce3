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
from .nominal_measure import level_crossings, measure_cutoff, nominal_gain2, peak_gain2
from .prototypes import TWO_PI, cheby_omega_c, omega_edges, target_zpk

if TYPE_CHECKING:
    from .synthesis_result import SectionReport

__all__ = ["CEILING_ALLOWANCE_DB", "IdealResponse", "ErrorLimits", "ErrorCheck", "reference_gain2",
           "error_checks", "starting_mask"]

signal = LazyModule("scipy.signal")  # imported on first use

CEILING_ALLOWANCE_DB = 0.5            # dB above the ideal passband peak for the starting passband ceiling


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
        omega_p = 1 / cheby_omega_c(order, ripple_db) if ripple_db is not None else 0.5
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
            ref2 = peak_gain2(self.g2, f, self.g2(f))
        return replace(self, ref2=ref2)

    def g2(self, f_hz: np.ndarray) -> np.ndarray:
        """|H|^2 at ``f_hz`` (Hz) by ``scipy.signal.freqs_zpk``."""
        _, h = signal.freqs_zpk(self.z, self.p, self.k, worN=TWO_PI * np.atleast_1d(f_hz))
        return np.abs(h) ** 2

    def cutoff(self) -> tuple[float, float | None]:
        """(cutoff, None) or band-pass (centre, bandwidth) in Hz at ``cutoff_db``."""
        grid = self.g2(self.f)
        lower, upper = level_crossings(self.g2, self.f, grid, self.ref2 * 10 ** (-self.cutoff_db / 10))
        if self.kind == "lowpass":
            return upper, None
        if self.kind == "highpass":
            return lower, None
        return math.sqrt(lower * upper), upper - lower

def reference_gain2(design: Design, kind: str, g2: Callable[[np.ndarray], np.ndarray]) -> float:
    """The passband reference |H|^2 of ``design`` (``g2`` its |H|^2 at Hz): the peak for a
    band-pass, else the analysis' reference gain (DC or high frequency)."""
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
    return tuple(out)


def starting_mask(ideal: IdealResponse, kind: str, ripple_db: float | None,
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

