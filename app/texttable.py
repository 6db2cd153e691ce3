"""Plain-text tables for the terminal: :func:`filters.report.texttable.table` (kept
importable here for the command-line modules)."""
from __future__ import annotations

from ..report.texttable import table

__all__ = ["table"]
