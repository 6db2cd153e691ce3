"""Judging sampled responses against the spec mask.

For every sample and span: the margin, the distance from the response to the limit at
the span's worst grid point (dB for gain spans, degrees for phase spans, seconds for
delay spans); positive margin = the span passes. The grid holds every span edge, so a
span is checked at its ends and at every grid point between them.

Gains are compared in dB: the response's gain in dB (from the engine) minus the limit.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .engine import Response
from .mask import Span


@dataclass(frozen=True)
class SpanPlan:
    """Grid indices of a span and its limit there, prepared once per grid."""

    span: Span
    index: np.ndarray      # grid indices inside [f1, f2]
    limit: np.ndarray      # limit at those points (dB, deg or s)


def plan(mask: tuple[Span, ...], freqs_hz: np.ndarray, nominal_reference_db: float) -> list[SpanPlan]:
    """Prepare each span for judging on ``freqs_hz``; relative gain spans are taken
    relative to ``nominal_reference_db`` (the nominal design's passband gain)."""
    out = []
    for s in mask:
        rel = 1e-12 * freqs_hz
        idx = np.flatnonzero((freqs_hz >= s.f1 - rel) & (freqs_hz <= s.f2 + rel))
        lim = s.limit_at(freqs_hz[idx])
        if s.quantity == "gain" and s.relative:
            lim = lim + nominal_reference_db
        out.append(SpanPlan(s, idx, lim))
    return out


def margins(plans: list[SpanPlan], resp: Response) -> np.ndarray:
    """Margin of every sample on every span, shape (samples, spans).

    Gain spans: dB; phase spans: degrees; delay spans: seconds (limit minus the delay's
    variation over the band). Positive = passes.
    """
    s = resp.gain_db.shape[0]
    out = np.empty((s, len(plans)))
    for j, p in enumerate(plans):
        q = p.span.quantity
        if q == "gain":
            d = resp.gain_db[:, p.index] - p.limit
            out[:, j] = d.min(axis=1) if p.span.kind == "floor" else (-d).min(axis=1)
        elif q == "phase":
            assert resp.phase_deg is not None, "phase spans need the phase"
            d = resp.phase_deg[:, p.index] - p.limit
            out[:, j] = d.min(axis=1) if p.span.kind == "floor" else (-d).min(axis=1)
        else:
            assert resp.delay_s is not None, "delay spans need the group delay"
            band = resp.delay_s[:, p.index]
            out[:, j] = p.span.limit1 - (band.max(axis=1) - band.min(axis=1))
    return out


def needs(mask: tuple[Span, ...]) -> tuple[bool, bool]:
    """(needs phase, needs group delay) to judge ``mask``."""
    return (any(s.quantity == "phase" for s in mask), any(s.quantity == "delay" for s in mask))
