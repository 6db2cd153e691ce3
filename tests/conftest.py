"""Test settings shared by every module.

Qt runs offscreen (set before anything imports Qt), and settings, logs, recovery files and
the derivation cache go to temporary folders so tests never touch a user's files.
"""
from __future__ import annotations

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")

import pytest  # noqa: E402


@pytest.fixture(autouse=True)
def _isolated_user_files(tmp_path_factory, monkeypatch):
    home = tmp_path_factory.mktemp("home")
    monkeypatch.setenv("TOLSPREAD_CONFIG_DIR", str(home))
    monkeypatch.setenv("XDG_CONFIG_HOME", str(home))
    # the derivation cache: one temporary folder for the whole session (subprocesses reuse it)
    monkeypatch.setenv("TOLSPREAD_CACHE_DIR", str(tmp_path_factory.getbasetemp() / "cache"))
    monkeypatch.setenv("XDG_CACHE_HOME", str(home / "cache"))
    yield
