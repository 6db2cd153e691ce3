"""How the window writes and reads the numbers of a span: units per quantity, engineering
notation with the micro sign, signed margins, and the unit a plot axis shows.

Gain spans are in dB, phase spans in degrees, delay spans in seconds (shown with an SI
prefix, e.g. 100 µs). Nothing here computes; :mod:`filters.values` does the parsing of SI
text.
"""
from __future__ import annotations

import math
import re

from ..errors import InputError, quoted
from ..values import format_value, parse_value

_PREFIX_OF = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
_FACTOR_OF = {p: 10.0 ** e for e, p in _PREFIX_OF.items()}
_FACTOR_OF["u"] = 1e-6
_UNIT_WORDS = {"dB": ("db",), "deg": ("deg", "°", "degrees"), "s": ("s",), "Hz": ("hz",)}


def eng(x: float, unit: str, digits: int = 3, signed: bool = False) -> str:
    """``x`` (SI base unit) in engineering notation with ``unit``: (9.37e-5, "s") -> "93.7 µs".

    dB and deg are written as plain numbers (no prefix); ``signed`` adds "+" to positive
    values (margins)."""
    if not math.isfinite(x):
        return f"{x} {unit}"
    if unit in ("dB", "deg"):
        text = f"{x:.{digits}g} {unit}"
    else:
        text = format_value(x, unit, digits).replace(" u", " µ")
    return ("+" + text) if signed and x > 0 else text


def prefix_for(value: float) -> tuple[str, float]:
    """The SI prefix and its factor that write ``value`` with 1 to 3 digits before the
    point: 9.4e-5 -> ("µ", 1e-6); 0 -> ("", 1.0)."""
    if not math.isfinite(value) or value == 0:
        return "", 1.0
    e = min(max(3 * math.floor(math.log10(abs(value)) / 3), -15), 12)
    return _PREFIX_OF[e], 10.0 ** e


def parse_in_unit(text: str, unit: str, shown_factor: float, field: str) -> float:
    """Read a number typed into a cell that shows ``unit`` (dB, deg, s, Hz).

    The unit word may be typed or left out ("-3 dB", "-3", "100 µs", "100u"); a bare number
    is in the unit the cell shows, scaled by ``shown_factor`` (1e-6 for a cell in µs); an
    SI prefix or the typed unit replaces that scale ("0.1m" and "1e-4 s" are 100 µs). Returns SI base units; raises
    ``InputError`` naming ``field``."""
    s = text.strip()
    scale = shown_factor if unit in ("s", "Hz") else 1.0
    for word in _UNIT_WORDS.get(unit, ()):
        if s.lower().endswith(word):
            s = s[: -len(word)].rstrip()
            scale = 1.0  # "1e-4 s": the unit was typed, so the number is in it
            break
    if not s:
        raise InputError(f"needs a number in {unit}", field)
    try:
        if re.fullmatch(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?", s):
            v = float(s) * scale
        elif unit in ("s", "Hz") and s[-1] in _FACTOR_OF:
            v = parse_value(s.replace("µ", "u"), field)
        else:
            raise InputError("", field)
    except InputError:
        example = {"dB": "-3 or -3 dB", "deg": "-180 or -180 deg", "s": "100 µs, 100u or 0.1m",
                   "Hz": "1.2k or 1200"}.get(unit, "a number")
        raise InputError(f"{quoted(text.strip())} is not a value in {unit}; write e.g. {example}", field) from None
    if not math.isfinite(v):
        raise InputError(f"{quoted(text.strip())} is not a finite value", field)
    return v
