"""The library's one thread pool: numpy and BLAS release the GIL inside their loops, so a
few threads share the cores without processes.

:data:`POOL` runs the chunks of boards of :func:`filters.evaluate.evaluate` and the
frequency blocks of :func:`filters.bands.bands`; :data:`WORKERS` is its thread count
(the CPU count, at most 4). One pool for the whole process bounds the threads working at
once, whichever module submits.
"""
from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor

__all__ = [
    "WORKERS",
    "POOL",
]

WORKERS = max(1, min(4, os.cpu_count() or 1))
POOL = ThreadPoolExecutor(max_workers=WORKERS, thread_name_prefix="tolspread")
