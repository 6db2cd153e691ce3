"""Starting the window: the application object, error handling, recovery, screenshots."""
from __future__ import annotations

import logging
import os
import sys
import traceback
from pathlib import Path

from . import userfiles

log = logging.getLogger("tolspread")


def _setup_log() -> None:
    handler = logging.FileHandler(userfiles.log_path(), encoding="utf-8")
    handler.setFormatter(logging.Formatter("%(asctime)s %(levelname)s %(message)s"))
    log.addHandler(handler)
    log.setLevel(logging.INFO)


def install_error_hook(parent_getter) -> None:
    """Unexpected exceptions are logged and shown in a dialog; the window stays open."""
    from PySide6.QtWidgets import QApplication, QMessageBox

    def hook(exc_type, exc, tb) -> None:
        details = "".join(traceback.format_exception(exc_type, exc, tb))
        log.error("unexpected error\n%s", details)
        parent = _alive(parent_getter)
        if (QApplication.instance() is None or QApplication.platformName() == "offscreen"
                or QApplication.closingDown() or parent is None or not parent.isVisible()):
            # no window to return to (closed or closing): a dialog now would keep the
            # process alive behind a window the user already closed
            sys.stderr.write(details)
            return
        box = QMessageBox(QMessageBox.Icon.Critical, "Unexpected error",
                          f"Something went wrong: {exc}\n\nYour design is still open. The details were "
                          f"written to {userfiles.log_path()}.", QMessageBox.StandardButton.Ok, parent)
        box.setDetailedText(details)
        box.exec()

    sys.excepthook = hook


def _alive(getter):
    """The widget ``getter()`` returns, or None when it is gone (deleted by Qt)."""
    try:
        w = getter()
        if w is not None:
            w.isVisible()  # raises RuntimeError once the C++ object is deleted
        return w
    except RuntimeError:
        return None


def make_window(design_path: str | None):
    """Create the session and main window (the demo design unless a path is given)."""
    from ..designfile import load, load_demo

    from .qt_mainwindow import MainWindow
    from .qt_session import Session

    path = Path(design_path) if design_path else None
    design = load(path) if path else load_demo()
    session = Session(design, path)
    return MainWindow(session)


def offer_recovery(window) -> None:
    """After a crash: offer to restore the unsaved work each window that is gone left.

    Only files whose window no longer lives are offered (app/qt_recovery.py); Yes restores
    one into ``window``, No discards it, Cancel (or Escape) keeps it for the next start."""
    from PySide6.QtWidgets import QMessageBox

    from .qt_recovery import left_behind, restore_into

    restored = False
    kept: list[Path] = []
    for rec in left_behind():
        if restored:  # this window holds restored work already: keep the rest for later
            kept.append(rec.path)
            rec.release()
            continue
        origin = rec.origin()
        B = QMessageBox.StandardButton
        answer = QMessageBox.question(
            window, "Restore unsaved work?",
            "A tolspread window did not close normally and left unsaved work"
            f"{f' (a design from {origin})' if origin else ''}, kept in {rec.path}.\n\n"
            "Yes restores it here. No discards it. Cancel keeps it for the next start.",
            B.Yes | B.No | B.Cancel, B.Yes)
        if answer == B.Yes:
            restored = restore_into(window, rec)
        elif answer in (B.No, B.Discard):
            rec.discard()
            rec.release()
        else:
            kept.append(rec.path)
            rec.release()
    if kept:
        window.show_status(f"kept {len(kept)} unsaved design{'s' if len(kept) > 1 else ''} for the next "
                           f"start: {', '.join(str(p) for p in kept)}")


def restore_recovery(window, path: Path | None = None) -> bool:
    """Restore the recovery file ``path`` (default: the first one whose window is gone)
    into ``window`` as unsaved changes; True if it worked."""
    from .qt_recovery import RecoveryFile, left_behind, restore_into

    if path is None:
        found = left_behind()
        for other in found[1:]:
            other.release()
        if not found:
            return False
        rec = found[0]
    else:
        rec = RecoveryFile(path)
        if not rec.claim():
            return False  # its window still lives
    return restore_into(window, rec)


def run_window(design_path: str | None, screenshot: str | None) -> int:
    """``tolspread [DESIGN]`` and ``tolspread --screenshot PNG [DESIGN]``."""
    if screenshot and not os.environ.get("QT_QPA_PLATFORM"):
        os.environ["QT_QPA_PLATFORM"] = "offscreen"
    from PySide6.QtWidgets import QApplication

    _setup_log()
    app = QApplication.instance() or QApplication(sys.argv[:1])
    app.setApplicationName("tolspread")
    window = make_window(design_path)
    install_error_hook(lambda: window)
    if screenshot:
        return save_screenshot(window, Path(screenshot))
    # also when the loop ends without closeEvent (logout, a signal): stop the threads first
    app.aboutToQuit.connect(window.stop_background_work)
    window.show()
    offer_recovery(window)
    return app.exec()


SCREENSHOT_TIMEOUT_S = 300


def save_screenshot(window, path: Path, timeout_s: float = SCREENSHOT_TIMEOUT_S) -> int:
    """Show the window as ``tolspread`` does, wait in its event loop for the first real
    result (the worker's, with the spread budget), then save the window as PNG (1600x950).

    Exit status 2 when the evaluation fails, does not finish within ``timeout_s`` seconds,
    or the file cannot be written."""
    from PySide6.QtCore import QEventLoop, QTimer

    window.resize(1600, 950)
    window.show()
    session = window.session
    outcome: dict[str, str] = {}
    loop = QEventLoop()

    def done(_view) -> None:
        outcome.setdefault("ok", "")
        loop.quit()

    def failed(message: str, _details: str) -> None:
        outcome.setdefault("failed", message)
        loop.quit()

    session.view_ready.connect(done)
    session.evaluation_failed.connect(failed)
    timer = QTimer()
    timer.setSingleShot(True)
    timer.timeout.connect(lambda: (outcome.setdefault("failed", f"no result after {timeout_s:g} s"), loop.quit()))
    timer.start(int(1000 * timeout_s))
    if session.busy or session.last_view is None:
        loop.exec()
    timer.stop()
    session.view_ready.disconnect(done)
    session.evaluation_failed.disconnect(failed)
    ok = False
    if "failed" not in outcome:
        # let the results, plots and layout paint the new figures before the grab
        pause = QEventLoop()
        QTimer.singleShot(300, pause.quit)
        pause.exec()
        ok = window.grab().save(str(path), "PNG")
    window.session.undo_stack.setClean()
    window.close()
    if "failed" in outcome:
        sys.stderr.write(f"tolspread: no screenshot: the evaluation did not finish ({outcome['failed']})\n")
        return 2
    if not ok:
        sys.stderr.write(f"tolspread: could not write {path}\n")
        return 2
    return 0
