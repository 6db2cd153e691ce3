"""Op-amp gain-bandwidth check: how far a single-pole op-amp (A = 2 pi GBW / s) moves each
active stage's f0 and Q, and whether its gain-bandwidth meets the rule GBW >= 100 G Q f0
(tests/REFERENCES.md section 7).

:func:`opamp_shift_table` gives one :class:`GbwWarning` row per active stage;
:func:`gbw_warnings` the rows of stages that have an op-amp part. Used by the analysis,
the report, the window and synthesis. Units: frequencies and GBW in Hz.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .design import Design, Part, Stage
from .engine import dc_gain2, gain2_at, hf_gain2
from .metrics import pole_pairs
from .nominal_measure import nominal_coeffs
from .prototypes import TWO_PI

__all__ = ["GbwWarning", "opamp_shift_table", "gbw_warnings"]


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
    """Stage ``k`` alone: with ideal op-amps, and with ``gbw_hz`` on every op-amp role (U1;
    a notch section's U1, U2 and U3), or None."""
    st = design.stages[k]
    parts = {p.ref: p for p in design.parts}
    amps = st.built().optional_roles
    ideal_roles = {r: ref for r, ref in st.roles.items() if r not in amps}
    ideal = Design(tuple(parts[ref] for ref in ideal_roles.values()),
                   (Stage(st.topology, ideal_roles, dict(st.options), st.name),), design.analysis)
    if gbw_hz is None:
        return ideal, None
    amp = Part("U?", "opamp", gbw_hz, "EXACT")
    roles = dict(ideal_roles, **{r: amp.ref for r in amps})
    real = Design(ideal.parts + (amp,), (Stage(st.topology, roles, dict(st.options), st.name),),
                  design.analysis)
    return ideal, real


def opamp_shift_table(design: Design, gbw_hz: float | None = None) -> list[GbwWarning]:
    """For every active second-order stage: ideal f0/Q, f0/Q with a single-pole op-amp,
    their relative shifts, the GBW the rule asks for, and whether the op-amp's is too low.

    The op-amp's GBW (Hz) is the value of the part on the stage's role U1 (a stage with
    several op-amps, the notch section, is checked with it on every op-amp), else
    ``gbw_hz`` (a what-if for stages without op-amp parts), else the GBW fields are None.
    Rule (tests/REFERENCES.md section 7, after Op Amps for Everyone ch. 16): open-loop gain at
    f0 at least 40 dB above the stage's peak gain, i.e. GBW >= 100 G Q f0 with G the
    stage's passband gain (see :class:`GbwWarning`). Passive stages and circuit stages are
    left out.

    Parameters
    ----------
    design : Design
        The design.
    gbw_hz : float, optional
        Op-amp gain-bandwidth in Hz for stages without an op-amp part.

    Returns
    -------
    list[GbwWarning]
        One row per active second-order stage (f0 in Hz, Q, shifts as fractions, GBW in Hz).
    """
    values = {p.ref: p.value for p in design.parts}
    rows: list[GbwWarning] = []
    for k, st in enumerate(design.stages):
        if st.topology == "circuit":  # a circuit's op-amps sit anywhere in its network: no f0/Q rule
            continue
        topo = st.built()
        if "U1" not in topo.optional_roles:
            continue
        gbw = values[st.roles["U1"]] if "U1" in st.roles else gbw_hz
        ideal, real = _stage_design(design, k, gbw)
        circuit, coeffs = nominal_coeffs(ideal)
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
        _, rc = nominal_coeffs(real)
        w0r, qr = _dominant_pair(rc[0].den[0], rc[0].w_ref)
        f0r = w0r / TWO_PI
        rows.append(GbwWarning(name, st.topology, f0, q, g, peak, required, float(gbw), f0r, qr,
                               f0r / f0 - 1, qr / q - 1, bool(gbw < required)))
    return rows


def gbw_warnings(design: Design) -> list[GbwWarning]:
    """:func:`opamp_shift_table` for the stages that have an op-amp part (role U1).

    Every row carries ``too_low``; ``[w for w in gbw_warnings(d) if w.too_low]`` are the
    stages whose op-amp is too slow by the rule GBW >= 100 G Q f0.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[GbwWarning]
        One row per stage with an op-amp part.
    """
    return [r for r in opamp_shift_table(design) if r.gbw_hz is not None]
