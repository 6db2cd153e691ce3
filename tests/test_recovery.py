"""No lost work: each window autosaves its unsaved edits to a recovery file of its own,
locked while it lives; after a process is killed the next start offers to restore them;
a live window's file is never offered nor deleted; a file that does not open is kept.

The kills are real (SIGKILL of a running window process), not simulated; edits are typed
into the window (key events), and the start's question is answered by patching
``QMessageBox.question`` as a user's click would answer it.
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

pytestmark = pytest.mark.gui

# A window process: type R1 = <value> into the parts panel, then wait (autosave every 300 ms).
CHILD = textwrap.dedent("""
    import os, sys
    os.environ["QT_QPA_PLATFORM"] = "offscreen"
    from PySide6.QtCore import Qt
    from PySide6.QtTest import QTest
    from PySide6.QtWidgets import QApplication
    app = QApplication([])
    from tolspread.app.qt_main import make_window
    w = make_window(None)
    w.show()
    field = w.parts.rows["R1"].value
    field.setFocus()
    QTest.keyClick(field, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(field, sys.argv[1])
    QTest.keyClick(field, Qt.Key.Key_Return)
    print("edited", flush=True)
    app.exec()
""")


def start_child(tmp_path: Path, value: str) -> subprocess.Popen:
    env = dict(os.environ, TOLSPREAD_CONFIG_DIR=str(tmp_path), TOLSPREAD_AUTOSAVE_MS="300",
               QT_QPA_PLATFORM="offscreen")
    proc = subprocess.Popen([sys.executable, "-c", CHILD, value], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env=env, text=True)
    assert proc.stdout.readline().strip() == "edited", proc.stderr.read() if proc.poll() is not None else ""
    return proc


def wait_for_recovery_files(folder: Path, count: int) -> list[Path]:
    deadline = time.time() + 30
    while time.time() < deadline:  # the autosave timer writes them
        found = sorted(folder.glob("*.json"))
        if len(found) >= count and all(p.stat().st_size > 0 for p in found):
            return found
        time.sleep(0.05)
    raise AssertionError(f"no autosave: {sorted(folder.iterdir())}")


def kill(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGKILL)  # a crash: no chance to clean up
    proc.communicate(timeout=10)
    assert proc.returncode == -signal.SIGKILL


def r1_value_text(path: Path) -> str:
    saved = json.loads(path.read_text(encoding="utf-8"))
    return next(p for p in saved["parts"] if p["ref"] == "R1")["value"]


class Asked:
    """Answers the start's question as a click on ``answer`` would, and notes what was asked."""

    def __init__(self, monkeypatch, answer) -> None:
        from PySide6.QtWidgets import QMessageBox

        self.answer = answer
        self.texts: list[str] = []
        monkeypatch.setattr(QMessageBox, "question", staticmethod(self._question))

    def _question(self, parent, title, text, *args, **kwargs):
        self.texts.append(text)
        return self.answer


def new_window(qtbot):
    from tolspread.app.qt_main import make_window, offer_recovery

    w = make_window(None)
    qtbot.addWidget(w, before_close_func=lambda w: w.session.undo_stack.setClean())
    w.show()
    offer_recovery(w)  # what ``tolspread`` does right after showing the window
    return w


def type_value(w, ref: str, text: str) -> None:
    from PySide6.QtCore import Qt
    from PySide6.QtTest import QTest

    field = w.parts.rows[ref].value
    field.setFocus()
    QTest.keyClick(field, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    QTest.keyClicks(field, text)
    QTest.keyClick(field, Qt.Key.Key_Return)


def test_killed_window_leaves_a_recovery_file_that_restores(tmp_path, qtbot, monkeypatch):
    from PySide6.QtWidgets import QMessageBox

    proc = start_child(tmp_path, "3k3")
    try:
        (rec,) = wait_for_recovery_files(tmp_path / "recovery", 1)
        time.sleep(0.2)
    finally:
        kill(proc)
    assert r1_value_text(rec) == "3k3"

    # The next start offers the unsaved work; answering yes restores it as unsaved changes.
    monkeypatch.setenv("TOLSPREAD_CONFIG_DIR", str(tmp_path))
    asked = Asked(monkeypatch, QMessageBox.StandardButton.Yes)
    w = new_window(qtbot)
    assert len(asked.texts) == 1 and str(rec) in asked.texts[0]
    r1 = w.session.design.parts[w.session.design.part_index("R1")]
    assert r1.value == 3300.0
    assert w.session.dirty  # restored work is still unsaved
    assert not rec.exists() and w.recovery.path.exists(), "the restored work must live in the new window's file"
    assert r1_value_text(w.recovery.path) == "3k3"


def test_a_live_window_in_another_process_is_not_taken_for_a_crash(tmp_path, qtbot, monkeypatch):
    """Issue 11 #9: a second window treated a live window's recovery file as a crash and,
    answered No, deleted it."""
    from PySide6.QtWidgets import QMessageBox

    monkeypatch.setenv("TOLSPREAD_CONFIG_DIR", str(tmp_path))
    proc = start_child(tmp_path, "6k8")
    try:
        (rec,) = wait_for_recovery_files(tmp_path / "recovery", 1)
        asked = Asked(monkeypatch, QMessageBox.StandardButton.No)
        second = new_window(qtbot)
        assert asked.texts == [], "a live window's unsaved work was offered as a crash"
        assert rec.exists() and r1_value_text(rec) == "6k8"
        # the second window keeps its own file, and closing it leaves the live one alone
        type_value(second, "R2", "7k5")
        second.write_recovery()
        assert second.recovery.path != rec and second.recovery.path.exists()
        second.session.undo_stack.setClean()
        second.close()
        assert rec.exists() and not second.recovery.path.exists()
    finally:
        kill(proc)
    # now the first window is gone: its work is offered, and Yes restores it
    asked = Asked(monkeypatch, QMessageBox.StandardButton.Yes)
    third = new_window(qtbot)
    assert len(asked.texts) == 1
    assert third.session.design.parts[third.session.design.part_index("R1")].value == 6800.0


def test_two_windows_in_one_process_keep_their_own_files(qtbot, monkeypatch):
    from PySide6.QtWidgets import QMessageBox

    from tolspread.designfile import load

    asked = Asked(monkeypatch, QMessageBox.StandardButton.No)
    first = new_window(qtbot)
    type_value(first, "R1", "3k3")
    first.write_recovery()
    second = new_window(qtbot)
    assert asked.texts == [], "the first window's file was offered while it is open"
    type_value(second, "R1", "5k6")
    second.write_recovery()
    assert first.recovery.path != second.recovery.path
    assert load(first.recovery.path) == first.session.design
    assert load(second.recovery.path) == second.session.design
    assert r1_value_text(first.recovery.path) == "3k3" and r1_value_text(second.recovery.path) == "5k6"
    third = new_window(qtbot)  # a third start still offers neither
    assert asked.texts == []
    third.close()
    second.session.undo_stack.setClean()  # closed after Discard: only its own file goes
    second.close()
    assert not second.recovery.path.exists() and first.recovery.path.exists()


def test_a_recovery_file_that_does_not_open_is_kept_and_the_user_told(tmp_path, qtbot, monkeypatch):
    """Issue 11 #9: a recovery file the loader refuses restored nothing (a log line only)
    and was deleted on close."""
    from PySide6.QtWidgets import QMessageBox

    from tolspread.app import userfiles
    from tolspread.designfile import demo_text, loads
    from tolspread.errors import InputError

    bad = json.loads(demo_text())
    bad["parts"][0]["value"] = "1e16"  # beyond the 1e15 any part may have
    text = json.dumps(bad)
    with pytest.raises(InputError):  # the loader refuses it (the outside judge)
        loads(text)
    rec = userfiles.recovery_dir() / "20240101-000000-1-dead.json"
    rec.write_text(text, encoding="utf-8")
    asked = Asked(monkeypatch, QMessageBox.StandardButton.Yes)
    w = new_window(qtbot)
    assert len(asked.texts) == 1
    kept = list(userfiles.unreadable_dir().glob("*.json"))
    assert len(kept) == 1 and kept[0].read_text(encoding="utf-8") == text, "the unsaved work was not kept"
    assert str(kept[0]) in w.status_text.text() or str(kept[0]) in _problem_texts(w)
    assert not w.session.dirty
    w.close()
    assert kept[0].exists(), "closing the window deleted the kept work"
    assert new_window(qtbot) and len(asked.texts) == 1, "the kept file must not be offered again as a crash"


def _problem_texts(w) -> str:
    from PySide6.QtWidgets import QMessageBox

    return " ".join(b.text() for b in w.findChildren(QMessageBox))


@pytest.mark.parametrize("answer, stays", [("Cancel", True), ("No", False)])
def test_only_a_chosen_discard_deletes_left_work(qtbot, monkeypatch, answer, stays):
    from PySide6.QtWidgets import QMessageBox

    from tolspread.app import userfiles
    from tolspread.designfile import demo_text

    rec = userfiles.recovery_dir() / "20240101-000000-1-beef.json"
    rec.write_text(demo_text(), encoding="utf-8")
    asked = Asked(monkeypatch, getattr(QMessageBox.StandardButton, answer))
    w = new_window(qtbot)
    assert len(asked.texts) == 1 and not w.session.dirty
    assert rec.exists() == stays
    if stays:
        assert str(rec) in w.status_text.text()
        new_window(qtbot)  # kept for the next start: offered again
        assert len(asked.texts) == 2


def test_saving_clears_the_windows_own_recovery_file(tmp_path, qtbot, monkeypatch):
    from PySide6.QtWidgets import QFileDialog, QMessageBox

    Asked(monkeypatch, QMessageBox.StandardButton.No)
    w = new_window(qtbot)
    type_value(w, "R2", "7k5")
    w.write_recovery()
    assert w.recovery.path.exists()
    target = tmp_path / "saved.json"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(lambda *a, **k: (str(target), "")))
    w.act_save_as.trigger()
    assert target.exists() and not w.recovery.path.exists()
