"""The spread budget: which part explains how much of a metric's variance.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

From the sampled boards: the metric (its logarithm for frequencies and Q, the value
itself for decibels and for margins in dB, degrees or seconds:
:func:`filters.metric_names.is_log_metric`) is regressed by least squares on every part's log deviation
ln(value / marked value). A part's share is its term's variance over the metric's
variance, beta_i^2 Var(x_i) / Var(y); what the straight-line fit leaves (curvature,
interactions, parts correlated by lot) is reported as the remainder.

Networks (:mod:`filters.networks`): a member's log deviation holds the network's shared
error ln(1 + e_c); the fit takes that shared error as one regressor of its own, named after
the network, and each member's own remainder as the member's, so a shared error is
attributed to the network, not to a member (the network's sensitivity is the sum of its
members'). Away from 25 deg C the shared part of the members' temperature coefficient still
counts as the members' (the ensemble does not keep the temperature it was judged at). Boards of several channels (:mod:`filters.channels`): a match span's signed
mismatch ``mismatch.<label>`` is fitted on each part's log ratio between channel 2 and
channel 1 (and each network's shared-error difference), so its budget names the parts
whose channel-to-channel differences explain the mismatch (no sensitivity is given there);
a match span's margin (its limit minus the largest difference, not linear in the parts) is
given the budget of its signed mismatch.

Over an operating range or after a service life (:func:`worst_budget`, chosen by
:func:`filters.temperature.lived_budgets`) a span's margin is each board's smallest over the
judged temperatures, and its regressors are that board's parts where it is smallest: the
part values at that temperature (and age), recomputed chunk by chunk from the board's
scores, so a temperature coefficient or a drift that moves boards out at an extreme carries
its share. Every span is fitted on its own regressors in one pass over the boards.

Beside it, each part's normalized sensitivity at the nominal design,
S = d ln(metric) / d ln(value) (for linear metrics: the metric's unit per unit ln(value),
reported per 1 %: :func:`filters.metric_names.sensitivity_unit`),
by a central difference of +-1e-4 in ln(value) evaluated as extra rows of one batch.

Memory: the fit is taken in chunks of boards (:func:`filters.summary.board_chunk`), and rows
of perturbed designs are evaluated in bounded batches (:func:`evaluate_rows`), so neither
grows with the number of boards or parts beyond (parts x parts) sums.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from .evaluate import Ensemble, Prepared, evaluate_values
from .metric_names import (is_log_metric, is_margin, margin_name, margin_names, mismatch_name, parse,
                           sensitivity_unit)
from .networks import shared_log_deviation
from .summary import board_chunk, chunks

__all__ = [
    "STEP",
    "WORST_KEEP",
    "metric_columns",
    "BudgetEntry",
    "Budget",
    "largest_remainder",
    "ROW_NUMBERS",
    "evaluate_rows",
    "perturbed_rows",
    "sensitivities",
    "log_deviations",
    "budget_refs",
    "budget_columns",
    "mismatch_columns",
    "budget_names",
    "spread_budget",
    "worst_budget",
]

STEP = 1e-4
#: Numbers of regressors :func:`worst_budget` keeps between its two passes (16 MB of float64);
#: beyond it each chunk's are made again for the second pass.
WORST_KEEP = 1 << 21


def metric_columns(ens: Ensemble) -> dict[str, np.ndarray]:
    """Every per-sample metric including span margins, name -> (S,).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).

    Returns
    -------
    dict[str, np.ndarray]
        Metric name -> (S,) float, in each metric's unit.
    """
    out = dict(ens.metrics)
    for j, name in enumerate(margin_names(ens.design.mask)):
        out[name] = ens.margins[:, j]
    return out


@dataclass(frozen=True)
class BudgetEntry:
    """One part's line: share of the metric's variance (0-1) and its sensitivity."""

    ref: str
    share: float
    sensitivity: float
    sensitivity_unit: str

    def to_dict(self) -> dict[str, float | str]:
        return {"ref": self.ref, "share": self.share, "sensitivity": self.sensitivity,
                "sensitivity_unit": self.sensitivity_unit}


@dataclass(frozen=True)
class Budget:
    """The spread budget of one metric, largest share first. ``basis`` says where the
    metric was taken when a design is judged at more than one temperature (e.g. "over -40
    to 85 °C, worst temperature"); "" at the design's one board temperature."""

    metric: str
    entries: tuple[BudgetEntry, ...]
    remainder: float
    samples: int
    basis: str = ""

    def to_dict(self) -> dict:
        out = {"metric": self.metric, "samples": self.samples, "remainder": self.remainder,
               "parts": [e.to_dict() for e in self.entries]}
        if self.basis:
            out["basis"] = self.basis
        return out

    def rounded_percent(self, top: int | None = None, decimals: int = 1) -> list[tuple[str, float]]:
        """The shares as percentages rounded to ``decimals`` that add to exactly 100:
        ``[(ref, pct), ..., ("others", pct), ("unexplained", pct)]`` (largest-remainder
        rounding, Hare's method, over the ``top`` largest parts, the rest of the parts
        together, and the remainder). Entries that round to 0 are left out; empty when the
        metric does not vary."""
        shares = [max(0.0, e.share) if np.isfinite(e.share) else 0.0 for e in self.entries]
        if sum(shares) + self.remainder <= 0:
            return []
        k = len(shares) if top is None else min(top, len(shares))
        names = [e.ref for e in self.entries[:k]] + ["others", "unexplained"]
        values = shares[:k] + [sum(shares[k:]), self.remainder]
        pct = largest_remainder(values, 100.0, decimals)
        return [(n, v) for n, v in zip(names, pct) if v > 0]


def largest_remainder(values: list[float], total: float = 100.0, decimals: int = 1) -> list[float]:
    """``values`` (non-negative) scaled to add to ``total`` and rounded to ``decimals``
    places so that the rounded figures still add to exactly ``total`` (largest-remainder
    method: round down, then give the leftover units to the largest fractional parts).

    Parameters
    ----------
    values : list of float
        Non-negative shares.
    total : float
        The sum wanted (100 for percent).
    decimals : int
        Decimal places.

    Returns
    -------
    list[float]
        The rounded figures, in the order of ``values``.
    """
    unit = 10.0 ** -decimals
    whole = sum(values)
    if whole <= 0:
        return [0.0 for _ in values]
    exact = [v / whole * total / unit for v in values]
    floors = [int(np.floor(x)) for x in exact]
    left = int(round(total / unit)) - sum(floors)
    order = sorted(range(len(values)), key=lambda i: exact[i] - floors[i], reverse=True)
    for i in order[:left]:
        floors[i] += 1
    return [round(f * unit, decimals) for f in floors]


#: Numbers per curve array in one batch of :func:`evaluate_rows` (4 MB of float64): the
#: rows of sensitivities and corners are evaluated this many frequency points at a time.
ROW_NUMBERS = 1 << 19


def evaluate_rows(prep: Prepared, n: int, make_rows: Callable[[int, int], np.ndarray],
                  metrics: bool = True) -> tuple[dict[str, np.ndarray], np.ndarray]:
    """Metrics and margins of ``n`` rows of part values made by ``make_rows(lo, hi)``
    ((hi - lo, P) each), evaluated in batches of at most ``ROW_NUMBERS / frequencies``
    rows so that the curves in memory stay bounded whatever ``n`` is.

    Returns (columns name -> (n,) including ``margin.<label>``, margins (n, spans)).
    Each row's results do not depend on the batch it is in.

    Parameters
    ----------
    prep : Prepared
        The prepared design (:func:`filters.evaluate.prepare`).
    n : int
        Number of rows.
    make_rows : callable
        ``make_rows(lo, hi)`` -> (hi - lo, P) part values in SI units.
    metrics : bool
        Compute the metrics (False: margins only).

    Returns
    -------
    tuple[dict[str, np.ndarray], np.ndarray]
        Metric name -> (n,) values, and the margins (n, spans) in each span's unit.
    """
    step = max(1, ROW_NUMBERS // max(1, prep.freqs_hz.size))
    cols: dict[str, np.ndarray] = {}
    marg = np.empty((n, len(prep.plans)))
    for sl in chunks(n, step):
        ev = evaluate_values(prep, make_rows(sl.start, sl.stop), metrics=metrics)
        marg[sl] = ev.margins
        for name, v in ev.metrics.items():
            cols.setdefault(name, np.full(n, np.nan))[sl] = v
    for j, s in enumerate(prep.design.mask):
        cols[margin_name(s)] = marg[:, j]
    return cols, marg


def perturbed_rows(base: np.ndarray, lo: int, hi: int) -> np.ndarray:
    """Rows ``[lo, hi)`` of the central-difference designs around ``base`` (B, P): for
    base row b and part k, row ``2 P b + 2 k`` has part k times exp(STEP) and the next
    row times exp(-STEP). Shape (hi - lo, P).

    Parameters
    ----------
    base : np.ndarray
        (B, P) part values in SI units.
    lo : int
        First row.
    hi : int
        One past the last row (at most 2 P B).

    Returns
    -------
    np.ndarray
        (hi - lo, P) float part values in SI units.
    """
    p = base.shape[1]
    r = np.arange(lo, hi)
    rows = base[r // (2 * p)].copy()
    k = (r % (2 * p)) // 2
    rows[np.arange(r.size), k] *= np.where(r % 2 == 0, np.exp(STEP), np.exp(-STEP))
    return rows


def sensitivities(prep: Prepared, names: list[str]) -> dict[str, np.ndarray]:
    """Normalized sensitivity of each metric to each part at the nominal design, (P,).

    Parameters
    ----------
    prep : Prepared
        The prepared design (:func:`filters.evaluate.prepare`).
    names : list of str
        Metric names.

    Returns
    -------
    dict[str, np.ndarray]
        Metric name -> (P,) sensitivities: d ln metric / d ln value for a log metric, else
        the metric's unit per 1 % (:func:`filters.metric_names.sensitivity_unit`).
    """
    nom = prep.nominal.values
    base = nom[None, :]
    cols, _ = evaluate_rows(prep, 2 * nom.size, lambda lo, hi: perturbed_rows(base, lo, hi))
    out = {}
    for name in names:
        y = cols.get(name)
        if y is None:
            continue
        up, down = y[0::2], y[1::2]
        if is_log_metric(name):
            with np.errstate(invalid="ignore", divide="ignore"):
                out[name] = (np.log(up) - np.log(down)) / (2 * STEP)
        else:
            out[name] = (up - down) / (2 * STEP) * 0.01  # per 1 % change
    return out


def log_deviations(ens: Ensemble, nominal: np.ndarray, sl: slice) -> np.ndarray:
    """ln(value / marked value) of the boards in ``sl``, (boards, P).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).
    nominal : np.ndarray
        (P,) marked values in SI units.
    sl : slice
        The boards to take.

    Returns
    -------
    np.ndarray
        (boards, P) float (no unit).
    """
    return np.log(ens.values[sl] / nominal)


def budget_refs(design) -> list[str]:
    """The names of a budget's regressors: every part's ref, then every network's name.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[str]
        P part refs, then the network names.
    """
    return [p.ref for p in design.parts] + [n.name for n in design.networks]


def _split_shared(design, x: np.ndarray, shared: np.ndarray) -> np.ndarray:
    """``x`` (boards, P) with each member's network share ``shared`` (boards, networks)
    taken out and appended as the networks' columns: (boards, P + networks)."""
    idx = {p.ref: i for i, p in enumerate(design.parts)}
    for j, net in enumerate(design.networks):
        x[:, [idx[m] for m in net.members]] -= shared[:, j:j + 1]
    return np.hstack([x, shared])


def budget_columns(ens: Ensemble, nominal: np.ndarray, sl: slice) -> np.ndarray:
    """The budget's regressors of the boards in ``sl``: :func:`log_deviations`, and with
    networks each network's shared ln(1 + e_c) split off its members, (boards, P + networks).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).
    nominal : np.ndarray
        (P,) marked values in SI units.
    sl : slice
        The boards to take.

    Returns
    -------
    np.ndarray
        (boards, P + networks) float (no unit).
    """
    x = log_deviations(ens, nominal, sl)
    d = ens.design
    if not d.networks:
        return x
    shared = shared_log_deviation(d, ens.seed, ens.method, ens.start + sl.start, ens.start + sl.stop)
    return _split_shared(d, x, shared)


def mismatch_columns(ens: Ensemble, nominal: np.ndarray, sl: slice) -> np.ndarray:
    """Regressors of a mismatch (boards of several channels): each part's ln(value in
    channel 2 / value in channel 1), and each network's shared-error difference split off
    its members, (boards, P + networks).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).
    nominal : np.ndarray
        (P,) marked values in SI units.
    sl : slice
        The boards to take.

    Returns
    -------
    np.ndarray
        (boards, P + networks) float (no unit).
    """
    from .channel_match import mismatch_deviations
    from .sampling import draw_scores

    d = ens.design
    lo, hi = ens.start + sl.start, ens.start + sl.stop
    scores = draw_scores(ens.seed, len(d.parts), lo, hi, ens.method)  # type: ignore[arg-type]
    x = mismatch_deviations(d, nominal, ens.grades, scores, d.analysis.conditions, ens.seed, ens.method, lo)
    if not d.networks:
        return x
    shared = (shared_log_deviation(d, ens.seed, ens.method, lo, hi, 1)
              - shared_log_deviation(d, ens.seed, ens.method, lo, hi, 0))
    shared[:, [j for j, n in enumerate(d.networks) if n.across_channels]] = 0.0  # one package
    return _split_shared(d, x, shared)


def budget_names(cols: dict[str, np.ndarray]) -> list[str]:
    """The default metrics of a spread budget: cutoff or band-pass centre and bandwidth,
    stage f0/Q (not single pole pairs), every span margin.

    Parameters
    ----------
    cols : dict of str to np.ndarray
        Metric name -> (S,) columns (:func:`metric_columns`).

    Returns
    -------
    list[str]
        Metric names.
    """
    def default(name: str) -> bool:
        if name in ("cutoff_hz", "centre_hz", "bandwidth_hz") or is_margin(name):
            return True
        mid = parse(name)
        return mid.kind == "stage" and mid.quantity in ("f0_hz", "q") and not mid.pair

    return [n for n in cols if default(n)]


def spread_budget(ens: Ensemble, prep: Prepared, names: list[str] | None = None,
                  chunk: int | None = None) -> dict[str, Budget]:
    """Spread budgets of ``names`` (default: :func:`budget_names`).

    Taken in chunks of ``chunk`` boards (default :func:`filters.summary.board_chunk` of the
    part count; two passes: means, then centred cross products
    X'X (P, P) and X'y), so memory does not grow with the boards beyond one chunk. Each
    metric is fitted on the boards where it exists: the normal equations of its centred
    log deviations, solved by least squares (``numpy.linalg.lstsq``).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (part values (S, P)).
    prep : Prepared
        The prepared design (:func:`filters.evaluate.prepare`).
    names : list of str, optional
        Metric names (default: :func:`budget_names`).
    chunk : int, optional
        Boards per chunk.

    Returns
    -------
    dict[str, Budget]
        Metric name -> its budget: each part's share of the variance (fractions, largest
        first) and the share no part explains.
    """
    cols = metric_columns(ens)
    if names is None:
        names = budget_names(cols)
    design = ens.design
    sens = _with_networks(design, sensitivities(prep, names))
    refs = budget_refs(design)
    nom = prep.nominal.values
    chunk = chunk or board_chunk(len(refs))
    # a match span's margin is budgeted by its signed mismatch (the margin is limit - |mismatch|)
    via = {m: _mismatch_of(m, design.mask) for m in names}
    mismatch = list(dict.fromkeys(v for v in via.values() if v in cols))
    plain = [m for m in names if via[m] is None]
    out = _fit(ens, cols, plain, lambda sl: budget_columns(ens, nom, sl), refs, sens, chunk) if plain else {}
    if mismatch:
        out.update(_fit(ens, cols, mismatch, lambda sl: mismatch_columns(ens, nom, sl), refs, sens, chunk))
    for m, v in via.items():
        if v is not None and v != m and v in out:
            out[m] = replace(out[v], metric=m)
    return {name: out[name] for name in names if name in out}


def _with_networks(design, sens: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Sensitivities (P,) extended by each network's (P + networks,): a network's shared
    error moves all its members, so its sensitivity is the sum of theirs."""
    if not design.networks:
        return sens
    idx = {q.ref: i for i, q in enumerate(design.parts)}
    return {k: np.concatenate([v, [v[[idx[m] for m in net.members]].sum() for net in design.networks]])
            for k, v in sens.items()}


def worst_budget(ens: Ensemble, prep: Prepared, margins: np.ndarray, where: np.ndarray, conditions,
                 basis: str, chunk: int | None = None) -> dict[str, Budget]:
    """Spread budgets of each span's worst margin over several judged conditions (the
    temperatures of an operating range, or after a service life).

    Per board and span the margin is its smallest over the conditions, ``margins``
    (S, spans), found at ``conditions[where[b, j]]``; its regressors are the board's own
    parts as they are there: :func:`budget_columns` of the part values at that condition
    (the same scores, so the same tolerance, temperature-coefficient and drift draws),
    recomputed chunk by chunk from the seed (nothing (S, P) is kept per condition). So a
    part whose temperature change pushes the boards out at -40 deg C carries its share of
    the worst margin. Match spans (several channels) are left out: their budget stays
    that of the signed mismatch at the board temperature. Sensitivities are the nominal
    design's at the board temperature (:func:`sensitivities`).

    Parameters
    ----------
    ens : Ensemble
        The sampled boards (their seed, method, start and grades).
    prep : Prepared
        The prepared design (:func:`filters.evaluate.prepare`).
    margins : np.ndarray
        (S, spans) each board's smallest margin over the conditions, in each span's unit.
    where : np.ndarray
        (S, spans) int, the index into ``conditions`` of each smallest margin.
    conditions : sequence of Conditions
        The judged conditions (temperatures in deg C, service hours).
    basis : str
        What the budgets are of, kept in :attr:`Budget.basis` (e.g. "over -40 to 85 °C,
        worst temperature").
    chunk : int, optional
        Boards per chunk.

    Returns
    -------
    dict[str, Budget]
        ``margin.<label>`` -> its budget (fractions, largest first), for every span but match spans.
    """
    design = ens.design
    names = margin_names(design.mask)
    keep = [j for j, s in enumerate(design.mask) if s.kind != "match"]
    if not keep:
        return {}
    sens = _with_networks(design, sensitivities(prep, [names[j] for j in keep]))
    refs = budget_refs(design)
    nom = prep.nominal.values
    chunk = chunk or board_chunk(len(refs))
    cols = {names[j]: margins[:, j] for j in keep}
    # the fit reads each chunk's regressors twice (means, then cross products); when every
    # span's regressors of every board fit in WORST_KEEP numbers they are made once
    memo: dict[int, list[np.ndarray]] | None = {} if len(keep) * ens.samples * len(refs) <= WORST_KEEP else None

    def x_of(sl: slice) -> list[np.ndarray]:
        xs = memo.pop(sl.start, None) if memo is not None else None  # the second pass takes them back
        if xs is None:
            xs = _worst_columns(ens, nom, conditions, where[sl][:, keep], sl)
            if memo is not None:
                memo[sl.start] = xs
        return xs

    fitted = _fit(ens, cols, [names[j] for j in keep], x_of, refs, sens, chunk,
                  group=list(range(len(keep))))  # each span on its own regressors
    return {n: replace(b, basis=basis) for n, b in fitted.items()}


def _worst_columns(ens: Ensemble, nominal: np.ndarray, conditions, which: np.ndarray,
                   sl: slice) -> list[np.ndarray]:
    """For each column k of ``which`` (boards, K): :func:`budget_columns` of the boards in
    ``sl`` with each board's parts at ``conditions[which[b, k]]``, (boards, P + networks)."""
    from .channel_match import sample_values
    from .sampling import draw_scores

    d = ens.design
    lo, hi = ens.start + sl.start, ens.start + sl.stop
    scores = draw_scores(ens.seed, len(d.parts), lo, hi, ens.method)  # type: ignore[arg-type]
    # each board's parts at each condition: a handful of conditions, the boards vectorized
    logs = np.stack([np.log(sample_values(d, nominal, ens.grades, scores, c, ens.seed, ens.method, lo)[0] / nominal)
                     for c in conditions])  # (conditions, boards, P)
    rows = np.arange(hi - lo)
    xs = [logs[which[:, k].astype(np.intp), rows] for k in range(which.shape[1])]
    if not d.networks:
        return xs
    shared = shared_log_deviation(d, ens.seed, ens.method, lo, hi)
    return [_split_shared(d, x, shared) for x in xs]


def _mismatch_of(name: str, mask) -> str | None:
    """The signed mismatch a budget of ``name`` is fitted on (``name`` itself for a
    mismatch, ``mismatch.<label>`` for a match span's margin), else None."""
    mid = parse(name)
    if mid.kind == "mismatch":
        return name
    if mid.kind == "margin":
        span = next((s for s in mask if s.label == mid.span), None)
        if span is not None and span.kind == "match":
            return mismatch_name(span)
    return None


def _fit(ens: Ensemble, cols: dict[str, np.ndarray], names: list[str], x_of: Callable[[slice], np.ndarray],
         refs: list[str], sens: dict[str, np.ndarray], chunk: int, group: list[int] | None = None) -> dict[str, Budget]:
    """Budgets of ``names`` fitted on the regressors ``x_of(boards)`` (boards, len(refs)).

    With ``group`` (one index a name) ``x_of(boards)`` returns a list of such arrays and
    name k is fitted on array ``group[k]`` (each span's own regressors over a range: one
    pass over the boards for all of them)."""
    n, p = ens.samples, len(refs)
    own = group is not None
    grp = group if group is not None else [0] * len(names)
    groups = sorted(set(grp))
    at = dict(zip(names, grp))

    def xs_of(sl: slice) -> list[np.ndarray]:
        got = x_of(sl)
        return got if own else [got]  # type: ignore[return-value]

    def y_of(name: str, sl: slice) -> np.ndarray:
        y = cols[name][sl]
        if is_log_metric(name):
            with np.errstate(invalid="ignore", divide="ignore"):
                y = np.log(y)
        return y

    # Pass 1: every board's log-deviation sums; each metric's count, sum and the
    # log-deviation sums over the boards where it is finite.
    sum_x = {g: np.zeros(p) for g in groups}
    count = dict.fromkeys(names, 0)
    sum_y = dict.fromkeys(names, 0.0)
    sum_x_ok = {name: np.zeros(p) for name in names}
    for sl in chunks(n, chunk):
        xs = xs_of(sl)
        sxs = {g: xs[g].sum(axis=0) for g in groups}
        for g in groups:
            sum_x[g] += sxs[g]
        for name in names:
            x, sx = xs[at[name]], sxs[at[name]]
            y = y_of(name, sl)
            ok = np.isfinite(y)
            if ok.all():
                count[name] += y.size
                sum_y[name] += float(np.sum(y))
                sum_x_ok[name] += sx
            elif ok.any():
                count[name] += int(ok.sum())
                sum_y[name] += float(np.sum(y[ok]))
                sum_x_ok[name] += x[ok].sum(axis=0)
        xs = x = None  # one chunk's arrays at a time: none held while the next is made
    mx = {g: sum_x[g] / n if n else sum_x[g] for g in groups}
    my = {name: sum_y[name] / count[name] if count[name] else 0.0 for name in names}
    # Pass 2: cross products centred on every board's mean log deviation (xc) and on each
    # metric's own mean; the shift to the metric's own boards' mean comes after.
    gram = {g: np.zeros((p, p)) for g in groups}
    gram_ok = {name: np.zeros((p, p)) for name in names}
    sxy = {name: np.zeros(p) for name in names}
    syy = dict.fromkeys(names, 0.0)
    sy = dict.fromkeys(names, 0.0)
    for sl in chunks(n, chunk):
        xcs = [x - mx[g] if g in mx else x for g, x in enumerate(xs_of(sl))]
        gs = {g: xcs[g].T @ xcs[g] for g in groups}
        for g in groups:
            gram[g] += gs[g]
        for name in names:
            xc, gm = xcs[at[name]], gs[at[name]]
            y = y_of(name, sl)
            ok = np.isfinite(y)
            if not ok.any():
                continue
            if ok.all():
                gram_ok[name] += gm
                xo = xc
            else:
                xo = xc[ok]
                gram_ok[name] += xo.T @ xo
            yc = y[ok] - my[name]
            sxy[name] += xo.T @ yc
            syy[name] += float(yc @ yc)
            sy[name] += float(np.sum(yc))
        xcs = gs = xc = xo = None  # one chunk's arrays at a time: none held while the next is made
    out: dict[str, Budget] = {}
    betas: dict[str, np.ndarray] = {}
    for g in groups:  # one least-squares solve for every metric of a group found on every board
        varying = np.diag(gram[g]) > 0
        full = [name for name in names if at[name] == g and count[name] == n and syy[name] > 0 and n >= 3]
        if full and varying.any():
            rhs = np.column_stack([sxy[name] for name in full])
            sol = np.linalg.lstsq(gram[g][np.ix_(varying, varying)], rhs[varying], rcond=None)[0]
            for k, name in enumerate(full):
                b = np.zeros(p)
                b[varying] = sol[:, k]
                betas[name] = b
    for name in names:
        cnt = count[name]
        s_vec = sens.get(name, np.full(p, np.nan))
        unit = sensitivity_unit(name, ens.design.mask)
        if cnt < 3 or syy[name] == 0:
            entries = tuple(BudgetEntry(r, 0.0, float(v), unit) for r, v in zip(refs, s_vec))
            out[name] = Budget(name, entries, 0.0, int(cnt))
            continue
        # shift the sums to this metric's own boards' means: d = its mean log deviation - mx
        d = sum_x_ok[name] / cnt - mx[at[name]]
        sxx = gram_ok[name] - cnt * np.outer(d, d)
        beta = betas.get(name)
        if beta is None:  # some boards lack this metric: fit on the boards that have it
            beta = np.zeros(p)
            use = np.diag(sxx) > 0
            if use.any():
                rhs = sxy[name] - d * sy[name]
                beta[use] = np.linalg.lstsq(sxx[np.ix_(use, use)], rhs[use], rcond=None)[0]
        var_y = (syy[name] - sy[name] ** 2 / cnt) / cnt
        shares = beta ** 2 * (np.diag(sxx) / cnt) / var_y
        if shares.sum() > 1.0:  # parts correlated against each other: scale to the whole variance
            shares = shares / shares.sum()
        remainder = float(max(0.0, 1.0 - shares.sum()))
        order = np.argsort(-shares)
        entries = tuple(BudgetEntry(refs[i], float(shares[i]), float(s_vec[i]), unit) for i in order)
        out[name] = Budget(name, entries, remainder, int(cnt))
    return out
