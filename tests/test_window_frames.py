"""The window while a tolerance slider is dragged (issue 13 item 6): previews keep coming
however fast the mouse moves, the last frame of a drag is the last position, and the
second plot's axis frames its curves without automatic ranging.

Driven by mouse events on the slider's handle (QTest press, moves, release); every
figure is checked against the library (``tolspread.liveview.compute_view``).
"""
from __future__ import annotations

import json
import time

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPoint, Qt  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402
from test_gui import _slider_handle  # noqa: E402
from test_gui_networks import open_window  # noqa: E402

from tolspread.app.qt_parts import slider_to_pct  # noqa: E402
from tolspread.app.qt_session import PREVIEW_BOARDS  # noqa: E402
from tolspread.designfile import demo_text  # noqa: E402
from tolspread.liveview import ViewRequest, compute_view  # noqa: E402

pytestmark = pytest.mark.gui
WAIT_MS = 30_000


@pytest.fixture
def window(qtbot, tmp_path):
    path = tmp_path / "demo.json"
    path.write_text(demo_text(), encoding="utf-8")
    yield open_window(qtbot, path)


def demo_window(qtbot, tmp_path, **analysis):
    """A window on the demo with ``analysis`` settings changed (opened from a file)."""
    d = json.loads(demo_text())
    d["analysis"].update(analysis)
    path = tmp_path / "demo_changed.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    return open_window(qtbot, path)


@pytest.fixture
def fine_window(qtbot, tmp_path):
    """The demo on a fine grid (2,000 frequencies) with 1,200 boards: a preview of 1,000
    boards then takes far longer than the gap between two mouse moves, on any machine."""
    yield demo_window(qtbot, tmp_path, points=2000, samples=1200)


def test_previews_are_shown_while_the_mouse_moves_faster_than_an_evaluation(fine_window, qtbot):
    window = fine_window
    # Defect: every mouse move cancelled the preview being computed, so a hand moving
    # faster than one evaluation (1,000 boards) saw no frame until it stopped.
    s = window.session
    before = s.design
    slider = window.parts.rows["C2"].slider
    shown = []
    s.view_ready.connect(lambda v: shown.append(v))
    pos = _slider_handle(slider)
    QTest.mousePress(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
    assert slider.isSliderDown()
    moves = 0
    # a move every few milliseconds, far faster than 1,000 boards x 2,000 frequencies
    # evaluate, until a few frames came (at most 10 s: a broken window fails, never loops)
    t0 = time.monotonic()
    while sum(v.preview for v in shown) < 3 and time.monotonic() - t0 < 10:
        pos = QPoint(pos.x() + (1 if (moves // 40) % 2 == 0 else -1), pos.y())
        QTest.mouseMove(slider, pos)
        QTest.qWait(1)
        moves += 1
    previews = [v for v in shown if v.preview]
    assert len(previews) >= 3, f"{moves} moves and no preview shown while moving"
    assert s.design is before and s.undo_stack.count() == 0  # dragging edits nothing
    # each preview is what the library computes for the grades tried then (first boards)
    v = previews[-1]
    assert v.samples == PREVIEW_BOARDS
    ref = compute_view(ViewRequest(0, before, v.ensemble.grades, boards=PREVIEW_BOARDS, budget=False))
    assert v.yield_.passed == ref.yield_.passed
    np.testing.assert_array_equal(v.gain_bands.high, ref.gain_bands.high)

    # the release shows every board of the edited design: the slider's last position
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS, check_params_cb=lambda v: not v.preview):
        QTest.mouseRelease(slider, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pos)
    i = before.part_index("C2")
    assert s.undo_stack.count() == 1
    assert s.design.parts[i].tolerance_pct == pytest.approx(slider_to_pct(slider.value()))
    last = s.last_view
    assert not last.preview and last.design is s.design
    assert window.plots.view is last and window.results.view is last
    ref = compute_view(ViewRequest(0, s.design, budget=False))
    assert last.yield_.passed == ref.yield_.passed


def test_second_plot_frames_its_curves(window, qtbot):
    # the phase plot's range is set from the bands and the nominal curve (no automatic
    # ranging): everything drawn is inside it, and it is not more than twice their spread
    for second in ("phase", "delay"):
        if second == "delay":
            with qtbot.waitSignal(window.session.view_ready, timeout=WAIT_MS):
                window.session.set_second("delay")
        v = window.session.last_view
        assert v.second == second
        b = v.second_bands
        lo = min(float(np.min(b.low)), float(np.min(v.nominal_second)))
        hi = max(float(np.max(b.high)), float(np.max(v.nominal_second)))
        window.plots.fit()
        y0, y1 = window.plots.second.vb.viewRange()[1]
        assert y0 <= lo and hi <= y1, (second, y0, y1, lo, hi)
        assert y1 - y0 <= 2 * (hi - lo), (second, y0, y1, lo, hi)
