"""Reports for people, split by concern:

* :mod:`.numbers` - numbers with their units for people (one writer for the terminal, the
  HTML report and the window's exports), percentages, counts, costs;
* :mod:`.words` - the design, grades and mask described in generated sentences;
* :mod:`.charts` - the SVG charts (spread, histogram, bars, cost against yield);
* :mod:`.document` - the HTML document: :class:`Report`, style sheets, tables, figures;
* :mod:`.context`, :mod:`.sections`, :mod:`.review` - what each section writes;
* :mod:`.build` - the table of sections (:data:`SECTIONS`) and :func:`build_report`;
* :mod:`.text` - the terminal summary and the ``--json`` document of ``tolspread analyze``
  (its plain-text tables: :mod:`.texttable`).

A report is built from one :func:`filters.analysis.analyze` result that kept curves
(``curves=FIGURE_BOARDS``); nothing here evaluates a board. The names below are imported on first use (the command
line imports the light :mod:`.texttable` without the rest).
"""
from __future__ import annotations

from ..lazyimport import public_names

#: public name -> (module, attribute)
_PUBLIC: dict[str, tuple[str, str]] = {name: (module, name) for module, names in {
    "build": ("CAUTION", "FIGURE_BOARDS", "SECTIONS", "Section", "build_report"),
    "context": ("Context",),
    "document": ("Report", "PRINT_CSS", "write_report"),
    "numbers": ("format_quantity", "format_metric", "format_pct", "format_count"),
    "words": ("describe_design", "describe_distribution"),
    "charts": ("MIN_FONT", "SVG_NS", "svg_spread_plot", "svg_histogram", "svg_bar_chart", "svg_cost_yield"),
}.items() for name in names}
__all__ = list(_PUBLIC)

__getattr__, __dir__ = public_names(__name__, globals(), _PUBLIC)
