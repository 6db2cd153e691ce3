"""Part values: reading and writing engineering notation, RKM codes and preferred values.

Every value here is a plain float in SI base units (ohm, farad, henry, hertz); the unit
text written after a number is accepted and dropped, never converted.

* ``parse_value`` reads "4.7k", "10 kΩ", "4n7", "R47", "1e-9" ...
* ``format_value`` / ``format_rkm`` write values back.
* ``E_SERIES``, ``series_values`` and ``snap`` give the preferred values of IEC 60063.
* ``TOLERANCE_LETTERS`` and ``tolerance_letter`` give the tolerance letters of IEC 60062.
"""
from __future__ import annotations

import math
import numbers
import re
from decimal import Decimal

import numpy as np

from .errors import InputError, quoted

__all__ = [
    "PART_UNITS",
    "parse_value",
    "parse_value_with_tolerance",
    "parse_decibels",
    "format_value",
    "format_rkm",
    "E_SERIES",
    "series_values",
    "snap",
    "series_neighbours",
    "series_for_tolerance",
    "TOLERANCE_LETTERS",
    "tolerance_letter",
]

# --- parsing ---------------------------------------------------------------------------

_MU = "\u00b5\u03bc"  # micro sign and Greek small mu, both written for micro
_SI_EXP = {"f": -15, "p": -12, "n": -9, "u": -6, "\u00b5": -6, "\u03bc": -6, "m": -3,
           "k": 3, "K": 3, "M": 6, "meg": 6, "G": 9, "T": 12}
# RKM letters of IEC 60062: the letter stands where the decimal point would be.
_RKM_EXP = {"R": 0, "L": -3, "K": 3, "k": 3, "M": 6, "G": 9, "T": 12,
            "p": -12, "n": -9, "u": -6, "\u00b5": -6, "\u03bc": -6, "m": -3}
_UNIT = "(?:\u2126|\u03a9|(?i:ohms?)|F|H|Hz)"  # ohm sign, capital omega
_SI_RE = re.compile(
    r"(?P<num>[+-]?(?:\d+\.?\d*|\.\d+))(?P<exp>[eE][+-]?\d+)?\s*"
    r"(?P<pre>[mM][eE][gG]|[fpnu" + _MU + r"mkKMGT])?\s*(?P<unit>" + _UNIT + r"|(?<=\d)R)?")
_RKM_RE = re.compile(r"(?P<left>\d*)(?P<letter>[RLkKMGTpnu" + _MU + r"m])(?P<right>\d*)"
                     r"\s*(?P<unit>" + _UNIT + ")?")
# Tolerance form: a strict RKM code (digits after the letter, or an upper-case resistor
# letter after digits) directly followed by one IEC 60062 tolerance letter.
_RKM_TOL_RE = re.compile(r"(?P<code>\d*[RLkKMGTpnu" + _MU + r"m]\d+|\d+[RKMGT])(?P<tol>[BCDFGJKM])")
_NONFINITE_RE = re.compile(r"[+-]?(?:nan|inf|infinity)", re.IGNORECASE)
_HINT = "write e.g. 4.7k, 4k7 or 4700"


#: Unit of a part's value by its kind (ohm, farad, henry; an op-amp's gain-bandwidth in Hz).
PART_UNITS = {"R": "\u03a9", "C": "F", "L": "H", "opamp": "Hz"}


def _decimal_to_float(digits: str, exp10: int, text: str, field: str) -> float:
    """``float(digits × 10**exp10)`` correctly rounded; rejects overflow and underflow."""
    value = float(f"{digits}e{exp10}")
    if not math.isfinite(value):
        raise InputError(f"{quoted(text)} is too large to be a value; {_HINT}", path=field)
    if value == 0.0 and any(c in "123456789" for c in digits):
        raise InputError(f"{quoted(text)} is too small to be a value; {_HINT}", path=field)
    return value


_EXP_CAP = 10**8  # beyond any exponent a value text of at most a few MB can bring back into range


def _exponent(digits: str) -> int:
    """The exponent written after "e" ("+5", "-0012"), without converting thousands of
    digits to an int (Python refuses over 4300): a longer one is capped at +-1e8, which
    still overflows or underflows just as the exact exponent would."""
    sign = -1 if digits[:1] == "-" else 1
    body = digits.lstrip("+-").lstrip("0") or "0"
    return sign * (_EXP_CAP if len(body) > 8 else int(body))


def parse_value(text: str | float, field: str = "") -> float:
    """Read one part value (ohm, farad, henry, hertz ...) and return it in SI base units.

    Accepts plain numbers ("4700", "1e-9", "-0.5"), SI prefixes with an optional unit and
    optional spaces ("4.7k", "10 kΩ", "100pF", "1MHz", "100m" = 0.1, "1meg" = 1e6) and
    IEC 60062 RKM codes ("4k7", "R47", "470R", "4n7"). Prefix case matters: "M" is mega,
    "m" milli; "k"/"K" kilo; "f", "p", "n", "u"/"µ" are lower case only. A number (not
    bool) is accepted as is if finite. Raises ``InputError`` with ``path=field``.

    Parameters
    ----------
    text : str or float
        The value as typed (a number passes through).
    field : str
        Field path named in an error.

    Returns
    -------
    float
        The value in SI base units (ohm, F, H, Hz).

    Raises
    ------
    InputError
        When the text is no value (path ``field``).
    """
    if isinstance(text, numbers.Real) and not isinstance(text, bool):
        try:
            value = float(text)
        except OverflowError:  # an int beyond the largest float
            value = math.inf
        if not math.isfinite(value):
            raise InputError(f"{quoted(text)} is not a finite value; {_HINT}", path=field)
        return value
    if not isinstance(text, str):
        raise InputError(f"expected a value as text or number, got {type(text).__name__}", path=field)
    s = text.strip()
    if not s:
        raise InputError(f"no value given; {_HINT}", path=field)
    if _NONFINITE_RE.fullmatch(s):
        raise InputError(f"{quoted(s)} is not a finite value; {_HINT}", path=field)
    m = _SI_RE.fullmatch(s)
    if m and not (m["exp"] and m["pre"]):
        num, pre = m["num"], m["pre"]
        exp10 = _exponent(m["exp"][1:]) if m["exp"] else 0
        if pre:
            exp10 += _SI_EXP["meg" if pre.lower() == "meg" else pre]
        return _decimal_to_float(num, exp10, s, field)
    m = _RKM_RE.fullmatch(s)
    if m and (m["left"] or m["right"]):
        digits = f"{m['left'] or '0'}.{m['right'] or '0'}"
        return _decimal_to_float(digits, _RKM_EXP[m["letter"]], s, field)
    raise InputError(f"{quoted(s)} is not a value; {_HINT}", path=field)


def parse_decibels(text: str | float, field: str = "") -> float:
    """A finite number of dB from text such as "40", "40dB" or "40 dB" (a number passes
    through); :class:`InputError` naming ``field`` otherwise.

    Parameters
    ----------
    text : str or float
        The level as typed (a number passes through).
    field : str
        Field path named in an error.

    Returns
    -------
    float
        The level in dB.
    """
    t = str(text).strip()
    t = t[:-2].strip() if t.lower().endswith("db") else t
    try:
        v = float(t)
    except ValueError:
        v = math.nan
    if not math.isfinite(v):
        raise InputError(f"must be a number of dB such as 40, not {str(text)!r}", field)
    return v


def parse_value_with_tolerance(text: str, field: str = "") -> tuple[float, str | None]:
    """Read a value that may end in an IEC 60062 tolerance letter: "4K7J" -> (4700.0, "J").

    The letter is only recognised straight after a strict RKM code ("4K7J", "R47F",
    "470RJ", "4n7K"); so "4n7F" means 4.7 nF at ±1 %, not farads. Anything else is read by
    ``parse_value`` and returned with ``None``. The value is in SI base units.

    Parameters
    ----------
    text : str
        The value as typed, perhaps ending in a tolerance letter.
    field : str
        Field path named in an error.

    Returns
    -------
    tuple[float, str or None]
        The value in SI base units and the IEC 60062 letter (None without one).
    """
    s = text.strip() if isinstance(text, str) else text
    if isinstance(s, str):
        m = _RKM_TOL_RE.fullmatch(s)
        if m:
            return parse_value(m["code"], field), m["tol"]
    return parse_value(s, field), None


# --- formatting ------------------------------------------------------------------------

_PREFIX = {-15: "f", -12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}


def _rounded(x: float, digits: int) -> Decimal:
    """|x| as a Decimal: ``digits`` significant figures, or the shortest exact form if >= 17."""
    if not math.isfinite(x):
        raise InputError(f"{x!r} is not a finite value")
    if not isinstance(digits, int) or digits < 1:
        raise ValueError(f"digits must be a positive integer, got {digits!r}")
    return Decimal(repr(abs(x))) if digits >= 17 else Decimal(f"{abs(x):.{digits - 1}e}")


def _plain(d: Decimal) -> str:
    """A Decimal without exponent and without trailing zeros: 4.700 -> "4.7", 1E+2 -> "100"."""
    s = format(d.normalize(), "f")
    return s.rstrip("0").rstrip(".") if "." in s else s


def format_value(x: float, unit: str = "", digits: int = 4) -> str:
    """Write ``x`` (SI base units) in engineering notation: 4700 -> "4.7k", 1e-8 -> "10n".

    Rounds to ``digits`` significant figures and drops trailing zeros; ``digits >= 17``
    writes the shortest text that reads back to exactly ``x``. Prefixes f..T (micro is
    ASCII "u"). With a unit a space goes before prefix and unit: (4700, "Ω") -> "4.7 kΩ".

    Parameters
    ----------
    x : float
        A value in SI base units.
    unit : str
        Unit symbol appended after the prefix ("Ω", "F", "Hz"; "" for none).
    digits : int
        Significant figures.

    Returns
    -------
    str
        The text, e.g. ``"4.7k"`` or ``"10 nF"``.
    """
    d = _rounded(x, digits)
    sign = "-" if x < 0 else ""
    if d == 0:
        return "0" + (f" {unit}" if unit else "")
    p = min(max(3 * math.floor(d.adjusted() / 3), -15), 12)
    number = sign + _plain(d.scaleb(-p))
    return f"{number} {_PREFIX[p]}{unit}" if unit else number + _PREFIX[p]


_RKM_OUT = {"R": {0: "R", 3: "K", 6: "M", 9: "G", 12: "T"},
            "C": {-12: "p", -9: "n", -6: "u", -3: "m", 0: "R"}}
_RKM_OUT["L"] = _RKM_OUT["C"]


def format_rkm(x: float, kind: str = "R", digits: int = 3) -> str:
    """Write ``x`` (ohm for kind "R", farad "C", henry "L") as an IEC 60062 RKM code.

    Resistors use R, K, M, G, T (below 0.1 ohm L, milliohm): 0.47 -> "R47", 0.1 -> "R10",
    470 -> "470R", 4700 -> "4K7", 1e6 -> "1M0". Capacitors and inductors use p, n, u, m
    (R from 1 up): 4.7e-9 -> "4n7". Rounded to ``digits`` significant figures, written with
    at least two figures; 0 ohm is "0R".

    Parameters
    ----------
    x : float
        The value: ohm for kind ``"R"``, F for ``"C"``, H for ``"L"``.
    kind : str
        Part kind, ``"R"``, ``"C"`` or ``"L"``.
    digits : int
        Significant figures.

    Returns
    -------
    str
        The RKM code, e.g. ``"4K7"`` or ``"2n2"``.
    """
    if kind not in _RKM_OUT:
        raise InputError(f"unknown RKM kind '{kind}'; valid: R, C, L")
    d = _rounded(x, digits)
    if x == 0 and kind == "R":
        return "0R"
    if x <= 0:
        raise InputError(f"{x!r} has no RKM code; it must be positive")
    letters = _RKM_OUT[kind]
    e = d.adjusted()
    if kind == "R" and e < -1:
        p, letter = -3, "L"
    else:
        p = min(max(3 * math.floor(e / 3), min(letters)), max(letters))
        letter = letters[p]
    left, _, right = _plain(d.scaleb(-p)).partition(".")
    left = "" if left == "0" else left
    if len(left + right) == 1:  # at least two figures: 1M0, R10
        right += "0"
    return f"{left}{letter}{right}"


# --- preferred values of IEC 60063 -----------------------------------------------------

def _geometric(n: int) -> list[int]:
    """Three-figure mantissas ×100 of E48/E96/E192: round(100 × 10**(i/n))."""
    return [round(100 * 10 ** (i / n)) for i in range(n)]


_E192 = _geometric(192)
_E192[185] = 920  # IEC 60063 departs from the rounded geometric value 919 here
# Integer mantissas and their scale: value = mantissa × 10**(decade - scale).
_E_INT: dict[str, tuple[tuple[int, ...], int]] = {
    "E3": ((10, 22, 47), 1),
    "E6": ((10, 15, 22, 33, 47, 68), 1),
    "E12": ((10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82), 1),
    "E24": ((10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
             33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91), 1),
    "E48": (tuple(_geometric(48)), 2),
    "E96": (tuple(_geometric(96)), 2),
    "E192": (tuple(_E192), 2),
}
E_SERIES: dict[str, tuple[float, ...]] = {
    name: tuple(m / 10**scale for m in ms) for name, (ms, scale) in _E_INT.items()
}
"""Per-decade mantissas in [1, 10) of each IEC 60063 series (dimensionless)."""

_POW10 = np.array([float(10**k) for k in range(309)])  # exact up to 1e22


def _scaled(mant: np.ndarray, exp10: np.ndarray) -> np.ndarray:
    """``mant × 10**exp10`` for integer arrays, correctly rounded while |exp10| <= 22."""
    exp10 = np.clip(exp10, -308, 308)
    power = _POW10[np.abs(exp10)]
    with np.errstate(over="ignore"):
        return np.where(exp10 >= 0, mant * power, mant / power)


def _series(name: str) -> tuple[np.ndarray, int]:
    if name not in _E_INT:
        raise InputError(f"unknown series '{name}'; valid: {', '.join(_E_INT)}")
    ms, scale = _E_INT[name]
    return np.array(ms, dtype=float), scale


def series_values(name: str, lo: float, hi: float) -> np.ndarray:
    """All preferred values of series ``name`` within [lo, hi], ascending, in SI units.

    Parameters
    ----------
    name : str
        Series name, ``"E3"`` ... ``"E192"``.
    lo : float
        Lowest value, SI units.
    hi : float
        Highest value, SI units.

    Returns
    -------
    np.ndarray
        (N,) float preferred values, ascending.
    """
    mant, scale = _series(name)
    if not (math.isfinite(lo) and math.isfinite(hi) and 0 < lo <= hi):
        raise InputError(f"need 0 < lo <= hi, both finite; got lo={lo!r}, hi={hi!r}")
    decades = np.arange(math.floor(math.log10(lo)) - 1, math.floor(math.log10(hi)) + 2)
    exps = np.repeat(decades - scale, mant.size)
    vals = _scaled(np.tile(mant, decades.size), exps)
    return vals[(vals >= lo) & (vals <= hi)]


def snap(value: float | np.ndarray, series: str = "E24") -> float | np.ndarray:
    """The nearest preferred value of ``series`` by ratio (in log scale), in SI units.

    A scalar gives a float, an array an array of the same shape. Values must be positive
    and finite. A value may snap into the next decade (9.6 -> 10 in E24).

    Parameters
    ----------
    value : float or np.ndarray
        Positive values in SI units, any shape.
    series : str
        Series name, ``"E3"`` ... ``"E192"``.

    Returns
    -------
    float or np.ndarray
        The nearest preferred values, of the shape of ``value``.
    """
    mant, scale = _series(series)
    v = np.asarray(value, dtype=float)
    bad = ~(np.isfinite(v) & (v > 0))
    if bad.any():
        raise InputError(f"cannot snap {v[bad].flat[0]!r}: values must be positive and finite")
    # Candidates in one decade: the top of the one below, the series, and the next 1.0.
    cand = np.concatenate([mant[-1:], mant, mant[:1]])
    shift = np.concatenate([[-1], np.zeros(mant.size, dtype=int), [1]])
    logc = np.log10(cand) - scale + shift
    lv = np.log10(v)
    decade = np.floor(lv).astype(int)
    frac = lv - decade
    hi = np.clip(np.searchsorted(logc, frac), 1, cand.size - 1)
    pick = np.where(frac - logc[hi - 1] <= logc[hi] - frac, hi - 1, hi)
    out = _scaled(cand[pick], decade + shift[pick] - scale)
    return float(out) if out.ndim == 0 else out


def series_neighbours(value: float, series: str = "E24", count: int = 2) -> np.ndarray:
    """Preferred values of ``series`` around ``value`` (SI units): up to ``count`` at or
    below it and ``count`` above it, ascending (a value on the series counts as below).

    Used to try both sides of a value instead of rounding it alone.

    Parameters
    ----------
    value : float
        A positive value in SI units.
    series : str
        Series name, ``"E3"`` ... ``"E192"``.
    count : int
        Values wanted on each side.

    Returns
    -------
    np.ndarray
        (up to 2 * count,) float preferred values, ascending.
    """
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise InputError(f"cannot find neighbours of {value!r}: values must be positive and finite")
    mant, _ = _series(series)
    span = 10.0 ** (math.ceil(count / mant.size) + 1)   # enough decades for ``count`` steps
    vals = series_values(series, v / span, v * span)
    i = int(np.searchsorted(vals, v * (1 + 1e-12), side="right"))
    return vals[max(i - count, 0):i + count]


def series_for_tolerance(tol_pct: float) -> str:
    """The series usually paired with a tolerance in percent: 5 -> "E24", 1 -> "E96".

    20 % E6, 10 % E12, 5 % E24, 2 % E48, 1 % E96, 0.5 % and tighter E192, wider than
    20 % E3. Between grades the series of the next wider grade is used (3 % -> E24).

    Parameters
    ----------
    tol_pct : float
        Tolerance in percent (positive).

    Returns
    -------
    str
        Series name, ``"E3"`` ... ``"E192"``.
    """
    if not (math.isfinite(tol_pct) and tol_pct > 0):
        raise InputError(f"tolerance {tol_pct!r} % must be positive and finite")
    for grade, name in ((0.5, "E192"), (1, "E96"), (2, "E48"), (5, "E24"), (10, "E12"), (20, "E6")):
        if tol_pct <= grade * (1 + 1e-9):
            return name
    return "E3"


# --- tolerance letters of IEC 60062 ----------------------------------------------------

TOLERANCE_LETTERS: dict[str, float] = {"B": 0.1, "C": 0.25, "D": 0.5, "F": 1, "G": 2, "J": 5, "K": 10, "M": 20}
"""Symmetric tolerance in percent (±) for each IEC 60062 letter."""


def tolerance_letter(pct: float) -> str | None:
    """The IEC 60062 letter of a symmetric tolerance in percent (within 1e-9), else None.

    Parameters
    ----------
    pct : float
        Symmetric tolerance in percent.

    Returns
    -------
    str or None
        The letter (``"F"`` for 1 %, ``"J"`` for 5 % ...), or None.
    """
    for letter, value in TOLERANCE_LETTERS.items():
        if abs(pct - value) <= 1e-9:
            return letter
    return None
