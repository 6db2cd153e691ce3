"""Judging sampled responses against the spec mask.

For every sample and span: the margin, the distance from the response to the limit at
the span's worst grid point (dB for gain spans, degrees for phase spans, seconds for
delay spans); positive margin = the span passes. The grid holds every span edge, so a
span is checked at its ends and at every grid point between them.

Gains are compared in dB: the response's gain in dB (from the engine) minus the limit.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from .engine import PowerResponse, Response
from .mask import Span

__all__ = [
    "SpanPlan",
    "plan",
    "JUDGE_ROWS",
    "margins",
    "needs",
]


@dataclass(frozen=True)
class SpanPlan:
    """Grid indices of a span and its limit there, prepared once per grid."""

    span: Span
    index: np.ndarray      # grid indices inside [f1, f2] (consecutive: the grid is sorted)
    limit: np.ndarray      # limit at those points (dB, deg or s)

    @cached_property
    def columns(self) -> slice:
        """The grid columns of ``index`` as a slice (a view of a response, no copy)."""
        if self.index.size == 0:
            return slice(0, 0)
        return slice(int(self.index[0]), int(self.index[-1]) + 1)

    @cached_property
    def flat(self) -> float | None:
        """The limit when it is the same at every point of the span, else None."""
        if self.limit.size and np.all(self.limit == self.limit[0]):
            return float(self.limit[0])
        return None


def plan(mask: tuple[Span, ...], freqs_hz: np.ndarray, nominal_reference_db: float) -> list[SpanPlan]:
    """Prepare each span for judging on ``freqs_hz``; relative gain spans are taken
    relative to ``nominal_reference_db`` (the nominal design's passband gain).

    Parameters
    ----------
    mask : tuple of Span
        The spec mask.
    freqs_hz : np.ndarray
        (F,) the frequency grid in Hz (holding every span edge).
    nominal_reference_db : float
        The nominal design's passband gain in dB.

    Returns
    -------
    list[SpanPlan]
        One plan per span: its grid indices and its limit there (dB, deg or s).
    """
    out = []
    for s in mask:
        rel = 1e-12 * freqs_hz
        idx = np.flatnonzero((freqs_hz >= s.f1 - rel) & (freqs_hz <= s.f2 + rel))
        lim = s.limit_at(freqs_hz[idx])
        if s.quantity == "gain" and s.relative:
            lim = lim + nominal_reference_db
        out.append(SpanPlan(s, idx, lim))
    return out


JUDGE_ROWS = 256  # rows per block where a sloped limit needs a temporary (stays in cache)


def margins(plans: list[SpanPlan], resp: Response | PowerResponse) -> np.ndarray:
    """Margin of every sample on every span, shape (samples, spans).

    Gain spans: dB; phase spans: degrees; delay spans: seconds (limit minus the delay's
    variation over the band). Positive = passes. A match span's margin here is its limit
    (each row is one channel standing for all); boards of several channels are judged by
    :func:`filters.channel_match.evaluate_channels`.

    Each span reads its columns as a slice of the response (a view, never a copy). With a
    flat limit the margin is min(curve) - limit (floor) or limit - max(curve) (ceiling):
    rounding is monotonic, so this equals the smallest of the pointwise differences bit for
    bit. A sloped limit is subtracted in blocks of :data:`JUDGE_ROWS` rows.

    A :class:`filters.engine.PowerResponse` (the gain still a power ratio) is judged to the
    same numbers, bit for bit: a flat gain span takes the extreme power over its columns
    and converts that one number per board to dB (the conversion is monotonic, so it is
    the extreme of the converted points); a sloped one converts its own columns only.

    Parameters
    ----------
    plans : list of SpanPlan
        From :func:`plan`.
    resp : Response or PowerResponse
        Responses (S, F): gain in dB (or as a power ratio), phase in deg, delay in s.

    Returns
    -------
    np.ndarray
        (S, spans) float margins in each span's unit; positive passes.
    """
    power = resp if isinstance(resp, PowerResponse) else None
    s = power.boards if power is not None else resp.gain_db.shape[0]
    out = np.empty((s, len(plans)))
    done = _power_margins(power, plans, out) if power is not None else [False] * len(plans)
    for j, p in enumerate(plans):
        if done[j]:  # judged from the power ratios already
            continue
        q = p.span.quantity
        if p.span.kind == "match":  # rows here are one channel copied to all: no difference
            out[:, j] = p.limit.min() if p.limit.size else p.span.limit1
            continue  # boards of several channels: filters/channel_match.py
        if q == "delay":
            assert resp.delay_s is not None, "delay spans need the group delay"
            band = resp.delay_s[:, p.columns]
            out[:, j] = p.span.limit1 - (band.max(axis=1) - band.min(axis=1))
            continue
        if q == "gain":
            assert isinstance(resp, Response)
            curves = resp.gain_db
        else:
            assert resp.phase_deg is not None, "phase spans need the phase"
            curves = resp.phase_deg
        _span_margin(curves[:, p.columns], p, out[:, j])
    return out


def _span_margin(band: np.ndarray, p: SpanPlan, out: np.ndarray) -> None:
    """Margin (S,) of the curves ``band`` (S, width: a span's columns) against ``p``'s
    limit, into ``out``: min(band - limit) for a floor, min(limit - band) for a ceiling."""
    floor = p.span.kind == "floor"
    flat = p.flat
    if flat is not None:
        if floor:
            np.subtract(band.min(axis=1), flat, out=out)
        else:  # -(max - limit): the same number as min(-(band - limit))
            np.subtract(band.max(axis=1), flat, out=out)
            np.negative(out, out=out)
        return
    rows = min(band.shape[0], JUDGE_ROWS)
    tmp = np.empty((rows, band.shape[1]))
    for lo in range(0, band.shape[0], JUDGE_ROWS):
        hi = min(band.shape[0], lo + JUDGE_ROWS)
        d = np.subtract(band[lo:hi], p.limit, out=tmp[:hi - lo])
        if floor:
            d.min(axis=1, out=out[lo:hi])
        else:
            d.max(axis=1, out=out[lo:hi])
            np.negative(out[lo:hi], out=out[lo:hi])


def _power_margins(resp: PowerResponse, plans: list[SpanPlan], out: np.ndarray) -> list[bool]:
    """:func:`_span_margin` of the gain floors and ceilings from the power ratios of
    ``resp`` (S, F) or, by frequency, (F, S), into ``out`` (S, spans): the same numbers. A
    flat limit converts the extreme power over the span (the lowest gain for a floor, the
    highest for a ceiling; 1/|H|^2 turns them over), all such spans in one conversion; a
    sloped one converts the span's columns and judges them in dB. Returns which spans
    were judged."""
    done = [p.span.quantity == "gain" and p.span.kind in ("floor", "ceiling") for p in plans]
    flat = [j for j, p in enumerate(plans) if done[j] and p.flat is not None]
    along = 0 if resp.by_frequency else 1  # the frequency axis of resp.power

    def band(p: SpanPlan) -> np.ndarray:
        return resp.power[p.columns] if resp.by_frequency else resp.power[:, p.columns]

    for j, p in enumerate(plans):
        if done[j] and p.flat is None:
            if not resp.by_frequency:
                _span_margin(resp.gain_db(band(p)), p, out[:, j])
                continue
            d = np.subtract(resp.gain_db(band(p)), p.limit[:, None])  # as _span_margin, by frequency
            # (reduced into a new array: numpy reduces into a strided column of out ~5 x slower)
            out[:, j] = d.min(axis=0) if p.span.kind == "floor" else np.negative(d.max(axis=0))
    if not flat:
        return done
    extremes = np.empty((len(flat), resp.boards))  # (spans, S): each span's a contiguous row
    for k, j in enumerate(flat):
        b = band(plans[j])
        floor = plans[j].span.kind == "floor"
        (b.max if floor == resp.inverse else b.min)(axis=along, out=extremes[k])
    db = resp.gain_db(extremes)
    db -= np.array([plans[j].flat for j in flat])[:, None]
    ceiling = [k for k, j in enumerate(flat) if plans[j].span.kind == "ceiling"]
    if ceiling:  # -(max - limit), as _span_margin
        db[ceiling] = -db[ceiling]
    out[:, flat] = db.T
    return done


def needs(mask: tuple[Span, ...]) -> tuple[bool, bool]:
    """(needs phase, needs group delay) to judge ``mask``.

    Parameters
    ----------
    mask : tuple of Span
        The spec mask.

    Returns
    -------
    tuple[bool, bool]
        Whether the phase and whether the group delay must be computed.
    """
    return (any(s.quantity == "phase" for s in mask), any(s.quantity == "delay" for s in mask))
