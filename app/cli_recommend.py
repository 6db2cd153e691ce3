"""``tolspread recommend``: the cheapest grades that meet a yield target, with the parts
list and the design-review report."""
from __future__ import annotations

import argparse
import sys

from ..errors import InputError

from .cli_args import EXIT_NO_SET, add_signoff_options, confidence, fraction_or_percent, positive_int, seed, signed
from .texttable import table
from ..report.numbers import format_pct


def add_parser(sub) -> None:
    r = sub.add_parser("recommend", help="cheapest set of grades meeting a yield target")
    r.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    r.add_argument("--target-yield", type=fraction_or_percent, required=True, metavar="P",
                   help="yield target as a fraction or a percentage, e.g. 0.95 or 95%%")
    r.add_argument("--confidence", type=confidence, default=0.95, metavar="C",
                   help="confidence of the lower bound that must meet the target, 0.5 to below 1 "
                        "(0.95 or 95%%; default 0.95)")
    r.add_argument("--samples", type=positive_int, help="boards per candidate (default: the design's)")
    r.add_argument("--seed", type=seed, help="seed of the boards (default: the design's)")
    r.add_argument("--catalog", metavar="PATH", help="a catalog file with your grades and costs")
    r.add_argument("--csv", metavar="PATH", help="write the parts list as CSV")
    r.add_argument("--report", metavar="PATH", help="write the design-review report (HTML)")
    r.add_argument("--curve", action="store_true", help="also find the cheapest set for a range of targets")
    r.add_argument("-o", "--output", metavar="DESIGN", help="write the design with the chosen grades")
    r.add_argument("--lock", action="append", default=[], metavar="REF",
                   help="keep this part's grade (repeatable; or \"locked\": true on the part)")
    r.add_argument("--forbid", action="append", default=[], metavar="REF=WORD",
                   help="forbid a technology for one part, e.g. C1=X7R or C1=\"class II\" (repeatable)")
    r.add_argument("--signal-path-forbid", action="append", default=[], metavar="WORD",
                   help="forbid a technology for every capacitor the response depends on, e.g. \"class II\"")
    r.add_argument("--allow-class-ii", action="store_true",
                   help="do not warn about class II dielectrics in the signal path nor search without them")
    r.add_argument("--boards", type=int, metavar="N",
                   help="boards bought: with price tables in the catalog the cost is money per board at N")
    r.add_argument("--shapes", action="store_true",
                   help="also search under the other distribution shapes (3 sigma, uniform, binned, shared reel) "
                        "and say where the recommendation would change (about five searches)")
    r.add_argument("--compare", action="append", default=[], metavar="SET",
                   help="also judge your own set on the same boards, e.g. \"R1=R-thin-0.5,C1=C-C0G-2\" "
                        "(parts not named keep their grade; repeatable)")
    r.add_argument("--target-after-life", action="store_true",
                   help="when the design states a service life, require the target at delivery and after the "
                        "life (a board passes only if it meets the mask at every judged temperature both times)")
    r.add_argument("--json", metavar="PATH", help="also write the recommendation as JSON to PATH ('-' for stdout; "
                                                  "the text then goes to stderr)")
    add_signoff_options(r)


def run(args: argparse.Namespace) -> int:
    from dataclasses import replace

    from ..analysis import analyze
    from ..constraints import with_constraints
    from ..designfile import load, load_demo, save
    from ..constraints import priced, unit_price
    from ..grade_sets import class_ii_in_signal_path, parse_set
    from ..grades import load_catalog
    from ..parts_list import parts_list_rows, worst_margin_metric, write_parts_csv
    from ..recommend import candidate_grades, cost_yield_curve, recommend
    from ..report import build_report, write_report
    from ..safeio import check_output_path

    for option in ("--output", "--csv", "--report", "--json"):  # issue 11: '' or a device refused before the search
        if getattr(args, option[2:]) is not None and not (option == "--json" and args.json == "-"):
            check_output_path(getattr(args, option[2:]), option)
    design = signed(load_demo() if args.design is None else load(args.design), args)
    if not design.mask:
        raise InputError("the design has no spec mask, so there is no yield to meet; add spans first", "mask")
    catalog = load_catalog(args.catalog) if args.catalog else None
    if catalog is not None:  # the catalog's grades join the design's, so sets can name them
        design = replace(design, grades=tuple(design.grades) + tuple(catalog.grades))
    design = with_constraints(design, lock=[x.strip() for x in args.lock], forbid=[_pair(x) for x in args.forbid],
                              signal_path_forbid=args.signal_path_forbid, boards=args.boards)
    own_sets = [(f"yours {k}", parse_set(design, text)) for k, text in enumerate(args.compare, start=1)]

    def progress(done: int, total: int) -> None:
        sys.stderr.write(f"\r  {done:,} grade sets tried")
        sys.stderr.flush()

    life_on = args.target_after_life
    rec = recommend(design, args.target_yield, confidence=args.confidence, samples=args.samples,
                    seed=args.seed, catalog=catalog, progress=progress if sys.stderr.isatty() else None,
                    target_after_life=life_on)
    if sys.stderr.isatty():
        sys.stderr.write("\n")
    out = sys.stderr if args.json == "-" else sys.stdout
    pct = format_pct
    life = life_words(design)
    out.write(f"{design.name or 'design'}\n")
    when = f", at delivery and {life}" if rec.target_after_life else (", at delivery" if life else "")
    out.write(f"target: yield lower bound >= {pct(args.target_yield)} at {100 * args.confidence:g} % "
              f"confidence{when} ({rec.search} search, {rec.evaluations:,} grade sets tried on the same boards)\n")
    if life_on and not life:
        out.write("  (--target-after-life: the design states no service life, so the target applies at delivery)\n")
    out.write("\n")
    cat = design.catalog
    boards = design.purchase.boards
    money = priced(candidate_grades(design), boards) is not None  # as the search counted
    now_priced = priced([[cat[n]] for n in rec.current_grades if n in cat], boards)
    now_cost = "no prices" if now_priced is None else f"{sum(g[0].cost for g in now_priced):.4g}"
    unit = f"{design.purchase.currency or 'money'} per board at {boards:,} boards" if money else "relative cost"
    compared: list = []  # the grade sets side by side, for the report
    if rec.chosen is None:
        _explain_nothing(rec, args, out)
    else:
        c = rec.chosen
        rows = []
        for p, now, g in zip(design.parts, rec.current_grades, c.grades):
            each = unit_price(cat[g], boards) if money else cat[g].cost
            rows.append([p.ref, p.value_text, now, g, f"{each:.4g}" if money else f"{each:.2f}",
                         "locked" if p.locked or p.measured is not None else ("changed" if g != now else "")])
        for line in table(["part", "value", "current grade", "recommended", "unit price" if money else "cost", ""],
                          rows, "<><<><"):
            out.write(line + "\n")
        if money:
            out.write(f"\n  total {unit}: {c.cost:.4g} (current grades {now_cost})\n")
        else:
            out.write(f"\n  total relative cost {c.cost:.2f} (current grades {rec.current_cost:.2f})\n")
        for line in chosen_lines(rec, life):
            out.write(line + "\n")
        sets = [("current", tuple(rec.current_grades)), ("recommended", tuple(c.grades))]
        suspects = [] if args.allow_class_ii else class_ii_in_signal_path(design, c.grades)
        if suspects:
            out.write(f"\n  Warning: {', '.join(suspects)} would get class II dielectrics, yet the response depends "
                      "on them; common practice keeps class II ceramics (X7R, X5R ...) out of filter signal paths, "
                      "as their value moves with temperature, DC bias and age. Searching without them ...\n")
            alt = recommend(with_constraints(design, signal_path_forbid=["class II"]), args.target_yield,
                            confidence=args.confidence, samples=args.samples, seed=args.seed,
                            target_after_life=life_on)
            if alt.chosen is None:
                out.write("  No set without class II dielectrics in the signal path meets the target.\n")
            else:
                out.write(f"  The cheapest set without them costs {alt.chosen.cost:.4g} ({unit}); it is in the "
                          "comparison below.\n")
                sets.append(("no class II", tuple(alt.chosen.grades)))
        sets += own_sets
        compared = _write_comparison(design, sets, args, unit, money, out, life, rec.target_after_life)
    curve = None
    if args.curve:
        curve = cost_yield_curve(design, confidence=args.confidence, samples=args.samples, seed=args.seed,
                                 catalog=catalog, target_after_life=life_on)
        out.write("\n  cost-yield trade-off (cheapest set found per target"
                  + (f", met at delivery and {life})\n" if rec.target_after_life else ")\n"))
        for t, r in curve:
            cost = "no set meets it" if r.chosen is None else f"{r.chosen.cost:.2f}"
            out.write(f"    target {pct(t):>9}: {cost}\n")
    choices = _shape_search(design, args, out) if args.shapes else ()
    chosen_design = rec.design if rec.chosen is not None else design
    if args.output and rec.chosen is not None:
        save(chosen_design, args.output)
        out.write(f"\nwrote the design with the recommended grades to {args.output}\n")
    if args.csv or args.report:
        from ..report.build import FIGURE_BOARDS

        result = analyze(chosen_design, samples=args.samples, seed=args.seed,
                         curves=FIGURE_BOARDS if args.report else 0, rare="auto" if args.report else "off")
        rows = parts_list_rows(design, rec, result.budget, metric=worst_margin_metric(result.ensemble))
        if args.csv:
            write_parts_csv(rows, args.csv)
            out.write(f"wrote the parts list to {args.csv}\n")
        if args.report:
            from ..robustness import shapes_for_report

            write_report(build_report(result, recommendation=rec, curve=curve, parts_rows=rows, comparison=compared,
                                      target=args.target_yield, shapes=shapes_for_report(result),
                                      shape_choices=choices), args.report)
            out.write(f"wrote the report to {args.report}\n")
    out.write(f"\nPrices come from the catalog's price breaks at {boards:,} parts of each. " if money else
              "\nRelative costs come from the catalog (the built-in costs are invented demo figures). ")
    out.write("The yield is an estimate under the grades' stated distributions; confirm it with measured "
              "parts and qualified review.\n")
    if args.json:
        _write_json(args.json, rec, compared, curve)
    return 0 if rec.chosen is not None else EXIT_NO_SET


def _write_json(path: str, rec, compared: list, curve) -> None:
    """The recommendation, the sets compared and the trade-off curve as JSON (stdout for '-')."""
    import json

    data = {"recommendation": rec.to_dict(), "compared": [r.to_dict() for r in compared],
            "curve": None if curve is None else [{"target": t, "recommendation": r.to_dict()} for t, r in curve]}
    text = json.dumps(data, indent=2) + "\n"
    if path == "-":
        sys.stdout.write(text)
    else:
        from ..safeio import write_text_atomic

        write_text_atomic(path, text, backup=False, option="--json")


def _shape_search(design, args: argparse.Namespace, out) -> list:
    """The cheapest grades under each distribution shape (filters/robustness.py), printed."""
    from ..robustness import shape_recommendations

    choices = shape_recommendations(design, args.target_yield, confidence=args.confidence, samples=args.samples,
                                    seed=args.seed)
    out.write("\n  the search under each distribution shape\n")
    first = choices[0].grades
    for c in choices:
        if c.grades is None:
            what = "no set meets the target"
        elif c is choices[0] or first is None:
            what = f"cost {c.cost:.4g} (the reference)"
        else:
            moved = [f"{p.ref} {g}" for p, g, g0 in zip(design.parts, c.grades, first) if g != g0]
            what = f"cost {c.cost:.4g}: {', '.join(moved) or 'the same set'}"
        holds = "" if c.reference_holds is None else ("; first set holds" if c.reference_holds else "; first set MISSES")
        out.write(f"    {c.shape:<12} {what}{holds}\n")
    changed = [c.shape for c in choices if c.changed]
    out.write(f"  the recommendation would change under: {', '.join(changed)}\n" if changed else
              "  the recommendation is the same under every shape\n")
    return choices


def _pair(text: str) -> tuple[str, str]:
    ref, sep, word = (x.strip() for x in text.partition("="))
    if not sep or not ref or not word:
        raise InputError(f"write REF=WORD, e.g. C1=X7R, not {text!r}", "--forbid")
    return ref, word


def _write_comparison(design, sets, args: argparse.Namespace, unit: str, money: bool, out, life: str = "",
                      after_life: bool = False) -> list:
    """The grade sets side by side on the same fresh boards (filters/grade_sets.py), with
    their yield after the service life when the design states one; returns them
    (:class:`filters.grade_sets.SetResult`) for the report."""
    from ..grade_sets import compare_sets

    results = compare_sets(design, sets, samples=args.samples, seed=args.seed, confidence=args.confidence)
    out.write(f"\n  grade sets side by side ({results[0].yield_.samples:,} boards, the same for each; {unit})\n")
    rows = []
    for r in results:
        cost = f"{r.money:.4g}" if money and r.money is not None else f"{r.cost:.2f}"
        row = [r.label, cost, format_pct(r.yield_.estimate),
               f"[{format_pct(r.yield_.low)}, {format_pct(r.yield_.high)}]", format_pct(r.lower)]
        if life:
            row += [format_pct(r.after.estimate), format_pct(r.after_lower)] if r.after is not None else ["", ""]
        rows.append(row + ["meets" if r.meets(args.target_yield, after_life) else "misses"])
    heads = ["set", "cost", "yield", f"{100 * args.confidence:g} % interval", "lower bound"]
    if life:
        heads += [f"yield {life}", "its lower bound"]
    for line in table(heads + ["target" + (" (both)" if after_life else "")], rows, "<>>>>" + ">>" * bool(life) + "<"):
        out.write("  " + line + "\n")
    if life:
        out.write(f"  (yield = at delivery; {life}: the same boards after the service life, each judged at every "
                  "judged temperature)\n")
    for r in results[2:]:
        changed = [f"{p.ref} {g}" for p, g, now in zip(design.parts, r.grades, results[0].grades) if g != now]
        out.write(f"  {r.label}: {', '.join(changed) or 'as current'}\n")
    return results


def life_words(design) -> str:
    """The design's service life in words ("after 20 years at 40 °C"), "" without one."""
    from ..temperature_settings import HOURS_PER_YEAR

    a = design.analysis
    if not a.service_hours:
        return ""
    return f"after {a.service_hours / HOURS_PER_YEAR:.3g} years at {a.service_temp_c:g} \u00b0C"


def chosen_lines(rec, life: str) -> list[str]:
    """The chosen set's yield on the search boards and on fresh boards, each with its yield
    after the service life beside it, and the caution when that falls below the target."""
    pct = format_pct
    c, v = rec.chosen, rec.verified
    lines = []
    for what, x in (("yield on the search boards", c), ("check on fresh boards: yield", v)):
        if x is None:
            continue
        line = f"  {what} {pct(x.estimate)}, lower bound {pct(x.lower)} ({x.passed:,} of {x.samples:,})"
        if x.after_passed is not None:
            both = " (at delivery and after the life, the same boards)" if rec.target_after_life else ""
            line = (f"  {what}{both} {pct(x.estimate)}, lower bound {pct(x.lower)} ({x.passed:,} of {x.samples:,}); "
                    f"at delivery {pct(x.delivery_estimate)}, {life} {pct(x.after_estimate)} "
                    f"(lower bound {pct(x.after_lower)}, {x.after_passed:,} of {x.samples:,})")
        if x is v:
            line += f": the target {'holds' if rec.meets_on_fresh_seed else 'does NOT hold'}"
        lines.append(line)
    if rec.after_life_short:
        lines.append(f"  CAUTION: {life} this set's yield lower bound is {pct(c.after_lower)}, below the target "
                     f"{pct(rec.target_yield)}: the target was searched at delivery only. Search with "
                     "--target-after-life to meet it after the service life too (an estimate under the grades' "
                     "stated drift models; confirm with life-tested parts).")
    return lines


def _explain_nothing(rec, args: argparse.Namespace, out) -> None:
    """Why no set was found, in words: too few boards (and how many would do), the
    catalog, or the search's limit."""
    pct = format_pct
    best = rec.best
    if rec.reason == "boards":
        out.write("No set found: too few boards to show the target, not a fault of the catalog.\n")
        if best is None:
            out.write(f"  With {args.samples or rec.design.analysis.samples:,} boards the lower bound cannot reach "
                      f"{pct(rec.target_yield)} even if every board passes.\n")
        else:
            out.write(f"  The best set found passes {best.passed:,} of {best.samples:,} boards "
                      f"(yield {pct(best.estimate)}), but its lower bound is {pct(best.lower)}.\n")
        out.write(f"  About {rec.boards_needed:,} boards would show it ({'every board passing' if best is None else 'if the yield holds'}; "
                  f"{rec.method} interval at {100 * rec.confidence:g} % confidence): "
                  f"run again with --samples {rec.boards_needed}.\n")
    elif rec.reason == "catalog":
        out.write("No set found: the catalog cannot reach the target.\n")
        if best is not None:
            out.write(f"  The best set of catalog grades passes {best.passed:,} of {best.samples:,} boards "
                      f"(yield {pct(best.estimate)}, lower bound {pct(best.lower)}), below the target "
                      f"{pct(rec.target_yield)}; more boards would not change that. Tighter grades "
                      "(--catalog) or a design with more margin are needed.\n")
    else:
        out.write(f"No set found: {rec.note}.\n")
    out.write(f"  (exit status {EXIT_NO_SET}: no set of grades found)\n")
