"""Spread bands for drawing: per-frequency quantiles of sampled curves.

Everything here is plain numpy on arrays shaped (samples, freqs); the window turns the
results into plot items. Quantiles use ``numpy.partition`` (linear time) rather than a
full sort: each band edge is an order statistic of the boards' values at that frequency
(rank ``floor(tail (S - 1))`` and ``ceil((1 - tail) (S - 1))``, numpy's ``"lower"`` and
``"higher"`` percentiles), exactly.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .workers import POOL, WORKERS

__all__ = [
    "INNER",
    "Bands",
    "bands",
    "traces",
    "pick_rows",
]

INNER = 0.98  # the central share of boards in the inner band


@dataclass(frozen=True)
class Bands:
    """Per-frequency spread of one quantity, each (F,): the central ``share`` of boards
    between ``inner_low`` and ``inner_high``, every board between ``low`` and ``high``."""

    share: float
    inner_low: np.ndarray
    inner_high: np.ndarray
    low: np.ndarray
    high: np.ndarray


def bands(curves: np.ndarray, share: float = INNER) -> Bands:
    """Bands of ``curves`` (S, F). NaN entries are not expected (the engine keeps finite).

    Parameters
    ----------
    curves : np.ndarray
        (S, F) float curves (gain in dB, phase in deg or delay in s).
    share : float
        Fraction of boards inside the central band, in (0, 1).

    Returns
    -------
    Bands
        Per frequency (F,) arrays in the curves' unit: the central ``share`` of boards
        (``inner_low``, ``inner_high``) and every board (``low``, ``high``).
    """
    s = curves.shape[0]
    if s == 1:
        c = curves[0]
        return Bands(share, c, c, c, c)
    tail = (1 - share) / 2
    k_lo = int(np.floor(tail * (s - 1)))
    k_hi = int(np.ceil((1 - tail) * (s - 1)))
    f = curves.shape[1]
    out = np.empty((4, f))

    def work(lo: int, hi: int) -> None:
        block = np.ascontiguousarray(curves[:, lo:hi].T)  # (freqs, samples): selection runs along memory
        # two selections of one rank each, the second only among the values above the first:
        # one call with several ranks costs about three times as much (numpy 2.x, measured).
        # The same order statistics, so the bands are exactly those of a sort.
        block.partition(k_lo, axis=1)
        if k_hi > k_lo:
            block[:, k_lo + 1:].partition(k_hi - k_lo - 1, axis=1)
        out[0, lo:hi] = block[:, k_lo]
        out[1, lo:hi] = block[:, k_hi]
        out[2, lo:hi] = block[:, :k_lo + 1].min(axis=1)  # the lowest lie at or below rank k_lo
        out[3, lo:hi] = block[:, k_hi:].max(axis=1)  # the highest at or above rank k_hi

    # frequency blocks on the shared thread pool (numpy releases the GIL while it works)
    edges = np.linspace(0, f, WORKERS + 1).astype(int)
    futures = [POOL.submit(work, int(a), int(b)) for a, b in zip(edges[:-1], edges[1:]) if b > a]
    for fut in futures:
        fut.result()
    return Bands(share, out[0], out[1], out[2], out[3])


def traces(curves: np.ndarray, rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sample curves ``rows`` as one NaN-separated polyline: (x index, y) flat arrays.

    Returns ``(x, y)`` where x repeats 0..F-1 per row followed by NaN; the window maps x
    to frequencies. Drawing many curves as one item is much faster than one item each.

    Parameters
    ----------
    curves : np.ndarray
        (S, F) float curves.
    rows : np.ndarray
        (R,) int board indices to draw.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        (x, y), each (R * (F + 1),) float: frequency index and value, NaN between rows.
    """
    f = curves.shape[1]
    k = len(rows)
    y = np.full((k, f + 1), np.nan)
    y[:, :f] = curves[rows]
    x = np.tile(np.append(np.arange(f, dtype=float), np.nan), k)
    return x, y.ravel()


def pick_rows(passed: np.ndarray, count: int, failing: bool) -> np.ndarray:
    """Up to ``count`` board indices, passing or failing ones, spread over the ensemble.

    Parameters
    ----------
    passed : np.ndarray
        (S,) bool, True where a board passes.
    count : int
        Most indices wanted.
    failing : bool
        Pick failing boards (True) or passing ones (False).

    Returns
    -------
    np.ndarray
        (at most count,) int board indices, ascending.
    """
    idx = np.flatnonzero(~passed if failing else passed)
    if idx.size <= count:
        return idx
    return idx[np.linspace(0, idx.size - 1, count).astype(int)]
