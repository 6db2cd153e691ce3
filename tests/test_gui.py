"""The window, driven the way a person drives it (offscreen Qt, pytest-qt).

Every readout is checked against the library: the yield against
``tolspread.temperature.judged_boards`` (over the operating range; a preview:
``tolspread.evaluate.evaluate``) + ``tolspread.stats.yield_estimate`` on the design the window
should now hold, curves and cursor values against ``tolspread.liveview.compute_view``.
"""
from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QEvent, QPoint, QPointF, Qt  # noqa: E402
from PySide6.QtGui import QImage, QMouseEvent, QPainter  # noqa: E402
from PySide6.QtSvg import QSvgRenderer  # noqa: E402
from PySide6.QtWidgets import QApplication  # noqa: E402

from tolspread.app.qt_main import make_window, restore_recovery  # noqa: E402
from tolspread.app.qt_parts import pct_to_slider, slider_to_pct  # noqa: E402
from tolspread.designfile import demo_text, load, load_demo  # noqa: E402
from tolspread.evaluate import evaluate  # noqa: E402
from tolspread.liveview import ViewRequest, compute_view  # noqa: E402
from tolspread.stats import yield_estimate  # noqa: E402
from tolspread.temperature import judged_boards  # noqa: E402
from qt_wait import settle_plot  # noqa: E402

pytestmark = pytest.mark.gui

WAIT_MS = 15_000
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"
MOVE_GAP_MS = 12  # pyqtgraph drops move events closer than 10 ms apart (its mouse rate limit)


# --- helpers -------------------------------------------------------------------------------
def library_yield(design, grades=None, samples=None):
    """The yield the library computes for ``design`` (optionally with what-if grades, and
    on the first ``samples`` boards only: a drag's preview). A full evaluation judges the
    boards as the analysis does, over the operating range (the demo's -40..85 degC,
    tests/test_demo_over_range.py checks that path independently); a preview judges them at
    the board temperature only, as the window's preview does."""
    a = design.analysis
    if samples is not None:
        ens = evaluate(design, grades=grades, samples=samples)
    else:
        ens = judged_boards(design, grades=grades)
    return yield_estimate(ens.passed, None, a.confidence, a.interval)


def yield_text(estimate: float) -> str:
    return f"yield {100 * estimate:.2f} %"


def shown_yield(window) -> float:
    """The yield percentage the results panel shows, as a fraction."""
    m = re.search(r"yield (\d+\.\d\d) %", window.results.yield_label.text())
    assert m, window.results.yield_label.text()
    return float(m.group(1)) / 100


def _discard(w) -> None:
    w.session.undo_stack.setClean()  # closing must not ask about unsaved changes (a modal box)


def add_window(qtbot, w):
    """Hand ``w`` to qtbot, which closes it at teardown (even after a failure) without asking."""
    qtbot.addWidget(w, before_close_func=_discard)
    return w


def close_window(w) -> None:
    _discard(w)
    w.close()
    w.session.shutdown()


def _mouse(widget, kind, pos: QPoint, button, buttons) -> None:
    local = QPointF(pos)
    glob = QPointF(widget.mapToGlobal(pos))
    ev = QMouseEvent(kind, local, glob, button, buttons, Qt.KeyboardModifier.NoModifier)
    QApplication.sendEvent(widget, ev)


def view_to_viewport(window, x: float, y: float) -> QPoint:
    """A point of the magnitude plot (log10 f, dB) in the canvas viewport's pixels."""
    scene = window.plots.vb_mag.mapViewToScene(QPointF(x, y))
    return window.plots.canvas.mapFromScene(scene)


def viewport_to_view(window, p: QPoint) -> tuple[float, float]:
    v = window.plots.vb_mag.mapSceneToView(window.plots.canvas.mapToScene(p))
    return v.x(), v.y()


def settle(qtbot, window) -> None:
    """Let pending paints and layouts run until the plot area stops moving."""
    settle_plot(qtbot, window.plots.vb_mag, MOVE_GAP_MS, tries=50)


def mouse_drag(qtbot, window, start: tuple[float, float], end: tuple[float, float],
               steps: int = 8) -> tuple[QPoint, QPoint]:
    """A left-button drag on the plots' viewport with real press / move / release events,
    spaced like a hand's (pyqtgraph ignores moves that come faster than 100 per second)."""
    vp = window.plots.canvas.viewport()
    settle(qtbot, window)
    a = view_to_viewport(window, *start)
    b = view_to_viewport(window, *end)
    left, none = Qt.MouseButton.LeftButton, Qt.MouseButton.NoButton
    _mouse(vp, QEvent.Type.MouseMove, a, none, none)
    qtbot.wait(MOVE_GAP_MS)
    _mouse(vp, QEvent.Type.MouseButtonPress, a, left, left)
    for i in range(1, steps + 1):
        qtbot.wait(MOVE_GAP_MS)
        t = i / steps
        p = QPoint(round(a.x() + t * (b.x() - a.x())), round(a.y() + t * (b.y() - a.y())))
        _mouse(vp, QEvent.Type.MouseMove, p, none, left)
    _mouse(vp, QEvent.Type.MouseButtonRelease, b, left, none)
    return a, b


def mouse_click(qtbot, window, at: tuple[float, float]) -> None:
    vp = window.plots.canvas.viewport()
    settle(qtbot, window)
    p = view_to_viewport(window, *at)
    left, none = Qt.MouseButton.LeftButton, Qt.MouseButton.NoButton
    _mouse(vp, QEvent.Type.MouseMove, p, none, none)
    _mouse(vp, QEvent.Type.MouseButtonPress, p, left, left)
    _mouse(vp, QEvent.Type.MouseButtonRelease, p, left, none)


# --- fixtures ------------------------------------------------------------------------------
def wait_first_view(qtbot, w) -> None:
    """Wait for the window's own first evaluation (it computes on start; issue 10 #1: a
    fixture calling evaluate_now() here hid that it did not)."""
    qtbot.waitUntil(lambda: w.session.last_view is not None and not w.session.busy, timeout=WAIT_MS)


def shown_window(qtbot, path: str | None):
    """The window on ``path`` (None: the demo), 1500 x 900 px, shown with its first view."""
    w = add_window(qtbot, make_window(path))
    w.resize(1500, 900)
    w.show()
    qtbot.waitExposed(w)
    wait_first_view(qtbot, w)
    return w


@pytest.fixture
def window(qtbot):
    w = shown_window(qtbot, None)
    yield w
    close_window(w)


def gain_design_text() -> str:
    """The demo with its first stage given a gain of 1.1 (RF1/RG1): a passband reference of
    +0.83 dB, so a span's relative limit differs from the absolute level drawn."""
    d = json.loads(demo_text())
    d["parts"] += [{"ref": "RF1", "value": "1k", "grade": "R-thick-1"},
                   {"ref": "RG1", "value": "10k", "grade": "R-thick-1"}]
    stage = d["stages"][0]
    stage["options"] = {"gain": "resistors"}
    stage["parts"].update({"RF": "RF1", "RG": "RG1"})
    return json.dumps(d, indent=1)


@pytest.fixture
def gain_window(qtbot, tmp_path):
    path = tmp_path / "gain.json"
    path.write_text(gain_design_text(), encoding="utf-8")
    w = shown_window(qtbot, str(path))
    yield w
    close_window(w)


@pytest.fixture(scope="module")
def demo_view():
    """The library's own view of the demo design (phase as the second quantity)."""
    return compute_view(ViewRequest(0, load_demo()))


# --- 1. tolerance slider -------------------------------------------------------------------
def test_demo_window_shows_the_library_yield(window, demo_view):
    assert window.session.last_view is not None
    assert window.results.yield_label.text().count(yield_text(demo_view.yield_.estimate)) == 1
    assert shown_yield(window) == pytest.approx(library_yield(load_demo()).estimate, abs=5e-5)


def test_slider_drag_previews_then_release_makes_one_undoable_edit(window, qtbot):
    s = window.session
    before = s.design
    i = before.part_index("C2")
    assert before.parts[i].tolerance_pct is None
    row = window.parts.rows["C2"]
    pos = pct_to_slider(1.5)
    pct = slider_to_pct(pos)
    assert pct != pytest.approx(before.part_grades()[i].tolerance_pct)

    # while the handle is held: a what-if preview on the first boards (the same boards the
    # full run starts with); the design is not edited
    from tolspread.app.qt_session import PREVIEW_BOARDS

    row.slider.setSliderDown(True)
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as preview:
        row.slider.setValue(pos)
    assert s.design is before and s.undo_stack.count() == 0
    assert preview.args[0].preview and preview.args[0].samples == PREVIEW_BOARDS
    tried = before.with_part("C2", tolerance_pct=pct).part_grades()  # the grades with C2 at the slider's value
    expected_preview = library_yield(before, tried, samples=PREVIEW_BOARDS)
    assert preview.args[0].yield_.estimate == pytest.approx(expected_preview.estimate, abs=1e-12)
    assert yield_text(expected_preview.estimate) in window.results.yield_label.text()
    assert row.readout.text().startswith(f"±{pct:.3g} %")

    # release: one edit, the yield of the edited design
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as done:
        row.slider.setSliderDown(False)  # emits sliderReleased
    assert s.undo_stack.count() == 1
    assert s.design.parts[i].tolerance_pct == pytest.approx(pct)
    assert all(p == q for k, (p, q) in enumerate(zip(s.design.parts, before.parts)) if k != i)
    expected = library_yield(before.with_part("C2", tolerance_pct=pct))
    assert done.args[0].generation == s.last_view.generation
    assert yield_text(expected.estimate) in window.results.yield_label.text()
    assert expected.estimate != pytest.approx(library_yield(before).estimate, abs=1e-3), \
        "the chosen tolerance must move the yield, else this test proves nothing"
    assert row.readout.text().endswith("*")

    # undo puts the grade's tolerance back, and its yield
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        window.act_undo.trigger()
    assert s.design == before
    assert yield_text(library_yield(before).estimate) in window.results.yield_label.text()
    assert row.slider.value() == pct_to_slider(before.part_grades()[i].tolerance_pct)


def test_slider_keyboard_step_is_one_edit(window, qtbot):
    s = window.session
    before = s.design
    row = window.parts.rows["C2"]
    row.slider.setFocus()
    start = row.slider.value()
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        qtbot.keyClick(row.slider, Qt.Key.Key_PageDown)
    assert row.slider.value() < start
    pct = slider_to_pct(row.slider.value())
    assert s.undo_stack.count() == 1
    assert s.design.parts[before.part_index("C2")].tolerance_pct == pytest.approx(pct)
    assert shown_yield(window) == pytest.approx(
        library_yield(before.with_part("C2", tolerance_pct=pct)).estimate, abs=5e-5)


def _slider_handle(slider) -> QPoint:
    """The centre of ``slider``'s handle, in its own pixels (Qt's style says where it is)."""
    from PySide6.QtWidgets import QStyle, QStyleOptionSlider

    opt = QStyleOptionSlider()
    slider.initStyleOption(opt)
    return slider.style().subControlRect(QStyle.ComplexControl.CC_Slider, opt,
                                         QStyle.SubControl.SC_SliderHandle, slider).center()


def test_mouse_drag_of_a_tolerance_slider_previews_then_makes_one_edit(window, qtbot):
    """Issue 12 #5: the handle dragged with real press / move / release events. While it is
    held, the session (not the window) holds the tolerance tried and the plots show the
    first boards of the design with that tolerance; the release makes one undoable edit of
    exactly that design. The expected yields come from the library's own evaluate on the
    design built by hand (Design.with_part), not through the session."""
    from tolspread.app.qt_session import PREVIEW_BOARDS
    from PySide6.QtTest import QTest

    s = window.session
    before = s.design
    i = before.part_index("C2")
    slider = window.parts.rows["C2"].slider
    assert not hasattr(window, "_what_if"), "the window keeps no what-if state of its own"
    assert dict(s.what_if) == {}
    handle = _slider_handle(slider)
    left = Qt.MouseButton.LeftButton
    QTest.mousePress(slider, left, Qt.KeyboardModifier.NoModifier, handle)
    assert slider.isSliderDown()
    previews = []
    for dx in (-30, -60):  # two steps of the hand towards tighter tolerances
        with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as shown:
            QTest.mouseMove(slider, QPoint(handle.x() + dx, handle.y()))
        pct = slider_to_pct(slider.value())
        previews.append(pct)
        view = shown.args[0]
        assert dict(s.what_if) == {"C2": pct}
        assert s.design is before and s.undo_stack.count() == 0, "a held slider edits nothing"
        assert view.preview and view.samples == PREVIEW_BOARDS
        tried = before.with_part("C2", tolerance_pct=pct)
        expected = library_yield(tried, samples=PREVIEW_BOARDS)
        assert view.yield_.estimate == pytest.approx(expected.estimate, abs=1e-12)
        assert yield_text(expected.estimate) in window.results.yield_label.text()
    assert previews[1] < previews[0] < before.part_grades()[i].tolerance_pct, previews

    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as done:
        QTest.mouseRelease(slider, left, Qt.KeyboardModifier.NoModifier,
                           QPoint(handle.x() - 60, handle.y()))
    assert not slider.isSliderDown()
    assert dict(s.what_if) == {}
    assert s.undo_stack.count() == 1, "the whole drag is one edit"
    assert s.design == before.with_part("C2", tolerance_pct=previews[-1])
    assert not done.args[0].preview and done.args[0].samples == before.analysis.samples
    assert shown_yield(window) == pytest.approx(
        library_yield(before.with_part("C2", tolerance_pct=previews[-1])).estimate, abs=5e-5)
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        window.act_undo.trigger()
    assert s.design == before and dict(s.what_if) == {}


def test_a_refused_tolerance_release_ends_the_preview(window, qtbot):
    """A release the loader's rules refuse (a tolerance of 100 % or more: design file rule
    parts[i].tolerance_pct) leaves the design as it was and shows every board of it again;
    before issue 12 #5 the window forgot its what-if but the session kept showing it."""
    s = window.session
    before = s.design
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as shown:
        window.parts.tolerance_dragging.emit("C2", 12.0)  # what the held slider sends
    assert shown.args[0].preview and dict(s.what_if) == {"C2": 12.0}
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as done:
        window.parts.tolerance_released.emit("C2", 150.0)
    assert s.design is before and s.undo_stack.count() == 0 and dict(s.what_if) == {}
    assert not done.args[0].preview
    assert shown_yield(window) == pytest.approx(library_yield(before).estimate, abs=5e-5)
    assert "tolerance_pct" in window.status_text.text() and "not applied" in window.status_text.text()
    assert window.parts.rows["C2"].slider.value() == pct_to_slider(before.part_grades()[
        before.part_index("C2")].tolerance_pct)


# --- 2. drawing a span with the mouse ------------------------------------------------------
def test_mouse_drag_adds_a_ceiling_span_then_delete_undo_redo(gain_window, qtbot):
    window = gain_window
    s = window.session
    before = s.design
    n = len(before.mask)
    reference = compute_view(ViewRequest(0, before, budget=False)).nominal_metrics["reference_db"]
    assert reference == pytest.approx(20 * math.log10(1.1), abs=0.01)
    f_a, f_b = 3000.0, 5000.0
    top_db, low_db = -4.0, -13.0  # the painted forbidden zone; a ceiling's limit is its lower edge

    window.act_ceiling.trigger()
    assert window.plots.vb_mag.draw_kind == "ceiling"
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        pa, pb = mouse_drag(qtbot, window, (math.log10(f_a), top_db), (math.log10(f_b), low_db))
    assert len(s.design.mask) == n + 1, "the drag did not add a span"
    span = s.design.mask[-1]
    assert span.kind == "ceiling" and span.quantity == "gain" and span.relative
    assert span.f1 == pytest.approx(f_a, rel=0.03)
    assert span.f2 == pytest.approx(f_b, rel=0.03)
    assert span.limit1 == pytest.approx(low_db - reference, abs=0.5)
    assert span.limit2 is None
    # exactly where the pixels were pressed and released
    (xa, ya), (xb, yb) = viewport_to_view(window, pa), viewport_to_view(window, pb)
    assert span.limit1 == pytest.approx(round(min(ya, yb) - reference, 2), abs=0.011)
    assert span.f1 == pytest.approx(10 ** min(xa, xb), rel=1e-3)
    assert not window.act_ceiling.isChecked() and window.plots.vb_mag.draw_kind is None

    expected = library_yield(s.design)
    assert s.last_view.yield_.estimate == pytest.approx(expected.estimate, abs=1e-12)
    assert yield_text(expected.estimate) in window.results.yield_label.text()
    assert window.results.table.rowCount() == n + 1
    assert len(window.plots.spans) == n + 1

    # select it with a click on its limit line, then Delete
    window.plots.select(-1)
    mid = (0.5 * (math.log10(span.f1) + math.log10(span.f2)), span.limit1 + reference)
    mouse_click(qtbot, window, mid)
    assert window.plots.selected == n, "a click on the limit line did not select the span"
    assert window.span_table.selected() == n
    window.activateWindow()
    window.plots.canvas.setFocus()
    qtbot.waitUntil(lambda: window.plots.canvas.hasFocus(), timeout=2000)
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        qtbot.keyClick(window.plots.canvas, Qt.Key.Key_Delete)
    assert s.design.mask == before.mask
    assert len(window.plots.spans) == n
    assert shown_yield(window) == pytest.approx(library_yield(before).estimate, abs=5e-5)

    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        window.act_undo.trigger()
    assert s.design.mask == before.mask + (span,)
    assert len(window.plots.spans) == n + 1
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        window.act_redo.trigger()
    assert s.design.mask == before.mask


def test_drag_without_draw_mode_pans_and_adds_no_span(window, qtbot):
    s = window.session
    (x0, x1), _ = window.plots.vb_mag.viewRange()
    mouse_drag(qtbot, window, (math.log10(3000.0), -4.0), (math.log10(5000.0), -13.0))
    (x0b, x1b), _ = window.plots.vb_mag.viewRange()
    assert x0b < x0 - 0.05, "the drag events did not reach the plot (it should have panned)"
    assert x1b - x0b == pytest.approx(x1 - x0)
    assert s.design.mask == load_demo().mask
    assert s.undo_stack.count() == 0


# --- 3. value fields -----------------------------------------------------------------------
def test_invalid_value_is_marked_and_keeps_the_design(window, qtbot):
    s = window.session
    before = s.design
    row = window.parts.rows["R1"]
    row.value.setFocus()
    row.value.selectAll()
    qtbot.keyClicks(row.value, "4x7")
    qtbot.keyClick(row.value, Qt.Key.Key_Return)
    assert row.problem.isVisible()
    assert "4x7" in row.problem.text()
    assert before.parts[0].value_text in row.problem.text()  # "still using 2k67"
    assert row.value.styleSheet() != ""
    assert s.design is before and s.undo_stack.count() == 0
    assert "R1" in window.status_text.text()

    row.value.selectAll()
    qtbot.keyClicks(row.value, "3k3")
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        qtbot.keyClick(row.value, Qt.Key.Key_Return)
    assert not row.problem.isVisible()
    p = s.design.parts[s.design.part_index("R1")]
    assert p.value == pytest.approx(3300.0) and p.value_text == "3k3"
    assert s.undo_stack.count() == 1
    assert shown_yield(window) == pytest.approx(library_yield(s.design).estimate, abs=5e-5)


# --- 4. undo, redo, title ------------------------------------------------------------------
def test_grade_change_undo_redo_and_title(window, qtbot):
    s = window.session
    before = s.design
    assert not window.windowTitle().startswith("*")
    combo = window.parts.rows["C1"].grade
    idx = combo.findData("C-C0G-1")
    assert idx >= 0
    combo.setCurrentIndex(idx)
    combo.activated.emit(idx)
    after = s.design
    assert after.parts[after.part_index("C1")].grade == "C-C0G-1"
    assert window.windowTitle().startswith("* ")
    assert window.act_undo.isEnabled() and not window.act_redo.isEnabled()

    window.act_undo.trigger()
    assert s.design == before
    assert not window.windowTitle().startswith("*")
    assert combo.currentData() == "C-C0G-5"

    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS):
        window.act_redo.trigger()
    assert s.design == after
    assert window.windowTitle().startswith("* ")
    assert combo.currentData() == "C-C0G-1"
    assert shown_yield(window) == pytest.approx(library_yield(after).estimate, abs=5e-5)


# --- 5. save and reopen --------------------------------------------------------------------
def test_save_reopen_and_backup(window, qtbot, tmp_path):
    s = window.session
    path = tmp_path / "d.json"
    d1 = s.design.with_part("C1", grade="C-C0G-2")
    s.apply(d1, "grade")
    assert window._save_to(path)
    assert path.exists() and not Path(str(path) + ".bak").exists()
    assert not s.dirty and "d.json" in window.windowTitle() and not window.windowTitle().startswith("*")
    assert load(path) == d1
    first_text = path.read_text(encoding="utf-8")

    other = add_window(qtbot, make_window(str(path)))
    try:
        assert other.session.design == d1
        assert other.session.path == path
    finally:
        close_window(other)

    d2 = d1.with_part("R1", value=3300.0, text="3k3")
    s.apply(d2, "value")
    assert window._save_to(path)
    bak = Path(str(path) + ".bak")
    assert bak.read_text(encoding="utf-8") == first_text
    assert load(bak) == d1 and load(path) == d2

    s.apply(load_demo(), "back to the demo")
    s.open(path)
    assert s.design == d2 and not s.dirty and s.undo_stack.count() == 0


# --- 6. screenshot -------------------------------------------------------------------------
def test_screenshot_command_writes_a_png(tmp_path):
    shot = tmp_path / "shot.png"
    env = dict(os.environ, QT_QPA_PLATFORM="offscreen", TOLSPREAD_CONFIG_DIR=str(tmp_path / "cfg"))
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "--screenshot", str(shot)], env=env,
                          capture_output=True, text=True, timeout=120, cwd=Path(__file__).parents[1])
    assert proc.returncode == 0, proc.stderr
    data = shot.read_bytes()
    assert data.startswith(PNG_SIGNATURE)
    assert len(data) > 20_000
    img = QImage(str(shot))
    assert not img.isNull() and img.width() > 800 and img.height() > 500
    colours = {img.pixel(x, y) for y in range(0, img.height(), 9) for x in range(0, img.width(), 9)}
    assert len(colours) > 20, "the screenshot is (nearly) blank"


# --- 7. exports ----------------------------------------------------------------------------
def test_export_png(window, tmp_path):
    png = tmp_path / "plots.png"
    assert window.exports.plots("png", str(png)) == png
    assert png.read_bytes().startswith(PNG_SIGNATURE)
    img = QImage(str(png))
    assert img.width() >= 1200
    canvas = window.plots.canvas
    assert img.width() / img.height() == pytest.approx(canvas.width() / canvas.height(), rel=0.05)
    assert str(png) in window.status_text.text()


def test_export_svg(window, tmp_path):
    # The SVG is the gain plot with its bands and mask, written by the report's SVG writer
    # over the range the plot shows; it must be well-formed (xml.etree) and render (QtSvg).
    import xml.etree.ElementTree as ET

    svg = tmp_path / "plots.svg"
    assert window.exports.plots("svg", str(svg)) == svg
    text = svg.read_text(encoding="utf-8")
    root = ET.fromstring(text)
    assert root.tag.endswith("svg")
    r = QSvgRenderer(str(svg))
    assert r.isValid()
    box = r.viewBoxF()
    picture = QImage(int(box.width()), int(box.height()), QImage.Format.Format_ARGB32)
    picture.fill(0xFFFFFFFF)
    p = QPainter(picture)
    r.render(p)
    p.end()
    h, w = picture.height(), picture.width()
    inked = sum(1 for y in range(0, h, 3) for x in range(0, w, 3) if picture.pixel(x, y) != 0xFFFFFFFF)
    assert inked > 0.05 * (h // 3) * (w // 3)
    # the mask is drawn: the demo has floor and ceiling spans, each kind in the legend
    assert "floor span" in text and "ceiling span" in text and "nominal" in text


def test_export_csv_matches_the_library(window, tmp_path):
    import csv

    path = tmp_path / "boards.csv"
    assert window.exports.board_metrics(str(path)) == path
    with path.open(newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    design = window.session.design
    assert len(rows) == design.analysis.samples + 1
    header = rows[0]
    refs = [p.ref for p in design.parts]
    assert header[0] == "board"
    assert header[1:1 + len(refs)] == [f"{r} (SI units)" for r in refs]
    assert header[-1] == "passes mask"
    ens = judged_boards(design)  # the boards judged as the yield shown (the demo: over its range)
    values = np.array([[float(x) for x in r[1:1 + len(refs)]] for r in rows[1:]])
    np.testing.assert_allclose(values, ens.values, rtol=1e-8)
    passes = np.array([int(r[-1]) for r in rows[1:]], dtype=bool)
    assert passes.sum() == library_yield(design).passed
    np.testing.assert_array_equal(passes, ens.passed)


# --- 8. cursor readout ---------------------------------------------------------------------
@pytest.mark.parametrize("f_hz", [1000.0, 5000.0, 2345.0])
def test_cursor_readout_shows_the_library_gain(window, demo_view, f_hz):
    from tolspread.values import format_value

    f = demo_view.freqs_hz
    i = int(np.argmin(np.abs(np.log10(f) - math.log10(f_hz))))  # nearest grid point
    text = window.plots.readout_text(f_hz)
    assert text.startswith(f"{format_value(f[i], 'Hz', 4)}:"), text
    assert f"nominal {demo_view.nominal_gain_db[i]:.2f} dB" in text, text
    b = demo_view.gain_bands
    assert f"all boards {b.low[i]:.2f} dB to {b.high[i]:.2f} dB" in text


def test_mouse_move_updates_the_readout(window, demo_view, qtbot):
    settle(qtbot, window)
    p = view_to_viewport(window, math.log10(5000.0), -20.0)
    vp = window.plots.canvas.viewport()
    _mouse(vp, QEvent.Type.MouseMove, p, Qt.MouseButton.NoButton, Qt.MouseButton.NoButton)
    x, _y = viewport_to_view(window, p)
    f = demo_view.freqs_hz
    i = int(np.argmin(np.abs(np.log10(f) - x)))
    assert f"nominal {demo_view.nominal_gain_db[i]:.2f} dB" in window.plots.readout.text()


# --- 9. phase / delay ----------------------------------------------------------------------
def test_delay_switch(window, qtbot):
    s = window.session
    assert window.plots.second.getAxis("left").labelText == "phase (deg)"
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as blocker:
        window.act_delay.trigger()
    view = blocker.args[0]
    assert view.second == "delay" and s.second == "delay"
    assert window.plots.second.getAxis("left").labelText == "group delay (µs)"  # 0.1-1 ms: µs
    ref = compute_view(ViewRequest(0, s.design, second="delay"))
    _x, y = window.plots._items["second"]["nominal"].getData()
    np.testing.assert_allclose(y, ref.nominal_second, rtol=1e-9)
    assert 1e-5 < float(np.max(ref.nominal_second)) < 1e-3  # seconds, a 2 kHz low-pass
    assert s.undo_stack.count() == 0, "the view switch is not an edit"

    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS) as blocker:
        window.act_phase.trigger()
    assert blocker.args[0].second == "phase"
    assert window.plots.second.getAxis("left").labelText == "phase (deg)"


# --- 10. stale results ---------------------------------------------------------------------
def test_only_the_newest_request_is_shown(window, qtbot):
    s = window.session
    d = s.design
    seen = []
    s.view_ready.connect(lambda v: seen.append(v.generation))
    assert s.try_tolerance("C2", 0.2) is None
    assert s.try_tolerance("C2", 25.0) is None
    last = s.end_what_if()
    qtbot.waitUntil(lambda: s.last_view is not None and s.last_view.generation == last, timeout=WAIT_MS)
    assert seen == [last]
    assert not s.busy
    assert shown_yield(window) == pytest.approx(library_yield(d).estimate, abs=5e-5)
    # and the stale states would have shown something else
    assert library_yield(d, d.with_part("C2", tolerance_pct=25.0).part_grades()).estimate < library_yield(d).estimate - 0.05


# --- 11. recovery --------------------------------------------------------------------------
def test_recovery_file_holds_the_dirty_design(window, qtbot, tmp_path):
    s = window.session
    rec = window.recovery.path  # each window has its own recovery file (issue 11 #9)
    window.write_recovery()
    assert not rec.exists(), "a clean design must not write a recovery file"
    dirty = s.design.with_part("C3", grade="C-C0G-1")
    s.apply(dirty, "grade")
    window.write_recovery()
    assert rec.exists()
    assert load(rec) == dirty
    assert rec.with_suffix(".origin").read_text(encoding="utf-8") == ""  # never saved

    other = add_window(qtbot, make_window(None))
    try:
        assert not restore_recovery(other, rec), "a live window's file must not be taken"
        window.recovery.release()  # as when its window is gone
        assert restore_recovery(other, rec)
        assert other.session.design == dirty and other.session.dirty
        other.act_undo.trigger()
        assert other.session.design == load_demo()
    finally:
        close_window(other)

    window.write_recovery()
    assert window._save_to(tmp_path / "saved.json")
    assert not rec.exists(), "saving must remove the recovery file"
