"""Circuit stages: the engineer's own netlist, built from the design's parts.

A stage ``{"topology": "circuit", "elements": [...], "opamps": [...]}`` is a netlist:
each element ``{"ref": "R1", "between": ["in", "n1"]}`` puts part R1 between two nodes,
and its kind (R, L or C) is the part's kind (its grade's kind; a part of a grade for any
kind, such as EXACT, takes the first letter of its reference). Each op-amp
``{"ref": "U1", "plus": "n2", "minus": "out", "output": "out"}`` is the single-pole
model with the gain-bandwidth of part U1 when U1 is a part of the design, else ideal.
Node ``in`` is driven by the ideal source, ``0`` is ground, ``out`` is the stage output.

In the :class:`filters.design.Stage` of a circuit, ``elements`` and ``opamps`` hold the
netlist (:class:`CircuitElement` with its part's kind, :class:`CircuitOpAmp`), and
``roles`` maps every part the circuit uses to itself (``{"R1": "R1", "U1": "U1"}``; an
ideal op-amp's ref is no part and is not in it), so everything that reads a stage's roles
reads a circuit the same way. The rules a circuit must meet are checked here
(:func:`circuit_from_dict`, :func:`check_nominal`), each problem naming the element.

Limits: at most :data:`MAX_NODES` nodes (counting ``in``, ``out`` and ``0``),
:data:`MAX_OPAMPS` op-amps and :data:`MAX_ELEMENTS` elements per circuit, and the same
node and op-amp limits for a group of loaded stages solved together.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache
from typing import Any, get_args

import numpy as np

from .errors import InputError, quoted
from .netlist import GROUND, INPUT, OUTPUT, Element, Netlist, OpAmp, _nodes, nodal_system
from .topologies import ResponseKind, Topology

__all__ = [
    "CIRCUIT",
    "MAX_NODES",
    "MAX_OPAMPS",
    "MAX_ELEMENTS",
    "CircuitElement",
    "CircuitOpAmp",
    "part_kinds",
    "circuit_from_dict",
    "circuit_topology",
    "infer_kind",
    "check_nominal",
]

CIRCUIT = "circuit"  # the topology name of a circuit stage
MAX_NODES = 16       # named nodes of one circuit (or of loaded stages solved together), in, out, 0 counted
MAX_OPAMPS = 6
MAX_ELEMENTS = 48
MAX_NODE_NAME = 32
SINGULAR_CONDITION = 1e13  # condition number (rows and columns scaled) above which the equations are singular


@dataclass(frozen=True)
class CircuitElement:
    """Part ``ref`` (kind R, L or C, its part's kind) between nodes ``a`` and ``b``."""

    ref: str
    kind: str
    a: str
    b: str

    def to_dict(self) -> dict[str, Any]:
        return {"ref": self.ref, "between": [self.a, self.b]}


@dataclass(frozen=True)
class CircuitOpAmp:
    """An op-amp: inputs ``plus`` and ``minus``, driving node ``output``. Its ``ref`` is a
    part of the design (its value the gain-bandwidth in Hz) or, if no part has that
    reference, the name of an ideal op-amp."""

    ref: str
    plus: str
    minus: str
    output: str

    def to_dict(self) -> dict[str, Any]:
        return {"ref": self.ref, "plus": self.plus, "minus": self.minus, "output": self.output}


def part_kinds(raw_parts: Any, kind_of_grade: dict[str, str]) -> dict[str, str]:
    """Reference -> kind (R, L, C, opamp or "any") of each part in a design file's parts
    list, from its grade (``kind_of_grade``: grade name -> kind). Malformed entries are
    left out (the parts list reports them).

    Parameters
    ----------
    raw_parts : list
        The design file's ``parts`` list.
    kind_of_grade : dict of str to str
        Grade name -> part kind.

    Returns
    -------
    dict[str, str]
        Part ref -> kind.
    """
    out: dict[str, str] = {}
    for p in raw_parts if isinstance(raw_parts, list) else []:
        if isinstance(p, dict) and isinstance(p.get("ref"), str) and isinstance(p.get("grade"), str):
            out.setdefault(p["ref"], kind_of_grade.get(p["grade"], "?"))
    return out


def _node(raw: Any, where: str, problems: list[InputError]) -> str | None:
    if not isinstance(raw, str) or not raw.strip() or len(raw) > MAX_NODE_NAME or not raw.isprintable():
        problems.append(InputError(f"a node is a name of 1 to {MAX_NODE_NAME} characters "
                                   f"(in, out, 0 or your own), not {quoted(raw)}", where))
        return None
    return raw.strip()


def _fields(raw: Any, known: tuple[str, ...], what: str, where: str, problems: list[InputError]) -> bool:
    if not isinstance(raw, dict):
        problems.append(InputError(f"must be an object with {', '.join(known)} ({what})", where))
        return False
    extra = [k for k in raw if k not in known]
    for k in extra:
        problems.append(InputError(f"unknown field {k!r}; {what} has {', '.join(known)}", f"{where}.{k}"))
    return not extra


def _element(raw: Any, where: str, kinds: dict[str, str], problems: list[InputError]) -> CircuitElement | None:
    if not _fields(raw, ("ref", "between"), 'an element: {"ref": "R1", "between": ["in", "n1"]}',
                   where, problems):
        return None
    ref = raw.get("ref")
    if not isinstance(ref, str) or not ref.strip():
        problems.append(InputError("must name a part of the design, such as R1", f"{where}.ref"))
        return None
    between = raw.get("between")
    if not isinstance(between, list) or len(between) != 2:
        problems.append(InputError(f"element {ref}: between must be two nodes, such as [\"in\", \"n1\"]",
                                   f"{where}.between"))
        return None
    a, b = (_node(n, f"{where}.between", problems) for n in between)
    if a is None or b is None:
        return None
    if a == b:
        problems.append(InputError(f"element {ref} has both ends on node {a}", f"{where}.between"))
        return None
    kind = kinds.get(ref)
    if kind is None:
        problems.append(InputError(f"element {ref}: no part {ref} in the parts list", where))
        return None
    if kind == "any":
        kind = ref[0].upper()
        if kind not in "RLC":
            problems.append(InputError(f"element {ref}: its grade fits any kind, so its reference must "
                                       "start with R, L or C to say which it is", where))
            return None
    if kind not in ("R", "L", "C"):
        what = "an op-amp" if kind == "opamp" else "not a resistor, capacitor or inductor"
        problems.append(InputError(f"element {ref}: part {ref} is {what} (its grade); an element "
                                   "must be an R, L or C part", where))
        return None
    return CircuitElement(ref, kind, a, b)


def _opamp(raw: Any, where: str, kinds: dict[str, str], problems: list[InputError]) -> CircuitOpAmp | None:
    keys = ("ref", "plus", "minus", "output")
    if not _fields(raw, keys, 'an op-amp: {"ref": "U1", "plus": "n2", "minus": "out", "output": "out"}',
                   where, problems):
        return None
    ref = raw.get("ref")
    if not isinstance(ref, str) or not ref.strip():
        problems.append(InputError("must name the op-amp, such as U1 (a part of the design for its "
                                   "gain-bandwidth, or any name for an ideal op-amp)", f"{where}.ref"))
        return None
    nodes = [_node(raw.get(k), f"{where}.{k}", problems) for k in keys[1:]]
    if None in nodes:
        return None
    plus, minus, output = nodes
    assert plus is not None and minus is not None and output is not None
    if ref in kinds and kinds[ref] not in ("opamp", "any"):
        problems.append(InputError(f"op-amp {ref}: part {ref} is a {kinds[ref]} part; an op-amp's part "
                                   "needs an op-amp grade (its value is the gain-bandwidth)", where))
        return None
    if output == GROUND:
        problems.append(InputError(f"op-amp {ref}: its output is tied to ground (node 0)", f"{where}.output"))
        return None
    if output == INPUT:
        problems.append(InputError(f"op-amp {ref}: its output is tied to the source (node in)", f"{where}.output"))
        return None
    if plus == minus:
        problems.append(InputError(f"op-amp {ref}: both inputs are on node {plus}", f"{where}.minus"))
        return None
    return CircuitOpAmp(ref, plus, minus, output)


def _connections(elements: tuple[CircuitElement, ...],
                 opamps: tuple[CircuitOpAmp, ...]) -> dict[str, list[str]]:
    """Node -> the elements and op-amp pins on it, in order."""
    on: dict[str, list[str]] = {}
    for e in elements:
        on.setdefault(e.a, []).append(e.ref)
        on.setdefault(e.b, []).append(e.ref)
    for o in opamps:
        for pin, node in (("+", o.plus), ("-", o.minus), ("output", o.output)):
            on.setdefault(node, []).append(f"{o.ref} {pin}")
    return on


def structure_problems(elements: tuple[CircuitElement, ...], opamps: tuple[CircuitOpAmp, ...],
                       path: str) -> list[InputError]:
    """The rules on the netlist's shape: limits, the nodes in and out, dangling and
    floating nodes, op-amp outputs tied together. Each problem names the element."""
    problems: list[InputError] = []
    on = _connections(elements, opamps)
    nodes = set(on) | {INPUT, GROUND}
    if len(nodes) > MAX_NODES:
        problems.append(InputError(f"{len(nodes)} nodes (counting in, out and 0); a circuit may have at "
                                   f"most {MAX_NODES}", f"{path}.elements"))
    if len(opamps) > MAX_OPAMPS:
        problems.append(InputError(f"{len(opamps)} op-amps; a circuit may have at most {MAX_OPAMPS}",
                                   f"{path}.opamps"))
    if OUTPUT not in on:
        problems.append(InputError("no node named out: the stage's output must be node out",
                                   f"{path}.elements"))
    if INPUT not in on:
        problems.append(InputError("nothing is connected to node in, where the source drives the stage",
                                   f"{path}.elements"))
    outputs: dict[str, str] = {}
    for k, o in enumerate(opamps):
        if o.output in outputs:
            problems.append(InputError(f"op-amp {o.ref}: its output is tied to op-amp {outputs[o.output]}'s "
                                       f"output (node {o.output})", f"{path}.opamps[{k}].output"))
        outputs.setdefault(o.output, o.ref)
    for node, refs in on.items():
        if node not in (INPUT, GROUND) and len(refs) == 1:
            problems.append(InputError(f"node {node} connects only to {refs[0]}", _where(node, elements,
                                                                                        opamps, path)))
    # every node must reach ground or the source through elements (an op-amp output is
    # held against ground; op-amp inputs draw no current and connect nothing)
    link: dict[str, set[str]] = {n: set() for n in nodes}
    for e in elements:
        link[e.a].add(e.b)
        link[e.b].add(e.a)
    for o in opamps:
        link[o.output].add(GROUND)
        link[GROUND].add(o.output)
    seen, todo = {GROUND, INPUT}, [GROUND, INPUT]
    while todo:
        for m in link[todo.pop()]:
            if m not in seen:
                seen.add(m)
                todo.append(m)
    for node in on:
        if node not in seen and len(on[node]) > 1:
            problems.append(InputError(f"node {node} ({', '.join(on[node])}) has no path to ground or to "
                                       "the input through elements", _where(node, elements, opamps, path)))
    return problems


def _where(node: str, elements: tuple[CircuitElement, ...], opamps: tuple[CircuitOpAmp, ...],
           path: str) -> str:
    """The path of the first element (else op-amp) on ``node``."""
    for k, e in enumerate(elements):
        if node in (e.a, e.b):
            return f"{path}.elements[{k}]"
    for k, o in enumerate(opamps):
        if node in (o.plus, o.minus, o.output):
            return f"{path}.opamps[{k}]"
    return path


def circuit_from_dict(s: dict[str, Any], path: str, kinds: dict[str, str],
                      problems: list[InputError]) -> tuple[tuple[CircuitElement, ...],
                                                           tuple[CircuitOpAmp, ...]] | None:
    """The elements and op-amps of circuit stage ``s`` (its file form), or ``None`` after
    adding the problems to ``problems``. ``kinds``: each part's kind (:func:`part_kinds`).

    Parameters
    ----------
    s : dict
        The stage's file form.
    path : str
        Field path of the stage.
    kinds : dict of str to str
        Part ref -> kind.
    problems : list of InputError
        Each problem found is appended here.

    Returns
    -------
    tuple[tuple[CircuitElement, ...], tuple[CircuitOpAmp, ...]] or None
        The elements and op-amps, or None.
    """
    before = len(problems)
    raw_el = s.get("elements")
    if not isinstance(raw_el, list) or not raw_el:
        problems.append(InputError('must be a list of elements such as {"ref": "R1", "between": ["in", "n1"]}',
                                   f"{path}.elements"))
        return None
    if len(raw_el) > MAX_ELEMENTS:
        problems.append(InputError(f"{len(raw_el)} elements; a circuit may have at most {MAX_ELEMENTS}",
                                   f"{path}.elements"))
        return None
    raw_op = s.get("opamps", [])
    if not isinstance(raw_op, list):
        problems.append(InputError("must be a list of op-amps", f"{path}.opamps"))
        return None
    elements = tuple(e for k, r in enumerate(raw_el)
                     if (e := _element(r, f"{path}.elements[{k}]", kinds, problems)) is not None)
    opamps = tuple(o for k, r in enumerate(raw_op)
                   if (o := _opamp(r, f"{path}.opamps[{k}]", kinds, problems)) is not None)
    names: dict[str, str] = {}  # one name space for elements and op-amps: ref -> first field path
    for items, field, what in ((elements, "elements", "element {0}: part {0}"),
                               (opamps, "opamps", "op-amp {0}: the name")):
        for k, item in enumerate(items):
            where = f"{path}.{field}[{k}]"
            if item.ref in names:
                problems.append(InputError(f"{what.format(item.ref)} is used twice in this circuit "
                                           f"(also at {names[item.ref]}); one part, one place", where))
            names.setdefault(item.ref, where)
    if len(problems) > before:
        return None
    problems += structure_problems(elements, opamps, path)
    return None if len(problems) > before else (elements, opamps)


@lru_cache(maxsize=256)
def infer_kind(net: Netlist) -> ResponseKind:
    """The response kind of ``net`` (ideal op-amps) from its shape: whether it blocks DC and
    whether it rolls off at high frequency, seen in how |H| falls a decade further out at
    generic element values (random, 0.5 to 2). Blocks both: band-pass; DC only:
    high-pass; otherwise low-pass (a circuit that passes both ends, such as a notch, is
    judged against its DC gain unless its stage states another response)."""
    rng = np.random.default_rng(7)
    vals = {r: float(rng.uniform(0.5, 2.0)) for r in net.roles}

    def gain(s: complex) -> float:
        a, b, out = nodal_system(net, vals.__getitem__, s, 2 * math.pi,
                                 lambda m, n: np.zeros((m, n), dtype=complex))
        try:
            return float(abs(np.linalg.solve(a, b)[out, 0]))
        except np.linalg.LinAlgError:
            return math.nan

    def falls(s1: complex, s2: complex) -> bool:  # |H| shrinks >= 5x from s1 to s2 (a decade on)
        g1, g2 = gain(s1), gain(s2)
        return bool(g2 * 5 <= g1) or g1 == 0

    dc_blocked = falls(1e-6j, 1e-7j)
    hf_rolls = falls(1e6j, 1e7j)
    if dc_blocked and hf_rolls:
        return "bandpass"
    return "highpass" if dc_blocked else "lowpass"


def response_kinds() -> tuple[str, ...]:
    """The response kinds a stage may state (``"response"``)."""
    return tuple(get_args(ResponseKind))


def circuit_netlist(elements: tuple[CircuitElement, ...], opamps: tuple[CircuitOpAmp, ...]) -> Netlist:
    """The netlist of a circuit, op-amps ideal (roles: the element refs)."""
    return Netlist(tuple(Element(e.kind, e.ref, e.a, e.b) for e in elements),  # type: ignore[arg-type]
                   tuple(OpAmp(o.ref, o.plus, o.minus, o.output) for o in opamps))


def circuit_topology(elements: tuple[CircuitElement, ...], opamps: tuple[CircuitOpAmp, ...],
                     response: str = "") -> Topology:
    """A circuit as a :class:`Topology`: roles are the element refs, each op-amp an optional
    role (given a part, it has that part's gain-bandwidth). ``response`` overrides the
    kind :func:`infer_kind` finds.

    Parameters
    ----------
    elements : tuple of CircuitElement
        The circuit's two-terminal elements.
    opamps : tuple of CircuitOpAmp
        Its op-amps.
    response : str
        Response kind to use ("" to infer it).

    Returns
    -------
    Topology
        Name, response kind, netlist and roles.
    """
    net = circuit_netlist(elements, opamps)
    kind = response if response else infer_kind(net)
    roles = {e.ref: e.kind for e in elements}
    return Topology(CIRCUIT, kind, net, roles, {o.ref: "opamp" for o in opamps},  # type: ignore[arg-type]
                    order=sum(e.kind in "LC" for e in elements),
                    description=f"circuit of {len(elements)} elements and {len(opamps)} op-amp(s)")


def check_nominal(net: Netlist, values: dict[str, float], freqs_hz: tuple[float, ...],
                  path: str) -> InputError | None:
    """A problem when the nodal equations of ``net`` are singular for the nominal
    ``values`` (role -> SI value) at every frequency of ``freqs_hz`` (s = 2 pi f (0.6 + 0.8j),
    off the axis), naming the nodes whose voltages are left undetermined; else ``None``.

    Parameters
    ----------
    net : Netlist
        The circuit's netlist.
    values : dict of str to float
        Role -> nominal value in SI units.
    freqs_hz : tuple of float
        Frequencies in Hz at which to try.
    path : str
        Field path named in the problem.

    Returns
    -------
    InputError or None
        The problem, or None.
    """
    unknown: list[str] = []
    worst = None
    for f in freqs_hz:
        s = 2 * math.pi * f * complex(0.6, 0.8)
        a, _b, _out = nodal_system(net, values.__getitem__, s, 2 * math.pi,
                                   lambda m, n: np.zeros((m, n), dtype=complex))
        scaled = a.copy()
        for axis in (1, 0):  # rows, then columns, by their largest entry
            top = np.max(np.abs(scaled), axis=axis, keepdims=True)
            scaled = scaled / np.where(top == 0, 1.0, top)
        sv = np.linalg.svd(scaled)
        if sv[1][-1] > 0 and sv[1][0] / sv[1][-1] < SINGULAR_CONDITION:
            return None
        worst = sv
    if worst is None:
        return None
    null = np.abs(worst[2][-1].conj())
    order = _nodes(net)
    unknown = [order[i] for i in np.argsort(-null) if null[i] > 0.1 * null.max()][:4]
    return InputError(f"the circuit's equations are singular at the nominal values: the voltage at node "
                      f"{', '.join(unknown)} is not determined (an op-amp with no feedback path, or "
                      "a loop of op-amps, or a node held only by op-amp inputs?)", path)

