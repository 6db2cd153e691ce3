"""The report's closing sections: the recommended grades and their cost-yield curve, the
parts list, and the assumptions behind every number (each a function of a
:class:`~filters.report.build.Context`, registered in :data:`filters.report.build.SECTIONS`)."""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from .. import __version__
from ..bands import INNER
from ..grades import Grade
from ..sampling import REFERENCE_CELSIUS
from ..temperature_text import assumption_texts, physics_text
from .charts import svg_cost_yield
from .context import Context
from .document import esc, figure, table
from .numbers import format_cost, format_count, format_pct, format_quantity
from .words import INTERVAL_NAMES, METHOD_NAMES, describe_distribution, drift_text, opamp_text, tempco_text

__all__ = [
    "recommendation_section",
    "parts_section",
    "assumptions_section",
    "assumptions",
    "current_grades",
    "recommendation_html",
    "cell",
]


def recommendation_section(ctx: Context) -> str:
    """The recommended grades and the cost-yield curve (when given).

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML ("" when there is nothing to show).
    """
    d, figures, recommendation = ctx.design, ctx.figures, ctx.recommendation
    curve, current = ctx.curve, ctx.current
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    if recommendation is not None:
        add(recommendation_html(d, recommendation, current))
    if curve:
        pts = [(float(t), (r.chosen.cost if r.chosen is not None else None)) for t, r in curve]
        ref_rec = recommendation if recommendation is not None else curve[0][1]
        figures["cost-yield"] = svg_cost_yield(pts, current_cost=current_grades(d, ref_rec, current)[1],
                                               ident="cost-yield")
        add("<h3>Cost against yield target</h3>")
        add(figure("cost-yield", "Total cost of the cheapest grade choice whose lower confidence bound meets "
                                  "each target (costs relative, from the catalog)."))
        rows = []
        for t, r in curve:
            ch = r.chosen
            fresh = "n/a" if ch is None or r.verified is None else ("yes" if r.meets_on_fresh_seed else "no")
            rows.append([format_pct(float(t), 1), format_cost(ch.cost) if ch else "none found",
                         format_pct(ch.lower) if ch else "", format_pct(ch.estimate) if ch else "", fresh])
        add(table(["Target", "Total cost", "Lower bound", "Yield estimate", "Meets on fresh boards"], rows,
                   numeric=[0, 1, 2, 3]))
    return "\n".join(out)


def parts_section(ctx: Context) -> str:
    """The parts list (when given).

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML ("" when there is nothing to show).
    """
    parts_rows = ctx.parts_rows
    out: list[str] = []  # the section's HTML, one piece a line
    add = out.append
    cols = [k for k in parts_rows[0] if any(cell(r.get(k)) for r in parts_rows)]  # no empty column
    same = {k: cell(parts_rows[0].get(k)) for k in ("budget metric",) if k in cols
            and len({cell(r.get(k)) for r in parts_rows}) == 1}
    cols = [k for k in cols if k not in same]
    add(table([str(k).replace("_", " ") for k in cols],
               [[cell(r.get(k)) for k in cols] for r in parts_rows]))
    if same:
        add(f"<p>The share of the spread budget is that of the {same['budget metric']}.</p>")
    add("<p>Series: the smallest IEC 60063 series that holds the value (E3 to E192; none: a value of no "
        "series).</p>")
    return "\n".join(out)


def current_grades(d, rec, current) -> tuple[list[str], float]:
    """The grade names per part the search started from, and their total relative cost:
    ``rec.current_grades``/``rec.current_cost`` when the recommendation carries them (the
    costs of the catalog searched, as the command line prints them), else the grades of
    ``current`` (the design before the recommendation), else of ``d``.

    Parameters
    ----------
    d : Design
        The design reported.
    rec : Recommendation
        The recommendation.
    current : Design or None
        The design the search started from, when known.

    Returns
    -------
    tuple[list[str], float]
        Grade names (one per part) and their total relative cost.
    """
    names = list(getattr(rec, "current_grades", ()) or ())
    cost = getattr(rec, "current_cost", float("nan"))
    base = current if current is not None else d
    if len(names) != len(d.parts):
        names = [p.grade for p in base.parts]
    if not (isinstance(cost, (int, float)) and math.isfinite(cost)):
        cats = [rec.design.catalog if getattr(rec, "design", None) is not None else d.catalog, base.catalog]
        cost = sum(next(c[g].cost for c in cats if g in c) for g in names)
    return names, float(cost)


def recommendation_html(d, rec, current=None) -> str:
    """The recommendation's section body (``rec`` has the fields of
    :class:`filters.recommend.Recommendation`; ``search``, ``capped`` and ``note`` optional).
    ``d`` is the analysed design; ``current`` the design the search started from (default:
    what ``rec`` records, else ``d``).

    Parameters
    ----------
    d : Design
        The design reported.
    rec : Recommendation
        The recommendation.
    current : Design, optional
        The design the search started from.

    Returns
    -------
    str
        HTML.
    """
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
    old_names, current_cost = current_grades(d, rec, current)
    old_cat = [base.catalog, new_cat, cat]
    analysed = [p.grade for p in d.parts]
    rows = []
    for p, g_old, g_new in zip(d.parts, old_names, ch.grades):
        g_old_obj = next((c[g_old] for c in old_cat if g_old in c), None)
        tol_old = f"\u00b1{g_old_obj.tolerance_pct:g} %" if g_old_obj is not None else ""
        tol_new = f"\u00b1{new_cat[g_new].tolerance_pct:g} %" if g_new in new_cat else ""
        rows.append([esc(p.ref), esc(g_old), tol_old, esc(g_new), tol_new, "yes" if g_new != g_old else "no"])
    out.append(table(["Part", "Current grade", "Tolerance", "Recommended grade", "Tolerance", "Changed"], rows,
                      numeric=[2, 4]))
    out.append(f"<p>Total cost: recommended grades <b>{format_cost(ch.cost)}</b>, current grades "
               f"{format_cost(current_cost)} (relative units from the catalog).</p>")
    used = ("recommended" if analysed == list(ch.grades) else "current" if analysed == old_names
            else "listed in the Design section")
    out.append(f"<p>The analysis in the other sections of this report uses the <b>{used}</b> grades.</p>")
    seed = getattr(rec, "seed", None)
    on = f"seed {seed}" if seed is not None else "the search's seed"
    out.append(f"<p>On the {format_count(ch.samples)} boards the search used ({on}): yield {format_pct(ch.estimate)}, "
               f"lower bound <b>{format_pct(ch.lower)}</b> ({format_count(ch.passed)} of "
               f"{format_count(ch.samples)} boards pass).</p>")
    out.extend(_life_html(rec))
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


def _life_html(rec) -> list[str]:
    """The chosen set's yield after the design's service life (the search's and the fresh
    boards), what the target applied to, and the caution when after-life falls short."""
    ch, v = rec.chosen, rec.verified
    if getattr(ch, "after_passed", None) is None:
        return []
    from ..temperature_settings import HOURS_PER_YEAR

    years = rec.service_hours / HOURS_PER_YEAR
    life = f"after {years:.3g} years at {rec.service_temp_c:g} \u00b0C"
    fresh = ("" if v is None or v.after_passed is None else
             f"; on the fresh boards {format_pct(v.after_estimate)}, lower bound {format_pct(v.after_lower)}")
    target = ("at delivery and after the service life (a board passes only if it meets the mask at every judged "
              "temperature both times)" if rec.target_after_life else "at delivery only")
    out = [f"<p>Service life: {life}, the same boards each judged at every judged temperature. Yield at delivery "
           f"{format_pct(ch.delivery_estimate)}, <b>{life} {format_pct(ch.after_estimate)}</b>, lower bound "
           f"{format_pct(ch.after_lower)} ({format_count(ch.after_passed)} of {format_count(ch.samples)} boards)"
           f"{fresh}. The target applied {target}.</p>"]
    if rec.after_life_short:
        out.append(f'<p class="bad">Caution: {life} the recommended set\u2019s yield lower bound is '
                   f"{format_pct(ch.after_lower)}, below the target {format_pct(rec.target_yield, 1)}. Search with "
                   "the target after the life (tolspread recommend --target-after-life, or the window's check box) "
                   "before choosing these grades; the after-life yield is an estimate under the grades' stated drift "
                   "models, to be confirmed with life-tested parts.</p>")
    return out


def cell(x: Any) -> str:
    """A parts-list cell: numbers formatted, None empty, text escaped.

    Parameters
    ----------
    x : Any
        A parts-list value.

    Returns
    -------
    str
        HTML text.
    """
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


def assumptions(ctx: Context) -> list[str]:
    """Every assumption behind the numbers, as HTML list items.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    list[str]
        HTML ``<li>`` items.
    """
    result, sp = ctx.result, ctx.curves
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
                     f"{esc(describe_distribution(g))}; temperature coefficient "
                     f"{esc(physics_text(g) or tempco_text(g))}"
                     f"{' (spread uniform between parts)' if g.tempco_spread_ppm else ''}; drift {esc(drift_text(g))}"
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
    items += [esc(x) for x in assumption_texts(a)]  # operating range and service life, when asked
    if a.lot_share > 0:
        items.append(esc(f"Lot share {a.lot_share:g}: that fraction of a part's value variance is shared by the "
                         "parts of the same marked value and grade on one board (one reel)."))
    else:
        items.append("Lot share 0: every part's value varies independently of the others.")
    items.append(f"Sampled boards: {format_count(result.samples)}; seed {ens.seed}; sampling "
                 f"{esc(METHOD_NAMES.get(ens.method, ens.method))}. The same standard scores are used for every "
                 "grade choice (common random numbers).")
    items.append(f"Yield interval: two-sided {y.confidence * 100:g} % "
                 f"{esc(INTERVAL_NAMES.get(y.method, y.method))}; a board passes when it meets every span.")
    f = result.prepared.freqs_hz
    items.append(f"Frequency grid: {format_count(f.size)} points from {format_quantity(a.f_start, 'Hz')} to "
                 f"{format_quantity(a.f_stop, 'Hz')} ({a.points} log-spaced points plus the mask edges). "
                 "Each span is checked at its edges and at every grid point between them: the worst point of a "
                 "span is found on the grid, so a narrow excursion between grid points can be missed.")
    items.append(esc(f"Cutoff: where the gain falls {a.cutoff_db:g} dB below each board's own passband gain "
                     "(refined between grid points). Relative spans use the nominal design's passband gain."))
    for k, s in enumerate(d.stages, start=1):
        text = opamp_text(d, s, s.built())
        items.append(esc(f"{s.name or f'stage {k}'}: " + ("passive, no op-amp." if text == "passive"
                                                          else f"{text}.")))
    items.append("Stages are buffered (each stage's output is an ideal source for the next); parts are ideal "
                 "apart from their value (no parasitics, no op-amp offset, slew rate or output limits).")
    items.append(f"Spread figures drawn from {format_count(sp.boards)} boards of seed {result.seed}; the central band "
                 f"holds {INNER * 100:g} % of them at each frequency.")
    items.append("Spread budget: a straight-line least-squares fit over the sampled boards; curvature, "
                 "interactions and lot correlation appear as the remainder.")
    c = result.corners
    items.append("Corners: " + ("every combination of part limits (exhaustive)." if c.exhaustive
                                else "sensitivity-guided corners, an estimate rather than a guaranteed worst case."))
    items.append(f"Tool: tolspread {esc(__version__)}.")
    return items


def assumptions_section(ctx: Context) -> str:
    """Every assumption behind the numbers, as a list.

    Parameters
    ----------
    ctx : Context
        The report's context (the result, recommendation, parts list, figures).

    Returns
    -------
    str
        HTML.
    """
    return '<ul class="assumptions">' + "".join(f"<li>{item}</li>" for item in assumptions(ctx)) + "</ul>"
