"""The circuit view (app/qt_circuit_view.py) on its own: Qt's SVG renderer draws the
stage's schematic, a mouse click on a part's symbol names that part and draws it in the
highlight colour, and a click between parts names none."""
from __future__ import annotations

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPoint, Qt  # noqa: E402
from PySide6.QtGui import QColor  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402

from tolspread import load_demo  # noqa: E402
from tolspread.app.qt_circuit_view import CircuitView  # noqa: E402
from tolspread.schematic import HIGHLIGHT  # noqa: E402


def coloured_pixels(widget, colour: str, tol: int = 40) -> int:
    """Pixels of the widget's rendering within ``tol`` of ``colour`` in each channel."""
    img = widget.grab().toImage()
    want = QColor(colour)
    n = 0
    for y in range(0, img.height(), 2):
        for x in range(0, img.width(), 2):
            c = img.pixelColor(x, y)
            if abs(c.red() - want.red()) < tol and abs(c.green() - want.green()) < tol and abs(c.blue() - want.blue()) < tol:
                n += 1
    return n


@pytest.fixture
def view(qtbot):
    v = CircuitView()
    qtbot.addWidget(v)
    v.resize(700, 420)
    v.show()
    qtbot.waitExposed(v)
    v.show_design(load_demo())
    return v


def test_click_on_a_part_names_it_and_highlights_it(view, qtbot):
    canvas = view.canvas
    assert view.stage_box.count() == 2 and "Sallen-Key" in view.title.text()
    dark = coloured_pixels(canvas, "#000000")
    assert dark > 200, "the schematic was not drawn"
    assert coloured_pixels(canvas, HIGHLIGHT) == 0
    centre = canvas.part_centre("R2").toPoint()
    with qtbot.waitSignal(view.part_clicked, timeout=2000) as sig:
        QTest.mouseClick(canvas, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, centre)
    assert sig.args == ["R2"]
    assert view.selected == "R2"
    qtbot.waitUntil(lambda: coloured_pixels(canvas, HIGHLIGHT) > 20, timeout=2000)


def test_click_between_parts_names_nothing(view, qtbot):
    got = []
    view.part_clicked.connect(got.append)
    QTest.mouseClick(view.canvas, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, QPoint(2, 2))
    qtbot.wait(50)
    assert got == []


def test_selecting_a_part_of_another_stage_shows_that_stage(view, qtbot):
    view.select_part("C4")  # the demo's second stage
    assert view.stage_index == 1
    assert "C4" in view.canvas.schematic.refs()
    qtbot.waitUntil(lambda: coloured_pixels(view.canvas, HIGHLIGHT) > 20, timeout=2000)
