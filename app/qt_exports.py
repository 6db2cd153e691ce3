"""The window's exports: plots as PNG or SVG, every board's numbers as CSV, the report as
HTML or PDF.

:class:`WindowExports` asks for a file (unless a path is given), writes it and says so in
the window's status line; a problem is shown as a message, never a traceback. What is
written comes from elsewhere: the SVG plots from :mod:`app.qt_svgexport`, the per-board
table from :func:`filters.board_table.board_table`, the report from
:mod:`app.qt_reportexport` (built off the GUI thread).
"""
from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

import pyqtgraph.exporters
from PySide6.QtGui import QImage, QPainter
from PySide6.QtWidgets import QFileDialog

from ..designfile import write_text_atomic
from ..errors import InputError

if TYPE_CHECKING:
    from .qt_mainwindow import MainWindow
    from .qt_tasks import BackgroundTask


def stacked_image(top: QImage, svgs: list[str]) -> QImage:
    """``top`` (the spread plots as an image) with each SVG chart of ``svgs`` rendered at
    its width below it (the PNG export's Channel match charts)."""
    from .qt_reportexport import render_svg

    images = [top] + [render_svg(svg, top.width()) for svg in svgs]
    out = QImage(top.width(), sum(i.height() for i in images), QImage.Format.Format_ARGB32)
    out.fill(0xFFFFFFFF)
    painter = QPainter(out)
    y = 0
    for image in images:
        painter.drawImage(0, y, image)
        y += image.height()
    painter.end()
    return out


class WindowExports:
    """The exports of ``window`` (File > Export plots / board metrics, Design > Export report)."""

    def __init__(self, window: "MainWindow") -> None:
        self.window = window
        self.report_task: BackgroundTask | None = None  # the report being built, if any

    def _ask(self, title: str, name: str, pattern: str) -> str | None:
        path, _ = QFileDialog.getSaveFileName(self.window, title, str(self.window.last_dir() / name), pattern)
        return path or None

    def plots(self, kind: str, path: str | None = None) -> Path | None:
        """Save the plots as PNG (both plots, as shown) or SVG (every plot shown: gain,
        phase or delay, and the histogram, over the shown ranges); a design of several
        channels with match spans adds its Channel match charts below (drawn as the
        report draws them). Asks for a file unless ``path`` is given."""
        w = self.window
        path = path or self._ask(f"Export plots as {kind.upper()}", f"spread.{kind}", f"*.{kind}")
        if path is None:
            return None
        if kind == "svg":
            from .qt_svgexport import export_window_plots

            if not export_window_plots(w, path):  # gain, phase/delay and histogram, as shown
                return None
        else:
            exporter = pyqtgraph.exporters.ImageExporter(w.plots.canvas.scene())
            exporter.parameters()["width"] = max(1200, int(w.plots.canvas.width()))
            from .qt_svgexport import match_svgs

            view = w.session.last_view
            below = [] if view is None else match_svgs(view)
            if not below:
                exporter.export(str(path))
            elif not stacked_image(exporter.export(toBytes=True), below).save(str(path)):
                w.show_problem("Could not write the plots", f"{path}: not written")
                return None
        w.show_status(f"plots written to {path}")
        return Path(path)

    def board_metrics(self, path: str | None = None) -> Path | None:
        """Write every board's part values, metrics and margins as CSV
        (:func:`filters.board_table.board_csv`); nothing before the first figures."""
        from ..board_table import board_csv, board_table

        w = self.window
        view = w.session.last_view
        if view is None:
            return None
        path = path or self._ask("Export board metrics", "boards.csv", "*.csv")
        if path is None:
            return None
        table = board_table(view.ensemble, view.metrics)
        write_text_atomic(Path(path), board_csv(table), backup=False)
        w.show_status(f"{len(table.boards)} boards written to {path}")
        return Path(path)

    def report(self, kind: str, path: str | None = None) -> None:
        """Write the design-review report of the current design (HTML or PDF), with the
        recommendation and parts list when Find cheapest grades ran for this design."""
        from ..report import write_report

        from .qt_reportexport import compared_sets, recommendation_for, window_report, write_pdf
        from .qt_tasks import BackgroundTask

        w = self.window
        path = path or self._ask(f"Export report ({kind.upper()})", f"report.{kind}", f"*.{kind}")
        if path is None:
            return
        design = w.session.design
        w.show_status("building the report…")

        rec, curve, searched = recommendation_for(design, w.recommend_dialog)
        sets = compared_sets(w.recommend_dialog, rec)  # judged by the dialog already: not again

        view = w.session.last_view  # the boards already evaluated, if they are this design's

        def job(progress, should_stop):
            return window_report(design, rec, curve, searched, view=view, progress=progress,
                                 should_stop=should_stop, sets=sets)

        def done(report) -> None:
            try:
                if kind == "pdf":
                    write_pdf(report, Path(path))
                else:
                    write_report(report, path)
            except (OSError, InputError) as exc:
                w.show_problem("Could not write the report", str(exc))
                return
            w.show_status(f"report written to {path}")

        task = BackgroundTask(job, w)
        task.finished.connect(done)
        task.failed.connect(lambda msg, _d: w.show_problem("Could not build the report", msg))
        self.report_task = task
        task.start()

    def stop(self) -> None:
        """Cancel a report being built (the window is closing)."""
        if self.report_task is not None:
            self.report_task.stop()
