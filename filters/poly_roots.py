"""Roots of many polynomials of one degree at once, for the boards of one batch.

The boards of a batch scatter around one nominal design, so their polynomials' roots lie
close to one another. :func:`batch_roots` starts every board at the roots of the batch's
middle board (one companion-matrix eigenvalue problem) and refines all boards together by
the Aberth-Ehrlich iteration (each root moved by p/p' corrected for the other roots;
cubic convergence near simple roots), vectorized over boards. A board whose roots have
not settled within :data:`MAX_STEPS` steps (a double root, a board far from the rest)
gets ``numpy.linalg.eigvals`` of its companion matrix, as every board used to. For a
4th-order denominator and 8,000 boards this takes a few milliseconds where the
eigenvalue problems take about 50 ms.
"""
from __future__ import annotations

import numpy as np

__all__ = ["MAX_STEPS", "companion_eigvals", "batch_roots"]

MAX_STEPS = 30
_SETTLED = 1e-9  # a step below this fraction of its root leaves an error of its cube: settled


def companion_eigvals(den: np.ndarray) -> np.ndarray:
    """Roots of ``den`` (S, n + 1), ascending powers, as eigenvalues of the companion
    matrices: (S, n) complex.

    Parameters
    ----------
    den : np.ndarray
        (S, n + 1) polynomial coefficients, ascending powers.

    Returns
    -------
    np.ndarray
        (S, n) complex roots.
    """
    s_count, k = den.shape
    n = k - 1
    comp = np.zeros((s_count, n, n))
    comp[:, 1:, :-1] = np.eye(n - 1)
    comp[:, :, -1] = -den[:, :-1] / den[:, -1:]
    return np.linalg.eigvals(comp).astype(complex)


def batch_roots(den: np.ndarray) -> np.ndarray:
    """Roots of the polynomials ``den`` (S, n + 1), ascending powers, n >= 1: (S, n)
    complex, in the same order for every board (that of the middle board's roots).

    Parameters
    ----------
    den : np.ndarray
        (S, n + 1) polynomial coefficients, ascending powers, n >= 1.

    Returns
    -------
    np.ndarray
        (S, n) complex roots.
    """
    s_count, k = den.shape
    n = k - 1
    with np.errstate(all="ignore"):
        monic = den[:, :-1] / den[:, -1:]
    finite = np.all(np.isfinite(monic), axis=1)
    if s_count < 16 or not finite.any():
        return companion_eigvals(den)
    middle = np.flatnonzero(finite)[finite.sum() // 2]
    start = companion_eigvals(den[middle:middle + 1])[0]
    # distinct starting points even where the middle board has a double root
    start = start * (1 + 1e-7 * np.arange(1, n + 1)) + 1e-7 * 1j * np.abs(start).max()
    z = np.repeat(start[:, None], s_count, axis=1)  # (n, S): each root's boards contiguous
    coef = np.ascontiguousarray(monic.T)  # (n, S)
    active = np.flatnonzero(finite)
    with np.errstate(all="ignore"):
        for _ in range(MAX_STEPS):
            zi, c = z[:, active], coef[:, active]
            p = np.ones_like(zi)
            dp = np.zeros_like(zi)
            for m in range(n - 1, -1, -1):  # Horner for p and p' (monic: leading 1)
                dp = dp * zi + p
                p = p * zi + c[m]
            others = np.zeros_like(zi)  # sum over the other roots of 1 / (z_i - z_j)
            for i in range(n):
                for j in range(i + 1, n):
                    inv = 1 / (zi[i] - zi[j])
                    others[i] += inv
                    others[j] -= inv
            ratio = p / dp
            step = ratio / (1 - ratio * others)
            zi -= step
            z[:, active] = zi
            moving = ~np.all(np.abs(step) <= _SETTLED * np.abs(zi), axis=0)
            active = active[moving]
            if active.size == 0:
                break
    z = np.ascontiguousarray(z.T)
    rest = np.union1d(active, np.flatnonzero(~finite)) if active.size or not finite.all() else active
    if rest.size:
        z[rest] = companion_eigvals(den[rest])
    return z
