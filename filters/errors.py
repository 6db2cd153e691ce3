"""The project's one error family for bad input.

Every problem carries the path of the offending field (for example ``parts[2].value``)
and a plain reason. The command line prints one line per problem and exits 2; the window
shows the message beside the field and keeps the last good value.
"""
from __future__ import annotations

import math

__all__ = [
    "one_line",
    "TolspreadError",
    "InputError",
    "ValidationError",
    "Cancelled",
    "is_finite_number",
    "quoted",
]


def one_line(text: str, limit: int) -> str:
    """``text`` as part of a one-line message: line breaks and other control characters
    written as escapes (a name holding "\\n" from a file), at most ``limit`` characters
    (the middle of a longer text replaced by "...").

    Parameters
    ----------
    text : str
        Any text.
    limit : int
        Most characters of the result.

    Returns
    -------
    str
        One line of at most ``limit`` characters.
    """
    text = str(text)
    if not text.isprintable():
        text = "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)
    return text if len(text) <= limit else f"{text[:limit - 40]}...{text[-37:]}"


class TolspreadError(Exception):
    """Base of every error this project raises on purpose."""


class InputError(TolspreadError, ValueError):
    """One bad input: ``path`` names the field, ``reason`` says what is wrong."""

    def __init__(self, reason: str, path: str = "") -> None:
        self.reason = one_line(reason, 1000)
        self.path = one_line(path, 200)
        super().__init__(f"{self.path}: {self.reason}" if self.path else self.reason)

    def at(self, prefix: str) -> "InputError":
        """The same problem with ``prefix`` put in front of its path."""
        if not prefix:
            return self
        sep = "" if not self.path or self.path.startswith("[") else "."
        return InputError(self.reason, f"{prefix}{sep}{self.path}")


class ValidationError(InputError):
    """Several problems found at once (a design file is checked whole, not to the first error)."""

    def __init__(self, problems: list[InputError]) -> None:
        self.problems = list(problems)
        first = self.problems[0] if self.problems else InputError("invalid input")
        more = len(self.problems) - 1
        reason = first.reason + (f" (and {more} more problem{'s' if more > 1 else ''})" if more > 0 else "")
        super().__init__(reason, first.path)

    def lines(self) -> list[str]:
        """One readable line per problem."""
        return [str(p) for p in self.problems]


class Cancelled(TolspreadError):
    """A long evaluation was stopped on request; partial results were discarded."""


def is_finite_number(v: object) -> bool:
    """A JSON number (not a bool) that converts to a finite float; integers too large for
    a float (JSON allows any number of digits) are not.

    Parameters
    ----------
    v : object
        A value read from JSON.

    Returns
    -------
    bool
        True for a finite int or float that is not a bool.
    """
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return False
    try:
        return math.isfinite(float(v))
    except OverflowError:
        return False


def quoted(v: object, limit: int = 40) -> str:
    """``repr(v)`` for a message, at most ``limit`` characters (the middle of a longer one
    replaced by "..."), so a message about a huge input stays one readable line.

    Parameters
    ----------
    v : object
        Any value.
    limit : int
        Most characters of the result.

    Returns
    -------
    str
        ``repr(v)``, shortened to ``limit`` characters.
    """
    try:
        text = repr(v)
    except ValueError:  # an int of more digits than Python converts to text
        return "<a number of thousands of digits>"
    text = " ".join(text.split())
    return text if len(text) <= limit else f"{text[:limit - 12]}...{text[-9:]}"
