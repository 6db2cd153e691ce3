"""Starting the window as ``tolspread`` and ``tolspread FILE`` do, and waiting for the
first figures the way a person waits: nothing is computed for the window by the test.

The yield shown is checked against the library (``tolspread.temperature.judged_boards``:
over the operating range as analyze judges, and ``tolspread.stats.yield_estimate``) on the
design the window holds.
"""
from __future__ import annotations

import json

import pytest
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication, QMessageBox

from tolspread.designfile import demo_text, load, load_demo
from tolspread.temperature import judged_boards
from tolspread.stats import yield_estimate

from .conftest import START_MS, log_errors, main_windows, yield_shown

pytestmark = pytest.mark.gui


def library_yield(design) -> float:
    """The yield the library computes for ``design`` (the same boards the window samples),
    judged as the analysis judges them: over the operating range when it has one (the demo:
    -40..85 degC; tests/acceptance/test_demo_over_range_window.py counts that independently)."""
    a = design.analysis
    return yield_estimate(judged_boards(design).passed, None, a.confidence, a.interval).estimate


def small_design_file(tmp_path, samples: int = 2000, name: str = "small.json"):
    """The demo with fewer boards (a quicker first evaluation), written where a user keeps it."""
    d = json.loads(demo_text())
    d.setdefault("analysis", {})["samples"] = samples
    d["name"] = f"demo with {samples} boards (invented)"
    path = tmp_path / name
    path.write_text(json.dumps(d, indent=1), encoding="utf-8")
    return path


def test_tolspread_alone_shows_the_demo_yield_without_any_edit(starter):
    w = starter.launch()
    assert starter.wait_for_yield(w, timeout=START_MS) == pytest.approx(library_yield(load_demo()), abs=5e-5)
    assert w.plots.view is not None and w.session.undo_stack.count() == 0
    assert not w.session.dirty


def test_tolspread_file_shows_that_files_yield(starter, tmp_path):
    path = small_design_file(tmp_path)
    w = starter.launch(str(path))
    assert starter.wait_for_yield(w) == pytest.approx(library_yield(load(path)), abs=5e-5)
    assert path.name in w.windowTitle()


def test_restored_recovery_file_is_evaluated(starter, answers, tmp_path):
    """After a crash the next start offers the unsaved work; Yes restores it and computes it."""
    from tolspread.app import userfiles

    design_path = small_design_file(tmp_path, 1500)
    text = json.loads(design_path.read_text(encoding="utf-8"))
    text["parts"] = [dict(p, value="3k3") if p["ref"] == "R1" else p for p in text["parts"]]
    userfiles.recovery_path().write_text(json.dumps(text), encoding="utf-8")
    answers.recovery_answer = QMessageBox.StandardButton.Yes
    w = starter.launch()
    assert any(t.lower().startswith("restore") for t, _ in answers.questions), "no offer to restore"
    restored = w.session.design
    assert restored.parts[restored.part_index("R1")].value == pytest.approx(3300.0)
    assert w.session.dirty, "restored work must count as unsaved"
    assert starter.wait_for_yield(w) == pytest.approx(library_yield(restored), abs=5e-5)


def test_bad_design_file_exits_2_with_one_line_and_no_window(starter, tmp_path, capsys):
    from tolspread.app.cli import main

    bad = tmp_path / "bad.json"
    bad.write_text("{ not json", encoding="utf-8")
    before = len(main_windows())
    assert main([str(bad)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "bad.json" in err[0] and "Traceback" not in err[0]
    assert len(main_windows()) == before
    assert starter.exec_calls == 0


def test_real_event_loop_shows_the_yield_then_quit_returns_0(qapp, qtbot, answers, tmp_path):
    """The unpatched ``QApplication.exec()`` loop: a timer plays the person who waits for
    the yield and then chooses File > Quit; ``main`` returns the loop's exit status."""
    import sys

    from tolspread.app.cli import main

    path = small_design_file(tmp_path, 1000)
    seen: dict = {}
    hook_before = sys.excepthook
    qapp.setQuitOnLastWindowClosed(True)

    def person(deadline=[0]):  # noqa: B006 - a counter kept between timer shots
        wins = [w for w in main_windows() if w.isVisible()]
        if wins:
            w = wins[-1]
            seen["window"] = w
            y = yield_shown(w)
            if y is not None:
                seen["yield"] = y
                w.act_quit.trigger()
                return
        deadline[0] += 50
        if deadline[0] > START_MS:
            seen["timeout"] = True
            for w in wins:
                w.session.undo_stack.setClean()
                w.close()
            QApplication.quit()
            return
        QTimer.singleShot(50, person)

    QTimer.singleShot(0, person)
    try:
        rc = main([str(path)])
    finally:
        sys.excepthook = hook_before
    assert rc == 0
    assert "window" in seen, "no window was shown"
    assert not seen.get("timeout"), "no yield figure appeared within the wait"
    assert seen["yield"] == pytest.approx(library_yield(load(path)), abs=5e-5)
    assert not seen["window"].isVisible()
    assert not log_errors()


QUIT_CHILD = r'''
import sys
from PySide6.QtCore import QTimer
from PySide6.QtWidgets import QApplication, QMessageBox

asked = []


def answer(*args, **kwargs):  # the person answers "Discard"
    asked.append(args[1] if len(args) > 1 else "")
    return QMessageBox.StandardButton.Discard


QMessageBox.question = staticmethod(answer)
from tolspread.app.cli import main  # what the tolspread console script runs


def person(waited=[0]):  # waits for the yield (at most 10 s), makes an edit, quits
    wins = [w for w in QApplication.topLevelWidgets() if w.objectName() == "tolspread_main" and w.isVisible()]
    shown = wins and "yield" in wins[0].results.yield_label.text().replace("yield:", "")
    if not wins or (not shown and waited[0] < 10_000):
        waited[0] += 50
        QTimer.singleShot(50, person)
        return
    w = wins[0]
    w.span_table.add_phase.click()  # an edit: unsaved changes
    QTimer.singleShot(200, w.act_quit.trigger)


QTimer.singleShot(0, person)
rc = main(sys.argv[1:])
print("main returned", rc, "asked", len(asked), flush=True)
sys.exit(rc)
'''


def test_quit_with_unsaved_changes_discard_ends_the_process_cleanly(tmp_path):
    """issue 10 #4: File > Quit, Discard: the process ends at once with status 0 and no
    error (the error hook would show a modal box on a desktop and keep the process alive)."""
    import os
    import subprocess
    import sys

    env = dict(os.environ, TOLSPREAD_CONFIG_DIR=str(tmp_path / "cfg"), QT_QPA_PLATFORM="offscreen")
    path = small_design_file(tmp_path, 1000)
    proc = subprocess.run([sys.executable, "-c", QUIT_CHILD, str(path)], capture_output=True, text=True,
                          env=env, timeout=60)
    assert proc.returncode == 0, proc.stderr
    assert "main returned 0 asked 1" in proc.stdout, proc.stdout
    assert "Traceback" not in proc.stderr and "Error" not in proc.stderr, proc.stderr
    log = tmp_path / "cfg" / "tolspread.log"
    assert not log.exists() or " ERROR " not in log.read_text(encoding="utf-8")
