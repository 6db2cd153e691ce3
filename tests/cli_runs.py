"""Running the installed command line the way a user does (not a test module)."""
from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed


def run_cli(*args: str) -> subprocess.CompletedProcess:
    """``tolspread args...`` in a subprocess; never a traceback."""
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300)
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc


def analyze_json(design: Path, folder: Path, samples: int = 500) -> dict:
    """``tolspread analyze design --samples N --json file``: exit 0 and the file's contents."""
    out = folder / "result.json"
    proc = run_cli("analyze", str(design), "--samples", str(samples), "--json", str(out))
    assert proc.returncode == 0, proc.stderr
    return json.loads(out.read_text())


def refused_first_line(data: dict, folder: Path) -> str:
    """Write ``data`` as a design file, analyze it: exit 2; returns the first line of stderr."""
    path = folder / "bad.json"
    path.write_text(json.dumps(data))
    proc = run_cli("analyze", str(path), "--samples", "100")
    assert proc.returncode == 2, proc.stderr
    return proc.stderr.splitlines()[0]
