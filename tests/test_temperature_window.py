"""The window's "Temperature and service life" dialog, used the way a user does: the menu
action, the check boxes and spin boxes, the Apply button; the numbers it shows are checked
against the library's analysis of the same design (filters/temperature.py)."""
from __future__ import annotations

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import Qt  # noqa: E402
from PySide6.QtTest import QTest  # noqa: E402

from tolspread.app.qt_main import make_window  # noqa: E402
from tolspread.app.qt_temperature import parse_points  # noqa: E402
from tolspread.evaluate import evaluate  # noqa: E402
from tolspread.sampling import Conditions  # noqa: E402

WAIT_MS = 60_000


def _discard(w) -> None:
    w.session.undo_stack.setClean()


@pytest.fixture
def window(qtbot):
    w = make_window(None)
    qtbot.addWidget(w, before_close_func=_discard)
    w.show()
    qtbot.waitExposed(w)
    qtbot.waitUntil(lambda: w.session.last_view is not None and not w.session.busy, timeout=WAIT_MS)
    yield w
    _discard(w)
    w.close()
    w.session.shutdown()


def test_points_are_read_as_numbers_and_a_bad_one_is_named():
    assert parse_points("0, 60; 70") == (0.0, 60.0, 70.0)
    assert parse_points("") == ()
    with pytest.raises(ValueError, match="'hot'"):
        parse_points("0, hot")


def test_range_set_in_the_dialog_is_judged_and_plotted(qtbot, window):
    opened = window.session.design.analysis.operating_range_c  # the demo's own range (or none)
    window.act_temperature.trigger()
    dlg = window.temperature_dialog
    qtbot.waitExposed(dlg)
    dlg.use_range.setChecked(True)
    dlg.low.setValue(-20.0)
    dlg.high.setValue(70.0)
    dlg.points.setText("50")
    before = window.session.last_view
    QTest.mouseClick(dlg.apply_button, Qt.MouseButton.LeftButton)
    assert dlg.problem.text() == ""
    assert window.session.design.analysis.operating_range_c == (-20.0, 70.0)
    qtbot.waitUntil(lambda: window.session.last_view is not before and not window.session.busy
                    and window.session.last_view.result is not None
                    and window.session.last_view.result.temperature is not None, timeout=WAIT_MS)
    over = window.session.last_view.result.temperature
    assert over.temperatures_c == (-20.0, 25.0, 50.0, 70.0)
    # the summary shows each temperature's yield as the analysis found it
    for p in over.points:
        assert f"{p.temperature_c:g} °C {100 * p.yield_.estimate:.2f} %" in dlg.summary.text()
    assert f"{100 * over.overall.estimate:.2f} %" in dlg.summary.text()
    # the yield at each temperature, and after a service life (when the design states one) the
    # aged boards' yield at each temperature
    life = window.session.last_view.result.life
    assert len(dlg.yield_plot.getPlotItem().listDataItems()) == (2 if life is not None else 1)
    # the stage f0/Q table over temperature: one column per judged temperature, the means
    # as the analysis summarised them
    table = dlg.shift_table
    assert [table.horizontalHeaderItem(j).text() for j in range(table.columnCount())][1:] == [
        "-20 °C", "25 °C", "50 °C", "70 °C"]
    labels = [table.item(i, 0).text() for i in range(table.rowCount())]
    assert any("Q" in lab for lab in labels) and any("f0" in lab for lab in labels)
    # the main window's yield says what it covers
    assert "at every judged temperature (-20, 25, 50, 70 °C)" in window.results.yield_label.text()
    # one undoable edit
    window.act_undo.trigger()
    assert window.session.design.analysis.operating_range_c == opened


def test_a_range_the_loader_refuses_is_shown_and_not_applied(qtbot, window):
    opened = window.session.design.analysis.operating_range_c
    window.act_temperature.trigger()
    dlg = window.temperature_dialog
    dlg.use_range.setChecked(True)
    dlg.low.setValue(30.0)
    dlg.high.setValue(10.0)
    QTest.mouseClick(dlg.apply_button, Qt.MouseButton.LeftButton)
    assert "operating_range_c" in dlg.problem.text()
    assert window.session.design.analysis.operating_range_c == opened
    dlg.low.setValue(0.0)
    dlg.high.setValue(50.0)
    dlg.points.setText("0, warm")
    QTest.mouseClick(dlg.apply_button, Qt.MouseButton.LeftButton)
    assert "'warm'" in dlg.problem.text()


def test_bands_at_a_chosen_temperature(qtbot, window):
    window.act_temperature.trigger()
    dlg = window.temperature_dialog
    dlg.band_temp.setValue(85.0)
    QTest.mouseClick(dlg.band_button, Qt.MouseButton.LeftButton)
    d = window.session.design
    n = min(d.analysis.samples, 2000)
    # the same boards at 85 deg C, evaluated by the library directly
    e = evaluate(d, samples=n, curves=False, metrics=False, conditions=Conditions(85.0, 85.0))
    assert f"{int(e.passed.sum()):,} of them meet the mask" in dlg.band_note.text()
    # four band edges, and each gain span's limit (the mask the boards are judged against)
    gain_spans = [s for s in d.mask if s.quantity == "gain"]
    assert len(dlg.band_plot.getPlotItem().listDataItems()) == 4 + len(gain_spans)
