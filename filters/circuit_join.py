"""The networks the engine solves: buffered stages one by one, loaded stages together.

A stage with ``"buffered": false`` does not isolate its output: the next stage's input
node is this stage's output node, and the next stage draws current from it. Such a run of
stages (up to and including the first buffered stage after it) is one network: their
netlists are joined into one, each stage's own nodes renamed ``s<k>.<node>`` (k counted
from 1 in the design), its ``in`` the previous stage's output, and every role named by
its part's reference (one part, one place, so the names never collide). The joined
netlist is derived like a circuit stage (:mod:`filters.circuit_derive`); the engine then
sees one stage with the joined H(s). A buffered stage alone keeps its own derivation.

The per-stage metrics (``s<k>.f0_hz``...) of a joined network are named after its first
stage's number (:attr:`filters.engine.CompiledStage.number`), so labels built from the
design's stage names stay right.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Iterable, Sequence

from .circuit import CIRCUIT, MAX_NODES, MAX_OPAMPS
from .circuit_derive import derive_circuit
from .errors import InputError
from .netlist import GROUND, INPUT, OUTPUT, Element, Netlist, OpAmp, TransferFunction, _nodes, derive
from .topologies import ResponseKind, Topology

if TYPE_CHECKING:  # the design's modules import this one, not the other way round
    from .design import Design
    from .stage import Stage

__all__ = ["SolvedStage", "combined_kind", "stage_networks", "solved_stages", "group_problem"]


@dataclass(frozen=True)
class SolvedStage:
    """One network: design stages ``first`` to ``last`` (0-based), ``netlist`` with its
    op-amps' gain-bandwidth roles set, ``roles`` mapping each netlist role to a part."""

    name: str
    topology: Topology
    netlist: Netlist
    roles: dict[str, str]
    first: int
    last: int
    joined: bool  # stages solved together (or a circuit stage): derived by circuit_derive

    @property
    def path(self) -> str:
        return f"stages[{self.first}]"

    def transfer(self) -> TransferFunction:
        """H(s) of the network (cached per process and in the derivation cache).
        Raises :class:`InputError` at this network's first stage when it cannot be derived."""
        if not self.joined:
            return derive(self.netlist)
        try:
            return derive_circuit(self.netlist)
        except InputError as exc:
            raise exc.at(self.path) from None


def combined_kind(kinds: Iterable[ResponseKind]) -> ResponseKind:
    """The response kind of stages in cascade: their common kind, else band-pass.

    Parameters
    ----------
    kinds : iterable of str
        The stages' response kinds.

    Returns
    -------
    str
        A response kind.
    """
    found = set(kinds)
    return found.pop() if len(found) == 1 else "bandpass"


def _own_netlist(st: "Stage") -> tuple[Topology, Netlist]:
    topo = st.built()
    present = {r for r in topo.optional_roles if r in st.roles}
    return topo, topo.with_opamps(present)


def _joined(stages: Sequence["Stage"], first: int, last: int) -> SolvedStage:
    """Stages ``first``..``last`` as one network (see the module notes)."""
    elements: list[Element] = []
    opamps: list[OpAmp] = []
    kinds: dict[str, str] = {}
    topos = []
    for k in range(first, last + 1):
        st = stages[k]
        topo, net = _own_netlist(st)
        topos.append(topo)

        def node(n: str, k: int = k) -> str:
            if n == GROUND:
                return n
            if n == INPUT:
                return INPUT if k == first else f"s{k}.{OUTPUT}"
            if n == OUTPUT and k == last:
                return OUTPUT
            return f"s{k + 1}.{n}"

        for e in net.elements:
            ref = st.roles[e.role]
            kinds[ref] = e.kind
            elements.append(Element(e.kind, ref, node(e.a), node(e.b)))
        for o in net.opamps:
            gbw = st.roles[o.gbw_role] if o.gbw_role else None
            label = gbw or (o.role if st.topology == CIRCUIT else f"s{k + 1}.{o.role}")
            opamps.append(OpAmp(label, node(o.plus), node(o.minus), node(o.out), gbw))
    net = Netlist(tuple(elements), tuple(opamps))
    names = [stages[k].name or f"stage {k + 1}" for k in range(first, last + 1)]
    topo = Topology("+".join(t.name for t in topos), combined_kind(t.kind for t in topos), net,
                    kinds, order=sum(t.order for t in topos),  # type: ignore[arg-type]
                    description=f"{' and '.join(names)} solved as one network (loaded, not buffered)")
    roles = {r: r for r in net.roles}
    return SolvedStage(" + ".join(names), topo, net, roles, first, last, True)


def stage_networks(stages: Sequence["Stage"]) -> tuple[SolvedStage, ...]:
    """The networks of ``stages`` in signal order (see the module notes).

    Parameters
    ----------
    stages : sequence of Stage
        The design's stages in signal order.

    Returns
    -------
    tuple[SolvedStage, ...]
        One network per buffered stage or group of loaded stages.
    """
    out = []
    k = 0
    n = len(stages)
    while k < n:
        last = k
        while last < n - 1 and not stages[last].buffered:
            last += 1
        st = stages[k]
        if last == k:
            topo, net = _own_netlist(st)
            out.append(SolvedStage(st.name or f"stage {k + 1}", topo, net, dict(st.roles), k, k,
                                   st.topology == CIRCUIT))
        else:
            out.append(_joined(stages, k, last))
        k = last + 1
    return tuple(out)


def solved_stages(design: "Design") -> tuple[SolvedStage, ...]:
    """The design's networks in signal order: what the engine compiles.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    tuple[SolvedStage, ...]
        One network per buffered stage or group of loaded stages.
    """
    return stage_networks(design.stages)


def group_problem(solved: SolvedStage) -> InputError | None:
    """A problem when loaded stages solved together exceed a circuit's limits.

    Parameters
    ----------
    solved : SolvedStage
        Stages solved as one network.

    Returns
    -------
    InputError or None
        The problem, or None.
    """
    if solved.first == solved.last:
        return None
    nodes = len(_nodes(solved.netlist)) + 2
    amps = len(solved.netlist.opamps)
    if nodes > MAX_NODES or amps > MAX_OPAMPS:
        return InputError(f"stages {solved.first + 1} to {solved.last + 1} are solved as one network "
                          f"(not buffered) with {nodes} nodes and {amps} op-amps; such a network may have "
                          f"at most {MAX_NODES} nodes and {MAX_OPAMPS} op-amps", f"{solved.path}.buffered")
    return None
