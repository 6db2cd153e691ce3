"""A report that can be signed, from the window (issue 16 item 6): Design > Report details…
sets the design's name, revision and author as one undoable edit (typed, OK clicked), and
Design > Export report (PDF)… prints them in the title block, numbers every page and ends
with the caution and the sign-off block (read back with poppler's pdftotext, pages drawn
with pdftoppm)."""
from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QDialogButtonBox

from .conftest import log_errors

pytestmark = [pytest.mark.gui,
              pytest.mark.skipif(not (shutil.which("pdftotext") and shutil.which("pdftoppm")),
                                 reason="needs poppler-utils")]


def action(window, name: str):
    hits = [a for a in window.findChildren(type(window.act_undo)) if a.objectName() == name]
    assert len(hits) == 1, name
    return hits[0]


def pdf_pages(path: Path) -> list[str]:
    text = subprocess.run(["pdftotext", "-layout", str(path), "-"], capture_output=True, text=True,
                          check=True).stdout
    for lig, letters in (("\ufb00", "ff"), ("\ufb01", "fi"), ("\ufb02", "fl")):  # the font's ligatures
        text = text.replace(lig, letters)
    return [" ".join(p.split()) for p in text.split("\f") if p.strip()]


def fill_report_details(window, qtbot, **fields: str):
    """Design > Report details…, each field cleared and typed, OK clicked."""
    action(window, "report_details").trigger()
    dialog = window.report_details_dialog
    qtbot.waitUntil(dialog.isVisible)
    for key, text in fields.items():
        edit = dialog.edits[key]
        edit.selectAll()
        QTest.keyClick(edit, Qt.Key.Key_Delete)
        QTest.keyClicks(edit, text)
    ok = dialog.findChild(QDialogButtonBox).button(QDialogButtonBox.StandardButton.Ok)
    QTest.mouseClick(ok, Qt.MouseButton.LeftButton)
    return dialog


def test_report_details_are_one_undoable_edit(window, qtbot):
    before = window.session.design
    dialog = fill_report_details(window, qtbot, revision="B", author="A. Person")
    assert not dialog.isVisible()
    d = window.session.design
    assert (d.revision, d.author, d.name) == ("B", "A. Person", before.name)
    action(window, "undo").trigger()
    assert (window.session.design.revision, window.session.design.author) == ("", "")
    action(window, "redo").trigger()
    assert window.session.design.revision == "B"
    assert window.act_undo.text().endswith("Report details")
    assert not log_errors(), log_errors()


def test_pdf_report_has_title_block_numbered_pages_caution_and_sign_off(window, qtbot, answers, tmp_path):
    fill_report_details(window, qtbot, revision="B", author="A. Person")
    path = tmp_path / "report.pdf"
    answers.save_paths.append(str(path))
    action(window, "report_pdf").trigger()
    qtbot.waitUntil(lambda: path.exists() and "report written" in window.status_text.text(), timeout=180_000)
    pages = pdf_pages(path)
    n = len(pages)
    assert n >= 3
    for i, page in enumerate(pages, start=1):  # every page numbered, with the revision in its footer
        assert f"page {i} of {n}" in page and "revision B page" in page, i
    first = pages[0]
    assert "Revision" in first and "Author" in first and "A. Person" in first and "tolspread" in first
    assert window.session.design.name in first
    last = pages[-1]
    assert "Sign-off" in last and all(role in last for role in ("Prepared by", "Reviewed by", "Approved by"))
    assert "Name Signature Date" in last
    whole = " ".join(pages)
    assert whole.rindex("Caution.") < whole.rindex("Prepared by")  # the signers sign under the caution
    assert "Robustness to the shape of the distributions" in whole and "High-yield method" in whole
    # every page drawn (pdftoppm): something printed on each
    subprocess.run(["pdftoppm", "-png", "-r", "40", str(path), str(tmp_path / "page")], check=True)
    from PySide6.QtGui import QImage

    images = sorted(tmp_path.glob("page*.png"))
    assert len(images) == n
    for f in images:
        img = QImage(str(f))
        dark = sum(1 for y in range(0, img.height(), 4) for x in range(0, img.width(), 4)
                   if QImage.pixelColor(img, x, y).lightness() < 128)
        assert dark > 20, f
    assert not log_errors(), log_errors()


def test_html_report_after_find_cheapest_grades_compares_the_sets(window, qtbot, answers, tmp_path):
    from tolspread.grade_sets import compare_sets

    from .conftest import export_report_html
    from .test_exports_window import run_recommendation

    design = window.session.design
    dlg = run_recommendation(window, qtbot)
    rec = dlg.recommendation
    html = export_report_html(window, qtbot, answers, tmp_path / "report.html", timeout=180_000)
    section = html[html.index('<h2 id="comparison">'):]
    section = section[:section.index("</table>")]
    rows = [[" ".join(re.sub(r"<[^>]+>", "", c).split()) for c in re.findall(r"<td[^>]*>(.*?)</td>", r, re.S)]
            for r in re.findall(r"<tr>(.*?)</tr>", section, re.S)]
    rows = [r for r in rows if r]
    # the sets the dialog shows (current, recommended, and no class II when it warned), not judged again
    shown_sets = dlg.extras.sets
    assert [r[0] for r in rows] == [r.label for r in shown_sets] and rows[1][0] == "recommended"
    # outside check: the sets judged here on the search's boards (its seed and count)
    found = compare_sets(design, [(r.label, r.grades) for r in shown_sets], samples=rec.chosen.samples,
                         seed=rec.seed, confidence=rec.confidence)
    for row, r in zip(rows, found):
        assert row[3] == f"{100 * r.yield_.estimate:.2f} %" and row[5] == f"{100 * r.lower:.2f} %", row
        assert row[6] == ("meets" if r.lower >= rec.target_yield else "misses"), row
    dlg.reject()
    assert not log_errors(), log_errors()
