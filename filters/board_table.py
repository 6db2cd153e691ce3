"""The per-board table: one row per board, its part values, metrics and margins, and
whether it passes the mask (what the window's "Export board metrics as CSV" writes).

:func:`board_table` gathers the columns from an :class:`~tolspread.evaluate.Ensemble` as one
``(boards, columns)`` array with a name and a unit for every column; :func:`board_csv`
writes it as CSV text (numbers to 9 significant digits, for scripts and spreadsheets: a
data file, not a report for people). Nothing here loops over boards except the text rows
themselves.
"""
from __future__ import annotations

import csv
import io
from dataclasses import dataclass
from typing import Mapping

import numpy as np

from .budget import metric_columns
from .evaluate import Ensemble
from .metric_names import metric_label, unit
from .values import PART_UNITS

__all__ = ["BoardTable", "board_table", "board_csv", "BOARD_COLUMN", "PASS_COLUMN"]

BOARD_COLUMN = "board"
PASS_COLUMN = "passes mask"


@dataclass(frozen=True)
class BoardTable:
    """Every board's numbers, one row per board.

    ``boards`` (S,) int board numbers (0 for the first board the seed draws);
    ``values`` (S, P + M) float: the P part values in SI units (ohm, F, H; an op-amp's
    gain-bandwidth in Hz), then the M metrics and span margins in their own units;
    ``passed`` (S,) bool, True where the board meets every span of the mask.
    ``names`` (P + M,) the part refs then the metric names (:mod:`filters.metric_names`);
    ``headers`` (P + M,) the column titles for people (a metric's with its unit);
    ``units`` (P + M,) each column's unit ("" for a Q).
    """

    boards: np.ndarray
    values: np.ndarray
    passed: np.ndarray
    names: tuple[str, ...]
    headers: tuple[str, ...]
    units: tuple[str, ...]

    @property
    def columns(self) -> tuple[str, ...]:
        """Every column title of the file: board, the value columns, passes mask."""
        return (BOARD_COLUMN, *self.headers, PASS_COLUMN)


def board_table(ens: Ensemble, metrics: Mapping[str, np.ndarray] | None = None) -> BoardTable:
    """The per-board table of ``ens``.

    ``metrics``: name -> (S,) columns to show, in that order (default: every metric of
    ``ens`` and then each span's margin, :func:`filters.budget.metric_columns`).

    Parameters
    ----------
    ens : Ensemble
        An evaluated ensemble (part values (S, P), pass/fail (S,)).
    metrics : mapping of str to np.ndarray, optional
        Metric name -> (S,) column, in the order to show.

    Returns
    -------
    BoardTable
        Board numbers (S,), values (S, P + M), pass/fail (S,), names, headers and units.
    """
    design = ens.design
    columns = metric_columns(ens) if metrics is None else metrics
    names = list(columns)
    stage_names = [s.name for s in design.stages]
    refs = [p.ref for p in design.parts]
    headers = ([f"{r} (SI units)" for r in refs]
               + [metric_label(n, stage_names, design.mask) for n in names])
    units = [PART_UNITS.get(p.kind, "") for p in design.parts] + [unit(n, design.mask) for n in names]
    values = np.column_stack([ens.values] + [np.asarray(columns[n], dtype=float) for n in names])
    boards = ens.start + np.arange(values.shape[0])
    return BoardTable(boards, values, np.asarray(ens.passed, dtype=bool), tuple(refs + names),
                      tuple(headers), tuple(units))


def board_csv(table: BoardTable) -> str:
    """``table`` as CSV text: a title row, then one row per board (numbers to 9
    significant digits, passes mask as 1 or 0).

    Parameters
    ----------
    table : BoardTable
        From :func:`board_table`.

    Returns
    -------
    str
        CSV text, S + 1 rows.
    """
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(table.columns)
    for b, row, ok in zip(table.boards, table.values, table.passed):  # text: one line per board
        w.writerow([int(b)] + [f"{x:.9g}" for x in row] + [int(ok)])
    return buf.getvalue()
