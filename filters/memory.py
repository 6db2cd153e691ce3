"""The memory rule: how many boards one run may keep.

An analysis keeps, for every board, each part's value, each metric and each span's margin
as a float64: :func:`numbers_per_board` numbers, 8 bytes each. Everything else is bounded
apart from the number of boards: the libraries, the chunks of boards in flight
(:data:`filters.evaluate.CHUNK_MAX` boards each), and the spread budget, corners and
summaries, which are taken in chunks of boards (:mod:`filters.summary`) and evaluate their
extra designs in bounded batches (:func:`filters.budget.evaluate_rows`).

A board of N channels (``design.channels.count``) is evaluated as N rows, one a channel
(:mod:`filters.channel_match`), so the rule counts its numbers N times: the rows a chunk
evaluates, and their curves, grow N-fold even though only channel 1's values and metrics
and the board's margins are kept. A design judged over an operating range or after a
service life counts them twice (:func:`judged_copies`): the boards judged at the other
temperatures and after the life live beside the base run's.

So a run may keep at most :data:`MAX_NUMBERS` numbers, and one run's boards are limited to
``MAX_NUMBERS // numbers_per_board`` (and to :data:`filters.design.MAX_SAMPLES`). With the
numbers kept at 1.2 GB, the whole process stays under :data:`MEMORY_BOUND_MIB` (measured
by ``benchmarks/memory.py``; README's "Guarantees and their limits" quotes the figures).
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np

from .design import MAX_SAMPLES
from .errors import InputError
from .evaluate import Ensemble, Prepared
from .temperature_settings import over_range_or_life

__all__ = [
    "MAX_NUMBERS",
    "MEMORY_BOUND_MIB",
    "numbers_per_board",
    "judged_copies",
    "max_boards",
    "check_boards",
    "PIECE_NUMBERS",
    "BoardStore",
]

#: Per-board numbers one run may keep: 150 million float64 (1.2 GB, 1,144 MiB).
MAX_NUMBERS = 150_000_000
#: The stated bound on a run's peak resident memory (MiB), at every size the limits allow.
MEMORY_BOUND_MIB = 2048


def numbers_per_board(prep: Prepared) -> int:
    """Numbers counted per board: channels x (parts (values) + metrics + spans (margins)).

    Parameters
    ----------
    prep : Prepared
        The prepared design.

    Returns
    -------
    int
        Numbers counted per board.
    """
    one = len(prep.design.parts) + len(prep.nominal.metrics) + len(prep.design.mask)
    return prep.design.channels.count * one * judged_copies(prep)


def judged_copies(prep: Prepared) -> int:
    """2 when the boards are judged again away from the base run (over an operating range or
    after a service life), else 1: the boards judged at another temperature or after the life
    are a second set of values, metrics and margins alive beside the base run's (measured:
    the demo over its range at the old limit, 7,894,736 boards, peaked at 3,063 MiB).

    Parameters
    ----------
    prep : Prepared
        The prepared design.

    Returns
    -------
    int
        1 or 2.
    """
    return 2 if over_range_or_life(prep.design.analysis) else 1


def max_boards(prep: Prepared) -> int:
    """The most boards one run of this design may sample (at most ``MAX_SAMPLES``).

    Parameters
    ----------
    prep : Prepared
        The prepared design.

    Returns
    -------
    int
        Number of boards.
    """
    return max(1, min(MAX_SAMPLES, MAX_NUMBERS // numbers_per_board(prep)))


def check_boards(prep: Prepared, boards: int, path: str) -> None:
    """Refuse ``boards`` when they would keep more than ``MAX_NUMBERS`` numbers.

    Raises :class:`InputError` naming ``path``, in one line.

    Parameters
    ----------
    prep : Prepared
        The prepared design.
    boards : int
        Boards the run would sample.
    path : str
        Field path named in the error (``analysis.samples``, ``samples``).

    Raises
    ------
    InputError
        When the boards would keep too many numbers.
    """
    most = max_boards(prep)
    if boards > most:
        per, n = numbers_per_board(prep), prep.design.channels.count
        each = f" for {n} channels" if n > 1 else ""
        twice = (", counted twice: it is judged over its operating range or after its service life"
                 if judged_copies(prep) > 1 else "")
        raise InputError(f"at most {most:,} boards for this design ({per} numbers a board{each}: parts, "
                         f"metrics and margins{twice}; the memory bound is {MEMORY_BOUND_MIB // 1024} GB), "
                         f"not {boards:,}", path)


#: Boards of one adaptive batch are evaluated this many numbers at a time (75 MB), so a
#: batch adds at most that much beside the boards already kept.
PIECE_NUMBERS = MAX_NUMBERS // 16


class BoardStore:
    """The per-board arrays of a run made of batches, filled piece by piece.

    The arrays for ``capacity`` boards are made with ``numpy.empty``: the system commits
    their pages only as rows are written, so a run that stops early keeps only what it
    sampled. Each piece's ensemble is copied in and dropped, so joining needs no second
    copy of the boards.
    """

    def __init__(self, prep: Prepared, capacity: int) -> None:
        self.per = numbers_per_board(prep)
        self.capacity = int(capacity)
        self.filled = 0
        self.first: Ensemble | None = None
        self.values = np.empty((self.capacity, len(prep.design.parts)))
        self.margins = np.empty((self.capacity, len(prep.design.mask)))
        self.metrics: dict[str, np.ndarray] = {}

    def pieces(self, start: int, stop: int) -> list[tuple[int, int]]:
        """Board ranges covering ``[start, stop)``, each at most ``PIECE_NUMBERS`` numbers."""
        step = max(1, PIECE_NUMBERS // self.per)
        return [(lo, min(stop, lo + step)) for lo in range(start, stop, step)]

    def add(self, ens: Ensemble) -> None:
        """Copy the boards of ``ens`` (which must follow the boards kept so far)."""
        lo, hi = ens.start, ens.start + ens.samples
        if self.first is None:
            self.first = ens
        self.values[lo:hi] = ens.values
        self.margins[lo:hi] = ens.margins
        for name, v in ens.metrics.items():
            if name not in self.metrics:
                self.metrics[name] = np.empty(self.capacity)
                self.metrics[name][:lo] = np.nan
            self.metrics[name][lo:hi] = v
        self.filled = max(self.filled, hi)

    def ensemble(self) -> Ensemble:
        """The kept boards as one ensemble (no curves), starting at the first piece's start."""
        assert self.first is not None
        n, start = self.filled, self.first.start
        return replace(self.first, values=self.values[start:n], margins=self.margins[start:n],
                       metrics={k: v[start:n] for k, v in self.metrics.items()},
                       gain_db=None, phase_deg=None, delay_s=None, channel_spread={})
