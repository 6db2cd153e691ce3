"""Where the window keeps its own files: settings, the error log, recovery files.

Each window keeps its unsaved work in a recovery file of its own in :func:`recovery_dir`
(``app/qt_recovery.py`` holds it with a lock while the window lives).

The folder is ``$TOLSPREAD_CONFIG_DIR`` when set (tests point it at a temporary folder),
else ``~/.config/tolspread`` (``%APPDATA%\\tolspread`` on Windows). No Qt here.
"""
from __future__ import annotations

import os
import secrets
import sys
import time
from pathlib import Path


def config_dir() -> Path:
    env = os.environ.get("TOLSPREAD_CONFIG_DIR")
    if env:
        base = Path(env)
    elif sys.platform == "win32" and os.environ.get("APPDATA"):
        base = Path(os.environ["APPDATA"]) / "tolspread"
    else:
        base = Path(os.environ.get("XDG_CONFIG_HOME", Path.home() / ".config")) / "tolspread"
    base.mkdir(parents=True, exist_ok=True)
    return base


def log_path() -> Path:
    """The error log: unexpected errors of the window, with their details."""
    return config_dir() / "tolspread.log"


def recovery_path() -> Path:
    """The single recovery file of earlier versions (one for every window). A start offers
    it like any recovery file a window left behind; windows no longer write it."""
    return config_dir() / "recovery.json"


def recovery_dir() -> Path:
    """The folder of the windows' recovery files (``NAME.json``, ``NAME.origin`` with the
    path the design came from, ``NAME.lock`` while its window lives)."""
    d = config_dir() / "recovery"
    d.mkdir(parents=True, exist_ok=True)
    return d


def new_recovery_path() -> Path:
    """A recovery file name no other window uses (time, process id, random suffix)."""
    return recovery_dir() / f"{time.strftime('%Y%m%d-%H%M%S')}-{os.getpid()}-{secrets.token_hex(4)}.json"


def recovery_files() -> list[Path]:
    """Every recovery file present, oldest name first (the earlier versions' single file
    last); whether its window still lives is for the caller to ask its lock."""
    found = sorted(recovery_dir().glob("*.json"))
    return found + ([recovery_path()] if recovery_path().exists() else [])


def unreadable_dir() -> Path:
    """Where a recovery file that does not open is kept, unchanged, for the user to mend."""
    d = recovery_dir() / "unreadable"
    d.mkdir(parents=True, exist_ok=True)
    return d


def settings_path() -> Path:
    return config_dir() / "settings.ini"
