"""Writing the design-review report from the window: HTML as it is, PDF through Qt's PDF
writer (each SVG figure rendered to an image first)."""
from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QByteArray, QMarginsF, QSizeF, QUrl
from PySide6.QtGui import QImage, QPageLayout, QPageSize, QPainter, QPdfWriter, QTextDocument
from PySide6.QtSvg import QSvgRenderer

from filters.report import Report


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


def write_pdf(report: Report, path: Path) -> None:
    """The report as a PDF (A4 portrait) written by Qt's PDF writer."""
    doc = QTextDocument()
    for name, svg in report.figures.items():
        doc.addResource(QTextDocument.ResourceType.ImageResource, QUrl(f"fig:{name}"), render_svg(svg, 1400))
    doc.setHtml(report.html_with_images(lambda n: f"fig:{n}"))
    writer = QPdfWriter(str(path))
    writer.setPageLayout(QPageLayout(QPageSize(QPageSize.PageSizeId.A4), QPageLayout.Orientation.Portrait,
                                     QMarginsF(15, 15, 15, 15)))
    writer.setResolution(150)
    writer.setTitle(report.title)
    writer.setCreator("tolspread")
    doc.setPageSize(QSizeF(writer.width(), writer.height()))
    doc.print_(writer)
