"""The yield panel's line about the high-yield estimate (filters/rare_failures.py).

A full evaluation in the window asks :func:`filters.analysis.analyze` for ``rare="auto"``:
when fewer than :data:`~filters.rare_failures.RARE_TRIGGER` boards fail, the failure rate is
estimated again by importance sampling. :func:`high_yield_html` says which method gave which
number (the plain yield is the panel's headline), or why the estimate was not made.
"""
from __future__ import annotations

from ..analysis import AnalysisResult
from ..report.numbers import format_pct


def high_yield_html(result: AnalysisResult) -> str:
    """Rich text for the yield panel: the importance estimate with its interval and the plain
    boards it would take for that interval, or why it was not made; "" when it was not asked
    for (enough boards failed for the plain interval, or a preview while dragging)."""
    r = result.rare
    if r is None:
        return f"high-yield estimate not made: {result.rare_note}" if result.rare_note else ""
    conf = f"{100 * r.confidence:g} %"
    plain = "more than 10<sup>12</sup>" if not r.plain_equivalent < 1e12 else f"about {r.plain_equivalent:,.0f}"
    return (f"<b>high-yield estimate {format_pct(1 - r.failure_rate, 4)}</b> (importance sampling), "
            f"{conf} interval {format_pct(1 - r.high, 4)} to {format_pct(1 - r.low, 4)}; failure rate "
            f"{r.failure_rate:.3g} from {r.boards:,} boards drawn around {len(r.points)} likeliest failure "
            f"point(s) ({r.failing:,} failing, weighted). Plain sampling would need {plain} boards for this "
            f"interval. The yield above is plain sampling's.")


FEW_LOTS = 5  # fewer lots say little about the spread between lots (judgement, common practice)


def measured_html(design, measured=None, state: str = "") -> str:
    """For a design with measured parts: which ones (values, lots), that the headline interval
    counts only the boards' spread, the interval that also counts having measured only those
    parts (``measured``: a :class:`filters.measured.MeasuredYield`, as ``tolspread measure``
    gives it) or ``state`` while it is not there ("computing"), and the lot-to-lot caution
    (one lot, or fewer than FEW_LOTS); "" without measured parts."""
    parts = [p for p in design.parts if p.measured is not None]
    if not parts:
        return ""
    names = ", ".join(f"{p.ref} ({len(p.measured.values):,} values, {p.measured.lot_count} "
                      f"lot{'s' if p.measured.lot_count != 1 else ''})" for p in parts)
    if measured is not None:
        m = measured
        with_m = (f"<b>with the measurement: {round(100 * m.confidence)} % interval {format_pct(m.low)} to "
                  f"{format_pct(m.high)}</b> (yield {format_pct(m.estimate)}; spread from having measured only "
                  f"those parts {format_pct(m.measurement_sd)} sd over {m.replicates} resampled sets, "
                  f"boards {format_pct(m.boards_sd)} sd; as <code>tolspread measure</code>).")
    else:
        with_m = (f"The interval that also counts having measured only those parts (as <code>tolspread "
                  f"measure</code>): {state or 'not computed'}.")
    lots = min(p.measured.lot_count for p in parts)
    caution = (" One reel says nothing about lot-to-lot variation: measure several lots before a decision "
               "that spans them." if lots < 2 else
               f" Only {lots} lots measured: the spread between lots is known roughly at best; measure more "
               f"lots before a decision that spans them." if lots < FEW_LOTS else "")
    return (f"<b>measured parts</b>: {names}. The interval above counts the boards' spread only; "
            + with_m + caution)
