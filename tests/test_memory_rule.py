"""The memory rule (filters/memory.py: a run keeps at most MAX_NUMBERS per-board numbers)
where the command line's analyze did not yet apply it: the window's evaluation, the
window's boards box, and a recommendation's check on a fresh seed (samples x
verify_factor boards). Each is refused before any work, in one line naming the field.

The bound is the project's own rule; the counts checked are MAX_NUMBERS // numbers per
board, computed here from the rule's definition (parts + metrics + spans).
"""
from __future__ import annotations

import subprocess
import sys
from dataclasses import replace
from pathlib import Path

import pytest

from benchmarks.memory import cascade
from tolspread.design import MAX_PARTS
from tolspread.designfile import save
from tolspread.errors import Cancelled, InputError
from tolspread.evaluate import prepare
from tolspread.liveview import ViewRequest, compute_view
from tolspread.memory import MAX_NUMBERS
from tolspread.recommend import recommend

ROOT = Path(__file__).resolve().parents[1]


def _stop() -> bool:
    return True  # a run that got past the rule stops at once (Cancelled), so no test can hang


@pytest.fixture(scope="module")
def big():
    """A design of MAX_PARTS parts and the most boards the rule lets it keep."""
    design = cascade(MAX_PARTS)
    prep = prepare(design)
    per = len(design.parts) + len(prep.nominal.metrics) + len(design.mask)  # the rule's count
    return design, prep, MAX_NUMBERS // per


def test_window_evaluation_refuses_boards_beyond_the_rule(big):
    design, prep, most = big
    over = replace(design, analysis=replace(design.analysis, samples=most + 1))
    with pytest.raises(InputError) as err:
        compute_view(ViewRequest(1, over), should_stop=_stop)
    assert err.value.path == "analysis.samples"
    assert f"at most {most:,} boards" in err.value.reason and f"not {most + 1:,}" in err.value.reason
    assert "\n" not in str(err.value)
    at_most = replace(design, analysis=replace(design.analysis, samples=most))
    with pytest.raises(Cancelled):  # at the bound: not refused (it starts and is stopped)
        compute_view(ViewRequest(2, at_most), should_stop=_stop)


def test_recommend_refuses_samples_whose_check_exceeds_the_rule(big):
    design, prep, most = big
    samples = most // 4 + 1  # 4 x samples boards for the check on a fresh seed: over the rule
    with pytest.raises(InputError) as err:
        recommend(design, 0.9, samples=samples, verify_factor=4, should_stop=_stop)
    assert err.value.path == "samples"
    assert f"at most {most:,} boards" in err.value.reason and "verify_factor 4" in err.value.reason
    with pytest.raises(Cancelled):  # within the rule: the search starts (and is stopped)
        recommend(design, 0.9, samples=most // 4, verify_factor=4, should_stop=_stop)


def test_command_line_recommend_refuses_in_one_line(big, tmp_path):
    design, prep, most = big
    path = tmp_path / "big.json"
    save(design, str(path))
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "recommend", str(path), "--target-yield", "0.9",
                           "--samples", str(most // 4 + 1)], capture_output=True, text=True, timeout=120,
                          cwd=ROOT)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "samples" in lines[0] and f"at most {most:,} boards" in lines[0], lines
    assert "Traceback" not in proc.stderr


@pytest.mark.gui
def test_window_boards_box_refuses_a_count_beyond_the_rule(qtbot, monkeypatch):
    pytest.importorskip("pytestqt")
    from PySide6.QtCore import Qt

    from tolspread.app.qt_main import make_window
    from tolspread import memory
    from tolspread.designfile import load_demo

    w = make_window(None)
    # closing must not ask about the unsaved edit (a modal box would wait for ever)
    qtbot.addWidget(w, before_close_func=lambda win: win.session.undo_stack.setClean())
    w.show()
    qtbot.waitExposed(w)
    qtbot.waitUntil(lambda: w.session.last_view is not None and not w.session.busy, timeout=15_000)
    before = w.session.design.analysis.samples
    prep = prepare(load_demo())
    per = len(prep.design.parts) + len(prep.nominal.metrics) + len(prep.design.mask)
    per *= 2  # the demo is judged over its range and after its life: its numbers count twice
    # the rule at a smaller bound, so the demo's boards box can reach it: at most before + 1000 boards
    monkeypatch.setattr(memory, "MAX_NUMBERS", per * (before + 1000))
    box = w.parts.samples

    def type_boards(text: str) -> None:
        box.setFocus()
        box.selectAll()
        qtbot.keyClicks(box, text)
        qtbot.keyClick(box, Qt.Key.Key_Return)

    type_boards(str(before + 5000))
    qtbot.waitUntil(lambda: w.parts.samples_problem.isVisible(), timeout=5_000)
    shown = w.parts.samples_problem.text()
    assert f"at most {before + 1000:,} boards" in shown and f"not {before + 5000:,}" in shown, shown
    assert w.session.design.analysis.samples == before and box.value() == before  # the design keeps its boards
    assert not w.session.undo_stack.canUndo()  # no edit was made
    type_boards(str(before + 500))  # within the rule: applied, the mark goes
    qtbot.waitUntil(lambda: w.session.design.analysis.samples == before + 500, timeout=5_000)
    assert not w.parts.samples_problem.isVisible()
    qtbot.waitUntil(lambda: not w.session.busy, timeout=15_000)
    w.session.undo_stack.setClean()
    w.close()
    w.session.shutdown()


def test_command_line_analyze_counts_every_channel(big, tmp_path):
    # Issue 15 item 6 with the memory rule: a board of two channels is evaluated as two rows
    # (filters/channel_match.py), so the rule counts its numbers twice. Counts from the rule's
    # own published limit (MAX_NUMBERS, memory.py), not hard-coded: a count the one-channel
    # design may run is refused, in one line naming --samples, for the two-channel one.
    from tolspread.channels import Channels
    from tolspread.memory import check_boards

    design, prep, most = big
    n = most // 2 + 1  # within the rule for one channel, over it for two
    check_boards(prep, n, "samples")  # one channel: allowed (no error)
    two = replace(design, channels=Channels(2))
    path = tmp_path / "two_channels.json"
    save(two, str(path))
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", str(path), "--samples", str(n)],
                          capture_output=True, text=True, timeout=120, cwd=ROOT)
    assert proc.returncode == 2, proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "samples" in lines[0] and f"at most {most // 2:,} boards" in lines[0], lines
    assert "2 channels" in lines[0] and "Traceback" not in proc.stderr
