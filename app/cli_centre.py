"""``tolspread centre``: neighbouring preferred values that raise the yield at the same grades."""
from __future__ import annotations

import argparse
import json
import sys

from .cli_args import design_with_mask, positive_int, seed
from .texttable import table
from ..report.numbers import format_pct


def add_parser(sub) -> None:
    c = sub.add_parser("centre", help="try each part's neighbouring series values for a higher yield at no cost")
    c.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    c.add_argument("--samples", type=positive_int, help="boards of the confirmation run (default: the design's)")
    c.add_argument("--seed", type=seed, help="seed of the boards (default: the design's)")
    c.add_argument("--screen-boards", type=positive_int, metavar="N",
                   help="boards per combination while screening (default: chosen from the number of "
                        "combinations, 128 to 2,000)")
    c.add_argument("--json", action="store_true", help="print the result as JSON")
    c.add_argument("-o", "--output", metavar="DESIGN", help="write the design with the new values")


def run(args: argparse.Namespace) -> int:
    from ..centring import centre_values
    from ..designfile import save
    from ..values import PART_UNITS, format_value

    design = design_with_mask(args.design, args.output, "no yield to raise")

    def progress(done: int, total: int) -> None:
        sys.stderr.write(f"\r  {done:,} of {total:,} combinations screened")
        sys.stderr.flush()

    res = centre_values(design, samples=args.samples, seed=args.seed, screen_boards=args.screen_boards,
                        progress=progress if sys.stderr.isatty() else None)
    if sys.stderr.isatty():
        sys.stderr.write("\n")
    out = sys.stdout
    if args.output and res.moves:
        save(res.design, args.output)
    if args.json:
        json.dump(res.to_dict(), out, indent=2)
        out.write("\n")
    else:
        out.write(f"{design.name or 'design'}\n")
        out.write(res.search_text() + "\n\n")
        b, a = res.before, res.after
        if not res.moves:
            out.write(f"No neighbouring values beat the present ones (yield {format_pct(b.estimate)} on "
                      f"{b.samples:,} boards).\n")
        else:
            kinds = {p.ref: p.kind for p in design.parts}
            rows = [[m.ref, format_value(m.old, PART_UNITS.get(kinds[m.ref], "")), format_value(m.new, PART_UNITS.get(kinds[m.ref], "")),
                     m.series] for m in res.moves]
            for line in table(["part", "now", "centred", "series"], rows, "<>><"):
                out.write(line + "\n")
            out.write(f"\n  yield now     {format_pct(b.estimate)} [{100 * b.low:.2f}, {100 * b.high:.2f}]\n")
            out.write(f"  yield centred {format_pct(a.estimate)} [{100 * a.low:.2f}, {100 * a.high:.2f}]"
                      f"  ({a.samples:,} boards, the same for both)\n")
            out.write(f"  gain {100 * res.gain:+.2f} points, standard error {100 * res.gain_standard_error:.2f} "
                      f"(boards changed: {res.only_after:,} now pass, {res.only_before:,} now fail)\n")
        if args.output and res.moves:
            out.write(f"\nwrote the design with the centred values to {args.output}\n")
        out.write("\nSame grades, same cost. The gain is an estimate under the grades' stated distributions "
                  "and the spec mask as entered; confirm it with measured parts and qualified review.\n")
    return 0

