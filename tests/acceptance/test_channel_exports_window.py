"""File > Export plots of a design of several channels (issue 15 item 6): the SVG and the
PNG hold the Channel match charts below the spread plots, whether or not that tab was
shown. ``tolspread assets/examples/matched_iq_channels.json`` is started through the
console script's function (tests/program_start.py); the exports go through the File
menu's actions and the file dialog's answer; the files are read back with xml.etree and
Qt's image reader, and the drawn band is held against an independent nodal solution of the
example's Sallen-Key channels (tests/acceptance/test_channels_window.py)."""
from __future__ import annotations

import re
import shutil
import subprocess
import unicodedata
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from PySide6.QtGui import QImage

from .test_channels_window import EXAMPLE, action, channel_values, largest_differences, sallen_key_response

pytestmark = pytest.mark.gui

NS = "{http://www.w3.org/2000/svg}"
SKY = "#56B4E9"  # the every-board band (filters/report/charts.py, Okabe-Ito sky blue)


@pytest.fixture
def iq_window(starter):
    w = starter.launch(str(EXAMPLE))
    starter.wait_for_yield(w)
    return w


def _chart(root: ET.Element, title_part: str) -> ET.Element:
    """The stacked SVG's group of the chart whose title holds ``title_part``."""
    for g in root.findall(f"{NS}g"):
        t = g.find(f"{NS}title")
        if t is not None and title_part in (t.text or ""):
            return g
    raise AssertionError(f"no chart titled ...{title_part}...")


def _y_axis(chart: ET.Element) -> tuple[float, float]:
    """(value at pixel row 0, value per pixel) from the chart's y tick labels (right-aligned
    numbers left of the plot, written 4 px below their tick)."""
    ticks = [(float(t.attrib["y"]) - 4, float(t.text)) for t in chart.iter(f"{NS}text")
             if t.attrib.get("text-anchor") == "end" and re.fullmatch(r"-?[0-9.]+", t.text or "")]
    assert len(ticks) >= 3
    slope, at0 = np.polyfit([p for p, _ in ticks], [v for _, v in ticks], 1)
    return float(at0), float(slope)


def test_svg_export_holds_the_channel_match_charts_drawn_from_the_boards(iq_window, answers, tmp_path):
    view = iq_window.session.last_view
    assert iq_window.centre_tabs.currentWidget() is iq_window.plots  # the Channel match tab never shown
    path = tmp_path / "plots.svg"
    answers.save_paths.append(str(path))
    action(iq_window, "export_svg").trigger()
    root = ET.parse(path).getroot()
    titles = [t.text for t in root.iter(f"{NS}title")]
    assert any("gain spread" in t for t in titles)
    curves = view.result.curves
    freqs = view.freqs_hz
    boards = curves.boards
    # independent: the example's channels solved by nodal analysis on the same boards' parts
    values = channel_values(EXAMPLE, boards)
    h = np.stack([sallen_key_response(v, freqs) for v in values])
    diffs = largest_differences(h)
    band = (freqs >= 100 * (1 - 1e-9)) & (freqs <= 10_000 * (1 + 1e-9))  # the example's match spans
    for q, limit in (("gain", 0.1), ("phase", 1.0)):
        chart = _chart(root, f"{q} difference between channels")
        text = ET.tostring(chart, encoding="unicode")
        assert f"every board ({boards:,})" in text and "match span limit" in text
        at0, per_px = _y_axis(chart)
        data = next(g for g in chart.iter(f"{NS}g") if g.attrib.get("id") == f"match-{q}-data")
        sky = next(p for p in data.iter(f"{NS}polygon") if p.attrib["fill"] == SKY)
        pts = np.array([[float(c) for c in xy.split(",")] for xy in sky.attrib["points"].split()])
        top = pts[:freqs.size, 1]  # the first half: every board's highest difference, by frequency
        drawn_max = at0 + per_px * float(top[band].min())  # the highest point is the smallest row
        tol = 1.5 * abs(per_px)  # coordinates are written to 0.1 px; a pixel or so
        assert drawn_max == pytest.approx(float(diffs[q][:, band].max()), abs=tol)
        # each match span's limit line (purple) lies at its limit (the example's file)
        lines = [ln for ln in chart.iter(f"{NS}line") if ln.attrib.get("stroke") == "#CC79A7"
                 and ln.attrib.get("stroke-width") == "2.2"]
        assert lines and all(at0 + per_px * float(ln.attrib["y1"]) == pytest.approx(limit, abs=tol)
                             for ln in lines)


def test_png_export_adds_the_channel_match_charts_below_the_spread_plots(iq_window, answers, tmp_path):
    path = tmp_path / "plots.png"
    answers.save_paths.append(str(path))
    action(iq_window, "export_png").trigger()
    img = QImage(str(path))
    assert not img.isNull()
    canvas = iq_window.plots.canvas
    assert img.height() > img.width() * canvas.height() / canvas.width() * 1.5  # spread plots plus two charts
    bottom = img.copy(0, int(img.height() * 0.75), img.width(), img.height() // 4)
    colours = {bottom.pixelColor(x, y).name().upper() for x in range(0, bottom.width(), 3)
               for y in range(0, bottom.height(), 3)}
    assert "#CC79A7" in colours or any(c.startswith("#CC7") for c in colours)  # a match span's limit
    assert "#0072B2" in colours  # the central band


@pytest.mark.skipif(not (shutil.which("pdftotext") and shutil.which("pdfimages")), reason="poppler-utils not installed")
def test_pdf_report_from_the_window_holds_the_channel_match_section(iq_window, qtbot, answers, tmp_path):
    """Design > Export report (PDF) on the I/Q example: the Channel match section with its
    two charts (images on its pages) and its table, whose failing boards are the window's
    (read back with poppler's pdftotext and pdfimages)."""
    path = tmp_path / "report.pdf"
    answers.save_paths.append(str(path))
    action(iq_window, "report_pdf").trigger()
    qtbot.waitUntil(lambda: path.exists() and "report written" in iq_window.status_text.text(), timeout=120_000)
    text = subprocess.run(["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True,
                          check=True).stdout
    pages = unicodedata.normalize("NFKC", text).split("\f")  # the PDF's ligatures (ff, fl) as letters
    where = [i for i, p in enumerate(pages, start=1) if re.search(r"^\s*Channel match\s*$", p, re.M)]
    assert where, "no Channel match heading"
    listing = subprocess.run(["pdfimages", "-list", str(path)], capture_output=True, text=True, check=True).stdout
    image_pages = {int(r.split()[0]) for r in listing.splitlines()[2:] if r.split()[2:3] == ["image"]}
    body = " ".join(" ".join(pages[where[0] - 1:where[0] + 1]).split())
    body = body[body.index("Each board carries 2 identical channels"):]  # the section on
    for q in ("gain", "phase"):
        assert f"Largest {q} difference between any two channels" in body
    assert {where[0], where[0] + 1} & image_pages  # the charts are drawn there
    spans = {s.name: s for s in iq_window.session.last_view.spans}
    table = body[body.index("Mismatch"):]
    for name in ("I/Q gain match", "I/Q phase match"):  # failing boards (share of all boards, 2 decimals)
        assert f"{spans[name].failed:,} ({100 * spans[name].fraction:.2f} %)" in table, name
