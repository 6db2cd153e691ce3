"""Architecture checks: the numerical library never imports Qt or the applications, the
command line works without importing Qt (DESIGN decision: filters/ is Qt-free), and what
pip installs is one package, ``tolspread`` (the repository's ``filters/`` and ``app/``)."""
from __future__ import annotations

import pkgutil
import subprocess
import sys

import tolspread


def _modules_after(code: str) -> set[str]:
    out = subprocess.run([sys.executable, "-c", code + "\nimport sys\nprint('\\n'.join(sys.modules))"],
                         capture_output=True, text=True, check=True).stdout
    return set(out.split())


def _library_modules() -> list[str]:
    """Every library module, sub-packages' modules too (tolspread.report.*), not the applications."""
    return sorted(m.name for m in pkgutil.walk_packages(tolspread.__path__, "tolspread.")
                  if not m.name.startswith("tolspread.app"))


def test_design_does_not_import_its_file_form():
    """Serialization lives in designfile, which imports design; design imports designfile
    nowhere, not even inside a function (the import cycle issue 12 #3 removes)."""
    import ast
    from pathlib import Path

    import tolspread.design

    tree = ast.parse(Path(tolspread.design.__file__).read_text(encoding="utf-8"))
    imported = {n.module or "" for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)}
    imported |= {a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names}
    assert not {m for m in imported if m.split(".")[-1] == "designfile"}
    assert not hasattr(tolspread.design.Design, "to_dict")


def test_every_library_module_is_free_of_qt_and_the_applications():
    modules = _library_modules()
    assert len(modules) > 20  # every module of filters/, not a chosen few
    mods = _modules_after("import " + ", ".join(modules))
    assert not {m for m in mods if m.split(".")[0] in ("PySide6", "pyqtgraph")}
    assert not {m for m in mods if m.startswith("tolspread.app")}


def test_command_line_analysis_does_not_import_qt():
    mods = _modules_after("from tolspread.app.cli import main\nmain(['analyze', '--samples', '50'])")
    assert not {m for m in mods if m.split(".")[0] in ("PySide6", "pyqtgraph")}


def test_one_installed_package_and_no_generic_top_level_names(tmp_path):
    # run from an empty folder, so the repository's own folders are not on the path
    for name in ("filters", "app"):
        proc = subprocess.run([sys.executable, "-c", f"import {name}"], cwd=tmp_path,
                              capture_output=True, text=True)
        assert proc.returncode != 0 and "ModuleNotFoundError" in proc.stderr, name
    proc = subprocess.run([sys.executable, "-c", "import tolspread, tolspread.app.cli; print(tolspread.__version__)"],
                          cwd=tmp_path, capture_output=True, text=True, check=True)
    assert proc.stdout.strip()
