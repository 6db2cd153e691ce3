"""What synthesis returns: the design, every section's f0 and Q before and after snapping,
the op-amp check and the error checks, with the texts the command line and the dialog show.

Units: frequencies in Hz, errors relative (0.01 = 1 %) or in dB where the check says so.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Sequence

import numpy as np

from .design import Design
from .ideal_response import CEILING_ALLOWANCE_DB, ErrorCheck, ErrorLimits
from .nominal_measure import nominal_gain2
from .opamp_check import GbwWarning
from .values import format_value

__all__ = ["KIND_LABEL", "SectionReport", "SynthesisResult", "opamp_table_text", "hz_text", "q_text",
           "pct_text"]

KIND_LABEL = {"lowpass": "low-pass", "highpass": "high-pass", "bandpass": "band-pass", "bandstop": "band-stop"}


@dataclass(frozen=True)
class SectionReport:
    """One stage: target, exact (resistors as solved) and snapped f0 (Hz) and Q.

    ``q`` fields are None for a first-order stage (its f0 is the -3 dB corner).
    ``*_fz_hz``: a notch section's notch frequency (Hz; None for other stages).
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
    target_fz_hz: float | None = None
    unsnapped_fz_hz: float | None = None
    snapped_fz_hz: float | None = None

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
    stopband_db: float | None = None

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
        return (f"WARNING: the built design strays from the ideal {KIND_LABEL[self.kind]} response beyond "
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
                f"  {s.stage:<34} {hz_text(s.target_f0_hz):>11} {q_text(s.target_q):>7}   "
                f"{hz_text(s.unsnapped_f0_hz):>11} {q_text(s.unsnapped_q):>7}   "
                f"{hz_text(s.snapped_f0_hz):>11} {q_text(s.snapped_q):>7}   "
                f"{pct_text(s.f0_error):>8} {pct_text(s.q_error):>8}")
        for s in self.sections:
            if s.target_fz_hz is not None:
                lines.append(f"  {s.stage.split(' ')[0]} notch: target {hz_text(s.target_fz_hz)}, exact "
                             f"{hz_text(s.unsnapped_fz_hz)}, snapped {hz_text(s.snapped_fz_hz)} "
                             f"({pct_text(None if s.snapped_fz_hz is None else s.snapped_fz_hz / s.target_fz_hz - 1)})")
        lines.append("")
        what = "centre" if self.kind in ("bandpass", "bandstop") else "cutoff"
        level = (f"geometric mean of the band edges {self.cutoff_db:.2f} dB below the peak"
                 if self.kind == "bandpass" else
                 f"geometric mean of the stop band's edges {self.cutoff_db:.2f} dB below the DC gain"
                 if self.kind == "bandstop" else f"{self.cutoff_db:.2f} dB below the passband gain")
        lines.append(f"{what} ({level}): target "
                     f"{hz_text(self.cutoff_target_hz)}, exact {hz_text(self.cutoff_unsnapped_hz)}, "
                     f"snapped {hz_text(self.cutoff_snapped_hz)} ({pct_text(self.cutoff_error)} from snapping)")
        if self.bandwidth_target_hz is not None:
            lines.append(f"bandwidth: target {hz_text(self.bandwidth_target_hz)}, exact "
                         f"{hz_text(self.bandwidth_unsnapped_hz)}, snapped {hz_text(self.bandwidth_snapped_hz)} "
                         f"({pct_text(self.bandwidth_error)} from snapping)")
        if self.kind == "bandpass":
            lines.extend(self.centre_gain_lines())
        if self.gbw:
            lines.append("")
            lines.append(opamp_table_text(self.gbw))
            if self.cutoff_gbw_hz is not None:
                lines.append(f"{what} with the op-amps' gain-bandwidth: {hz_text(self.cutoff_gbw_hz)} "
                             f"({pct_text(self.cutoff_gbw_hz / self.cutoff_target_hz - 1)} from target)")
        lines.append("")
        lines.append(self.errors_text())
        warning = self.warning_text()
        if warning:
            lines.append("")
            lines.append(warning)
        lines.append("")
        stop = (f"stopband ceiling at the {self.stopband_db:g} dB the response guarantees, from the stopband edge"
                if self.stopband_db is not None else "stopband ceiling 6 dB above it")
        lines.append("The mask is a starting point (passband floor, passband ceiling "
                     f"{CEILING_ALLOWANCE_DB:g} dB above the ideal response, {stop}); edit it to your "
                     "specification.")
        return "\n".join(lines)

    def centre_gain_lines(self) -> list[str]:
        """Band-pass only: the built design's gain at its centre (dB), which its sections'
        own gains set (each at most Q^2), and a plain word when it is far below 0 dB."""
        g2 = float(nominal_gain2(self.design)(np.array([self.cutoff_snapped_hz]))[0])
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
                ideal, built = hz_text(c.ideal), hz_text(c.actual)
            else:
                ideal, built = f"{c.ideal:.4f}", f"{c.actual:.4f}"
            lines.append(f"  {c.what:<18} {ideal:>12} {built:>12} {_err(c):>10} {_lim(c):>9}"
                         + ("  EXCEEDS" if c.exceeded else ""))
        return "\n".join(lines)


def _err(c: ErrorCheck) -> str:
    """A check's error for people: dB or a signed percentage."""
    return f"{c.error:+.2f} dB" if c.unit == "dB" else pct_text(c.error)


def _lim(c: ErrorCheck) -> str:
    """A check's limit for people: dB or a percentage."""
    return f"{c.limit:g} dB" if c.unit == "dB" else f"{100 * c.limit:g}%"


def hz_text(x: float | None) -> str:
    """A frequency (Hz) for people, 5 digits; "n/a" for None or not finite.

    Parameters
    ----------
    x : float or None
        A frequency in Hz.

    Returns
    -------
    str
        The text.
    """
    return "n/a" if x is None or not math.isfinite(x) else format_value(x, "Hz", digits=5)


def q_text(x: float | None) -> str:
    """A Q to 4 decimals; "-" for None (a first-order section).

    Parameters
    ----------
    x : float or None
        A Q (no unit).

    Returns
    -------
    str
        The text.
    """
    return "-" if x is None else f"{x:.4f}"


def pct_text(x: float | None) -> str:
    """A relative change (0.01) as a signed percentage (+1.000%); "-" for None or not finite.

    Parameters
    ----------
    x : float or None
        A relative change (a fraction).

    Returns
    -------
    str
        The text.
    """
    return "-" if x is None or not math.isfinite(x) else f"{100 * x:+.3f}%"




def opamp_table_text(rows: Sequence[GbwWarning]) -> str:
    """The op-amp shift table as text.

    Parameters
    ----------
    rows : sequence of GbwWarning
        From :func:`filters.opamp_check.opamp_shift_table`.

    Returns
    -------
    str
        Text lines, one per stage, with a header.
    """
    out = [f"  {'stage':<34} {'GBW':>10} {'needed':>10} {'ideal f0':>11} {'Q':>7} "
           f"{'with GBW f0':>11} {'Q':>7} {'f0 shift':>9} {'Q shift':>9}"]
    for r in rows:
        flag = "  GBW TOO LOW" if r.too_low else ""
        out.append(f"  {r.stage:<34} {hz_text(r.gbw_hz):>10} {hz_text(r.required_gbw_hz):>10} "
                   f"{hz_text(r.ideal_f0_hz):>11} {r.ideal_q:>7.4f} {hz_text(r.gbw_f0_hz):>11} {q_text(r.gbw_q):>7} "
                   f"{pct_text(r.f0_shift):>9} {pct_text(r.q_shift):>9}{flag}")
    return "\n".join(out)

