"""``tolspread measure``: give a part the values measured on a sample of real parts."""
from __future__ import annotations

import argparse
import json
import sys

from .cli_args import design_with_mask, positive_int, seed
from .texttable import table
from ..report.numbers import format_pct


def add_parser(sub) -> None:
    m = sub.add_parser("measure", help="use a CSV of measured values as a part's distribution and show the yield "
                                       "with the uncertainty of having measured only those parts")
    m.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    m.add_argument("--part", action="append", default=[], metavar="REF=CSV",
                   help="a part and the CSV of its measured values, e.g. C1=reel_c1.csv (repeatable)")
    m.add_argument("--samples", type=positive_int, help="boards (default: the design's)")
    m.add_argument("--seed", type=seed, help="seed of the boards (default: the design's)")
    m.add_argument("--replicates", type=positive_int, default=40, metavar="N",
                   help="resampled sets of the measured values for the interval (default 40)")
    m.add_argument("--json", action="store_true", help="print the result as JSON")
    m.add_argument("-o", "--output", metavar="DESIGN", help="write the design with the measured values in it")


def run(args: argparse.Namespace) -> int:
    from ..designfile import save
    from ..errors import InputError
    from ..temperature import judged_boards
    from ..measured import measured_yield, read_measured_csv, summary_rows
    from ..stats import yield_estimate

    design = design_with_mask(args.design, args.output)
    plain = design
    for item in args.part:
        ref, sep, path = item.partition("=")
        if not sep or not ref.strip() or not path.strip():
            raise InputError(f"write REF=CSV, e.g. C1=reel_c1.csv, not {item!r}", "--part")
        ref = ref.strip()
        i = design.part_index(ref)
        if design.parts[i].kind not in ("R", "C", "L"):
            raise InputError(f"measured values are for R, C and L parts; {ref} is an op-amp", "--part")
        design = design.with_part(ref, measured=read_measured_csv(path.strip()))
    if not any(p.measured is not None for p in design.parts):
        raise InputError("no part carries measured values: name one with --part REF=CSV", "--part")
    if args.replicates < 2:
        raise InputError("at least 2 replicates", "--replicates")
    for p in design.parts:  # the design as graded, for the side-by-side yield
        if p.measured is not None:
            plain = plain.with_part(p.ref, measured=None)
    res = measured_yield(design, samples=args.samples, seed=args.seed, replicates=args.replicates)
    a = design.analysis
    graded = yield_estimate(judged_boards(plain, samples=args.samples, seed=args.seed).passed, None,
                            a.confidence, a.interval)  # type: ignore[arg-type]
    rows = summary_rows(design)
    if args.output:
        save(design, args.output)
    out = sys.stdout
    if args.json:
        json.dump({"measured_parts": rows, "yield_measured": res.to_dict(), "yield_as_graded": graded.to_dict()},
                  out, indent=2)
        out.write("\n")
        return 0
    out.write(f"{design.name or 'design'}: measured parts\n\n")
    body = [[r["ref"], r["source"], f"{r['n']:,}", f"{r['mean_pct']:+.3f}", f"{r['sd_pct']:.3f}",
             f"{r['min_pct']:+.3f} .. {r['max_pct']:+.3f}", str(r["lots"]),
             "" if r["tempco_ppm"] is None else f"{r['tempco_ppm']:+.0f}"] for r in rows]
    for line in table(["part", "file", "values", "mean %", "sd %", "range %", "lots", "ppm/K"], body, "<<>>>><>"):
        out.write(line + "\n")
    conf = f"{100 * res.confidence:g} %"
    out.write(f"\n  yield with the measured parts  {format_pct(res.estimate)}, {conf} interval "
              f"[{100 * res.low:.2f}, {100 * res.high:.2f}] (boards sd {100 * res.boards_sd:.2f}, measurement sd "
              f"{100 * res.measurement_sd:.2f} points from {res.replicates} resampled sets)\n")
    out.write(f"  yield with the grades' model   {format_pct(graded.estimate)}, {conf} interval "
              f"[{100 * graded.low:.2f}, {100 * graded.high:.2f}] (same boards)\n")
    if args.output:
        out.write(f"\nwrote the design with the measured values to {args.output}\n")
    one_lot = [r["ref"] for r in rows if r["lots"] == 1]
    if one_lot:
        out.write(f"\nCaution: {', '.join(one_lot)} {'was' if len(one_lot) == 1 else 'were'} measured on one lot; "
                  "one reel says nothing about lot-to-lot variation. Other lots may sit elsewhere within the "
                  "grade's tolerance: measure several lots before a decision that spans them.\n")
    few_lots = [f"{r['ref']} ({r['lots']} lots)" for r in rows if 1 < r["lots"] < 5]
    if few_lots:
        out.write(f"\nCaution: {', '.join(few_lots)}: so few lots say little about the spread between lots; "
                  "the interval resamples whole lots and may be too narrow.\n")
    out.write("The yield is an estimate under the measured sample and the spec mask as entered; confirm it with "
              "qualified review.\n")
    return 0
