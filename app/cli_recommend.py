"""``tolspread recommend``: the cheapest grades that meet a yield target, with the parts
list and the design-review report."""
from __future__ import annotations

import argparse
import sys

from filters.errors import InputError


def _fraction(text: str) -> float:
    try:
        v = float(text.rstrip("%")) / (100.0 if text.endswith("%") else 1.0)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if v >= 1 and not text.endswith("%"):
        v = v / 100.0  # "99" means 99 %
    if not 0 < v < 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be a fraction between 0 and 1 (or a percentage)")
    return v


def add_parser(sub) -> None:
    r = sub.add_parser("recommend", help="cheapest set of grades meeting a yield target")
    r.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    r.add_argument("--target-yield", type=_fraction, required=True, metavar="P",
                   help="yield target, e.g. 0.95 or 95%%")
    r.add_argument("--confidence", type=_fraction, default=0.95, metavar="C",
                   help="confidence of the lower bound that must meet the target (default 0.95)")
    r.add_argument("--samples", type=int, help="boards per candidate (default: the design's)")
    r.add_argument("--seed", type=int, help="seed of the boards (default: the design's)")
    r.add_argument("--catalog", metavar="PATH", help="a catalog file with your grades and costs")
    r.add_argument("--csv", metavar="PATH", help="write the parts list as CSV")
    r.add_argument("--report", metavar="PATH", help="write the design-review report (HTML)")
    r.add_argument("--curve", action="store_true", help="also find the cheapest set for a range of targets")
    r.add_argument("-o", "--output", metavar="DESIGN", help="write the design with the chosen grades")


def run(args: argparse.Namespace) -> int:
    from filters.analysis import analyze
    from filters.designfile import load, load_demo, save
    from filters.grades import load_catalog
    from filters.recommend import cost_yield_curve, parts_list_rows, recommend, worst_margin_metric, write_parts_csv
    from filters.report import build_report, write_report

    design = load_demo() if args.design is None else load(args.design)
    if not design.mask:
        raise InputError("the design has no spec mask, so there is no yield to meet; add spans first", "mask")
    catalog = load_catalog(args.catalog) if args.catalog else None
    if args.samples is not None and args.samples < 1:
        raise InputError("must be at least 1", "--samples")

    def progress(done: int, total: int) -> None:
        sys.stderr.write(f"\r  {done} grade sets tried")
        sys.stderr.flush()

    rec = recommend(design, args.target_yield, confidence=args.confidence, samples=args.samples,
                    seed=args.seed, catalog=catalog, progress=progress if sys.stderr.isatty() else None)
    if sys.stderr.isatty():
        sys.stderr.write("\n")
    out = sys.stdout
    pct = lambda x: f"{100 * x:.2f} %"  # noqa: E731
    out.write(f"{design.name or 'design'}\n")
    out.write(f"target: yield lower bound >= {pct(args.target_yield)} at {round(100 * args.confidence)} % "
              f"confidence ({rec.search} search, {rec.evaluations} grade sets tried on the same boards)\n\n")
    cat = catalog or design.catalog
    current_cost = sum(cat[g.name].cost if g.name in cat else g.cost for g in design.part_grades())
    if rec.chosen is None:
        out.write(f"No set of grades in the catalog meets the target. {getattr(rec, 'note', '')}\n")
    else:
        c = rec.chosen
        out.write(f"  {'part':<6} {'value':>9}  {'current grade':<16} {'recommended':<16} {'cost':>6}\n")
        for p, g in zip(design.parts, c.grades):
            mark = "" if g == p.grade else "  <- changed"
            out.write(f"  {p.ref:<6} {p.value_text:>9}  {p.grade:<16} {g:<16} {cat[g].cost:>6.2f}{mark}\n")
        out.write(f"\n  total relative cost {c.cost:.2f} (current grades {current_cost:.2f})\n")
        out.write(f"  yield on the search boards {pct(c.estimate)}, lower bound {pct(c.lower)} "
                  f"({c.passed} of {c.samples})\n")
        if rec.verified is not None:
            v = rec.verified
            verdict = "holds" if rec.meets_on_fresh_seed else "does NOT hold"
            out.write(f"  check on fresh boards: yield {pct(v.estimate)}, lower bound {pct(v.lower)} "
                      f"({v.passed} of {v.samples}): the target {verdict}\n")
    curve = None
    if args.curve:
        curve = cost_yield_curve(design, confidence=args.confidence, samples=args.samples, seed=args.seed,
                                 catalog=catalog)
        out.write("\n  cost-yield trade-off (cheapest set found per target)\n")
        for t, r in curve:
            cost = "no set meets it" if r.chosen is None else f"{r.chosen.cost:.2f}"
            out.write(f"    target {pct(t):>9}: {cost}\n")
    chosen_design = rec.design if rec.chosen is not None else design
    if args.output and rec.chosen is not None:
        save(chosen_design, args.output)
        out.write(f"\nwrote the design with the recommended grades to {args.output}\n")
    if args.csv or args.report:
        result = analyze(chosen_design, samples=args.samples, seed=args.seed)
        rows = parts_list_rows(design, rec, result.budget, metric=worst_margin_metric(result.ensemble))
        if args.csv:
            write_parts_csv(rows, args.csv)
            out.write(f"wrote the parts list to {args.csv}\n")
        if args.report:
            write_report(build_report(result, recommendation=rec, curve=curve, parts_rows=rows), args.report)
            out.write(f"wrote the report to {args.report}\n")
    out.write("\nRelative costs come from the catalog (the built-in costs are invented demo figures). "
              "The yield is an estimate under the grades' stated distributions; confirm it with measured "
              "parts and qualified review.\n")
    return 0
