"""Recovery files: each window keeps its unsaved work in a file of its own, held with a
lock (:class:`QLockFile`) while the window lives.

A start offers only files whose window is gone: their lock is free, or its owner process
no longer runs (a crash, kill -9). A live window's file is never offered nor touched.
Nothing is deleted that the user has not chosen to discard: a file that does not open is
moved, unchanged, to :func:`app.userfiles.unreadable_dir` and the user is told where; a
file the user neither restores nor discards is kept for the next start.
"""
from __future__ import annotations

import logging
import os
import time
from pathlib import Path

from PySide6.QtCore import QLockFile

from ..errors import InputError
from ..safeio import read_text, write_text_atomic

from . import userfiles

log = logging.getLogger("tolspread")
ORIGIN_LIMIT = 64 * 1024  # bytes: the origin file holds one path


class RecoveryFile:
    """One recovery file (``NAME.json``), its origin note (``NAME.origin``: the path the
    design was opened from, or empty) and its lock (``NAME.lock``)."""

    def __init__(self, path: Path) -> None:
        self.path = Path(path)
        self.origin_path = self.path.with_suffix(".origin")
        self._lock = QLockFile(str(self.path.with_suffix(".lock")))
        # only a dead owner frees a lock, never its age: a window may stay open for days
        self._lock.setStaleLockTime(0)

    @classmethod
    def for_new_window(cls) -> "RecoveryFile":
        """A fresh recovery file name, locked for the calling window."""
        rec = cls(userfiles.new_recovery_path())
        if not rec.claim():
            log.warning("could not lock the recovery file %s", rec.path)
        return rec

    def claim(self) -> bool:
        """Take the lock; False while another window (this process or another) holds it."""
        return self._lock.isLocked() or self._lock.tryLock(0)

    def release(self) -> None:
        if self._lock.isLocked():
            self._lock.unlock()

    def write(self, text: str, origin: str) -> None:
        """Write the unsaved design (atomically; raises InputError)."""
        write_text_atomic(self.path, text, backup=False)
        write_text_atomic(self.origin_path, origin, backup=False)

    def origin(self) -> str:
        """The path the design was opened from ("" when never saved or unreadable)."""
        try:
            return read_text(self.origin_path, ORIGIN_LIMIT, what="recovery origin").strip()
        except InputError:
            return ""

    def discard(self) -> None:
        """Delete the file and its origin note (the work was saved, restored elsewhere, or
        the user chose to discard it)."""
        self.path.unlink(missing_ok=True)
        self.origin_path.unlink(missing_ok=True)

    def set_aside(self) -> Path:
        """Move the file (and its origin note) unchanged to the unreadable folder; returns
        where it now is."""
        stamp = time.strftime("%Y%m%d-%H%M%S")
        kept = userfiles.unreadable_dir() / f"{self.path.stem}-{stamp}.json"
        os.replace(self.path, kept)
        if self.origin_path.exists():
            os.replace(self.origin_path, kept.with_suffix(".origin"))
        return kept


def left_behind() -> list[RecoveryFile]:
    """Recovery files whose window is gone, each locked by the caller while it decides
    (release, discard or restore it); a live window's file is not among them."""
    found = []
    for path in userfiles.recovery_files():
        rec = RecoveryFile(path)
        if rec.claim():
            found.append(rec)
    return found


def restore_into(window, rec: RecoveryFile) -> bool:
    """Load ``rec`` into ``window`` as unsaved changes; True if it worked.

    The work then lives in the window's own recovery file, and ``rec`` is removed. A file
    the loader refuses is kept, unchanged, in the unreadable folder, and the user is told
    where and why."""
    from ..designfile import load

    try:
        design = load(rec.path)
    except InputError as exc:
        try:
            kept = rec.set_aside()
        except OSError as move_error:  # cannot move it: leave it where it is, say so
            kept = rec.path
            log.warning("could not move the recovery file %s aside: %s", rec.path, move_error)
        rec.release()
        log.warning("recovery file does not open (kept at %s): %s", kept, exc)
        window.show_problem("The unsaved work could not be restored",
                            f"The recovery file does not open: {exc}\n\nIt was kept, unchanged, at\n{kept}\n"
                            "Correct it in a text editor and open it with File > Open.")
        return False
    origin = rec.origin()
    session = window.session
    session.replace_design(session.design, Path(origin) if origin else None)
    session.apply(design, "restore unsaved work")
    window.write_recovery()  # now kept by this window: the old file can go
    if window.recovery.path.exists():
        rec.discard()
    rec.release()
    window.show_status("restored the unsaved work from the last session")
    return True
