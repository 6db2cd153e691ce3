"""The parts list's "budget metric" column says which spread budget its shares are of
(issue 15): over an operating range a span's budget is that of each board's worst margin
over the judged temperatures, and the column says so, in the words the analysis gives the
budget (``tolspread analyze --json``'s ``basis``). Both runs are the command line's, as a
user runs them."""
from __future__ import annotations

import csv
import json

from cli_runs import run_cli


def test_parts_list_of_the_demo_names_the_budget_over_its_range(tmp_path):
    parts, result = tmp_path / "parts.csv", tmp_path / "demo.json"
    proc = run_cli("recommend", "--target-yield", "90%", "--samples", "300", "--csv", str(parts))
    assert proc.returncode == 0, proc.stderr
    proc = run_cli("analyze", "--samples", "300", "--json", str(result))
    assert proc.returncode == 0, proc.stderr
    bases = {b.get("basis", "") for name, b in json.loads(result.read_text())["budget"].items()
             if name.startswith("margin.")}
    assert len(bases) == 1 and (basis := bases.pop())  # the demo is judged over its range
    with open(parts, newline="", encoding="utf-8-sig") as fh:
        rows = list(csv.DictReader(fh))
    assert rows and all(r["budget metric"].startswith("margin of '") for r in rows)
    assert all(r["budget metric"].endswith(f"(dB), {basis}") for r in rows)
