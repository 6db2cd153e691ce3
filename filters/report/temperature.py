"""The report's section on the operating temperature range and the service life.

Printed when the design names an operating range or a service life (see
:mod:`filters.temperature`); the tables are the same as the command line's
(:func:`filters.temperature_text.temperature_tables`), with the yield at each judged
temperature drawn as bars.
"""
from __future__ import annotations

from ..temperature_text import temperature_tables
from .charts import svg_bar_chart
from .context import Context
from .document import esc, figure, table

__all__ = [
    "has_temperature",
    "temperature_section",
]


def has_temperature(ctx: Context) -> bool:
    """Whether the design asks for an operating range or a service life.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    bool
        True when the design asks for either.
    """
    return ctx.result.temperature is not None or ctx.result.life is not None


def temperature_section(ctx: Context) -> str:
    """Yield per judged temperature and overall, failures by span and temperature, stage
    f0/Q over temperature, and the yield at delivery beside the yield after the service life.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    out: list[str] = []
    over = ctx.result.temperature
    if over is not None:
        labels = [f"{p.temperature_c:g} \u00b0C" for p in over.points] + ["every judged temperature"]
        values = [100 * p.yield_.estimate for p in over.points] + [100 * over.overall.estimate]
        ctx.figures["temperature"] = svg_bar_chart(labels, values, "Yield at each judged temperature",
                                                   ident="temperature", muted=[len(labels) - 1])
        out.append(figure("temperature", "Yield of the same boards at each judged temperature, and of the boards "
                                         "that pass at every one of them (the yield this report states)."))
    for t in temperature_tables(ctx.result):
        out.append(f"<h3>{esc(t.title.split(' (')[0].capitalize())}</h3>")
        out.append(f"<p>{esc(t.title[t.title.find('(') + 1:-1]) if '(' in t.title else ''}</p>")
        numeric = [i for i, a in enumerate(t.align) if a == ">"]
        out.append(table(t.headers, [[esc(c) for c in r] for r in t.rows], numeric=numeric))
        for note in t.notes:
            out.append(f'<p class="note">{esc(note)}</p>')
    return "\n".join(out)
