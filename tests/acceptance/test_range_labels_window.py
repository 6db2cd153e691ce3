"""Labels that say where a number is from over an operating range (issue 15): the results
panel's histogram shows the boards' metrics at the board temperature (the yield is judged
over the range), so its axis says "at 25 °C"; a span margin's histogram is the worst over
the judged temperatures and says so. A design without a range keeps its plain labels. The
window is started through the entry point (tests/program_start.py); the metric is chosen
with the keyboard in the results panel's box, as a person does."""
from __future__ import annotations

import json
from pathlib import Path

import pytest
from PySide6.QtCore import Qt
from PySide6.QtTest import QTest

from .test_channels_window import EXAMPLE

pytestmark = pytest.mark.gui

DEMO = Path(__file__).resolve().parents[2] / "filters" / "data" / "demo_design.json"


def axis_label(window) -> str:
    return window.results.hist.getAxis("bottom").labelText


def choose_with_keys(qtbot, window, wanted) -> str:
    """Press Down in the results panel's metric box until its choice satisfies ``wanted``."""
    box = window.results.chooser
    box.setFocus()
    for _ in range(box.count()):
        if wanted(box.currentData()):
            break
        QTest.keyClick(box, Qt.Key.Key_Down)
        qtbot.wait(20)
    assert wanted(box.currentData())
    return box.currentData()


def test_histogram_over_a_range_says_at_the_board_temperature(window, qtbot):
    demo = json.loads(DEMO.read_text(encoding="utf-8"))
    assert demo["analysis"]["operating_range_c"]  # the demo is judged over its range
    t = demo["analysis"].get("temperature_c", [25.0, 25.0])
    assert t[0] == t[1] == 25.0  # the board temperature the metrics are taken at
    choose_with_keys(qtbot, window, lambda n: n == "cutoff_hz")
    qtbot.waitUntil(lambda: "cutoff" in axis_label(window), timeout=5000)
    assert "at 25 \u00b0C" in axis_label(window)
    choose_with_keys(qtbot, window, lambda n: str(n).startswith("margin."))
    qtbot.waitUntil(lambda: "margin" in axis_label(window), timeout=5000)
    assert "worst over the range" in axis_label(window) and "25 \u00b0C" not in axis_label(window)


def test_histogram_without_a_range_keeps_its_label(starter, qtbot):
    w = starter.launch(str(EXAMPLE))  # the I/Q example: judged at 25 degC only
    starter.wait_for_yield(w)
    choose_with_keys(qtbot, w, lambda n: n == "cutoff_hz")
    qtbot.waitUntil(lambda: "cutoff" in axis_label(w), timeout=5000)
    assert "\u00b0C" not in axis_label(w) and "range" not in axis_label(w)
