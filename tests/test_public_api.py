"""The library's public surface (issue 12 item 7): every library module lists its names in
``__all__``, the curated top-level names are the modules' own and load on first use, and
README's "From a script" example runs and agrees with the command line."""
from __future__ import annotations

import importlib
import json
import pkgutil
import re
import shutil
import subprocess
import sys
from pathlib import Path

import tolspread

ROOT = Path(__file__).resolve().parents[1]


def _library_modules() -> list[str]:
    return sorted(m.name for m in pkgutil.iter_modules(tolspread.__path__) if m.name != "app")


def test_every_library_module_lists_its_public_names():
    for name in _library_modules():
        module = importlib.import_module(f"tolspread.{name}")
        assert isinstance(getattr(module, "__all__", None), list), name
        for public in module.__all__:
            assert not public.startswith("_") and hasattr(module, public), (name, public)


def test_top_level_names_are_the_modules_own_and_load_on_first_use():
    code = ("import sys, tolspread\n"
            "print(int('numpy' in sys.modules), int('tolspread.analysis' in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout
    assert out.split() == ["0", "0"]  # import tolspread alone loads no numerics
    for name in tolspread.__all__:
        if name == "__version__":
            continue
        module, attribute = tolspread._PUBLIC[name]
        assert getattr(tolspread, name) is getattr(importlib.import_module(f"tolspread.{module}"), attribute)


def test_readme_script_example_runs_and_agrees_with_the_command_line(tmp_path):
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## From a script", 1)[1].split("\n## ", 1)[0]
    code = re.search(r"```python\n(.*?)```", section, flags=re.S).group(1)
    run = subprocess.run([sys.executable, "-c", code], cwd=tmp_path, capture_output=True, text=True, timeout=300)
    assert run.returncode == 0, run.stderr
    m = re.search(r"(\d+) of (\d+) boards", run.stdout)
    assert m, run.stdout
    # the same design, boards and seed through the installed command (an independent path)
    tool = shutil.which("tolspread", path=str(Path(sys.executable).parent)) or "tolspread"
    cli = subprocess.run([tool, "analyze", "--samples", m.group(2), "--seed", "1", "--json", "-"],
                         capture_output=True, text=True, timeout=300, check=True)
    data = json.loads(cli.stdout[cli.stdout.index("{"):])
    assert (data["yield"]["passed"], data["yield"]["samples"]) == (int(m.group(1)), int(m.group(2)))
