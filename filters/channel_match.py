"""Judging channels that must match: every channel against the mask, and the differences
between channels against the match spans.

The N channels of S boards are evaluated as N S rows of one batch (channel-major, see
:mod:`filters.channels`): no loop over boards. A board meets an ordinary span when every
channel meets it (its margin is the smallest over the channels). A match span's margin is
its limit minus the largest difference between any two channels over its band:
max over f of (max_c curve_c(f) - min_c curve_c(f)) (gain dB, phase deg or group delay s).

Besides the margin, each match span gives a signed mismatch metric per board,
``mismatch.<span label>`` (:func:`filters.metric_names.mismatch_name`): the mean over the
span's band of channel 2 minus channel 1, in the span's unit. It is linear in the parts'
deviations to first order, so its spread budget (:func:`mismatch_budgets`) says which
part's channel-to-channel difference explains the mismatch. With independent channels its
first-order variance is twice one channel's variance of the same band mean.
"""
from __future__ import annotations

from typing import Sequence

import numpy as np

from .channels import channel_values
from .grades import Grade
from .judge import SpanPlan
from .mask import QUANTITIES
from .metric_names import mismatch_name
from .networks import board_values
from .sampling import Conditions

__all__ = [
    "sample_values",
    "match_plans",
    "match_quantities",
    "match_margin",
    "evaluate_channels",
    "mismatch_deviations",
]


def sample_values(design, nominal: np.ndarray, grades: Sequence[Grade], scores: np.ndarray,
                  conditions: Conditions, seed: int, method: str, start: int) -> np.ndarray:
    """Part values of every channel, (N, S, P) SI units (N = 1 without channels: exactly
    :func:`filters.networks.board_values`, itself :func:`filters.sampling.part_values`
    without networks).

    Parameters
    ----------
    design : Design
        The design.
    nominal : np.ndarray
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part, design order.
    scores : np.ndarray
        (S, 4P + 1) part scores of channel 0.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.

    Returns
    -------
    np.ndarray
        (N, S, P) float part values in SI units.
    """
    if design.channels.count > 1:
        return channel_values(design, nominal, grades, scores, conditions, seed, method, start)
    return board_values(design, nominal, grades, scores, conditions, seed, method, start)[None]


def match_plans(plans: Sequence[SpanPlan]) -> list[int]:
    """Indexes of the match spans among ``plans``.

    Parameters
    ----------
    plans : sequence of SpanPlan
        The mask's plans (:func:`filters.judge.plan`).

    Returns
    -------
    list[int]
        Indexes into ``plans``.
    """
    return [j for j, p in enumerate(plans) if p.span.kind == "match"]


def match_quantities(design) -> tuple[str, ...]:
    """The quantities (``"gain"``, ``"phase"``, ``"delay"``) the design's match spans limit,
    in :data:`filters.mask.QUANTITIES` order; empty for a design of one channel.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    tuple[str, ...]
        Each quantity once.
    """
    if design.channels.count < 2:
        return ()
    used = {s.quantity for s in design.mask if s.kind == "match"}
    return tuple(q for q in QUANTITIES if q in used)


def match_margin(plan: SpanPlan, curves: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(margin, signed mismatch) of one match span, (S,) each, from ``curves`` (N, S, F) of
    the span's quantity: margin = min over the band of (limit - (max_c - min_c));
    mismatch = mean over the band of channel 2 minus channel 1.

    Parameters
    ----------
    plan : SpanPlan
        The match span's plan.
    curves : np.ndarray
        (N, S, F) the span's quantity (dB, deg or s) for every channel.

    Returns
    -------
    tuple[np.ndarray, np.ndarray]
        Margin (S,) and mismatch (S,), in the span's unit.
    """
    band = curves[:, :, plan.columns]
    spread = band.max(axis=0) - band.min(axis=0)
    margin = (plan.limit[None, :] - spread).min(axis=1)
    signed = (band[1] - band[0]).mean(axis=1)
    return margin, signed


def evaluate_channels(prep, every: np.ndarray, *, phase: bool = False, delay: bool = False,
                      out: tuple | None = None, metrics: bool = True, spread_out: dict | None = None):
    """:func:`filters.evaluate.evaluate_values` for boards of N channels.

    ``every`` (N, S, P). Returns an ``Evaluated`` of the S boards: channel 1's response and
    metrics, plus ``mismatch.<label>`` (S,) for each match span; margins (S, spans): each
    ordinary span's smallest over the channels, each match span's from the differences.
    Without channels (N = 1) exactly ``evaluate_values(prep, every[0], ...)``.

    Parameters
    ----------
    prep : Prepared
        The prepared design.
    every : np.ndarray
        (N, S, P) part values of every channel in SI units.
    phase : bool
        Compute the phase (deg).
    delay : bool
        Compute the group delay (s).
    out : tuple, optional
        ``(gain_db, phase, delay)`` arrays (S, F) for channel 1's curves.
    metrics : bool
        Compute the metrics.
    spread_out : dict, optional
        Quantity (a match span's: ``"gain"``, ``"phase"``, ``"delay"``) -> (S, F) array to
        fill with the largest difference between any two channels at each frequency
        (max over channels minus min; dB, deg or s): what the window's channel-match plot
        draws. Ignored without channels.

    Returns
    -------
    Evaluated
        Channel 1's response and metrics, the mismatches (S,) and margins (S, spans).
    """
    from .engine import Response
    from .evaluate import Evaluated, evaluate_values

    n, s, p = every.shape
    if n == 1:
        return evaluate_values(prep, every[0], phase=phase, delay=delay, out=out, metrics=metrics)
    match = match_plans(prep.plans)
    quantities = {prep.plans[j].span.quantity for j in match}
    want_phase, want_delay = phase or "phase" in quantities, delay or "delay" in quantities
    f = prep.freqs_hz.size
    gain = np.empty((n * s, f))
    ph = np.empty((n * s, f)) if want_phase else None
    tau = np.empty((n * s, f)) if want_delay else None
    ev = evaluate_values(prep, every.reshape(n * s, p), phase=want_phase, delay=want_delay,
                         out=(gain, ph, tau), metrics=metrics)
    marg = ev.margins.reshape(n, s, -1).min(axis=0)
    curves = {"gain": gain, "phase": ph, "delay": tau}
    cols = {k: v[:s] for k, v in ev.metrics.items()}
    for j in match:
        span = prep.plans[j].span
        marg[:, j], signed = match_margin(prep.plans[j], curves[span.quantity].reshape(n, s, f))
        if metrics:
            cols[mismatch_name(span)] = signed
    for q, dest in (spread_out or {}).items():  # every frequency, not only the spans' bands
        c = curves[q].reshape(n, s, f)
        np.subtract(c.max(axis=0), c.min(axis=0), out=dest)
    o = out or (None, None, None)
    for dest, src in zip(o, (gain, ph, tau)):
        if dest is not None and src is not None:
            dest[...] = src[:s]
    resp = Response(prep.freqs_hz, gain[:s], None if ph is None else ph[:s], None if tau is None else tau[:s])
    return Evaluated(resp, cols, marg)


def mismatch_deviations(design, nominal: np.ndarray, grades: Sequence[Grade], scores: np.ndarray,
                        conditions: Conditions, seed: int, method: str, start: int) -> np.ndarray:
    """ln(value in channel 2 / value in channel 1) of every part, (S, P): what a
    mismatch's spread budget regresses on (shared parts and parts of one reel at lot share 1
    give zero columns and no share).

    Parameters
    ----------
    design : Design
        The design.
    nominal : np.ndarray
        (P,) marked values in SI units.
    grades : sequence of Grade
        (P,) one grade per part, design order.
    scores : np.ndarray
        (S, 4P + 1) part scores of channel 0.
    conditions : Conditions
        Temperature range (deg C), lot share, service hours and temperature.
    seed : int
        The design's seed.
    method : str
        ``"random"`` or ``"sobol"``.
    start : int
        First board index.

    Returns
    -------
    np.ndarray
        (S, P) float (no unit).
    """
    every = channel_values(design, nominal, grades, scores, conditions, seed, method, start)
    return np.log(every[1] / every[0])
