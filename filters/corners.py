"""Worst-case corners and the root-sum-square estimate, beside the Monte Carlo spread.

Every part is put at one end of its range (tolerance, temperature coefficient at either
end of the temperature range, drift; see :func:`filters.sampling.limits`). With up to
:data:`MAX_EXHAUSTIVE` parts that vary, every combination of ends is evaluated (2^n
boards in one batch). With more, each metric's two corners follow the signs of its
sensitivities at the nominal design (every part moved in the direction that raises the
metric, then the one that lowers it); each such corner is then polished by re-taking the
signs from the sensitivities at the corner itself until it stops moving (at most four
rounds). Exact for metrics monotone in each part; otherwise a guided corner is a good
estimate, not a guaranteed worst case (the report says which kind it is).

The RSS estimate combines the sensitivities with each part's spread:
sigma(metric) ~ sqrt(sum (S_i sigma_i)^2) with sigma_i the sampled standard deviation of
ln(value_i); the RSS limit uses the half-range of ln(value_i) instead of sigma_i.

Memory: corner and perturbed boards are evaluated in bounded batches
(:func:`filters.budget.evaluate_rows`; the polishing makes 2 x parts rows per corner and
builds them batch by batch), and the sampled spread is taken in chunks of boards
(:func:`filters.summary.column_stats`), so nothing grows with the boards, and the
corner search holds (corners x parts) numbers beside one batch.
"""
from __future__ import annotations

import itertools
from dataclasses import dataclass

import numpy as np

from .budget import evaluate_rows, log_deviations, metric_columns, perturbed_rows, sensitivities
from .evaluate import Ensemble, Prepared
from .metric_names import MISMATCH_PREFIX, is_log_metric, margin_name
from .networks import corner_grades
from .sampling import limits
from .summary import CHUNK, board_chunk, chunks, column_stats

__all__ = [
    "MAX_EXHAUSTIVE",
    "LINEAR_SHARE",
    "CornerRange",
    "Corners",
    "corner_values",
    "log_spread",
    "corners",
]

MAX_EXHAUSTIVE = 12
#: An RSS standard deviation below this share of the sampled one marks a metric as not
#: linear at the nominal (its first-order sensitivities miss the spread).
LINEAR_SHARE = 0.1


@dataclass(frozen=True)
class CornerRange:
    """One metric: corner extremes, Monte Carlo extremes, RSS estimates (metric units).

    ``linear`` is False when the metric is not linear at the nominal design: its RSS
    standard deviation (first-order sensitivities) is below :data:`LINEAR_SHARE` of the
    sampled one. A one-sided limit - a margin that is a minimum or maximum over
    frequencies, such as a ceiling over a flat passband - has zero first-order sensitivity
    there while boards still spread and fail. Then ``rss_std`` and ``rss_limit`` are NaN
    (null in JSON): read the sampled spread instead.
    """

    metric: str
    nominal: float
    corner_low: float
    corner_high: float
    mc_low: float
    mc_high: float
    rss_std: float
    rss_limit: float
    linear: bool = True

    def to_dict(self) -> dict[str, float | str | bool]:
        return {"metric": self.metric, "nominal": self.nominal, "corner_low": self.corner_low,
                "corner_high": self.corner_high, "mc_low": self.mc_low, "mc_high": self.mc_high,
                "rss_std": self.rss_std, "rss_limit": self.rss_limit, "linear": self.linear}


@dataclass(frozen=True)
class Corners:
    """All corner results. ``exhaustive``: every combination was tried; ``boards``: how
    many corner boards were evaluated; ``all_pass``: every corner board meets the mask."""

    ranges: dict[str, CornerRange]
    exhaustive: bool
    boards: int
    varying_parts: int
    all_pass: bool
    worst_margins: dict[str, float]

    def to_dict(self) -> dict:
        return {"exhaustive": self.exhaustive, "boards": self.boards, "varying_parts": self.varying_parts,
                "all_pass": self.all_pass, "worst_margins": self.worst_margins,
                "metrics": {k: v.to_dict() for k, v in self.ranges.items()}}


def corner_values(prep: Prepared, ens: Ensemble, names: list[str]) -> tuple[np.ndarray, bool, int]:
    """The corner boards' part values (boards, P), whether exhaustive, varying parts.

    Parameters
    ----------
    prep : Prepared
        The prepared design (its nominal values).
    ens : Ensemble
        The sampled boards (their extremes set the corners).
    names : list of str
        Metric names whose corners are wanted.

    Returns
    -------
    tuple[np.ndarray, bool, int]
        Corner part values (boards, P) in SI units, True when every combination of the
        varying parts' extremes is included, and the number of varying parts.
    """
    nom = prep.nominal.values
    lo, hi = limits(nom, corner_grades(ens.design, ens.grades), ens.design.analysis.conditions)
    varying = np.flatnonzero(hi > lo)
    m = varying.size
    if m == 0:
        return nom[None, :].copy(), True, 0
    if m <= MAX_EXHAUSTIVE:
        rows = np.repeat(nom[None, :], 2 ** m, axis=0)
        ends = np.array(list(itertools.product((0, 1), repeat=m)), dtype=bool)
        rows[:, varying] = np.where(ends, hi[varying], lo[varying])
        return rows, True, m
    sens = sensitivities(prep, names)
    targets = [(name, sign) for name in names for sign in (1, -1)
               if name in sens and np.all(np.isfinite(sens[name]))]
    rows = []
    for name, sign in targets:
        r = nom.copy()
        r[varying] = np.where(sign * sens[name][varying] > 0, hi[varying], lo[varying])
        rows.append(r)
    rows = _polish(prep, rows, targets, varying, lo, hi)
    return np.array(rows) if rows else nom[None, :].copy(), False, m


def _polish(prep: Prepared, rows: list[np.ndarray], targets: list[tuple[str, int]], varying: np.ndarray,
            lo: np.ndarray, hi: np.ndarray, rounds: int = 4) -> list[np.ndarray]:
    """Re-take each guided corner's sign pattern from the sensitivities at that corner,
    until no corner moves (a metric need not be monotone in each part)."""
    if not rows:
        return rows
    p = len(prep.nominal.values)
    for _ in range(rounds):
        base = np.array(rows)
        cols, _ = evaluate_rows(prep, 2 * p * len(rows), lambda a, b: perturbed_rows(base, a, b))
        moved = False
        for i, (name, sign) in enumerate(targets):
            y = cols[name].reshape(len(rows), 2 * p)[i]
            slope = y[0::2] - y[1::2]
            if not np.all(np.isfinite(slope)):
                continue
            new = rows[i].copy()
            new[varying] = np.where(sign * slope[varying] > 0, hi[varying],
                                    np.where(sign * slope[varying] < 0, lo[varying], rows[i][varying]))
            if not np.array_equal(new, rows[i]):
                rows[i] = new
                moved = True
        if not moved:
            break
    return rows


def log_spread(ens: Ensemble, nominal: np.ndarray, chunk: int | None = None) -> np.ndarray:
    """Standard deviation (ddof 0) of each part's ln(value / marked value) over the
    boards, (P,), taken in chunks of ``chunk`` boards (default
    :func:`filters.summary.board_chunk` of the part count; two passes).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).
    nominal : np.ndarray
        (P,) marked values in SI units.
    chunk : int, optional
        Boards per chunk.

    Returns
    -------
    np.ndarray
        (P,) float standard deviations of ln(value / marked value) (no unit).
    """
    n, p = ens.values.shape
    chunk = chunk or board_chunk(p)
    total = np.zeros(p)
    for sl in chunks(n, chunk):
        total += log_deviations(ens, nominal, sl).sum(axis=0)
    mean = total / max(n, 1)
    squares = np.zeros(p)
    for sl in chunks(n, chunk):
        d = log_deviations(ens, nominal, sl)
        d -= mean
        squares += np.einsum("ij,ij->j", d, d)
        del d  # one chunk's array at a time
    return np.sqrt(squares / max(n, 1))


def corners(ens: Ensemble, prep: Prepared, names: list[str] | None = None, chunk: int | None = None) -> Corners:
    """Corner extremes and RSS estimates of ``names`` (default: every metric and margin);
    the sampled spread is taken in chunks of ``chunk`` boards (default: see
    :func:`log_spread` and :data:`filters.summary.CHUNK`).

    Match spans (channels that must match) have no corners: a corner board is one channel
    standing for all, so its channels never differ; their margins and mismatches are left
    out of the ranges, of ``worst_margins`` and of ``all_pass`` (read their sampled spread).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards.
    prep : Prepared
        The prepared design.
    names : list of str, optional
        Metric names (default: every metric and margin).
    chunk : int, optional
        Boards per chunk.

    Returns
    -------
    Corners
        Per metric the corner range and RSS estimate (in the metric's unit), whether the
        corners were exhaustive, how many corner boards ran and whether all pass.
    """
    cols = metric_columns(ens)
    matched = {margin_name(s) for s in ens.design.mask if s.kind == "match"}
    names = [n for n in (list(cols) if names is None else names)
             if n not in matched and not n.startswith(MISMATCH_PREFIX)]
    rows, exhaustive, m = corner_values(prep, ens, names)
    ccols, cmarg = evaluate_rows(prep, rows.shape[0], lambda a, b: rows[a:b])
    nomcols = dict(prep.nominal.metrics)
    for j, s in enumerate(ens.design.mask):
        nomcols[margin_name(s)] = float(prep.nominal.margins[j])
    sens = sensitivities(prep, names)
    sigma = log_spread(ens, prep.nominal.values, chunk)
    lo, hi = limits(prep.nominal.values, corner_grades(ens.design, ens.grades), ens.design.analysis.conditions)
    half = 0.5 * (np.log(hi) - np.log(lo))
    ranges = {}
    for name in names:
        c = ccols.get(name)
        if c is None:
            continue
        y = cols[name]
        nominal = float(nomcols.get(name, np.nan))
        s = sens.get(name, np.full(sigma.size, np.nan))
        if is_log_metric(name):
            rss_std = nominal * float(np.sqrt(np.sum((s * sigma) ** 2)))
            rss_lim = nominal * float(np.sqrt(np.sum((s * half) ** 2)))
        else:  # s is per 1 %; back to per unit ln(value)
            rss_std = float(np.sqrt(np.sum((100 * s * sigma) ** 2)))
            rss_lim = float(np.sqrt(np.sum((100 * s * half) ** 2)))
        st = column_stats(y, ddof=1, chunk=chunk or CHUNK)
        cfin = c[np.isfinite(c)]
        sampled_std = st.std if st.count > 1 else 0.0
        linear = not (sampled_std > 0 and np.isfinite(rss_std) and rss_std < LINEAR_SHARE * sampled_std)
        if not linear:
            rss_std = rss_lim = float("nan")
        ranges[name] = CornerRange(
            name, nominal,
            float(cfin.min()) if cfin.size else np.nan, float(cfin.max()) if cfin.size else np.nan,
            st.minimum, st.maximum,
            rss_std, rss_lim, linear)
    judged = [j for j, s in enumerate(ens.design.mask) if s.kind != "match"]
    worst = {ens.design.mask[j].label: float(cmarg[:, j].min()) for j in judged}
    all_pass = bool(np.all(cmarg[:, judged] >= 0)) if cmarg[:, judged].size else True
    return Corners(ranges, exhaustive, int(rows.shape[0]), int(m), all_pass, worst)
