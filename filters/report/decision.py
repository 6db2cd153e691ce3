"""The report's sections a design review asks about before it signs: the grade sets side by
side, the yield under other readings of the tolerances, which method gave a high yield, and
the parts measured on real samples. Each reads what the caller already computed (the
analysis result, :func:`filters.grade_sets.compare_sets`,
:func:`filters.robustness.shape_yields`); nothing here evaluates a board.
"""
from __future__ import annotations

from ..measured import summary_rows
from ..rare_failures import RARE_TRIGGER
from ..robustness import SHAPE_TEXT
from ..stats import lower_bound
from .context import Context
from .document import esc, table
from .numbers import format_cost, format_count, format_pct

__all__ = [
    "comparison_section",
    "robustness_section",
    "robustness_rows",
    "high_yield_section",
    "measured_section",
    "has_measured",
]


def _verdict(lower: float, target: float | None) -> str:
    if target is None:
        return ""
    return "meets" if lower >= target else '<span class="bad">misses</span>'


def _cost_unit(ctx: Context) -> tuple[bool, str]:
    """(money per board?, the cost column's unit in words) for the comparison."""
    pur = ctx.design.purchase
    money = bool(ctx.comparison) and all(r.money is not None for r in ctx.comparison)
    if money:
        return True, f"{pur.currency or 'money'} per board at {format_count(pur.boards)} boards"
    return False, "relative cost from the catalog"


def comparison_section(ctx: Context) -> str:
    """The grade sets side by side on the same boards: cost, yield, interval, lower bound and
    whether each meets the target (``ctx.comparison``, current set first).

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    sets, target, d = ctx.comparison, ctx.target, ctx.design
    money, unit = _cost_unit(ctx)
    both_ways = bool(getattr(ctx.recommendation, "target_after_life", False))  # the target applied after the life too
    first = sets[0]
    has_life = any(getattr(x, "after", None) is not None for x in sets)
    conf = f"{first.yield_.confidence * 100:g} %"
    rows = []
    for r in sets:
        changed = [f"{esc(p.ref)} {esc(g)}" for p, g, now in zip(d.parts, r.grades, first.grades) if g != now]
        what = ("the grades the search started from" if r is first
                else (", ".join(changed) or f"the same as {esc(first.label)}"))
        cost = f"{r.money:.4g}" if money else format_cost(r.cost)
        life = getattr(r, "after", None) is not None
        both = both_ways and getattr(r, "both_lower", None) is not None
        row = [esc(r.label), what, cost, format_pct(r.yield_.estimate),
               f"{format_pct(r.yield_.low)} to {format_pct(r.yield_.high)}", format_pct(r.lower),
               _verdict(r.both_lower if both else r.lower, target)]
        if has_life:  # the design states a service life: the same boards after it
            row += [format_pct(r.after.estimate), format_pct(r.after_lower)] if life else ["", ""]
        rows.append(row)
    head = ["Set", "Grades (changes from the first set)", f"Cost ({unit})", "Yield", f"{conf} interval",
            "Lower bound", "Target" + ("" if not has_life else " (delivery and life)" if both_ways else " (at delivery)")]
    if has_life:
        head += ["Yield after the service life", "Its lower bound"]
    out = [f"<p>Each set judged on the same {format_count(first.yield_.samples)} boards (the same seed); the "
           f"lower bound is one-sided at {conf}"
           + (f" and must reach the target <b>{format_pct(target, 1)}</b>." if target is not None else ".")
           + "</p>",
           table(head, rows, numeric=[2, 3, 4, 5] + ([7, 8] if has_life else []))]
    if any(r.label == "no class II" for r in sets):
        out.append("<p>The recommended set puts class II dielectrics (X7R, X5R ...) in the signal path, where "
                   "the response depends on them; common practice keeps them out, as their value moves with "
                   "temperature, DC bias and age. The set \u201cno class II\u201d is the cheapest without them.</p>")
    return "\n".join(out)


def robustness_rows(ctx: Context) -> list:
    """The reported grades under each distribution shape: the analysis's own yield for
    "as graded" (when ``ctx.shapes`` lacks it), then ``ctx.shapes``; each a
    :class:`filters.robustness.ShapeYield`-like object (``shape``, ``yield_``, ``lower``).

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    list
        One row per shape, "as graded" first.
    """
    from ..robustness import ShapeYield

    rows = list(ctx.shapes)
    if not any(r.shape == "as graded" for r in rows):
        y = ctx.result.yield_
        lb = float(lower_bound(int(y.passed), int(y.samples), y.confidence, y.method))  # type: ignore[arg-type]
        rows.insert(0, ShapeYield("as graded", y, lb))
    return rows


def robustness_section(ctx: Context) -> str:
    """Yield of the reported grades under the five readings of the tolerances, and (with a
    target) whether the set still meets it under each.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    rows_in = robustness_rows(ctx)
    target = ctx.target
    conf = f"{rows_in[0].yield_.confidence * 100:g} %"
    rows = [[esc(r.shape), esc(SHAPE_TEXT[r.shape]), format_pct(r.yield_.estimate),
             f"{format_pct(r.yield_.low)} to {format_pct(r.yield_.high)}", format_pct(r.lower),
             _verdict(r.lower, target)] for r in rows_in]
    head = ["Shape", "How the values spread inside the tolerance", "Yield", f"{conf} interval", "Lower bound"]
    if target is not None:
        head.append("Target")
    else:
        rows = [r[:-1] for r in rows]
    out = [f"<p>The grades this report analyses, on the same {format_count(rows_in[0].yield_.samples)} boards "
           "under each reading of their tolerances (a grade states its limits, not how values spread inside "
           "them).</p>", table(head, rows, numeric=[2, 3, 4])]
    if ctx.result.temperature is not None or ctx.result.life is not None:
        out.append("<p>These yields judge each board over the operating range as delivered, not after the "
                   "service life, so \u201cas graded\u201d can differ from a yield above that includes it.</p>")
    if target is not None:
        missed = [r.shape for r in rows_in if r.lower < target]
        if missed:
            out.append(f'<p class="bad">Under the shape{"s" if len(missed) > 1 else ""} {esc(", ".join(missed))} '
                       f"the lower bound misses the target "
                       f"{format_pct(target, 1)}: measure a sample of the parts (tolspread measure), or choose a "
                       "set that holds under every shape (tolspread shapes --target-yield).</p>")
        else:
            out.append(f"<p>The lower bound meets the target {format_pct(target, 1)} under every shape.</p>")
    if ctx.shape_choices:
        out.append(_choices_html(ctx))
    return "\n".join(out)


def high_yield_section(ctx: Context) -> str:
    """Which method gave the yield: the importance estimate with its interval and the plain
    boards it would take, or plain sampling and why.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    result = ctx.result
    y, r = result.yield_, result.rare
    failing = y.samples - y.passed
    plain = (f"Plain Monte Carlo sampling: {format_count(failing)} of {format_count(y.samples)} boards failed, "
             f"yield {format_pct(y.estimate)} ({y.confidence * 100:g} % interval {format_pct(y.low)} to "
             f"{format_pct(y.high)}).")
    if r is None:
        if result.rare_note:
            why = f"The high-yield estimate was asked for but not made: {esc(result.rare_note)}."
        elif failing >= RARE_TRIGGER:
            why = (f"Enough boards failed for the plain interval (the importance estimate is made when fewer than "
                   f"{RARE_TRIGGER} fail).")
        else:
            why = "The high-yield estimate was not asked for (command line: --rare auto or always)."
        return f"<p>{esc(plain)} This is the method that gave the yield. {why}</p>"
    conf = f"{r.confidence * 100:g} %"
    boards = ("more than 10<sup>12</sup>" if not r.plain_equivalent < 1e12
              else f"about {format_count(int(round(r.plain_equivalent)))}")
    rows = [["Method", esc(r.method) + " around the likeliest failure points (mean-shifted normal scores)"],
            ["Yield", f"<b>{format_pct(1 - r.failure_rate, 4)}</b>"],
            [f"{conf} interval", f"{format_pct(1 - r.high, 4)} to {format_pct(1 - r.low, 4)}"],
            ["Failure rate", f"{r.failure_rate:.3g} ({r.low:.3g} to {r.high:.3g})"],
            ["Boards drawn", f"{format_count(r.boards)} around {len(r.points)} failure point(s), "
                             f"{format_count(r.failing)} failing (weighted)"],
            ["Plain boards for the same interval", boards]]
    why = ("Few boards failed, so the failure rate was estimated again" if failing < RARE_TRIGGER
           else "The failure rate was also estimated (as asked)")
    return (f"<p>{why} by importance sampling: boards drawn "
            f"around the likeliest failure points found from the margins' sensitivities, weighted back to the "
            f"parts' distributions.</p>{table(['Quantity', 'Importance estimate'], rows)}"
            f"<p>{esc(plain)} The headline yield of this report is plain sampling's; the importance estimate "
            f"narrows the interval near 100 %. It assumes the likeliest failure points were found: a failure "
            f"region far from them would be missed.</p>")


def has_measured(ctx: Context) -> bool:
    """Whether a part of the design carries measured values.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    bool
        True when some part has measured values.
    """
    return any(getattr(p, "measured", None) is not None for p in ctx.design.parts)


def measured_section(ctx: Context) -> str:
    """The parts whose values were measured: n, spread, lots, and the lot-to-lot caution.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    rows = summary_rows(ctx.design)
    body = [[esc(r["ref"]), esc(r["source"]), format_count(r["n"]), f"{r['mean_pct']:+.3f} %",
             f"{r['sd_pct']:.3f} %", f"{r['min_pct']:+.3f} % to {r['max_pct']:+.3f} %", format_count(r["lots"]),
             "" if r["tempco_ppm"] is None else f"{r['tempco_ppm']:+.0f} ppm/K"] for r in rows]
    head = ["Part", "File", "Values", "Mean deviation", "Standard deviation", "Range", "Lots",
            "Measured coefficient"]
    if all(r["tempco_ppm"] is None for r in rows):  # no temperatures measured: no empty column
        head, body = head[:-1], [b[:-1] for b in body]
    out = ["<p>These parts are drawn from their measured values (resampled as measured) instead of their "
           "grade's model; deviations are from the marked value.</p>",
           table(head, body, numeric=[2, 3, 4, 5, 6, 7])]
    one_lot = [r["ref"] for r in rows if r["lots"] == 1]
    if one_lot:
        out.append(f'<p class="bad">Caution: {esc(", ".join(one_lot))} '
                   f"{'was' if len(one_lot) == 1 else 'were'} measured on one lot. One reel says nothing about "
                   "lot-to-lot variation: other lots may sit elsewhere within the grade's tolerance. Measure "
                   "several lots before a decision that spans them.</p>")
    few = [f"{r['ref']} ({r['lots']} lots)" for r in rows if 1 < r["lots"] < 5]
    if few:
        out.append(f"<p>Caution: {esc(', '.join(few))}: so few lots say little about the spread between lots.</p>")
    out.append("<p>The yield interval that includes having measured only these parts is given by "
               "<code>tolspread measure</code>.</p>")
    return "\n".join(out)


def _choices_html(ctx: Context) -> str:
    """The cheapest grades found under each shape, and where they differ from the first
    shape's (:func:`filters.robustness.shape_recommendations`)."""
    choices = list(ctx.shape_choices)
    first = choices[0].grades
    refs = [p.ref for p in ctx.design.parts]
    rows = []
    for c in choices:
        if c.grades is None:
            what, cost = "no set meets the target", ""
        elif first is None or c is choices[0]:
            what, cost = "the reference set", f"{c.cost:.4g}"
        else:
            moved = [f"{r} {g}" for r, g, g0 in zip(refs, c.grades, first) if g != g0]
            what, cost = (", ".join(moved) or "the same set"), f"{c.cost:.4g}"
        rows.append([esc(c.shape), esc(what), cost, "" if c.lower is None else format_pct(c.lower),
                     "changed" if c.changed else ""])
    out = ["<p>The search for the cheapest grades run again under each shape (its first row is the "
           "grades as graded; other rows list the parts whose grade would differ):</p>",
           table(["Shape", "Cheapest grades found", "Cost", "Lower bound", ""], rows, numeric=[2, 3])]
    changed = [c.shape for c in choices if c.changed]
    if changed:
        out.append(f'<p class="bad">The recommendation would change under {esc(", ".join(changed))}: '
                   "which shape holds, only measurement of the parts can say.</p>")
    else:
        out.append("<p>The recommendation is the same under every shape.</p>")
    return "\n".join(out)

