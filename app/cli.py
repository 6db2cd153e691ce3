"""The command line: ``tolspread analyze``, and ``tolspread`` alone to open the window.

Qt is imported only when the window is opened, so the command line works without the
``gui`` extra. Bad input never shows a traceback: one line on stderr and exit status 2.
"""
from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path
from typing import Sequence

from .. import __version__
from ..errors import InputError, ValidationError
from ..safeio import check_output_path

from .cli_args import EXIT_BAD_INPUT, Parser, add_signoff_options, positive_int, seed, signed
from .cli_centre import add_parser as add_centre_parser, run as run_centre
from .cli_design import add_parser as add_design_parser, run as run_design
from .cli_measure import add_parser as add_measure_parser, run as run_measure
from .cli_shapes import add_parser as add_shapes_parser, run as run_shapes
from .cli_recommend import add_parser as add_recommend_parser, run as run_recommend



def _fraction_points(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not 0 < v < 50:
        raise argparse.ArgumentTypeError(f"{text!r} must be above 0 and below 50 percentage points")
    return v / 100.0


def build_parser() -> argparse.ArgumentParser:
    p = Parser(prog="tolspread", description="Tolerance spread and yield of analog filters. "
                "'tolspread [DESIGN]' opens the window (the demo without DESIGN); "
                "'tolspread --screenshot PNG [DESIGN]' renders it offscreen and exits.")
    p.add_argument("--version", action="version", version=f"tolspread {__version__}")
    sub = p.add_subparsers(dest="command", parser_class=Parser)

    a = sub.add_parser("analyze", help="Monte Carlo analysis of a design (the demo without DESIGN)")
    a.add_argument("design", nargs="?", help="design file (JSON); omit for the built-in demo")
    a.add_argument("--samples", type=positive_int, help="number of sampled boards")
    a.add_argument("--seed", type=seed, help="random seed (same seed, same numbers)")
    a.add_argument("--json", metavar="PATH", help="also write the results as JSON to PATH ('-' for stdout)")
    a.add_argument("--half-width", type=_fraction_points, metavar="POINTS",
                   help="add boards until the yield interval's half-width is at most POINTS percentage points")
    a.add_argument("--max-samples", type=positive_int, default=1_000_000,
                   help="upper limit for --half-width (default 1000000)")
    a.add_argument("--attenuation-at", metavar="HZ", action="append", default=[],
                   help="also report the attenuation at this frequency (repeatable; SI text such as 6k)")
    a.add_argument("--qmc", action="store_true", help="quasi-Monte Carlo: scrambled Sobol points instead of random")
    a.add_argument("--interval", choices=("wilson", "exact"), help="yield interval: Wilson score or exact (Clopper-Pearson)")
    a.add_argument("--rare", choices=("auto", "always", "off"), default="auto",
                   help="high-yield estimate by importance sampling: auto (when fewer than 10 boards fail), "
                        "always, or off (default auto)")
    a.add_argument("--report", metavar="PATH", help="also write the design-review report (HTML)")
    add_signoff_options(a)
    add_design_parser(sub)
    add_recommend_parser(sub)
    add_centre_parser(sub)
    add_shapes_parser(sub)
    add_measure_parser(sub)
    for sp in sub.choices.values():
        sp.add_argument("--verbose", action="store_true",
                        help="list every problem of a bad input file, one per line")
    return p


def _load(path: str | None):
    from ..designfile import load, load_demo  # imported when a design is read

    return load_demo() if path is None else load(path)


def cmd_analyze(args: argparse.Namespace) -> int:
    from ..analysis import analyze
    from ..report.text import print_summary, to_json

    for option in ("--json", "--report"):  # issue 11: refuse '' or a device before the run
        target = getattr(args, option[2:])
        if target is not None and not (option == "--json" and target == "-"):
            check_output_path(target, option)
    design = signed(_load(args.design), args)
    if args.attenuation_at:
        from dataclasses import replace

        from ..values import parse_value

        freqs = []
        for text in args.attenuation_at:
            f = parse_value(text, "--attenuation-at")
            if not f > 0:
                raise InputError(f"must be a frequency above 0 Hz, not {text!r}", "--attenuation-at")
            freqs.append(f)
        design = replace(design, analysis=replace(design.analysis,
                                                  attenuation_hz=design.analysis.attenuation_hz + tuple(freqs)))
    progress = None
    if sys.stderr.isatty():
        def progress(done: int, total: int) -> None:
            if total >= 50_000:
                sys.stderr.write(f"\r  {done:,} of {total:,} boards")
                sys.stderr.flush()
    from ..report.build import FIGURE_BOARDS

    # with --report the first boards keep their curves for its spread figure (evaluated once)
    result = analyze(design, samples=args.samples, seed=args.seed, method="sobol" if args.qmc else None,
                     interval=args.interval, half_width=args.half_width, max_samples=args.max_samples,
                     curves=FIGURE_BOARDS if args.report else 0, rare=args.rare, progress=progress)
    if progress is not None and result.samples >= 50_000:
        sys.stderr.write("\n")
    if args.json != "-":
        print_summary(result, sys.stdout)
    if args.json:
        text = json.dumps(to_json(result), indent=2) + "\n"
        if args.json == "-":
            sys.stdout.write(text)
        else:
            from ..designfile import write_text_atomic

            write_text_atomic(Path(args.json), text, backup=False)
    if args.report:
        from ..report import build_report, write_report
        from ..robustness import shapes_for_report

        shapes = shapes_for_report(result) if design.mask else []
        write_report(build_report(result, shapes=shapes), args.report)
        if args.json != "-":
            print(f"wrote the report to {args.report}")
    return 0


#: subcommand -> its runner (args -> exit status)
RUNNERS = {"analyze": cmd_analyze, "design": run_design, "recommend": run_recommend, "centre": run_centre,
           "shapes": run_shapes, "measure": run_measure}
SUBCOMMANDS = tuple(RUNNERS)


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``tolspread`` command; returns the exit status."""
    from ..freed_memory import reuse_freed_memory

    reuse_freed_memory()  # the program's own process: freed curves reused, not mapped afresh
    argv = list(sys.argv[1:] if argv is None else argv)
    parser = build_parser()
    design_path: str | None = None
    args = None
    try:
        if argv and argv[0] in SUBCOMMANDS:
            args = parser.parse_args(argv)
        else:  # the window: ``tolspread [--screenshot PNG] [DESIGN]``
            window = Parser(prog="tolspread", parents=[], add_help=False)
            window.add_argument("--screenshot", metavar="PNG")
            window.add_argument("design", nargs="?")
            if any(a in ("-h", "--help", "--version") for a in argv):
                args = parser.parse_args(argv)
            else:
                args = window.parse_args(argv)
                args.command = None
        design_path = getattr(args, "design", None)
        if args.command in RUNNERS:
            return RUNNERS[args.command](args)
        return open_window(design_path, args.screenshot)
    except ValidationError as exc:
        lines, more = exc.lines(), len(exc.lines()) - 1
        if more and getattr(args, "verbose", False):
            sys.stderr.write(f"tolspread: {_where(design_path)}{len(lines)} problems:\n")
            sys.stderr.writelines(f"  {line}\n" for line in lines)
        else:
            rest = f"; and {more} more problem{'s' if more > 1 else ''} (use --verbose)" if more else ""
            sys.stderr.write(f"tolspread: {_where(design_path)}{lines[0]}{rest}\n")
        return EXIT_BAD_INPUT
    except InputError as exc:
        where = "" if design_path and str(exc).startswith(design_path) else _where(design_path)
        sys.stderr.write(f"tolspread: {where}{exc}\n")
        return EXIT_BAD_INPUT
    except SystemExit as exc:  # argparse: --help, --version, usage errors
        return int(exc.code or 0) if not isinstance(exc.code, str) else EXIT_BAD_INPUT
    except BrokenPipeError:  # output piped into a program that stopped reading
        return 0
    except KeyboardInterrupt:
        sys.stderr.write("tolspread: stopped (Ctrl-C); nothing was written\n")
        return 130


def _where(path: str | None) -> str:
    return f"{path}: " if path else ""


def open_window(design_path: str | None, screenshot: str | None) -> int:
    import importlib.util

    missing = [m for m in ("PySide6", "pyqtgraph") if importlib.util.find_spec(m) is None]
    if missing:
        sys.stderr.write("tolspread: the window needs the gui extra (missing "
                         f"{', '.join(missing)}): pip install 'tolspread[gui]'; "
                         "'tolspread analyze' works without it\n")
        return EXIT_BAD_INPUT
    from .qt_main import run_window

    return run_window(design_path, screenshot)


if __name__ == "__main__":  # pragma: no cover
    raise SystemExit(main())
