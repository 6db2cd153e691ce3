"""What the window writes, read back with tools outside the project (issue 10 #22-#24, #26):
the report after Find cheapest grades (html.parser), the PDF report (poppler's pdftotext,
pdfimages, pdftoppm), the parts-list CSV of the recommendation dialog (the csv module), the
SVG of the plots (xml.etree, headless chromium and ImageMagick where installed).
Everything is done through the window's actions, buttons and file dialogs."""
from __future__ import annotations

import csv
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QImage
from PySide6.QtWidgets import QApplication

from .conftest import WAIT_MS, export_report_html, log_errors

pytestmark = pytest.mark.gui


def action(window, name: str):
    hits = [a for a in window.findChildren(type(window.act_svg)) if a.objectName() == name]
    assert len(hits) == 1, name
    return hits[0]


def no_error_shown(shown) -> None:
    assert not shown.errors(), f"an error box was shown: {shown.errors()}"
    assert not log_errors(), log_errors()


def run_recommendation(window, qtbot):
    """Edit > Find cheapest grades…, few boards, Find; returns the dialog with its result."""
    action(window, "recommend").trigger()
    qtbot.waitUntil(lambda: any(w.objectName() == "recommend_dialog" and w.isVisible()
                                for w in QApplication.topLevelWidgets()), timeout=WAIT_MS)
    dlg = next(w for w in QApplication.topLevelWidgets() if w.objectName() == "recommend_dialog")
    dlg.samples.setValue(400)
    dlg.target.setValue(90.0)
    qtbot.mouseClick(dlg.run_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(dlg.apply_button.isEnabled, timeout=120_000)
    return dlg


class _Tables(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[list[list[str]]] = []
        self.ids: list[str] = []
        self._cell: list[str] | None = None
        self._row: list[str] | None = None

    def handle_starttag(self, tag, attrs):
        if tag == "table":
            self.tables.append([])
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = []
        if dict(attrs).get("id"):
            self.ids.append(dict(attrs)["id"])

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.tables[-1].append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)


def test_report_after_find_cheapest_grades_holds_the_recommendation(window, qtbot, answers, shown, tmp_path):
    # issue 10 #22: the exported report had no cost, recommendation or parts list
    design = window.session.design
    dlg = run_recommendation(window, qtbot)
    chosen = dlg.recommendation.chosen
    html = export_report_html(window, qtbot, answers, tmp_path / "report.html", timeout=120_000)
    p = _Tables()
    p.feed(html)
    assert {"recommendation", "parts"} <= set(p.ids)
    rec_table = next(t for t in p.tables if t and t[0][:2] == ["Part", "Current grade"])
    head, rows = rec_table[0], rec_table[1:]
    assert [r[head.index("Current grade")] for r in rows] == [q.grade for q in design.parts]
    assert [r[head.index("Recommended grade")] for r in rows] == list(chosen.grades)
    assert f"{chosen.cost:.2f}" in html
    parts = next(t for t in p.tables if t and t[0][:2] == ["ref", "nominal value"])
    assert [r[0] for r in parts[1:]] == [q.ref for q in design.parts]
    dlg.reject()
    no_error_shown(shown)


def test_parts_csv_of_the_dialog_has_the_budget_in_words(window, qtbot, answers, shown, tmp_path):
    # issue 10 #24: the window's export left the budget columns empty
    dlg = run_recommendation(window, qtbot)
    path = tmp_path / "parts.csv"
    answers.save_paths.append(str(path))
    qtbot.mouseClick(dlg.csv_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: path.exists() and "Parts list written" in dlg.summary.text(), timeout=120_000)
    assert path.read_bytes().startswith(b"\xef\xbb\xbf")  # UTF-8 byte-order mark
    with open(path, newline="", encoding="utf-8-sig") as fh:
        rows = list(csv.DictReader(fh))
    assert [r["grade"] for r in rows] == list(dlg.recommendation.chosen.grades)
    shares = [float(r["share of spread budget (%)"]) for r in rows]
    assert all(0 <= s <= 100 for s in shares) and sum(shares) <= 100.5
    metric = {r["budget metric"] for r in rows}
    assert len(metric) == 1 and (m := metric.pop()) and not m.startswith("margin.") and "_" not in m
    dlg.reject()
    no_error_shown(shown)


# --- PDF ---------------------------------------------------------------------------------------------
needs_poppler = pytest.mark.skipif(not (shutil.which("pdftotext") and shutil.which("pdfimages")
                                        and shutil.which("pdftoppm")), reason="poppler-utils not installed")


def _pdf_pages(path: Path) -> list[str]:
    text = subprocess.run(["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True,
                          check=True).stdout
    return text.split("\f")[:-1] if text.endswith("\f") else text.split("\f")


@needs_poppler
def test_pdf_report_pages_captions_and_text_size(window, qtbot, answers, shown, tmp_path):
    # issue 10 #23: captions apart from their figures, no page numbers, 5 pt chart labels
    from tolspread.report.charts import MIN_FONT

    path = tmp_path / "report.pdf"
    answers.save_paths.append(str(path))
    action(window, "report_pdf").trigger()
    qtbot.waitUntil(lambda: path.exists() and "report written" in window.status_text.text(), timeout=120_000)
    pages = _pdf_pages(path)
    n = len(pages)
    assert n >= 3
    for i, page in enumerate(pages, start=1):  # every page numbered
        assert f"page {i} of {n}" in page, i
    # images in page order (pdfimages -list: page, num, type, width, height, ..., x-ppi, y-ppi)
    listing = subprocess.run(["pdfimages", "-list", str(path)], capture_output=True, text=True, check=True).stdout
    images = [line.split() for line in listing.splitlines()[2:] if line.split()[2:3] == ["image"]]
    image_pages = [int(r[0]) for r in images]
    captions = ["Gain of", "The same boards, zoomed", "failing boards stacked on top", "Margin of the span",
                "Spread budget of"]
    for start in captions:  # each caption's first words on the page of a figure
        where = [i for i, page in enumerate(pages, start=1) if start in " ".join(page.split())]
        assert where and where[0] in image_pages, (start, where, image_pages)
    # figures are drawn at >= 8 pt for their smallest text: pixels / ppi in inches, 760 px figures
    for r in images:
        width_pt = int(r[3]) / float(r[12]) * 72.0
        assert MIN_FONT * width_pt / 760 >= 7.95, width_pt
    # words in the text layer: bounding-box heights (pdftotext -bbox, in pt) of at least 8 pt type
    bbox = subprocess.run(["pdftotext", "-bbox", str(path), "-"], capture_output=True, text=True,
                          check=True).stdout
    heights = [float(b) - float(a) for a, b in re.findall(r'yMin="([\d.]+)" xMax="[\d.]+" yMax="([\d.]+)"', bbox)]
    assert heights and min(heights) >= 8.0, min(heights)
    # no large blank gaps: on every page but the last, something is drawn in the lower third
    subprocess.run(["pdftoppm", "-r", "30", "-gray", "-png", str(path), str(tmp_path / "pg")], check=True)
    for png in sorted(tmp_path.glob("pg-*.png"))[:-1]:
        img = QImage(str(png))
        h = img.height()
        rows = [y for y in range(int(0.62 * h), int(0.9 * h))
                if any(img.pixelColor(x, y).lightness() < 200 for x in range(0, img.width(), 2))]
        assert rows, f"{png.name}: the lower third of the page is empty"
    no_error_shown(shown)


# --- SVG ----------------------------------------------------------------------------------------------
def _blue_rows(img: QImage) -> np.ndarray:
    """Per row: whether data colour (the figures' blue #0072B2, blue well above red) is drawn."""
    w, h = img.width(), img.height()

    def blue(c) -> bool:
        return c.blue() > 150 and c.red() < 80

    return np.array([any(blue(img.pixelColor(x, y)) for x in range(0, w, 3)) for y in range(h)])


def test_svg_export_holds_every_visible_plot_and_renders_alike(window, qtbot, answers, shown, tmp_path):
    # issue 10 #26: the SVG held only the gain plot, and some viewers drew empty axes
    path = tmp_path / "plots.svg"
    answers.save_paths.append(str(path))
    action(window, "export_svg").trigger()
    root = ET.parse(path).getroot()
    ns = "{http://www.w3.org/2000/svg}"
    titles = [t.text for t in root.iter(f"{ns}title")]
    assert any("gain spread" in t for t in titles)
    assert any("phase spread" in t for t in titles), titles
    if window.results.hist.isVisible():
        assert any("histogram of" in t for t in titles), titles
    assert not list(root.iter(f"{ns}svg"))[1:], "no nested <svg> (converters draw it differently)"
    renders = {}
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium:
        out = tmp_path / "chromium.png"
        w, h = root.attrib["width"], root.attrib["height"]
        subprocess.run([chromium, "--headless", "--no-sandbox", "--disable-gpu", f"--window-size={w},{h}",
                        f"--screenshot={out}", path.as_uri()], capture_output=True, timeout=120)
        if out.exists():
            renders["chromium"] = QImage(str(out))
    # ImageMagick's own convert (a stand-in of the same name may come first on PATH)
    convert = next((c for c in ("/usr/bin/convert", shutil.which("magick")) if c and Path(c).exists()), None)
    if convert:
        out = tmp_path / "convert.png"
        subprocess.run([convert, str(path), str(out)], capture_output=True, timeout=120)
        if out.exists():
            renders["convert"] = QImage(str(out))
    if not renders:
        pytest.skip("neither chromium nor ImageMagick is installed")
    for name, img in renders.items():  # each plot's data (blue) is drawn by every renderer
        data = _blue_rows(img)
        scale = img.height() / float(root.attrib["height"])
        tops = [int(m.group(1)) for g in root.findall(f"{ns}g")
                if (m := re.match(r"translate\(0 (\d+)\)", g.attrib.get("transform", "")))]
        assert len(tops) >= 2
        for top, end in zip(tops, tops[1:] + [int(float(root.attrib["height"]))]):
            assert data[int((top + 30) * scale): int(end * scale)].any(), (name, top)
    if len(renders) == 2:  # the two renderings agree on where data is drawn, row by row
        a, b = (_blue_rows(img.scaledToHeight(400)) for img in renders.values())
        k = min(a.size, b.size)
        assert (a[:k] == b[:k]).mean() > 0.9
    no_error_shown(shown)


def _section(doc: str, anchor: str) -> str:
    start = doc.index(f'<h2 id="{anchor}">')
    end = doc.find("<h2 ", start + 1)
    return doc[start:end if end > 0 else len(doc)]


def test_report_from_the_window_reuses_its_boards_and_matches_the_command_line(
        window, qtbot, answers, shown, tmp_path, monkeypatch):
    """Design > Export report (HTML) after the window has shown every board of the demo:
    no sampled board is evaluated again (the calls to the evaluation entry are counted),
    and the yield, failures, spread figure, budget and corners read as the command line's
    own report of the same design (``tolspread analyze --report``, a process of its own).
    The robustness table's other distribution shapes are other designs (reshaped grades),
    each evaluated once (issue 16 item 6)."""
    import sys

    import tolspread.evaluate as ev

    from .conftest import run_cli, wait_idle

    wait_idle(qtbot, window)
    calls = []
    original = ev.evaluate

    def counting(design, **kw):
        calls.append((kw.get("samples"), design))
        return original(design, **kw)

    for mod in list(sys.modules.values()):
        if getattr(mod, "__name__", "").startswith("tolspread") and getattr(mod, "evaluate", None) is original:
            monkeypatch.setattr(mod, "evaluate", counting)
    doc = export_report_html(window, qtbot, answers, tmp_path / "window.html")
    monkeypatch.undo()
    from tolspread.robustness import SHAPES
    from tolspread.temperature_settings import judged_temperatures

    shown_design = window.session.design
    assert [n for n, d in calls if d == shown_design] == []  # no board of the window's design again
    # one run per other shape; over the demo's operating range every shape ("as graded" too)
    # is judged over it: one run of its boards, then one per judged temperature but the
    # board temperature's own (25 degC), which is that run
    a = shown_design.analysis
    temps = [t for t in judged_temperatures(a) if (t, t) != (a.temp_low_c, a.temp_high_c)]
    assert len(calls) == (len(SHAPES) * (1 + len(temps)) if a.operating_range_c else len(SHAPES) - 1)
    no_error_shown(shown)
    cli_out = tmp_path / "cli.html"
    run = run_cli("analyze", "--report", cli_out)
    assert run.returncode == 0, run.stderr
    cli_doc = cli_out.read_text(encoding="utf-8")
    for anchor in ("spread", "yield", "failures", "budget", "corners"):
        assert _section(doc, anchor) == _section(cli_doc, anchor), anchor
