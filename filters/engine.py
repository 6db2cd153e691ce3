"""The engine: a design's stages compiled to transfer functions, evaluated for every sample.

Shapes: part values ``(samples, parts)`` in ohm, F, H (op-amps: gain-bandwidth in Hz);
coefficients ``(samples, degree + 1)`` in ascending powers of s; responses
``(samples, freqs)``. Stages are buffered, so the design's H(s) is the product of the
stages' H(s); each stage is evaluated on its own with its frequency scaled to order 1,
which keeps wide frequency ranges and extreme part values accurate.

Frequency responses use real arithmetic only: p(jw) splits into an even part (real) and
an odd part (imaginary), each a real polynomial in w^2. Gains are compared as linear
power gains |H|^2; decibels are taken only for what is shown.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np

from .design import Design
from .errors import InputError
from .netlist import TransferFunction, derive
from .topologies import ResponseKind, Topology

TWO_PI = 2 * math.pi


@dataclass(frozen=True)
class CompiledStage:
    """A stage ready to evaluate: its transfer function and, per role, the part column."""

    name: str
    topology: Topology
    tf: TransferFunction
    columns: tuple[int, ...]  # part column of each of tf.roles

    @property
    def simple_phase(self) -> bool:
        """True when the phase needs no unwrapping (degree 1 or 2, monomial numerator)."""
        nz = [e for e in self.tf.num_expr if e != 0]
        return 1 <= self.tf.den_degree <= 2 and len(nz) == 1

    @property
    def num_power(self) -> int:
        """k of a monomial numerator c*s^k."""
        return max(i for i, e in enumerate(self.tf.num_expr) if e != 0)


@dataclass(frozen=True)
class Circuit:
    """A compiled design: stages in signal order, and the response kind of the whole."""

    stages: tuple[CompiledStage, ...]
    kind: ResponseKind
    refs: tuple[str, ...]


_COMPILED: dict[tuple, Circuit] = {}


def _structure_key(design: Design) -> tuple:
    stages = tuple((s.topology, tuple(sorted(s.options.items())), tuple(sorted(s.roles.items())), s.name)
                   for s in design.stages)
    return stages, tuple(p.ref for p in design.parts)


def compile_design(design: Design) -> Circuit:
    """Compile (and cache by structure) the design's stages into a :class:`Circuit`."""
    key = _structure_key(design)
    hit = _COMPILED.get(key)
    if hit is not None:
        return hit
    refs = tuple(p.ref for p in design.parts)
    col = {r: i for i, r in enumerate(refs)}
    stages = []
    for i, st in enumerate(design.stages):
        topo = st.built()
        present = {r for r in topo.optional_roles if r in st.roles}
        tf = derive(topo.with_opamps(present))
        try:
            cols = tuple(col[st.roles[r]] for r in tf.roles)
        except KeyError as exc:
            raise InputError(f"role {exc.args[0]} has no part", f"stages[{i}].parts") from None
        stages.append(CompiledStage(st.name or f"stage {i + 1}", topo, tf, cols))
    kinds = {s.topology.kind for s in stages}
    kind: ResponseKind
    if len(kinds) == 1:
        kind = kinds.pop()
    elif kinds == {"lowpass", "highpass"} or "bandpass" in kinds:
        kind = "bandpass"
    else:  # pragma: no cover - the three kinds above cover every mix
        kind = "bandpass"
    circuit = Circuit(tuple(stages), kind, refs)
    if len(_COMPILED) > 64:
        _COMPILED.clear()
    _COMPILED[key] = circuit
    return circuit


@dataclass(frozen=True)
class StageCoefficients:
    """One stage's H(s) = N(s)/D(s) for every sample, scaled to s' = s / w_ref.

    ``num`` and ``den``: (samples, degree + 1), ascending powers of s'; ``w_ref`` in rad/s
    (one number for the whole batch). The scaled polynomials describe the same H.
    """

    num: np.ndarray
    den: np.ndarray
    w_ref: float

    def unscaled(self) -> tuple[np.ndarray, np.ndarray]:
        """(num, den) in ascending powers of s itself (rad/s)."""
        k_n = self.w_ref ** -np.arange(self.num.shape[1])
        k_d = self.w_ref ** -np.arange(self.den.shape[1])
        return self.num * k_n, self.den * k_d


def stage_coefficients(circuit: Circuit, values: np.ndarray,
                       w_refs: tuple[float, ...] | None = None) -> list[StageCoefficients]:
    """Coefficients of every stage for part values ``values`` (samples, parts).

    ``w_refs`` fixes each stage's frequency scale (rad/s); by default it is the median
    natural frequency of the batch. Fixing it (to the nominal design's, as evaluations do)
    makes every sample's numbers independent of the batch it is computed in.
    """
    out = []
    for k, st in enumerate(circuit.stages):
        args = {role: values[:, c] for role, c in zip(st.tf.roles, st.columns)}
        num = st.tf.numerator(args)
        den = st.tf.denominator(args)
        n = den.shape[1] - 1
        w_ref = 1.0
        if w_refs is not None:
            w_ref = w_refs[k]
        elif n >= 1:
            ratio = np.abs(den[:, 0] / den[:, n])
            ratio = ratio[np.isfinite(ratio) & (ratio > 0)]
            if ratio.size:
                w_ref = float(np.median(ratio) ** (1.0 / n))
        num = num * w_ref ** np.arange(num.shape[1])
        den = den * w_ref ** np.arange(den.shape[1])
        norm = np.max(np.abs(den), axis=1, keepdims=True)
        norm[norm == 0] = 1.0
        out.append(StageCoefficients(num / norm, den / norm, w_ref))
    return out


def _signed_parts(c: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Even and odd coefficient columns with the alternating signs of j^k folded in."""
    even = c[:, 0::2].copy()
    even[:, 1::2] *= -1
    odd = c[:, 1::2].copy()
    odd[:, 1::2] *= -1
    return even, odd


def _horner(coef: np.ndarray, xx: np.ndarray) -> np.ndarray:
    """sum_m coef[:, m] * xx^m, with coef (S, M) and xx broadcasting against (S, 1)."""
    acc = coef[:, -1:]
    for m in range(coef.shape[1] - 2, -1, -1):
        acc = acc * xx
        acc += coef[:, m:m + 1]
    return acc


def poly_jw(c: np.ndarray, x: np.ndarray, xx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Real and imaginary parts of p(jx) for coefficients ``c`` (S, K), ascending.

    ``x`` and ``xx = x**2`` broadcast against (S, 1): a grid (F,) or per-sample (S, k).
    """
    even, odd = _signed_parts(c)
    re = _horner(even, xx) if even.shape[1] else np.zeros((c.shape[0], 1))
    im = _horner(odd, xx) * x if odd.shape[1] else np.zeros((c.shape[0], 1))
    return re, im


def _derivative(c: np.ndarray) -> np.ndarray:
    if c.shape[1] == 1:
        return np.zeros_like(c)
    return c[:, 1:] * np.arange(1, c.shape[1])


PhaseMode = Literal["none", "phase"]


@dataclass(frozen=True)
class Response:
    """Responses on ``freqs_hz`` (F,): ``gain2`` = |H|^2 (S, F); ``phase_deg`` continuous
    across frequency (S, F) or None; ``delay_s`` group delay (S, F) or None."""

    freqs_hz: np.ndarray
    gain2: np.ndarray
    phase_deg: np.ndarray | None
    delay_s: np.ndarray | None

    @property
    def gain_db(self) -> np.ndarray:
        """Gain in dB (S, F)."""
        return 10.0 * np.log10(np.maximum(self.gain2, 1e-300))


def _unwrap(ph: np.ndarray) -> np.ndarray:
    """Remove 2*pi jumps along the frequency axis (cheaper than numpy.unwrap)."""
    if ph.shape[1] < 2:
        return ph
    jumps = np.rint(np.diff(ph, axis=1) * (1 / TWO_PI))
    if not jumps.any():
        return ph
    ph[:, 1:] -= TWO_PI * np.cumsum(jumps, axis=1)
    return ph


BLOCK_ROWS = 512  # samples per block: measured best here with two threads (fewer calls holding the GIL)


def frequency_response(circuit: Circuit, coeffs: list[StageCoefficients], freqs_hz: np.ndarray,
                       *, phase: bool = True, delay: bool = False, out_gain2: np.ndarray | None = None,
                       out_phase: np.ndarray | None = None, out_delay: np.ndarray | None = None) -> Response:
    """|H|^2, phase and group delay of every sample on the frequency grid ``freqs_hz``.

    Works through the samples in blocks of :data:`BLOCK_ROWS` rows (not one sample at a
    time), writing each block's results straight into the output arrays; a block's
    temporaries stay in the CPU cache. ``out_*`` are optional arrays (S, F) to write into.
    """
    s = coeffs[0].num.shape[0]
    f = np.asarray(freqs_hz, dtype=float)
    gain2 = np.empty((s, f.size)) if out_gain2 is None else out_gain2
    ph = (np.empty((s, f.size)) if out_phase is None else out_phase) if phase else None
    tau = (np.empty((s, f.size)) if out_delay is None else out_delay) if delay else None
    for lo in range(0, s, BLOCK_ROWS):
        hi = min(s, lo + BLOCK_ROWS)
        sub = coeffs if (lo == 0 and hi == s) else [
            StageCoefficients(c.num[lo:hi], c.den[lo:hi], c.w_ref) for c in coeffs]
        _response_block(circuit, sub, f, gain2[lo:hi], None if ph is None else ph[lo:hi],
                        None if tau is None else tau[lo:hi])
    return Response(f, gain2, ph, tau)


def _response_block(circuit: Circuit, coeffs: list[StageCoefficients], freqs_hz: np.ndarray,
                    gain2: np.ndarray, ph: np.ndarray | None, tau: np.ndarray | None) -> None:
    """:func:`frequency_response` for one block of samples, into ``gain2``, ``ph`` (deg)
    and ``tau`` (s), each shaped (block samples, F).

    Stages of degree <= 2 with a monomial numerator c*s^k (every Sallen-Key and
    multiple-feedback section, first-order sections) take a lean path: |N|^2 = c^2 w^2k,
    the phase is k*90 deg (+180 if c < 0) minus the denominator's angle, which lies in
    (0, 180) deg, so nothing needs unwrapping. Other stages are evaluated in general.
    """
    w = TWO_PI * freqs_hz
    s = coeffs[0].num.shape[0]
    shape = (s, w.size)
    den_prod = None             # product of |D|^2 over lean stages, (S, F)
    num_gain = np.ones((s, 1))  # product of c^2 over lean stages, (S, 1)
    general = None              # product of |N/D|^2 over general stages
    offset = np.zeros((s, 1))   # constant phase of lean numerators, rad
    phase_started = False
    if tau is not None:
        tau[...] = 0.0
    a_buf = np.empty(shape)
    b_buf = np.empty(shape)
    c_buf = np.empty(shape) if ph is not None else None
    for st, sc in zip(circuit.stages, coeffs):
        x = w / sc.w_ref
        xx = x * x
        if st.simple_phase:
            k = st.num_power
            c = sc.num[:, k:k + 1]
            d = sc.den
            n = d.shape[1] - 1
            # real and imaginary parts of D(jx) into a_buf, b_buf
            if n == 2:
                np.multiply(d[:, 2:3], xx, out=a_buf)
                np.subtract(d[:, 0:1], a_buf, out=a_buf)
            else:
                a_buf[...] = d[:, 0:1]
            np.multiply(d[:, 1:2], x, out=b_buf)
            if tau is not None:
                # tau = Re(D'/D)/w_ref - Re(N'/N)/w_ref; Re(N'/N) = 0 for a monomial
                dr1 = d[:, 1:2]
                di1 = 2 * d[:, 2:3] * x if n == 2 else 0.0
                t = (dr1 * a_buf + di1 * b_buf) / (a_buf * a_buf + b_buf * b_buf)
                tau += t / sc.w_ref
            if ph is not None:
                if not phase_started:  # the first stage writes the phase directly
                    np.arctan2(b_buf, a_buf, out=ph)
                    np.negative(ph, out=ph)
                    phase_started = True
                else:
                    np.arctan2(b_buf, a_buf, out=c_buf)
                    ph -= c_buf
                offset += k * (math.pi / 2) + math.pi * (c < 0)
            np.multiply(a_buf, a_buf, out=a_buf)
            np.multiply(b_buf, b_buf, out=b_buf)
            a_buf += b_buf
            if den_prod is None:  # keep this buffer as the product; take a fresh one
                den_prod, a_buf = a_buf, np.empty(shape)
            else:
                den_prod *= a_buf
            num_gain = num_gain * (c * c)
            if k:
                general_k = xx ** k
                general = general_k if general is None else general * general_k
            continue
        nr, ni = poly_jw(sc.num, x, xx)
        dr, di = poly_jw(sc.den, x, xx)
        d2 = dr * dr + di * di
        n2 = nr * nr + ni * ni
        if tau is not None:
            ddr, ddi = poly_jw(_derivative(sc.den), x, xx)
            t = (ddr * dr + ddi * di) / d2
            if np.count_nonzero(np.any(sc.num != 0, axis=0)) > 1:
                ndr, ndi = poly_jw(_derivative(sc.num), x, xx)
                t = t - (ndr * nr + ndi * ni) / np.maximum(n2, 1e-300)
            tau += t / sc.w_ref
        if ph is not None:
            p = _unwrap(np.arctan2(ni * dr - nr * di, nr * dr + ni * di))
            if phase_started:
                ph += p
            else:
                ph[...] = p
                phase_started = True
        g = n2 / d2
        general = g if general is None else general * g
    if den_prod is not None:
        np.divide(num_gain, den_prod, out=gain2)
        if general is not None:
            gain2 *= general
    else:
        gain2[...] = np.broadcast_to(general, shape)
    if ph is not None:
        ph += offset
        ph *= 180 / math.pi


def gain2_at(coeffs: list[StageCoefficients], f_hz: np.ndarray) -> np.ndarray:
    """|H|^2 at per-sample frequencies ``f_hz`` shaped (S,) or (S, k) (exact, no grid)."""
    f = np.asarray(f_hz, dtype=float)
    col = f.ndim == 1
    w = TWO_PI * (f[:, None] if col else f)
    g = None
    for sc in coeffs:
        x = w / sc.w_ref
        xx = x * x
        nr, ni = poly_jw(sc.num, x, xx)
        dr, di = poly_jw(sc.den, x, xx)
        gs = (nr * nr + ni * ni) / (dr * dr + di * di)
        g = gs if g is None else g * gs
    assert g is not None
    g = np.broadcast_to(g, w.shape)
    return g[:, 0] if col else g


def dc_gain2(coeffs: list[StageCoefficients]) -> np.ndarray:
    """|H(0)|^2 per sample (S,); 0 where a stage blocks DC."""
    g = None
    for sc in coeffs:
        gs = (sc.num[:, 0] / sc.den[:, 0]) ** 2
        g = gs if g is None else g * gs
    assert g is not None
    return g


def hf_gain2(coeffs: list[StageCoefficients]) -> np.ndarray:
    """|H(s)|^2 as s -> infinity per sample (S,); 0 where a stage rolls off."""
    g = None
    for sc in coeffs:
        n_deg, d_deg = sc.num.shape[1] - 1, sc.den.shape[1] - 1
        gs = (sc.num[:, -1] / sc.den[:, -1]) ** 2 if n_deg == d_deg else np.zeros(sc.num.shape[0])
        g = gs if g is None else g * gs
    assert g is not None
    return g
