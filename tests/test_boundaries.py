"""Architecture checks: the numerical library never imports Qt or the applications, and
the command line works without importing Qt (DESIGN decision: filters/ is Qt-free)."""
from __future__ import annotations

import subprocess
import sys


def _modules_after(code: str) -> set[str]:
    out = subprocess.run([sys.executable, "-c", code + "\nimport sys\nprint('\\n'.join(sys.modules))"],
                         capture_output=True, text=True, check=True).stdout
    return set(out.split())


def test_filters_never_imports_qt_or_app():
    mods = _modules_after("import filters.analysis, filters.designfile, filters.evaluate")
    assert not {m for m in mods if m.split(".")[0] in ("PySide6", "pyqtgraph", "app")}


def test_command_line_analysis_does_not_import_qt():
    mods = _modules_after("from app.cli import main\nmain(['analyze', '--samples', '50'])")
    assert not {m for m in mods if m.split(".")[0] in ("PySide6", "pyqtgraph")}
