"""The analysis report: one self-contained HTML file with inline SVG figures.

Over 500 lines: one document's sections, each a short function, read in the order the report prints them.

:func:`build_report` turns an :class:`~tolspread.analysis.AnalysisResult` (and, when given,
a grade recommendation, its cost-yield curve and a parts list) into a :class:`Report`.
Every number in it comes from the result; this module only lays out the document. The
figures are drawn by :mod:`filters.report_figures`, the words and numbers for people come
from :mod:`filters.report_text` (every sentence about the design is generated from it).

:meth:`Report.html` gives one HTML document with the SVGs inline, no scripts and no
external resources. :meth:`Report.html_with_images` gives the same document with each
figure as an ``<img>`` whose source the caller names (the window renders the SVGs to
images and prints the document to PDF). Tables carry their header row in ``<thead>`` so
a printed table repeats it on every page. All user text is escaped.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from datetime import datetime
from pathlib import Path
from typing import Any, Callable, Sequence

import numpy as np

from . import __version__
from .analysis import AnalysisResult
from .bands import INNER, bands
from .designfile import write_text_atomic
from .evaluate import Ensemble, evaluate
from . import metric_names
from .mask import Span
from .metric_names import SPAN_UNIT, is_margin, is_pair_metric, margin_name, metric_label
from .grades import Grade
from .report_figures import (SVG_NS, esc, svg_bar_chart, svg_cost_yield, svg_histogram, svg_spread_plot)
from .report_text import (_INTERVAL_NAMES, _METHOD_NAMES, _cost, _drift, format_metric,
                          _opamp_text, _sensitivity, _tempco, describe_design, describe_distribution,
                          format_count, format_pct)
from .sampling import REFERENCE_CELSIUS
from .values import format_value

__all__ = [
    "CAUTION",
    "FIGURE_BOARDS",
    "Report",
    "PRINT_CSS",
    "build_report",
    "write_report",
]

#: The closing caution of every report (also shown in a box).
CAUTION = ("The numbers in this report are estimates under the assumptions listed above. "
           "Confirm them by measurements of real parts and by qualified review, "
           "and follow the standards that apply to your product.")

#: Boards drawn in the spread figure when the result kept no curves.
FIGURE_BOARDS = 2000

_FIGURE_MARK = "<!--figure:{}-->"
_FIGURE_RE = re.compile(r"<!--figure:([A-Za-z0-9_-]+)-->")

# --- the report ----------------------------------------------------------------------------

@dataclass(frozen=True)
class Report:
    """A built report. ``body`` is the HTML body with a marker where each figure goes;
    ``figures`` maps figure name -> standalone SVG text; ``sizes`` name -> (width, height)."""

    title: str
    body: str
    figures: dict[str, str]
    sizes: dict[str, tuple[int, int]] = field(default_factory=dict)

    def _document(self, figure: Callable[[str], str], css: str = "") -> str:
        body = _FIGURE_RE.sub(lambda m: figure(m.group(1)), self.body)
        return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                f"<title>{esc(self.title)}</title>\n<style>\n{css or _CSS}</style>\n</head>\n<body>\n"
                f"{body}\n</body>\n</html>\n")

    def html(self) -> str:
        """One self-contained HTML document, each figure an inline SVG."""
        def inline(name: str) -> str:
            svg = self.figures[name]
            return svg.replace(f' xmlns="{SVG_NS}"', "", 1)  # implied for SVG inside HTML
        return self._document(inline)

    def html_with_images(self, src_for: Callable[[str], str], width: float | None = None,
                         printed: bool = False) -> str:
        """The same document with each figure as ``<img src="src_for(name)">``, drawn
        ``width`` wide (default: its own size; the height keeps the aspect ratio).
        ``printed``: the style sheet for paper (:data:`PRINT_CSS`, sizes in points)."""
        def image(name: str) -> str:
            w, h = self.sizes.get(name, (760, 340))
            if width is not None:
                w, h = width, h * width / w
            return (f'<img src="{esc(src_for(name), quote=True)}" width="{int(w)}" height="{int(round(h))}" '
                    f'alt="{esc(name, quote=True)}">')
        return self._document(image, PRINT_CSS if printed else "")


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
@media print { div.figure { page-break-inside: avoid; } thead { display: table-header-group; } }
"""


#: The style sheet of the printed report (Qt's rich-text layout; sizes in points, nothing
#: smaller than 8 pt).
PRINT_CSS = """\
body { font-family: sans-serif; color: #1a1a1a; font-size: 9pt; }
h1 { font-size: 15pt; margin-bottom: 2pt; }
h2 { font-size: 12pt; margin-top: 14pt; margin-bottom: 4pt; }
h3 { font-size: 10pt; margin-top: 8pt; margin-bottom: 3pt; }
p { margin-top: 2pt; margin-bottom: 4pt; }
p.meta { color: #555555; font-size: 8pt; }
table { border-collapse: collapse; margin-top: 3pt; margin-bottom: 6pt; font-size: 8pt; }
th, td { border: 1px solid #c8c8c8; padding: 1px 3px; text-align: left; vertical-align: top; }
th { background: #f0f0f0; font-weight: bold; }
td.num { text-align: right; white-space: nowrap; }
p.key { font-size: 10pt; }
p.caption { color: #444444; font-size: 8pt; margin-top: 1pt; }
.bad { color: #b00000; }
table.caution { border: 2px solid #b36b00; background: #fff4e0; margin-top: 10pt; font-size: 9pt; }
table.caution td { border: none; padding: 6px 8px; }
li { margin-bottom: 2pt; }
"""


def _table(headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[int] = ()) -> str:
    """An HTML table; ``headers`` plain text (escaped here, every one named), cells are HTML
    fragments. The header row is in ``<thead>``, so a printed table repeats it on each page."""
    num = set(numeric)
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{esc(h)}</th>" for h in headers) + "</tr></thead>", "<tbody>"]
    for r in rows:
        out.append("<tr>" + "".join(f'<td class="num">{c}</td>' if i in num else f"<td>{c}</td>"
                                    for i, c in enumerate(r)) + "</tr>")
    out.append("</tbody>")
    out.append("</table>")
    return "\n".join(out)


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
                 spread: Ensemble | None = None, generated: datetime | None = None,
                 current: Any = None) -> Report:
    """Build the report of ``result``.

    ``recommendation``: a :class:`filters.recommend.Recommendation` (or None);
    ``curve``: its cost-yield curve, a list of (target, Recommendation); ``parts_rows``:
    the parts list rows (dicts, columns in key order); ``spread``: an ensemble with gain
    curves for the spread figure (default: the result's own curves, or the first
    :data:`FIGURE_BOARDS` boards of the same seed evaluated again); ``generated``: the
    time stamp shown (default now); ``current``: the design the recommendation started
    from, when ``result`` analyses another (by default the recommendation's own record of
    the current grades, else ``result.design``).
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
    add('<p class="summary">' + " ".join(esc(t) for t in describe_design(d, grades)) + "</p>")
    if d.description:
        add(f'<p class="note"><i>Note from the design file (the designer\'s own words, not checked against '
            f"the design):</i> {esc(d.description)}</p>")
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
            unit = SPAN_UNIT[s.quantity]
            if s.quantity == "delay":
                lim = f"variation at most {format_value(s.limit1, 's', digits=4)}"
            else:
                lim = f"{s.limit1:+g} {unit}" + (f" to {s.end_limit:+g} {unit}" if s.limit2 is not None
                                                  and s.limit2 != s.limit1 else "")
            rel = ("relative to the passband gain" if s.relative and s.quantity == "gain" else "absolute")
            rows.append([esc(s.label), esc(s.quantity), esc(s.kind), format_value(s.f1, "Hz", digits=4),
                         format_value(s.f2, "Hz", digits=4), esc(lim), rel,
                         format_metric(float(prep.nominal.margins[j]), unit)])
        add(_table(["Span", "Quantity", "Kind", "From", "To", "Limit", "Reference", "Nominal margin"], rows,
                   numeric=[3, 4, 7]))
        add(f"<p>Relative spans are measured from the nominal design's passband gain, "
            f"{format_metric(ref_db, 'dB')}. A positive margin means the span is met.</p>")
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
                                             metric_label(hist_metric, stage_names),
                                             unit=metric_names.unit(hist_metric), ident="histogram")
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
            unit = SPAN_UNIT[d.mask[j].quantity]
            worst = format_metric(s.worst_margin_db, unit)
            if s.worst_margin_db < 0:
                worst = f'<span class="bad">{worst}</span>'
            rows.append([esc(s.name), format_count(s.failed), format_pct(s.fraction), format_pct(s.share_of_failures),
                         worst, format_metric(float(prep.nominal.margins[j]), unit)])
        add(_table(["Span", "Failing boards", "Of all boards", "Share of failures", "Worst margin",
                    "Nominal margin"], rows, numeric=[1, 2, 3, 4, 5]))
        add("<p>A board can fail several spans, so the shares of failures can add up to more than 100 %. "
            "The worst margin is the smallest over all boards (negative: violated).</p>")
        worst_j = int(np.argmax([s.failed for s in result.spans])) if result.spans else -1
        if worst_j >= 0 and result.spans[worst_j].failed > 0:
            lab = d.mask[worst_j].label
            figures["margin"] = svg_histogram(ens.margins[:, worst_j], 40, ens.margins[:, worst_j] < 0,
                                              metric_label(margin_name(lab), stage_names, d.mask), ident="margin")
            add(_figure("margin", f"Margin of the span failing most often, '{esc(lab)}', over all boards "
                                  "(below 0: the span is violated)."))
    else:
        add("<p>No spans to fail.</p>")

    # --- spread budget --------------------------------------------------------------------------
    add('<h2 id="budget">Spread budget</h2>')
    add("<p>Share of each metric's variance explained by each part (least-squares fit of the metric, or its "
        "logarithm for frequencies, on every part's log deviation over the sampled boards). What the "
        "straight-line fit leaves is shown as not explained. Sensitivity: the change at the nominal design "
        "(d ln metric / d ln value for frequencies; for margins the change in the span's unit, dB, deg or s, "
        "per 1 % change of the part).</p>")
    names = [n for n in ("cutoff_hz", "bandwidth_hz") if n in result.budget]
    names += [n for n in result.budget if is_margin(n)]
    for k, name in enumerate(names):
        b = result.budget[name]
        label = metric_label(name, stage_names, d.mask)
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
        u = metric_names.unit(name, d.mask)
        rows.append([esc(metric_label(name, stage_names, d.mask)),
                     *(format_metric(x, u) for x in (r.nominal, r.corner_low, r.corner_high, r.mc_low, r.mc_high)),
                     format_metric(r.rss_std, u, False) if r.linear else "not linear",
                     format_metric(r.rss_limit, u, False) if r.linear else "not linear"])
    add(_table(["Metric", "Nominal", "Corner low", "Corner high", "MC min", "MC max", "RSS std", "RSS limit (\u00b1)"],
               rows, numeric=range(1, 8)))
    add("<p>MC: the extremes over the sampled boards. RSS: the sensitivities combined with each part's sampled "
        "spread (std) or with half its full range (limit). \"Not linear\": a one-sided limit (a minimum or "
        "maximum over frequency) has zero first-order sensitivity at the nominal, so its RSS would read "
        "near 0; see the sampled spread (MC min and max) instead.</p>")
    if d.mask:
        verdict = ("every corner board meets the mask" if c.all_pass
                   else '<span class="bad">some corner boards fail the mask</span>')
        add(f"<p>Worst case: {verdict}.</p>")
        add(_table(["Span", "Worst margin over the corners"],
                   [[esc(s.label), format_metric(c.worst_margins.get(s.label, float("nan")), SPAN_UNIT[s.quantity])]
                    for s in d.mask], numeric=[1]))

    # --- recommendation ----------------------------------------------------------------------------
    if recommendation is not None or curve:
        add('<h2 id="recommendation">Recommended grades</h2>')
        if recommendation is not None:
            add(_recommendation_html(d, recommendation, current))
        if curve:
            pts = [(float(t), (r.chosen.cost if r.chosen is not None else None)) for t, r in curve]
            ref_rec = recommendation if recommendation is not None else curve[0][1]
            figures["cost-yield"] = svg_cost_yield(pts, current_cost=_current_grades(d, ref_rec, current)[1],
                                                   ident="cost-yield")
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
        cols = [k for k in parts_rows[0] if any(_cell(r.get(k)) for r in parts_rows)]  # no empty column
        same = {k: _cell(parts_rows[0].get(k)) for k in ("budget metric",) if k in cols
                and len({_cell(r.get(k)) for r in parts_rows}) == 1}
        cols = [k for k in cols if k not in same]
        add(_table([str(k).replace("_", " ") for k in cols],
                   [[_cell(r.get(k)) for k in cols] for r in parts_rows]))
        if same:
            add(f"<p>The share of the spread budget is that of the {same['budget metric']}.</p>")
        add("<p>Series: the smallest IEC 60063 series that holds the value (E3 to E192; none: a value of no "
            "series).</p>")

    # --- assumptions and caution -------------------------------------------------------------------
    add('<h2 id="assumptions">Assumptions</h2>')
    add('<ul class="assumptions">' + "".join(f"<li>{item}</li>" for item in _assumptions(result, sp)) + "</ul>")
    add(f'<table class="caution" border="1" cellpadding="10"><tr><td bgcolor="#fff4e0"><b>Caution.</b> {esc(CAUTION)}</td></tr></table>')

    sizes = {name: _svg_size(svg) for name, svg in figures.items()}
    return Report(head_title, "\n".join(out), figures, sizes)


def _metrics_table(result: AnalysisResult, stage_names: list[str]) -> str:
    order = [n for n in ("cutoff_hz", "centre_hz", "bandwidth_hz", "lower_hz", "upper_hz", "reference_db",
                         "peaking_db") if n in result.summaries]
    order += [n for n in result.summaries if n not in order and not is_pair_metric(n)]
    mask = result.design.mask
    rows = []
    notes = []
    for n in order:
        s = result.summaries[n]
        u = metric_names.unit(n, mask)
        rel = f"{100 * s.rel_std:.2f} %" if metric_names.is_log_metric(n) and math.isfinite(s.rel_std) else ""
        rows.append([esc(metric_label(n, stage_names, mask)),
                     *(format_metric(x, u) for x in (s.nominal, s.mean)), format_metric(s.std, u, False), rel,
                     *(format_metric(x, u) for x in (s.p01, s.p99, s.minimum, s.maximum))])
        if s.valid < result.samples:
            notes.append(f"{esc(metric_label(n, stage_names, mask))} is outside the analysed range on "
                         f"{format_count(result.samples - s.valid)} board(s); they are left out of its statistics.")
    html_out = "<h3>Metrics over all boards</h3>\n" + _table(
        ["Metric", "Nominal", "Mean", "Std", "Std/mean", "1st pct", "99th pct", "Min", "Max"], rows,
        numeric=range(1, 9))
    if notes:
        html_out += "\n" + "".join(f"<p>Note: {t}</p>" for t in notes)
    return html_out


def _current_grades(d, rec, current) -> tuple[list[str], float]:
    """The grade names per part the search started from, and their total relative cost:
    ``rec.current_grades``/``rec.current_cost`` when the recommendation carries them (the
    costs of the catalog searched, as the command line prints them), else the grades of
    ``current`` (the design before the recommendation), else of ``d``."""
    names = list(getattr(rec, "current_grades", ()) or ())
    cost = getattr(rec, "current_cost", float("nan"))
    base = current if current is not None else d
    if len(names) != len(d.parts):
        names = [p.grade for p in base.parts]
    if not (isinstance(cost, (int, float)) and math.isfinite(cost)):
        cats = [rec.design.catalog if getattr(rec, "design", None) is not None else d.catalog, base.catalog]
        cost = sum(next(c[g].cost for c in cats if g in c) for g in names)
    return names, float(cost)


def _recommendation_html(d, rec, current=None) -> str:
    """The recommendation's section body (``rec`` has the fields of
    :class:`filters.recommend.Recommendation`; ``search``, ``capped`` and ``note`` optional).
    ``d`` is the analysed design; ``current`` the design the search started from (default:
    what ``rec`` records, else ``d``)."""
    cat = d.catalog
    out: list[str] = []
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
    base = current if current is not None else d
    old_names, current_cost = _current_grades(d, rec, current)
    old_cat = [base.catalog, new_cat, cat]
    analysed = [p.grade for p in d.parts]
    rows = []
    for p, g_old, g_new in zip(d.parts, old_names, ch.grades):
        g_old_obj = next((c[g_old] for c in old_cat if g_old in c), None)
        tol_old = f"\u00b1{g_old_obj.tolerance_pct:g} %" if g_old_obj is not None else ""
        tol_new = f"\u00b1{new_cat[g_new].tolerance_pct:g} %" if g_new in new_cat else ""
        rows.append([esc(p.ref), esc(g_old), tol_old, esc(g_new), tol_new, "yes" if g_new != g_old else "no"])
    out.append(_table(["Part", "Current grade", "Tolerance", "Recommended grade", "Tolerance", "Changed"], rows,
                      numeric=[2, 4]))
    out.append(f"<p>Total cost: recommended grades <b>{_cost(ch.cost)}</b>, current grades "
               f"{_cost(current_cost)} (relative units from the catalog).</p>")
    used = ("recommended" if analysed == list(ch.grades) else "current" if analysed == old_names
            else "listed in the Design section")
    out.append(f"<p>The analysis in the other sections of this report uses the <b>{used}</b> grades.</p>")
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
                                                          else f"{text}.")))
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
