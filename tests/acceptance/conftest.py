"""The acceptance layer: the program driven the way a person drives it.

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

import logging
import os
import re
import shutil
import subprocess
import sys
from dataclasses import dataclass, field
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QEvent, QObject, QTimer  # noqa: E402
from PySide6.QtGui import QAction  # noqa: E402
from PySide6.QtWidgets import QApplication, QDialog, QFileDialog, QMessageBox, QWidget  # noqa: E402

START_MS = 10_000   # a person waits this long for the first figures (the demo takes about 0.5 s)
WAIT_MS = 30_000
YIELD_RE = re.compile(r"yield (\d+(?:\.\d+)?) ?%")


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


# --- what the window showed --------------------------------------------------------------------
@dataclass
class Shown:
    """A dialog or message box that appeared on screen."""

    kind: str          # "message" or "dialog"
    title: str
    text: str
    icon: str = ""     # QMessageBox icon name ("Critical", "Warning", ...)


class ShowRecorder(QObject):
    """An application-wide event filter recording every message box and dialog shown."""

    def __init__(self) -> None:
        super().__init__()
        self.shown: list[Shown] = []

    def eventFilter(self, obj, event):  # noqa: N802 - Qt override
        if event.type() == QEvent.Type.Show and isinstance(obj, QDialog):
            if isinstance(obj, QMessageBox):
                self.shown.append(Shown("message", obj.windowTitle(), obj.text(), obj.icon().name))
            else:
                self.shown.append(Shown("dialog", obj.windowTitle(), obj.objectName()))
        return False

    def errors(self) -> list[Shown]:
        return [s for s in self.shown if s.kind == "message" and s.icon in ("Critical", "Warning")]


@dataclass
class Answers:
    """How the test answers the window's questions (static QMessageBox/QFileDialog calls)."""

    questions: list[tuple[str, str]] = field(default_factory=list)   # (title, text) asked
    question_answer: QMessageBox.StandardButton = QMessageBox.StandardButton.Discard
    recovery_answer: QMessageBox.StandardButton = QMessageBox.StandardButton.No
    save_paths: list[str] = field(default_factory=list)   # answers to getSaveFileName, in order
    open_paths: list[str] = field(default_factory=list)   # answers to getOpenFileName, in order
    file_dialogs: list[str] = field(default_factory=list)  # captions of the file dialogs asked

    def _question(self, parent, title, text, buttons=None, default=None):
        self.questions.append((title, text))
        if title.lower().startswith("restore"):
            return self.recovery_answer
        return self.question_answer

    def _save(self, parent=None, caption="", directory="", filter="", *args, **kwargs):  # noqa: A002
        self.file_dialogs.append(caption)
        return (self.save_paths.pop(0) if self.save_paths else "", "")

    def _open(self, parent=None, caption="", directory="", filter="", *args, **kwargs):  # noqa: A002
        self.file_dialogs.append(caption)
        return (self.open_paths.pop(0) if self.open_paths else "", "")


@pytest.fixture
def answers(monkeypatch) -> Answers:
    a = Answers()
    monkeypatch.setattr(QMessageBox, "question", staticmethod(a._question))
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(a._save))
    monkeypatch.setattr(QFileDialog, "getOpenFileName", staticmethod(a._open))
    return a


@pytest.fixture
def shown(qapp):
    rec = ShowRecorder()
    qapp.installEventFilter(rec)
    yield rec
    qapp.removeEventFilter(rec)


def user_dir() -> Path:
    """The folder of settings, log and recovery files (tests/conftest.py points it at tmp)."""
    from tolspread.app import userfiles

    return userfiles.config_dir()


def log_errors() -> str:
    """Errors the window wrote to its log (unexpected exceptions, failed evaluations)."""
    from tolspread.app import userfiles

    p = userfiles.log_path()
    if not p.exists():
        return ""
    return "\n".join(line for line in p.read_text(encoding="utf-8").splitlines() if " ERROR " in line)


def yield_shown(window) -> float | None:
    """The yield percentage the results panel shows, as a fraction (None if none yet)."""
    m = YIELD_RE.search(window.results.yield_label.text())
    return float(m.group(1)) / 100 if m else None


def main_windows() -> list[QWidget]:
    return [w for w in QApplication.topLevelWidgets() if w.objectName() == "tolspread_main"]


class Starter:
    """Starts ``tolspread [ARGS]`` through ``tolspread.app.cli.main`` and hands back its window."""

    def __init__(self, qtbot, monkeypatch, answers: Answers, shown: ShowRecorder) -> None:
        self.qtbot = qtbot
        self.monkeypatch = monkeypatch
        self.answers = answers
        self.shown = shown
        self.exec_calls = 0
        self.windows: list[QWidget] = []
        self._handlers = list(logging.getLogger("tolspread").handlers)

    def _fake_exec(self, *_args) -> int:
        self.exec_calls += 1
        return 0

    def launch(self, *args: str):
        """Run ``tolspread ARGS`` up to its event loop; returns the new main window."""
        from tolspread.app.cli import main

        before = set(map(id, main_windows()))
        hook_before = sys.excepthook
        with self.monkeypatch.context() as m:  # only main()'s own call returns at once
            m.setattr(QApplication, "exec", self._fake_exec)
            try:
                rc = main([str(a) for a in args])
            finally:
                _chain_hook(self.monkeypatch, hook_before)
        assert rc == 0, f"tolspread {' '.join(args)} returned {rc} before its event loop"
        assert self.exec_calls >= 1, "main() did not enter the event loop"
        new = [w for w in main_windows() if id(w) not in before]
        assert len(new) == 1, "tolspread did not open exactly one main window"
        w = new[0]
        self.windows.append(w)
        self.qtbot.addWidget(w, before_close_func=self._discard)
        self.qtbot.waitExposed(w)
        return w

    def wait_for_yield(self, window, timeout: int = START_MS) -> float:
        """Wait, as a person does, until the results panel shows a yield figure."""
        self.qtbot.waitUntil(lambda: yield_shown(window) is not None, timeout=timeout)
        return yield_shown(window)

    def _discard(self, w) -> None:
        self.answers.question_answer = QMessageBox.StandardButton.Discard

    def cleanup(self) -> None:
        for w in self.windows:
            try:
                if w.isVisible():
                    self.answers.question_answer = QMessageBox.StandardButton.Discard
                    w.close()
            except RuntimeError:  # already deleted by Qt
                pass
        log = logging.getLogger("tolspread")
        for h in list(log.handlers):
            if h not in self._handlers:
                log.removeHandler(h)
                h.close()


def _chain_hook(monkeypatch, pytest_hook) -> None:
    """Keep pytest-qt's exception capture (it fails the test) in front of the window's hook."""
    app_hook = sys.excepthook
    if app_hook is pytest_hook:
        return

    def chained(exc_type, exc, tb):
        pytest_hook(exc_type, exc, tb)
        app_hook(exc_type, exc, tb)

    monkeypatch.setattr(sys, "excepthook", chained)


def _no_evaluate_now(self):
    raise AssertionError("the acceptance layer never computes for the window: evaluate_now() was called")


@pytest.fixture
def starter(qtbot, monkeypatch, answers, shown):
    from tolspread.app.qt_session import Session

    monkeypatch.setattr(Session, "evaluate_now", _no_evaluate_now)  # nothing may do the window's job
    s = Starter(qtbot, monkeypatch, answers, shown)
    yield s
    s.cleanup()
    assert not log_errors(), f"the window logged errors:\n{log_errors()}"


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
