"""Plain-text tables for the terminal: every column as wide as its widest cell, so long
stage or span names never push the figures out of line. Pure Python (the command line
imports it at start without the rest of the report package)."""
from __future__ import annotations

from typing import Sequence

__all__ = [
    "table",
]


def table(headers: Sequence[str], rows: Sequence[Sequence[str]], align: str, indent: str = "  ",
          gap: str = "  ") -> list[str]:
    """Lines of a plain-text table (without newlines), every column as wide as its widest
    cell, so long stage or span names never push the figures out of line. ``align`` holds
    one character per column: ``<`` left (names), ``>`` right (numbers). Trailing spaces
    are stripped.

    Parameters
    ----------
    headers : sequence of str
        Column titles.
    rows : sequence of sequence of str
        Cells.
    align : str
        One character per column, ``<`` left or ``>`` right.
    indent : str
        Text before every line.
    gap : str
        Text between columns.

    Returns
    -------
    list[str]
        The lines.
    """
    if len(align) != len(headers):
        raise ValueError("one alignment character per column")
    widths = [max([len(h)] + [len(r[i]) for r in rows]) for i, h in enumerate(headers)]

    def line(cells: Sequence[str]) -> str:
        text = gap.join(f"{c:{a}{w}}" for c, a, w in zip(cells, align, widths))
        return (indent + text).rstrip()

    return [line(headers)] + [line(r) for r in rows]
