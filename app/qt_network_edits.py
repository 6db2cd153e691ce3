"""Edits of a design's resistor networks and matched pairs (no Qt): make one, add a part to
one, take a part out, change its figures, dissolve it.

Each function takes a :class:`~tolspread.design.Design` and returns a changed copy; the
window (:mod:`app.qt_network_menu`) hands it to ``apply_edit``, which checks it with the
loader's own rules (:mod:`filters.networks`: at least two members, one kind, no op-amp,
no part in two networks, 0 < tolerance <= 10 %, 0 <= ratio <= sqrt(2) x tolerance,
0 <= tracking <= 1000 ppm/K) and makes it one undoable edit. The checks here come first
only to say in words which part breaks a rule (the loader names the list, not the part).

:func:`read_figure` reads a number typed with or without its unit ("0.5", "0.5 %",
"12 V"), for the network dialog and the stage editor's DC bias field.
"""
from __future__ import annotations

import math
import re
from dataclasses import replace

from ..design import Design
from ..errors import InputError, quoted
from ..networks import Network

__all__ = ["KIND_WORDS", "kind_word", "network_of", "candidates", "new_name", "member_problem",
           "with_new", "with_replaced", "with_member", "without_member", "dissolved", "read_figure"]

KIND_WORDS = {"R": "resistor", "C": "capacitor", "L": "inductor", "opamp": "op-amp"}
_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")


def kind_word(kind: str, count: int = 1) -> str:
    """``resistor``, ``capacitors`` ... for a part kind (R, C, L, opamp)."""
    word = KIND_WORDS.get(kind, kind)
    return word if count == 1 else word + "s"


def network_of(design: Design, ref: str) -> Network | None:
    """The network part ``ref`` belongs to, or None."""
    return next((n for n in design.networks if ref in n.members), None)


def candidates(design: Design, editing: str = "") -> list[str]:
    """Refs of the parts a network may hold: resistors, capacitors and inductors in no
    other network than ``editing`` (design order)."""
    return [p.ref for p in design.parts if p.kind != "opamp"
            and (network_of(design, p.ref) is None or network_of(design, p.ref).name == editing)]


def new_name(design: Design, kind: str, count: int) -> str:
    """An unused network name: RN1, CN1, LN1 for a network, RP1, CP1, LP1 for a matched
    pair (a network of two), numbered past the names in use."""
    prefix = {"R": "R", "C": "C", "L": "L"}.get(kind, "X") + ("P" if count == 2 else "N")
    taken = {n.name for n in design.networks} | {p.ref for p in design.parts}
    k = 1
    while f"{prefix}{k}" in taken:
        k += 1
    return f"{prefix}{k}"


def member_problem(design: Design, refs: list[str], editing: str = "") -> str | None:
    """Why ``refs`` cannot be the members of one network (one line naming the part), or
    None: an op-amp, a part already in another network than ``editing``, or a part of
    another kind than the first."""
    kinds = {p.ref: p.kind for p in design.parts}
    for ref in refs:
        if ref not in kinds:
            return f"{ref} is no part of the design"
        if kinds[ref] == "opamp":
            return f"{ref} is an op-amp: a network holds resistors, capacitors or inductors"
        other = network_of(design, ref)
        if other is not None and other.name != editing:
            return f"{ref} is already in network {other.name}: take it out there first"
    first = refs[0] if refs else ""
    for ref in refs[1:]:
        if kinds[ref] != kinds[first]:
            return (f"{ref} is {_a(kind_word(kinds[ref]))}, not {_a(kind_word(kinds[first]))} like {first}: "
                    "the parts of one network must be of one kind")
    return None


def _a(word: str) -> str:
    return ("an " if word[0] in "aeiou" else "a ") + word


def _checked(design: Design, refs: list[str], editing: str = "") -> None:
    problem = member_problem(design, refs, editing)
    if problem is not None:
        raise InputError(problem, "networks")


def with_new(design: Design, network: Network) -> Design:
    """``design`` with ``network`` added after the others."""
    _checked(design, list(network.members))
    return replace(design, networks=design.networks + (network,))


def with_replaced(design: Design, name: str, network: Network) -> Design:
    """``design`` with network ``name`` replaced by ``network`` (its figures, members or name)."""
    _checked(design, list(network.members), name)
    return replace(design, networks=tuple(network if n.name == name else n for n in design.networks))


def _find(design: Design, name: str) -> Network:
    for n in design.networks:
        if n.name == name:
            return n
    raise InputError(f"no network {name!r}", "networks")


def with_member(design: Design, name: str, ref: str) -> Design:
    """``design`` with part ``ref`` added to network ``name`` (refused in words when its
    kind differs from the members' or it is in another network)."""
    net = _find(design, name)
    _checked(design, list(net.members) + [ref], name)
    return with_replaced(design, name, replace(net, members=net.members + (ref,)))


def without_member(design: Design, name: str, ref: str) -> Design:
    """``design`` with part ``ref`` taken out of network ``name`` (the part keeps its grade
    and is drawn on its own again); refused when fewer than two members would be left."""
    net = _find(design, name)
    rest = tuple(m for m in net.members if m != ref)
    if len(rest) < 2:
        raise InputError(f"{name} would keep only {', '.join(rest) or 'nothing'}: a network or matched pair "
                         f"needs two members; dissolve {name} instead", "networks")
    return with_replaced(design, name, replace(net, members=rest))


def dissolved(design: Design, name: str) -> Design:
    """``design`` without network ``name`` (its members become parts on their own)."""
    _find(design, name)
    return replace(design, networks=tuple(n for n in design.networks if n.name != name))


def read_figure(text: str, units: tuple[str, ...], field: str, example: str) -> float | None:
    """A number typed with or without one of its ``units`` ("0.5", "0.5 %", "12 V"); None
    for empty text. Raises :class:`InputError` naming ``field`` (with ``example`` of a good
    entry) for anything else or a value that is not finite."""
    s = text.strip()
    if not s:
        return None
    for unit in sorted(units, key=len, reverse=True):
        if s.lower().endswith(unit.lower()):
            s = s[: -len(unit)].rstrip()
            break
    if not _NUMBER.fullmatch(s):
        raise InputError(f"{quoted(text.strip())} is not a number; write e.g. {example}", field)
    v = float(s)
    if not math.isfinite(v):
        raise InputError(f"{quoted(text.strip())} is not a finite number", field)
    return v
