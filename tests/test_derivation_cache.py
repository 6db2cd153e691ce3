"""The derivation cache (filters.derivation_cache) and start-up (issue 12, item 8).

References used below:
  [PIN]    ``tolspread analyze --samples 2000 --seed 3 --json -`` of the demo, recorded from
           the code before the start-up work (tests/pins/demo_analyze_2000_seed3.json; 2
           cores, numpy 2.x, OpenBLAS): a regression pin, not an outside truth. Caching the
           derivation must not move a single number.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import pytest

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
PIN = Path(__file__).parent / "pins" / "demo_analyze_2000_seed3.json"


def run_tolspread(*args: str, env: dict[str, str] | None = None) -> subprocess.CompletedProcess:
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300, env=env)
    assert "Traceback" not in proc.stderr, proc.stderr
    return proc


def same_numbers(got, want, path="$"):
    """Equal structure; numbers equal to 1e-12 relative (a different BLAS build's last bit)."""
    if isinstance(want, dict):
        assert isinstance(got, dict) and got.keys() == want.keys(), path
        for k in want:
            same_numbers(got[k], want[k], f"{path}.{k}")
    elif isinstance(want, list):
        assert isinstance(got, list) and len(got) == len(want), path
        for i, (g, w) in enumerate(zip(got, want)):
            same_numbers(g, w, f"{path}[{i}]")
    elif isinstance(want, float) and not isinstance(want, bool):
        assert isinstance(got, (int, float)), path
        assert got == pytest.approx(want, rel=1e-12, abs=1e-15) or (math.isnan(got) and math.isnan(want)), path
    else:
        assert got == want, path


@pytest.mark.slow
def test_demo_analyze_json_is_pinned():
    # [PIN] the whole JSON a script reads, run the way a user runs it
    proc = run_tolspread("analyze", "--samples", "2000", "--seed", "3", "--json", "-")
    assert proc.returncode == 0, proc.stderr
    same_numbers(json.loads(proc.stdout), json.loads(PIN.read_text()))
