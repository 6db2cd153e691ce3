"""No lost work: unsaved edits are autosaved to a recovery file, and after the process is
killed the next start offers to restore them. The kill is real (SIGKILL of a running
window process), not simulated."""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import textwrap
import time

import pytest

pytestmark = pytest.mark.gui

CHILD = textwrap.dedent("""
    import os, sys
    os.environ["QT_QPA_PLATFORM"] = "offscreen"
    from PySide6.QtWidgets import QApplication
    app = QApplication([])
    from app.qt_main import make_window
    w = make_window(None)
    w.show()
    d = w.session.design
    w.session.apply(d.with_part("R1", value=3300.0, text="3k3"), "R1 value 3k3")
    print("edited", flush=True)
    app.exec()
""")


def test_killed_window_leaves_a_recovery_file_that_restores(tmp_path, qtbot, monkeypatch):
    from app import userfiles

    env = dict(os.environ, TOLSPREAD_CONFIG_DIR=str(tmp_path), TOLSPREAD_AUTOSAVE_MS="300",
               QT_QPA_PLATFORM="offscreen")
    proc = subprocess.Popen([sys.executable, "-c", CHILD], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            env=env, text=True)
    try:
        assert proc.stdout.readline().strip() == "edited"
        rec = tmp_path / "recovery.json"
        deadline = time.time() + 20
        while not rec.exists() and time.time() < deadline:  # the autosave timer writes it
            time.sleep(0.05)
        assert rec.exists(), "the window did not autosave its unsaved edit"
        time.sleep(0.2)
    finally:
        proc.send_signal(signal.SIGKILL)  # a crash: no chance to clean up
        proc.communicate(timeout=10)
    assert proc.returncode == -signal.SIGKILL
    saved = json.loads(rec.read_text(encoding="utf-8"))
    assert [p for p in saved["parts"] if p["ref"] == "R1"][0]["value"] == "3k3"

    # The next start offers the unsaved work; answering yes restores it as unsaved changes.
    monkeypatch.setenv("TOLSPREAD_CONFIG_DIR", str(tmp_path))
    assert userfiles.recovery_path() == rec
    from PySide6.QtWidgets import QMessageBox

    from app.qt_main import make_window, offer_recovery

    asked = []
    monkeypatch.setattr(QMessageBox, "question", lambda *a, **k: asked.append(a) or QMessageBox.StandardButton.Yes)
    w = make_window(None)
    qtbot.addWidget(w)
    offer_recovery(w)
    assert asked, "the start did not offer to restore"
    r1 = w.session.design.parts[w.session.design.part_index("R1")]
    assert r1.value == 3300.0
    assert w.session.dirty  # restored work is still unsaved
    w.session.undo_stack.setClean()
    w.close()


def test_declining_the_offer_removes_the_recovery_file(tmp_path, qtbot, monkeypatch):
    from PySide6.QtWidgets import QMessageBox

    from app import userfiles
    from app.qt_main import make_window, offer_recovery
    from filters.designfile import demo_text

    rec = userfiles.recovery_path()
    rec.write_text(demo_text(), encoding="utf-8")
    monkeypatch.setattr(QMessageBox, "question", lambda *a, **k: QMessageBox.StandardButton.No)
    w = make_window(None)
    qtbot.addWidget(w)
    offer_recovery(w)
    assert not rec.exists()
    assert not w.session.dirty
    w.close()


def test_saving_clears_the_recovery_file(tmp_path, qtbot):
    from app import userfiles
    from app.qt_main import make_window

    w = make_window(None)
    qtbot.addWidget(w)
    d = w.session.design
    w.session.apply(d.with_part("R2", value=7500.0, text="7k5"), "edit")
    w.write_recovery()
    assert userfiles.recovery_path().exists()
    assert w._save_to(tmp_path / "saved.json")
    assert not userfiles.recovery_path().exists()
    w.close()
