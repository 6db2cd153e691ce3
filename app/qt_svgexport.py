"""File > Export plots as SVG: every plot the window shows, in one SVG file.

The gain plot (bands, nominal curve, mask spans), the phase or group-delay plot and, when
the results panel shows one, the histogram of the chosen metric are drawn by the report's
own SVG writer (:mod:`filters.report.charts`) over the ranges the window shows, and
stacked top to bottom; a design of several channels with match spans adds the Channel
match charts below them (:func:`match_svgs`, the report's own), whether or not that tab is shown. The file uses only what browsers and common image converters draw
alike: plain shapes, text, one clip path per plot, no nested ``<svg>``, no scripts, no
external resources.
"""
from __future__ import annotations

import math
import re
from dataclasses import replace
from pathlib import Path

import numpy as np

from ..bands import Bands
from ..designfile import write_text_atomic
from ..liveview import ViewData
from ..report.channels import AXIS_TITLES, svg_match_plot
from ..report.charts import SVG_NS, svg_histogram, svg_spread_plot
from .. import metric_names
from ..metric_names import metric_label

WIDTH = 1100
GAIN_HEIGHT = 480
SECOND_HEIGHT = 360
HIST_HEIGHT = 300
MATCH_HEIGHT = 300  # each Channel match chart (a design of several channels with match spans)
GAP = 12
_PREFIX = {-15: "f", -12: "p", -9: "n", -6: "\u00b5", -3: "m", 0: ""}
_SVG_HEAD = re.compile(r'^<svg[^>]*\swidth="(\d+)"[^>]*\sheight="(\d+)"[^>]*>', re.S)


def stack_svgs(svgs: list[str], gap: int = GAP) -> str:
    """One SVG document of ``svgs`` (standalone SVG texts from :mod:`filters.report.charts`)
    placed one under another, each as a translated group (ids must differ already)."""
    parts: list[str] = []
    y = 0
    width = 0
    for svg in svgs:
        m = _SVG_HEAD.match(svg)
        if m is None:
            raise ValueError("not an SVG figure of tolspread.report.charts")
        w, h = int(m.group(1)), int(m.group(2))
        inner = svg[m.end():svg.rindex("</svg>")]
        parts.append(f'<g transform="translate(0 {y})">{inner}</g>')
        y += h + gap
        width = max(width, w)
    height = max(y - gap, 1)
    return ('<?xml version="1.0" encoding="UTF-8"?>\n'
            f'<svg xmlns="{SVG_NS}" version="1.1" width="{width}" height="{height}" '
            f'viewBox="0 0 {width} {height}" font-family="sans-serif" stroke="none">\n'
            f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>\n'
            + "\n".join(parts) + "\n</svg>\n")


def _scaled(b: Bands, factor: float) -> Bands:
    return replace(b, inner_low=b.inner_low / factor, inner_high=b.inner_high / factor,
                   low=b.low / factor, high=b.high / factor)


def _delay_prefix(values_s: np.ndarray) -> tuple[str, float]:
    finite = np.abs(values_s[np.isfinite(values_s)])
    top = float(finite.max()) if finite.size else 0.0
    if top <= 0:
        return "", 1.0
    e = min(max(3 * math.floor(math.log10(top) / 3), -15), 0)
    return _PREFIX[e], 10.0 ** e


def plots_svg(view: ViewData, gain_range: tuple[tuple[float, float], tuple[float, float]],
              second_range: tuple[tuple[float, float], tuple[float, float]] | None,
              histogram_metric: str | None) -> str:
    """The SVG text of the window's plots. ``gain_range`` and ``second_range`` are each
    ((log10 f_lo, log10 f_hi), (y_lo, y_hi)) as the plots show them (y in dB, degrees or
    seconds); ``second_range`` None leaves the phase/delay plot out; ``histogram_metric``
    names the metric of the histogram shown (None: none)."""
    name = view.design.name or "design"
    boards = view.curve_boards or view.samples
    (x0, x1), (y0, y1) = gain_range
    figs = [svg_spread_plot(view.freqs_hz, view.nominal_gain_db, view.gain_bands, view.design.mask,
                            view.nominal_metrics.get("reference_db", 0.0), width=WIDTH, height=GAIN_HEIGHT,
                            x_range=(10 ** x0, 10 ** x1), y_range=(y0, y1), boards=boards, ident="gain",
                            title=f"{name}: gain spread")]
    if second_range is not None:
        (x0, x1), (y0, y1) = second_range
        if view.second == "delay":
            prefix, factor = _delay_prefix(view.nominal_second)
            label = f"group delay ({prefix}s)"
        else:
            factor, label = 1.0, "phase (deg)"
        figs.append(svg_spread_plot(view.freqs_hz, view.nominal_second / factor, _scaled(view.second_bands, factor),
                                    (), 0.0, width=WIDTH, height=SECOND_HEIGHT, x_range=(10 ** x0, 10 ** x1),
                                    y_range=(y0 / factor, y1 / factor), boards=boards, ident="second",
                                    title=f"{name}: {label.split(' (')[0]} spread", ylabel=label))
    if histogram_metric is not None and histogram_metric in view.metrics:
        stage_names = [s.name for s in view.design.stages]
        label = metric_label(histogram_metric, stage_names, view.design.mask)
        figs.append(svg_histogram(view.metrics[histogram_metric], 40,
                                  ~view.ensemble.passed if view.design.mask else None, label,
                                  unit=metric_names.unit(histogram_metric, view.design.mask),
                                  width=WIDTH, height=HIST_HEIGHT, ident="histogram",
                                  title=f"{name}: histogram of {label}"))
    return stack_svgs(figs + match_svgs(view))


def match_svgs(view: ViewData) -> list[str]:
    """The Channel match charts of ``view`` (one per match quantity: the boards' largest
    difference between channels with each match span's limit, as the report draws them;
    :func:`filters.report.channels.svg_match_plot`), empty for a design of one channel or
    without match spans."""
    curves = view.result.curves
    if curves is None or not curves.channel_spread:
        return []
    name = view.design.name or "design"
    return [svg_match_plot(curves.freqs_hz, b, list(view.design.mask), q, width=WIDTH, height=MATCH_HEIGHT,
                           ident=f"match-{q}", boards=curves.boards,
                           title=f"{name}: {AXIS_TITLES[q]} between channels")
            for q, b in curves.spread_bands.items()]


def export_window_plots(window, path: str | Path) -> bool:
    """Write the plots ``window`` shows (gain; phase or delay if visible; the histogram if
    visible; the Channel match charts for a design of several channels with match spans)
    to ``path`` as SVG; False when there is nothing drawn yet."""
    view = window.session.last_view
    if view is None:
        return False
    plots = window.plots
    gain = plots.mag.vb.viewRange()  # data coordinates: log10 Hz, and dB / deg / s
    second = plots.second.vb.viewRange() if plots.second.isVisible() else None
    hist = window.results.hist
    metric = window.results.metric_name if hist.isVisible() else None
    text = plots_svg(view, tuple(gain), tuple(second) if second is not None else None, metric)
    write_text_atomic(Path(path), text, backup=False)
    return True
