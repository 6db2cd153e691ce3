"""The topology library: each topology is a small netlist built from a few options.

A topology names its roles (``R1``, ``C2``, ``U1``...) and their kinds; a design's stage
maps each role to a part by its reference designator. Adding a topology means adding one
builder function here and registering it in :data:`TOPOLOGIES`; no formula is typed by
hand, the engine derives H(s) from the netlist (see :mod:`filters.netlist`).

Every op-amp role ``U<n>`` is optional: when a stage maps it to an op-amp part (whose value
is the gain-bandwidth product in Hz) the single-pole model is used, otherwise the op-amp
is ideal.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Callable, Literal

from .errors import InputError
from .netlist import Element, Netlist, OpAmp

__all__ = [
    "ResponseKind",
    "RoleKind",
    "Topology",
    "rc_ladder",
    "lc_ladder",
    "sallen_key",
    "mfb",
    "notch",
    "NOTCHES",
    "TOPOLOGIES",
    "build",
]

ResponseKind = Literal["lowpass", "highpass", "bandpass", "bandstop"]
RoleKind = Literal["R", "L", "C", "opamp"]


@dataclass(frozen=True)
class Topology:
    """A built netlist with its role list.

    ``roles`` maps role -> kind for every role that must be given a part;
    ``optional_roles`` lists the op-amp bandwidth roles that may be left out (ideal op-amp).
    """

    name: str
    kind: ResponseKind
    netlist: Netlist
    roles: dict[str, RoleKind]
    optional_roles: dict[str, RoleKind] = field(default_factory=dict)
    order: int = 2
    description: str = ""

    def with_opamps(self, present: set[str]) -> Netlist:
        """The netlist with a gain-bandwidth role on each op-amp whose role is in ``present``."""
        amps = tuple(
            OpAmp(o.role, o.plus, o.minus, o.out, o.role if o.role in present else None)
            for o in self.netlist.opamps
        )
        return Netlist(self.netlist.elements, amps)


def _opt_bool(options: dict[str, Any], key: str, default: bool) -> bool:
    v = options.get(key, default)
    if not isinstance(v, bool):
        raise InputError(f"must be true or false, not {v!r}", f"options.{key}")
    return v


def _opt_int(options: dict[str, Any], key: str, default: int, lo: int, hi: int) -> int:
    v = options.get(key, default)
    if isinstance(v, bool) or not isinstance(v, int) or not lo <= v <= hi:
        raise InputError(f"must be a whole number from {lo} to {hi}, not {v!r}", f"options.{key}")
    return v


def _opt_choice(options: dict[str, Any], key: str, default: str, choices: tuple[str, ...]) -> str:
    v = options.get(key, default)
    if v not in choices:
        raise InputError(f"must be one of {', '.join(choices)}, not {v!r}", f"options.{key}")
    return v


def _check_options(options: dict[str, Any], known: tuple[str, ...]) -> None:
    for k in options:
        if k not in known:
            raise InputError(f"unknown option {k!r}; this topology takes {', '.join(known) or 'none'}",
                             f"options.{k}")


def _elements_roles(elements: list[Element]) -> dict[str, RoleKind]:
    return {e.role: e.kind for e in elements}


def rc_ladder(options: dict[str, Any], highpass: bool) -> Topology:
    """Passive RC ladder of 1 to 4 sections, each loading the one before it.

    Low-pass: series R_k, shunt C_k. High-pass: series C_k, shunt R_k. Options:
    ``sections`` (1-4), ``source`` (a source resistance role ``RS``), ``load`` (a load
    resistance role ``RL`` across the output).

    Parameters
    ----------
    options : dict
        The stage's topology options (from the design file).
    highpass : bool
        High-pass (series C) instead of low-pass (series R).

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    _check_options(options, ("sections", "source", "load"))
    n = _opt_int(options, "sections", 1, 1, 4)
    els: list[Element] = []
    prev = "in"
    if _opt_bool(options, "source", False):
        els.append(Element("R", "RS", "in", "src"))
        prev = "src"
    for k in range(1, n + 1):
        node = "out" if k == n else f"n{k}"
        if highpass:
            els += [Element("C", f"C{k}", prev, node), Element("R", f"R{k}", node, "0")]
        else:
            els += [Element("R", f"R{k}", prev, node), Element("C", f"C{k}", node, "0")]
        prev = node
    if _opt_bool(options, "load", False):
        els.append(Element("R", "RL", "out", "0"))
    kind: ResponseKind = "highpass" if highpass else "lowpass"
    return Topology(f"rc_{kind}", kind, Netlist(tuple(els)), _elements_roles(els), order=n,
                    description=f"passive RC {kind} ladder, {n} section(s)")


def lc_ladder(options: dict[str, Any]) -> Topology:
    """Doubly terminated lossless LC low-pass ladder of order 2 to 5.

    ``RS`` from the source, then alternating reactive elements numbered from the source
    side, then the load ``RL`` across the output. Option ``first``: ``shunt`` (C1 across
    the line first, then series L2, shunt C3, ...) or ``series`` (L1 in series first).

    Parameters
    ----------
    options : dict
        The stage's topology options (from the design file).

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    _check_options(options, ("order", "first"))
    n = _opt_int(options, "order", 3, 2, 5)
    first = _opt_choice(options, "first", "shunt", ("shunt", "series"))
    els = [Element("R", "RS", "in", "n0")]
    node = "n0"
    for k in range(1, n + 1):
        shunt = (k % 2 == 1) == (first == "shunt")
        if shunt:
            els.append(Element("C", f"C{k}", node, "0"))
        else:
            nxt = f"n{k}"
            els.append(Element("L", f"L{k}", node, nxt))
            node = nxt
    # The output is the last node; rename it 'out' and terminate it.
    els = [Element(e.kind, e.role, "out" if e.a == node else e.a, "out" if e.b == node else e.b)
           for e in els]
    els.append(Element("R", "RL", "out", "0"))
    return Topology("lc_lowpass", "lowpass", Netlist(tuple(els)), _elements_roles(els), order=n,
                    description=f"doubly terminated LC low-pass ladder, order {n}, {first} element first")


def _gain_network(options: dict[str, Any], els: list[Element]) -> tuple[str, list[Element]]:
    """Unity gain (output to inverting input) or gain 1 + RF/RG set by two resistors."""
    gain = _opt_choice(options, "gain", "unity", ("unity", "resistors"))
    if gain == "unity":
        return "out", els
    return "m", els + [Element("R", "RF", "out", "m"), Element("R", "RG", "m", "0")]


def sallen_key(options: dict[str, Any], highpass: bool) -> Topology:
    """Sallen-Key second-order section, unity gain or gain 1 + RF/RG.

    Low-pass: R1 input to node A, R2 A to B, C1 A to output, C2 B to ground.
    High-pass: C1 input to A, C2 A to B, R1 A to output, R2 B to ground.
    The op-amp's non-inverting input is node B. Option ``gain``: ``unity`` or ``resistors``.

    Parameters
    ----------
    options : dict
        The stage's topology options (from the design file).
    highpass : bool
        High-pass instead of low-pass.

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    _check_options(options, ("gain",))
    if highpass:
        els = [Element("C", "C1", "in", "a"), Element("C", "C2", "a", "b"),
               Element("R", "R1", "a", "out"), Element("R", "R2", "b", "0")]
    else:
        els = [Element("R", "R1", "in", "a"), Element("R", "R2", "a", "b"),
               Element("C", "C1", "a", "out"), Element("C", "C2", "b", "0")]
    minus, els = _gain_network(options, els)
    kind: ResponseKind = "highpass" if highpass else "lowpass"
    net = Netlist(tuple(els), (OpAmp("U1", "b", minus, "out"),))
    return Topology(f"sallen_key_{kind}", kind, net, _elements_roles(els), {"U1": "opamp"},
                    description=f"Sallen-Key {kind}")


def mfb(options: dict[str, Any], kind: ResponseKind) -> Topology:
    """Multiple-feedback (inverting) second-order section.

    Low-pass: R1 input to A, R2 A to output, R3 A to the inverting input N, C1 A to ground,
    C2 output to N. High-pass: C1 input to A, C2 A to N, C3 A to output, R1 A to ground,
    R2 output to N. Band-pass: R1 input to A, R2 A to ground, C1 A to N, C2 A to output,
    R3 output to N. The non-inverting input is grounded.

    Parameters
    ----------
    options : dict
        The stage's topology options (from the design file).
    kind : str
        ``"lowpass"``, ``"highpass"`` or ``"bandpass"`` (``ResponseKind``).

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    _check_options(options, ())
    if kind == "lowpass":
        els = [Element("R", "R1", "in", "a"), Element("R", "R2", "a", "out"),
               Element("R", "R3", "a", "n"), Element("C", "C1", "a", "0"),
               Element("C", "C2", "out", "n")]
    elif kind == "highpass":
        els = [Element("C", "C1", "in", "a"), Element("C", "C2", "a", "n"),
               Element("C", "C3", "a", "out"), Element("R", "R1", "a", "0"),
               Element("R", "R2", "out", "n")]
    else:
        els = [Element("R", "R1", "in", "a"), Element("R", "R2", "a", "0"),
               Element("C", "C1", "a", "n"), Element("C", "C2", "a", "out"),
               Element("R", "R3", "out", "n")]
    net = Netlist(tuple(els), (OpAmp("U1", "0", "n", "out"),))
    return Topology(f"mfb_{kind}", kind, net, _elements_roles(els), {"U1": "opamp"},
                    description=f"multiple-feedback {kind}")


def notch(options: dict[str, Any], kind: ResponseKind) -> Topology:
    """Notch section: a two-integrator-loop (Tow-Thomas) biquad with feedforward, the output
    at the first (lossy) integrator (tests/REFERENCES.md section 16).

    U1 (lossy integrator): C1 and R1 in parallel from its inverting input X to the output
    ``out``, R2 from U3's output to X, feedforward C3 from the input to X. U2 (integrator):
    R3 from ``out`` to its inverting input Y, C2 from Y to its output, feedforward R4 from
    the input to Y. U3 (inverter): R5 from U2's output to its inverting input Z, R6 from Z
    to its output. Every non-inverting input is grounded. By nodal analysis

        H(s) = -(C3/C1) (s^2 + wz^2) / (s^2 + s w0/Q + w0^2),
        w0^2 = R6 / (R2 R3 R5 C1 C2),  Q = w0 R1 C1,  wz^2 = R6 / (R2 R4 R5 C2 C3),

    so the DC gain is -R3/R4 and the high-frequency gain -C3/C1. ``notch_lowpass``
    (wz above w0: the sections of an elliptic or inverse Chebyshev low-pass),
    ``notch_highpass`` (wz below w0) and ``notch`` (a band-stop's sections, judged as a
    band-stop) are this one netlist; only the response kind the design is judged as differs.

    Parameters
    ----------
    options : dict
        The stage's topology options (from the design file).
    kind : str
        The response kind of the notch.

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    _check_options(options, ())
    els = [Element("C", "C1", "x", "out"), Element("R", "R1", "x", "out"), Element("R", "R2", "n3", "x"),
           Element("C", "C3", "in", "x"), Element("R", "R3", "out", "y"), Element("C", "C2", "y", "n2"),
           Element("R", "R4", "in", "y"), Element("R", "R5", "n2", "z"), Element("R", "R6", "z", "n3")]
    net = Netlist(tuple(els), (OpAmp("U1", "0", "x", "out"), OpAmp("U2", "0", "y", "n2"),
                               OpAmp("U3", "0", "z", "n3")))
    name = "notch" if kind == "bandstop" else f"notch_{kind}"
    return Topology(name, kind, net, _elements_roles(els), {"U1": "opamp", "U2": "opamp", "U3": "opamp"},
                    description=f"two-integrator-loop notch ({kind})")


#: The notch section's names (one netlist: see :func:`notch`).
NOTCHES = ("notch_lowpass", "notch_highpass", "notch")

TOPOLOGIES: dict[str, Callable[[dict[str, Any]], Topology]] = {
    "rc_lowpass": lambda o: rc_ladder(o, highpass=False),
    "rc_highpass": lambda o: rc_ladder(o, highpass=True),
    "lc_lowpass": lc_ladder,
    "sallen_key_lowpass": lambda o: sallen_key(o, highpass=False),
    "sallen_key_highpass": lambda o: sallen_key(o, highpass=True),
    "mfb_lowpass": lambda o: mfb(o, "lowpass"),
    "mfb_highpass": lambda o: mfb(o, "highpass"),
    "mfb_bandpass": lambda o: mfb(o, "bandpass"),
    "notch_lowpass": lambda o: notch(o, "lowpass"),
    "notch_highpass": lambda o: notch(o, "highpass"),
    "notch": lambda o: notch(o, "bandstop"),
}


def build(name: str, options: dict[str, Any] | None = None) -> Topology:
    """Build topology ``name`` with ``options``; unknown names raise :class:`InputError`.

    Parameters
    ----------
    name : str
        Topology name (:data:`TOPOLOGIES`).
    options : dict, optional
        Its options.

    Returns
    -------
    Topology
        Name, response kind, netlist and the roles parts must fill.
    """
    if name not in TOPOLOGIES:
        raise InputError(f"unknown topology {name!r}; known: {', '.join(TOPOLOGIES)}", "topology")
    return TOPOLOGIES[name](dict(options or {}))
