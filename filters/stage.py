"""A design's stage: a library topology or a circuit, buffered or loaded, in and out of its file form.

File form of a library stage: ``{"topology": "sallen_key_lowpass", "options": {...},
"parts": {"R1": "R3", ...}, "name": "...", "buffered": true}``; of a circuit stage:
``{"topology": "circuit", "elements": [...], "opamps": [...], "response": "lowpass",
"name": "...", "buffered": true}`` (see :mod:`filters.circuit`). ``buffered`` (default
true), ``response`` (circuits only; default: from the circuit's shape) and ``bias_v``
(default 0: none stated) are written only when they differ from their defaults, so files
without them read as before.
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any, Callable

from .circuit import (CIRCUIT, CircuitElement, CircuitOpAmp, check_nominal, circuit_from_dict,
                      circuit_topology, response_kinds)
from .errors import InputError, is_finite_number
from .topologies import TOPOLOGIES, Topology, build

__all__ = ["Stage", "circuit_stage", "stage_from_dict", "stage_to_dict", "check_networks"]


@dataclass(frozen=True)
class Stage:
    """One stage: a topology with options and which part fills each role, or a circuit.

    Library stage: ``topology`` names it, ``roles`` maps role -> part reference.
    Circuit stage (``topology == "circuit"``): ``elements`` and ``opamps`` hold the netlist
    and ``roles`` maps every part it uses to itself (op-amps that are no part are ideal and
    not in it); build one with :func:`circuit_stage`. ``buffered=False``: the next stage
    loads this one's output, and the two are solved as one network
    (:mod:`filters.circuit_join`). ``response``: a circuit's response kind to judge
    against ("" = from its shape, :func:`filters.circuit.infer_kind`). ``bias_v``: the DC
    bias (V) across the stage's capacitors; a class II capacitor of the stage that states no
    bias of its own sits at it (:meth:`filters.design.Design.part_grades`).
    """

    topology: str
    roles: dict[str, str]
    options: dict[str, Any] = field(default_factory=dict)
    name: str = ""
    elements: tuple[CircuitElement, ...] = ()
    opamps: tuple[CircuitOpAmp, ...] = ()
    buffered: bool = True
    response: str = ""
    bias_v: float = 0.0

    @property
    def is_circuit(self) -> bool:
        return self.topology == CIRCUIT

    def built(self) -> Topology:
        """The stage's own topology; its description says when the next stage loads it."""
        topo = (circuit_topology(self.elements, self.opamps, self.response) if self.is_circuit
                else build(self.topology, self.options))
        if self.buffered:
            return topo
        return replace(topo, description=f"{topo.description}; not buffered: loaded by the next stage, "
                                         "solved with it as one network")

    def structure(self) -> tuple:
        """Everything that decides the stage's equations, hashable (the engine's cache key)."""
        return (self.topology, tuple(sorted(self.options.items())), tuple(sorted(self.roles.items())),
                self.name, self.elements, self.opamps, self.buffered, self.response)


def circuit_stage(elements: tuple[CircuitElement, ...], opamps: tuple[CircuitOpAmp, ...],
                  part_refs: set[str] | frozenset[str], name: str = "", buffered: bool = True,
                  response: str = "") -> Stage:
    """A circuit stage; ``part_refs``: the design's part references (an op-amp whose ref is
    one gets that part's gain-bandwidth).

    Parameters
    ----------
    elements : tuple of CircuitElement
        The circuit's two-terminal elements.
    opamps : tuple of CircuitOpAmp
        Its op-amps.
    part_refs : set of str
        The design's part references.
    name : str
        The stage's name.
    buffered : bool
        Whether the stage's output is buffered (drives the next stage without loading).
    response : str
        Response kind to use ("" to infer it).

    Returns
    -------
    Stage
        The stage.
    """
    roles = {e.ref: e.ref for e in elements}
    roles.update({o.ref: o.ref for o in opamps if o.ref in part_refs})
    return Stage(CIRCUIT, roles, {}, name, tuple(elements), tuple(opamps), buffered, response)


def stage_to_dict(s: Stage) -> dict[str, Any]:
    """The file form of a stage (see the module notes).

    Parameters
    ----------
    s : Stage
        The stage.

    Returns
    -------
    dict[str, Any]
        JSON-ready data.
    """
    d: dict[str, Any] = {"topology": s.topology}
    if s.name:
        d["name"] = s.name
    if s.is_circuit:
        d["elements"] = [e.to_dict() for e in s.elements]
        if s.opamps:
            d["opamps"] = [o.to_dict() for o in s.opamps]
        if s.response:
            d["response"] = s.response
    else:
        if s.options:
            d["options"] = dict(s.options)
        d["parts"] = dict(s.roles)
    if not s.buffered:
        d["buffered"] = False
    if s.bias_v:
        d["bias_v"] = s.bias_v
    return d


Claim = Callable[[str, str, str, str], None]  # (ref, kind, where, what) -> registers or reports


def stage_from_dict(s: Any, path: str, kinds: dict[str, str], claim: Claim,
                    problems: list[InputError]) -> Stage | None:
    """One stage from its file form, or ``None`` after adding its problems.

    ``kinds``: each part's kind from its grade (:func:`filters.circuit.part_kinds`);
    ``claim(ref, kind, where, what)`` registers that the stage uses part ``ref`` as ``kind``
    at field ``where`` (``what`` names the element in a message: "element R1" or "").

    Parameters
    ----------
    s : dict
        The stage's file form.
    path : str
        Field path of the stage.
    kinds : dict of str to str
        Part ref -> kind.
    claim : callable
        ``claim(ref, kind, where, what)`` registers a part's use.
    problems : list of InputError
        Each problem found is appended here.

    Returns
    -------
    Stage or None
        The stage, or None.
    """
    if not isinstance(s, dict):
        problems.append(InputError("must be an object with topology and parts", path))
        return None
    circuit = s.get("topology") == CIRCUIT
    known = ("topology", "name", "buffered", "bias_v") + (("elements", "opamps", "response") if circuit
                                                 else ("options", "parts"))
    problems += [InputError(f"unknown field {k!r}" + ("; a circuit stage names its parts in elements "
                                                      "and opamps" if circuit else ""), f"{path}.{k}")
                 for k in s if k not in known]
    name = s.get("name", "")
    if not isinstance(name, str):
        problems.append(InputError("must be a text", f"{path}.name"))
        name = ""
    buffered = s.get("buffered", True)
    if not isinstance(buffered, bool):
        problems.append(InputError(f"must be true or false, not {buffered!r}", f"{path}.buffered"))
        buffered = True
    bias = s.get("bias_v", 0.0)
    if not is_finite_number(bias) or abs(bias) > 10_000:
        problems.append(InputError(f"must be a DC bias in V within +-10000, not {bias!r}", f"{path}.bias_v"))
        bias = 0.0
    stage = (_circuit_from_dict(s, path, kinds, claim, problems, name, buffered) if circuit
             else _library_from_dict(s, path, claim, problems, name, buffered))
    return None if stage is None else replace(stage, bias_v=float(bias))


def _library_from_dict(s: dict[str, Any], path: str, claim: Claim, problems: list[InputError],
                       name: str, buffered: bool) -> Stage | None:
    topo_name = s.get("topology")
    if not isinstance(topo_name, str) or topo_name not in TOPOLOGIES:
        problems.append(InputError(f"unknown topology {topo_name!r}; known: {', '.join(TOPOLOGIES)}, "
                                   f"{CIRCUIT}", f"{path}.topology"))
        return None
    options = s.get("options", {})
    if not isinstance(options, dict):
        problems.append(InputError("must be an object", f"{path}.options"))
        return None
    try:
        topo = build(topo_name, options)
    except InputError as exc:
        problems.append(exc.at(path))
        return None
    roles = s.get("parts")
    if not isinstance(roles, dict) or not all(isinstance(v, str) for v in roles.values()):
        problems.append(InputError("must map each role to a reference designator, e.g. {\"R1\": \"R3\"}",
                                   f"{path}.parts"))
        return None
    for role in topo.roles:
        if role not in roles:
            problems.append(InputError(f"role {role} needs a part", f"{path}.parts.{role}"))
    for role, ref in roles.items():
        kind = topo.roles.get(role) or topo.optional_roles.get(role)
        if kind is None:
            problems.append(InputError(
                f"{topo_name} has no role {role!r}; its roles: "
                f"{', '.join(list(topo.roles) + list(topo.optional_roles))}", f"{path}.parts.{role}"))
            continue
        claim(ref, kind, f"{path}.parts.{role}", "")
    return Stage(topo_name, dict(roles), dict(options), name, buffered=buffered)


def _circuit_from_dict(s: dict[str, Any], path: str, kinds: dict[str, str], claim: Claim,
                       problems: list[InputError], name: str, buffered: bool) -> Stage | None:
    response = s.get("response", "")
    if response != "" and response not in response_kinds():
        problems.append(InputError(f"must be one of {', '.join(response_kinds())}, not {response!r}",
                                   f"{path}.response"))
        return None
    got = circuit_from_dict(s, path, kinds, problems)
    if got is None:
        return None
    elements, opamps = got
    for k, e in enumerate(elements):
        claim(e.ref, e.kind, f"{path}.elements[{k}]", f"element {e.ref}")
    for k, o in enumerate(opamps):
        if o.ref in kinds:
            claim(o.ref, "opamp", f"{path}.opamps[{k}]", f"op-amp {o.ref}")
    return circuit_stage(elements, opamps, set(kinds), name, buffered, response)


def check_networks(stages: tuple[Stage, ...], values: dict[str, float], freqs_hz: tuple[float, ...],
                   problems: list[InputError]) -> None:
    """The rules that need the whole design: the last stage is buffered (nothing follows it
    to load it), loaded stages solved together keep a circuit's limits, and no circuit or
    joined network has singular equations at the nominal part values (``values``: part
    reference -> SI value; checked at ``freqs_hz``).

    Parameters
    ----------
    stages : tuple of Stage
        The design's stages.
    values : dict of str to float
        Part ref -> nominal value in SI units.
    freqs_hz : tuple of float
        Frequencies in Hz at which to try the equations.
    problems : list of InputError
        Each problem found is appended here.
    """
    from .circuit_join import group_problem, stage_networks

    if stages and not stages[-1].buffered:
        problems.append(InputError("the last stage has no next stage to load it; only a stage followed "
                                   "by another may say buffered: false", f"stages[{len(stages) - 1}].buffered"))
        return
    for solved in stage_networks(stages):
        bad = group_problem(solved)
        if bad is None and solved.joined:
            nominal = {r: values[ref] for r, ref in solved.roles.items()}
            bad = check_nominal(solved.netlist, nominal, freqs_hz, solved.path)
        if bad is not None:
            problems.append(bad)
