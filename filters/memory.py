"""The memory rule: how many boards one run may keep.

An analysis keeps, for every board, each part's value, each metric and each span's margin
as a float64: :func:`numbers_per_board` numbers, 8 bytes each. Everything else is bounded
apart from the number of boards: the libraries, the chunks of boards in flight
(:data:`filters.evaluate.CHUNK_MAX` boards each), and the spread budget, corners and
summaries, which are taken in chunks of boards (:mod:`filters.summary`) and evaluate their
extra designs in bounded batches (:func:`filters.budget.evaluate_rows`).

So a run may keep at most :data:`MAX_NUMBERS` numbers, and one run's boards are limited to
``MAX_NUMBERS // numbers_per_board`` (and to :data:`filters.design.MAX_SAMPLES`). With the
numbers kept at 1.2 GB, the whole process stays under :data:`MEMORY_BOUND_MIB` (measured
by ``benchmarks/memory.py``; README's "Guarantees and their limits" quotes the figures).
"""
from __future__ import annotations

from .design import MAX_SAMPLES
from .errors import InputError
from .evaluate import Prepared

#: Per-board numbers one run may keep: 150 million float64 (1.2 GB, 1,144 MiB).
MAX_NUMBERS = 150_000_000
#: The stated bound on a run's peak resident memory (MiB), at every size the limits allow.
MEMORY_BOUND_MIB = 2048


def numbers_per_board(prep: Prepared) -> int:
    """Numbers kept per board: parts (values) + metrics + spans (margins)."""
    return len(prep.design.parts) + len(prep.nominal.metrics) + len(prep.design.mask)


def max_boards(prep: Prepared) -> int:
    """The most boards one run of this design may sample (at most ``MAX_SAMPLES``)."""
    return max(1, min(MAX_SAMPLES, MAX_NUMBERS // numbers_per_board(prep)))


def check_boards(prep: Prepared, boards: int, path: str, copies: int = 1) -> None:
    """Refuse ``boards`` when ``copies`` x boards would keep more than ``MAX_NUMBERS``.

    ``copies`` is 2 where a run joins batches into one ensemble (both are held while they
    are joined). Raises :class:`InputError` naming ``path``, in one line.
    """
    most = max_boards(prep) // copies
    if boards > most:
        per = numbers_per_board(prep)
        raise InputError(f"at most {most:,} boards for this design ({per} numbers a board: parts, "
                         f"metrics and margins; the memory bound is {MEMORY_BOUND_MIB // 1024} GB), "
                         f"not {boards:,}", path)
