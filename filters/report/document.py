"""The HTML document of a report: the :class:`Report` (a body with a marker where each
figure goes, and the figures as standalone SVG), its two style sheets (screen and
print), and the pieces every section builds with: :func:`table` and :func:`figure`.

:meth:`Report.html` gives one HTML document with the SVGs inline, no scripts and no
external resources. :meth:`Report.html_with_images` gives the same document with each
figure as an ``<img>`` whose source the caller names (the window renders the SVGs to
images and prints the document to PDF). Tables carry their header row in ``<thead>`` so
a printed table repeats it on every page. All user text is escaped by the caller
(:func:`esc`); ``table`` escapes the headers itself.
"""
from __future__ import annotations

import html
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Sequence

from ..safeio import write_text_atomic
from .charts import SVG_NS

__all__ = [
    "esc",
    "Report",
    "CSS",
    "PRINT_CSS",
    "table",
    "figure",
    "svg_size",
    "write_report",
]

esc = html.escape

_FIGURE_MARK = "<!--figure:{}-->"
_FIGURE_RE = re.compile(r"<!--figure:([A-Za-z0-9_-]+)-->")


@dataclass(frozen=True)
class Report:
    """A built report. ``body`` is the HTML body with a marker where each figure goes;
    ``figures`` maps figure name -> standalone SVG text; ``sizes`` name -> (width, height);
    ``footer`` the line a printed page starts its footer with (default: the title)."""

    title: str
    body: str
    figures: dict[str, str]
    sizes: dict[str, tuple[int, int]] = field(default_factory=dict)
    footer: str = ""

    def _document(self, figure: Callable[[str], str], css: str = "") -> str:
        body = _FIGURE_RE.sub(lambda m: figure(m.group(1)), self.body)
        return ("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
                f"<title>{esc(self.title)}</title>\n<style>\n{css or CSS}</style>\n</head>\n<body>\n"
                f"{body}\n</body>\n</html>\n")

    def html(self) -> str:
        """One self-contained HTML document, each figure an inline SVG."""
        def inline(name: str) -> str:
            svg = self.figures[name]
            return svg.replace(f' xmlns="{SVG_NS}"', "", 1)  # implied for SVG inside HTML
        return self._document(inline)

    def html_with_images(self, src_for: Callable[[str], str], width: float | None = None,
                         printed: bool = False) -> str:
        """The same document with each figure as ``<img src="src_for(name)">``, drawn
        ``width`` wide (default: its own size; the height keeps the aspect ratio).
        ``printed``: the style sheet for paper (:data:`PRINT_CSS`, sizes in points)."""
        def image(name: str) -> str:
            w, h = self.sizes.get(name, (760, 340))
            if width is not None:
                w, h = width, h * width / w
            return (f'<img src="{esc(src_for(name), quote=True)}" width="{int(w)}" height="{int(round(h))}" '
                    f'alt="{esc(name, quote=True)}">')
        return self._document(image, PRINT_CSS if printed else "")


CSS = """\
body { font-family: sans-serif; color: #1a1a1a; margin: 24px auto; max-width: 900px;
       line-height: 1.4; font-size: 14px; }
h1 { font-size: 22px; margin-bottom: 4px; }
h2 { font-size: 17px; margin-top: 28px; border-bottom: 1px solid #bbbbbb; padding-bottom: 3px; }
h3 { font-size: 14px; margin-top: 18px; }
p.meta { color: #555555; margin-top: 0; }
table { border-collapse: collapse; margin: 8px 0 12px 0; }
th, td { border: 1px solid #c8c8c8; padding: 3px 7px; text-align: left; vertical-align: top; }
th { background: #f0f0f0; }
td.num { text-align: right; white-space: nowrap; }
p.key { font-size: 16px; }
div.figure { margin: 10px 0 16px 0; }
p.caption { color: #444444; font-size: 12.5px; margin-top: 2px; }
.bad { color: #b00000; }
table.caution { border: 2px solid #b36b00; background: #fff4e0; margin-top: 24px; }
table.caution td { border: none; padding: 10px 14px; }
ul.assumptions li { margin-bottom: 3px; }
table.titleblock td { font-size: 15px; }
table.signoff td { height: 40px; border-bottom: 1px solid #1a1a1a; }
@media print { div.figure { page-break-inside: avoid; } thead { display: table-header-group; }
               table.signoff { page-break-inside: avoid; } }
@page { margin: 15mm 15mm 18mm 15mm;
        @bottom-right { content: "page " counter(page) " of " counter(pages); font: 9px sans-serif; color: #555555; } }
"""


#: The style sheet of the printed report (Qt's rich-text layout; sizes in points, nothing
#: smaller than 8 pt).
PRINT_CSS = """\
body { font-family: sans-serif; color: #1a1a1a; font-size: 9pt; }
h1 { font-size: 15pt; margin-bottom: 2pt; }
h2 { font-size: 12pt; margin-top: 14pt; margin-bottom: 4pt; }
h3 { font-size: 10pt; margin-top: 8pt; margin-bottom: 3pt; }
p { margin-top: 2pt; margin-bottom: 4pt; }
p.meta { color: #555555; font-size: 8pt; }
table { border-collapse: collapse; margin-top: 3pt; margin-bottom: 6pt; font-size: 8pt; }
th, td { border: 1px solid #c8c8c8; padding: 1px 3px; text-align: left; vertical-align: top; }
th { background: #f0f0f0; font-weight: bold; }
td.num { text-align: right; white-space: nowrap; }
p.key { font-size: 10pt; }
p.caption { color: #444444; font-size: 8pt; margin-top: 1pt; }
.bad { color: #b00000; }
table.caution { border: 2px solid #b36b00; background: #fff4e0; margin-top: 10pt; font-size: 9pt; }
table.caution td { border: none; padding: 6px 8px; }
li { margin-bottom: 2pt; }
table.signoff td { padding: 14px 3px; }
"""


def table(headers: Sequence[str], rows: Sequence[Sequence[str]], numeric: Sequence[int] = ()) -> str:
    """An HTML table; ``headers`` plain text (escaped here, every one named), cells are HTML
    fragments. The header row is in ``<thead>``, so a printed table repeats it on each page.

    Parameters
    ----------
    headers : sequence of str
        Column titles (plain text).
    rows : sequence of sequence of str
        Cells (HTML fragments).
    numeric : sequence of int
        Indexes of right-aligned columns.

    Returns
    -------
    str
        HTML.
    """
    num = set(numeric)
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{esc(h)}</th>" for h in headers) + "</tr></thead>", "<tbody>"]
    for r in rows:
        out.append("<tr>" + "".join(f'<td class="num">{c}</td>' if i in num else f"<td>{c}</td>"
                                    for i, c in enumerate(r)) + "</tr>")
    out.append("</tbody>")
    out.append("</table>")
    return "\n".join(out)


def figure(name: str, caption: str) -> str:
    """A figure's place in the body (the marker :meth:`Report.html` fills) with its caption (HTML).

    Parameters
    ----------
    name : str
        The figure's name.
    caption : str
        Its caption (HTML).

    Returns
    -------
    str
        HTML.
    """
    return f'<div class="figure">{_FIGURE_MARK.format(name)}<p class="caption">{caption}</p></div>'


def svg_size(svg: str) -> tuple[int, int]:
    """(width, height) in px that an SVG states, default (760, 340).

    Parameters
    ----------
    svg : str
        SVG text.

    Returns
    -------
    tuple[int, int]
        (width, height) in px.
    """
    m = re.search(r'<svg[^>]*\swidth="(\d+)"[^>]*\sheight="(\d+)"', svg)
    return (int(m.group(1)), int(m.group(2))) if m else (760, 340)


def write_report(report: Report, path: str | Path) -> None:
    """Write the self-contained HTML report to ``path`` atomically.

    Parameters
    ----------
    report : Report
        The report.
    path : str or Path
        The HTML file to write.
    """
    write_text_atomic(Path(path), report.html(), backup=False)
