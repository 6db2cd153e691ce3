"""Reports for people, split by concern:

* :mod:`.numbers` - numbers with their units for people (one writer for the terminal, the
  HTML report and the window's exports), percentages, counts, costs;
* :mod:`.words` - the design, grades and mask described in generated sentences;
* :mod:`.charts` - the SVG charts (spread, histogram, bars, cost against yield);
* :mod:`.document` - the HTML document: :class:`Report`, style sheets, tables, figures;
* :mod:`.context`, :mod:`.sections`, :mod:`.review` - what each section writes;
* :mod:`.build` - the table of sections (:data:`SECTIONS`) and :func:`build_report`;
* :mod:`.text` - the terminal summary and the ``--json`` document of ``tolspread analyze``.

A report is built from one :func:`filters.analysis.analyze` result that kept curves
(``curves=FIGURE_BOARDS``); nothing here evaluates a board.
"""
from __future__ import annotations

from .build import CAUTION, FIGURE_BOARDS, SECTIONS, Section, build_report
from .charts import MIN_FONT, SVG_NS, svg_bar_chart, svg_cost_yield, svg_histogram, svg_spread_plot
from .context import Context
from .document import PRINT_CSS, Report, write_report
from .numbers import format_count, format_metric, format_pct, format_quantity
from .words import describe_design, describe_distribution

__all__ = [
    "CAUTION",
    "FIGURE_BOARDS",
    "SECTIONS",
    "Section",
    "Context",
    "Report",
    "PRINT_CSS",
    "build_report",
    "write_report",
    "format_quantity",
    "format_metric",
    "format_pct",
    "format_count",
    "describe_design",
    "describe_distribution",
    "MIN_FONT",
    "SVG_NS",
    "svg_spread_plot",
    "svg_histogram",
    "svg_bar_chart",
    "svg_cost_yield",
]
