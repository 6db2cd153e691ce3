"""Start-up time of the command line; run ``python benchmarks/startup.py``.

Each case runs the installed ``tolspread`` command in a fresh subprocess, several times,
and prints the median wall time (and the smallest and largest) with the machine's load
average before and after, since a shared machine makes single runs noisy:

  version        ``tolspread --version``
  analyze-cold   ``tolspread analyze --samples 100`` with an empty derivation cache
                 (a new ``TOLSPREAD_CACHE_DIR`` for every run: the netlists are derived)
  analyze-warm   the same with a cache filled by one run beforehand (nothing derived)
  import-cli     ``python -c "import tolspread.app.cli"`` and which heavy modules it loaded

Not run by CI. README's "Start-up" paragraph quotes these figures.
"""
from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HEAVY = ("sympy", "scipy.stats", "scipy.signal", "scipy.optimize")


def tolspread_command() -> list[str]:
    """The installed console script beside this interpreter (else the one on PATH)."""
    here = Path(sys.executable).parent / "tolspread"
    found = str(here) if here.exists() else shutil.which("tolspread")
    if found is None:
        raise SystemExit("benchmarks/startup.py: the 'tolspread' command is not installed")
    return [found]


def run_once(cmd: list[str], env: dict[str, str]) -> float:
    """Wall time (s) of one run of ``cmd``; a failing run stops the benchmark."""
    t0 = time.perf_counter()
    done = subprocess.run(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    elapsed = time.perf_counter() - t0
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(cmd)} failed ({done.returncode}): {done.stderr.strip()}")
    return elapsed


def measure(name: str, cmd: list[str], runs: int, cache: str) -> tuple[str, list[float]]:
    """``runs`` timings of ``cmd``; ``cache`` is 'cold' (a new empty cache folder per run),
    'warm' (one shared folder filled by an untimed first run) or 'any'."""
    times = []
    with tempfile.TemporaryDirectory(prefix="tolspread-startup-") as root:
        env = dict(os.environ)
        env["TOLSPREAD_CACHE_DIR"] = str(Path(root) / "warm")
        if cache == "warm":
            run_once(cmd, env)
        for k in range(runs):
            if cache == "cold":
                env["TOLSPREAD_CACHE_DIR"] = str(Path(root) / f"cold{k}")
            times.append(run_once(cmd, env))
    return name, times


def heavy_modules_of_import() -> list[str]:
    """Which of :data:`HEAVY` ``import tolspread.app.cli`` loads (in a fresh interpreter)."""
    code = ("import sys, tolspread.app.cli; "
            f"print(' '.join(m for m in {HEAVY!r} if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return out.stdout.split()


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--runs", type=int, default=7, help="runs per case (default 7)")
    args = p.parse_args()
    cmd = tolspread_command()
    load_before = os.getloadavg()
    cases = [
        measure("tolspread --version", cmd + ["--version"], args.runs, "any"),
        measure("analyze --samples 100, cold cache", cmd + ["analyze", "--samples", "100"], args.runs, "cold"),
        measure("analyze --samples 100, warm cache", cmd + ["analyze", "--samples", "100"], args.runs, "warm"),
        measure('python -c "import tolspread.app.cli"', [sys.executable, "-c", "import tolspread.app.cli"], args.runs, "any"),
    ]
    load_after = os.getloadavg()
    print(f"{args.runs} runs per case on {os.cpu_count()} cores; load average (1, 5, 15 min) "
          f"{' '.join(f'{x:.1f}' for x in load_before)} before, "
          f"{' '.join(f'{x:.1f}' for x in load_after)} after")
    for name, times in cases:
        print(f"  {name:36s} median {statistics.median(times):6.2f} s "
              f"(min {min(times):.2f}, max {max(times):.2f})")
    heavy = heavy_modules_of_import()
    print(f"  import tolspread.app.cli loads: {', '.join(heavy) if heavy else 'none of ' + ', '.join(HEAVY)}")


if __name__ == "__main__":
    main()
