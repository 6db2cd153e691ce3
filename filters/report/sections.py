"""The report's analysis sections: the design, the spec mask, the spread of the response,
the yield, the failure breakdown, the spread budget and the corners. Each is a function of
a :class:`~filters.report.context.Context` returning the section's HTML body (its heading is
written by :func:`filters.report.build.build_report` from :data:`~filters.report.build.SECTIONS`).
Every number comes from the analysis result; nothing here evaluates a board."""
from __future__ import annotations

from typing import Sequence

import numpy as np

from .. import metric_names
from ..analysis import AnalysisResult
from ..mask import Span
from ..metric_names import MATCH_WORDS, SPAN_UNIT, is_margin, is_pair_metric, margin_name, metric_label
from .charts import svg_bar_chart, svg_histogram, svg_spread_plot
from .context import Context
from .document import esc, figure, table
from ..temperature_text import LIVED_BUDGET_NOTE
from .numbers import format_count, format_metric, format_pct, format_quantity, format_sensitivity, summary_cells
from .words import (INTERVAL_NAMES, MATCH_NOTE, METHOD_NAMES, describe_distribution, drift_text, opamp_text,
                    tempco_text)

__all__ = [
    "design_section",
    "mask_section",
    "spread_section",
    "yield_section",
    "failures_section",
    "budget_section",
    "corners_section",
    "passband_zoom",
    "metrics_table",
]


def design_section(ctx: Context) -> str:
    """Every part with its grade, every stage with its topology.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    d, grades = ctx.design, ctx.ensemble.grades
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    rows = []
    for p, g in zip(d.parts, grades):
        tol = f"\u00b1{g.tolerance_pct:g} %" + (" (what-if)" if p.tolerance_pct is not None else "")
        rows.append([esc(p.ref), esc(p.kind), esc(p.value_text), esc(p.grade), tol, esc(describe_distribution(g, short=True)),
                     esc(tempco_text(g)), esc(drift_text(g)), esc(g.technology)])
    add(table(["Part", "Kind", "Value", "Grade", "Tolerance", "Distribution", "Tempco", "Drift", "Technology"],
               rows, numeric=[2, 4]))
    rows = []
    for k, s in enumerate(d.stages, start=1):
        topo = s.built()
        opts = ", ".join(f"{key}: {val}" for key, val in s.options.items()) or "defaults"
        roles = ", ".join(f"{role} = {ref}" for role, ref in s.roles.items())
        rows.append([str(k), esc(s.name or f"stage {k}"), esc(f"{s.topology} ({topo.description})"), esc(opts),
                     esc(roles), esc(opamp_text(d, s, topo))])
    add(table(["#", "Stage", "Topology", "Options", "Roles filled by parts", "Op-amp"], rows))
    add("<p>Stages are buffered: each stage's output drives the next as an ideal source.</p>")
    return "\n".join(out)


def mask_section(ctx: Context) -> str:
    """The spec mask: each span, its limit and the nominal margin.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    d, prep, ref_db = ctx.design, ctx.prepared, ctx.reference_db
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    if d.mask:
        rows = []
        for j, s in enumerate(d.mask):
            unit = SPAN_UNIT[s.quantity]
            if s.kind == "match":  # a difference between channels
                lim = f"{MATCH_WORDS[s.quantity]} at most " + (
                    format_quantity(s.limit1, 's', digits=4) if s.quantity == "delay" else f"{s.limit1:g} {unit}")
            elif s.quantity == "delay":
                lim = f"variation at most {format_quantity(s.limit1, 's', digits=4)}"
            else:
                lim = f"{s.limit1:+g} {unit}" + (f" to {s.end_limit:+g} {unit}" if s.limit2 is not None
                                                  and s.limit2 != s.limit1 else "")
            rel = ("relative to the passband gain" if s.relative and s.quantity == "gain" else "absolute")
            rows.append([esc(s.label), esc(s.quantity), esc(s.kind), format_quantity(s.f1, 'Hz'),
                         format_quantity(s.f2, 'Hz'), esc(lim), rel,
                         format_metric(float(prep.nominal.margins[j]), unit)])
        add(table(["Span", "Quantity", "Kind", "From", "To", "Limit", "Reference", "Nominal margin"], rows,
                   numeric=[3, 4, 7]))
        add(f"<p>Relative spans are measured from the nominal design's passband gain, "
            f"{format_metric(ref_db, 'dB')}. A positive margin means the span is met.</p>")
    else:
        add("<p>No spans.</p>")
    return "\n".join(out)


def spread_section(ctx: Context) -> str:
    """The spread figures of the kept curves, the metrics table and a histogram.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, ens = ctx.result, ctx.design, ctx.ensemble
    prep, stage_names, figures = ctx.prepared, ctx.stage_names, ctx.figures
    ref_db = ctx.reference_db
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    sp = ctx.curves
    bd = sp.gain_bands
    nominal_db = prep.nominal.response.gain_db[0]
    if sp.boards == result.samples:
        subset = f"all {format_count(sp.boards)} analysed boards"
    else:
        subset = f"the first {format_count(sp.boards)} of the {format_count(result.samples)} analysed boards"
    figures["spread"] = svg_spread_plot(sp.freqs_hz, nominal_db, bd, d.mask, ref_db, ident="spread",
                                        boards=sp.boards)
    add(figure("spread", f"Gain of {subset}: light band every board, dark band the central "
                          f"{bd.share * 100:g} % of boards at each frequency, black the nominal design. "
                          "Hatched: the forbidden side of each gain span."
                + (" Phase and delay spans are not drawn." if any(s.quantity != "gain" for s in d.mask) else "")))
    zoom = passband_zoom(d.mask, float(sp.freqs_hz[0]), float(sp.freqs_hz[-1]))
    if zoom is not None:
        (dlo, dhi), xr = zoom
        figures["passband"] = svg_spread_plot(sp.freqs_hz, nominal_db, bd, d.mask, ref_db, ident="passband",
                                              title="Passband detail", y_range=(ref_db + dlo, ref_db + dhi),
                                              x_range=xr, boards=sp.boards)
        add(figure("passband", "The same boards, zoomed to the spans near the passband gain."))
    add(metrics_table(result, stage_names))
    hist_metric = next((n for n in ("cutoff_hz", "centre_hz") if n in result.summaries
                        and result.summaries[n].valid > 0), None)
    if hist_metric is not None:
        figures["histogram"] = svg_histogram(ens.metrics[hist_metric], 40, ~ens.passed if d.mask else None,
                                             metric_label(hist_metric, stage_names),
                                             unit=metric_names.unit(hist_metric), ident="histogram")
        add(figure("histogram", f"{esc(metric_label(hist_metric, stage_names))} of all "
                                 f"{format_count(result.samples)} boards"
                    + (", failing boards stacked on top." if d.mask else ".")))
    return "\n".join(out)


def yield_section(ctx: Context) -> str:
    """The yield with its interval (and the batches of an adaptive run).

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, ens = ctx.result, ctx.design, ctx.ensemble
    y, conf_pct = ctx.result.yield_, ctx.conf_pct
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    method_name = INTERVAL_NAMES.get(y.method, y.method)
    if d.mask:
        add(f'<p class="key">Yield <b>{format_pct(y.estimate)}</b>: {format_count(y.passed)} of '
            f"{format_count(y.samples)} boards meet every span. {conf_pct} confidence interval "
            f"<b>{format_pct(y.low)} to {format_pct(y.high)}</b> ({esc(method_name)}; half-width "
            f"{100 * y.half_width:.2f} percentage points).</p>")
        add(f"<p>Sampling: {esc(METHOD_NAMES.get(ens.method, ens.method))}, seed {ens.seed}.</p>")
        if len(result.history) > 1:
            add(f"<p>Adaptive run: boards were added in {len(result.history)} batches until the interval "
                f"was narrow enough or the sample limit was reached.</p>")
            add(table(["Batch", "Boards", "Yield", "Interval"],
                       [[str(i), format_count(h.samples), format_pct(h.estimate),
                         f"{format_pct(h.low)} to {format_pct(h.high)}"] for i, h in enumerate(result.history, 1)],
                       numeric=[1, 2]))
    else:
        add("<p>No spec mask: every board passes trivially, so no yield is reported.</p>")
    return "\n".join(out)


def failures_section(ctx: Context) -> str:
    """Which spans fail, how often, and the margin of the worst one.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, ens = ctx.result, ctx.design, ctx.ensemble
    prep, stage_names, figures = ctx.prepared, ctx.stage_names, ctx.figures
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    if d.mask:
        rows = []
        for j, s in enumerate(result.spans):
            unit = SPAN_UNIT[d.mask[j].quantity]
            worst = format_metric(s.worst_margin_db, unit)
            if s.worst_margin_db < 0:
                worst = f'<span class="bad">{worst}</span>'
            rows.append([esc(s.name), format_count(s.failed), format_pct(s.fraction), format_pct(s.share_of_failures),
                         worst, format_metric(float(prep.nominal.margins[j]), unit)])
        add(table(["Span", "Failing boards", "Of all boards", "Share of failures", "Worst margin",
                    "Nominal margin"], rows, numeric=[1, 2, 3, 4, 5]))
        add("<p>A board can fail several spans, so the shares of failures can add up to more than 100 %. "
            "The worst margin is the smallest over all boards (negative: violated).</p>")
        worst_j = int(np.argmax([s.failed for s in result.spans])) if result.spans else -1
        if worst_j >= 0 and result.spans[worst_j].failed > 0:
            lab = d.mask[worst_j].label
            figures["margin"] = svg_histogram(ens.margins[:, worst_j], 40, ens.margins[:, worst_j] < 0,
                                              metric_label(margin_name(lab), stage_names, d.mask), ident="margin")
            add(figure("margin", f"Margin of the span failing most often, '{esc(lab)}', over all boards "
                                  "(below 0: the span is violated)."))
    else:
        add("<p>No spans to fail.</p>")
    return "\n".join(out)


def budget_section(ctx: Context) -> str:
    """The spread budget of each metric: shares of variance by part, with bar charts.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, stage_names = ctx.result, ctx.design, ctx.stage_names
    figures = ctx.figures
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    add("<p>Share of each metric's variance explained by each part (least-squares fit of the metric, or its "
        "logarithm for frequencies, on every part's log deviation over the sampled boards). What the "
        "straight-line fit leaves is shown as not explained. Sensitivity: the change at the nominal design "
        "(d ln metric / d ln value for frequencies; for margins the change in the span's unit, dB, deg or s, "
        "per 1 % change of the part).</p>")
    names = [n for n in ("cutoff_hz", "bandwidth_hz") if n in result.budget]
    names += [n for n in result.budget if is_margin(n)]
    lived = [(n, result.budget[n]) for n in names] + [(n, b) for n, b in result.life_budget.items() if is_margin(n)]
    if any(b.basis for _, b in lived):
        add(f"<p>{esc(LIVED_BUDGET_NOTE[0].upper() + LIVED_BUDGET_NOTE[1:])}.</p>")
    for k, (name, b) in enumerate(lived):
        label = metric_label(name, stage_names, d.mask) + (f", {b.basis}" if b.basis else "")
        add(f"<h3>{esc(label)}</h3>")
        top = [e for e in b.entries if e.share > 0][:5]
        if not top and b.remainder == 0:
            add("<p>No spread: this metric is the same on every board.</p>")
            continue
        rest = sum(e.share for e in b.entries if e.share > 0) - sum(e.share for e in top)
        rows = [[esc(e.ref), format_pct(e.share, 1), format_sensitivity(e.sensitivity, e.sensitivity_unit)]
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
        add(table(["Part", "Share of variance", "Sensitivity"], rows, numeric=[1, 2]))
        fig = f"budget-{k + 1}"
        muted = [i for i, t in enumerate(bar_labels) if i >= len(top)]
        figures[fig] = svg_bar_chart(bar_labels, bar_vals, f"Spread budget: {label}", ident=fig, muted=muted)
        add(figure(fig, f"Spread budget of {esc(label)}, from {format_count(b.samples)} boards."))
    return "\n".join(out)


def corners_section(ctx: Context) -> str:
    """Corner extremes and root-sum-square estimates; the worst margins over the corners.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    result, d, stage_names = ctx.result, ctx.design, ctx.stage_names
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
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
    add(table(["Metric", "Nominal", "Corner low", "Corner high", "MC min", "MC max", "RSS std", "RSS limit (\u00b1)"],
               rows, numeric=range(1, 8)))
    add("<p>MC: the extremes over the sampled boards. RSS: the sensitivities combined with each part's sampled "
        "spread (std) or with half its full range (limit). \"Not linear\": a one-sided limit (a minimum or "
        "maximum over frequency) has zero first-order sensitivity at the nominal, so its RSS would read "
        "near 0; see the sampled spread (MC min and max) instead.</p>")
    if d.mask:
        verdict = ("every corner board meets the mask" if c.all_pass
                   else '<span class="bad">some corner boards fail the mask</span>')
        add(f"<p>Worst case: {verdict}.</p>")
        if any(s.kind == "match" for s in d.mask):
            add(f"<p>{esc(MATCH_NOTE[0].upper() + MATCH_NOTE[1:])}.</p>")
        add(table(["Span", "Worst margin over the corners"],
                   [[esc(s.label), format_metric(c.worst_margins.get(s.label, float("nan")), SPAN_UNIT[s.quantity])]
                    for s in d.mask], numeric=[1]))
    return "\n".join(out)


def passband_zoom(design_mask: Sequence[Span], f_start: float, f_stop: float
                   ) -> tuple[tuple[float, float], tuple[float, float]] | None:
    """(dB range relative to the reference, Hz range) of the passband spans: relative gain
    spans whose limits lie within 6 dB of the reference. None if there are none.

    Parameters
    ----------
    design_mask : sequence of Span
        The spec mask.
    f_start : float
        Start of the analysed range, Hz.
    f_stop : float
        End of the analysed range, Hz.

    Returns
    -------
    tuple[tuple[float, float], tuple[float, float]] or None
        ((low, high) in dB, (low, high) in Hz), or None.
    """
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


def metrics_table(result: AnalysisResult, stage_names: list[str]) -> str:
    """The metrics over all boards (the terminal's rows: :func:`filters.report.numbers.summary_cells`).

    Parameters
    ----------
    result : AnalysisResult
        The analysis result.
    stage_names : list of str
        Stage names in design order.

    Returns
    -------
    str
        HTML.
    """
    order = [n for n in ("cutoff_hz", "centre_hz", "bandwidth_hz", "lower_hz", "upper_hz", "reference_db",
                         "peaking_db") if n in result.summaries]
    order += [n for n in result.summaries if n not in order and not is_pair_metric(n)]
    mask = result.design.mask
    rows = []
    notes = []
    for n in order:
        s = result.summaries[n]
        rows.append([esc(c) for c in summary_cells(s, metric_label(n, stage_names, mask), mask)])
        if s.valid < result.samples:
            notes.append(f"{esc(metric_label(n, stage_names, mask))} is outside the analysed range on "
                         f"{format_count(result.samples - s.valid)} board(s); they are left out of its statistics.")
    html_out = "<h3>Metrics over all boards</h3>\n" + table(
        ["Metric", "Nominal", "Mean", "Std", "Std/mean", "1st pct", "99th pct", "Min", "Max"], rows,
        numeric=range(1, 9))
    if notes:
        html_out += "\n" + "".join(f"<p>Note: {t}</p>" for t in notes)
    return html_out
