"""Summaries of an ensemble's metrics: nominal, mean, spread and percentiles.

Plain numbers for the command line, the JSON output and the report; no formatting for
people here beyond names.

Every statistic is computed in chunks of :data:`CHUNK` boards (two passes: counts, sums,
extremes; then squared deviations and the candidates for the percentiles), so the memory
it takes does not grow with the number of boards beyond one chunk and the tails the
percentiles need (1 % of the boards each, 0.8 MB at 10 million boards). Nothing is
approximated: the percentiles are numpy's default (linear between the two order
statistics around ``q / 100 * (n - 1)``), found exactly by keeping each tail's smallest
(largest) values chunk by chunk; sums add chunk sums, so results differ from one
whole-array numpy call only by rounding (below 1e-12 relative, tested).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Iterator, Sequence

import numpy as np

from .evaluate import Ensemble

__all__ = [
    "CHUNK",
    "CHUNK_NUMBERS",
    "board_chunk",
    "chunks",
    "Stats",
    "column_stats",
    "MetricSummary",
    "summarize",
]

#: Boards per chunk of the streaming statistics here and in the spread budget and corners
#: (65,536 boards: 0.5 MB a column).
CHUNK = 1 << 16


#: Numbers per chunk where each board brings a row of P numbers (the spread budget's log
#: deviations): ``board_chunk(P)`` boards, 4 MB a chunk array.
CHUNK_NUMBERS = 1 << 19


def board_chunk(width: int) -> int:
    """Boards per chunk for rows of ``width`` numbers (at least 256).

    Parameters
    ----------
    width : int
        Numbers per board row.

    Returns
    -------
    int
        Boards per chunk.
    """
    return max(256, CHUNK_NUMBERS // max(1, width))


def chunks(n: int, size: int = CHUNK) -> Iterator[slice]:
    """Slices of ``[0, n)`` of at most ``size`` boards each.

    Parameters
    ----------
    n : int
        Number of boards.
    size : int
        Most boards per slice.

    Yields
    ------
    slice
        Consecutive slices covering ``[0, n)``.
    """
    size = max(1, int(size))
    for lo in range(0, n, size):
        yield slice(lo, min(n, lo + size))


@dataclass(frozen=True)
class Stats:
    """Streaming statistics of the finite entries of one column (S,): ``count``, ``mean``,
    ``std`` (with the ``ddof`` asked), ``minimum``, ``maximum`` and the asked
    ``percentiles`` (same order). NaN where there is nothing to take them of."""

    count: int
    mean: float
    std: float
    minimum: float
    maximum: float
    percentiles: tuple[float, ...] = ()


def _keep(cand: np.ndarray, m: int, low: bool) -> np.ndarray:
    """The ``m`` smallest (``low``) or largest values of ``cand``, unordered."""
    if cand.size <= m:
        return cand
    if low:
        return np.partition(cand, m - 1)[:m]
    return np.partition(cand, cand.size - m)[cand.size - m:]


def _lerp(a: float, b: float, t: float) -> float:
    """numpy's linear interpolation between two order statistics (exact at both ends)."""
    d = b - a
    return float(b - d * (1 - t)) if t >= 0.5 else float(a + d * t)


def column_stats(v: np.ndarray, ddof: int = 1, percentiles: Sequence[float] = (),
                 chunk: int = CHUNK) -> Stats:
    """Statistics of the finite entries of ``v`` (S,), taken chunk by chunk.

    ``percentiles`` in 0..100 as :func:`numpy.percentile` (method ``linear``) gives them
    for the finite entries; ``std`` is 0.0 for a single entry when ``ddof`` is 1.

    Parameters
    ----------
    v : np.ndarray
        (S,) float values (NaN and inf left out).
    ddof : int
        Delta degrees of freedom of the standard deviation.
    percentiles : sequence of float
        Percentiles wanted, in 0..100.
    chunk : int
        Boards per chunk.

    Returns
    -------
    Stats
        Count, mean, standard deviation, min, max and the percentiles, in ``v``'s unit.
    """
    n, total, lo_v, hi_v = 0, 0.0, np.inf, -np.inf
    for sl in chunks(v.shape[0], chunk):
        ok = v[sl][np.isfinite(v[sl])]
        if ok.size:
            n += ok.size
            total += float(np.sum(ok))
            lo_v, hi_v = min(lo_v, float(ok.min())), max(hi_v, float(ok.max()))
    nan = float("nan")
    if n == 0:
        return Stats(0, nan, nan, nan, nan, tuple(nan for _ in percentiles))
    mean = total / n
    # Each percentile needs two order statistics: rank k is among the k + 1 smallest values
    # (or the n - k largest), so only the shorter tail is kept.
    ranks = []
    for q in percentiles:
        idx = (q / 100.0) * (n - 1)
        k = int(np.floor(idx))
        ranks.append((k, min(k + 1, n - 1), idx - k))
    need_low = max([k2 + 1 for _, k2, _ in ranks if k2 < n / 2], default=0)
    need_high = max([n - k1 for k1, k2, _ in ranks if k2 >= n / 2], default=0)
    low = np.empty(0)
    high = np.empty(0)
    squares = 0.0
    for sl in chunks(v.shape[0], chunk):
        ok = v[sl][np.isfinite(v[sl])]
        if not ok.size:
            continue
        d = ok - mean
        squares += float(np.sum(d * d))
        if need_low:
            low = _keep(np.concatenate([low, _keep(ok, need_low, True)]), need_low, True)
        if need_high:
            high = _keep(np.concatenate([high, _keep(ok, need_high, False)]), need_high, False)
    low.sort()
    high.sort()
    pct = []
    for k1, k2, t in ranks:
        if k2 < n / 2:
            a, b = low[k1], low[k2]
        else:  # high holds ranks n - need_high .. n - 1
            a, b = high[k1 - (n - need_high)], high[k2 - (n - need_high)]
        pct.append(_lerp(float(a), float(b), t))
    std = float(np.sqrt(squares / (n - ddof))) if n > ddof else 0.0
    return Stats(n, mean, std, lo_v, hi_v, tuple(pct))


@dataclass(frozen=True)
class MetricSummary:
    """Statistics of one per-sample metric. ``valid`` counts samples where it exists
    (a cutoff outside the analysed range is missing, not zero)."""

    name: str
    nominal: float
    mean: float
    std: float
    p01: float
    p99: float
    minimum: float
    maximum: float
    valid: int

    @property
    def rel_std(self) -> float:
        """Standard deviation relative to the mean (fraction)."""
        return self.std / abs(self.mean) if self.mean else float("nan")

    def to_dict(self) -> dict[str, float | int]:
        return {"nominal": self.nominal, "mean": self.mean, "std": self.std, "p01": self.p01,
                "p99": self.p99, "min": self.minimum, "max": self.maximum, "valid": self.valid}


def summarize(ens: Ensemble, name: str, chunk: int = CHUNK) -> MetricSummary:
    """Summary of metric ``name`` over the ensemble's samples (NaN samples left out),
    taken in chunks of ``chunk`` boards (:func:`column_stats`).

    Parameters
    ----------
    ens : Ensemble
        An evaluated ensemble.
    name : str
        Metric name (:mod:`filters.metric_names`).
    chunk : int
        Boards per chunk.

    Returns
    -------
    MetricSummary
        Nominal value, mean, standard deviation and percentiles over the boards where the
        metric exists (``valid``), in the metric's unit.
    """
    st = column_stats(ens.metrics[name], ddof=1, percentiles=(1, 99), chunk=chunk)
    nominal = ens.nominal.metrics.get(name, float("nan"))
    p01, p99 = st.percentiles
    return MetricSummary(name, nominal, st.mean, st.std, p01, p99, st.minimum, st.maximum, st.count)
