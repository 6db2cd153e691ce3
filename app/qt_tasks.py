"""Long jobs (recommendation, report) on a worker thread, with progress and cancel.

A :class:`BackgroundTask` runs one function off the GUI thread. The function receives
``progress(done, total)`` and ``should_stop()`` callbacks; cancelling makes
``should_stop()`` true, and the library raises :class:`filters.errors.Cancelled` at its
next check, leaving nothing half-applied.
"""
from __future__ import annotations

import threading
import traceback
from typing import Any, Callable

from PySide6.QtCore import QObject, Qt, QThread, Signal

from ..errors import Cancelled, InputError


class _Runner(QObject):
    finished = Signal(object)
    failed = Signal(str, str)
    cancelled = Signal()
    progress = Signal(int, int)

    def __init__(self, fn: Callable[..., Any], stop: threading.Event) -> None:
        super().__init__()
        self._fn = fn
        self._stop = stop

    def run(self) -> None:
        try:
            out = self._fn(lambda d, t: self.progress.emit(int(d), int(t)), self._stop.is_set)
        except Cancelled:
            self.cancelled.emit()
        except InputError as exc:
            self.failed.emit(str(exc), "")
        except Exception as exc:  # noqa: BLE001 - reported to the user, never crashes the window
            self.failed.emit(f"{type(exc).__name__}: {exc}", traceback.format_exc())
        else:
            self.finished.emit(out)


class BackgroundTask(QObject):
    """Run ``fn(progress, should_stop)`` on a thread; signals arrive on the GUI thread."""

    finished = Signal(object)
    failed = Signal(str, str)
    cancelled = Signal()
    progress = Signal(int, int)

    def __init__(self, fn: Callable[..., Any], parent: QObject | None = None) -> None:
        super().__init__(parent)
        self._stop = threading.Event()
        self._thread = QThread()
        self._runner = _Runner(fn, self._stop)
        self._runner.moveToThread(self._thread)
        self._thread.started.connect(self._runner.run)
        for sig in ("finished", "failed", "cancelled"):  # direct: stop() waits on the GUI thread,
            # so a queued quit would only arrive after its wait ran out (QThread.quit is thread-safe)
            getattr(self._runner, sig).connect(self._thread.quit, Qt.ConnectionType.DirectConnection)
        self._runner.finished.connect(self.finished)
        self._runner.failed.connect(self.failed)
        self._runner.cancelled.connect(self.cancelled)
        self._runner.progress.connect(self.progress)

    def start(self) -> None:
        self._thread.start()

    def cancel(self) -> None:
        self._stop.set()

    def wait(self, ms: int = 10_000) -> bool:
        return self._thread.wait(ms)

    def stop(self, ms: int = 30_000) -> bool:
        """Cancel, drop every connection to the caller, and wait for the thread (the window
        is closing: no result may arrive in a widget being deleted). True if it ended."""
        self._stop.set()
        self.blockSignals(True)
        return self._thread.wait(ms)

    @property
    def running(self) -> bool:
        return self._thread.isRunning()
