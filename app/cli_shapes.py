"""``tolspread shapes``: the yield under other readings of the tolerances, and whether the
recommendation would change."""
from __future__ import annotations

import argparse
import json
import sys

from .cli_args import confidence, design_with_mask, fraction_or_percent, positive_int, seed
from .texttable import table
from ..report.numbers import format_pct


def add_parser(sub) -> None:
    s = sub.add_parser("shapes", help="yield (and with --target-yield the recommendation) under other part "
                                      "distributions: 3 sigma, uniform, binned, shared reel")
    s.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    s.add_argument("--samples", type=positive_int, help="boards (default: the design's)")
    s.add_argument("--seed", type=seed, help="seed of the boards (default: the design's)")
    s.add_argument("--target-yield", type=fraction_or_percent, metavar="P",
                   help="also find the cheapest grades for this yield under each shape and flag changes")
    s.add_argument("--confidence", type=confidence, default=0.95, metavar="C",
                   help="confidence of the lower bound with --target-yield (default 0.95)")
    s.add_argument("--json", action="store_true", help="print the result as JSON")


def run(args: argparse.Namespace) -> int:
    from ..robustness import SHAPE_TEXT, shape_recommendations, shape_yields

    design = design_with_mask(args.design, None, "no yield to compare")
    yields = shape_yields(design, samples=args.samples, seed=args.seed)
    choices = None
    if args.target_yield is not None:
        def progress(shape: str) -> None:
            sys.stderr.write(f"\r  searching grades under '{shape}'          ")
            sys.stderr.flush()

        choices = shape_recommendations(design, args.target_yield, confidence=args.confidence,
                                        samples=args.samples, seed=args.seed,
                                        progress=progress if sys.stderr.isatty() else None)
        if sys.stderr.isatty():
            sys.stderr.write("\n")
    out = sys.stdout
    if args.json:
        data = {"shapes": [y.to_dict() for y in yields]}
        if choices is not None:
            data["recommendations"] = [c.to_dict() for c in choices]
        json.dump(data, out, indent=2)
        out.write("\n")
        return 0
    out.write(f"{design.name or 'design'}: present grades under each reading of the tolerances "
              f"(the same {yields[0].yield_.samples:,} boards for each)\n\n")
    rows = [[y.shape, SHAPE_TEXT[y.shape], format_pct(y.yield_.estimate),
             f"[{100 * y.yield_.low:.2f}, {100 * y.yield_.high:.2f}]"] for y in yields]
    for line in table(["shape", "model", "yield", f"{100 * design.analysis.confidence:g} % interval"], rows, "<<>>"):
        out.write(line + "\n")
    if choices is not None:
        out.write(f"\ncheapest grades for a yield lower bound of {format_pct(args.target_yield)} under each shape\n")
        rows = []
        for c in choices:
            chosen = "no set found" if c.grades is None else ", ".join(c.grades)
            holds = "" if c.reference_holds is None else ("holds" if c.reference_holds else "MISSES")
            rows.append([c.shape, chosen, "" if c.cost is None else f"{c.cost:.2f}",
                         "changed" if c.changed else "", holds])
        for line in table(["shape", "grades (in parts order)", "cost", "vs first", "first set here"], rows,
                          "<<><<"):
            out.write(line + "\n")
        if any(c.changed for c in choices):
            out.write("\nThe recommendation changes with the distribution assumed: measure a sample of the "
                      "parts, or buy the set that holds under every shape.\n")
    out.write("\nEach yield is an estimate under the stated model of the parts; measurement of real parts says "
              "which model holds, and a qualified review should confirm the choice.\n")
    return 0
