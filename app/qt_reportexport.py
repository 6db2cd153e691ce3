"""Writing the design-review report from the window.

:func:`window_report` builds the report of the window's design, with the recommendation,
its cost-yield curve and the parts list when "Find cheapest grades" was run for this
design (the same objects the window holds). :func:`write_pdf` prints the HTML through Qt's
rich-text layout and PDF writer, page by page:

* each SVG figure is rendered to an image and drawn at the text width (labels of at
  least 12 px in a 760 px figure print at 8 pt or more on A4);
* headings stay with what follows them and a figure with its caption (a block that would
  end a page without its successor starts the next page instead);
* tables repeat their header row on every page (``<thead>``, which Qt's HTML import turns
  into :meth:`QTextTableFormat.setHeaderRowCount`);
* every page has a footer with the report's title (and the design's revision) and "page N of M".
"""
from __future__ import annotations

from pathlib import Path
from typing import Any, Callable

from PySide6.QtCore import QByteArray, QMarginsF, QRectF, QSizeF, Qt, QUrl
from PySide6.QtGui import (QFont, QImage, QPageLayout, QPageSize, QPainter, QPdfWriter, QTextBlockFormat,
                           QTextCursor, QTextDocument, QTextFormat)
from PySide6.QtSvg import QSvgRenderer

from ..design import Design
from ..report import Report

#: Device pixels per inch of the PDF page (CSS pixels: 1 px = 1/96 in, so the report's
#: style sheet keeps its sizes; text and lines stay vector, figures keep their resolution).
PDF_DPI = 96
#: Page margins in mm, and the height of the footer line in device pixels.
PDF_MARGIN_MM = 15.0
FOOTER_PX = 24
#: Rendered width of a figure image in pixels (drawn scaled to the text width).
FIGURE_RENDER_PX = 1600
#: A table at most this fraction of a page high is not split (it starts a new page with
#: its heading instead).
SMALL_TABLE = 0.3
_OBJECT = "\ufffc"  # Qt's placeholder character for an inline image


def render_svg(svg: str, width_px: int) -> QImage:
    """An SVG figure as an image ``width_px`` wide (height from its aspect ratio)."""
    renderer = QSvgRenderer(QByteArray(svg.encode("utf-8")))
    size = renderer.defaultSize()
    w = max(1, width_px)
    h = max(1, int(round(w * size.height() / max(1, size.width()))))
    img = QImage(w, h, QImage.Format.Format_ARGB32)
    img.fill(0xFFFFFFFF)
    p = QPainter(img)
    renderer.render(p)
    p.end()
    return img


# --- the report of the window's design -------------------------------------------------------

def recommendation_for(design: Design, dialog: Any) -> tuple[Any, Any, Design | None]:
    """(recommendation, curve, design searched) from the window's recommendation dialog
    when its result belongs to ``design``: the design it searched, or that design with the
    recommended grades applied. Otherwise (no dialog, no result, or the design changed
    since) (None, None, None)."""
    rec = getattr(dialog, "recommendation", None)
    if rec is None:
        return None, None, None
    searched = dialog.design
    if design == searched or (rec.chosen is not None and design == rec.design):
        return rec, getattr(dialog, "curve", None), searched
    return None, None, None


def shown_result(design: Design, view: Any) -> Any:
    """The analysis behind the window's ``view`` (a :class:`filters.liveview.ViewData`) when
    it is every board of ``design`` as it is (not a preview, no what-if tolerances), else
    None: the report can then be built from the boards the window already evaluated."""
    result = getattr(view, "result", None)
    if result is None or view.preview or view.design != design:
        return None
    if tuple(result.ensemble.grades) != design.part_grades() or result.samples != design.analysis.samples:
        return None
    return result


def window_report(design: Design, rec: Any = None, curve: Any = None, searched: Design | None = None, *,
                  view: Any = None,
                  progress: Callable[[int, int], None] | None = None,
                  should_stop: Callable[[], bool] | None = None, sets: Any = None) -> Report:
    """The report of ``design`` (the numbers the command line gives), with the parts list of
    its own grades and, when given, the recommendation ``rec`` found from ``searched`` and
    its cost-yield ``curve``. When ``view`` (the window's last :class:`ViewData`) shows every
    board of ``design``, its analysis is completed (corners; the figure's first boards) and
    no board is evaluated again; otherwise the design is analysed. The title block reads the
    design's name, revision and author; the robustness table is the design's grades under
    the other distribution shapes on the analysis's boards; with a recommendation, ``sets``
    (the recommend dialog's grade sets side by side, :func:`compared_sets`) or else the
    current and recommended sets compared here on the search's boards."""
    from ..analysis import analyze, completed
    from ..recommend import parts_list_rows, worst_margin_metric
    from ..report import FIGURE_BOARDS, build_report
    from ..robustness import shapes_for_report

    shown = shown_result(design, view)
    if shown is not None:
        result = completed(shown, curves=FIGURE_BOARDS)
    else:
        result = analyze(design, curves=FIGURE_BOARDS, rare="auto", progress=progress, should_stop=should_stop)
    rows = parts_list_rows(design, None, result.budget, metric=worst_margin_metric(result.ensemble))
    shapes = shapes_for_report(result) if design.mask else []
    comparison, target = (list(sets), rec.target_yield) if sets else _comparison(rec, searched)
    return build_report(result, recommendation=rec, curve=curve or None, parts_rows=rows,
                        current=searched, comparison=comparison, target=target, shapes=shapes)


def compared_sets(dialog: Any, rec: Any) -> list:
    """The grade sets the recommend ``dialog`` judged side by side (current, recommended, no
    class II; :class:`filters.grade_sets.SetResult`) when they belong to ``rec``, else []."""
    extras = getattr(dialog, "extras", None)
    if rec is None or extras is None or getattr(dialog, "recommendation", None) is not rec:
        return []
    return list(extras.sets)


def _comparison(rec: Any, searched: Design | None) -> tuple[list, float | None]:
    """The current and recommended grade sets side by side on the search's boards (its seed
    and count), and the target; nothing without a chosen set."""
    if rec is None or rec.chosen is None or searched is None:
        return [], None
    from ..grade_sets import compare_sets

    sets = [("current", tuple(rec.current_grades)), ("recommended", tuple(rec.chosen.grades))]
    found = compare_sets(searched, sets, samples=rec.chosen.samples, seed=rec.seed, confidence=rec.confidence)
    return found, rec.target_yield


# --- PDF -------------------------------------------------------------------------------------------

def _page_of(y: float, page_h: float) -> int:
    return int(y // page_h)


def _keeps_with_next(block) -> bool:
    """Headings and figure images must not end a page without the block after them."""
    return block.blockFormat().headingLevel() > 0 or _OBJECT in block.text()


def keep_with_next(doc: QTextDocument) -> int:
    """Move every heading or figure that would end a page apart from its next block (the
    text under a heading, a figure's caption; a short table under a heading, or under a
    heading and one paragraph, as a whole: the sign-off table) to the next page; returns
    how many moved.
    Blocks are visited in order, so a break only moves what follows it."""
    layout = doc.documentLayout()
    page_h = doc.pageSize().height()
    moved = 0
    layout.documentSize()  # lays the whole document out (Qt lays out lazily)
    block = doc.begin()
    while block.isValid():
        nxt = block.next()
        if nxt.isValid() and _keeps_with_next(block):
            top = layout.blockBoundingRect(block).top()
            end = layout.blockBoundingRect(nxt).bottom()
            table = QTextCursor(nxt).currentTable()
            if table is None and block.blockFormat().headingLevel() > 0 and nxt.next().isValid():
                table = QTextCursor(nxt.next()).currentTable()  # a heading, one paragraph, a table
            if table is not None and block.blockFormat().headingLevel() > 0:
                whole = layout.frameBoundingRect(table)
                if whole.height() <= SMALL_TABLE * page_h:  # a short table stays whole under its heading
                    end = max(end, whole.bottom())
            at_page_top = top - _page_of(top, page_h) * page_h < 2 * FOOTER_PX
            if _page_of(top, page_h) != _page_of(end - 1, page_h) and not at_page_top:
                fmt = QTextBlockFormat()
                fmt.setPageBreakPolicy(QTextFormat.PageBreakFlag.PageBreak_AlwaysBefore)
                QTextCursor(block).mergeBlockFormat(fmt)
                layout.documentSize()  # lay out again before the next block is measured
                moved += 1
        block = nxt
    return moved


def print_document(report: Report, writer: QPdfWriter) -> QTextDocument:
    """The report as a QTextDocument laid out in pages of ``writer`` (device pixels), the
    space of the footer kept free, figures at the text width, nothing split apart that
    belongs together."""
    rect = writer.pageLayout().paintRectPixels(writer.resolution())
    width, height = rect.width(), rect.height() - FOOTER_PX
    doc = QTextDocument()
    doc.documentLayout().setPaintDevice(writer)
    doc.setDocumentMargin(0)
    font = QFont("DejaVu Sans")
    font.setPointSizeF(9)
    doc.setDefaultFont(font)
    for name, svg in report.figures.items():
        doc.addResource(QTextDocument.ResourceType.ImageResource, QUrl(f"fig:{name}"),
                        render_svg(svg, FIGURE_RENDER_PX))
    doc.setHtml(report.html_with_images(lambda n: f"fig:{n}", width=width, printed=True))
    doc.setPageSize(QSizeF(width, height))
    keep_with_next(doc)
    return doc


def write_pdf(report: Report, path: Path) -> None:
    """The report as a PDF (A4 portrait, numbered pages) written by Qt's PDF writer."""
    writer = QPdfWriter(str(path))
    writer.setPageLayout(QPageLayout(QPageSize(QPageSize.PageSizeId.A4), QPageLayout.Orientation.Portrait,
                                     QMarginsF(PDF_MARGIN_MM, PDF_MARGIN_MM, PDF_MARGIN_MM, PDF_MARGIN_MM),
                                     QPageLayout.Unit.Millimeter))
    writer.setResolution(PDF_DPI)
    writer.setTitle(report.title)
    writer.setCreator("tolspread")
    doc = print_document(report, writer)
    size = doc.pageSize()
    pages = doc.pageCount()
    foot = QFont("DejaVu Sans")
    foot.setPointSizeF(8)
    painter = QPainter(writer)
    try:
        for i in range(pages):
            if i:
                writer.newPage()
            painter.save()
            painter.translate(0, -i * size.height())
            # half a pixel short of the page's end: a block that starts the next page (a heading
            # moved there) touches this page's rectangle and would be drawn here too, clipped
            # but still in the PDF's text (found by search and by text extraction in the footer)
            doc.drawContents(painter, QRectF(0, i * size.height(), size.width(), size.height() - 0.5))
            painter.restore()
            painter.setFont(foot)
            painter.setPen(Qt.GlobalColor.darkGray)
            line = QRectF(0, size.height(), size.width(), FOOTER_PX)
            painter.drawText(line, int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignBottom),
                             (report.footer or report.title)[:90])
            painter.drawText(line, int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignBottom),
                             f"page {i + 1} of {pages}")
    finally:
        painter.end()
