"""The analysis report: one self-contained HTML file with inline SVG figures.

:func:`build_report` turns an :class:`~filters.analysis.AnalysisResult` (and, when given,
a grade recommendation, its cost-yield curve and a parts list) into a :class:`Report`.
Every number in it comes from the result; this module only formats and draws. The
figures are plain SVG text generated here with numpy (no plotting library):

* :func:`svg_spread_plot` - gain against log frequency: the spread bands of the sampled
  boards, the nominal curve and the mask spans with their forbidden side hatched;
* :func:`svg_histogram` - a metric's histogram, failing boards stacked on passing ones;
* :func:`svg_bar_chart` - horizontal bars in percent (the spread budget);
* :func:`svg_cost_yield` - total cost of the cheapest grades against the yield target.

Colours are from the Okabe-Ito palette (distinguishable with the common colour-vision
deficiencies); floor and ceiling hatching also differ in direction.

:meth:`Report.html` gives one HTML document with the SVGs inline, no scripts and no
external resources. :meth:`Report.html_with_images` gives the same document with each
figure as an ``<img>`` whose source the caller names (the window renders the SVGs to
images and prints the document to PDF). All user text is escaped.
"""
from __future__ import annotations

import html
import math
import re
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from . import __version__
from .analysis import AnalysisResult
from .bands import INNER, Bands, bands
from .budget import is_pair_metric
from .designfile import write_text_atomic
from .evaluate import Ensemble, evaluate
from .grades import Grade
from .mask import Span
from .sampling import REFERENCE_CELSIUS
from .summary import metric_label
from .values import format_value

#: The closing caution of every report (also shown in a box).
CAUTION = ("The numbers in this report are estimates under the assumptions listed above. "
           "Confirm them by measurements of real parts and by qualified review, "
           "and follow the standards that apply to your product.")

#: Boards drawn in the spread figure when the result kept no curves.
FIGURE_BOARDS = 2000

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
_FIGURE_MARK = "<!--figure:{}-->"
_FIGURE_RE = re.compile(r"<!--figure:([A-Za-z0-9_-]+)-->")

esc = html.escape


# --- number formatting for people ------------------------------------------------------

def format_pct(x: float, digits: int = 2) -> str:
    """A fraction as a percentage with ``digits`` decimals: 0.915 -> "91.50 %".

    A fraction that is not exactly 0 or 1 never prints as "0.00 %" or "100.00 %": more
    decimals are added (up to 6) until it differs.
    """
    if not math.isfinite(x):
        return "n/a"
    p = 100.0 * x
    d = digits
    while d < 6 and 0.0 < x < 1.0 and (f"{p:.{d}f}" in (f"{100:.{d}f}", f"{0:.{d}f}")):
        d += 1
    return f"{p:.{d}f} %"


def format_count(n: int) -> str:
    """A count with thousands separators: 12000 -> "12,000"."""
    return f"{int(n):,}"


def _num(x: float, unit: str, signed: bool = True) -> str:
    """A metric value for people in ``unit`` (Hz, dB, deg, s or "" for plain numbers);
    dB and degrees carry their sign unless ``signed`` is False (spreads)."""
    if x is None or not math.isfinite(x):
        return "n/a"
    sign = "+" if signed else ""
    if unit == "Hz":
        return format_value(x, "Hz", digits=4)
    if unit == "dB":
        return f"{x:{sign}.3f} dB"
    if unit == "deg":
        return f"{x:{sign}.2f} deg"
    if unit == "s":
        return format_value(x, "s", digits=3)
    return f"{x:.4g}"


def _cost(x: float | None) -> str:
    return "n/a" if x is None or not math.isfinite(x) else f"{x:.2f}"


def _g(x: float) -> str:
    return f"{x:g}"


_SPAN_UNIT = {"gain": "dB", "phase": "deg", "delay": "s"}


def _metric_unit(name: str, mask: Sequence[Span]) -> str:
    if name.startswith("margin."):
        label = name[len("margin."):]
        for s in mask:
            if s.label == label:
                return _SPAN_UNIT[s.quantity]
        return "dB"
    if name.endswith("_hz"):
        return "Hz"
    if name.endswith("_db"):
        return "dB"
    return ""


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

    def label(self, x: float, y: float, text: str, *, anchor: str = "start", size: int = 11,
              fill: str = "#222222", rotate: bool = False, weight: str = "normal") -> None:
        tr = f' transform="rotate(-90 {_c(x)} {_c(y)})"' if rotate else ""
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
                f'viewBox="0 0 {self.width} {self.height}" font-family="sans-serif">')
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

    def clip_def(self, ident: str) -> str:
        return (f'<defs><clipPath id="{ident}-clip"><rect x="{_c(self.x0)}" y="{_c(self.y0)}" '
                f'width="{_c(self.x1 - self.x0)}" height="{_c(self.y1 - self.y0)}"/></clipPath></defs>')


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
        svg.label(x, fr.y1 + 16, t, anchor="middle", size=10)
    for v, t in zip(yticks, ylabels):
        y = float(fr.y(v))
        svg.line(fr.x0 - 4, y, fr.x0, y, AXIS)
        svg.label(fr.x0 - 6, y + 3.5, t, anchor="end", size=10)
    svg.label((fr.x0 + fr.x1) / 2, fr.y1 + 32, xtitle, anchor="middle", size=11)
    svg.label(13, (fr.y0 + fr.y1) / 2, ytitle, anchor="middle", size=11, rotate=True)


def _legend(svg: _Svg, x: float, y: float, items: list[tuple[str, str]], right: float) -> None:
    """One row of legend entries from ``x``: (swatch svg at (0,0)-(18,10), text)."""
    for swatch, text in items:
        width = 24 + 5.9 * len(text) + 16
        if x + width > right:
            break
        svg.add(f'<g transform="translate({_c(x)} {_c(y - 9)})">{swatch}</g>')
        svg.label(x + 24, y, text, size=10.5)
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


def svg_spread_plot(freqs_hz: np.ndarray, nominal_db: np.ndarray, bands: Bands | None,
                    mask_spans: Sequence[Span], reference_db: float, width: int = 760, height: int = 340,
                    *, ident: str = "spread", title: str = "Gain spread of the sampled boards",
                    y_range: tuple[float, float] | None = None,
                    x_range: tuple[float, float] | None = None, boards: int | None = None) -> str:
    """Gain (dB) against log frequency: the full range of every board (sky blue) and the
    central band (``bands.share`` of boards, blue) as filled areas, the nominal curve
    (black), and each gain span of the mask as a line with its forbidden side hatched
    (floor orange, below; ceiling purple, above). Relative spans are drawn against
    ``reference_db``; phase and delay spans are not drawn here.

    ``ident`` prefixes the SVG's element ids (several figures share one HTML page);
    ``y_range`` (dB) and ``x_range`` (Hz) zoom in, otherwise the ranges follow the data
    (at most 100 dB below the top unless a mask limit lies lower). Everything is drawn
    inside the plot area (clipped; coordinates are clamped to just beyond it).
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
    fr = _Frame(60.0, 30.0, width - 30.0, height - 44.0, xlo, xhi, ylo, yhi, xlog=True)
    major, minor = _log_ticks(xlo, xhi)
    _axes(svg, fr, major, [format_value(v, "Hz", digits=3) for v in major], yticks,
          [_fmt_tick(v) for v in yticks], "frequency", "gain (dB)", minor)

    svg.add(fr.clip_def(ident))
    svg.add('<defs>'
            f'<pattern id="{ident}-hatch-floor" patternUnits="userSpaceOnUse" width="6" height="6" '
            f'patternTransform="rotate(45)"><rect x="0" y="0" width="2" height="6" fill="{ORANGE}"/></pattern>'
            f'<pattern id="{ident}-hatch-ceiling" patternUnits="userSpaceOnUse" width="6" height="6" '
            f'patternTransform="rotate(-45)"><rect x="0" y="0" width="2" height="6" fill="{PURPLE}"/></pattern>'
            '</defs>')
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
        ya2 = min(max(ya + side, fr.y0), fr.y1)
        yb2 = min(max(yb + side, fr.y0), fr.y1)
        hatch = f"url(#{ident}-hatch-{s.kind})"
        body.append(f'<polygon points="{_pts([xa, xb, xb, xa], [ya, yb, yb2, ya2])}" fill="{hatch}" '
                    f'stroke="none"/>')
        body.append(f'<line x1="{_c(xa)}" y1="{_c(ya)}" x2="{_c(xb)}" y2="{_c(yb)}" stroke="{colour}" '
                    f'stroke-width="2.2"/>')
    svg.add(f'<g clip-path="url(#{ident}-clip)">' + "\n".join(body) + "</g>")

    items: list[tuple[str, str]] = []
    if bands is not None:
        every = "every board" if boards is None else f"every board ({format_count(boards)})"
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="{SKY}"/>', every))
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="{BLUE}"/>',
                      f"central {bands.share * 100:g} %"))
    items.append((f'<line x1="0" y1="5" x2="18" y2="5" stroke="{BLACK}" stroke-width="1.6"/>', "nominal"))
    if any(s.kind == "floor" for s, _ in segs):
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="url(#{ident}-hatch-floor)"/>'
                      f'<line x1="0" y1="0" x2="18" y2="0" stroke="{ORANGE}" stroke-width="2"/>',
                      "floor span"))
    if any(s.kind == "ceiling" for s, _ in segs):
        items.append((f'<rect x="0" y="0" width="18" height="10" fill="url(#{ident}-hatch-ceiling)"/>'
                      f'<line x1="0" y1="10" x2="18" y2="10" stroke="{PURPLE}" stroke-width="2"/>',
                      "ceiling span"))
    _legend(svg, fr.x0, 18, items, width - 4)
    return svg.text()


def svg_histogram(values: np.ndarray, bins: int | Sequence[float] = 40, fail_mask: np.ndarray | None = None,
                  label: str = "", *, unit: str = "", width: int = 760, height: int = 260,
                  ident: str = "hist", title: str | None = None) -> str:
    """A histogram of ``values``: ``bins`` is a count or the bin edges (as in numpy).
    With ``fail_mask`` (True = the board fails the mask) failing boards are stacked in
    vermillion on top of passing ones in blue. Non-finite values are left out. ``unit``
    "Hz" labels the axis with SI prefixes."""
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
    fr = _Frame(60.0, 30.0, width - 30.0, height - 44.0, xlo, xhi, 0.0, yhi)
    xlabels = [format_value(t, unit, digits=4) if unit == "Hz" else _fmt_tick(t) for t in xticks]
    _axes(svg, fr, xticks, xlabels, yticks, [f"{t:.0f}" for t in yticks], label, "boards")
    ident = _slug(ident)
    svg.add(fr.clip_def(ident))
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
    svg.add(f'<g clip-path="url(#{ident}-clip)">' + "\n".join(body) + "</g>")
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
    ``muted`` (such as a remainder) are drawn in the lighter blue."""
    vals = [float(v) for v in values_pct]
    if len(vals) != len(labels):
        raise ValueError("one value per label")
    row = 20
    label_w = min(260.0, 24.0 + 6.4 * max([len(str(t)) for t in labels] + [4]))
    top = 30.0
    height = int(top + row * max(len(vals), 1) + 34)
    svg = _Svg(width, height, title)
    svg.label(8, 18, title, size=12, weight="bold")
    x0, x1 = label_w, width - 70.0
    fr = _Frame(x0, top, x1, top + row * max(len(vals), 1), 0.0, 100.0, 0.0, 1.0)
    for t in (0, 25, 50, 75, 100):
        x = float(fr.x(t))
        svg.line(x, fr.y0, x, fr.y1, GRID)
        svg.label(x, fr.y1 + 14, f"{t} %", anchor="middle", size=10)
    for i, (lab, v) in enumerate(zip(labels, vals)):
        y = top + i * row
        svg.label(x0 - 8, y + 14, str(lab), anchor="end", size=11)
        vv = v if math.isfinite(v) else 0.0
        xe = float(fr.x(min(max(vv, 0.0), 100.0)))
        colour = SKY if i in set(muted) else BLUE
        svg.rect(x0, y + 4, xe - x0, row - 8, colour)
        svg.label(xe + 5, y + 14, f"{v:.1f} %" if math.isfinite(v) else "n/a", size=10.5)
    svg.line(x0, fr.y0, x0, fr.y1, AXIS)
    return svg.text()


def svg_cost_yield(points: Sequence[tuple[float, float | None]], *, current_cost: float | None = None,
                   width: int = 760, height: int = 300, ident: str = "costyield",
                   title: str = "Cost of the cheapest grades against the yield target") -> str:
    """Total cost (relative units) of the cheapest grade choice that meets each yield
    target (a fraction, drawn in %). A target no grade choice meets (cost None) is marked
    with a vermillion cross at the top edge; ``current_cost`` (the design's grades) is
    drawn as a dashed line."""
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
    fr = _Frame(60.0, 30.0, width - 30.0, height - 44.0, xlo - inset, xhi + inset, ylo, yhi)
    _axes(svg, fr, xticks, [f"{t:g} %" for t in xticks], yticks, [_fmt_tick(t) for t in yticks],
          "yield target (lower confidence bound)", "total cost")
    ident = _slug(ident)
    svg.add(fr.clip_def(ident))
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
    svg.add(f'<g clip-path="url(#{ident}-clip)">' + "\n".join(body) + "</g>")
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


# --- the report ----------------------------------------------------------------------------

@dataclass(frozen=True)
class Report:
    """A built report. ``body`` is the HTML body with a marker where each figure goes;
    ``figures`` maps figure name -> standalone SVG text; ``sizes`` name -> (width, height)."""

    title: str
    body: str
    figures: dict[str, str]
    sizes: dict[str, tuple[int, int]] = field(default_factory=dict)

    def _document(self, figure: Callable[[str], str]) -> str:
        body = _FIGURE_RE.sub(lambda m: figure(m.group(1)), self.body)
        return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                f"<title>{esc(self.title)}</title>\n<style>\n{_CSS}</style>\n</head>\n<body>\n"
                f"{body}\n</body>\n</html>\n")

    def html(self) -> str:
        """One self-contained HTML document, each figure an inline SVG."""
        def inline(name: str) -> str:
            svg = self.figures[name]
            return svg.replace(f' xmlns="{SVG_NS}"', "", 1)  # implied for SVG inside HTML
        return self._document(inline)

    def html_with_images(self, src_for: Callable[[str], str]) -> str:
        """The same document with each figure as ``<img src="src_for(name)">``."""
        def image(name: str) -> str:
            w, h = self.sizes.get(name, (760, 340))
            return (f'<img src="{esc(src_for(name), quote=True)}" width="{w}" height="{h}" '
                    f'alt="{esc(name, quote=True)}">')
        return self._document(image)


_CSS = """\
body { font-family: sans-serif; color: #1a1a1a; margin: 24px auto; max-width: 900px;
       line-height: 1.4; font-size: 14px; }
h1 { font-size: 22px; margin-bottom: 4px; }
h2 { font-size: 17px; margin-top: 28px; border-bottom: 1px solid #bbbbbb; padding-bottom: 3px; }
h3 { font-size: 14px; margin-top: 18px; }
p.meta { color: #555555; margin-top: 0; }
table { border-collapse: collapse; margin: 8px 0 12px 0; }
th, td { border: 1px solid #c8c8c8; padding: 3px 7px; text-align: left; vertical-align: top; }
th { background: #f0f0f0; }
td.num { text-align: right; white-space: nowrap; }
p.key { font-size: 16px; }
div.figure { margin: 10px 0 16px 0; }
p.caption { color: #444444; font-size: 12.5px; margin-top: 2px; }
.bad { color: #b00000; }
table.caution { border: 2px solid #b36b00; background: #fff4e0; margin-top: 24px; }
table.caution td { border: none; padding: 10px 14px; }
ul.assumptions li { margin-bottom: 3px; }
@media print { div.figure { page-break-inside: avoid; } }
"""


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[int] = ()) -> str:
    """An HTML table; ``headers`` plain text (escaped here), cells are HTML fragments."""
    num = set(numeric)
    out = ["<table>", "<tr>" + "".join(f"<th>{esc(h)}</th>" for h in headers) + "</tr>"]
    for r in rows:
        out.append("<tr>" + "".join(f'<td class="num">{c}</td>' if i in num else f"<td>{c}</td>"
                                    for i, c in enumerate(r)) + "</tr>")
    out.append("</table>")
    return "\n".join(out)


def describe_distribution(g: Grade, short: bool = False) -> str:
    """How a grade's values are distributed, in words (``short``: for a table cell)."""
    tol = g.tolerance_pct
    if tol == 0:
        return "none (exact)" if short else "no spread (exact value)"
    if g.distribution == "uniform":
        return "uniform" if short else f"uniform within \u00b1{tol:g} %"
    if short:
        if g.distribution == "binned":
            return f"binned, k = {g.coverage:g}, centre \u00b1{g.bin_inner_pct:g} % removed"
        return f"normal, k = {g.coverage:g}, {'truncated' if g.truncate else 'not truncated'}"
    if g.distribution == "binned":
        return (f"binned: normal with coverage factor k = {g.coverage:g} (\u03c3 = {tol / g.coverage:.3g} %), "
                f"the centre within \u00b1{g.bin_inner_pct:g} % removed (sold as a tighter grade), "
                f"limited to \u00b1{tol:g} %")
    cut = f"truncated at \u00b1{tol:g} %" if g.truncate else "not truncated"
    return f"normal with coverage factor k = {g.coverage:g} (\u03c3 = {tol / g.coverage:.3g} %), {cut}"


def _tempco(g: Grade) -> str:
    if not g.tempco_ppm and not g.tempco_spread_ppm:
        return "0"
    if not g.tempco_ppm:
        return f"\u00b1{g.tempco_spread_ppm:g} ppm/K"
    return f"{g.tempco_ppm:+g} \u00b1 {g.tempco_spread_ppm:g} ppm/K"


def _drift(g: Grade) -> str:
    return f"\u00b1{g.drift_pct:g} %" if g.drift_pct else "none"


def _spread_ensemble(result: AnalysisResult, given: Ensemble | None) -> Ensemble:
    """An ensemble with gain curves for the spread figure: ``given``, the result's own if
    it kept curves, else the first boards of the result's seed evaluated again."""
    if given is not None:
        if given.gain_db is None:
            raise ValueError("the ensemble for the spread figure must keep curves (curves=True)")
        return given
    ens = result.ensemble
    if ens.gain_db is not None:
        return ens
    n = min(FIGURE_BOARDS, ens.samples)
    return evaluate(result.design, samples=n, seed=ens.seed, method=ens.method, grades=ens.grades,
                    curves=True, phase=False, start=ens.start, prepared=result.prepared)


def _passband_zoom(design_mask: Sequence[Span], f_start: float, f_stop: float
                   ) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """(dB range relative to the reference, Hz range) of the passband spans: relative gain
    spans whose limits lie within 6 dB of the reference. None if there are none."""
    near = [s for s in design_mask if s.quantity == "gain" and s.relative
            and abs(s.limit1) <= 6 and abs(s.end_limit) <= 6]
    if not near:
        return None
    lims = [v for s in near for v in (s.limit1, s.end_limit)]
    lo, hi = min(lims + [0.0]), max(lims + [0.0])
    pad = max(0.25, 0.2 * (hi - lo))
    f_lo = min(s.f1 for s in near)
    f_hi = max(s.f2 for s in near)
    return (lo - pad, hi + pad), (max(f_start, f_lo), min(f_stop, f_hi * 2.0))


def _figure(name: str, caption: str) -> str:
    return f'<div class="figure">{_FIGURE_MARK.format(name)}<p class="caption">{caption}</p></div>'


def _svg_size(svg: str) -> tuple[int, int]:
    m = re.search(r'<svg[^>]*\swidth="(\d+)"[^>]*\sheight="(\d+)"', svg)
    return (int(m.group(1)), int(m.group(2))) if m else (760, 340)


def _cell(x: Any) -> str:
    """A parts-list cell: numbers formatted, None empty, text escaped."""
    if x is None:
        return ""
    if isinstance(x, bool):
        return "yes" if x else "no"
    if isinstance(x, (int, np.integer)):
        return format_count(int(x))
    if isinstance(x, (float, np.floating)):
        return "n/a" if not math.isfinite(x) else f"{float(x):.4g}"
    if isinstance(x, (list, tuple)):
        return esc(", ".join(str(v) for v in x))
    return esc(str(x))


def build_report(result: AnalysisResult, *, recommendation: Any = None, curve: Any = None,
                 parts_rows: Sequence[dict] | None = None, title: str | None = None,
                 spread: Ensemble | None = None, generated: datetime | None = None) -> Report:
    """Build the report of ``result``.

    ``recommendation``: a :class:`filters.recommend.Recommendation` (or None);
    ``curve``: its cost-yield curve, a list of (target, Recommendation); ``parts_rows``:
    the parts list rows (dicts, columns in key order); ``spread``: an ensemble with gain
    curves for the spread figure (default: the result's own curves, or the first
    :data:`FIGURE_BOARDS` boards of the same seed evaluated again); ``generated``: the
    time stamp shown (default now).
    """
    d = result.design
    ens = result.ensemble
    prep = result.prepared
    y = result.yield_
    stage_names = [s.name for s in d.stages]
    grades = ens.grades
    figures: dict[str, str] = {}
    when = (generated or datetime.now()).strftime("%Y-%m-%d %H:%M")
    head_title = title or d.name or "Tolerance analysis"
    out: list[str] = []
    add = out.append

    # --- title, key figures -------------------------------------------------------------
    add(f"<h1>{esc(head_title)}</h1>")
    add(f'<p class="meta">Tolerance analysis report \u00b7 generated {esc(when)} \u00b7 tolspread {esc(__version__)}'
        "</p>")
    if title and d.name and title != d.name:
        add(f"<p>Design: <b>{esc(d.name)}</b></p>")
    if d.description:
        add(f"<p>{esc(d.description)}</p>")
    conf_pct = f"{y.confidence * 100:g} %"
    if d.mask:
        add(f'<p class="key">Estimated yield <b>{format_pct(y.estimate)}</b> '
            f"({conf_pct} interval {format_pct(y.low)} to {format_pct(y.high)}); "
            f"{format_count(y.passed)} of {format_count(y.samples)} sampled boards meet the spec mask.</p>")
    else:
        add("<p class=\"key\">This design has no spec mask, so there is no yield: add floor and ceiling "
            "spans to get one.</p>")
    sections = [("design", "Design"), ("mask", "Spec mask"), ("spread", "Spread of the response"),
                ("yield", "Yield"), ("failures", "Failure breakdown"), ("budget", "Spread budget"),
                ("corners", "Corners and root-sum-square")]
    if recommendation is not None or curve:
        sections.append(("recommendation", "Recommended grades"))
    if parts_rows:
        sections.append(("parts", "Parts list"))
    sections.append(("assumptions", "Assumptions"))
    add("<p>Contents: " + " \u00b7 ".join(f'<a href="#{k}">{esc(v)}</a>' for k, v in sections) + "</p>")

    # --- design -----------------------------------------------------------------------------
    add('<h2 id="design">Design</h2>')
    rows = []
    for p, g in zip(d.parts, grades):
        tol = f"\u00b1{g.tolerance_pct:g} %" + (" (what-if)" if p.tolerance_pct is not None else "")
        rows.append([esc(p.ref), esc(p.kind), esc(p.value_text), esc(p.grade), tol, esc(describe_distribution(g, short=True)),
                     esc(_tempco(g)), esc(_drift(g)), esc(g.technology)])
    add(_table(["Part", "Kind", "Value", "Grade", "Tolerance", "Distribution", "Tempco", "Drift", "Technology"],
               rows, numeric=[2, 4]))
    rows = []
    for k, s in enumerate(d.stages, start=1):
        topo = s.built()
        opts = ", ".join(f"{key}: {val}" for key, val in s.options.items()) or "defaults"
        roles = ", ".join(f"{role} = {ref}" for role, ref in s.roles.items())
        rows.append([str(k), esc(s.name or f"stage {k}"), esc(f"{s.topology} ({topo.description})"), esc(opts),
                     esc(roles), esc(_opamp_text(d, s, topo))])
    add(_table(["#", "Stage", "Topology", "Options", "Roles filled by parts", "Op-amp"], rows))
    add("<p>Stages are buffered: each stage's output drives the next as an ideal source.</p>")

    # --- mask -------------------------------------------------------------------------------
    add('<h2 id="mask">Spec mask</h2>')
    ref_db = float(prep.nominal.metrics.get("reference_db", 0.0))
    if d.mask:
        rows = []
        for j, s in enumerate(d.mask):
            unit = _SPAN_UNIT[s.quantity]
            if s.quantity == "delay":
                lim = f"variation at most {format_value(s.limit1, 's', digits=4)}"
            else:
                lim = f"{s.limit1:+g} {unit}" + (f" to {s.end_limit:+g} {unit}" if s.limit2 is not None
                                                  and s.limit2 != s.limit1 else "")
            rel = ("relative to the passband gain" if s.relative and s.quantity == "gain" else "absolute")
            rows.append([esc(s.label), esc(s.quantity), esc(s.kind), format_value(s.f1, "Hz", digits=4),
                         format_value(s.f2, "Hz", digits=4), esc(lim), rel,
                         _num(float(prep.nominal.margins[j]), unit)])
        add(_table(["Span", "Quantity", "Kind", "From", "To", "Limit", "Reference", "Nominal margin"], rows,
                   numeric=[3, 4, 7]))
        add(f"<p>Relative spans are measured from the nominal design's passband gain, "
            f"{_num(ref_db, 'dB')}. A positive margin means the span is met.</p>")
    else:
        add("<p>No spans.</p>")

    # --- spread figures ------------------------------------------------------------------------
    add('<h2 id="spread">Spread of the response</h2>')
    sp = _spread_ensemble(result, spread)
    assert sp.gain_db is not None
    bd = bands(sp.gain_db)
    nominal_db = sp.nominal.response.gain_db[0]
    if sp is ens or (sp.seed == ens.seed and sp.start == ens.start and sp.samples == result.samples):
        subset = f"all {format_count(sp.samples)} analysed boards"
    elif sp.seed == ens.seed and sp.start == ens.start and sp.samples <= result.samples:
        subset = f"the first {format_count(sp.samples)} of the {format_count(result.samples)} analysed boards"
    else:
        subset = f"{format_count(sp.samples)} boards of seed {sp.seed}"
    figures["spread"] = svg_spread_plot(sp.freqs_hz, nominal_db, bd, d.mask, ref_db, ident="spread",
                                        boards=sp.samples)
    add(_figure("spread", f"Gain of {subset}: light band every board, dark band the central "
                          f"{bd.share * 100:g} % of boards at each frequency, black the nominal design. "
                          "Hatched: the forbidden side of each gain span."
                + (" Phase and delay spans are not drawn." if any(s.quantity != "gain" for s in d.mask) else "")))
    zoom = _passband_zoom(d.mask, float(sp.freqs_hz[0]), float(sp.freqs_hz[-1]))
    if zoom is not None:
        (dlo, dhi), xr = zoom
        figures["passband"] = svg_spread_plot(sp.freqs_hz, nominal_db, bd, d.mask, ref_db, ident="passband",
                                              title="Passband detail", y_range=(ref_db + dlo, ref_db + dhi),
                                              x_range=xr, boards=sp.samples)
        add(_figure("passband", "The same boards, zoomed to the spans near the passband gain."))
    add(_metrics_table(result, stage_names))
    hist_metric = next((n for n in ("cutoff_hz", "centre_hz") if n in result.summaries
                        and result.summaries[n].valid > 0), None)
    if hist_metric is not None:
        figures["histogram"] = svg_histogram(ens.metrics[hist_metric], 40, ~ens.passed if d.mask else None,
                                             metric_label(hist_metric, stage_names), unit="Hz", ident="histogram")
        add(_figure("histogram", f"{esc(metric_label(hist_metric, stage_names))} of all "
                                 f"{format_count(result.samples)} boards"
                    + (", failing boards stacked on top." if d.mask else ".")))

    # --- yield ---------------------------------------------------------------------------------
    add('<h2 id="yield">Yield</h2>')
    method_name = _INTERVAL_NAMES.get(y.method, y.method)
    if d.mask:
        add(f'<p class="key">Yield <b>{format_pct(y.estimate)}</b>: {format_count(y.passed)} of '
            f"{format_count(y.samples)} boards meet every span. {conf_pct} confidence interval "
            f"<b>{format_pct(y.low)} to {format_pct(y.high)}</b> ({esc(method_name)}; half-width "
            f"{100 * y.half_width:.2f} percentage points).</p>")
        add(f"<p>Sampling: {esc(_METHOD_NAMES.get(ens.method, ens.method))}, seed {ens.seed}.</p>")
        if len(result.history) > 1:
            add(f"<p>Adaptive run: boards were added in {len(result.history)} batches until the interval "
                f"was narrow enough or the sample limit was reached.</p>")
            add(_table(["Batch", "Boards", "Yield", "Interval"],
                       [[str(i), format_count(h.samples), format_pct(h.estimate),
                         f"{format_pct(h.low)} to {format_pct(h.high)}"] for i, h in enumerate(result.history, 1)],
                       numeric=[1, 2]))
    else:
        add("<p>No spec mask: every board passes trivially, so no yield is reported.</p>")

    # --- failure breakdown ----------------------------------------------------------------------
    add('<h2 id="failures">Failure breakdown</h2>')
    if d.mask:
        rows = []
        for j, s in enumerate(result.spans):
            unit = _SPAN_UNIT[d.mask[j].quantity]
            worst = _num(s.worst_margin_db, unit)
            if s.worst_margin_db < 0:
                worst = f'<span class="bad">{worst}</span>'
            rows.append([esc(s.name), format_count(s.failed), format_pct(s.fraction), format_pct(s.share_of_failures),
                         worst, _num(float(prep.nominal.margins[j]), unit)])
        add(_table(["Span", "Failing boards", "Of all boards", "Share of failures", "Worst margin",
                    "Nominal margin"], rows, numeric=[1, 2, 3, 4, 5]))
        add("<p>A board can fail several spans, so the shares of failures can add up to more than 100 %. "
            "The worst margin is the smallest over all boards (negative: violated).</p>")
        worst_j = int(np.argmax([s.failed for s in result.spans])) if result.spans else -1
        if worst_j >= 0 and result.spans[worst_j].failed > 0:
            lab = d.mask[worst_j].label
            unit = _SPAN_UNIT[d.mask[worst_j].quantity]
            figures["margin"] = svg_histogram(ens.margins[:, worst_j], 40, ens.margins[:, worst_j] < 0,
                                              f"margin of '{lab}' ({unit})", ident="margin")
            add(_figure("margin", f"Margin of the span failing most often, '{esc(lab)}', over all boards "
                                  "(below 0: the span is violated)."))
    else:
        add("<p>No spans to fail.</p>")

    # --- spread budget --------------------------------------------------------------------------
    add('<h2 id="budget">Spread budget</h2>')
    add("<p>Share of each metric's variance explained by each part (least-squares fit of the metric, or its "
        "logarithm for frequencies, on every part's log deviation over the sampled boards). What the "
        "straight-line fit leaves is shown as not explained. Sensitivity: the change at the nominal design "
        "(d ln metric / d ln value for frequencies; dB per 1 % change for margins).</p>")
    names = [n for n in ("cutoff_hz", "bandwidth_hz") if n in result.budget]
    names += [n for n in result.budget if n.startswith("margin.")]
    for k, name in enumerate(names):
        b = result.budget[name]
        label = metric_label(name, stage_names)
        add(f"<h3>{esc(label)}</h3>")
        top = [e for e in b.entries if e.share > 0][:5]
        if not top and b.remainder == 0:
            add("<p>No spread: this metric is the same on every board.</p>")
            continue
        rest = sum(e.share for e in b.entries if e.share > 0) - sum(e.share for e in top)
        rows = [[esc(e.ref), format_pct(e.share, 1), _sensitivity(e.sensitivity, e.sensitivity_unit)]
                for e in top]
        bar_labels = [e.ref for e in top]
        bar_vals = [100 * e.share for e in top]
        if rest > 0.0005:
            rows.append(["other parts", format_pct(rest, 1), ""])
            bar_labels.append("other parts")
            bar_vals.append(100 * rest)
        rows.append(["not explained (remainder)", format_pct(b.remainder, 1), ""])
        bar_labels.append("not explained")
        bar_vals.append(100 * b.remainder)
        add(_table(["Part", "Share of variance", "Sensitivity"], rows, numeric=[1, 2]))
        fig = f"budget-{k + 1}"
        muted = [i for i, t in enumerate(bar_labels) if i >= len(top)]
        figures[fig] = svg_bar_chart(bar_labels, bar_vals, f"Spread budget: {label}", ident=fig, muted=muted)
        add(_figure(fig, f"Spread budget of {esc(label)}, from {format_count(b.samples)} boards."))

    # --- corners --------------------------------------------------------------------------------
    add('<h2 id="corners">Corners and root-sum-square</h2>')
    c = result.corners
    if c.exhaustive:
        add(f"<p>Exhaustive: all {format_count(c.boards)} combinations of the {c.varying_parts} varying parts at the "
            "ends of their ranges (tolerance, temperature coefficient at either end of the temperature range, "
            "drift).</p>")
    else:
        add(f"<p>Guided estimate: {format_count(c.boards)} corners of {c.varying_parts} varying parts chosen by the "
            "signs of the sensitivities (every part moved in the direction that raises, then lowers, each "
            "metric). This is an estimate, not a guaranteed worst case.</p>")
    rows = []
    for name, r in c.ranges.items():
        if is_pair_metric(name):
            continue
        u = _metric_unit(name, d.mask)
        rows.append([esc(metric_label(name, stage_names)), _num(r.nominal, u), _num(r.corner_low, u),
                     _num(r.corner_high, u), _num(r.mc_low, u), _num(r.mc_high, u), _num(r.rss_std, u, False),
                     _num(r.rss_limit, u, False)])
    add(_table(["Metric", "Nominal", "Corner low", "Corner high", "MC min", "MC max", "RSS std", "RSS limit (\u00b1)"],
               rows, numeric=range(1, 8)))
    add("<p>MC: the extremes over the sampled boards. RSS: the sensitivities combined with each part's sampled "
        "spread (std) or with half its full range (limit).</p>")
    if d.mask:
        verdict = ("every corner board meets the mask" if c.all_pass
                   else '<span class="bad">some corner boards fail the mask</span>')
        add(f"<p>Worst case: {verdict}.</p>")
        add(_table(["Span", "Worst margin over the corners"],
                   [[esc(s.label), _num(c.worst_margins.get(s.label, float("nan")), _SPAN_UNIT[s.quantity])]
                    for s in d.mask], numeric=[1]))

    # --- recommendation ----------------------------------------------------------------------------
    if recommendation is not None or curve:
        add('<h2 id="recommendation">Recommended grades</h2>')
        if recommendation is not None:
            add(_recommendation_html(d, recommendation))
        if curve:
            pts = [(float(t), (r.chosen.cost if r.chosen is not None else None)) for t, r in curve]
            current = sum(d.catalog[p.grade].cost for p in d.parts)
            figures["cost-yield"] = svg_cost_yield(pts, current_cost=current, ident="cost-yield")
            add("<h3>Cost against yield target</h3>")
            add(_figure("cost-yield", "Total cost of the cheapest grade choice whose lower confidence bound meets "
                                      "each target (costs relative, from the catalog)."))
            rows = []
            for t, r in curve:
                ch = r.chosen
                fresh = "n/a" if ch is None or r.verified is None else ("yes" if r.meets_on_fresh_seed else "no")
                rows.append([format_pct(float(t), 1), _cost(ch.cost) if ch else "none found",
                             format_pct(ch.lower) if ch else "", format_pct(ch.estimate) if ch else "", fresh])
            add(_table(["Target", "Total cost", "Lower bound", "Yield estimate", "Meets on fresh boards"], rows,
                       numeric=[0, 1, 2, 3]))

    # --- parts list -------------------------------------------------------------------------------
    if parts_rows:
        add('<h2 id="parts">Parts list</h2>')
        cols = list(parts_rows[0].keys())
        add(_table([str(k).replace("_", " ") for k in cols],
                   [[_cell(r.get(k)) for k in cols] for r in parts_rows]))

    # --- assumptions and caution -------------------------------------------------------------------
    add('<h2 id="assumptions">Assumptions</h2>')
    add('<ul class="assumptions">' + "".join(f"<li>{item}</li>" for item in _assumptions(result, sp)) + "</ul>")
    add(f'<table class="caution" border="1" cellpadding="10"><tr><td bgcolor="#fff4e0"><b>Caution.</b> {esc(CAUTION)}</td></tr></table>')

    sizes = {name: _svg_size(svg) for name, svg in figures.items()}
    return Report(head_title, "\n".join(out), figures, sizes)


_INTERVAL_NAMES = {"wilson": "Wilson score interval (without continuity correction)",
                   "exact": "Clopper-Pearson exact interval"}
_METHOD_NAMES = {"random": "random (numpy PCG64 generator seeded through SeedSequence)",
                 "sobol": "scrambled Sobol points (quasi-Monte Carlo)"}


def _sensitivity(value: float, unit: str) -> str:
    if not math.isfinite(value):
        return "n/a"
    return f"{value:+.3g}" if unit == "ln/ln" else f"{value:+.3g} {esc(unit)}"


def _opamp_text(d, stage, topo) -> str:
    amps = [o.role for o in topo.netlist.opamps]
    if not amps:
        return "passive"
    out = []
    for role in amps:
        ref = stage.roles.get(role)
        if ref is None:
            out.append(f"{role} ideal (infinite gain and bandwidth)")
        else:
            part = d.parts[d.part_index(ref)]
            out.append(f"{role} = {ref}, single-pole with gain-bandwidth {format_value(part.value, 'Hz', digits=4)}")
    return "; ".join(out)


def _metrics_table(result: AnalysisResult, stage_names: list[str]) -> str:
    order = [n for n in ("cutoff_hz", "centre_hz", "bandwidth_hz", "lower_hz", "upper_hz", "reference_db",
                         "peaking_db") if n in result.summaries]
    order += [n for n in result.summaries if n not in order and not is_pair_metric(n)]
    rows = []
    notes = []
    for n in order:
        s = result.summaries[n]
        u = _metric_unit(n, result.design.mask)
        rel = f"{100 * s.rel_std:.2f} %" if (u == "Hz" or n.endswith(".q")) and math.isfinite(s.rel_std) else ""
        rows.append([esc(metric_label(n, stage_names)), _num(s.nominal, u), _num(s.mean, u), _num(s.std, u, False), rel,
                     _num(s.p01, u), _num(s.p99, u), _num(s.minimum, u), _num(s.maximum, u)])
        if s.valid < result.samples:
            notes.append(f"{esc(metric_label(n, stage_names))} is outside the analysed range on "
                         f"{format_count(result.samples - s.valid)} board(s); they are left out of its statistics.")
    html_out = "<h3>Metrics over all boards</h3>\n" + _table(
        ["Metric", "Nominal", "Mean", "Std", "Std/mean", "1st pct", "99th pct", "Min", "Max"], rows,
        numeric=range(1, 9))
    if notes:
        html_out += "\n" + "".join(f"<p>Note: {t}</p>" for t in notes)
    return html_out


def _recommendation_html(d, rec) -> str:
    """The recommendation's section body (``rec`` has the fields of
    :class:`filters.recommend.Recommendation`; ``search``, ``capped`` and ``note`` optional)."""
    cat = d.catalog
    out: list[str] = []
    current = [p.grade for p in d.parts]
    current_cost = sum(cat[g].cost for g in current)
    conf = f"{rec.confidence * 100:g} %"
    search = getattr(rec, "search", "")
    how = {"exhaustive": " (every combination in order of cost: the cheapest)",
           "guided": " (guided search: a local optimum, not always the global one)"}.get(search, "")
    out.append(f"<p>Target: the one-sided {conf} lower confidence bound of the yield at least "
               f"<b>{format_pct(rec.target_yield, 1)}</b>. {format_count(rec.evaluations)} grade choices were "
               f"evaluated on the same boards{how}.</p>")
    note = getattr(rec, "note", "")
    if note:
        out.append(f"<p>Note: {esc(str(note))}</p>")
    ch = rec.chosen
    if ch is None:
        out.append('<p class="bad">No combination of grades in the catalog meets this target.</p>')
        return "\n".join(out)
    new_cat = rec.design.catalog if getattr(rec, "design", None) is not None else cat
    rows = []
    for p, g_new in zip(d.parts, ch.grades):
        tol_old = f"\u00b1{cat[p.grade].tolerance_pct:g} %"
        tol_new = f"\u00b1{new_cat[g_new].tolerance_pct:g} %" if g_new in new_cat else ""
        changed = "changed" if g_new != p.grade else ""
        rows.append([esc(p.ref), esc(p.grade), tol_old, esc(g_new), tol_new, changed])
    out.append(_table(["Part", "Current grade", "Tolerance", "Recommended grade", "Tolerance", ""], rows,
                      numeric=[2, 4]))
    out.append(f"<p>Total cost: <b>{_cost(ch.cost)}</b> (current grades: {_cost(current_cost)}; relative "
               "units from the catalog).</p>")
    seed = getattr(rec, "seed", None)
    on = f"seed {seed}" if seed is not None else "the search's seed"
    out.append(f"<p>On the {format_count(ch.samples)} boards the search used ({on}): yield {format_pct(ch.estimate)}, "
               f"lower bound <b>{format_pct(ch.lower)}</b> ({format_count(ch.passed)} of "
               f"{format_count(ch.samples)} boards pass).</p>")
    v = rec.verified
    if v is None:
        out.append("<p>Not checked on fresh boards.</p>")
    else:
        verdict = ("meets the target" if rec.meets_on_fresh_seed
                   else '<span class="bad">does not meet the target</span>')
        out.append(f"<p>Checked on fresh boards (a different seed): yield {format_pct(v.estimate)}, lower bound "
                   f"{format_pct(v.lower)} ({format_count(v.passed)} of {format_count(v.samples)} boards pass); "
                   f"the choice {verdict}.</p>")
    return "\n".join(out)


def _assumptions(result: AnalysisResult, sp: Ensemble) -> list[str]:
    """Every assumption behind the numbers, as HTML list items."""
    d = result.design
    a = d.analysis
    ens = result.ensemble
    y = result.yield_
    items: list[str] = []
    by_grade: dict[str, tuple[Grade, list[str], bool]] = {}
    for p, g in zip(d.parts, ens.grades):
        by_grade.setdefault(g.name, (g, [], p.tolerance_pct is not None))[1].append(p.ref)
    for name, (g, refs, what_if) in by_grade.items():
        note = " (a what-if tolerance in place of the grade's own)" if what_if else ""
        items.append(f"Grade {esc(name)}{note} ({esc(', '.join(refs))}): \u00b1{g.tolerance_pct:g} %, "
                     f"{esc(describe_distribution(g))}; temperature coefficient {esc(_tempco(g))}"
                     f"{' (spread uniform between parts)' if g.tempco_spread_ppm else ''}; drift {esc(_drift(g))}"
                     f"{' (uniform)' if g.drift_pct else ''}; cost {g.cost:g}"
                     f"{' (' + esc(g.technology) + ')' if g.technology else ''}.")
    items.append("A tolerance is read as the stated number of standard deviations (the coverage factor), a "
                 "common-practice reading, not a maker's promise; grade costs are relative figures from the "
                 "catalog (the built-in ones are invented demo figures).")
    if a.temp_low_c == a.temp_high_c:
        t = (f"Board temperature fixed at {a.temp_low_c:g} \u00b0C"
             + (" (the reference: temperature coefficients have no effect)." if a.temp_low_c == REFERENCE_CELSIUS
                else f"; marked values hold at the reference {REFERENCE_CELSIUS:g} \u00b0C."))
    else:
        t = (f"Board temperature uniform from {a.temp_low_c:g} to {a.temp_high_c:g} \u00b0C, one temperature "
             f"per board; marked values hold at the reference {REFERENCE_CELSIUS:g} \u00b0C and change by the "
             "temperature coefficient times the difference.")
    items.append(esc(t))
    if a.lot_share > 0:
        items.append(esc(f"Lot share {a.lot_share:g}: that fraction of a part's value variance is shared by the "
                         "parts of the same marked value and grade on one board (one reel)."))
    else:
        items.append("Lot share 0: every part's value varies independently of the others.")
    items.append(f"Sampled boards: {format_count(result.samples)}; seed {ens.seed}; sampling "
                 f"{esc(_METHOD_NAMES.get(ens.method, ens.method))}. The same standard scores are used for every "
                 "grade choice (common random numbers).")
    items.append(f"Yield interval: two-sided {y.confidence * 100:g} % "
                 f"{esc(_INTERVAL_NAMES.get(y.method, y.method))}; a board passes when it meets every span.")
    f = result.prepared.freqs_hz
    items.append(f"Frequency grid: {format_count(f.size)} points from {format_value(a.f_start, 'Hz', digits=4)} to "
                 f"{format_value(a.f_stop, 'Hz', digits=4)} ({a.points} log-spaced points plus the mask edges). "
                 "Each span is checked at its edges and at every grid point between them: the worst point of a "
                 "span is found on the grid, so a narrow excursion between grid points can be missed.")
    items.append(esc(f"Cutoff: where the gain falls {a.cutoff_db:g} dB below each board's own passband gain "
                     "(refined between grid points). Relative spans use the nominal design's passband gain."))
    for k, s in enumerate(d.stages, start=1):
        text = _opamp_text(d, s, s.built())
        items.append(esc(f"{s.name or f'stage {k}'}: " + ("passive, no op-amp." if text == "passive"
                                                          else f"op-amp {text}.")))
    items.append("Stages are buffered (each stage's output is an ideal source for the next); parts are ideal "
                 "apart from their value (no parasitics, no op-amp offset, slew rate or output limits).")
    items.append(f"Spread figures drawn from {format_count(sp.samples)} boards of seed {sp.seed}; the central band "
                 f"holds {INNER * 100:g} % of them at each frequency.")
    items.append("Spread budget: a straight-line least-squares fit over the sampled boards; curvature, "
                 "interactions and lot correlation appear as the remainder.")
    c = result.corners
    items.append("Corners: " + ("every combination of part limits (exhaustive)." if c.exhaustive
                                else "sensitivity-guided corners, an estimate rather than a guaranteed worst case."))
    items.append(f"Tool: tolspread {esc(__version__)}.")
    return items


def write_report(report: Report, path: str | Path) -> None:
    """Write the self-contained HTML report to ``path`` atomically."""
    write_text_atomic(Path(path), report.html(), backup=False)
