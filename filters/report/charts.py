"""The report's SVG charts: plain SVG text generated with numpy (no plotting library).

Over 500 lines: one small SVG toolkit (axes, ticks, text, hatching) that its four figures share.

* :func:`svg_spread_plot` - gain against log frequency: the spread bands of the sampled
  boards, the nominal curve and the mask spans with their forbidden side hatched;
* :func:`svg_histogram` - a metric's histogram, failing boards stacked on passing ones;
* :func:`svg_bar_chart` - horizontal bars in percent (the spread budget);
* :func:`svg_cost_yield` - total cost of the cheapest grades against the yield target.

Sizes are in SVG user units (px); every text is at least :data:`MIN_FONT` px, so a figure
printed at the text width of an A4 page (about 510 pt for 760 px) keeps its labels at
8 pt or more. Colours are from the Okabe-Ito palette (distinguishable with the common
colour-vision deficiencies); floor and ceiling hatching also differ in direction.
"""
from __future__ import annotations

import html
import math
import re
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..bands import Bands
from ..mask import Span
from ..values import format_value
from .numbers import format_count

__all__ = [
    "BLUE",
    "SKY",
    "ORANGE",
    "PURPLE",
    "VERMILLION",
    "BLACK",
    "GRID",
    "AXIS",
    "SVG_NS",
    "MIN_FONT",
    "PLOT_TOP",
    "svg_spread_plot",
    "svg_histogram",
    "svg_bar_chart",
    "svg_cost_yield",
]

# Okabe-Ito colours
BLUE = "#0072B2"
SKY = "#56B4E9"
ORANGE = "#E69F00"
PURPLE = "#CC79A7"
VERMILLION = "#D55E00"
BLACK = "#000000"
GRID = "#d9d9d9"
AXIS = "#555555"

SVG_NS = "http://www.w3.org/2000/svg"

esc = html.escape

#: The smallest font size of any text in a figure, in px (SVG user units).
MIN_FONT = 12
#: Top edge of a plot area in px: the legend row and the y-axis title sit above it.
PLOT_TOP = 46.0


def _g(x: float) -> str:
    return f"{x:g}"


# --- SVG building blocks ---------------------------------------------------------------

def _c(x: float) -> str:
    """A coordinate with one decimal, without a trailing ".0"."""
    s = f"{x:.1f}"
    if s.endswith(".0"):
        s = s[:-2]
    return "0" if s == "-0" else s


def _pts(xs: np.ndarray, ys: np.ndarray) -> str:
    return " ".join(f"{_c(a)},{_c(b)}" for a, b in zip(xs, ys))


def _slug(name: str) -> str:
    return re.sub(r"[^A-Za-z0-9_-]+", "-", name).strip("-") or "fig"


class _Svg:
    """Collects SVG elements; :meth:`text` returns a standalone SVG document."""

    def __init__(self, width: int, height: int, title: str):
        self.width, self.height = int(width), int(height)
        self.items: list[str] = [f"<title>{esc(title)}</title>"]

    def add(self, item: str) -> None:
        self.items.append(item)

    def label(self, x: float, y: float, text: str, *, anchor: str = "start", size: float = MIN_FONT,
              fill: str = "#222222", rotate: bool = False, weight: str = "normal") -> None:
        tr = ""
        if rotate:  # translate, then rotate about the origin: drawn alike by every SVG renderer
            tr = f' transform="translate({_c(x)} {_c(y)}) rotate(-90)"'
            x = y = 0.0
        wt = f' font-weight="{weight}"' if weight != "normal" else ""
        self.add(f'<text x="{_c(x)}" y="{_c(y)}" text-anchor="{anchor}" font-size="{size}" '
                 f'fill="{fill}"{wt}{tr}>{esc(text)}</text>')

    def line(self, x1: float, y1: float, x2: float, y2: float, stroke: str, width: float = 1.0,
             extra: str = "") -> None:
        self.add(f'<line x1="{_c(x1)}" y1="{_c(y1)}" x2="{_c(x2)}" y2="{_c(y2)}" stroke="{stroke}" '
                 f'stroke-width="{_g(width)}"{extra}/>')

    def rect(self, x: float, y: float, w: float, h: float, fill: str, extra: str = "") -> None:
        self.add(f'<rect x="{_c(x)}" y="{_c(y)}" width="{_c(max(w, 0.0))}" height="{_c(max(h, 0.0))}" '
                 f'fill="{fill}"{extra}/>')

    def text(self) -> str:
        head = (f'<svg xmlns="{SVG_NS}" width="{self.width}" height="{self.height}" '
                f'viewBox="0 0 {self.width} {self.height}" font-family="sans-serif" stroke="none">')
        return "\n".join([head, f'<rect x="0" y="0" width="{self.width}" height="{self.height}" fill="#ffffff"/>',
                          *self.items, "</svg>"])


def _nice_step(span: float, target: int) -> float:
    raw = span / max(target, 1)
    if raw <= 0 or not math.isfinite(raw):
        return 1.0
    mag = 10.0 ** math.floor(math.log10(raw))
    for m in (1.0, 2.0, 2.5, 5.0, 10.0):
        if m * mag >= raw * (1 - 1e-9):
            return m * mag
    return 10.0 * mag


def _nice_range(lo: float, hi: float, target: int = 6) -> tuple[float, float, list[float]]:
    """Round (lo, hi) outward to whole tick steps; returns (lo, hi, ticks)."""
    if not (math.isfinite(lo) and math.isfinite(hi)):
        lo, hi = 0.0, 1.0
    if hi <= lo:
        pad = abs(lo) * 0.05 or 1.0
        lo, hi = lo - pad, hi + pad
    step = _nice_step(hi - lo, target)
    lo2 = math.floor(lo / step + 1e-9) * step
    hi2 = math.ceil(hi / step - 1e-9) * step
    n = int(round((hi2 - lo2) / step))
    ticks = [lo2 + k * step for k in range(n + 1)]
    return lo2, hi2, [0.0 if abs(t) < step * 1e-9 else t for t in ticks]


def _log_ticks(lo: float, hi: float) -> tuple[list[float], list[float]]:
    """Labelled and unlabelled ticks for a log axis from ``lo`` to ``hi``: decades (and
    2-9 between), or 1-2-5 steps when the range holds fewer than two decades."""
    k0, k1 = math.floor(math.log10(lo)) - 1, math.ceil(math.log10(hi)) + 1
    inside = lambda f: lo * (1 - 1e-9) <= f <= hi * (1 + 1e-9)  # noqa: E731
    major = [10.0 ** k for k in range(k0, k1 + 1) if inside(10.0 ** k)]
    minor = [m * 10.0 ** k for k in range(k0, k1 + 1) for m in range(2, 10) if inside(m * 10.0 ** k)]
    if len(major) < 2:
        major = sorted(m * 10.0 ** k for k in range(k0, k1 + 1) for m in (1, 2, 5) if inside(m * 10.0 ** k))
        minor = [f for f in minor if f not in major]
    return major, minor


@dataclass(frozen=True)
class _Frame:
    """The plot area in pixels and the data ranges it shows."""

    x0: float
    y0: float
    x1: float
    y1: float
    xlo: float
    xhi: float
    ylo: float
    yhi: float
    xlog: bool = False
    pad: float = 0.0  # drawn coordinates are clamped this far beyond the plot area

    def x(self, v: np.ndarray | float) -> np.ndarray:
        v = np.asarray(v, dtype=float)
        if self.xlog:
            with np.errstate(divide="ignore", invalid="ignore"):
                t = (np.log10(v) - math.log10(self.xlo)) / (math.log10(self.xhi) - math.log10(self.xlo))
        else:
            t = (v - self.xlo) / (self.xhi - self.xlo)
        t = np.nan_to_num(t, nan=0.0, posinf=2.0, neginf=-1.0)
        return np.clip(self.x0 + t * (self.x1 - self.x0), self.x0 - self.pad, self.x1 + self.pad)

    def y_raw(self, v: np.ndarray | float) -> np.ndarray:
        """Pixel rows of ``v`` without clamping (may lie far outside the plot area)."""
        v = np.asarray(v, dtype=float)
        t = (v - self.ylo) / (self.yhi - self.ylo)
        t = np.nan_to_num(t, nan=0.0, posinf=1e6, neginf=-1e6)
        return self.y1 - t * (self.y1 - self.y0)

    def y(self, v: np.ndarray | float) -> np.ndarray:
        return np.clip(self.y_raw(v), self.y0 - self.pad, self.y1 + self.pad)

    def polylines(self, xs: np.ndarray, v: np.ndarray, attrs: str) -> list[str]:
        """``<polyline>`` elements of the curve (xs pixels, v data), cut where it leaves the
        plot area vertically (so nothing is drawn outside even without clipping)."""
        return [f'<polyline points="{_pts(rx, ry)}" {attrs}/>'
                for rx, ry in _clip_runs(np.asarray(xs, dtype=float), self.y_raw(v), self.y0, self.y1)]



def _clip_runs(xs: np.ndarray, ys: np.ndarray, top: float, bottom: float
               ) -> list[tuple[list[float], list[float]]]:
    """Pieces of the polyline (xs, ys) inside top <= y <= bottom, cut exactly at the edges."""
    runs: list[tuple[list[float], list[float]]] = []
    cur_x: list[float] = []
    cur_y: list[float] = []

    def flush() -> None:
        if len(cur_x) >= 2:
            runs.append((cur_x.copy(), cur_y.copy()))
        cur_x.clear()
        cur_y.clear()

    for i in range(len(xs) - 1):
        xa, ya, xb, yb = float(xs[i]), float(ys[i]), float(xs[i + 1]), float(ys[i + 1])
        dy = yb - ya
        if dy == 0.0:
            t0, t1 = (0.0, 1.0) if top <= ya <= bottom else (1.0, 0.0)
        else:
            ta, tb = (top - ya) / dy, (bottom - ya) / dy
            t0, t1 = max(0.0, min(ta, tb)), min(1.0, max(ta, tb))
        if t0 > t1:
            flush()
            continue
        if t0 > 0.0 or not cur_x:
            flush()
            cur_x.append(xa + t0 * (xb - xa))
            cur_y.append(ya + t0 * dy)
        cur_x.append(xa + t1 * (xb - xa))
        cur_y.append(ya + t1 * dy)
        if t1 < 1.0:
            flush()
    flush()
    return runs


def _axes(svg: _Svg, fr: _Frame, xticks: list[float], xlabels: list[str], yticks: list[float],
          ylabels: list[str], xtitle: str, ytitle: str, xminor: Sequence[float] = ()) -> None:
    """Grid lines, tick labels, frame and axis titles."""
    for v in xminor:
        x = float(fr.x(v))
        svg.line(x, fr.y0, x, fr.y1, "#eeeeee")
    for v in xticks:
        x = float(fr.x(v))
        svg.line(x, fr.y0, x, fr.y1, GRID)
    for v in yticks:
        y = float(fr.y(v))
        svg.line(fr.x0, y, fr.x1, y, GRID)
    svg.add(f'<rect x="{_c(fr.x0)}" y="{_c(fr.y0)}" width="{_c(fr.x1 - fr.x0)}" height="{_c(fr.y1 - fr.y0)}" '
            f'fill="none" stroke="{AXIS}" stroke-width="1"/>')
    for v, t in zip(xticks, xlabels):
        x = float(fr.x(v))
        svg.line(x, fr.y1, x, fr.y1 + 4, AXIS)
        svg.label(x, fr.y1 + 17, t, anchor="middle")
    for v, t in zip(yticks, ylabels):
        y = float(fr.y(v))
        svg.line(fr.x0 - 4, y, fr.x0, y, AXIS)
        svg.label(fr.x0 - 6, y + 4, t, anchor="end")
    svg.label((fr.x0 + fr.x1) / 2, fr.y1 + 34, xtitle, anchor="middle", size=MIN_FONT + 1)
    # the y title over the axis, unrotated (renderers differ on rotated text)
    svg.label(4, fr.y0 - 8, ytitle, anchor="start", size=MIN_FONT + 1)


def _legend(svg: _Svg, x: float, y: float, items: list[tuple[str, str]], right: float) -> None:
    """One row of legend entries from ``x``: (swatch svg at (0,0)-(18,10), text)."""
    for swatch, text in items:
        width = 24 + 0.6 * MIN_FONT * len(text) + 16
        if x + width > right:
            break
        svg.add(f'<g transform="translate({_c(x)} {_c(y - 9)})">{swatch}</g>')
        svg.label(x + 24, y, text)
        x += width


def _fmt_tick(v: float) -> str:
    return f"{v:.6g}"


# --- figures -----------------------------------------------------------------------------

def _span_segment(span: Span, reference_db: float, xlo: float, xhi: float
                  ) -> tuple[float, float, float, float] | None:
    """A gain span's limit line (f_a, dB_a, f_b, dB_b) cut to [xlo, xhi], absolute dB."""
    fa, fb = max(span.f1, xlo), min(span.f2, xhi)
    if fa >= fb:
        return None
    la, lb = span.limit_at(np.array([fa, fb], dtype=float))
    shift = reference_db if span.relative else 0.0
    return fa, float(la) + shift, fb, float(lb) + shift


def _hatch(xa: float, ya: float, xb: float, yb: float, side: float, colour: str, top: float,
           bottom: float, step: float = 6.0) -> str:
    """Hatching below (``side`` > 0, px) or above (``side`` < 0) the line (xa, ya)-(xb, yb):
    short diagonal strokes every ``step`` px, kept between ``top`` and ``bottom`` and within
    xa..xb (plain lines, which every SVG renderer draws; no patterns)."""
    out = []
    n = max(int((xb - xa) // step), 1)
    d = abs(side)
    for k in range(n + 1):
        x = xa + k * step
        if x > xb:
            break
        y = ya + (yb - ya) * (x - xa) / (xb - xa) if xb > xa else ya
        x2 = min(x + d, xb)
        y2 = min(max(y + math.copysign(x2 - x, side), top), bottom)
        if x2 > x:
            out.append(f'<line x1="{_c(x)}" y1="{_c(y)}" x2="{_c(x2)}" y2="{_c(y2)}"/>')
    return f'<g stroke="{colour}" stroke-width="1.5">' + "".join(out) + "</g>"


def svg_spread_plot(freqs_hz: np.ndarray, nominal_db: np.ndarray, bands: Bands | None,
                    mask_spans: Sequence[Span], reference_db: float, width: int = 760, height: int = 340,
                    *, ident: str = "spread", title: str = "Gain spread of the sampled boards",
                    y_range: tuple[float, float] | None = None,
                    x_range: tuple[float, float] | None = None, boards: int | None = None,
                    ylabel: str = "gain (dB)") -> str:
    """Gain (dB) against log frequency (or another quantity, named by ``ylabel``, with
    ``mask_spans`` empty): the full range of every board (sky blue) and the
    central band (``bands.share`` of boards, blue) as filled areas, the nominal curve
    (black), and each gain span of the mask as a line with its forbidden side hatched
    (floor orange, below; ceiling purple, above). Relative spans are drawn against
    ``reference_db``; phase and delay spans are not drawn here.

    ``ident`` prefixes the SVG's element ids (several figures share one HTML page);
    ``y_range`` (dB) and ``x_range`` (Hz) zoom in, otherwise the ranges follow the data
    (at most 100 dB below the top unless a mask limit lies lower). Everything is drawn
    inside the plot area (clipped; coordinates are clamped to just beyond it).

    Parameters
    ----------
    freqs_hz : np.ndarray
        (F,) frequencies in Hz.
    nominal_db : np.ndarray
        (F,) nominal curve (dB, or the ``ylabel`` quantity).
    bands : Bands or None
        The boards' bands, each (F,).
    mask_spans : sequence of Span
        Gain spans drawn.
    reference_db : float
        Passband reference in dB, for relative spans.
    width : int
        Width in px.
    height : int
        Height in px.
    ident : str
        Prefix of the SVG element ids.
    title : str
        Title drawn above.
    y_range : tuple of float, optional
        (low, high) of the y axis.
    x_range : tuple of float, optional
        (low, high) of the x axis in Hz.
    boards : int, optional
        Number of boards, for the legend.
    ylabel : str
        The y axis' label.

    Returns
    -------
    str
        SVG text.
    """
    f = np.asarray(freqs_hz, dtype=float)
    nom = np.asarray(nominal_db, dtype=float).ravel()
    if f.ndim != 1 or f.size < 2 or nom.shape != f.shape or np.any(f <= 0):
        raise ValueError("need at least two positive frequencies and a nominal curve of the same length")
    keep = np.ones(f.size, dtype=bool)
    if x_range is not None:
        keep = (f >= x_range[0] * (1 - 1e-12)) & (f <= x_range[1] * (1 + 1e-12))
        if keep.sum() < 2:
            keep = np.ones(f.size, dtype=bool)
    fk = f[keep]
    xlo, xhi = float(fk.min()), float(fk.max())
    ident = _slug(ident)
    gain_spans = [s for s in mask_spans if s.quantity == "gain"]
    segs = [(s, seg) for s in gain_spans if (seg := _span_segment(s, reference_db, xlo, xhi)) is not None]

    hi_curve = bands.high[keep] if bands is not None else nom[keep]
    lo_curve = bands.low[keep] if bands is not None else nom[keep]
    if y_range is None:
        limits = [v for _, seg in segs for v in (seg[1], seg[3])]
        finite_hi = hi_curve[np.isfinite(hi_curve)]
        finite_lo = lo_curve[np.isfinite(lo_curve)]
        top = max([float(finite_hi.max()) if finite_hi.size else 0.0] + limits)
        data_lo = float(finite_lo.min()) if finite_lo.size else top - 60
        floor_lo = min(top - 100.0, min(limits) - 20.0) if limits else top - 100.0
        ylo, yhi, yticks = _nice_range(max(data_lo, floor_lo), top + 0.03 * max(top - data_lo, 1.0), 10)
    else:
        ylo, yhi, yticks = _nice_range(float(y_range[0]), float(y_range[1]), 8)

    svg = _Svg(width, height, title)
    fr = _Frame(60.0, PLOT_TOP, width - 30.0, height - 44.0, xlo, xhi, ylo, yhi, xlog=True)
    major, minor = _log_ticks(xlo, xhi)
    _axes(svg, fr, major, [format_value(v, "Hz", digits=3) for v in major], yticks,
          [_fmt_tick(v) for v in yticks], "frequency", ylabel, minor)

    body: list[str] = []
    xs = fr.x(fk)
    if bands is not None:
        for lo_c, hi_c, colour in ((bands.low, bands.high, SKY), (bands.inner_low, bands.inner_high, BLUE)):
            px = np.concatenate([xs, xs[::-1]])
            py = np.concatenate([fr.y(hi_c[keep]), fr.y(lo_c[keep])[::-1]])
            body.append(f'<polygon points="{_pts(px, py)}" fill="{colour}" stroke="none"/>')
    body += fr.polylines(xs, nom[keep], f'fill="none" stroke="{BLACK}" stroke-width="1.4"')
    depth = 12.0  # pixels of hatching on the forbidden side
    for s, (fa, la, fb, lb) in segs:
        colour = ORANGE if s.kind == "floor" else PURPLE
        runs = _clip_runs(fr.x([fa, fb]), fr.y_raw([la, lb]), fr.y0, fr.y1)
        if not runs:
            continue  # the limit lies outside the shown dB range
        (xa, xb), (ya, yb) = runs[0]
        side = depth if s.kind == "floor" else -depth
        body.append(_hatch(xa, ya, xb, yb, side, colour, fr.y0, fr.y1))
        body.append(f'<line x1="{_c(xa)}" y1="{_c(ya)}" x2="{_c(xb)}" y2="{_c(yb)}" stroke="{colour}" '
                    f'stroke-width="2.2"/>')
    svg.add(f'<g id="{ident}-data">' + "\n".join(body) + "</g>")

    items: list[tuple[str, str]] = []
    if bands is not None:
        every = "every board" if boards is None else f"every board ({format_count(boards)})"
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="{SKY}"/>', every))
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="{BLUE}"/>',
                      f"central {bands.share * 100:g} %"))
    items.append((f'<line x1="0" y1="5" x2="18" y2="5" stroke="{BLACK}" stroke-width="1.6"/>', "nominal"))
    if any(s.kind == "floor" for s, _ in segs):
        items.append((_hatch(0, 0, 18, 0, 10, ORANGE, 0, 10) +
                      f'<line x1="0" y1="0" x2="18" y2="0" stroke="{ORANGE}" stroke-width="2"/>',
                      "floor span"))
    if any(s.kind == "ceiling" for s, _ in segs):
        items.append((_hatch(0, 10, 18, 10, -10, PURPLE, 0, 10) +
                      f'<line x1="0" y1="10" x2="18" y2="10" stroke="{PURPLE}" stroke-width="2"/>',
                      "ceiling span"))
    if any(s.kind == "match" for s, _ in segs):  # a limit on a difference between channels, drawn as a ceiling
        items.append((_hatch(0, 10, 18, 10, -10, PURPLE, 0, 10) +
                      f'<line x1="0" y1="10" x2="18" y2="10" stroke="{PURPLE}" stroke-width="2"/>',
                      "match span limit"))
    _legend(svg, fr.x0, 18, items, width - 4)
    return svg.text()


def svg_histogram(values: np.ndarray, bins: int | Sequence[float] = 40, fail_mask: np.ndarray | None = None,
                  label: str = "", *, unit: str = "", width: int = 760, height: int = 260,
                  ident: str = "hist", title: str | None = None) -> str:
    """A histogram of ``values``: ``bins`` is a count or the bin edges (as in numpy).
    With ``fail_mask`` (True = the board fails the mask) failing boards are stacked in
    vermillion on top of passing ones in blue. Non-finite values are left out. ``unit``
    "Hz" labels the axis with SI prefixes.

    Parameters
    ----------
    values : np.ndarray
        (S,) values.
    bins : int or sequence of float
        Bin count or edges.
    fail_mask : np.ndarray, optional
        (S,) bool, True where a board fails.
    label : str
        The x axis' label.
    unit : str
        Unit of ``values``.
    width : int
        Width in px.
    height : int
        Height in px.
    ident : str
        Prefix of the SVG element ids.
    title : str, optional
        Title drawn above.

    Returns
    -------
    str
        SVG text.
    """
    v = np.asarray(values, dtype=float).ravel()
    fm = np.zeros(v.shape, dtype=bool) if fail_mask is None else np.asarray(fail_mask, dtype=bool).ravel()
    if fm.shape != v.shape:
        raise ValueError("fail_mask must have one entry per value")
    ok = np.isfinite(v)
    v, fm = v[ok], fm[ok]
    if isinstance(bins, (int, np.integer)):
        if v.size == 0:
            edges = np.linspace(0.0, 1.0, int(bins) + 1)
        else:
            lo, hi = float(v.min()), float(v.max())
            if hi <= lo:
                pad = abs(lo) * 0.01 or 1.0
                lo, hi = lo - pad, hi + pad
            edges = np.linspace(lo, hi, int(bins) + 1)
    else:
        edges = np.asarray(bins, dtype=float)
        if edges.ndim != 1 or edges.size < 2 or np.any(np.diff(edges) <= 0):
            raise ValueError("bin edges must be increasing")
    n_pass = np.histogram(v[~fm], edges)[0]
    n_fail = np.histogram(v[fm], edges)[0]
    total = n_pass + n_fail
    svg = _Svg(width, height, title or f"Histogram of {label}")
    xlo, xhi, xticks = _nice_range(float(edges[0]), float(edges[-1]), 7)
    _, yhi, yticks = _nice_range(0.0, float(max(total.max(), 1)), 5)
    fr = _Frame(60.0, PLOT_TOP, width - 30.0, height - 44.0, xlo, xhi, 0.0, yhi)
    xlabels = [format_value(t, unit, digits=4) if unit == "Hz" else _fmt_tick(t) for t in xticks]
    _axes(svg, fr, xticks, xlabels, yticks, [f"{t:.0f}" for t in yticks], label, "boards")
    ident = _slug(ident)
    body: list[str] = []
    xa, xb = fr.x(edges[:-1]), fr.x(edges[1:])
    y0 = float(fr.y(0.0))
    yp, yt = fr.y(n_pass), fr.y(total)
    for i in range(edges.size - 1):
        w = max(float(xb[i] - xa[i]) - 1.0, 0.5)
        if n_pass[i]:
            body.append(f'<rect x="{_c(xa[i] + 0.5)}" y="{_c(yp[i])}" width="{_c(w)}" '
                        f'height="{_c(y0 - yp[i])}" fill="{BLUE}"/>')
        if n_fail[i]:
            body.append(f'<rect x="{_c(xa[i] + 0.5)}" y="{_c(yt[i])}" width="{_c(w)}" '
                        f'height="{_c(yp[i] - yt[i])}" fill="{VERMILLION}"/>')
    svg.add(f'<g id="{ident}-data">' + "\n".join(body) + "</g>")
    items = [(f'<rect x="0" y="0" width="18" height="10" fill="{BLUE}"/>',
              f"passing boards ({format_count(int(n_pass.sum()))})" if fail_mask is not None
              else f"boards ({format_count(int(n_pass.sum()))})")]
    if fail_mask is not None:
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="{VERMILLION}"/>',
                      f"failing boards ({format_count(int(n_fail.sum()))})"))
    _legend(svg, fr.x0, 18, items, width - 4)
    return svg.text()


def svg_bar_chart(labels: Sequence[str], values_pct: Sequence[float], title: str, *, width: int = 760,
                  ident: str = "bars", muted: Sequence[int] = ()) -> str:
    """Horizontal bars on a 0-100 % scale, one per label, value written at the bar's end
    (the spread budget: each part's share of a metric's variance). Bars whose index is in
    ``muted`` (such as a remainder) are drawn in the lighter blue.

    Parameters
    ----------
    labels : sequence of str
        One label per bar.
    values_pct : sequence of float
        One value per bar, in percent.
    title : str
        Title drawn above.
    width : int
        Width in px.
    ident : str
        Prefix of the SVG element ids.
    muted : sequence of int
        Indexes of bars drawn lighter.

    Returns
    -------
    str
        SVG text.
    """
    vals = [float(v) for v in values_pct]
    if len(vals) != len(labels):
        raise ValueError("one value per label")
    row = 22
    label_w = min(260.0, 24.0 + 0.6 * MIN_FONT * max([len(str(t)) for t in labels] + [4]))
    top = 30.0
    height = int(top + row * max(len(vals), 1) + 34)
    svg = _Svg(width, height, title)
    svg.label(8, 18, title, size=MIN_FONT + 1, weight="bold")
    x0, x1 = label_w, width - 70.0
    fr = _Frame(x0, top, x1, top + row * max(len(vals), 1), 0.0, 100.0, 0.0, 1.0)
    for t in (0, 25, 50, 75, 100):
        x = float(fr.x(t))
        svg.line(x, fr.y0, x, fr.y1, GRID)
        svg.label(x, fr.y1 + 15, f"{t} %", anchor="middle")
    for i, (lab, v) in enumerate(zip(labels, vals)):
        y = top + i * row
        svg.label(x0 - 8, y + 15, str(lab), anchor="end")
        vv = v if math.isfinite(v) else 0.0
        xe = float(fr.x(min(max(vv, 0.0), 100.0)))
        colour = SKY if i in set(muted) else BLUE
        svg.rect(x0, y + 4, xe - x0, row - 8, colour)
        svg.label(xe + 5, y + 15, f"{v:.1f} %" if math.isfinite(v) else "n/a")
    svg.line(x0, fr.y0, x0, fr.y1, AXIS)
    return svg.text()


def svg_cost_yield(points: Sequence[tuple[float, float | None]], *, current_cost: float | None = None,
                   width: int = 760, height: int = 300, ident: str = "costyield",
                   title: str = "Cost of the cheapest grades against the yield target") -> str:
    """Total cost (relative units) of the cheapest grade choice that meets each yield
    target (a fraction, drawn in %). A target no grade choice meets (cost None) is marked
    with a vermillion cross at the top edge; ``current_cost`` (the design's grades) is
    drawn as a dashed line.

    Parameters
    ----------
    points : sequence of (float, float or None)
        (target yield as a fraction, cost or None).
    current_cost : float, optional
        The design's own cost.
    width : int
        Width in px.
    height : int
        Height in px.
    ident : str
        Prefix of the SVG element ids.
    title : str
        Title drawn above.

    Returns
    -------
    str
        SVG text.
    """
    pts = sorted((float(t), c) for t, c in points)
    if not pts:
        raise ValueError("no points")
    targets = [100 * t for t, _ in pts]
    costs = [c for _, c in pts if c is not None and math.isfinite(c)]
    if current_cost is not None and math.isfinite(current_cost):
        costs_all = costs + [current_cost]
    else:
        costs_all, current_cost = costs, None
    xlo, xhi, xticks = _nice_range(min(targets), max(targets), 7)
    ylo, yhi, yticks = _nice_range(min(costs_all + [0.0]), max(costs_all) * 1.1 if costs_all else 1.0, 6)
    inset = 0.03 * (xhi - xlo)  # keeps markers at the first and last target off the frame
    svg = _Svg(width, height, title)
    fr = _Frame(60.0, PLOT_TOP, width - 30.0, height - 44.0, xlo - inset, xhi + inset, ylo, yhi)
    _axes(svg, fr, xticks, [f"{t:g} %" for t in xticks], yticks, [_fmt_tick(t) for t in yticks],
          "yield target (lower confidence bound)", "total cost")
    ident = _slug(ident)
    body: list[str] = []
    have = [(100 * t, c) for t, c in pts if c is not None and math.isfinite(c)]
    if len(have) >= 2:
        body.append(f'<polyline points="{_pts(fr.x([a for a, _ in have]), fr.y([b for _, b in have]))}" '
                    f'fill="none" stroke="{BLUE}" stroke-width="1.6"/>')
    for a, b in have:
        x, y = float(fr.x(a)), float(fr.y(b))
        body.append(f'<rect x="{_c(x - 3.5)}" y="{_c(y - 3.5)}" width="7" height="7" fill="{BLUE}"/>')
    if current_cost is not None:
        yc = float(fr.y(current_cost))
        body.append(f'<line x1="{_c(fr.x0)}" y1="{_c(yc)}" x2="{_c(fr.x1)}" y2="{_c(yc)}" stroke="{AXIS}" '
                    'stroke-width="1.2" stroke-dasharray="6 4"/>')
    missing = [100 * t for t, c in pts if c is None or not math.isfinite(c)]
    for a in missing:
        x, y = float(fr.x(a)), fr.y0 + 8
        body.append(f'<line x1="{_c(x - 5)}" y1="{_c(y - 5)}" x2="{_c(x + 5)}" y2="{_c(y + 5)}" '
                    f'stroke="{VERMILLION}" stroke-width="2"/>')
        body.append(f'<line x1="{_c(x - 5)}" y1="{_c(y + 5)}" x2="{_c(x + 5)}" y2="{_c(y - 5)}" '
                    f'stroke="{VERMILLION}" stroke-width="2"/>')
    svg.add(f'<g id="{ident}-data">' + "\n".join(body) + "</g>")
    items = [(f'<rect x="5" y="1" width="7" height="7" fill="{BLUE}"/>', "cheapest grades meeting the target")]
    if missing:
        items.append((f'<line x1="4" y1="0" x2="14" y2="10" stroke="{VERMILLION}" stroke-width="2"/>'
                      f'<line x1="4" y1="10" x2="14" y2="0" stroke="{VERMILLION}" stroke-width="2"/>',
                      "no grade choice meets the target"))
    if current_cost is not None:
        items.append((f'<line x1="0" y1="5" x2="18" y2="5" stroke="{AXIS}" stroke-width="1.2" '
                      'stroke-dasharray="6 4"/>', f"current grades ({current_cost:.2f})"))
    _legend(svg, fr.x0, 18, items, width - 4)
    return svg.text()
