"""The engine: a design's stages compiled to transfer functions, evaluated for every sample.

Over 500 lines: the hot path (compile, coefficients, responses in blocks, scratch reuse) kept readable in one place.

Shapes: part values ``(samples, parts)`` in ohm, F, H (op-amps: gain-bandwidth in Hz);
coefficients ``(samples, degree + 1)`` in ascending powers of s; responses
``(samples, freqs)``. Stages are buffered, so the design's H(s) is the product of the
stages' H(s); each stage's coefficients are scaled to a frequency of order 1 (lean
sections are multiplied in pairs at the pair's mean scale), which keeps wide frequency
ranges and extreme part values accurate.

Frequency responses use real arithmetic only: p(jw) splits into an even part (real) and
an odd part (imaginary), each evaluated as a matrix product of coefficients and powers
of the frequency. Responses carry the gain in dB; exact |H|^2 off the grid comes from
:func:`gain2_at`.
"""
from __future__ import annotations

import math
import threading
from dataclasses import dataclass
from typing import Iterator

import numpy as np

from .design import Design
from .errors import InputError
from .circuit_join import combined_kind, solved_stages
from .netlist import TransferFunction
from .topologies import ResponseKind, Topology

__all__ = [
    "TWO_PI",
    "CompiledStage",
    "Circuit",
    "compile_design",
    "StageCoefficients",
    "stage_coefficients",
    "poly_jw",
    "Response",
    "GAIN_DB_LIMIT",
    "PowerResponse",
    "BLOCK_ROWS",
    "BLAS_SOLO_SIZE",
    "SCRATCH_KEPT",
    "take_scratch",
    "give_scratch",
    "frequency_response",
    "response_blocks",
    "ExactGain",
    "gain2_at",
    "dc_gain2",
    "fold_columns",
    "hf_gain2",
]

TWO_PI = 2 * math.pi


@dataclass(frozen=True)
class CompiledStage:
    """A stage ready to evaluate: its transfer function and, per role, the part column."""

    name: str
    topology: Topology
    tf: TransferFunction
    columns: tuple[int, ...]  # part column of each of tf.roles
    number: int = 0  # the design's number (from 1) of its stage (of the first, for loaded stages joined)

    @property
    def simple_phase(self) -> bool:
        """True when the phase needs no unwrapping (degree 1 or 2, monomial numerator)."""
        return 1 <= self.tf.den_degree <= 2 and len(self.tf.num_powers) == 1

    @property
    def solo_phase(self) -> bool:
        """True for a stage of degree 3 or 4 with a monomial numerator (an all-pole circuit
        or ladder): evaluated like a lean group of its own, its phase unwrapped."""
        return 3 <= self.tf.den_degree <= 4 and len(self.tf.num_powers) == 1

    @property
    def num_power(self) -> int:
        """k of a monomial numerator c*s^k."""
        return max(self.tf.num_powers)


@dataclass(frozen=True)
class Circuit:
    """A compiled design: stages in signal order, and the response kind of the whole."""

    stages: tuple[CompiledStage, ...]
    kind: ResponseKind
    refs: tuple[str, ...]


_COMPILED: dict[tuple, Circuit] = {}


def _structure_key(design: Design) -> tuple:
    stages = tuple(s.structure() for s in design.stages)
    return stages, tuple(p.ref for p in design.parts)


def compile_design(design: Design) -> Circuit:
    """Compile (and cache by structure) the design's stages into a :class:`Circuit`.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    Circuit
        Its stages' coefficient programs, part indices and roles.
    """
    key = _structure_key(design)
    hit = _COMPILED.get(key)
    if hit is not None:
        return hit
    refs = tuple(p.ref for p in design.parts)
    col = {r: i for i, r in enumerate(refs)}
    stages = []
    # one network per buffered stage, loaded stages joined (filters/circuit_join.py)
    for i, net in enumerate(solved_stages(design)):
        tf = net.transfer()
        try:
            cols = tuple(col[net.roles[r]] for r in tf.roles)
        except KeyError as exc:
            raise InputError(f"role {exc.args[0]} has no part", f"{net.path}.parts") from None
        stages.append(CompiledStage(net.name or f"stage {i + 1}", net.topology, tf, cols, net.first + 1))
    circuit = Circuit(tuple(stages), combined_kind(s.topology.kind for s in stages), refs)
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

    Parameters
    ----------
    circuit : Circuit
        From :func:`compile_design`.
    values : np.ndarray
        (S, P) part values in SI units (ohm, F, H; an op-amp's gain-bandwidth in Hz).
    w_refs : tuple of float, optional
        Each stage's frequency scale in rad/s.

    Returns
    -------
    list[StageCoefficients]
        One entry per stage: numerator and denominator (S, K), ascending powers of s
        scaled by the stage's frequency scale.
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
        norm = fold_columns(np.maximum, np.abs(den), 0.0)[:, None]  # max(|den|) along each row
        norm[norm == 0] = 1.0
        out.append(StageCoefficients(num / norm, den / norm, w_ref))
    return out


def fold_columns(op: np.ufunc, a: np.ndarray, empty: float | bool) -> np.ndarray:
    """``op`` folded over the few columns of ``a`` (S, R), one column at a time: the numbers
    of ``op.reduce(a, axis=1)`` (the same order: the first column, then each next one),
    without numpy's cost per row for a reduction along a row (about 40-100 ns a row of 4
    here, 5-30 x the work itself).

    Parameters
    ----------
    op : np.ufunc
        A binary ufunc (``np.maximum``, ``np.multiply``, ``np.logical_and``...).
    a : np.ndarray
        (S, R) values.
    empty : float or bool
        The result where R = 0.

    Returns
    -------
    np.ndarray
        (S,) the fold of each row.
    """
    if a.shape[1] == 0:
        return np.full(a.shape[0], empty)
    out = a[:, 0].copy()
    for j in range(1, a.shape[1]):
        op(out, a[:, j], out=out)
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

    Parameters
    ----------
    c : np.ndarray
        (S, K) coefficients, ascending powers.
    x : np.ndarray
        Angular frequencies (rad/s, scaled), (F,) or (S, k).
    xx : np.ndarray
        ``x**2``, the shape of ``x``.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        Real and imaginary parts, (S, F) or (S, k).
    """
    return _jw(_signed_parts(c), x, xx)


def _jw(parts: tuple[np.ndarray, np.ndarray], x: np.ndarray, xx: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`poly_jw` from the signed even and odd coefficients of :func:`_signed_parts`."""
    even, odd = parts
    re = _horner(even, xx) if even.shape[1] else np.zeros((even.shape[0], 1))
    im = _horner(odd, xx) * x if odd.shape[1] else np.zeros((odd.shape[0], 1))
    return re, im


def _derivative(c: np.ndarray) -> np.ndarray:
    if c.shape[1] == 1:
        return np.zeros_like(c)
    return c[:, 1:] * np.arange(1, c.shape[1])


@dataclass(frozen=True)
class Response:
    """Responses on ``freqs_hz`` (F,): ``gain_db`` (S, F), held within +-:data:`GAIN_DB_LIMIT`;
    ``phase_deg`` continuous across frequency (S, F) or None; ``delay_s`` group delay (S, F)
    or None."""

    freqs_hz: np.ndarray
    gain_db: np.ndarray
    phase_deg: np.ndarray | None
    delay_s: np.ndarray | None

    @property
    def gain2(self) -> np.ndarray:
        """|H|^2 (S, F), computed from the gain in dB."""
        return 10.0 ** (self.gain_db / 10.0)


GAIN_DB_LIMIT = 3000.0  # |H|^2 between 1e-300 and 1e300: beyond, a gain is shown as this many dB


@dataclass(frozen=True)
class PowerResponse:
    """A block's responses with the gain still a power ratio, before its logarithm (what
    :func:`response_blocks` yields with ``power=True``): ``power`` (S, F) is |H|^2, or
    1/|H|^2 when ``inverse`` (a design of lean stages only: the product of their
    |P / (C x^K)|^2); ``phase_deg`` and ``delay_s`` as in :class:`Response`. Without phase
    and delay ``power`` is laid out by frequency, (F, S) (``by_frequency``).

    :meth:`gain_db` gives the engine's decibels bit for bit (the same operations in the
    same order), so a judge can take the logarithm of one number per board and span (the
    extreme power over the span: the logarithm is monotonic) instead of every point's.
    """

    freqs_hz: np.ndarray
    power: np.ndarray
    inverse: bool
    phase_deg: np.ndarray | None
    delay_s: np.ndarray | None
    by_frequency: bool = False  # power is (F, S) (the gain alone: no phase, no delay)

    @property
    def boards(self) -> int:
        """The number of boards S."""
        return int(self.power.shape[1] if self.by_frequency else self.power.shape[0])

    def gain_db(self, power: np.ndarray) -> np.ndarray:
        """The gain (dB) of power ratios ``power`` (any shape; this block's kind of power,
        e.g. some of its columns or a per-board extreme), held within +-:data:`GAIN_DB_LIMIT`:
        the engine's own numbers for the same powers, bit for bit.

        Parameters
        ----------
        power : np.ndarray
            Power ratios of this block's kind (|H|^2, or 1/|H|^2 when ``inverse``).

        Returns
        -------
        np.ndarray
            Gain in dB, the shape of ``power``.
        """
        with np.errstate(divide="ignore", over="ignore", invalid="ignore"):
            db = np.log10(power)
            db *= -10.0 if self.inverse else 10.0
        return np.clip(db, -GAIN_DB_LIMIT, GAIN_DB_LIMIT, out=db)


def _unwrap(ph: np.ndarray) -> np.ndarray:
    """Remove 2*pi jumps along the frequency axis (cheaper than numpy.unwrap)."""
    if ph.shape[1] < 2:
        return ph
    jumps = np.rint(np.diff(ph, axis=1) * (1 / TWO_PI))
    if not jumps.any():
        return ph
    ph[:, 1:] -= TWO_PI * np.cumsum(jumps, axis=1)
    return ph


BLOCK_ROWS = 256  # samples per block at most: 128-256 measured 5-15 % faster than 512 here (a
                  # block of 256 x 404 floats, 0.8 MB, stays in a 1 MB L2)
#: Largest rows x frequencies x coefficients of one matrix product in a block. OpenBLAS
#: hands a product to threads of its own from 2 x 65536 x 4 = 524288 (its default
#: GEMM_MULTITHREAD_THRESHOLD); beside the evaluation's own threads those only compete and
#: spin: 512-row blocks of the demo (512 x 404 x 3) measured 2.5-3x the CPU time here.
#: Threaded or not, every element comes from the same kernel: the numbers do not change.
BLAS_SOLO_SIZE = 400_000

#: Per thread and use, scratch memory kept from one call to the next (:func:`take_scratch`):
#: fresh arrays of a block's size cost a page fault per 4 kB page on every call (about
#: 750 faults, 1.3 ms of CPU for 5,000 boards x 404 frequencies here), reused ones none.
_SCRATCH = threading.local()
SCRATCH_KEPT = 4_000_000  # floats kept per thread and use at most (32 MB)


def take_scratch(count: int, rows: int, cols: int, use: str = "blocks") -> tuple[np.ndarray, list[np.ndarray]]:
    """``count`` scratch float arrays (rows, cols), views of one buffer: this thread's kept
    buffer for ``use`` when it is large enough (taken, so a nested call gets its own),
    else a new one. Give the buffer back with :func:`give_scratch` when done.

    Parameters
    ----------
    count : int
        Number of arrays.
    rows : int
        Rows of each array.
    cols : int
        Columns of each array.
    use : str
        What the memory is for (one kept buffer per use and thread).

    Returns
    -------
    tuple[np.ndarray, list[np.ndarray]]
        The buffer (flat) and the ``count`` arrays (rows, cols), contents undefined.
    """
    each = -(-rows * cols // 8) * 8  # whole 64-byte lines apart
    kept = getattr(_SCRATCH, use, None)
    if kept is not None and kept.size >= count * each:
        setattr(_SCRATCH, use, None)
        buf = kept
    else:
        buf = np.empty(count * each)
    return buf, [buf[k * each:k * each + rows * cols].reshape(rows, cols) for k in range(count)]


def give_scratch(buf: np.ndarray, use: str = "blocks") -> None:
    """Keep ``buf`` (from :func:`take_scratch`) for this thread's next call for ``use``
    (the larger of two; none above :data:`SCRATCH_KEPT` floats).

    Parameters
    ----------
    buf : np.ndarray
        The buffer :func:`take_scratch` returned; nothing may read its arrays any more.
    use : str
        What the memory is for.
    """
    kept = getattr(_SCRATCH, use, None)
    if buf.size <= SCRATCH_KEPT and (kept is None or kept.size < buf.size):
        setattr(_SCRATCH, use, buf)


@dataclass(frozen=True)
class _JwPoly:
    """p(jx) / x^shift on a fixed grid x, for every sample, as two matrix products.

    ``even`` (S, ne) and ``odd`` (S, no): p's even and odd coefficients with the signs of
    j^m folded in; ``p_even`` (ne, F) and ``p_odd`` (no, F): the matching powers of x.
    Then Re = even @ p_even and Im = odd @ p_odd, one BLAS call each for a block of rows.
    """

    even: np.ndarray
    odd: np.ndarray
    p_even: np.ndarray
    p_odd: np.ndarray

    @classmethod
    def build(cls, c: np.ndarray, x: np.ndarray, shift: int = 0, negate: str = "") -> _JwPoly:
        """From coefficients ``c`` (S, M), ascending; ``negate`` ("re" or "im") flips the
        sign of that part at no cost."""
        even, odd = _signed_parts(c)
        if negate == "re":
            even = -even
        elif negate == "im":
            odd = -odd
        m = np.arange(c.shape[1])
        powers = np.power(x[None, :], (m - shift)[:, None].astype(float))  # (M, F)
        # contiguous operands, so numpy hands the products to BLAS
        return cls(np.ascontiguousarray(even), np.ascontiguousarray(odd),
                   np.ascontiguousarray(powers[0::2]), np.ascontiguousarray(powers[1::2]))

    def parts(self, lo: int, hi: int, re: np.ndarray | None = None,
              im: np.ndarray | None = None, by_frequency: bool = False) -> tuple[np.ndarray, np.ndarray]:
        """Re and Im for sample rows [lo, hi), each (hi - lo, F), into ``re`` and ``im``;
        ``by_frequency``: each (F, hi - lo) instead, the same numbers (the transposed
        product: every element the same sum of the same terms)."""
        out = []
        for coef, powers, buf in ((self.even, self.p_even, re), (self.odd, self.p_odd, im)):
            if buf is None:
                buf = np.empty((powers.shape[1], hi - lo) if by_frequency else (hi - lo, powers.shape[1]))
            if coef.shape[1] == 1:  # one term: a broadcast product, the same numbers as
                if by_frequency:  # matmul's, about 3x faster here
                    np.multiply(powers[0][:, None], coef[lo:hi, 0], out=buf)
                else:
                    np.multiply(coef[lo:hi], powers[0], out=buf)
            elif coef.shape[1]:
                if by_frequency:
                    np.matmul(powers.T, coef[lo:hi].T, out=buf)
                else:
                    np.matmul(coef[lo:hi], powers, out=buf)
            else:
                buf[...] = 0.0
            out.append(buf)
        return out[0], out[1]


@dataclass(frozen=True)
class _LeanGroup:
    """One or two lean stages (see :func:`frequency_response`) as H = C (s/w_g)^K / P(s/w_g).

    ``den``: P(jx) / (|C| x^K); ``dden``: the same for P' (for the group delay) or None;
    ``offset`` (S,): the group's constant phase in rad; ``zero`` (S,): rows where C = 0;
    ``unwrap``: the phase of P needs unwrapping (one stage of degree 3 or 4).
    """

    den: _JwPoly
    dden: _JwPoly | None
    w_g: float
    offset: np.ndarray
    zero: np.ndarray
    unwrap: bool = False


def _lean_groups(circuit: Circuit, coeffs: list[StageCoefficients], w: np.ndarray,
                 delay: bool) -> list[_LeanGroup]:
    """The lean stages taken two at a time, each pair multiplied into one group.

    Each stage is first multiplied through by the sign of its s^1 coefficient, which leaves
    H unchanged and puts the denominator's angle in (0, 180) deg; a pair's product then has
    its angle in (0, 360) deg, which one arctan2 gives without unwrapping:
    -angle(P) = atan2(Im, -Re) - pi for a pair and atan2(-Im, Re) for a single stage.
    The pair's frequency scale w_g is the geometric mean of its stages' (rad/s).
    """
    lean = [i for i, st in enumerate(circuit.stages) if st.simple_phase]
    solo = [[i] for i, st in enumerate(circuit.stages) if st.solo_phase]
    groups = []
    for members in [lean[g:g + 2] for g in range(0, len(lean), 2)] + solo:
        w_g = math.exp(sum(math.log(coeffs[i].w_ref) for i in members) / len(members))
        p: np.ndarray | None = None
        k_total = 0
        const = np.ones(coeffs[members[0]].num.shape[0])
        for i in members:
            sc, k = coeffs[i], circuit.stages[i].num_power
            r = w_g / sc.w_ref
            d = sc.den * r ** np.arange(sc.den.shape[1])
            flip = np.where(d[:, 1] < 0, -1.0, 1.0)
            d = d * flip[:, None]
            const = const * (sc.num[:, k] * r ** k * flip)
            k_total += k
            if p is None:
                p = d
            else:
                prod = np.zeros((d.shape[0], p.shape[1] + d.shape[1] - 1))
                for j in range(d.shape[1]):
                    prod[:, j:j + p.shape[1]] += p * d[:, j:j + 1]
                p = prod
        assert p is not None
        pair = len(members) == 2
        zero = const == 0
        pt = p / np.where(zero, 1.0, np.abs(const))[:, None]
        x = w / w_g
        negate = "re" if pair else "im"
        dden = None
        if delay:
            dden = _JwPoly.build(pt[:, 1:] * np.arange(1, pt.shape[1]), x, k_total, negate)
        offset = k_total * (math.pi / 2) + math.pi * (const < 0) - (math.pi if pair else 0.0)
        groups.append(_LeanGroup(_JwPoly.build(pt, x, k_total, negate), dden, w_g, offset, zero,
                                 circuit.stages[members[0]].solo_phase))
    return groups


@dataclass(frozen=True)
class _GeneralStage:
    """A stage evaluated in general: N(jx), D(jx) and, for the delay, their derivatives."""

    num: _JwPoly
    den: _JwPoly
    dnum: _JwPoly | None  # None when N is a monomial (no delay term) or no delay is asked
    dden: _JwPoly | None
    w_ref: float


def _general_stages(circuit: Circuit, coeffs: list[StageCoefficients], w: np.ndarray,
                    delay: bool) -> list[_GeneralStage]:
    out = []
    for st, sc in zip(circuit.stages, coeffs):
        if st.simple_phase or st.solo_phase:
            continue
        x = w / sc.w_ref
        monomial = np.count_nonzero(np.any(sc.num != 0, axis=0)) <= 1
        dnum = _JwPoly.build(_derivative(sc.num), x) if delay and not monomial else None
        dden = _JwPoly.build(_derivative(sc.den), x) if delay else None
        out.append(_GeneralStage(_JwPoly.build(sc.num, x), _JwPoly.build(sc.den, x), dnum, dden, sc.w_ref))
    return out


def frequency_response(circuit: Circuit, coeffs: list[StageCoefficients], freqs_hz: np.ndarray,
                       *, phase: bool = True, delay: bool = False, out_gain_db: np.ndarray | None = None,
                       out_phase: np.ndarray | None = None, out_delay: np.ndarray | None = None) -> Response:
    """Gain (dB), phase and group delay of every sample on the frequency grid ``freqs_hz``.

    Stages of degree <= 2 with a monomial numerator c*s^k (every Sallen-Key and
    multiple-feedback section, first-order sections) take a lean path, two at a time:
    the pair is H = C s^K / P(s) with P the product of the two denominators, so
    |H|^2 = 1 / |P(jx) / (C x^K)|^2 and the phase is K*90 deg (+180 if C < 0) minus P's
    angle, from one arctan2 (see :func:`_lean_groups`). Other stages are evaluated in
    general. Polynomials are evaluated as matrix products of their coefficients with
    powers of the frequency.

    Works through the samples in blocks of :data:`BLOCK_ROWS` rows, writing each block's
    results straight into the output arrays (decibels included); a block's temporaries are
    reused and stay in the CPU cache. ``out_*`` are optional arrays (S, F) to write into.

    Parameters
    ----------
    circuit : Circuit
        From :func:`compile_design`.
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).
    freqs_hz : np.ndarray
        (F,) frequency grid in Hz.
    phase : bool
        Compute the phase (deg).
    delay : bool
        Compute the group delay (s).
    out_gain_db : np.ndarray, optional
        (S, F) array to write the gain into.
    out_phase : np.ndarray, optional
        (S, F) array to write the phase into.
    out_delay : np.ndarray, optional
        (S, F) array to write the group delay into.

    Returns
    -------
    Response
        Gain (S, F) in dB, phase (S, F) in deg and group delay (S, F) in s (None each
        when not asked).
    """
    s = coeffs[0].num.shape[0]
    f = np.asarray(freqs_hz, dtype=float)
    gain_db = np.empty((s, f.size)) if out_gain_db is None else out_gain_db
    ph = (np.empty((s, f.size)) if out_phase is None else out_phase) if phase else None
    tau = (np.empty((s, f.size)) if out_delay is None else out_delay) if delay else None
    for _ in response_blocks(circuit, coeffs, f, phase=phase, delay=delay, out_gain_db=gain_db,
                             out_phase=ph, out_delay=tau):
        pass
    return Response(f, gain_db, ph, tau)


def response_blocks(circuit: Circuit, coeffs: list[StageCoefficients], freqs_hz: np.ndarray, *,
                    phase: bool = True, delay: bool = False, out_gain_db: np.ndarray | None = None,
                    out_phase: np.ndarray | None = None, out_delay: np.ndarray | None = None,
                    rows: int | None = None, power: bool = False
                    ) -> Iterator[tuple[int, int, Response | PowerResponse]]:
    """:func:`frequency_response` one block of sample rows at a time, for work that reads
    each block while it is in the CPU cache (judging, for one).

    Yields ``(lo, hi, block)``: ``block`` is the finished :class:`Response` of sample rows
    [lo, hi), arrays (hi - lo, F). They are views of ``out_*`` (S, F) where given; else
    of scratch arrays that the next block, or the thread's next call, overwrites (copy what
    must be kept), so without
    ``out_*`` the memory used is a few blocks, whatever the number of samples. ``rows``:
    samples per block at most (default :data:`BLOCK_ROWS`, fewer where a block's matrix
    product would exceed :data:`BLAS_SOLO_SIZE`); the rows are split into blocks
    of equal size, at least two rows each. Every number equals
    :func:`frequency_response`'s, bit for bit, whatever the blocks.

    ``power=True`` (without ``out_gain_db``) yields :class:`PowerResponse` blocks: the gain
    left a power ratio, without the logarithm, the scaling and the clipping of every point
    (about a third of the gain's work); its :meth:`PowerResponse.gain_db` gives the same
    decibels for the points, or the extremes, a reader needs.

    Parameters
    ----------
    circuit : Circuit
        From :func:`compile_design`.
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).
    freqs_hz : np.ndarray
        (F,) frequency grid in Hz.
    phase : bool
        Compute the phase (deg).
    delay : bool
        Compute the group delay (s).
    out_gain_db : np.ndarray, optional
        (S, F) array to write the gain into.
    out_phase : np.ndarray, optional
        (S, F) array to write the phase into.
    out_delay : np.ndarray, optional
        (S, F) array to write the group delay into.
    rows : int, optional
        Sample rows per block (default: chosen for the grid).
    power : bool
        Yield the gain as a power ratio (:class:`PowerResponse`), not in dB.

    Yields
    ------
    tuple[int, int, Response | PowerResponse]
        ``(lo, hi, block)``: rows ``[lo, hi)`` and their responses (hi - lo, F).
    """
    if power and out_gain_db is not None:
        raise ValueError("power=True writes no gain curves: give no out_gain_db")
    s = coeffs[0].num.shape[0]
    f = np.asarray(freqs_hz, dtype=float)
    w = TWO_PI * f
    groups = _lean_groups(circuit, coeffs, w, delay)
    general = _general_stages(circuit, coeffs, w, delay)
    if rows is None:  # small enough for a product to stay on the calling thread
        polys = [p for g in groups for p in (g.den, g.dden)]
        polys += [p for st in general for p in (st.num, st.den, st.dnum, st.dden)]
        k_max = max((max(p.even.shape[1], p.odd.shape[1]) for p in polys if p is not None), default=1)
        rows = min(BLOCK_ROWS, BLAS_SOLO_SIZE // (f.size * max(k_max, 1)))
    # blocks of equal size (+-1 row), never a single row of several: BLAS multiplies one row
    # by another kernel (matrix-vector), whose last bits differ from the matrix product's
    blocks = max(1, min(-(-s // max(int(rows), 1)), s // 2))
    edges = [k * s // blocks for k in range(blocks + 1)]
    n_rows = -(-s // blocks)
    offset = sum((g.offset for g in groups), np.zeros(s)) * (180 / math.pi)
    zero = np.zeros(s, dtype=bool)
    for g in groups:
        zero |= g.zero
    uniform = bool(np.all(offset == offset[0]))
    n_bufs = 8 if general else 4 if len(groups) > 1 else 3
    owned = [out_gain_db is None, phase and out_phase is None, delay and out_delay is None]
    scratch, arrays = take_scratch(n_bufs + sum(owned), n_rows, f.size)
    bufs = arrays[:n_bufs]
    own = iter(arrays[n_bufs:])
    own_gain, own_ph, own_tau = (next(own) if o else None for o in owned)

    # the gain alone as a power ratio: blocks laid out (F, boards), so that judging a span,
    # an extreme over some of its frequencies for every board, runs along whole rows
    # (numpy pays about 100 ns for each row it reduces; the same numbers either way)
    by_frequency = power and not phase and not delay

    def part(a: np.ndarray, k: int) -> np.ndarray:
        """A scratch array's first ``k`` boards, contiguous: (k, F), or (F, k) by frequency."""
        return a.reshape(-1)[:k * f.size].reshape(f.size, k) if by_frequency else a[:k]

    def rows_of(out: np.ndarray | None, own: np.ndarray | None, lo: int, hi: int) -> np.ndarray | None:
        return out[lo:hi] if out is not None else (None if own is None else part(own, hi - lo))

    try:
        for lo, hi in zip(edges[:-1], edges[1:]):
            g_b = rows_of(out_gain_db, own_gain, lo, hi)
            ph_b = rows_of(out_phase, own_ph, lo, hi) if phase else None
            tau_b = rows_of(out_delay, own_tau, lo, hi) if delay else None
            assert g_b is not None
            with np.errstate(divide="ignore", over="ignore", invalid="ignore", under="ignore"):
                inverse = _response_block(groups, general, lo, hi, [part(b, hi - lo) for b in bufs], g_b, ph_b,
                                          tau_b, power, by_frequency)
                if ph_b is not None:  # the groups' constant phases, while the block is in cache
                    ph_b += float(offset[0]) if uniform else offset[lo:hi, None]
            z = zero[lo:hi]
            if z.any():  # no gain: -GAIN_DB_LIMIT dB (as a power ratio: its extreme, which gives it)
                none = (math.inf if inverse else 0.0) if power else -GAIN_DB_LIMIT
                if by_frequency:
                    g_b[:, z] = none
                else:
                    g_b[z] = none
            yield lo, hi, PowerResponse(f, g_b, inverse, ph_b, tau_b, by_frequency) if power else \
                Response(f, g_b, ph_b, tau_b)
    finally:  # the scratch arrays serve this thread's next call (and the blocks they held)
        give_scratch(scratch)


def _response_block(groups: list[_LeanGroup], general: list[_GeneralStage], lo: int, hi: int,
                    bufs: list[np.ndarray], gain_db: np.ndarray, ph: np.ndarray | None,
                    tau: np.ndarray | None, power: bool = False, by_frequency: bool = False) -> bool:
    """:func:`frequency_response` for sample rows [lo, hi), into ``gain_db``, ``ph`` (deg,
    without the groups' constant offsets) and ``tau`` (s), each (hi - lo, F).
    ``bufs``: scratch arrays of the same shape, three (four with several groups, eight
    with general stages). ``gain_db`` first accumulates the
    product of the lean groups' |P / (C x^K)|^2, then becomes the gain in dB; with ``power``
    it is left a power ratio (:class:`PowerResponse`). Returns whether that ratio is
    1/|H|^2 (lean stages only) rather than |H|^2. ``by_frequency`` (gain only): every
    array is (F, hi - lo), the same numbers."""
    acc = gain_db       # the product of the groups' |P/(C x^K)|^2, then the gain in dB
    re, im, tmp = bufs[:3]
    lean = False        # acc holds at least one group
    phase_started = False
    if tau is not None:
        tau[...] = 0.0
    for grp in groups:
        grp.den.parts(lo, hi, re, im, by_frequency)
        if ph is not None:
            if not phase_started:
                np.arctan2(im, re, out=ph)
                if grp.unwrap:
                    _unwrap(ph)
                phase_started = True
            else:
                np.arctan2(im, re, out=tmp)
                ph += _unwrap(tmp) if grp.unwrap else tmp
        target = acc if not lean else bufs[3]
        np.multiply(re, re, out=target)
        np.multiply(im, im, out=tmp)
        target += tmp
        if tau is not None and grp.dden is not None:
            dre, dim = grp.dden.parts(lo, hi)
            dre *= re
            dim *= im
            dre += dim
            dre /= target
            dre *= 1.0 / grp.w_g
            tau += dre
        if lean:
            acc *= target
        lean = True
    general_gain: np.ndarray | None = None
    for st in general:
        # scratch arrays reused block after block (re, im, tmp are free once the groups are
        # done): fresh temporaries of this size cost a page-mapping each, and stall threads
        nr, ni = st.num.parts(lo, hi, re, im, by_frequency)
        dr, di = st.den.parts(lo, hi, tmp, bufs[3], by_frequency)
        d2 = np.multiply(dr, dr, out=bufs[4])
        d2 += np.multiply(di, di, out=bufs[5])
        n2 = np.multiply(nr, nr, out=bufs[6])
        n2 += np.multiply(ni, ni, out=bufs[5])
        if tau is not None and st.dden is not None:
            ddr, ddi = st.dden.parts(lo, hi)
            t = (ddr * dr + ddi * di) / d2
            if st.dnum is not None:
                ndr, ndi = st.dnum.parts(lo, hi)
                t = t - (ndr * nr + ndi * ni) / np.maximum(n2, 1e-300)
            tau += t / st.w_ref
        if ph is not None:
            p = _unwrap(np.arctan2(ni * dr - nr * di, nr * dr + ni * di))
            if phase_started:
                ph += p
            else:
                ph[...] = p
                phase_started = True
        g = np.divide(n2, d2, out=n2)
        if general_gain is None:  # kept apart: the next stage reuses n2's array
            general_gain = bufs[7]
            general_gain[...] = g
        else:
            general_gain *= g
    if ph is not None:
        ph *= 180 / math.pi
    inverse = general_gain is None  # acc holds 1 / |H|^2 (lean stages only)
    src = acc
    if general_gain is not None:
        src = np.divide(general_gain, acc, out=acc) if lean else general_gain
    if power:  # left a power ratio: PowerResponse.gain_db takes the steps below
        if src is not acc:
            np.copyto(acc, src)
        return inverse
    np.log10(src, out=acc)
    acc *= -10.0 if inverse else 10.0  # 1 / product: the sign of the decibels flips
    np.clip(gain_db, -GAIN_DB_LIMIT, GAIN_DB_LIMIT, out=gain_db)
    return inverse


class ExactGain:
    """|H|^2 of a batch of boards at per-board frequencies, exact (no grid): the numbers of
    :func:`gain2_at`, with each stage's even and odd coefficients (the signs of j^k folded
    in) taken once, for searches that evaluate the same boards many times (a refinement's
    or a golden-section search's steps).

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).
    """

    def __init__(self, coeffs: list[StageCoefficients]) -> None:
        self._stages = [(sc.w_ref, _signed_parts(sc.num), _signed_parts(sc.den)) for sc in coeffs]

    def rows(self, keep: np.ndarray) -> ExactGain:
        """The boards ``keep`` (an index or boolean array) alone.

        Parameters
        ----------
        keep : np.ndarray
            Boards to keep: indices, or a boolean mask (S,).

        Returns
        -------
        ExactGain
            The same evaluation for those boards.
        """
        out = ExactGain([])
        out._stages = [(w_ref, (ne[keep], no[keep]), (de[keep], do[keep]))
                       for w_ref, (ne, no), (de, do) in self._stages]
        return out

    def __call__(self, f_hz: np.ndarray) -> np.ndarray:
        """|H|^2 at frequencies ``f_hz`` (Hz) shaped (S,) or (S, k); no unit, the shape of
        ``f_hz``."""
        f = np.asarray(f_hz, dtype=float)
        col = f.ndim == 1
        w = TWO_PI * (f[:, None] if col else f)
        g = None
        for w_ref, num, den in self._stages:
            x = w / w_ref
            xx = x * x
            nr, ni = _jw(num, x, xx)
            dr, di = _jw(den, x, xx)
            gs = (nr * nr + ni * ni) / (dr * dr + di * di)
            g = gs if g is None else g * gs
        assert g is not None
        g = np.broadcast_to(g, w.shape)
        return g[:, 0] if col else g


def gain2_at(coeffs: list[StageCoefficients], f_hz: np.ndarray) -> np.ndarray:
    """|H|^2 at per-sample frequencies ``f_hz`` shaped (S,) or (S, k) (exact, no grid).

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).
    f_hz : np.ndarray
        (S,) or (S, k) frequencies in Hz.

    Returns
    -------
    np.ndarray
        |H|^2 (no unit), the shape of ``f_hz``.
    """
    return ExactGain(coeffs)(f_hz)


def dc_gain2(coeffs: list[StageCoefficients]) -> np.ndarray:
    """|H(0)|^2 per sample (S,); 0 where a stage blocks DC.

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).

    Returns
    -------
    np.ndarray
        (S,) float |H(0)|^2 (no unit).
    """
    g = None
    for sc in coeffs:
        gs = (sc.num[:, 0] / sc.den[:, 0]) ** 2
        g = gs if g is None else g * gs
    assert g is not None
    return g


def hf_gain2(coeffs: list[StageCoefficients]) -> np.ndarray:
    """|H(s)|^2 as s -> infinity per sample (S,); 0 where a stage rolls off.

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the numerator and denominator coefficients of every board (S, K),
        ascending powers of s (from :func:`stage_coefficients`).

    Returns
    -------
    np.ndarray
        (S,) float high-frequency |H|^2 (no unit).
    """
    g = None
    for sc in coeffs:
        n_deg, d_deg = sc.num.shape[1] - 1, sc.den.shape[1] - 1
        gs = (sc.num[:, -1] / sc.den[:, -1]) ** 2 if n_deg == d_deg else np.zeros(sc.num.shape[0])
        g = gs if g is None else g * gs
    assert g is not None
    return g
