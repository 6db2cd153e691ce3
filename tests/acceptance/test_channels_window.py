"""Channels that must match, in the window, the way a person works with them (issue 15 item 6).

``tolspread assets/examples/matched_iq_channels.json`` is started through the console
script's function (conftest). A person brings the "Channel match" tab beside the spread
plots forward and reads the boards' largest gain and phase difference between the two
channels with each match span's limit; in the "Channels" tab changes the channel count and
which parts one physical part serves; in the span table adds a group-delay match span
(Add match span), retypes its limit (a bad one is marked red, naming the field), deletes
it; undoes (Edit > Undo); saves with Save As and opens the file again.

Independent checks: the bands drawn are recomputed here from the same boards' part values
(each channel's values as the library draws them: the draw is the input; the response,
the channel difference and the bands are computed here) by a nodal solution of the
unity-gain Sallen-Key low-pass written in this test (Kirchhoff's current law at its two
nodes, the op-amp's single-pole model A(s) = 2 pi GBW / s as README states, solved by
Cramer's rule), with the order statistics of the band edges taken by numpy's percentile
("lower"/"higher" methods: the ranks floor(0.01 (S - 1)) and ceil(0.99 (S - 1)) that
filters/bands.py documents). The boards failing each match span, counted from that
solution, must be the failures `tolspread analyze --json` reports in its own process.
The saved file is read with the standard library's json reader.
"""
from __future__ import annotations

import json
import math
import re
from pathlib import Path

import numpy as np
import pytest
from PySide6.QtCore import QPoint, QPointF, Qt
from PySide6.QtGui import QAction
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QLineEdit

from .conftest import run_cli, wait_idle
from .test_stage_editing import bring_tab_forward, retype_cell

pytestmark = pytest.mark.gui

EXAMPLE = Path(__file__).resolve().parents[2] / "assets" / "examples" / "matched_iq_channels.json"
INVALID = "#fde2d6"  # the window's colour of a refused entry


def action(window, name: str) -> QAction:
    hits = [a for a in window.findChildren(QAction) if a.objectName() == name]
    assert len(hits) == 1, name
    return hits[0]


def design_json(window) -> dict:
    """The design the window holds, in file form (read with json)."""
    return json.loads(window.session.text())


def channel_values(path: Path, samples: int) -> np.ndarray:
    """(N, S, P) part values of every channel of the first ``samples`` boards, SI units, as
    the library draws them for this file (the boards: input to the checks, not under test)."""
    import tolspread
    from tolspread.channel_match import sample_values
    from tolspread.sampling import draw_scores

    d = tolspread.load(path)
    a = d.analysis
    nominal = np.array([p.value for p in d.parts])
    scores = draw_scores(a.seed, len(d.parts), 0, samples, a.method)
    return sample_values(d, nominal, d.part_grades(), scores, a.conditions, a.seed, a.method, 0)


def sallen_key_response(values: np.ndarray, f_hz: np.ndarray) -> np.ndarray:
    """H(j 2 pi f) of the unity-gain Sallen-Key low-pass, (S, F) complex, from part values
    (S, 5) in the example's order R1, R2, C1, C2, U1 (gain-bandwidth, Hz).

    Nodes (the topology's netlist as README draws it): R1 from the input to a, R2 from a
    to b, C1 from a to the output, C2 from b to ground; the op-amp's + input at b, its -
    input at the output: Vo = A (Vb - Vo), A = 2 pi GBW / s. KCL at a and b with Vin = 1:
        Va (1/R1 + 1/R2 + s C1) - Vb / R2 - Vo s C1 = 1/R1
        -Va / R2 + Vb (1/R2 + s C2)             = 0
        -A Vb + (1 + A) Vo                       = 0
    and Vo by Cramer's rule (from memory: textbook nodal analysis)."""
    r1, r2, c1, c2, gbw = (values[:, k, None] for k in range(5))
    s = 2j * np.pi * f_hz[None, :]
    amp = 2 * np.pi * gbw / s
    z = np.zeros_like(s * r1)
    m = [[1 / r1 + 1 / r2 + s * c1, -1 / r2 + z, -s * c1],
         [-1 / r2 + z, 1 / r2 + s * c2, z],
         [z, -amp, 1 + amp]]
    rhs = [1 / r1 + z, z, z]

    def det3(a):
        return (a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
                - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
                + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]))

    m_out = [[row[0], row[1], r] for row, r in zip(m, rhs)]
    return det3(m_out) / det3(m)


def largest_differences(h: np.ndarray) -> dict[str, np.ndarray]:
    """(S, F) largest difference between the channels of ``h`` (N, S, F): gain (dB) and
    phase (deg; from the ratio of two channels, so no unwrapping enters)."""
    gain = 20 * np.log10(np.abs(h))
    ref = h[0]
    phase = np.degrees(np.angle(h / ref[None]))  # each channel's phase relative to channel 1
    return {"gain": gain.max(axis=0) - gain.min(axis=0), "phase": phase.max(axis=0) - phase.min(axis=0)}


def drawn(window, quantity: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Frequencies (Hz) and band edges the channel-match plot draws for ``quantity``."""
    items = window.mismatch.items[quantity]
    scale = window.mismatch.scale[quantity]
    edges = {}
    for name in ("low", "inner_low", "inner_high", "high"):
        x, y = items[name].getData()
        edges[name] = np.asarray(y) * scale
    return 10 ** np.asarray(x), edges


def set_spin(qtbot, spin, text: str) -> None:
    """Select what the spin box holds, type ``text``, press Enter (as a person does)."""
    edit = spin.findChild(QLineEdit)
    QTest.mouseClick(edit, Qt.MouseButton.LeftButton)
    QTest.keyClick(edit, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(edit, text)
    QTest.keyClick(edit, Qt.Key.Key_Return)
    qtbot.wait(30)


@pytest.fixture
def iq_window(starter):
    """``tolspread assets/examples/matched_iq_channels.json``, its first figures shown."""
    w = starter.launch(str(EXAMPLE))
    w.resize(1600, 950)
    starter.wait_for_yield(w)
    return w


def test_channel_match_plot_shows_the_boards_differences_and_limits(iq_window, qtbot, tmp_path):
    window = iq_window
    wait_idle(qtbot, window)
    tabs = window.centre_tabs
    assert [tabs.tabText(i) for i in range(tabs.count())] == ["Spread (channel 1)", "Channel match"]
    assert not window.mismatch.plots  # nothing drawn while the tab is hidden: drawn when shown
    bar = tabs.tabBar()
    QTest.mouseClick(bar, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, bar.tabRect(1).center())
    qtbot.waitUntil(window.mismatch.isVisible, timeout=2000)
    assert set(window.mismatch.plots) == {"gain", "phase"}  # the example's two match spans

    # the bands, recomputed from the boards by the nodal solution above
    samples = window.session.last_view.curve_boards
    assert samples == 5000  # every board of the example
    f_hz, _ = drawn(window, "gain")
    h = sallen_key_response(channel_values(EXAMPLE, samples).reshape(-1, 5), f_hz).reshape(2, samples, -1)
    ours = largest_differences(h)
    lo_rank = math.floor(0.01 * (samples - 1))
    for q, tol in (("gain", 1e-7), ("phase", 1e-6)):  # dB, deg: rounding of two solvers
        f_q, edges = drawn(window, q)
        np.testing.assert_allclose(f_q, f_hz, rtol=1e-12)
        x = ours[q]
        np.testing.assert_allclose(edges["low"], x.min(axis=0), atol=tol)
        np.testing.assert_allclose(edges["high"], x.max(axis=0), atol=tol)
        np.testing.assert_allclose(edges["inner_low"], np.percentile(x, 1, axis=0, method="lower"), atol=tol)
        np.testing.assert_allclose(edges["inner_high"], np.percentile(x, 99, axis=0, method="higher"), atol=tol)
        assert np.sort(x, axis=0)[lo_rank] == pytest.approx(np.percentile(x, 1, axis=0, method="lower"))

    # each match span's limit is drawn over its band, at its limit
    mask = design_json(window)["mask"]
    for q in ("gain", "phase"):
        (lim,) = window.mismatch.items[q]["limits"]
        span = mask[lim["index"]]
        assert span["kind"] == "match" and span["quantity"] == q
        x, y = lim["line"].getData()
        assert 10 ** x[0] == pytest.approx(span["f1"]) and 10 ** x[-1] == pytest.approx(span["f2"])
        np.testing.assert_allclose(np.asarray(y) * window.mismatch.scale[q], span["limit1"])

    # a click on the phase limit line (a mouse press and release on the plot) selects its span's row
    (lim,) = window.mismatch.items["phase"]["limits"]
    x, y = lim["line"].getData()
    plot = window.mismatch.plots["phase"]
    qtbot.wait(100)  # the layout settles after the first paint
    at = window.mismatch.canvas.mapFromScene(plot.vb.mapViewToScene(QPointF(float(np.mean(x)), float(y[0]))))
    vp = window.mismatch.canvas.viewport()
    QTest.mouseMove(vp, at)
    qtbot.wait(20)
    QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, at)
    QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, at)
    qtbot.waitUntil(lambda: window.span_table.selected() == lim["index"], timeout=2000)
    assert window.mismatch.selected == lim["index"]

    # the readout under the plots: the band values at the frequency under the mouse (3 digits)
    k = int(np.argmin(np.abs(np.log(f_hz / 10 ** np.mean(x)))))
    readout = window.mismatch.readout.text()
    m = re.search(r"central 98 % of boards (\S+) deg to (\S+) deg, of every board up to (\S+) deg; "
                  r"I/Q phase match allows 1 deg", readout)
    assert m, readout
    got = [float(v) for v in m.groups()]
    want = [np.percentile(ours["phase"][:, k], 1, method="lower"),
            np.percentile(ours["phase"][:, k], 99, method="higher"), ours["phase"][:, k].max()]
    assert got == pytest.approx(want, rel=5e-3, abs=1e-6)

    # boards failing each match span, from the solution here, against analyze --json in its own process
    run = run_cli("analyze", str(EXAMPLE), "--json", str(tmp_path / "a.json"), cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    report = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))
    failed = {s["name"]: s["failed"] for s in report["yield"]["spans"]}
    summary = window.mismatch.summary.text()
    for span in mask:
        if span["kind"] != "match":
            continue
        band = (f_hz >= span["f1"] * (1 - 1e-9)) & (f_hz <= span["f2"] * (1 + 1e-9))
        ours_failed = int((ours[span["quantity"]][:, band].max(axis=1) > span["limit1"]).sum())
        assert ours_failed == failed[span["name"]] > 0
        assert f"{span['name']}</b>" in summary and f"{ours_failed:,} boards fail" in summary
    assert f"{report['yield']['passed']:,} of 5,000 boards of 2 channels" in summary
    assert "mismatch budget: C2" in summary  # the capacitors are the parts that differ (README)

    # the summary's first "bars" link (a click on the text, Tab to the link, Enter) shows that
    # match span's budget in the spread budget on the right: the budget analyze --json gives
    label = window.mismatch.summary
    QTest.mouseClick(label, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, QPoint(10, 8))
    QTest.keyClick(label, Qt.Key.Key_Tab)
    QTest.keyClick(label, Qt.Key.Key_Return)
    chooser = window.results.chooser
    qtbot.waitUntil(lambda: chooser.currentData() == "margin.I/Q gain match", timeout=2000)
    budget = report["budget"]["margin.I/Q gain match"]
    top = max(budget["parts"], key=lambda p: p["share"])
    assert top["ref"] == "C2" and f"C2 {100 * top['share']:.1f} %" in summary


def test_channels_and_match_spans_edited_undone_saved_and_reopened(iq_window, qtbot, answers, tmp_path):
    window = iq_window
    wait_idle(qtbot, window)
    start = design_json(window)
    stack = window.session.undo_stack

    # channel count: 3 applies, 1 is refused while match spans exist (marked, the field named)
    bring_tab_forward(qtbot, window, "Channels")
    ed = window.channel_editor
    assert ed.isVisible() and ed.count.value() == 2
    set_spin(qtbot, ed.count, "3")
    qtbot.waitUntil(lambda: design_json(window)["channels"]["count"] == 3, timeout=5000)
    assert stack.undoText() == "3 channels"
    set_spin(qtbot, ed.count, "1")
    assert design_json(window)["channels"]["count"] == 3 and ed.count.value() == 3
    assert ed.problem.isVisible() and "mask[2].kind" in ed.problem.text()
    assert INVALID in ed.count.styleSheet()

    # C2: one part for every channel (a shared part); the network's one package is in the file
    box = ed.shared["C2"]
    QTest.mouseClick(box, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     QPoint(8, box.height() // 2))  # on its check mark
    qtbot.waitUntil(lambda: design_json(window)["channels"].get("shared") == ["C2"], timeout=5000)
    assert INVALID not in ed.count.styleSheet() and not ed.problem.isVisible()  # the refusal's mark went
    assert ed.across["RN1"].isChecked()

    # a group-delay match span from the span table's Add match span menu
    table = window.span_table
    assert table.add_match.isEnabled()
    action(table, "add_match_delay").trigger()
    qtbot.waitUntil(lambda: len(design_json(window)["mask"]) == 5, timeout=5000)
    new = design_json(window)["mask"][4]
    assert (new["kind"], new["quantity"]) == ("match", "delay")
    row = 4
    assert table.table.item(row, 5).text().endswith("µs")
    retype_cell(qtbot, table.table, row, 5, "2.5u")
    qtbot.waitUntil(lambda: design_json(window)["mask"][4]["limit1"] == pytest.approx(2.5e-6), timeout=5000)
    retype_cell(qtbot, table.table, row, 6, "4 µs")  # a sloped limit: 2.5 µs at f1 to 4 µs at f2
    qtbot.waitUntil(lambda: design_json(window)["mask"][4].get("limit2") == pytest.approx(4e-6), timeout=5000)
    retype_cell(qtbot, table.table, row, 5, "-1u")  # refused: a difference limit is above 0
    assert design_json(window)["mask"][4]["limit1"] == pytest.approx(2.5e-6)
    assert table.table.item(row, 5).background().color().name() == INVALID
    assert table.problem_label.text().startswith("the limit at f1 of 'delay match'")

    # every change one step of Edit > Undo, named; undone all: the example as opened; redone all
    edited = design_json(window)
    assert stack.count() == 5
    names = [stack.text(i) for i in range(stack.count())]
    assert names[:2] == ["3 channels", "C2 shared by every channel"] and names[2] == "add delay match"
    for _ in range(5):
        action(window, "undo").trigger()
    assert design_json(window) == start
    for _ in range(5):
        action(window, "redo").trigger()
    assert design_json(window) == edited

    # the channel-match tab (View > Channel match) draws a third plot with the new limit, sloped as typed
    wait_idle(qtbot, window)
    action(window, "show_channel_match").trigger()
    qtbot.waitUntil(window.mismatch.isVisible, timeout=2000)
    assert set(window.mismatch.plots) == {"gain", "phase", "delay"}
    (lim,) = window.mismatch.items["delay"]["limits"]
    _, y = lim["line"].getData()
    scale = window.mismatch.scale["delay"]
    assert y[0] * scale == pytest.approx(2.5e-6) and y[-1] * scale == pytest.approx(4e-6)

    # save as, the file read with json, then opened again: every field kept
    path = tmp_path / "iq.json"
    answers.save_paths.append(str(path))
    action(window, "file_save_as").trigger()
    qtbot.waitUntil(path.exists, timeout=5000)
    saved = json.loads(path.read_text(encoding="utf-8"))
    assert saved["channels"] == {"count": 3, "shared": ["C2"]}
    assert saved["networks"][0]["across_channels"] is True
    assert saved["mask"][4] == {"kind": "match", "f1": new["f1"], "f2": new["f2"], "limit1": 2.5e-6,
                                "limit2": 4e-6, "quantity": "delay", "relative": False, "name": "delay match"}
    answers.open_paths.append(str(EXAMPLE))  # another file first, so the reopening is real
    action(window, "file_open").trigger()
    qtbot.waitUntil(lambda: design_json(window) == start, timeout=5000)
    answers.open_paths.append(str(path))
    action(window, "file_open").trigger()
    qtbot.waitUntil(lambda: design_json(window) == edited, timeout=5000)
    wait_idle(qtbot, window)
    assert window.channel_editor.count.value() == 3 and window.channel_editor.shared["C2"].isChecked()

    # the span deleted (its row clicked, Delete span), then undone: back as it was
    table = window.span_table
    rect = table.table.visualRect(table.table.model().index(4, 0))
    QTest.mouseClick(table.table.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier,
                     rect.center())
    QTest.mouseClick(table.delete, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: len(design_json(window)["mask"]) == 4, timeout=5000)
    action(window, "undo").trigger()
    assert design_json(window) == edited


def test_one_channel_to_two_brings_the_channel_match_tab(window, qtbot, shown):
    """The demo has one channel: no Channel match tab (View > Channel match says why) and
    no match span to add; two channels bring the tab (Ctrl+3 brings it forward), a gain
    match span added from the span table is drawn there; Undo takes both back."""
    tabs, table = window.centre_tabs, window.span_table
    assert [tabs.tabText(i) for i in range(tabs.count())] == ["Spread"] and not tabs.tabBar().isVisible()
    assert not table.add_match.isEnabled() and not table.add_match.isVisible()  # one channel: hidden, no width taken
    action(window, "show_channel_match").trigger()
    assert "one channel" in window.status_text.text() and tabs.currentWidget() is window.plots

    bring_tab_forward(qtbot, window, "Channels")
    set_spin(qtbot, window.channel_editor.count, "2")
    qtbot.waitUntil(lambda: tabs.count() == 2, timeout=5000)
    assert design_json(window)["channels"] == {"count": 2}
    assert [tabs.tabText(i) for i in range(2)] == ["Spread (channel 1)", "Channel match"]
    assert table.add_match.isEnabled() and table.add_match.isVisible()
    window.activateWindow()
    QTest.keyClick(window, Qt.Key.Key_3, Qt.KeyboardModifier.ControlModifier)
    qtbot.waitUntil(window.mismatch.isVisible, timeout=2000)
    wait_idle(qtbot, window)
    qtbot.waitUntil(lambda: "No match span yet" in window.mismatch.summary.text(), timeout=5000)

    action(table, "add_match_gain").trigger()
    qtbot.waitUntil(lambda: design_json(window)["mask"][-1].get("kind") == "match", timeout=5000)
    span = design_json(window)["mask"][-1]
    assert (span["quantity"], span["limit1"], span["name"]) == ("gain", 0.1, "gain match")
    wait_idle(qtbot, window)
    qtbot.waitUntil(lambda: "gain" in window.mismatch.plots, timeout=5000)
    (lim,) = window.mismatch.items["gain"]["limits"]
    x, y = lim["line"].getData()
    assert 10 ** x[0] == pytest.approx(span["f1"]) and np.allclose(y, 0.1)
    assert "gain match</b>" in window.mismatch.summary.text()

    action(window, "undo").trigger()
    action(window, "undo").trigger()
    qtbot.waitUntil(lambda: tabs.count() == 1, timeout=5000)
    assert "channels" not in design_json(window) and not table.add_match.isEnabled()
    assert not [s for s in shown.errors()]
