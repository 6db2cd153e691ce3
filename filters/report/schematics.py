"""The report's "Schematics" section: each stage drawn with its parts' reference
designators, values and grades (:mod:`filters.schematic`), so a reader can check the
analysed circuit against the board's own schematic."""
from __future__ import annotations

from ..schematic import schematic_figures
from .context import Context
from .document import esc, figure

__all__ = ["schematics_section"]


def schematics_section(ctx: Context) -> str:
    """One figure per stage, in signal order; a circuit stage as labelled node rails.

    Parameters
    ----------
    ctx : Context
        The report's context.

    Returns
    -------
    str
        HTML.
    """
    out = ["<p>Each stage as the analysis sees it, drawn from its netlist: check it against the "
           "board's schematic. A circuit stage is drawn with every node as a labelled horizontal line "
           "(in at the top, ground at the bottom); a dot joins a part to a node line, a line that "
           "crosses another without a dot is not connected.</p>"]
    for name, svg, caption in schematic_figures(ctx.design):
        ctx.figures[name] = svg
        out.append(figure(name, esc(caption)))
    return "\n".join(out)
