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
        if QApplication.instance() is None or QApplication.platformName() == "offscreen":
            sys.stderr.write(details)
            return
        box = QMessageBox(QMessageBox.Icon.Critical, "Unexpected error",
                          f"Something went wrong: {exc}\n\nYour design is still open. The details were "
                          f"written to {userfiles.log_path()}.", QMessageBox.StandardButton.Ok, parent_getter())
        box.setDetailedText(details)
        box.exec()

    sys.excepthook = hook


def make_window(design_path: str | None):
    """Create the session and main window (the demo design unless a path is given)."""
    from filters.designfile import load, load_demo

    from .qt_mainwindow import MainWindow
    from .qt_session import Session

    path = Path(design_path) if design_path else None
    design = load(path) if path else load_demo()
    session = Session(design, path)
    return MainWindow(session)


def offer_recovery(window) -> None:
    """After a crash: offer to restore the unsaved work found in the recovery file."""
    from PySide6.QtWidgets import QMessageBox


    rec = userfiles.recovery_path()
    if not rec.exists():
        return
    origin_file = rec.with_suffix(".origin")
    origin = origin_file.read_text(encoding="utf-8").strip() if origin_file.exists() else ""
    answer = QMessageBox.question(
        window, "Restore unsaved work?",
        "tolspread did not close normally last time. Restore the unsaved design it kept"
        f"{f' (from {origin})' if origin else ''}?")
    if answer == QMessageBox.StandardButton.Yes:
        restore_recovery(window)
    else:
        rec.unlink(missing_ok=True)


def restore_recovery(window) -> bool:
    """Load the recovery file into the window as unsaved changes; True if it worked."""
    from filters.designfile import load
    from filters.errors import InputError

    rec = userfiles.recovery_path()
    try:
        design = load(rec)
    except InputError as exc:
        log.warning("recovery file unusable: %s", exc)
        return False
    origin_file = rec.with_suffix(".origin")
    origin = origin_file.read_text(encoding="utf-8").strip() if origin_file.exists() else ""
    session = window.session
    session.replace_design(session.design, Path(origin) if origin else None)
    session.apply(design, "restore unsaved work")
    window.show_status("restored the unsaved work from the last session")
    return True


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
    window.show()
    offer_recovery(window)
    return app.exec()


def save_screenshot(window, path: Path) -> int:
    """Render the window after its first evaluation and save it as PNG."""
    from PySide6.QtWidgets import QApplication

    window.resize(1600, 950)
    window.show()
    QApplication.processEvents()
    window.session.evaluate_now()
    for _ in range(3):
        QApplication.processEvents()
    ok = window.grab().save(str(path), "PNG")
    window.session.undo_stack.setClean()
    window.close()
    if not ok:
        sys.stderr.write(f"tolspread: could not write {path}\n")
        return 2
    return 0
