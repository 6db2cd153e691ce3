"""The report's channel-match section, for a design of several channels with match spans
(:mod:`filters.channel_match`).

One chart per quantity the match spans limit (gain difference in dB, phase difference in
deg, group-delay difference in s with one SI prefix): the largest difference between any
two channels of a board at each frequency (max over the channels minus min, what a match
span judges), as bands over the boards whose curves the analysis kept (the central share
of boards dark, every board light, as the spread figure), with each match span's limit
drawn over its band and the forbidden side hatched. Beside the charts a table: per match
span its limit, the largest difference the chart's boards show in its band, the failing
boards and worst margin over all analysed boards, and the top parts of its mismatch budget.

Nothing here evaluates a board: the differences and their bands are the analysis's own
(:attr:`filters.analysis.Curves.spread_bands`).
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from ..bands import Bands
from ..mask import Span
from ..metric_names import SPAN_UNIT, margin_name, mismatch_name
from .charts import svg_spread_plot
from .context import Context
from .document import esc, figure, table
from .numbers import format_count, format_metric, format_pct, format_quantity

__all__ = [
    "AXIS_TITLES",
    "has_channel_match",
    "match_section",
    "svg_match_plot",
]

#: The charts' y-axis titles by match quantity (the unit follows in brackets).
AXIS_TITLES = {"gain": "gain difference", "phase": "phase difference", "delay": "group-delay difference"}
_HEADROOM = 1.25  # the y axis reaches this far above the highest band or limit
_PREFIX = {-15: "f", -12: "p", -9: "n", -6: "\u00b5", -3: "m", 0: ""}


def has_channel_match(ctx: Context) -> bool:
    """Whether the report has a channel-match section: two channels or more and a match
    span whose differences the analysis kept.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    bool
        True for a design of several channels with match spans.
    """
    curves = ctx.result.curves
    return ctx.design.channels.count > 1 and curves is not None and bool(curves.channel_spread)


def _prefix(top_s: float) -> tuple[str, float]:
    """(SI prefix, factor) for seconds up to ``top_s``."""
    if not (top_s > 0 and math.isfinite(top_s)):
        return "", 1.0
    e = min(max(3 * math.floor(math.log10(top_s) / 3), -15), 0)
    return _PREFIX[e], 10.0 ** e


def svg_match_plot(freqs_hz: np.ndarray, spread: Bands, spans: list[Span], quantity: str, *,
                   width: int = 760, height: int = 300, ident: str = "match", title: str = "",
                   boards: int | None = None) -> str:
    """The chart of one match quantity: the bands of the boards' largest difference
    between channels against log frequency, from 0 (the nominal design's channels are
    identical) to a little above the highest band or limit, and each match span of
    ``quantity`` in ``spans`` as a limit line over its band, hatched above (not allowed).

    Parameters
    ----------
    freqs_hz : np.ndarray
        (F,) frequencies in Hz.
    spread : Bands
        The bands of the largest difference, each (F,), in dB, deg or s.
    spans : list of Span
        The mask; its match spans of ``quantity`` are drawn.
    quantity : str
        "gain", "phase" or "delay".
    width : int
        Width in px.
    height : int
        Height in px.
    ident : str
        Prefix of the SVG element ids.
    title : str
        The SVG's title (default: from the quantity).
    boards : int, optional
        Number of boards, for the legend.

    Returns
    -------
    str
        SVG text.
    """
    limits = [s for s in spans if s.kind == "match" and s.quantity == quantity]
    high = spread.high[np.isfinite(spread.high)]
    top = max([float(high.max()) if high.size else 0.0] + [max(s.limit1, s.end_limit) for s in limits])
    prefix, factor = _prefix(top) if quantity == "delay" else ("", 1.0)
    # drawn as ceilings on the difference (absolute, in the axis' unit): svg_spread_plot's look
    drawn = [replace(s, quantity="gain", relative=False, limit1=s.limit1 / factor,
                     limit2=None if s.limit2 is None else s.limit2 / factor) for s in limits]
    scaled = replace(spread, inner_low=spread.inner_low / factor, inner_high=spread.inner_high / factor,
                     low=spread.low / factor, high=spread.high / factor)
    f = np.asarray(freqs_hz, dtype=float)
    return svg_spread_plot(f, np.zeros(f.shape), scaled, drawn, 0.0, width=width, height=height, ident=ident,
                           title=title or f"{AXIS_TITLES[quantity]} between channels",
                           y_range=(0.0, _HEADROOM * top / factor if top > 0 else 1.0), boards=boards,
                           ylabel=f"{AXIS_TITLES[quantity]} ({prefix}{SPAN_UNIT[quantity]})")


def _in_band(freqs: np.ndarray, span: Span) -> np.ndarray:
    return (freqs >= span.f1 * (1 - 1e-9)) & (freqs <= span.f2 * (1 + 1e-9))


def _limit_text(span: Span) -> str:
    unit = SPAN_UNIT[span.quantity]
    one = format_quantity(span.limit1, unit, signed=False)
    if span.limit2 is None or span.limit2 == span.limit1:
        return f"at most {one}"
    return f"at most {one} to {format_quantity(span.limit2, unit, signed=False)}"


def match_section(ctx: Context) -> str:
    """The channel-match section: the yield of the matched set, one chart per match
    quantity and a table of the match spans.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, curves = ctx.result, ctx.design, ctx.curves
    y = result.yield_
    out: list[str] = []
    add = out.append
    add(f"<p>Each board carries {d.channels.count} identical channels. A board passes only if every channel "
        f"meets the mask and the channels match: the yield of the matched set is <b>{format_pct(y.estimate)}</b> "
        f"({ctx.conf_pct} interval {format_pct(y.low)} to {format_pct(y.high)}; {format_count(y.passed)} of "
        f"{format_count(y.samples)} boards).</p>")
    if curves.boards == result.samples:
        subset = f"all {format_count(curves.boards)} analysed boards"
    else:
        subset = f"the first {format_count(curves.boards)} of the {format_count(result.samples)} analysed boards"
    spread = curves.spread_bands
    for q, b in spread.items():
        name = f"match-{q}"
        ctx.figures[name] = svg_match_plot(curves.freqs_hz, b, list(d.mask), q, ident=name, boards=curves.boards,
                                           title=f"{AXIS_TITLES[q]} between channels")
        add(figure(name, f"Largest {esc(AXIS_TITLES[q])} between any two channels of a board at each frequency, "
                         f"over {subset}: light band every board, dark band the central {b.share * 100:g} %, "
                         "black the nominal design (identical channels). Hatched above each match span's "
                         "limit: not allowed."))
    failures = {s.name: s for s in result.spans}
    rows = []
    for j, span in enumerate(d.mask):
        if span.kind != "match" or span.quantity not in spread:
            continue
        b, unit = spread[span.quantity], SPAN_UNIT[span.quantity]
        inside = _in_band(curves.freqs_hz, span)
        inner = float(np.max(b.inner_high[inside])) if inside.any() else float("nan")
        every = float(np.max(b.high[inside])) if inside.any() else float("nan")
        fails = failures.get(span.label)
        budget = result.budget.get(mismatch_name(span)) or result.budget.get(margin_name(span))
        parts = "" if budget is None else ", ".join(
            f"{ref} {pct:.1f} %" for ref, pct in budget.rounded_percent(top=3))
        rows.append([esc(span.label), esc(_limit_text(span)),
                     f"{format_quantity(span.f1, 'Hz')} to {format_quantity(span.f2, 'Hz')}",
                     format_quantity(inner, unit, signed=False), format_quantity(every, unit, signed=False),
                     "n/a" if fails is None else f"{format_count(fails.failed)} ({format_pct(fails.fraction)})",
                     "n/a" if fails is None else format_metric(fails.worst_margin_db, unit), esc(parts)])
    add(table(["Match span", "Limit", "Band", f"Largest, central {b.share * 100:g} %", "Largest, every board",
               "Failing boards", "Worst margin", "Mismatch budget"], rows, numeric=[3, 4, 5, 6]))
    add("<p>Limit: the largest difference allowed between any two channels. Largest: the largest difference "
        "in the span's band over the chart's boards (the central share of them, and every one); the failing "
        "boards and the worst margin are over every analysed board (for a flat limit, the largest difference of all "
        "boards is the limit minus the worst margin). The mismatch budget is the share of the span's margin "
        "variance explained by each part's channel-to-channel difference (see the spread budget). Estimates "
        "under the grades' stated distributions: confirm the match by measuring real boards.</p>")
    return "\n".join(out)
