"""Metric names, units and span labels (tolspread.metric_names; issue 12, item 2).

Two defects came from names built and parsed in many places:
  1. a phase span's margin printed as "margin of 'phase floor' (dB)", its corner values in dB
     and its sensitivity in "dB per %" (they are degrees; a delay span's are seconds);
  2. two spans of one name passed validation and merged: 5 spans gave 4 margin budgets.

References used below:
  [SK]   unity-gain Sallen-Key low-pass, H(s) = 1 / (s^2 R1 R2 C1 C2 + s C2 (R1 + R2) + 1)
         (Karki, TI SLOA024; tests/REFERENCES.md section 6), evaluated with
         ``scipy.signal.freqs``; the demo is two such stages in cascade.
  [UNIT] common practice: frequencies in Hz, gains in dB, phase in degrees, delay in
         seconds, Q a plain ratio; frequencies and Q spread on a log scale.
"""
from __future__ import annotations

import html
import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import signal

from tolspread import metric_names as mn
from tolspread.budget import metric_columns
from tolspread.design import design_from_dict
from tolspread.designfile import load
from tolspread.errors import ValidationError
from tolspread.evaluate import evaluate
from tolspread.mask import Span
from tolspread.values import parse_value

from demo_texts import demo_at_25c_text  # shared: tests/demo_texts.py (the demo without its range)

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "filters" / "data" / "demo_design.json"
EXAMPLES = sorted((ROOT / "assets" / "examples").glob("*.json"))
TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
PHASE_F2, PHASE_LIMIT = 200.0, -30.0


def run_tolspread(*args: str) -> subprocess.CompletedProcess:
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300)
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc


def demo_dict() -> dict:
    # the demo at 25 degC (its operating range and life cut out: tests/demo_texts.py), so each
    # margin has one row per table here; over a range the same units are in more tables
    return json.loads(demo_at_25c_text())


def phase_design(tmp_path: Path) -> Path:
    """The demo plus a phase floor over 10-200 Hz and a delay-variation span."""
    d = demo_dict()
    d["mask"].append({"name": "phase floor", "quantity": "phase", "kind": "floor", "f1": 10, "f2": PHASE_F2,
                      "limit1": PHASE_LIMIT})
    d["mask"].append({"name": "delay wobble", "quantity": "delay", "kind": "variation", "f1": 10, "f2": 1000,
                      "limit1": 2e-5})
    path = tmp_path / "phase.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    return path


def demo_phase_deg(f_hz: float) -> float:
    """[SK] the nominal demo's phase at ``f_hz`` (deg), from the closed form and scipy."""
    d = demo_dict()
    value = {p["ref"]: parse_value(p["value"], p["ref"]) for p in d["parts"]}
    h = 1.0 + 0j
    for st in d["stages"]:
        r1, r2, c1, c2 = (value[st["parts"][role]] for role in ("R1", "R2", "C1", "C2"))
        _, hs = signal.freqs([1.0], [r1 * r2 * c1 * c2, c2 * (r1 + r2), 1.0], worN=[2 * math.pi * f_hz])
        h *= hs[0]
    return math.degrees(np.angle(h))


def row(text: str, start: str) -> str:
    hits = [line for line in text.splitlines() if line.strip().startswith(start)]
    assert len(hits) == 1, (start, text)
    return hits[0]


# --- defect 1: a phase span's margin is in degrees, a delay span's in seconds -----------------

def test_phase_and_delay_margins_carry_their_units_through_the_command_line(tmp_path):
    path = phase_design(tmp_path)
    report = tmp_path / "report.html"
    proc = run_tolspread("analyze", str(path), "--samples", "300", "--seed", "1", "--report", str(report))
    assert proc.returncode == 0, proc.stderr
    out = proc.stdout
    page = html.unescape(report.read_text(encoding="utf-8"))
    assert "margin of 'phase floor' (deg)" in page and "margin of 'phase floor' (dB)" not in page
    assert "deg per %" in page and "margin of 'delay wobble' (s)" in page
    # [SK] a low-pass's phase falls with frequency, so the floor's smallest margin is at f2
    nominal = demo_phase_deg(PHASE_F2) - PHASE_LIMIT
    span_row = row(out, "phase floor")
    assert "dB" not in span_row and span_row.count(" deg") == 2, span_row
    assert float(span_row.split()[-2]) == pytest.approx(nominal, abs=0.006)  # printed to 0.01 deg
    label = "margin of 'phase floor' (deg)"
    assert "margin of 'phase floor' (dB)" not in out
    budget_row, corner_row = [line for line in out.splitlines() if line.strip().startswith(label)]
    assert "%" in budget_row
    assert "dB" not in corner_row.replace(label, "") and corner_row.count(" deg") == 5, corner_row
    delay_rows = [line for line in out.splitlines() if line.strip().startswith("margin of 'delay wobble' (s)")]
    assert len(delay_rows) == 2 and "dB" not in delay_rows[1] and "us" in delay_rows[1], delay_rows

    proc = run_tolspread("analyze", str(path), "--samples", "300", "--seed", "1", "--json", "-")
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(proc.stdout)
    spans = {s["name"]: s for s in doc["yield"]["spans"]}
    assert (spans["phase floor"]["unit"], spans["delay wobble"]["unit"], spans["corner floor"]["unit"]) == \
        ("deg", "s", "dB")  # [UNIT]
    corner = doc["corners"]["metrics"]["margin.phase floor"]
    assert corner["unit"] == "deg"
    assert corner["nominal"] == pytest.approx(nominal, abs=1e-6)  # [SK] in degrees, not dB
    assert doc["corners"]["metrics"]["margin.delay wobble"]["unit"] == "s"
    budget = doc["budget"]["margin.phase floor"]
    assert budget["unit"] == "deg" and {e["sensitivity_unit"] for e in budget["parts"]} == {"deg per %"}
    assert {e["sensitivity_unit"] for e in doc["budget"]["margin.delay wobble"]["parts"]} == {"s per %"}
    assert doc["metrics"]["cutoff_hz"]["unit"] == "Hz" and doc["metrics"]["s2.q"]["unit"] == ""  # [UNIT]
    # six spans, six of everything (defect 2's count)
    margins = [n for n in doc["budget"] if n.startswith("margin.")]
    assert len(doc["yield"]["spans"]) == 6 and len(margins) == 6
    assert len([n for n in doc["corners"]["metrics"] if n.startswith("margin.")]) == 6


# --- defect 2: two spans of one name --------------------------------------------------------

def test_two_spans_of_one_name_are_refused_with_the_field_path(tmp_path):
    d = demo_dict()
    d["mask"].append(dict(d["mask"][0], f1=20, limit1=-0.4))  # a second "passband floor"
    path = tmp_path / "twins.json"
    path.write_text(json.dumps(d), encoding="utf-8")
    proc = run_tolspread("analyze", str(path), "--samples", "100")
    assert proc.returncode == 2
    assert proc.stderr.strip().count("\n") == 0, proc.stderr  # one line
    assert "mask[4].name" in proc.stderr
    assert ("two spans are named 'passband floor' (mask[0] and mask[4]); span names must be unique"
            in proc.stderr)


def test_unnamed_spans_of_one_label_are_refused():
    d = demo_dict()
    span = {"quantity": "gain", "kind": "floor", "f1": 20, "f2": 50, "limit1": -1, "relative": True}
    d["mask"] = [span, dict(span, limit1=-2)]
    with pytest.raises(ValidationError) as info:
        design_from_dict(d)
    (problem,) = info.value.problems
    assert problem.path == "mask[1].name"
    assert "labelled 'gain floor 20-50 Hz'" in problem.reason and "(mask[0] and mask[1])" in problem.reason


# --- the module: every name the demo and the examples make -----------------------------------

@pytest.mark.parametrize("path", [DEMO, *EXAMPLES], ids=lambda p: p.stem)
def test_every_metric_name_round_trips_and_has_a_unit(path):
    design = load(path)
    names = list(metric_columns(evaluate(design, samples=8, seed=1)))
    assert names
    stage_names = [s.name for s in design.stages]
    for name in names:
        mid = mn.parse(name)
        assert mid.name == name
        u = mn.unit(name, design.mask)
        assert u in ("Hz", "dB", "deg", "s", "")
        label = mn.metric_label(name, stage_names, design.mask)
        assert label == (f"{mn.metric_words(name, stage_names)} ({u})" if u else mn.metric_words(name, stage_names))
        # [UNIT] log scale exactly for frequencies and Q
        assert mn.is_log_metric(name) == (u == "Hz" or mid.quantity == "q")
        assert mn.sensitivity_unit(name, design.mask) == ("ln/ln" if mn.is_log_metric(name) else f"{u} per %")
    assert [n for n in names if mn.is_margin(n)] == mn.margin_names(design.mask)


def test_built_names_parse_back():
    assert mn.stage_metric_name(3, "q", 2) == "s3.p2.q"
    assert mn.parse("s3.p2.q") == mn.MetricId("stage", "q", stage=3, pair=2)
    assert mn.parse(mn.stage_metric_name(12, "f0_hz")).stage == 12
    assert mn.parse(mn.attenuation_name(4000.0)).freq_hz == 4000.0
    assert mn.parse(mn.margin_name("a.b_hz")) == mn.MetricId("margin", "margin", span="a.b_hz")
    for bad in ("s0.q", "s1.p1.fc_hz", "s1.x", "attenuation_db@x", "attenuation_db@-5", "cutoff", ""):
        with pytest.raises(ValueError):
            mn.parse(bad)
    with pytest.raises(ValueError):
        mn.stage_metric_name(0, "q")


def test_units_labels_and_scale_by_kind():
    mask = (Span(kind="floor", f1=10, f2=20, limit1=-30, quantity="phase", name="p_hz"),
            Span(kind="variation", f1=10, f2=20, limit1=1e-4, quantity="delay", name="d"),
            Span(kind="ceiling", f1=10, f2=20, limit1=1.0, name="g"))
    # [UNIT] each quantity's unit
    assert [mn.unit(mn.margin_name(s), mask) for s in mask] == ["deg", "s", "dB"]
    assert mn.metric_label("margin.p_hz", None, mask) == "margin of 'p_hz' (deg)"
    assert not mn.is_log_metric("margin.p_hz")  # a span named like a frequency is still linear
    assert mn.metric_label("s2.q", ["input", "output"]) == "output Q"
    assert mn.metric_label("s1.p2.f0_hz") == "stage 1 pair 2 f0 (Hz)"
    assert mn.metric_label("attenuation_db@4000") == "attenuation at 4 kHz (dB)"
    assert mn.unit("reference_db") == "dB" and mn.unit("bandwidth_hz") == "Hz"
    with pytest.raises(ValueError):
        mn.unit("margin.g")  # a margin's unit is its span's: never guessed
    with pytest.raises(ValueError):
        mn.unit("margin.other", mask)


def test_unique_span_names():
    mask = (Span(kind="floor", f1=10, f2=20, limit1=-1, name="floor 3"),
            Span(kind="floor", f1=10, f2=20, limit1=-1, name="phase floor"))
    assert mn.unique_span_name("floor", mask, first=3) == "floor 4"
    assert mn.unique_span_name("floor", mask, first=1) == "floor 1"
    assert mn.unique_span_name("phase floor", mask) == "phase floor 2"
    assert mn.unique_span_name("delay variation", mask) == "delay variation"
    assert mn.duplicate_label(mask) is None
    assert mn.duplicate_label(mask + (mask[0],)) == (0, 2)


# --- the window: drawn spans never share a name --------------------------------------------

@pytest.mark.gui
def test_drawing_spans_in_the_window_gives_unique_names(qtbot, monkeypatch):
    """Draw a floor, delete another floor, draw a floor again: the old numbering (spans of
    the kind + 1) named both drawn spans "floor 3"."""
    pytest.importorskip("pytestqt")
    from PySide6.QtCore import QPoint, QPointF, Qt
    from PySide6.QtTest import QTest

    from program_start import program, wait_for_figures

    with program(qtbot, monkeypatch) as starter:
        w = starter.launch()
        wait_for_figures(qtbot, w)
        actions = {a.objectName(): a for a in w.findChildren(type(w.act_floor))}

        def draw_floor(f_a: float, f_b: float, db: float) -> None:
            n = len(w.session.design.mask)
            actions["draw_floor"].trigger()
            vp = w.plots.canvas.viewport()
            pix = [w.plots.canvas.mapFromScene(w.plots.mag.vb.mapViewToScene(QPointF(math.log10(f), y)))
                   for f, y in ((f_a, db), (f_b, db - 10))]
            QTest.mouseMove(vp, pix[0])
            QTest.mousePress(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pix[0])
            for t in np.linspace(0.1, 1.0, 10):
                qtbot.wait(12)  # pyqtgraph drops moves closer than 10 ms apart
                QTest.mouseMove(vp, QPoint(round(pix[0].x() + t * (pix[1].x() - pix[0].x())),
                                           round(pix[0].y() + t * (pix[1].y() - pix[0].y()))))
            qtbot.wait(12)
            QTest.mouseRelease(vp, Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, pix[1])
            qtbot.waitUntil(lambda: len(w.session.design.mask) == n + 1, timeout=60_000)
            wait_for_figures(qtbot, w)

        draw_floor(20.0, 60.0, -20.0)
        table = w.span_table.table
        names = [table.item(i, 0).text() for i in range(table.rowCount())]
        first = names.index("passband floor")
        rect = table.visualItemRect(table.item(first, 1))
        QTest.mouseClick(table.viewport(), Qt.MouseButton.LeftButton, Qt.KeyboardModifier.NoModifier, rect.center())
        actions["delete_span"].trigger()
        qtbot.waitUntil(lambda: "passband floor" not in [s.label for s in w.session.design.mask], timeout=60_000)
        wait_for_figures(qtbot, w)
        draw_floor(100.0, 300.0, -20.0)
        labels = [s.label for s in w.session.design.mask]
        assert len(labels) == len(set(labels)), labels
        drawn = labels[-2:]
        assert drawn[0].startswith("floor ") and drawn[1].startswith("floor "), labels
        shown = [table.item(i, 0).text() for i in range(table.rowCount())]
        assert shown == labels
        assert len(set(w.results.chooser.itemText(i) for i in range(w.results.chooser.count()))) == \
            w.results.chooser.count()
