"""Moved: the terminal summary and the ``--json`` document of ``tolspread analyze`` live in
:mod:`filters.report.text` (``tolspread.report.text``), beside the HTML report, with one
writer for numbers with units (:mod:`filters.report.numbers`). Edit them there."""
from __future__ import annotations

from ..report.text import CAUTION, metric_order, print_summary, summary_cells, to_json

__all__ = ["CAUTION", "metric_order", "print_summary", "summary_cells", "to_json"]
