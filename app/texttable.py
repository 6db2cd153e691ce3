"""Plain-text tables for the terminal: :func:`filters.report.text.table` (kept importable
here for the command-line modules)."""
from __future__ import annotations

from ..report.text import table

__all__ = ["table"]
