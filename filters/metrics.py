"""Per-sample metrics from coefficients and responses.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

All functions take arrays over samples and return arrays shaped (samples,) in Hz, dB or
plain numbers (Q). Crossings found on the grid are refined by evaluating H exactly
between the bracketing grid points, so a cutoff does not depend on the grid density.
"""
from __future__ import annotations

import math
import threading
import weakref
from dataclasses import dataclass
from typing import Callable

import numpy as np

from .engine import (
    GAIN_DB_LIMIT,
    Circuit,
    ExactGain,
    Response,
    StageCoefficients,
    dc_gain2,
    fold_columns,
    gain2_at,
    hf_gain2,
    poly_jw,
)
from .metric_names import stage_metric_name
from .poly_roots import batch_roots

__all__ = [
    "TWO_PI",
    "ATTENUATION_FLOOR_DB",
    "peak",
    "reference_gain2",
    "REFINE_TOLERANCE_DB",
    "pole_peaks",
    "BOUND_MARGIN",
    "crossing",
    "GridScan",
    "lowpass_level_db",
    "scan_block",
    "cutoff_metrics",
    "attenuation_db",
    "pole_pairs",
    "stage_metrics",
]

TWO_PI = 2 * math.pi

#: Attenuations beyond this (dB below the reference) are reported as "> 200 dB", not as
#: figures. The response is computed in float64 (about 16 significant digits, 2.2e-16
#: relative: 313 dB of amplitude range); a polynomial evaluated near its zeros, or built
#: by multiplying several sections, loses digits to cancellation and rounding that grow
#: with the degree, so below about 1e-10 of the reference (200 dB) a figure is not
#: resolved in general. No real board comes near it either: leakage around and through
#: the parts sets the floor of a measured response far higher; measure it.
ATTENUATION_FLOOR_DB = 200.0


def _golden_max(coeffs: list[StageCoefficients], a: np.ndarray, b: np.ndarray, iterations: int,
                to_hz: Callable[[np.ndarray], np.ndarray] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Golden-section search for the maximum of |H|^2 in [a, b] per element (arrays (S,)
    or (S, k)); ``to_hz`` maps the search variable to Hz (e.g. ``np.exp`` to search in log
    frequency; default: a and b are in Hz). Returns (x, |H|^2 at x); assumes one maximum."""
    hz = (lambda x: x) if to_hz is None else to_hz
    gain2 = ExactGain(coeffs)  # the boards' coefficients prepared once for every step
    ratio = (math.sqrt(5) - 1) / 2
    c, d = b - ratio * (b - a), a + ratio * (b - a)
    gc, gd = gain2(hz(c)), gain2(hz(d))
    for _ in range(iterations):
        left = gc > gd  # the maximum lies in [a, d], else in [c, b]
        b = np.where(left, d, b)
        a = np.where(left, a, c)
        new_c = np.where(left, b - ratio * (b - a), d)
        new_d = np.where(left, c, a + ratio * (b - a))
        g_new = gain2(hz(np.where(left, new_c, new_d)))
        gc, gd = np.where(left, g_new, gd), np.where(left, gc, g_new)
        c, d = new_c, new_d
    x = 0.5 * (a + b)
    return x, gain2(hz(x))


def peak(coeffs: list[StageCoefficients], resp: Response) -> tuple[np.ndarray, np.ndarray]:
    """Frequency (Hz) and |H|^2 of each sample's highest gain, refined off the grid.

    The grid maximum is refined by a golden-section search between its two neighbours
    (exact evaluations of H; assumes one maximum there).

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    resp : Response
        Responses on the grid: gain (S, F) in dB.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        (S,) frequencies in Hz and (S,) |H|^2 (no unit).
    """
    gdb = resp.gain_db
    f = resp.freqs_hz
    s = gdb.shape[0]
    rows = np.arange(s)
    i = np.argmax(gdb, axis=1)
    best2 = 10 ** (gdb[rows, i] / 10)
    best_f = f[i]
    inner = (i > 0) & (i < f.size - 1)
    if f.size < 3 or not inner.any():
        return best_f, best2
    j = np.clip(i, 1, f.size - 2)
    lf = np.log(f)
    # golden-section search for the maximum between the grid neighbours of the top point
    # the bracket shrinks to 0.618^45 ~ 4e-10 of a grid step
    xv, gv = _golden_max(coeffs, lf[j - 1], lf[j + 1], 45, np.exp)
    better = inner & (gv > best2)
    return np.where(better, np.exp(xv), best_f), np.where(better, gv, best2)


def reference_gain2(circuit: Circuit, coeffs: list[StageCoefficients], resp: Response,
                    peak2: np.ndarray | None = None) -> np.ndarray:
    """Passband reference |H|^2 per sample: DC gain (low-pass, band-stop), high-frequency
    gain (high-pass; the refined peak where a finite gain-bandwidth rolls it off), or the
    refined peak (band-pass).

    Parameters
    ----------
    circuit : Circuit
        The compiled design (:func:`filters.engine.compile_design`).
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    resp : Response
        Responses on the grid: gain (S, F) in dB.
    peak2 : np.ndarray, optional
        (S,) refined peak |H|^2, when already known.

    Returns
    -------
    np.ndarray
        (S,) float |H|^2 (no unit).
    """
    if circuit.kind in ("lowpass", "bandstop"):
        return dc_gain2(coeffs)
    if circuit.kind == "highpass":
        # a finite gain-bandwidth op-amp rolls a high-pass off at high frequency: there the
        # passband reference is the peak instead
        hf = hf_gain2(coeffs)
        if np.any(hf == 0):
            pk = peak(coeffs, resp)[1]
            hf = np.where(hf == 0, pk, hf)
        return hf
    return peak(coeffs, resp)[1] if peak2 is None else peak2


def _rows(coeffs: list[StageCoefficients], rows: np.ndarray) -> list[StageCoefficients]:
    """The stages' coefficients of the boards ``rows`` (an index or boolean array)."""
    return [StageCoefficients(c.num[rows], c.den[rows], c.w_ref) for c in coeffs]


#: A bracket is refined until |H|^2 is within this many dB of the target.
REFINE_TOLERANCE_DB = 1e-10


def _refine(coeffs: list[StageCoefficients], f_lo: np.ndarray, f_hi: np.ndarray, target2: np.ndarray,
            iterations: int = 30, lo_db: np.ndarray | None = None,
            hi_db: np.ndarray | None = None) -> np.ndarray:
    """The frequency in [f_lo, f_hi] where |H|^2 crosses ``target2`` (regula falsi in
    log frequency against dB, Illinois variant), per sample; all arrays (S,), Hz.

    ``lo_db`` and ``hi_db`` are the gains (dB) at the ends when already known (the grid's
    values, or a searched peak's), else they are evaluated. Each sample stops once it is
    within :data:`REFINE_TOLERANCE_DB` of the target, and only unfinished samples are
    evaluated again, so a sample's answer does not depend on which other samples share
    the batch (chunking never changes a number).
    """
    a, b = np.log(f_lo), np.log(f_hi)
    t = 10 * np.log10(target2)
    sub = ExactGain(coeffs)  # the unfinished boards' coefficients, prepared once
    fa = (_gain_db_at(sub, f_lo) if lo_db is None else lo_db) - t
    fb = (_gain_db_at(sub, f_hi) if hi_db is None else hi_db) - t
    side = np.zeros(a.shape)
    result = np.full(a.shape, np.nan)
    live = np.arange(a.size)  # the samples still being refined
    for step in range(iterations):
        denom = fb - fa
        c = np.where(denom != 0, b - fb * (b - a) / np.where(denom != 0, denom, 1), 0.5 * (a + b))
        fc = _gain_db_at(sub, np.exp(c)) - t
        same_a = np.sign(fc) == np.sign(fa)
        # move the end on the side of c; halve the value kept at the other end (Illinois)
        a = np.where(same_a, c, a)
        fa_new = np.where(same_a, fc, fa)
        fb = np.where(same_a & (side == -1), fb / 2, fb)
        b = np.where(~same_a, c, b)
        fb = np.where(~same_a, fc, fb)
        fa_new = np.where(~same_a & (side == 1), fa_new / 2, fa_new)
        fa = fa_new
        side = np.where(same_a, -1, 1)
        done = np.abs(fc) < REFINE_TOLERANCE_DB
        if step == iterations - 1:
            done[:] = True  # out of steps: the last point tried
        if done.any():
            result[live[done]] = c[done]
            go = ~done
            if not go.any():
                break
            live, a, b, fa, fb, side, t = live[go], a[go], b[go], fa[go], fb[go], side[go], t[go]
            sub = sub.rows(go)
    return np.exp(result)


def _gain_db_at(gain2: ExactGain, f_hz: np.ndarray) -> np.ndarray:
    """10 log10 |H|^2 (dB) at per-sample frequencies (S,) Hz, exact; -3000 dB for 0."""
    return 10 * np.log10(np.maximum(gain2(f_hz), 1e-300))


def _stage_poles(sc: StageCoefficients) -> np.ndarray:
    """Roots (rad/s) of one stage's denominators, (S, n), complex: degree 1 and 2 in
    closed form, higher from the companion matrix. (S, 0) for a constant denominator."""
    den = sc.den
    s_count, k = den.shape
    n = k - 1
    if n < 1:
        return np.empty((s_count, 0), dtype=complex)
    if n == 1:
        roots = (-den[:, :1] / den[:, 1:]).astype(complex)
    elif n == 2:
        a, b, c = den[:, 2], den[:, 1], den[:, 0]
        disc = np.sqrt((b * b - 4 * a * c).astype(complex))
        roots = np.stack([(-b + disc) / (2 * a), (-b - disc) / (2 * a)], axis=1)
    else:
        roots = _companion_roots(den)
    return roots * sc.w_ref


#: Per thread, the last few companion-matrix roots, by denominator array (weak references).
_KEPT = threading.local()


def _companion_roots(den: np.ndarray) -> np.ndarray:
    """Roots of the polynomials ``den`` (S, n + 1), ascending powers, n > 2: (S, n) complex
    (:func:`filters.poly_roots.batch_roots`: the eigenvalues of their companion matrices,
    found for all boards together by Aberth's iteration). The cutoff and the stage f0/Q of one batch ask
    for the same arrays (about 10 us a board for degree 5), so the last few results of the
    thread are kept, keyed by the array itself (never by an equal copy)."""
    kept = getattr(_KEPT, "items", None)
    if kept is None:
        kept = _KEPT.items = []
    for ref, roots in kept:
        if ref() is den:
            return roots
    roots = batch_roots(den)  # the companion matrices' eigenvalues, refined together (poly_roots)
    kept[:] = [(r, v) for r, v in kept[-7:] if r() is not None] + [(weakref.ref(den), roots)]
    return roots


def _all_poles(coeffs: list[StageCoefficients]) -> np.ndarray:
    """Every pole (rad/s) of every stage, (S, R) complex."""
    s_count = coeffs[0].den.shape[0] if coeffs else 0
    cols = [_stage_poles(sc) for sc in coeffs]
    return np.concatenate(cols, axis=1) if cols else np.empty((s_count, 0), dtype=complex)


def _pole_brackets(poles: np.ndarray, f_min: float, f_max: float
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Where to look for the top of the resonance near each pole (S, R): brackets ``a``,
    ``b`` (Hz, clipped to [f_min, f_max]) and ``use`` (a complex pole, upper half plane,
    whose bracket meets [f_min, f_max]).

    A pole p = -sigma + j w_d makes a resonance about |sigma| wide (rad/s) around w_d;
    however narrow it is, its top lies in [w_d - |sigma|, w_d + |sigma|].
    """
    upper = poles.imag > 1e-9 * np.abs(poles)
    centre = np.abs(poles.imag) / TWO_PI
    half = np.abs(poles.real) / TWO_PI
    a = np.maximum(centre - half, 0.5 * centre)
    b = centre + half
    use = upper & (b >= f_min) & (a <= f_max)
    return np.clip(a, f_min, f_max), np.clip(b, f_min, f_max), use


def _peaks_in(coeffs: list[StageCoefficients], a: np.ndarray, b: np.ndarray, use: np.ndarray,
              iterations: int) -> tuple[np.ndarray, np.ndarray]:
    """Golden-section maxima of |H|^2 in [a, b] (Hz, (S, R)) for the pairs ``use`` only
    (the pairs gathered into one flat batch): frequencies (Hz) and |H|^2, NaN elsewhere."""
    fx = np.full(use.shape, np.nan)
    gx = np.full(use.shape, np.nan)
    board, pole = np.nonzero(use)
    if board.size:
        # the bracket shrinks to 0.618^40 ~ 5e-9 of the resonance width
        fx[board, pole], gx[board, pole] = _golden_max(_rows(coeffs, board), a[board, pole], b[board, pole],
                                                       iterations)
    return fx, gx


def pole_peaks(coeffs: list[StageCoefficients], f_min: float, f_max: float,
               iterations: int = 40) -> tuple[np.ndarray, np.ndarray]:
    """The local maximum of |H|^2 near each complex pole of each board: frequencies (Hz)
    and |H|^2, both (S, R) over the boards' poles, NaN where a pole is real, in the lower
    half plane or not near [f_min, f_max].

    The top of each resonance is searched by golden section on exact evaluations of H in
    the bracket of :func:`_pole_brackets` (vectorized over boards and poles), so a
    resonance narrower than the grid spacing is still seen. :func:`crossing` searches
    only the poles whose top could move its answer.

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    f_min : float
        Lowest frequency of interest, Hz.
    f_max : float
        Highest frequency of interest, Hz.
    iterations : int
        Golden-section steps.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        (S, R) frequencies in Hz and (S, R) |H|^2, NaN where there is no peak.
    """
    poles = _all_poles(coeffs)
    a, b, use = _pole_brackets(poles, f_min, f_max)
    return _peaks_in(coeffs, a, b, use, iterations)


def _gain2_bound(coeffs: list[StageCoefficients], poles: np.ndarray, board: np.ndarray,
                 g2_ref: np.ndarray, f_ref: np.ndarray, f_lo: np.ndarray, f_hi: np.ndarray) -> np.ndarray:
    """An upper bound of |H(j 2 pi f)|^2 for f in [f_lo, f_hi] (Hz), per element (k,) of
    boards ``board``, given |H|^2 = ``g2_ref`` at f = ``f_ref`` (any frequency, best the
    interval's end nearest the poles).

    |H(jw)|^2 = |H(jw_r)|^2 prod |N_s(jw)|^2 / |N_s(jw_r)|^2 prod_p |jw_r - p|^2 / |jw - p|^2
    over the stages s and every pole p. On the interval, |jw - p| is at least p's distance
    to the segment j [w_lo, w_hi], and |N_s(jw)| = |sum n_k (jx)^k| is at most
    sum |n_k| x_hi^k (x = w / w_ref >= 0). For an all-pole low-pass whose poles lie below
    the interval, with w_r its lower end, every ratio is 1 exactly and the bound is
    |H(jw_r)|^2 itself. Zeros or poles on the segment make the bound infinite or NaN.
    """
    w_r, w_lo, w_hi = TWO_PI * f_ref, TWO_PI * f_lo, TWO_PI * f_hi
    p = poles[board]  # (k, R)
    near = np.clip(p.imag, w_lo[:, None], w_hi[:, None])
    # |j w_r - p| over p's distance to the segment (the same formula at w_r: exactly 1 there)
    re2 = p.real * p.real
    ratio2 = fold_columns(np.multiply, (re2 + (p.imag - w_r[:, None]) ** 2) / (re2 + (p.imag - near) ** 2), 1.0)
    for sc in coeffs:
        num = sc.num[board]
        x_hi, x_r = w_hi / sc.w_ref, w_r / sc.w_ref
        top = np.abs(num[:, -1])
        for m in range(num.shape[1] - 2, -1, -1):
            top = top * x_hi + np.abs(num[:, m])
        re, im = poly_jw(num, x_r[:, None], (x_r * x_r)[:, None])
        ratio2 = ratio2 * top ** 2 / (re[:, 0] ** 2 + im[:, 0] ** 2)
    return g2_ref * ratio2


@dataclass(frozen=True)
class GridScan:
    """What a low-pass's metrics read from its gain on the grid, gathered block by block
    while each block of the response is in the CPU cache (:func:`scan_block`), each (S,):
    ``peak`` the grid index of the highest gain, ``edge`` the last grid index at or above
    the cutoff level (0 where none) and ``found`` whether there is one."""

    peak: np.ndarray
    edge: np.ndarray
    found: np.ndarray


def lowpass_level_db(coeffs: list[StageCoefficients], cutoff_db: float) -> np.ndarray:
    """A low-pass's cutoff level (dB, (S,)): ``cutoff_db`` below its DC gain, the level
    :func:`cutoff_metrics` compares the grid with (known before the response).

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    cutoff_db : float
        Cutoff level in dB below the DC gain.

    Returns
    -------
    np.ndarray
        (S,) float levels in dB.
    """
    return _db(dc_gain2(coeffs) * 10 ** (-cutoff_db / 10))


def scan_block(gain_db: np.ndarray, level_db: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:class:`GridScan`'s readings for the rows of one block: gain (rows, F) in dB, level
    (rows,) from :func:`lowpass_level_db`. Returns (peak, edge, found), each (rows,).

    Parameters
    ----------
    gain_db : np.ndarray
        (rows, F) gain in dB.
    level_db : np.ndarray
        (rows,) cutoff level in dB.

    Returns
    -------
    tuple[np.ndarray, np.ndarray, np.ndarray]
        (peak, edge, found), each (rows,): grid index of the highest gain (int), last grid
        index at or above the level (int) and whether there is one (bool).
    """
    edge, found = _last_true(gain_db >= level_db[:, None])
    return np.argmax(gain_db, axis=1), edge, found


#: A pole whose bound (:func:`_gain2_bound`) is below the level by more than this share
#: is not searched (a margin for the rounding of poles and of the grid's decibels).
BOUND_MARGIN = 1e-6


def crossing(resp: Response, coeffs: list[StageCoefficients], level2: np.ndarray,
             direction: str, scan: GridScan | None = None) -> np.ndarray:
    """Frequency (Hz) per sample where |H|^2 crosses ``level2`` (S,).

    ``direction="falling"``: the highest frequency above which the gain stays below the
    level (a low-pass edge); ``"rising"``: the lowest frequency below which it stays
    below (a high-pass edge). NaN where there is no crossing inside the grid.

    The points looked at are the grid and, per board, the top of the resonance near each
    complex pole (:func:`pole_peaks`), so a narrow resonance above the level past the
    main corner counts whatever the grid: the edge is bracketed between the last point at
    or above the level and the next grid point, and refined on exact |H|^2. A rise above
    the level that is narrower than the grid spacing and not near a pole (between two
    close zeros) could still be missed.

    A pole's top is searched only where it could move the answer. Falling (rising is the
    mirror image): let g be the last grid point at or above the level and g+ the next one.
    A top at or below g changes nothing. A top in (g, g+) changes the bracket's lower end
    but not the crossing found (to the refinement's tolerance): the search assumes one
    maximum in the pole's bracket, so from g up to the top the gain rises (it stays above
    the level) and past the top it falls, crossing the level once before g+. So only a top
    above the level at or beyond g+ matters, and a pole is skipped when its bracket ends
    before g+ or when an upper bound of |H|^2 on the rest of its bracket
    (:func:`_gain2_bound`, from the grid's gain at g+ and the distances to the poles) is
    below the level. A resonance too damped to rise above the level there is skipped this
    way; for an all-pole low-pass whose poles lie below g+ the bound is the grid's own
    gain at g+, which is below the level.

    Parameters
    ----------
    resp : Response
        Responses on the grid: gain (S, F) in dB.
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    level2 : np.ndarray
        (S,) level as |H|^2 (no unit).
    direction : str
        ``"falling"`` or ``"rising"``.
    scan : GridScan, optional
        For ``"falling"``: the last grid point at or above the level, already read block by
        block (:func:`scan_block`); the same numbers as reading ``resp`` here.

    Returns
    -------
    np.ndarray
        (S,) float frequencies in Hz, NaN where the gain does not cross the level in the
        analysed range.
    """
    gdb = resp.gain_db
    f = resp.freqs_hz
    n = f.size
    s_count = gdb.shape[0]
    rows = np.arange(s_count)
    falling = direction == "falling"
    if falling and scan is not None:  # read from the grid block by block already (scan_block)
        edge, grid_ok = scan.edge, scan.found
    elif falling:
        edge, grid_ok = _last_true(gdb >= _db(level2)[:, None])  # the last grid index at or above the level
    else:
        above = gdb >= _db(level2)[:, None]
    if falling:
        ref = np.where(grid_ok, np.minimum(edge + 1, n - 1), 0)  # g+ (the first grid point if none)
        open_end = grid_ok & (edge == n - 1)
    else:
        edge = np.argmax(above, axis=1)  # the first grid index at or above the level
        grid_ok = above[rows, edge]
        ref = np.where(grid_ok, np.maximum(edge - 1, 0), n - 1)
        open_end = grid_ok & (edge == 0)
    poles = _all_poles(coeffs)
    a, b, use = _pole_brackets(poles, float(f[0]), float(f[-1]))
    f_ref = f[ref]
    use &= ~open_end[:, None]  # above the level at the grid's end: no crossing, whatever the poles
    use &= (b >= f_ref[:, None]) if falling else (a <= f_ref[:, None])
    board, pole = np.nonzero(use)
    if board.size:
        ends = (np.maximum(a[board, pole], f_ref[board]), b[board, pole]) if falling else \
            (a[board, pole], np.minimum(b[board, pole], f_ref[board]))
        g_ref = gdb[board, ref[board]]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            bound = _gain2_bound(coeffs, poles, board, 10 ** (g_ref / 10), f_ref[board], *ends)
        # kept: NaN or infinite bounds, and a grid gain held at the engine's top limit
        skip = (bound < level2[board] * (1 - BOUND_MARGIN)) & (g_ref < GAIN_DB_LIMIT)
        use[board[skip], pole[skip]] = False
    pf, pg = _peaks_in(coeffs, a, b, use, 40)
    pole_above = use & (pg >= level2[:, None])
    if falling:
        f_grid = np.where(grid_ok, f[edge], -np.inf)
        f_pole = fold_columns(np.maximum, np.where(pole_above, pf, -np.inf), -np.inf)
        lo = np.maximum(f_grid, f_pole)
        ok = np.isfinite(lo) & ~open_end
        nxt = np.minimum(np.searchsorted(f, np.where(ok, lo, f[0]), side="right"), n - 1)
        hi = f[nxt]
        hi_db = gdb[rows, nxt]
        lo_db = _pick_db(f_grid, gdb[rows, edge], lo, pf, pg, pole_above)
    else:
        f_grid = np.where(grid_ok, f[edge], np.inf)
        f_pole = fold_columns(np.minimum, np.where(pole_above, pf, np.inf), np.inf)
        hi = np.minimum(f_grid, f_pole)
        ok = np.isfinite(hi) & ~open_end
        prev = np.maximum(np.searchsorted(f, np.where(ok, hi, f[-1]), side="left") - 1, 0)
        lo = f[prev]
        lo_db = gdb[rows, prev]
        hi_db = _pick_db(f_grid, gdb[rows, edge], hi, pf, pg, pole_above)
    out = np.full(s_count, np.nan)
    if ok.any():
        out[ok] = _refine(_rows(coeffs, ok), lo[ok], hi[ok], level2[ok], lo_db=lo_db[ok], hi_db=hi_db[ok])
    return out


#: For each byte of bits packed big-endian (the first column in the top bit): the position
#: (0-7) of its last set bit, 0 for an empty byte.
_LAST_BIT = np.array([0] + [7 - ((b & -b).bit_length() - 1) for b in range(1, 256)], dtype=np.intp)


def _last_true(mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Index of the last True in each row of ``mask`` (S, F) and whether there is one, (S,)
    each (index 0 where there is none). Rows are packed into bits first: an argmax over a
    reversed boolean array is several times slower than packing (numpy 2.x, measured)."""
    packed = np.packbits(mask, axis=1)  # (S, ceil(F / 8))
    nonzero = packed != 0
    rows = np.arange(mask.shape[0])
    byte = packed.shape[1] - 1 - np.argmax(nonzero[:, ::-1], axis=1)
    found = nonzero[rows, byte]
    return np.where(found, 8 * byte + _LAST_BIT[packed[rows, byte]], 0), found


def _pick_db(f_grid: np.ndarray, grid_db: np.ndarray, f_end: np.ndarray, pf: np.ndarray, pg: np.ndarray,
             pole_above: np.ndarray) -> np.ndarray:
    """The gain (dB) at a bracket end ``f_end`` (S,) that is either the grid point
    ``f_grid`` (gain ``grid_db``) or the top of a pole's resonance (``pf``, ``pg``, (S, R))."""
    if pf.shape[1] == 0:
        return grid_db
    hit = pole_above & (pf == f_end[:, None])
    from_pole = fold_columns(np.logical_or, hit, False) & (f_end != f_grid)
    g = pg[np.arange(pf.shape[0]), np.argmax(hit, axis=1)]
    return np.where(from_pole, _db(np.where(from_pole, g, 1.0)), grid_db)


def _db(gain2: np.ndarray) -> np.ndarray:
    """10 log10 of a power gain, held within the engine's decibel range."""
    return np.clip(10 * np.log10(np.maximum(gain2, 1e-300)), -GAIN_DB_LIMIT, GAIN_DB_LIMIT)


def cutoff_metrics(circuit: Circuit, coeffs: list[StageCoefficients], resp: Response,
                   cutoff_db: float, scan: GridScan | None = None) -> dict[str, np.ndarray]:
    """Reference gain, cutoff(s) and peaking per sample.

    Low-pass and high-pass: ``cutoff_hz``. Band-pass: ``lower_hz`` and ``upper_hz``, the
    band edges at ``cutoff_db`` below the (refined) peak, nearest the peak on either side;
    ``centre_hz`` = sqrt(lower_hz x upper_hz), the geometric mean of the edges (the centre
    a band-pass is designed for: ``scipy.signal.lp2bp`` puts the edges symmetric about it
    on a log scale; stable even when a wide flat band has no clear peak);
    ``bandwidth_hz`` = upper_hz - lower_hz. No ``cutoff_hz`` for a band-pass (it would
    repeat the centre). Band-stop: the same four from the stop band's edges at
    ``cutoff_db`` below the DC gain (:func:`_stop_edges`). ``reference_db`` and
    ``peaking_db`` (peak above the reference) always.

    Parameters
    ----------
    circuit : Circuit
        The compiled design (:func:`filters.engine.compile_design`).
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    resp : Response
        Responses on the grid: gain (S, F) in dB.
    cutoff_db : float
        Cutoff level in dB below the reference (e.g. 3.0).
    scan : GridScan, optional
        A low-pass's grid readings gathered while its response was computed
        (:func:`scan_block`); the same numbers as reading ``resp`` here.

    Returns
    -------
    dict[str, np.ndarray]
        Metric name -> (S,) values (Hz, dB).
    """
    if circuit.kind == "bandstop":  # band-stop: the stop band's edges below the DC gain
        ref2 = reference_gain2(circuit, coeffs, resp)
        i = np.argmax(resp.gain_db, axis=1)
        peak2 = 10 ** (resp.gain_db[np.arange(i.size), i] / 10)
        lower, upper = _stop_edges(resp, coeffs, ref2 * 10 ** (-cutoff_db / 10))
        return {"reference_db": 10 * np.log10(np.maximum(ref2, 1e-300)),
                "peaking_db": 10 * np.log10(np.maximum(peak2, ref2) / np.maximum(ref2, 1e-300)),
                "centre_hz": np.sqrt(lower * upper), "lower_hz": lower, "upper_hz": upper,
                "bandwidth_hz": upper - lower}
    if circuit.kind == "bandpass":
        peak_f, peak2 = peak(coeffs, resp)  # the reference: refined off the grid
    else:  # peaking is informational here: the grid's maximum (within ~0.01 dB at Q = 2, 400 points)
        i = np.argmax(resp.gain_db, axis=1) if scan is None else scan.peak
        peak_f, peak2 = resp.freqs_hz[i], 10 ** (resp.gain_db[np.arange(i.size), i] / 10)
    ref2 = reference_gain2(circuit, coeffs, resp, peak2)
    level2 = ref2 * 10 ** (-cutoff_db / 10)
    out: dict[str, np.ndarray] = {"reference_db": 10 * np.log10(np.maximum(ref2, 1e-300))}
    out["peaking_db"] = 10 * np.log10(np.maximum(peak2, ref2) / np.maximum(ref2, 1e-300))
    if circuit.kind == "lowpass":
        out["cutoff_hz"] = crossing(resp, coeffs, level2, "falling", scan)
    elif circuit.kind == "highpass":
        out["cutoff_hz"] = crossing(resp, coeffs, level2, "rising")
    else:
        under = resp.gain_db < _db(level2)[:, None]  # one comparison for both edges
        lower = _half_crossing(resp, coeffs, level2, peak_f, peak2, below=True, under=under)
        upper = _half_crossing(resp, coeffs, level2, peak_f, peak2, below=False, under=under)
        out.update(centre_hz=np.sqrt(lower * upper), lower_hz=lower, upper_hz=upper, bandwidth_hz=upper - lower)
    return out


def _stop_edges(resp: Response, coeffs: list[StageCoefficients], level2: np.ndarray
                ) -> tuple[np.ndarray, np.ndarray]:
    """A band-stop's edges (Hz, (S,) each): on either side of the grid's deepest point, the
    crossing of ``level2`` (S,) nearest it, bracketed by grid points and refined on exact
    |H|^2 (NaN where the grid holds no point at or above the level on that side, and both
    NaN where even the deepest point is not below it: no stop band on the grid)."""
    gdb = resp.gain_db
    f = resp.freqs_hz
    rows = np.arange(gdb.shape[0])
    idx = np.arange(f.size)[None, :]
    deepest = np.argmin(gdb, axis=1)[:, None]
    above = gdb >= _db(level2)[:, None]
    stop = ~above[rows, deepest[:, 0]]
    j, ok_lo = _last_true(above & (idx < deepest))  # the last point above the level before the notch
    k = np.argmax(above & (idx > deepest), axis=1)  # the first one after it
    ok_lo &= stop
    ok_hi = above[rows, k] & (k > deepest[:, 0]) & stop
    out = []
    for ok, a, b in ((ok_lo, j, np.minimum(j + 1, f.size - 1)), (ok_hi, np.maximum(k - 1, 0), k)):
        edge = np.full(gdb.shape[0], np.nan)
        if ok.any():
            edge[ok] = _refine(_rows(coeffs, ok), f[a[ok]], f[b[ok]], level2[ok],
                               lo_db=gdb[rows[ok], a[ok]], hi_db=gdb[rows[ok], b[ok]])
        out.append(edge)
    return out[0], out[1]


def _half_crossing(resp: Response, coeffs: list[StageCoefficients], level2: np.ndarray,
                   peak_f: np.ndarray, peak2: np.ndarray, below: bool,
                   under: np.ndarray | None = None) -> np.ndarray:
    """Band edge on one side of the (refined) peak (``peak_f`` Hz, |H|^2 ``peak2``, (S,)):
    the crossing nearest the peak.

    The bracket runs from the last grid point under the level to the next grid point or
    the peak itself, whichever is nearer, so a coarse grid whose points all miss the
    peak's top still brackets the edge correctly. ``under`` (S, F): the grid points under
    the level, when already compared.
    """
    gdb = resp.gain_db
    f = resp.freqs_hz
    n = gdb.shape[1]
    rows = np.arange(gdb.shape[0])
    peak_db = _db(peak2)
    if under is None:
        under = gdb < _db(level2)[:, None]
    if below:
        j, ok = _last_true(under & (f[None, :] < peak_f[:, None]))  # last point under the level left of the peak
        lo = f[j]
        k = np.minimum(j + 1, n - 1)
        hi = np.minimum(f[k], peak_f)
        lo_db, hi_db = gdb[rows, j], np.where(f[k] <= peak_f, gdb[rows, k], peak_db)
    else:
        cand = under & (f[None, :] > peak_f[:, None])
        j = np.argmax(cand, axis=1)
        ok = cand[rows, j]
        k = np.maximum(j - 1, 0)
        lo = np.maximum(f[k], peak_f)
        hi = f[j]
        lo_db, hi_db = np.where(f[k] >= peak_f, gdb[rows, k], peak_db), gdb[rows, j]
    out = np.full(gdb.shape[0], np.nan)
    if ok.any():
        out[ok] = _refine(_rows(coeffs, ok), lo[ok], hi[ok], level2[ok], lo_db=lo_db[ok], hi_db=hi_db[ok])
    return out


def attenuation_db(coeffs: list[StageCoefficients], ref2: np.ndarray, f_hz: float) -> np.ndarray:
    """Attenuation (dB, positive = below the reference) at ``f_hz`` per sample.

    Parameters
    ----------
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.
    ref2 : np.ndarray
        (S,) reference |H|^2 (no unit).
    f_hz : float
        Frequency in Hz.

    Returns
    -------
    np.ndarray
        (S,) float attenuation in dB.
    """
    g2 = gain2_at(coeffs, np.full(ref2.shape, float(f_hz)))
    return 10 * np.log10(np.maximum(ref2, 1e-300) / np.maximum(g2, 1e-300))


def pole_pairs(den: np.ndarray, w_ref: float) -> tuple[np.ndarray, np.ndarray]:
    """f0 (Hz) and Q of the complex pole pairs of denominators ``den`` (S, n+1).

    Returns arrays (S, pairs) sorted by ascending Q per sample; NaN where a sample has
    fewer complex pairs. Degree 2 uses the closed form (any Q, also below 1/2).

    Parameters
    ----------
    den : np.ndarray
        (S, n + 1) denominator coefficients, ascending powers of the scaled s.
    w_ref : float
        The frequency scale of ``den`` in rad/s.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        f0 (S, pairs) in Hz and Q (S, pairs) (no unit).
    """
    s_count, k = den.shape
    n = k - 1
    if n == 2:
        d0, d1, d2 = den[:, 0], den[:, 1], den[:, 2]
        w0 = np.sqrt(d0 / d2) * w_ref
        root = np.sqrt(d0 * d2)
        tiny = np.abs(d1) < 1e-12 * root  # lossless: Q reported as +-1e12, not infinity
        q = np.where(tiny, np.copysign(1e12, np.where(d1 == 0, 1.0, d1)), root / np.where(tiny, 1.0, d1))
        return (w0 / TWO_PI)[:, None], q[:, None]
    if n < 2:
        return np.empty((s_count, 0)), np.empty((s_count, 0))
    roots = _companion_roots(den) * w_ref  # rad/s
    upper = np.where(roots.imag > 1e-9 * np.abs(roots), roots, np.nan)
    w0 = np.abs(upper)
    # negative for right-half-plane (unstable) poles, as at degree 2; a pair on (or within
    # rounding of) the imaginary axis is lossless: its Q is reported as +-1e12, not infinity
    re = -2 * upper.real
    tiny = np.abs(re) < 1e-12 * w0
    q = np.where(tiny, np.copysign(1e12, np.where(re == 0, 1.0, re)), w0 / np.where(tiny, 1.0, re))
    q = np.where(np.isfinite(w0), q, np.nan)
    order = np.argsort(np.where(np.isnan(q), np.inf, q), axis=1)
    pairs = n // 2
    w0 = np.take_along_axis(w0, order, axis=1)[:, :pairs]
    q = np.take_along_axis(q, order, axis=1)[:, :pairs]
    return w0 / TWO_PI, q


def stage_metrics(circuit: Circuit, coeffs: list[StageCoefficients]) -> dict[str, np.ndarray]:
    """Each stage's f0 (Hz) and Q, named ``s<k>.f0_hz`` / ``s<k>.q`` (k: the design's stage
    number from 1; loaded stages solved as one network are named by their first stage).

    A first-order stage gives ``s<k>.fc_hz``. A stage of higher order gives its
    highest-Q pair as ``s<k>.f0_hz``/``s<k>.q`` and every pair as ``s<k>.p<j>.f0_hz``...

    Parameters
    ----------
    circuit : Circuit
        The compiled design (:func:`filters.engine.compile_design`).
    coeffs : list of StageCoefficients
        Per stage, the coefficients of every board (S, K), ascending powers of s.

    Returns
    -------
    dict[str, np.ndarray]
        Metric name -> (S,) values (f0 and fc in Hz, Q no unit).
    """
    out: dict[str, np.ndarray] = {}
    for i, (st, sc) in enumerate(zip(circuit.stages, coeffs), 1):
        k = st.number or i
        n = sc.den.shape[1] - 1
        if n == 1:
            out[stage_metric_name(k, "fc_hz")] = sc.den[:, 0] / sc.den[:, 1] * sc.w_ref / TWO_PI
            continue
        f0, q = pole_pairs(sc.den, sc.w_ref)
        if f0.shape[1] == 0:
            continue
        if np.all(np.isnan(q)):
            continue  # only real poles (a passive RC ladder): no f0 and Q to report
        best = np.argmax(np.where(np.isnan(q), -np.inf, q), axis=1)  # the highest-Q pair
        rows = np.arange(q.shape[0])
        out[stage_metric_name(k, "f0_hz")] = f0[rows, best]
        out[stage_metric_name(k, "q")] = q[rows, best]
        if f0.shape[1] > 1:
            for j in range(f0.shape[1]):
                out[stage_metric_name(k, "f0_hz", j + 1)] = f0[:, j]
                out[stage_metric_name(k, "q", j + 1)] = q[:, j]
    return out
