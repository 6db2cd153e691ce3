"""Peak memory of the biggest runs the limits allow; run ``python benchmarks/memory.py``.

Each case runs in a fresh subprocess (``--case NAME``) that reports its own peak resident
set (``resource.getrusage(RUSAGE_SELF).ru_maxrss``), the resident set after the imports
and the nominal evaluation (the baseline), the peak of numpy and Python allocations seen
by ``tracemalloc`` (``--traced``; it slows Python-level code), and the wall time. The
parent prints one line per case. Not run by CI; the long cases take minutes on a shared
2-core machine. README's "Guarantees and their limits" quotes these figures.

Cases:
  analyze-1e6        ``analyze`` of the demo at 1,000,000 boards (the command line's run)
  analyze-max        ``analyze`` of the demo at the most boards its memory rule allows
  parts-max          ``analyze`` of a cascade of Sallen-Key stages at MAX_PARTS parts
  parts-max-boards   the same cascade at the most boards its memory rule allows
  recommend-parts    ``recommend`` (cheapest grades, 99 % target) of that cascade
"""
from __future__ import annotations

import argparse
import json
import math
import resource
import subprocess
import sys
import time
import tracemalloc

CASES = ("analyze-1e6", "analyze-max", "parts-max", "parts-max-boards", "recommend-parts")


def rss_mib() -> float:
    """This process's peak resident set so far (MiB; Linux reports KiB)."""
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024


def cascade(n_parts: int, samples: int = 5000):
    """An invented design: ``n_parts // 4`` unity-gain Sallen-Key low-pass stages near
    1 kHz (Q 0.707, 1 % resistors, 5 % C0G capacitors), a passband floor and a stopband
    ceiling."""
    from tolspread.design import design_from_dict

    parts, stages = [], []
    for k in range(1, n_parts // 4 + 1):
        f0 = 1000.0 * (1 + 0.01 * (k % 7))
        w, r, q = 2 * math.pi * f0, 10e3, 1 / math.sqrt(2)
        roles = {}
        for role, v in {"R1": r, "R2": r, "C1": 2 * q / (w * r), "C2": 1 / (2 * q * w * r)}.items():
            ref = f"{role[0]}{len(parts) + 1}"
            parts.append({"ref": ref, "value": v, "grade": "R-thick-1" if role[0] == "R" else "C-C0G-5"})
            roles[role] = ref
        stages.append({"topology": "sallen_key_lowpass", "parts": roles})
    return design_from_dict({
        "format": "tolspread-design", "version": 2, "name": f"{n_parts}-part cascade (invented)",
        "parts": parts, "stages": stages,
        "analysis": {"samples": samples, "f_start": 10.0, "f_stop": 1e6, "points": 200},
        "mask": [{"kind": "floor", "f1": 10.0, "f2": 50.0, "limit1": -1.0, "quantity": "gain",
                  "relative": True, "name": "passband"},
                 {"kind": "ceiling", "f1": 1e5, "f2": 1e6, "limit1": -40.0, "quantity": "gain",
                  "relative": True, "name": "stopband"}]})


def run_case(name: str, traced: bool) -> dict:
    """Run one case in this process; returns the figures."""
    from tolspread.analysis import analyze
    from tolspread.design import MAX_PARTS
    from tolspread.designfile import load_demo
    from tolspread.evaluate import prepare
    from tolspread.memory import max_boards

    getattr(__import__("tolspread.evaluate", fromlist=["x"]), "reuse_freed_memory", lambda: False)()  # as the tolspread program does at start

    design = load_demo() if name.startswith("analyze") else cascade(MAX_PARTS)
    prep = prepare(design)
    boards = {"analyze-1e6": 1_000_000, "analyze-max": max_boards(prep),
              "parts-max": design.analysis.samples, "parts-max-boards": max_boards(prep),
              "recommend-parts": design.analysis.samples}[name]
    base = rss_mib()
    if traced:
        tracemalloc.start()
    t = time.perf_counter()
    if name == "recommend-parts":
        from tolspread.recommend import recommend

        rec = recommend(design, 0.99)
        what = f"{rec.evaluations} grade sets evaluated, chosen: {rec.chosen is not None}"
    else:
        r = analyze(design, samples=boards)
        what = f"yield {r.yield_.estimate:.4f}"
    seconds = time.perf_counter() - t
    traced_peak = tracemalloc.get_traced_memory()[1] / 2**20 if traced else None
    return {"case": name, "parts": len(design.parts), "boards": boards, "seconds": round(seconds, 1),
            "baseline_rss_mib": round(base), "peak_rss_mib": round(rss_mib()),
            "traced_peak_mib": None if traced_peak is None else round(traced_peak), "result": what}


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--case", choices=CASES, help="run one case in this process and print JSON")
    ap.add_argument("--only", nargs="*", choices=CASES, help="cases to run (default: all)")
    ap.add_argument("--traced", action="store_true", help="also trace allocations (slower)")
    args = ap.parse_args(argv)
    if args.case:
        print(json.dumps(run_case(args.case, args.traced)))
        return
    for case in args.only or CASES:
        cmd = [sys.executable, __file__, "--case", case] + (["--traced"] if args.traced else [])
        done = subprocess.run(cmd, capture_output=True, text=True)
        if done.returncode:
            print(f"{case}: failed (exit {done.returncode}): {done.stderr.strip().splitlines()[-1:]}")
            continue
        r = json.loads(done.stdout.strip().splitlines()[-1])
        traced = "" if r["traced_peak_mib"] is None else f", traced peak {r['traced_peak_mib']} MiB"
        print(f"{case}: {r['parts']} parts, {r['boards']:,} boards, {r['seconds']} s, "
              f"peak RSS {r['peak_rss_mib']} MiB (baseline {r['baseline_rss_mib']} MiB{traced}); {r['result']}",
              flush=True)


if __name__ == "__main__":
    main()
