"""Starting ``tolspread`` as a person does, for every window test: one starter shared by
the acceptance layer (tests/acceptance/conftest.py) and the window tests (test_window_core.py).

The window is started through the console script's own function (``tolspread.app.cli.main``,
what ``tolspread`` runs), never through ``make_window``/``evaluate_now`` or any private
method. ``QApplication.exec`` is replaced by a call that returns at once, so ``main``
returns after it has built, shown and offered recovery for the window; from then on
``qtbot`` runs the real event loop while the test waits, as a person waits, for figures.

Modal dialogs are answered the way a person answers them: static ``QMessageBox`` and
``QFileDialog`` calls are replaced by answers the test chooses (:class:`Answers`, recorded,
so a test can check what was asked), and every message box or dialog that is shown is
recorded by an application-wide event filter (:class:`ShowRecorder`). Uncaught exceptions
in Qt slots fail the test (pytest-qt's capture, chained in front of the window's own error
hook), and the window's error log must stay free of errors.

A test module outside tests/acceptance/ uses the fixtures by importing them:
``from program_start import answers, shown, starter  # noqa: F401 - fixtures``.
"""
from __future__ import annotations

import logging
import re
import sys
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path

import pytest

pytest.importorskip("PySide6")
pytest.importorskip("pytestqt")

from PySide6.QtCore import QEvent, QObject  # noqa: E402
from PySide6.QtWidgets import QApplication, QDialog, QFileDialog, QMessageBox, QWidget  # noqa: E402

START_MS = 10_000   # a person waits this long for the first figures (the demo takes about 0.5 s)
WAIT_MS = 30_000
YIELD_RE = re.compile(r"yield (\d+(?:\.\d+)?) ?%")


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


def install_answers(monkeypatch) -> Answers:
    """Answer the window's static QMessageBox and QFileDialog calls from a new :class:`Answers`."""
    a = Answers()
    monkeypatch.setattr(QMessageBox, "question", staticmethod(a._question))
    monkeypatch.setattr(QFileDialog, "getSaveFileName", staticmethod(a._save))
    monkeypatch.setattr(QFileDialog, "getOpenFileName", staticmethod(a._open))
    return a


@contextmanager
def recording(app):
    """A :class:`ShowRecorder` installed on ``app`` while the block runs."""
    rec = ShowRecorder()
    app.installEventFilter(rec)
    try:
        yield rec
    finally:
        app.removeEventFilter(rec)


@pytest.fixture
def answers(monkeypatch) -> Answers:
    return install_answers(monkeypatch)


@pytest.fixture
def shown(qapp):
    with recording(qapp) as rec:
        yield rec


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


@contextmanager
def starting(qtbot, monkeypatch, answers: Answers, shown: ShowRecorder):
    """A :class:`Starter` for the block; afterwards its windows are closed (unsaved work
    discarded) and the window's log must hold no error. ``Session.evaluate_now`` fails the
    test meanwhile: nothing may do the window's job."""
    from tolspread.app.qt_session import Session

    monkeypatch.setattr(Session, "evaluate_now", _no_evaluate_now)
    s = Starter(qtbot, monkeypatch, answers, shown)
    try:
        yield s
    finally:
        s.cleanup()
    assert not log_errors(), f"the window logged errors:\n{log_errors()}"


@contextmanager
def program(qtbot, monkeypatch):
    """The starter for a test that takes no fixtures of this module (answers and the
    recorder made here): ``with program(qtbot, monkeypatch) as starter: w = starter.launch()``."""
    with recording(QApplication.instance()) as rec, \
            starting(qtbot, monkeypatch, install_answers(monkeypatch), rec) as s:
        yield s


@pytest.fixture
def starter(qtbot, monkeypatch, answers, shown):
    with starting(qtbot, monkeypatch, answers, shown) as s:
        yield s


def wait_for_figures(qtbot, window, design=None, timeout: int = 60_000) -> None:
    """Wait until the window shows the full figures of ``design`` (default: its current
    one): no evaluation running, not a preview, and the results panel showing them.
    ``timeout`` in ms: a person's patience on a loaded machine (the tests do not measure speed)."""
    def shown_now() -> bool:
        v = window.session.last_view
        return (not window.session.busy and v is not None and not v.preview
                and v.design == (design or window.session.design) and window.results.view is v)
    qtbot.waitUntil(shown_now, timeout=timeout)

