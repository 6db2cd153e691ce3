"""Where the window keeps its own files: settings, the error log, the recovery file.

The folder is ``$TOLSPREAD_CONFIG_DIR`` when set (tests point it at a temporary folder),
else ``~/.config/tolspread`` (``%APPDATA%\\tolspread`` on Windows). No Qt here.
"""
from __future__ import annotations

import os
import sys
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
    """Unsaved work, written every minute while the window has unsaved changes."""
    return config_dir() / "recovery.json"


def settings_path() -> Path:
    return config_dir() / "settings.ini"
