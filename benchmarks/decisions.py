"""Speed of the review tools (issue "decisions that hold up in a design review");
run ``python benchmarks/decisions.py``.

  rare     the demo's high-yield estimate at a failure rate near 1e-4 (every part's
           tolerance scaled to 0.45 of its grade's), to an interval half-width of 20 % of
           the rate, by importance sampling (filters/rare_failures.py); and the plain boards
           the same interval would take
  centre   centring the demo's 8 parts (every combination, 3^8 = 6,561) with the
           confirmation run (filters/centring.py)
  shapes   the present grades under the five distribution shapes (filters/robustness.py)

Each runs on "the demo at 25 °C": the demo with its operating range and service life
removed, judged at 25 °C only (the workload of issue 13 and of these figures as first
quoted); ``--range`` runs them on the demo over its operating range as shipped.

Prints the median wall time of several runs and the machine's load average. Not run by CI;
README's "Speed and memory" section quotes these figures.
"""
from __future__ import annotations

import argparse
import os
import statistics
import time

import tolspread
from tolspread.centring import centre_values
from tolspread.evaluate import prepare
from tolspread.grades import scaled
from tolspread.rare_failures import design_margin_function, importance_estimate
from tolspread.robustness import shape_yields
from tolspread.sampling import columns

getattr(__import__("tolspread.evaluate", fromlist=["x"]), "reuse_freed_memory", lambda: False)()  # as the tolspread program does at start


def timed(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times), out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", choices=("rare", "centre", "shapes"))
    ap.add_argument("--range", action="store_true", help="the demo over its operating range, as shipped")
    args = ap.parse_args()
    print(f"load average before: {os.getloadavg()[0]:.2f}")
    demo = tolspread.load_demo()
    if args.range:
        print("the demo over its operating range, as shipped")
    else:  # issue 13's workload: the demo judged at 25 degC only
        demo = demo.with_analysis(operating_range_c=None, judge_at_c=(), service_hours=0.0)
        print("the demo at 25 °C (operating range and service life removed)")
    if args.only in (None, "rare"):
        def rare():
            prep = prepare(demo)
            grades = tuple(scaled(g, g.tolerance_pct * 0.45) for g in demo.part_grades())
            fn = design_margin_function(prep, grades, demo.analysis.conditions)
            return importance_estimate(fn, columns(len(demo.parts)), seed=1, rel_half_width=0.2)

        t, r = timed(rare, args.repeat)
        print(f"rare    {t:6.2f} s  failure rate {r.failure_rate:.3g} [{r.low:.3g}, {r.high:.3g}] from "
              f"{r.boards:,} boards; plain sampling: about {r.plain_equivalent:,.0f} boards")
    if args.only in (None, "centre"):
        t, r = timed(lambda: centre_values(demo), args.repeat)
        print(f"centre  {t:6.2f} s  {r.combinations:,} combinations x {r.screen_boards} boards, "
              f"confirmed on {r.after.samples:,}; yield {100 * r.before.estimate:.2f} % -> {100 * r.after.estimate:.2f} %")
    if args.only in (None, "shapes"):
        t, r = timed(lambda: shape_yields(demo), args.repeat)
        print(f"shapes  {t:6.2f} s  5 shapes x {r[0].yield_.samples:,} boards")
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
