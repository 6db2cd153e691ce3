"""A tolerance slider dragged on a design judged over an operating range and after a
service life: the drag's previews judge the first boards at the board temperature only
(the one the curves show) and say so; the release judges every board over the range and
after the life, as ``tolspread analyze`` does.

Driven by mouse events on the slider's handle (QTest press, move, release); the expected
figures come from the library (``evaluate`` on the design without its range, ``analyze``
on the design with it), computed in the test.
"""
from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QPoint, Qt  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402
from test_gui import _slider_handle, yield_text  # noqa: E402
from test_window_frames import demo_window  # noqa: E402

from tolspread.analysis import analyze  # noqa: E402
from tolspread.app.qt_parts import slider_to_pct  # noqa: E402
from tolspread.app.qt_session import PREVIEW_BOARDS  # noqa: E402
from tolspread.evaluate import evaluate  # noqa: E402
from tolspread.stats import yield_estimate  # noqa: E402

pytestmark = pytest.mark.gui
WAIT_MS = 30_000
LEFT, NONE = Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier


@pytest.fixture
def ranged_window(qtbot, tmp_path):
    """The demo judged over -40..85 deg C and after 20 years at 40 deg C (175,320 h),
    2,000 boards (the preview stays at its 1,000)."""
    yield demo_window(qtbot, tmp_path, samples=2000, temperature_c=[25, 25], operating_range_c=[-40, 85],
                      service_life={"hours": 175_320, "temperature_c": 40})


def test_a_drag_previews_at_the_board_temperature_and_the_release_judges_over_the_range(ranged_window, qtbot):
    w = ranged_window
    s = w.session
    before = s.design
    label = w.results.yield_label
    assert "at every judged temperature (-40, 25, 85 °C)" in label.text()  # the opened design's full run
    slider = w.parts.rows["C2"].slider
    handle = _slider_handle(slider)
    QTest.mousePress(slider, LEFT, NONE, handle)
    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS, check_params_cb=lambda v: v.preview) as shown:
        QTest.mouseMove(slider, QPoint(handle.x() - 40, handle.y()))
    view = shown.args[0]
    tried = before.with_part("C2", tolerance_pct=slider_to_pct(slider.value()))
    a = tried.analysis
    # the library's own evaluation of the first boards at 25 deg C: the design without its range and life
    at_25 = tried.with_analysis(operating_range_c=None, judge_at_c=(), service_hours=0.0)
    expected = yield_estimate(evaluate(at_25, samples=PREVIEW_BOARDS).passed, None, a.confidence, a.interval)
    assert view.preview and view.reference_only and view.samples == PREVIEW_BOARDS
    assert view.yield_.passed == expected.passed
    text = label.text()
    assert yield_text(expected.estimate) in text
    assert "preview, 1,000 boards at 25 °C" in text
    assert "judged temperature" not in text and "years" not in text  # no claim about the range or the life
    assert "at 25 °C only" in w.results.detail.text()
    # the same boards judged over the range and after the life read otherwise: the note matters
    over = analyze(tried, samples=PREVIEW_BOARDS, budget=False, with_corners=False)
    assert over.yield_.passed < expected.passed, "the range must cost yield, else this test proves nothing"

    with qtbot.waitSignal(s.view_ready, timeout=WAIT_MS, check_params_cb=lambda v: not v.preview) as done:
        QTest.mouseRelease(slider, LEFT, NONE, QPoint(handle.x() - 40, handle.y()))
    full = done.args[0]
    assert s.undo_stack.count() == 1 and s.design == tried
    ref = analyze(s.design, budget=False, with_corners=False)  # as tolspread analyze judges every board
    assert not full.preview and not full.reference_only
    assert full.yield_.passed == ref.yield_.passed and full.samples == a.samples
    assert ref.life is not None and ref.temperature is not None
    text = label.text()
    assert yield_text(ref.yield_.estimate) in text and "preview" not in text
    assert "at every judged temperature (-40, 25, 85 °C)" in text and "after 20 years" in text


def test_a_released_tolerance_reuses_what_was_prepared_and_it_equals_a_fresh_preparation():
    """The window's worker prepares a design once (circuit, grid, nominal response, mask
    plan); a design that differs only in a part's tolerance reuses it. Checked against a
    fresh :func:`prepare` of the new design, field by field, and a changed value is
    prepared afresh."""
    from tolspread.designfile import load_demo
    from tolspread.evaluate import prepare
    from tolspread.liveview import prepared_for

    before = load_demo()
    old = prepare(before)
    after = before.with_part("C2", tolerance_pct=1.5)
    reused, fresh = prepared_for(after, old), prepare(after)
    assert reused.design is after and reused.nominal is old.nominal  # reused, not prepared again
    np.testing.assert_array_equal(reused.freqs_hz, fresh.freqs_hz)
    for name in ("gain_db", "phase_deg", "delay_s"):
        np.testing.assert_array_equal(getattr(reused.nominal.response, name), getattr(fresh.nominal.response, name))
    assert reused.nominal.metrics == fresh.nominal.metrics
    np.testing.assert_array_equal(reused.nominal.margins, fresh.nominal.margins)
    assert reused.w_refs == fresh.w_refs
    for a, b in zip(reused.plans, fresh.plans, strict=True):
        assert a.span == b.span
        np.testing.assert_array_equal(a.index, b.index)
        np.testing.assert_array_equal(a.limit, b.limit)
    moved = before.with_part("C2", value=16e-9)  # a value: everything prepared changes
    again = prepared_for(moved, old)
    assert again.design is moved and again.nominal.metrics["cutoff_hz"] != old.nominal.metrics["cutoff_hz"]
