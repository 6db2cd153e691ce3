"""Freed arrays reused by the next evaluation instead of mapped afresh (glibc on Linux).

A tiny module of its own, free of numpy, so the ``tolspread`` program can make the
process-wide setting at start without importing the engine.
"""
from __future__ import annotations

__all__ = ["reuse_freed_memory", "MALLOC_MMAP_THRESHOLD", "MALLOC_TRIM_THRESHOLD"]

#: glibc's malloc settings (bytes) set by :func:`reuse_freed_memory`: arrays up to the first
#: from the heap, and up to the second kept there when freed
MALLOC_MMAP_THRESHOLD, MALLOC_TRIM_THRESHOLD = 32 * 2 ** 20, 128 * 2 ** 20


def reuse_freed_memory() -> bool:
    """Let glibc's malloc hand freed arrays of up to 32 MiB to the next evaluation instead
    of giving the pages back to the system at once (Linux with glibc; elsewhere nothing).

    By default glibc maps an array of the size of a 10,000-board curve (32 MB) afresh on
    every evaluation and unmaps it when freed, so each evaluation page-faults on every page
    of its curves and the kernel zeroes them: about 1,200 page faults and 6-25 ms of system
    time for the demo's full evaluation at 10,000 boards, against 4 page faults with these
    settings. The price: up to :data:`MALLOC_TRIM_THRESHOLD` of freed memory stays in the
    process for reuse. Set ``MALLOC_MMAP_THRESHOLD_`` or ``MALLOC_TRIM_THRESHOLD_`` in the
    environment to keep glibc's own choice.

    The setting is process-wide, so importing the library never makes it: the ``tolspread``
    program calls this at start (:func:`tolspread.app.cli.main`), and a script that evaluates
    many boards may call it once itself.

    Returns
    -------
    bool
        True when the settings were applied.
    """
    import ctypes
    import os
    import sys

    if not sys.platform.startswith("linux") or {"MALLOC_MMAP_THRESHOLD_", "MALLOC_TRIM_THRESHOLD_"} & set(os.environ):
        return False
    try:
        mallopt = ctypes.CDLL("libc.so.6").mallopt
    except (OSError, AttributeError):  # not glibc
        return False
    m_trim_threshold, m_mmap_threshold = -1, -3  # glibc's malloc.h
    return bool(mallopt(m_mmap_threshold, MALLOC_MMAP_THRESHOLD)) and bool(mallopt(m_trim_threshold,
                                                                                    MALLOC_TRIM_THRESHOLD))
