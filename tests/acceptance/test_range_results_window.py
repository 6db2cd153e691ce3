"""A design judged over an operating range and after a service life, in the window: the
spread budget says what it is of and names the part that moves the boards at the extremes,
and the yield against temperature (with the bands at a chosen temperature) is one click away.

The window is started through the console script's own function (tests/acceptance/conftest.py);
the metric is chosen with the keyboard, the link and buttons are clicked with the mouse. The
numbers are checked against ``tolspread analyze --json`` run as a subprocess on the same file
and, for the bands, against the boards evaluated at that temperature by the library the
command line uses.
"""
from __future__ import annotations

import json

import numpy as np
import pytest
from PySide6.QtCore import QPoint, Qt
from PySide6.QtTest import QTest

from tolspread.design import design_from_dict
from tolspread.evaluate import evaluate
from tolspread.sampling import Conditions

from qt_keys import choose  # shared: tests/qt_keys.py

from .conftest import WAIT_MS, log_errors, run_cli, wait_idle

pytestmark = pytest.mark.gui

BASIS = "over -40 to 85 \u00b0C, worst judged temperature"


def range_design(tmp_path):
    """A first-order RC low-pass (10 kohm, 10 nF: corner 1.59 kHz) whose only temperature-dependent
    part is R1 (600 +- 300 ppm/K, so every board is worst at 85 degC), judged over -40..85 degC
    and after 10 years at 40 degC (R1 drifts +-0.5 % at its 1,000 h rating). Invented test design."""
    data = {
        "format": "tolspread-design", "version": 2, "name": "RC over a range (invented test design)",
        "grades": [{"name": "R-tc", "kind": "R", "tolerance_pct": 0.1, "distribution": "uniform",
                    "tempco_ppm": 600, "tempco_spread_ppm": 300, "life_drift_pct": 0.5},
                   {"name": "C-1", "kind": "C", "tolerance_pct": 1, "distribution": "uniform"}],
        "parts": [{"ref": "R1", "value": "10k", "grade": "R-tc"}, {"ref": "C1", "value": "10n", "grade": "C-1"}],
        "stages": [{"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": 3000, "seed": 7, "f_start": 10, "f_stop": 1e5, "points": 120,
                     "operating_range_c": [-40, 85], "service_life": {"hours": 87660, "temperature_c": 40}},
        "mask": [{"name": "edge", "quantity": "gain", "kind": "floor", "f1": 10, "f2": 1500, "limit1": -3.9},
                 {"name": "stop", "quantity": "gain", "kind": "ceiling", "f1": 20e3, "f2": 1e5, "limit1": -20}],
    }
    path = tmp_path / "rc_range.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path, data


def analyze_json(path, tmp_path) -> dict:
    out = tmp_path / "cli.json"
    run = run_cli("analyze", str(path), "--json", str(out))
    assert run.returncode == 0, run.stderr
    return json.loads(out.read_text(encoding="utf-8"))


def test_budget_panel_names_the_part_that_moves_the_boards_over_the_range(starter, qtbot, tmp_path):
    path, _ = range_design(tmp_path)
    doc = analyze_json(path, tmp_path)
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    res = w.results
    choose(qtbot, res.chooser, "margin.edge")  # the metric chooser, with the keyboard
    qtbot.waitUntil(lambda: res.metric_name == "margin.edge", timeout=WAIT_MS)
    # what the budget is of, and after the life its largest shares, as 'tolspread analyze' gives them
    text = res.lived_budget.text()
    assert res.lived_budget.isVisible() and BASIS in text
    edge = doc["budget"]["margin.edge"]
    assert edge["basis"] == BASIS
    after = doc["budget_after_life"]["margin.edge"]
    assert after["basis"] in text
    first_after = after["parts"][0]
    assert f"{first_after['ref']} {100 * first_after['share']:.1f} %" in text
    # the chart's top bar is the part the command line names first: R1, whose temperature
    # coefficient moves every board at 85 degC (tests/test_budget_over_range.py holds the
    # closed form), not C1, which leads at 25 degC
    ticks = res.budget_plot.getAxis("left")._tickLevels[0]
    top = max(ticks, key=lambda t: t[0])[1]
    assert top == edge["parts"][0]["ref"] == "R1"
    # the cutoff's budget is at the board temperature and says so
    choose(qtbot, res.chooser, "cutoff_hz")
    qtbot.waitUntil(lambda: res.metric_name == "cutoff_hz", timeout=WAIT_MS)
    assert "at 25 \u00b0C" in res.lived_budget.text()
    assert doc["budget"]["cutoff_hz"]["basis"] == "at 25 \u00b0C"
    assert not log_errors()


def test_yield_against_temperature_and_bands_at_minus_40_are_one_click_from_the_yield(starter, qtbot, tmp_path):
    path, data = range_design(tmp_path)
    doc = analyze_json(path, tmp_path)
    w = starter.launch(str(path))
    wait_idle(qtbot, w)
    link = w.results.temperature_link
    assert link.isVisible() and "yield against temperature" in link.text()
    QTest.mouseClick(link, Qt.MouseButton.LeftButton, pos=QPoint(8, link.height() // 2))  # on the link's text
    qtbot.waitUntil(lambda: getattr(w, "temperature_dialog", None) is not None
                    and w.temperature_dialog.isVisible(), timeout=WAIT_MS)
    dlg = w.temperature_dialog
    summary = dlg.summary.text()
    # each judged temperature's yield and each after the life, as the command line's JSON has them
    temp = doc["temperature"]
    for point in temp["points"]:
        assert f"{point['temperature_c']:g} °C {100 * point['yield']['estimate']:.2f} %" in summary
    for point in doc["service_life"]["after_points"]:
        assert f"{point['temperature_c']:g} °C {100 * point['yield']['estimate']:.2f} %" in summary
    # the spread at -40 degC: the button, then the band note counts the boards meeting the mask
    # there, as the library evaluates the same first boards at that temperature
    dlg.band_temp.setValue(-40.0)
    QTest.mouseClick(dlg.band_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: "boards at -40 °C" in dlg.band_note.text(), timeout=WAIT_MS)
    n = min(data["analysis"]["samples"], 2000)
    e = evaluate(design_from_dict(data), samples=n, curves=False, metrics=False, conditions=Conditions(-40, -40))
    assert f"{int(np.count_nonzero(e.passed)):,} of them meet the mask at this temperature" in dlg.band_note.text()
    # the mask's limits are drawn with the bands (the floor's -3.9 dB and the ceiling's -20 dB),
    # and the view shows them
    ys = [c.yData for c in dlg.band_plot.getPlotItem().listDataItems() if c.yData is not None]
    assert any(np.allclose(y, -3.9) for y in ys) and any(np.allclose(y, -20.0) for y in ys)
    lo, hi = dlg.band_plot.getPlotItem().viewRange()[1]
    assert lo < -20.0 and hi > 0.0
    assert not log_errors()
