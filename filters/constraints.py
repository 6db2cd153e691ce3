"""Constraints and real costs for the grade search.

What a purchasing decision must respect besides the yield:

* **locked parts** (``"locked": true`` on a part, and every part with measured values)
  keep their grade;
* **forbidden technologies**: a part's ``"forbid"`` list, and the design's
  ``purchase.signal_path_forbid`` list for every capacitor the response depends on. A word
  matches a grade when it appears in the grade's name or technology (``"X7R"``,
  ``"film"``); the word ``"class II"`` matches every class II ceramic dielectric (EIA-198
  codes X5R, X7R, X8R, Y5V, Z5U ...; common practice keeps them out of filter signal paths
  because their value moves with temperature, DC bias and age);
* **real costs**: a grade may carry a price table (``"prices": [[quantity, unit price],
  ...]``, price breaks in rising quantity) and the design a purchase quantity
  (``purchase.boards``, with ``purchase.currency``). The unit price of a grade is that of the
  largest break at or below the quantity (the first break's price below it). When every
  part has priced candidates, the search buys only priced grades and minimises money per
  board; otherwise it keeps the catalog's relative costs and says so.

:func:`signal_path_capacitors` decides which capacitors the response depends on: a 1 % change
of the part's value moves the nominal gain by more than :data:`DEPENDS_DB` anywhere in the
mask's frequency range (the whole grid without a mask).
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace
from typing import Any, Sequence

import numpy as np

from .errors import InputError
from .grades import Grade

__all__ = [
    "DEPENDS_DB",
    "Purchase",
    "purchase_from_dict",
    "purchase_to_dict",
    "is_class_ii",
    "matches",
    "unit_price",
    "signal_path_capacitors",
    "allowed",
    "priced",
    "money_text",
    "with_constraints",
]

DEPENDS_DB = 0.01  # a 1 % change moving the gain by more than this (dB) means the response depends on the part
MAX_BOARDS = 10**9
_CLASS_II = re.compile(r"class\s*ii\b|\b[XYZ][4-9][PRSTUV]\b", re.IGNORECASE)


@dataclass(frozen=True)
class Purchase:
    """The purchase: ``boards`` built (0: not stated, relative costs only), the price
    tables' ``currency`` (text), and technologies forbidden for every capacitor the
    response depends on (``signal_path_forbid``)."""

    boards: int = 0
    currency: str = ""
    signal_path_forbid: tuple[str, ...] = ()


def purchase_from_dict(data: Any, problems: list[InputError], path: str = "purchase") -> Purchase:
    """The design file's ``purchase`` entry; problems are added to ``problems``.

    Parameters
    ----------
    data : Any
        ``{"boards": 5000, "currency": "EUR", "signal_path_forbid": ["class II"]}`` or None.
    problems : list of InputError
        Where problems go (each with its field path).
    path : str
        The entry's field path.

    Returns
    -------
    Purchase
        The default (nothing stated) when ``data`` is None or bad.
    """
    if data is None:
        return Purchase()
    if not isinstance(data, dict):
        problems.append(InputError("must be an object with boards, currency and signal_path_forbid", path))
        return Purchase()
    bad = [k for k in data if k not in ("boards", "currency", "signal_path_forbid")]
    problems += [InputError(f"unknown field {k!r}", f"{path}.{k}") for k in bad]
    boards = data.get("boards", 0)
    if isinstance(boards, bool) or not isinstance(boards, int) or not 0 <= boards <= MAX_BOARDS:
        problems.append(InputError(f"must be a whole number of boards from 0 to {MAX_BOARDS:,}", f"{path}.boards"))
        boards = 0
    currency = data.get("currency", "")
    if not isinstance(currency, str) or len(currency) > 12:
        problems.append(InputError("must be a short currency name such as EUR", f"{path}.currency"))
        currency = ""
    forbid = data.get("signal_path_forbid", [])
    if not isinstance(forbid, list) or not all(isinstance(x, str) and x.strip() for x in forbid):
        problems.append(InputError('must be a list of technology words such as "class II"',
                                   f"{path}.signal_path_forbid"))
        forbid = []
    return Purchase(boards, currency.strip(), tuple(x.strip() for x in forbid))


def purchase_to_dict(p: Purchase) -> dict | None:
    """The design file's form of ``p``; None when nothing is stated.

    Parameters
    ----------
    p : Purchase
        The purchase settings.

    Returns
    -------
    dict or None
        JSON-ready data, or None.
    """
    if p == Purchase():
        return None
    out: dict[str, Any] = {"boards": p.boards}
    if p.currency:
        out["currency"] = p.currency
    if p.signal_path_forbid:
        out["signal_path_forbid"] = list(p.signal_path_forbid)
    return out


def is_class_ii(grade: Grade) -> bool:
    """Whether ``grade`` is a class II ceramic capacitor (a temperature curve, or a class II
    code or the words "class II" in its name or technology; EIA-198 codes, REFERENCES.md
    section 3).

    Parameters
    ----------
    grade : Grade
        A grade.

    Returns
    -------
    bool
        True for a class II ceramic capacitor.
    """
    return grade.kind == "C" and (bool(grade.temp_curve_pct) or
                                  bool(_CLASS_II.search(f"{grade.name} {grade.technology}")))


def matches(grade: Grade, word: str) -> bool:
    """Whether ``word`` names ``grade``'s technology (see the module's text).

    Parameters
    ----------
    grade : Grade
        A grade.
    word : str
        A technology word ("C0G", "thick film", "class II" ...).

    Returns
    -------
    bool
        True when the word names the grade's technology.
    """
    w = word.strip().lower()
    if w in ("class ii", "class 2"):
        return is_class_ii(grade)
    return w in f"{grade.name} {grade.technology}".lower()


def unit_price(grade: Grade, quantity: int) -> float | None:
    """Unit price of ``grade`` at ``quantity`` from its price breaks; None without prices.

    Parameters
    ----------
    grade : Grade
        A grade with ``prices`` ((quantity, unit price), rising quantity) or without.
    quantity : int
        Parts bought.

    Returns
    -------
    float or None
        The price of the largest break at or below ``quantity`` (the first break's below it).
    """
    if not grade.prices:
        return None
    price = grade.prices[0][1]
    for q, p in grade.prices:
        if q <= quantity:
            price = p
    return float(price)


def signal_path_capacitors(design) -> set[str]:
    """References of the capacitors the nominal response depends on (see the module's text).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    set of str
        Capacitor references whose +1 % change moves the nominal gain by more than
        :data:`DEPENDS_DB` within the mask's frequency range.
    """
    from .evaluate import evaluate_values, prepare

    caps = [i for i, p in enumerate(design.parts) if p.kind == "C"]
    if not caps:
        return set()
    prep = prepare(design)
    nominal = prep.nominal.values
    rows = np.repeat(nominal[None, :], 1 + len(caps), axis=0)
    for k, i in enumerate(caps, start=1):
        rows[k, i] *= 1.01
    gain = np.empty((rows.shape[0], prep.freqs_hz.size))
    evaluate_values(prep, rows, out=(gain, None, None), metrics=False)  # the gain curves only
    f = prep.freqs_hz
    if design.mask:
        lo = min(s.f1 for s in design.mask)
        hi = max(s.f2 for s in design.mask)
        sel = (f >= lo * (1 - 1e-9)) & (f <= hi * (1 + 1e-9))
    else:
        sel = np.ones(f.size, dtype=bool)
    moved = np.nanmax(np.abs(gain[1:, sel] - gain[0, sel]), axis=1)
    return {design.parts[i].ref for i, m in zip(caps, moved) if m > DEPENDS_DB}


def allowed(design, part_index: int, grade: Grade, signal_parts: set[str]) -> bool:
    """Whether the grade search may give ``grade`` to part ``part_index``: not forbidden by
    the part's own list, nor by the purchase's signal-path list for a capacitor in
    ``signal_parts``.

    Parameters
    ----------
    design : Design
        The design.
    part_index : int
        Index of the part in ``design.parts``.
    grade : Grade
        The candidate grade.
    signal_parts : set of str
        Refs of the capacitors the response depends on.

    Returns
    -------
    bool
        True when the grade may be chosen.
    """
    p = design.parts[part_index]
    words: Sequence[str] = p.forbid
    if p.ref in signal_parts:
        words = tuple(words) + tuple(design.purchase.signal_path_forbid)
    return not any(matches(grade, w) for w in words)


def priced(grades: list[list[Grade]], boards: int) -> list[list[Grade]] | None:
    """Each part's priced candidates with their cost replaced by the unit price at ``boards``
    parts (grades without prices are left out where a part has priced ones), or None when
    no quantity is stated or some part has no priced candidate (relative costs are used then).

    Parameters
    ----------
    grades : list of list of Grade
        Per part, its candidate grades.
    boards : int
        Boards bought (the purchase quantity).

    Returns
    -------
    list[list[Grade]] or None
        Per part, priced candidates (cost: money per part), or None.
    """
    if boards <= 0:
        return None
    out = []
    for gs in grades:
        with_prices = [replace(g, cost=float(unit_price(g, boards))) for g in gs if g.prices]
        if not with_prices:
            return None
        out.append(with_prices)
    return out


def money_text(value: float, currency: str) -> str:
    """``0.0412 EUR`` (four significant figures) for a cost per board.

    Parameters
    ----------
    value : float
        Cost per board, in ``currency``.
    currency : str
        Currency code.

    Returns
    -------
    str
        The text.
    """
    if not math.isfinite(value):
        return "n/a"
    return f"{value:.4g} {currency}".strip()



def with_constraints(design, *, lock: Sequence[str] = (), forbid: Sequence[tuple[str, str]] = (),
                     signal_path_forbid: Sequence[str] = (), boards: int | None = None,
                     currency: str | None = None):
    """``design`` with more constraints (what the command line's options add to the file's).

    Parameters
    ----------
    design : Design
        The design.
    lock : sequence of str
        References whose grade the search keeps.
    forbid : sequence of (ref, word)
        A technology word forbidden for one part.
    signal_path_forbid : sequence of str
        Technology words forbidden for every capacitor the response depends on.
    boards : int, optional
        Boards bought (prices are read at this quantity).
    currency : str, optional
        The price tables' currency.

    Returns
    -------
    Design
        A copy with the constraints added; unknown references raise :class:`InputError`.
    """
    for ref in lock:
        design = design.with_part(ref, locked=True)
    for ref, word in forbid:
        p = design.parts[design.part_index(ref)]
        design = design.with_part(ref, forbid=tuple(p.forbid) + (word,))
    pur = design.purchase
    if signal_path_forbid:
        pur = replace(pur, signal_path_forbid=tuple(pur.signal_path_forbid) + tuple(signal_path_forbid))
    if boards is not None:
        if not 0 <= boards <= MAX_BOARDS:
            raise InputError(f"must be from 0 to {MAX_BOARDS:,}", "--boards")
        pur = replace(pur, boards=int(boards))
    if currency is not None:
        pur = replace(pur, currency=currency.strip())
    return replace(design, purchase=pur)
