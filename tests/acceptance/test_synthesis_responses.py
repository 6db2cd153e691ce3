"""New design from an elliptic, inverse Chebyshev or band-stop response, the way a person makes
it: Design > New design from a response, keys and clicks in the dialog, OK. The library's
``synthesize`` is the reference for what the window then holds (it is checked against
scipy.signal in tests/test_synthesis_notch.py)."""
from __future__ import annotations

import pytest
from PySide6.QtCore import Qt
from PySide6.QtWidgets import QDialog, QDialogButtonBox

from tolspread.synthesis import synthesize
from qt_keys import choose  # keyboard, as a person does: tests/qt_keys.py

from .conftest import WAIT_MS, close_later, wait_idle
from .test_actions import act, no_error_shown


def retype(qtbot, edit, text: str) -> None:
    edit.setFocus()
    qtbot.keyClick(edit, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    qtbot.keyClicks(edit, text)


def test_elliptic_design_from_the_dialog(window, qtbot, shown):
    seen: dict = {}

    def fill_in(dlg) -> None:
        choose(qtbot, dlg.response, "elliptic")
        assert dlg.stopband.isEnabled() and dlg.ripple.isEnabled()
        assert dlg.topology.currentData() == "notch_lowpass"
        choose(qtbot, dlg.ripple, 0.5)
        retype(qtbot, dlg.stopband, "5")          # below the range: refused beside the field
        seen["problem"] = dlg.findChild(type(dlg.warning), "problem_stopband").text()
        seen["ok_while_bad"] = dlg.ok_button.isEnabled()
        retype(qtbot, dlg.stopband, "50 dB")
        dlg.order.setFocus()
        qtbot.keyClick(dlg.order, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
        qtbot.keyClicks(dlg.order, "5")
        retype(qtbot, dlg.cutoff, "2k")
        seen["preview"] = dlg.preview.toPlainText()
        qtbot.mouseClick(dlg.ok_button, Qt.MouseButton.LeftButton)

    state = close_later(QDialog, fill_in)
    act(window, "new_from_response").trigger()
    assert state["seen"] is not None and not state["stuck"], "OK did not close the dialog"
    assert "from 20 to 120" in seen["problem"] and not seen["ok_while_bad"]
    assert "stopband" in seen["preview"] and "notch" in seen["preview"]
    want = synthesize("elliptic", 5, 2000.0, ripple_db=0.5, stopband_db=50.0).design  # the library
    assert window.session.design == want
    qtbot.waitUntil(lambda: window.plots.view is not None and window.plots.view.design == want, timeout=WAIT_MS)
    wait_idle(qtbot, window)
    assert any(s.name == "stopband ceiling" and s.limit1 == pytest.approx(-50.0) for s in want.mask)
    no_error_shown(shown)


def test_bandstop_needs_its_bandwidth(window, qtbot, shown):
    seen: dict = {}

    def fill_in(dlg) -> None:
        choose(qtbot, dlg.response, "inverse_chebyshev")
        assert not dlg.ripple.isEnabled()
        choose(qtbot, dlg.kind, "bandstop")
        assert dlg.topology.currentData() == "notch"
        retype(qtbot, dlg.bandwidth, "")
        seen["ok_without_bandwidth"] = dlg.ok_button.isEnabled()
        seen["problem"] = dlg.problem()
        retype(qtbot, dlg.bandwidth, "300")
        seen["ok"] = dlg.ok_button.isEnabled() or dlg.needs_acceptance()
        qtbot.mouseClick(dlg.buttons.button(QDialogButtonBox.StandardButton.Cancel), Qt.MouseButton.LeftButton)

    before = window.session.design
    state = close_later(QDialog, fill_in)
    act(window, "new_from_response").trigger()
    assert state["seen"] is not None and not state["stuck"]
    assert not seen["ok_without_bandwidth"] and seen["problem"].startswith("bandwidth")
    assert seen["ok"]
    assert window.session.design == before  # cancelled: the design is kept
    no_error_shown(shown)
