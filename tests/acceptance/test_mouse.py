"""Drawing the mask with the mouse: real press, move and release events on the gain plot's
viewport, at pixels mapped from data coordinates (x is log10(f / Hz), y is dB) through
the plot's own ViewBox and scene, as a hand would place them.

Expected edges come from the pixels pressed and released, mapped back by the same
ViewBox; "no other span moved" compares every other span with the design before the drag.
"""
from __future__ import annotations

import math

import pytest
from PySide6.QtCore import QPoint, QPointF, Qt
from PySide6.QtTest import QTest

from tolspread.values import parse_value

from qt_wait import settle_plot

from .conftest import WAIT_MS, log_errors, wait_idle

pytestmark = pytest.mark.gui

MOVE_GAP_MS = 12  # pyqtgraph drops mouse moves closer than 10 ms apart (its rate limit)


def to_pixel(window, x: float, y: float) -> QPoint:
    """A gain-plot point (log10 f, dB) in the plot viewport's pixels."""
    scene = window.plots.mag.vb.mapViewToScene(QPointF(x, y))
    return window.plots.canvas.mapFromScene(scene)


def from_pixel(window, p: QPoint) -> tuple[float, float]:
    v = window.plots.mag.vb.mapSceneToView(window.plots.canvas.mapToScene(p))
    return v.x(), v.y()


def settle(qtbot, window) -> None:
    """Wait until the plot area stops moving (axes widen to their labels after a paint)."""
    settle_plot(qtbot, window.plots.mag.vb, MOVE_GAP_MS)


def drag(qtbot, window, start: tuple[float, float], end: tuple[float, float], steps: int = 10):
    """Left-button press at ``start``, moves like a hand's, release at ``end`` (view coords),
    as QTest's mouse events on the plot viewport."""
    vp = window.plots.canvas.viewport()
    settle(qtbot, window)
    a, b = to_pixel(window, *start), to_pixel(window, *end)
    left = Qt.MouseButton.LeftButton
    QTest.mouseMove(vp, a)
    qtbot.wait(MOVE_GAP_MS)
    QTest.mousePress(vp, left, Qt.KeyboardModifier.NoModifier, a)
    for i in range(1, steps + 1):
        qtbot.wait(MOVE_GAP_MS)
        t = i / steps
        QTest.mouseMove(vp, QPoint(round(a.x() + t * (b.x() - a.x())), round(a.y() + t * (b.y() - a.y()))))
    qtbot.wait(MOVE_GAP_MS)
    QTest.mouseRelease(vp, left, Qt.KeyboardModifier.NoModifier, b)
    return a, b


def table_row(window, i: int) -> dict[str, str]:
    t = window.span_table.table
    heads = [t.horizontalHeaderItem(j).text() for j in range(t.columnCount())]
    return {h: t.item(i, j).text() for j, h in enumerate(heads)}


def _frequency(text: str) -> float:
    return parse_value(text.replace("Hz", "").strip(), "frequency")


def _draw_and_check(window, qtbot, action_name: str, f_a: float, f_b: float, db_a: float, db_b: float):
    from .test_actions import act

    before = window.session.design
    n = len(before.mask)
    reference = window.plots.view.nominal_metrics.get("reference_db", 0.0)
    act(window, action_name).trigger()
    assert act(window, action_name).isChecked()
    pa, pb = drag(qtbot, window, (math.log10(f_a), db_a), (math.log10(f_b), db_b))
    qtbot.waitUntil(lambda: len(window.session.design.mask) == n + 1, timeout=WAIT_MS)
    after = window.session.design.mask
    # no other span moved (issue 10 #3)
    assert after[:n] == before.mask, [
        (b.name, (b.f1, b.f2, b.limit1), (a.f1, a.f2, a.limit1)) for a, b in zip(after, before.mask) if a != b]
    span = after[-1]
    (xa, ya), (xb, yb) = from_pixel(window, pa), from_pixel(window, pb)
    kind = "floor" if action_name == "draw_floor" else "ceiling"
    assert span.kind == kind and span.quantity == "gain"
    # the edges dragged: frequencies of the pressed and released pixels (4 significant
    # figures, what a person would type), the forbidden zone's inner edge as the limit
    assert span.f1 == pytest.approx(10 ** min(xa, xb), rel=1e-3)
    assert span.f2 == pytest.approx(10 ** max(xa, xb), rel=1e-3)
    inner = max(ya, yb) if kind == "floor" else min(ya, yb)
    assert span.limit1 + (reference if span.relative else 0.0) == pytest.approx(inner, abs=0.011)
    # the new span is in the span table with those edges
    wait_idle(qtbot, window)
    assert window.span_table.table.rowCount() == n + 1
    row = table_row(window, n)
    cells = list(row.values())
    assert _frequency(cells[3]) == pytest.approx(span.f1, rel=1e-4)
    assert _frequency(cells[4]) == pytest.approx(span.f2, rel=1e-4)
    assert float(cells[5].split()[0]) == pytest.approx(span.limit1, abs=1e-6)
    assert not act(window, action_name).isChecked(), "draw mode should end after one span"
    assert not log_errors()
    return span


def test_draw_mode_drag_far_from_spans_adds_one_span(window, qtbot, shown):
    """A ceiling drawn well below the demo's stopband ceiling (-37 dB from 6 kHz), and a
    floor drawn in the empty low-frequency corner: each adds exactly that span."""
    _draw_and_check(window, qtbot, "draw_ceiling", 20_000.0, 50_000.0, -55.0, -70.0)
    _draw_and_check(window, qtbot, "draw_floor", 20.0, 60.0, -20.0, -30.0)
    assert not shown.errors()


def test_draw_mode_drag_near_the_passband_draws_and_moves_nothing(window, qtbot):
    """The issue's own reproduction: a floor drag at about -1.5 dB from 200 Hz to 800 Hz,
    a few pixels from the passband floor and ceiling lines."""
    _draw_and_check(window, qtbot, "draw_floor", 200.0, 800.0, -1.5, -1.5 - 0.0)


def test_drag_a_span_line_outside_draw_mode_moves_only_that_span(window, qtbot, shown):
    """Outside draw mode a drag on a span's limit line moves that span (both ends by the
    same amount); every other span stays."""
    before = window.session.design.mask
    i = next(k for k, s in enumerate(before) if s.name == "stopband ceiling")
    span = before[i]
    reference = window.plots.view.nominal_metrics.get("reference_db", 0.0)
    y = span.limit1 + (reference if span.relative else 0.0)
    x_mid = 0.5 * (math.log10(span.f1) + math.log10(span.f2))
    pa, pb = drag(qtbot, window, (x_mid, y), (x_mid, y - 6.0))
    qtbot.waitUntil(lambda: window.session.design.mask != before, timeout=WAIT_MS)
    after = window.session.design.mask
    assert [s for k, s in enumerate(after) if k != i] == [s for k, s in enumerate(before) if k != i]
    moved = after[i]
    dy = from_pixel(window, pb)[1] - from_pixel(window, pa)[1]
    assert moved.limit1 - span.limit1 == pytest.approx(dy, abs=0.02)
    assert moved.f1 == pytest.approx(span.f1, rel=2e-3) and moved.f2 == pytest.approx(span.f2, rel=2e-3)
    assert window.session.undo_stack.count() == 1, "one drag, one undoable edit"
    wait_idle(qtbot, window)
    assert not shown.errors() and not log_errors()


def _type_into_cell(qtbot, window, row: int, col: int, text: str) -> None:
    """Double-click the cell, select its text, type, press Enter (as a person edits it)."""
    from PySide6.QtWidgets import QLineEdit

    t = window.span_table.table
    t.scrollTo(t.model().index(row, col))
    rect = t.visualRect(t.model().index(row, col))
    # a double-click is a click and then a second press (QTest.mouseDClick sends only the latter)
    QTest.mouseClick(t.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    QTest.mouseDClick(t.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
    qtbot.waitUntil(lambda: t.viewport().findChild(QLineEdit) is not None
                    and t.viewport().findChild(QLineEdit).isVisible(), timeout=WAIT_MS)
    editor = t.viewport().findChild(QLineEdit)
    editor.selectAll()
    qtbot.keyClicks(editor, text)
    qtbot.keyClick(editor, Qt.Key.Key_Return)


def test_span_table_typing_edits_the_span_and_refuses_nonsense(window, qtbot, shown):
    """Typing a good f2 edits the span (and the yield follows); typing an f1 above f2 keeps
    the last good value, marks the cell typed and names that field (issue 10 #11)."""
    from .test_actions import library_yield
    from .conftest import yield_shown

    before = window.session.design
    i = next(k for k, s in enumerate(before.mask) if s.name == "corner floor")
    f2_col, f1_col = 4, 3
    _type_into_cell(qtbot, window, i, f2_col, "1.8k")
    qtbot.waitUntil(lambda: window.session.design.mask[i].f2 == pytest.approx(1800.0), timeout=WAIT_MS)
    wait_idle(qtbot, window)
    assert yield_shown(window) == pytest.approx(library_yield(window.session.design), abs=5e-5)
    edited = window.session.design
    _type_into_cell(qtbot, window, i, f1_col, "5k")
    qtbot.wait(100)
    assert window.session.design == edited, "a refused entry must not change the design"
    cell = window.span_table.table.item(i, f1_col)
    assert _frequency(cell.text()) == pytest.approx(edited.mask[i].f1), "the last good value is shown again"
    assert "f1" in cell.toolTip() and "f2" not in cell.toolTip().split("f1")[0], cell.toolTip()
    assert "f1" in window.status_text.text()
    assert not shown.errors() and not log_errors()
