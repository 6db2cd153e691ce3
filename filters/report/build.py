"""The report's table of contents and its assembly: :data:`SECTIONS` in the order they
print, and :func:`build_report`, which writes the title, the title block and key figures,
then each section whose ``when`` holds (heading from the table, body from its function),
the caution before the closing sign-off block.

Adding a section: write ``def my_section(ctx: Context) -> str`` (the body's HTML; add
figures with ``ctx.figures[name] = svg`` and place them with
:func:`filters.report.document.figure`) in a module of its own under ``filters/report/``,
and add ``Section("my-key", "My title", my_section, when=...)`` to :data:`SECTIONS` where
it should print. Nothing else changes: the contents line, the anchors and the PDF export
follow the table.
"""
from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from typing import Any, Callable, Sequence

from ..analysis import AnalysisResult
from .channels import has_channel_match, match_section
from .context import Context
from .decision import comparison_section, has_measured, high_yield_section, measured_section, robustness_section
from .document import Report, esc, svg_size
from .numbers import format_count, format_pct
from .review import assumptions_section, parts_section, recommendation_section
from .sections import (budget_section, corners_section, design_section, failures_section, mask_section,
                       spread_section, yield_section)
from .schematics import schematics_section
from .signoff import signoff_section, title_block
from .temperature import has_temperature, temperature_section
from .words import describe_design

__all__ = [
    "CAUTION",
    "FIGURE_BOARDS",
    "Section",
    "SECTIONS",
    "build_report",
]

#: The closing caution of every report (also shown in a box).
CAUTION = ("The numbers in this report are estimates under the assumptions listed above. "
           "Confirm them by measurements of real parts and by qualified review, "
           "and follow the standards that apply to your product.")

#: Boards whose curves the report's spread figure draws: ask ``analyze(...,
#: curves=FIGURE_BOARDS)`` for a result the report is built from.
FIGURE_BOARDS = 2000


def _always(ctx: Context) -> bool:
    return True


@dataclass(frozen=True)
class Section:
    """One section of the report: its anchor ``key``, its heading ``title``, the function
    that writes its body, and ``when`` it is printed (default: always)."""

    key: str
    title: str
    body: Callable[[Context], str]
    when: Callable[[Context], bool] = _always


#: Every section, in the order the report prints them.
SECTIONS: list[Section] = [
    Section("design", "Design", design_section),
    Section("schematics", "Schematics", schematics_section),
    Section("mask", "Spec mask", mask_section),
    Section("spread", "Spread of the response", spread_section),
    Section("yield", "Yield", yield_section),
    Section("high-yield", "High-yield method", high_yield_section, lambda ctx: bool(ctx.design.mask)),
    Section("failures", "Failure breakdown", failures_section),
    Section("temperature", "Over temperature and service life", temperature_section, has_temperature),
    Section("channel-match", "Channel match", match_section, has_channel_match),
    Section("budget", "Spread budget", budget_section),
    Section("corners", "Corners and root-sum-square", corners_section),
    Section("recommendation", "Recommended grades", recommendation_section,
            lambda ctx: ctx.recommendation is not None or bool(ctx.curve)),
    Section("comparison", "Grade sets side by side", comparison_section, lambda ctx: bool(ctx.comparison)),
    Section("robustness", "Robustness to the shape of the distributions", robustness_section,
            lambda ctx: bool(ctx.shapes) or bool(ctx.shape_choices)),
    Section("measured", "Measured parts", measured_section, has_measured),
    Section("parts", "Parts list", parts_section, lambda ctx: bool(ctx.parts_rows)),
    Section("assumptions", "Assumptions", assumptions_section),
    Section("signoff", "Sign-off", signoff_section),  # printed after the caution
]


def _head(ctx: Context, title: str | None, when: str, head_title: str) -> list[str]:
    """The title, the design in words and the key figure (the yield)."""
    d, y = ctx.design, ctx.result.yield_
    out = [f"<h1>{esc(head_title)}</h1>", '<p class="meta">Tolerance analysis report for design review</p>',
           title_block(ctx, when)]
    if title and d.name and title != d.name:
        out.append(f"<p>Design: <b>{esc(d.name)}</b></p>")
    out.append('<p class="summary">' + " ".join(esc(t) for t in describe_design(d, ctx.result.ensemble.grades))
               + "</p>")
    if d.description:
        out.append(f'<p class="note"><i>Note from the design file (the designer\'s own words, not checked '
                   f"against the design):</i> {esc(d.description)}</p>")
    if d.mask:
        out.append(f'<p class="key">Estimated yield <b>{format_pct(y.estimate)}</b> '
                   f"({ctx.conf_pct} interval {format_pct(y.low)} to {format_pct(y.high)}); "
                   f"{format_count(y.passed)} of {format_count(y.samples)} sampled boards meet the spec mask.</p>")
    else:
        out.append("<p class=\"key\">This design has no spec mask, so there is no yield: add floor and ceiling "
                   "spans to get one.</p>")
    return out


def build_report(result: AnalysisResult, *, recommendation: Any = None, curve: Any = None,
                 parts_rows: Sequence[dict] | None = None, title: str | None = None,
                 generated: datetime | None = None, current: Any = None, comparison: Sequence[Any] = (),
                 target: float | None = None, shapes: Sequence[Any] = (),
                 shape_choices: Sequence[Any] = ()) -> Report:
    """Build the report of ``result``, which must keep curves: ``analyze(design, ...,
    curves=FIGURE_BOARDS)`` (the spread figures draw them; nothing here evaluates a board).

    ``recommendation``: a :class:`filters.recommend.Recommendation` (or None);
    ``curve``: its cost-yield curve, a list of (target, Recommendation); ``parts_rows``:
    the parts list rows (dicts, columns in key order); ``generated``: the time stamp shown
    (default now); ``current``: the design the recommendation started from, when
    ``result`` analyses another (by default the recommendation's own record of the current
    grades, else ``result.design``); ``comparison``: grade sets judged on the same boards
    (:func:`filters.grade_sets.compare_sets`, the current set first) against the yield
    ``target``; ``shapes``: the reported grades under other distribution shapes
    (:func:`filters.robustness.shape_yields` on the analysis's boards; "as graded" is taken
    from ``result`` when left out). The title block reads the design's name, revision and
    author. Raises ValueError when ``result`` kept no curves or no corners.

    Parameters
    ----------
    result : AnalysisResult
        An analysis result that kept curves.
    recommendation : Recommendation, optional
        The grade recommendation to report.
    curve : list of (float, Recommendation), optional
        The cost-yield curve (:func:`filters.recommend.cost_yield_curve`).
    parts_rows : sequence of dict, optional
        Parts-list rows (:func:`filters.parts_list.parts_list_rows`).
    title : str, optional
        The report's title (default: from the design's name).
    generated : datetime, optional
        The time stamp written (default: now).
    current : Any, optional
        The design the recommendation started from, when it differs from ``result``'s.
    comparison : sequence of SetResult, optional
        Grade sets side by side (current first).
    target : float, optional
        The yield target (fraction) the comparison and the shapes are judged against.
    shapes : sequence of ShapeYield, optional
        The reported grades under other distribution shapes.
    shape_choices : sequence of ShapeChoice, optional
        The cheapest grades found under each shape
        (:func:`filters.robustness.shape_recommendations`), to say where the recommendation
        would change.

    Returns
    -------
    Report
        The sections (HTML fragments) and the SVG figures.
    """
    if result.curves is None:
        raise ValueError("the report draws the boards' curves: analyze(design, ..., curves=FIGURE_BOARDS)")
    if result.corners is None:
        raise ValueError("the report lists the corners: analyze(design, ...) with with_corners=True")
    ctx = Context(result, recommendation, curve, parts_rows, current, comparison, target, shapes,
                  shape_choices)
    head_title = title or ctx.design.name or "Tolerance analysis"
    out = _head(ctx, title, (generated or datetime.now()).strftime("%Y-%m-%d %H:%M"), head_title)
    shown = [s for s in SECTIONS if s.when(ctx)]
    out.append("<p>Contents: " + " \u00b7 ".join(f'<a href="#{s.key}">{esc(s.title)}</a>' for s in shown)
               + "</p>")
    caution = ('<table class="caution" border="1" cellpadding="10"><tr><td bgcolor="#fff4e0"><b>Caution.</b> '
               f"{esc(CAUTION)}</td></tr></table>")
    for s in shown:
        if s.key == "signoff":  # the signers sign under the caution
            out.append(caution)
            caution = ""
        out.append(f'<h2 id="{s.key}">{esc(s.title)}</h2>')
        body = s.body(ctx)
        if body:
            out.append(body)
    if caution:
        out.append(caution)
    sizes = {name: svg_size(svg) for name, svg in ctx.figures.items()}
    rev = ctx.design.revision
    footer = f"{head_title} \u00b7 revision {rev}" if rev else head_title  # on every printed page
    return Report(head_title, "\n".join(out), ctx.figures, sizes, footer)
