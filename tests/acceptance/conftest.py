"""The acceptance layer: the program driven the way a person drives it.

The window is started by the starter shared with the window tests (tests/program_start.py).
The window is started through the console script's own function (``tolspread.app.cli.main``, what
``tolspread`` runs), never through ``make_window``/``evaluate_now`` or any private method.
``QApplication.exec`` is replaced by a call that returns at once, so ``main`` returns after
it has built, shown and offered recovery for the window; from then on ``qtbot`` runs the
real event loop while the test waits, as a person waits, for the yield figure to appear.
One test (``test_window_start.py``) runs the unpatched ``exec`` loop instead.

Modal dialogs are answered the way a person answers them: static ``QMessageBox`` and
``QFileDialog`` calls are replaced by answers the test chooses (recorded, so a test can
check what was asked), and every message box or dialog that is shown is recorded by an
application-wide event filter, so a test can check that no error dialog appeared.
Uncaught exceptions in Qt slots fail the test (pytest-qt's capture, chained in front of
the window's own error hook), and the window's error log must stay free of errors.
"""
from __future__ import annotations

import os
import shutil
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QTimer  # noqa: E402
from PySide6.QtGui import QAction  # noqa: E402
from PySide6.QtWidgets import QApplication, QDialog  # noqa: E402

# starting the window and what it showed: tests/program_start.py (shared with the window tests)
from program_start import (START_MS, WAIT_MS, answers, log_errors, main_windows, shown,  # noqa: E402,F401
                           starter, yield_shown)


# --- the command line --------------------------------------------------------------------------
def tolspread_command() -> list[str]:
    """The installed console script: next to this Python (a venv), else on PATH."""
    beside = Path(sys.executable).with_name("tolspread")
    if beside.exists():
        return [str(beside)]
    found = shutil.which("tolspread")
    assert found, "the tolspread console script is not installed (pip install -e '.[gui,test]')"
    return [found]


@dataclass
class Run:
    """One finished ``tolspread`` process."""

    args: list[str]
    returncode: int
    stdout: str
    stderr: str

    @property
    def err_lines(self) -> list[str]:
        return [line for line in self.stderr.splitlines() if line.strip()]


def run_cli(*args: str, cwd: Path | None = None, timeout: float = 120.0, env: dict | None = None) -> Run:
    """Run ``tolspread ARGS`` as a person does in a terminal (its own process)."""
    cmd = tolspread_command() + [str(a) for a in args]
    full_env = dict(os.environ, **(env or {}))
    proc = subprocess.run(cmd, capture_output=True, text=True, timeout=timeout, cwd=cwd, env=full_env,
                          encoding="utf-8")
    return Run(list(args), proc.returncode, proc.stdout, proc.stderr)


@pytest.fixture(scope="session")
def cli_env(tmp_path_factory) -> dict[str, str]:
    """User folders in a temporary place, for processes started by module-scoped fixtures
    (they run before the per-test isolation of tests/conftest.py applies)."""
    home = tmp_path_factory.mktemp("cli_home")
    return {"TOLSPREAD_CONFIG_DIR": str(home), "XDG_CONFIG_HOME": str(home),
            "TOLSPREAD_CACHE_DIR": str(tmp_path_factory.getbasetemp() / "cache"),
            "XDG_CACHE_HOME": str(home / "cache"), "QT_QPA_PLATFORM": "offscreen"}


@pytest.fixture
def window(starter):
    """``tolspread`` (the demo), its first figures shown."""
    w = starter.launch()
    w.resize(1600, 950)
    starter.wait_for_yield(w, timeout=START_MS)  # nothing is done for it (issue 10 #1)
    return w


def wait_idle(qtbot, window, timeout: int = WAIT_MS) -> None:
    """Wait until the window has no evaluation running and shows a yield."""
    qtbot.waitUntil(lambda: not window.session.busy and yield_shown(window) is not None, timeout=timeout)


def export_report_html(window, qtbot, answers, path: Path, timeout: int = 60_000) -> str:
    """File > Export report (HTML) as a user does it: the action, the save dialog answered
    with ``path``, then wait for the window's "report written"; returns the file's text."""
    answers.save_paths.append(str(path))
    hits = [a for a in window.findChildren(QAction) if a.objectName() == "report_html"]
    assert len(hits) == 1, "no single action named 'report_html'"
    hits[0].trigger()
    qtbot.waitUntil(lambda: path.exists() and "report written" in window.status_text.text(), timeout=timeout)
    return path.read_text(encoding="utf-8")


def close_later(cls=QDialog, answer=None, ms: int = 50, attempts: int = 400, patience_ms: int = 5000):
    """Answer the next modal dialog of type ``cls`` once it is open: ``answer(dialog)``
    (default: reject it, as Escape does). Polls like a person who waits for it to appear.

    A dialog still open ``patience_ms`` after its answer is rejected so the test cannot
    hang in its modal loop; ``state["stuck"]`` then says so (tests assert it is False)."""
    state = {"n": 0, "seen": None, "stuck": False}

    def give_up(dlg) -> None:
        try:
            if dlg.isVisible():
                state["stuck"] = True
                dlg.reject()
        except RuntimeError:  # deleted: it closed
            pass

    def poll():
        dlg = QApplication.activeModalWidget()
        if isinstance(dlg, cls) and dlg.isVisible():
            state["seen"] = dlg
            QTimer.singleShot(patience_ms, lambda: give_up(dlg))  # also if the answer fails
            (answer or (lambda d: d.reject()))(dlg)
            return
        state["n"] += 1
        if state["n"] < attempts:
            QTimer.singleShot(ms, poll)

    QTimer.singleShot(ms, poll)
    return state
