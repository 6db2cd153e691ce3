"""Argument types shared by the subcommands: whole numbers, seeds, fractions written as
``0.95`` or ``95%``, and a parser that takes ``--cutoff -1k`` as a value (so the value's
own check can say what is wrong with it) instead of as an unknown option.

Each type raises :class:`argparse.ArgumentTypeError`; argparse prefixes the message with
the option's name (``argument --target-yield: ...``) and the command exits 2.
"""
from __future__ import annotations

import argparse
import math
import re
import sys

from ..design import MAX_SAMPLES, check_seed
from ..errors import InputError

EXIT_BAD_INPUT = 2
#: ``tolspread recommend`` found no set of grades that meets the target (README: exit status).
EXIT_NO_SET = 3

#: A token that starts like a negative number (``-1k``, ``-.5``, ``-2e3``): a value, not an option.
_NEGATIVE_VALUE = re.compile(r"^-\.?\d")


class Parser(argparse.ArgumentParser):
    """argparse that reports a usage problem in one line and exits 2, and reads a token
    such as ``-1k`` after an option as that option's value."""

    def __init__(self, *args, **kwargs) -> None:
        super().__init__(*args, **kwargs)
        # argparse only takes plain negative numbers ("-1", "-1.5") as values; with SI
        # suffixes ("-1k") it would report "expected one argument" and never show the
        # value's own message. No option of ours starts with a digit, so this is safe.
        self._negative_number_matcher = _NEGATIVE_VALUE

    def error(self, message: str) -> None:  # type: ignore[override]
        sys.stderr.write(f"tolspread: {message} (see tolspread {self.prog.split()[-1]} --help)\n"
                         if " " in self.prog else f"tolspread: {message} (see tolspread --help)\n")
        raise SystemExit(EXIT_BAD_INPUT)


def positive_int(text: str) -> int:
    """A count of boards: a whole number from 1 to :data:`MAX_SAMPLES` (``1,000`` and
    ``1_000`` are accepted)."""
    try:
        v = int(text.replace(",", "").replace("_", ""))
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 1:
        raise argparse.ArgumentTypeError(f"{text!r} must be at least 1")
    if v > MAX_SAMPLES:
        raise argparse.ArgumentTypeError(f"{text!r} is more than the {MAX_SAMPLES:,} boards one run may sample")
    return v


def seed(text: str) -> int:
    """A random seed: a whole number from 0 to 2^63-1, the design file's and the window's
    range (:func:`filters.design.check_seed`)."""
    try:
        return check_seed(text, "--seed")
    except InputError as exc:
        raise argparse.ArgumentTypeError(exc.reason) from None


def fraction_or_percent(text: str, lowest: float = 0.0) -> float:
    """A probability written as a fraction (``0.95``) or a percentage (``95%``, ``95 %``).

    Returns the fraction. A plain number is always read as a fraction, so ``1``, ``1.5``
    or ``95`` are refused (is ``1`` meant as 1 % or as 100 %?) with a message saying how
    it was read and what to write. The value must lie in (``lowest``, 1), or [0.5, 1) when
    ``lowest`` is 0.5; 100 % is refused: no finite number of boards can show it.
    """
    raw = text.strip()
    percent = raw.endswith("%")
    number = raw[:-1].strip() if percent else raw
    try:
        v = float(number)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number; write a fraction such as 0.95 "
                                         "or a percentage such as 95%") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
    frac = v / 100.0 if percent else v
    as_pct = f"{v:g}%"
    if not percent and v >= 1:
        usable = (v / 100 >= lowest if lowest > 0 else True) and v < 100
        hint = (f"write {v / 100:g} or {as_pct} for {v:g} %" if usable
                else "write a fraction such as 0.95 or a percentage such as 95%")
        raise argparse.ArgumentTypeError(
            f"{text!r} is ambiguous: a plain number is read as a fraction, and {v:g} is not below 1 "
            f"({v:g} = {100 * v:g} %); {hint}")
    if frac >= 1:
        raise argparse.ArgumentTypeError(
            f"{text!r} was read as {100 * frac:g} %: it must be below 100 % (no finite number of "
            "boards can show 100 %); write e.g. 99.9%")
    floor_ok = frac >= lowest if lowest > 0 else frac > 0
    if not floor_ok:
        shown = f"{100 * frac:g} %" if percent else f"{frac:g} ({100 * frac:g} %)"
        need = f"at least {lowest:g} ({100 * lowest:g} %)" if lowest > 0 else "above 0"
        raise argparse.ArgumentTypeError(f"{text!r} was read as {shown}: it must be {need}")
    return frac


def confidence(text: str) -> float:
    """A confidence level: a fraction or percentage from 0.5 (50 %) to below 1."""
    return fraction_or_percent(text, lowest=0.5)


def design_with_mask(path: str | None, output: str | None = None, why: str = "no yield to judge"):
    """The design at ``path`` (the built-in demo when None) for a command that judges yield:
    ``output`` (an -o path) is checked first, so a bad path is refused before any work, and a
    design without a spec mask is refused with ``why``."""
    from ..designfile import load, load_demo
    from ..errors import InputError
    from ..safeio import check_output_path

    if output is not None:
        check_output_path(output, "--output")
    design = load_demo() if path is None else load(path)
    if not design.mask:
        raise InputError(f"the design has no spec mask, so there is {why}; add spans first", "mask")
    return design


def one_line(text: str) -> str:
    """A name for the report's title block: one line of at most 200 characters."""
    text = text.strip()
    if "\n" in text or "\r" in text or len(text) > 200:
        raise argparse.ArgumentTypeError("must be one line of at most 200 characters")
    return text


def add_signoff_options(parser: argparse.ArgumentParser) -> None:
    """``--author`` and ``--revision``: the report's title block, over the design's own."""
    parser.add_argument("--author", type=one_line, metavar="NAME",
                        help="the author named in the report's title block (default: the design's \"author\")")
    parser.add_argument("--revision", type=one_line, metavar="REV",
                        help="the design revision in the report's title block (default: the design's \"revision\")")


def signed(design, args: argparse.Namespace):
    """``design`` with the ``--author`` and ``--revision`` given on the command line."""
    from dataclasses import replace

    changes = {k: getattr(args, k) for k in ("author", "revision") if getattr(args, k, None) is not None}
    return replace(design, **changes) if changes else design
