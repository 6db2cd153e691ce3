"""The window with a resistor network and with matched channels (issue 15 items 4 and 6),
opened the way a person opens a file (the command-line path), checked against the library
(``tolspread.evaluate.evaluate`` + ``tolspread.stats.yield_estimate``)."""
from __future__ import annotations

from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from tolspread.app.qt_main import make_window  # noqa: E402
from tolspread.designfile import load  # noqa: E402
from tolspread.evaluate import evaluate  # noqa: E402
from tolspread.stats import yield_estimate  # noqa: E402

pytestmark = pytest.mark.gui

EXAMPLES = Path(__file__).resolve().parent.parent / "assets" / "examples"
WAIT_MS = 30_000


def open_window(qtbot, path: Path):
    w = make_window(str(path))
    qtbot.addWidget(w, before_close_func=lambda w: w.session.undo_stack.setClean())
    w.resize(1500, 900)
    w.show()
    qtbot.waitExposed(w)
    qtbot.waitUntil(lambda: w.session.last_view is not None and not w.session.busy, timeout=WAIT_MS)
    return w


def library_yield_text(design) -> str:
    a = design.analysis
    est = yield_estimate(evaluate(design).passed, None, a.confidence, a.interval)
    return f"yield {100 * est.estimate:.2f} %"


def test_parts_panel_shows_a_network_as_a_group(qtbot):
    path = EXAMPLES / "network_antialias.json"
    w = open_window(qtbot, path)
    panel = w.parts
    head = panel.group_labels["RN1"]
    assert "RN1" in head.text() and "ratio ±0.05 %" in head.text() and "5 ppm/K" in head.text()
    grid = panel.grid
    head_row = grid.getItemPosition(grid.indexOf(head))[0]
    rows = {ref: grid.getItemPosition(grid.indexOf(r.label))[0] for ref, r in panel.rows.items()}
    members = ["R1", "R2", "RF", "RG"]
    # the members sit together under the heading, the other parts above it
    assert all(rows[m] > head_row for m in members)
    assert rows["U1"] < head_row  # a part in no network
    pair_row = grid.getItemPosition(grid.indexOf(panel.group_labels["CP1"]))[0]
    assert all(head_row < rows[m] < pair_row for m in members)  # RN1's members before the pair's heading
    assert all(rows[c] > pair_row for c in ("C1", "C2"))
    for m in members:
        assert not panel.rows[m].slider.isEnabled()  # the spread is the network's
        assert "RN1" in panel.rows[m].readout.text()
    assert panel.rows["U1"].slider.isEnabled()
    assert library_yield_text(load(path)) in w.results.yield_label.text()


def test_window_judges_matched_channels_as_the_library_does(qtbot):
    path = EXAMPLES / "matched_iq_channels.json"
    w = open_window(qtbot, path)
    design = load(path)
    assert library_yield_text(design) in w.results.yield_label.text()
    assert "2 channels" in w.parts.group_labels["channels"].text()
    # match spans are differences between channels: listed in the span table, not drawn on a curve
    assert len(w.plots.spans) == sum(1 for s in design.mask if s.kind != "match" and s.quantity == "gain")
