"""The spread budget: which part explains how much of a metric's variance.

From the sampled boards: the metric (its logarithm for frequencies and Q, the value
itself for dB margins) is regressed by least squares on every part's log deviation
ln(value / marked value). A part's share is its term's variance over the metric's
variance, beta_i^2 Var(x_i) / Var(y); what the straight-line fit leaves (curvature,
interactions, parts correlated by lot) is reported as the remainder.

Beside it, each part's normalized sensitivity at the nominal design,
S = d ln(metric) / d ln(value) (for dB metrics: dB per unit ln(value), reported per 1 %),
by a central difference of +-1e-4 in ln(value) evaluated as extra rows of one batch.
"""
from __future__ import annotations

from dataclasses import dataclass

import re

import numpy as np

from .evaluate import Ensemble, Prepared, evaluate_values

STEP = 1e-4


def is_log_metric(name: str) -> bool:
    """Frequencies and Q are budgeted on a log scale; dB values and margins linearly."""
    return name.endswith("_hz") or name.endswith(".q")


def is_pair_metric(name: str) -> bool:
    """``s1.p2.q``: one pole pair of a higher-order stage (kept out of default lists)."""
    return bool(re.match(r"^s\d+\.p\d+\.", name))


def margin_names(ens: Ensemble) -> list[str]:
    """Metric names of the span margins, ``margin.<span label>``."""
    return [f"margin.{s.label}" for s in ens.design.mask]


def metric_columns(ens: Ensemble) -> dict[str, np.ndarray]:
    """Every per-sample metric including span margins, name -> (S,)."""
    out = dict(ens.metrics)
    for j, name in enumerate(margin_names(ens)):
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
    """The spread budget of one metric, largest share first."""

    metric: str
    entries: tuple[BudgetEntry, ...]
    remainder: float
    samples: int

    def to_dict(self) -> dict:
        return {"metric": self.metric, "samples": self.samples, "remainder": self.remainder,
                "parts": [e.to_dict() for e in self.entries]}

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
    method: round down, then give the leftover units to the largest fractional parts)."""
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


def sensitivities(prep: Prepared, names: list[str]) -> dict[str, np.ndarray]:
    """Normalized sensitivity of each metric to each part at the nominal design, (P,)."""
    nom = prep.nominal.values
    p = nom.size
    rows = np.repeat(nom[None, :], 2 * p, axis=0)
    k = np.arange(p)
    rows[2 * k, k] *= np.exp(STEP)
    rows[2 * k + 1, k] *= np.exp(-STEP)
    ev = evaluate_values(prep, rows)
    cols = dict(ev.metrics)
    for j, s in enumerate(prep.design.mask):
        cols[f"margin.{s.label}"] = ev.margins[:, j]
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


def spread_budget(ens: Ensemble, prep: Prepared, names: list[str] | None = None) -> dict[str, Budget]:
    """Spread budgets of ``names`` (default: cutoff or band-pass centre and bandwidth,
    stage f0/Q, every span margin)."""
    cols = metric_columns(ens)
    if names is None:
        names = [n for n in cols if n in ("cutoff_hz", "centre_hz") or n.endswith(".f0_hz") or n.endswith(".q")
                 or n.startswith("margin.") or n == "bandwidth_hz"]
        names = [n for n in names if not is_pair_metric(n)]
    sens = sensitivities(prep, names)
    refs = [p.ref for p in ens.design.parts]
    x = np.log(ens.values / prep.nominal.values)
    xc_all = x - x.mean(axis=0)
    varying = xc_all.std(axis=0) > 0
    ys = {}
    for name in names:
        y = cols[name]
        if is_log_metric(name):
            with np.errstate(invalid="ignore", divide="ignore"):
                y = np.log(y)
        ys[name] = y
    # One least-squares solve for every metric that is finite on every board (the usual
    # case): normal equations on the centred log deviations, X'X is parts x parts.
    full = [n for n in names if np.all(np.isfinite(ys[n]))]
    betas: dict[str, np.ndarray] = {}
    if full and varying.any():
        xv = xc_all[:, varying]
        ymat = np.column_stack([ys[n] - ys[n].mean() for n in full])
        sol = np.linalg.lstsq(xv.T @ xv, xv.T @ ymat, rcond=None)[0]
        for k, n in enumerate(full):
            b = np.zeros(len(refs))
            b[varying] = sol[:, k]
            betas[n] = b
    out: dict[str, Budget] = {}
    for name in names:
        y = ys[name]
        ok = np.isfinite(y)
        s_vec = sens.get(name, np.full(len(refs), np.nan))
        unit = "ln/ln" if is_log_metric(name) else "dB per %"
        if ok.sum() < 3 or np.var(y[ok]) == 0:
            entries = tuple(BudgetEntry(r, 0.0, float(v), unit) for r, v in zip(refs, s_vec))
            out[name] = Budget(name, entries, 0.0, int(ok.sum()))
            continue
        xc = x[ok] - x[ok].mean(axis=0)
        yc = y[ok] - y[ok].mean()
        beta = betas.get(name)
        if beta is None:  # some boards lack this metric: fit on the boards that have it
            beta = np.zeros(len(refs))
            use = xc.std(axis=0) > 0
            if use.any():
                beta[use] = np.linalg.lstsq(xc[:, use], yc, rcond=None)[0]
        var_y = float(np.var(yc))
        shares = beta ** 2 * np.var(xc, axis=0) / var_y
        if shares.sum() > 1.0:  # parts correlated against each other: scale to the whole variance
            shares = shares / shares.sum()
        remainder = float(max(0.0, 1.0 - shares.sum()))
        order = np.argsort(-shares)
        entries = tuple(BudgetEntry(refs[i], float(shares[i]), float(s_vec[i]), unit) for i in order)
        out[name] = Budget(name, entries, remainder, int(ok.sum()))
    return out
