"""Edits of a design's stages and parts, on the design file's dict form (no Qt).

Each function takes the dict form (:func:`filters.designfile.design_to_dict`) and returns a
changed copy; the stage editor (:mod:`app.qt_stage_editor`) turns it back into a design
with the loader's own rules (:func:`filters.design.design_from_dict`) and makes it one
undoable edit, so whatever it accepts saves into a file that opens.
"""
from __future__ import annotations

import copy
import re
from typing import Any

from ..grades import Catalog
from ..topologies import build

__all__ = ["CIRCUIT", "DEFAULT_VALUES", "new_ref", "add_part", "prune_parts", "new_stage", "move_stage",
           "remove_stage", "set_topology", "set_opamp_part", "circuit_from_library", "used_refs",
           "add_element", "add_opamp", "remove_row", "set_circuit", "set_gbw_part", "set_response",
           "element_rows", "opamp_rows"]

CIRCUIT = "circuit"
# a new part's value: resistors, capacitors, inductors and op-amps (gain-bandwidth, Hz)
DEFAULT_VALUES = {"R": "10k", "C": "10n", "L": "1m", "opamp": "10M"}
_PREFIX = {"R": "R", "C": "C", "L": "L", "opamp": "U"}

Data = dict[str, Any]


def new_ref(data: Data, kind: str, also: set[str] = frozenset()) -> str:
    """The next free reference designator for ``kind`` (R7 after R6; U for op-amps)."""
    taken = {p["ref"] for p in data["parts"]} | set(also) | used_refs(data)
    prefix = _PREFIX[kind]
    numbers = [int(m.group(1)) for r in taken if (m := re.fullmatch(rf"{prefix}(\d+)", r))]
    k = max(numbers, default=0) + 1
    while f"{prefix}{k}" in taken:
        k += 1
    return f"{prefix}{k}"


def used_refs(data: Data) -> set[str]:
    """Every name a stage uses: parts of library stages, circuit elements and op-amps."""
    out: set[str] = set()
    for s in data["stages"]:
        out |= set(s.get("parts", {}).values())
        out |= {e["ref"] for e in s.get("elements", [])}
        out |= {o["ref"] for o in s.get("opamps", [])}
    return out


def add_part(data: Data, kind: str, catalog: Catalog, ref: str | None = None) -> tuple[Data, str]:
    """A copy with a new part of ``kind`` (its default value, the catalog's first grade of
    that kind); returns the copy and the new reference designator."""
    out = copy.deepcopy(data)
    ref = ref or new_ref(out, kind)
    grade = catalog.for_kind(kind)[0].name
    out["parts"].append({"ref": ref, "value": DEFAULT_VALUES[kind], "grade": grade})
    return out, ref


def prune_parts(data: Data) -> Data:
    """``data`` without the parts no stage uses any more (the loader refuses a part that
    fills no role): a part goes with the element, role or stage that used it, and out of
    its network (a network left with fewer than two members goes) and the channels' shared
    parts."""
    used = used_refs(data)
    data["parts"] = [p for p in data["parts"] if p["ref"] in used]
    kept = {p["ref"] for p in data["parts"]}
    return _follow_refs(data, lambda ref: ref if ref in kept else None)


def _follow_refs(data: Data, new_ref) -> Data:
    """Networks' members and the channels' shared parts renamed by ``new_ref(ref)`` (None:
    the part is gone); a network left with fewer than two members goes."""
    nets = []
    for net in data.get("networks", []):
        members = [m2 for m in net.get("members", []) if (m2 := new_ref(m)) is not None]
        if len(members) >= 2:
            nets.append({**net, "members": members})
    if nets:
        data["networks"] = nets
    else:
        data.pop("networks", None)
    ch = data.get("channels")
    if isinstance(ch, dict) and "shared" in ch:
        ch["shared"] = [r2 for r in ch["shared"] if (r2 := new_ref(r)) is not None]
    return data


def _library_parts(data: Data, name: str, options: dict[str, Any], catalog: Catalog,
                   reuse: dict[str, str], kinds: dict[str, str]) -> tuple[Data, dict[str, str]]:
    """Role -> part for library topology ``name``: a role keeps ``reuse[role]`` when that
    part has the role's kind, else takes an unclaimed part of ``reuse`` of that kind, else a
    new part. Returns the data (with any new parts) and the mapping."""
    topo = build(name, options)
    free = list(reuse.values())
    mapping: dict[str, str] = {}
    for role, kind in topo.roles.items():
        ref = reuse.get(role)
        if ref is None or kinds.get(ref) != kind or ref not in free:
            ref = next((r for r in free if kinds.get(r) == kind), None)
        if ref is None:
            data, ref = add_part(data, kind, catalog)
        else:
            free.remove(ref)
        mapping[role] = ref
    for role in topo.optional_roles:  # an op-amp part stays if there is one
        ref = reuse.get(role)
        if ref is not None and kinds.get(ref) == "opamp":
            mapping[role] = ref
    return data, mapping


def new_stage(data: Data, catalog: Catalog, kinds: dict[str, str], topology: str = "sallen_key_lowpass") -> Data:
    """A copy with a new library stage at the end, filled with new parts."""
    out = copy.deepcopy(data)
    out, mapping = _library_parts(out, topology, {}, catalog, {}, kinds)
    out["stages"].append({"topology": topology, "parts": mapping})
    return out


def move_stage(data: Data, index: int, step: int) -> Data:
    out = copy.deepcopy(data)
    st = out["stages"]
    j = index + step
    if 0 <= index < len(st) and 0 <= j < len(st):
        st[index], st[j] = st[j], st[index]
    return out


def remove_stage(data: Data, index: int) -> Data:
    """A copy without stage ``index``; parts only it used go too (a circuit's ideal op-amps
    were never parts)."""
    out = copy.deepcopy(data)
    out["stages"].pop(index)
    return prune_parts(out)


def _stage_refs(stage: Data) -> dict[str, str]:
    """A stage's role -> part (a circuit's parts by their own names)."""
    if stage.get("topology") == CIRCUIT:
        refs = {e["ref"]: e["ref"] for e in stage.get("elements", [])}
        refs.update({o["ref"]: o["ref"] for o in stage.get("opamps", [])})
        return refs
    return dict(stage.get("parts", {}))


def circuit_from_library(stage: Data, taken: set[str]) -> Data:
    """A library stage's netlist as a circuit stage: each element names its part, each
    op-amp its part (or a new name: an ideal op-amp)."""
    topo = build(stage["topology"], stage.get("options", {}))
    refs = stage.get("parts", {})
    elements = [{"ref": refs[e.role], "between": [e.a, e.b]} for e in topo.netlist.elements]
    opamps = []
    names = set(taken)
    for o in topo.netlist.opamps:
        ref = refs.get(o.role)
        if ref is None:
            k = 1
            while f"U{k}" in names:
                k += 1
            ref = f"U{k}"
        names.add(ref)
        opamps.append({"ref": ref, "plus": o.plus, "minus": o.minus, "output": o.out})
    out: Data = {"topology": CIRCUIT, "elements": elements}
    if opamps:
        out["opamps"] = opamps
    return _keep_stage_fields(stage, out)


def _keep_stage_fields(old: Data, new: Data) -> Data:
    """``new`` (a stage's file form) with ``old``'s name, ``buffered`` flag and DC bias
    (``bias_v``), where it had them."""
    new.update({k: old[k] for k in ("name", "buffered", "bias_v") if k in old})
    return new


def set_topology(data: Data, index: int, name: str, catalog: Catalog, kinds: dict[str, str],
                 options: dict[str, Any] | None = None) -> Data:
    """A copy whose stage ``index`` is topology ``name`` (a library topology, or
    ``circuit``: the stage's present netlist, then edited as a circuit); parts the stage
    had are reused where their kinds fit, missing ones are new parts."""
    out = copy.deepcopy(data)
    stage = out["stages"][index]
    if name == CIRCUIT:
        if stage.get("topology") != CIRCUIT:
            taken = {p["ref"] for p in out["parts"]} | used_refs(out)
            out["stages"][index] = circuit_from_library(stage, taken)
        return out
    options = dict(options if options is not None else
                   (stage.get("options", {}) if stage.get("topology") == name else {}))
    out, mapping = _library_parts(out, name, options, catalog, _stage_refs(stage), kinds)
    new: Data = {"topology": name, "parts": mapping}
    if options:
        new["options"] = options
    out["stages"][index] = _keep_stage_fields(stage, new)
    return prune_parts(out)


def set_opamp_part(data: Data, index: int, on: bool, catalog: Catalog) -> Data:
    """A copy whose library stage ``index`` has an op-amp part for role U1 (its
    gain-bandwidth sampled from its grade) or, ``on=False``, an ideal op-amp."""
    out = copy.deepcopy(data)
    parts = out["stages"][index].setdefault("parts", {})
    if on and "U1" not in parts:
        out, ref = add_part(out, "opamp", catalog)
        out["stages"][index]["parts"]["U1"] = ref
    elif not on:
        parts.pop("U1", None)
    return prune_parts(out)


def add_element(data: Data, index: int, kind: str, catalog: Catalog) -> tuple[Data, str]:
    """A copy whose circuit stage ``index`` has a new part of ``kind`` from ``out`` to ground
    (a load: the circuit stays valid; edit its nodes next)."""
    out, ref = add_part(data, kind, catalog)
    out["stages"][index].setdefault("elements", []).append({"ref": ref, "between": ["out", "0"]})
    return out, ref


def add_opamp(data: Data, index: int) -> tuple[Data, str]:
    """A copy whose circuit stage ``index`` has a new ideal op-amp, a follower of ``out`` on
    a node of its own (valid as it is; edit its nodes next)."""
    out = copy.deepcopy(data)
    ref = new_ref(out, "opamp")
    node = ref.lower()
    out["stages"][index].setdefault("opamps", []).append(
        {"ref": ref, "plus": "out", "minus": node, "output": node})
    return out, ref


def remove_row(data: Data, index: int, table: str, row: int) -> Data:
    """A copy without row ``row`` of circuit stage ``index``'s ``table`` (``elements`` or
    ``opamps``), and without its part if nothing else uses it."""
    out = copy.deepcopy(data)
    rows = out["stages"][index].get(table, [])
    if 0 <= row < len(rows):
        rows.pop(row)
    if not rows and table == "opamps":
        out["stages"][index].pop("opamps", None)
    return prune_parts(out)


def set_circuit(data: Data, index: int, elements: list[list[str]], opamps: list[list[str]]) -> Data:
    """A copy whose circuit stage ``index`` has these table rows (elements: ref, node, node;
    op-amps: ref, +, -, output). A ref typed over a part's ref that is no part yet renames
    that part (value and grade kept)."""
    out = copy.deepcopy(data)
    stage = out["stages"][index]
    refs = {p["ref"] for p in out["parts"]}
    old = [e["ref"] for e in stage.get("elements", [])] + [o["ref"] for o in stage.get("opamps", [])]
    new = [r[0] for r in elements] + [r[0] for r in opamps]
    for was, now in zip(old, new):
        if was != now and was in refs and now not in refs:
            for p in out["parts"]:
                if p["ref"] == was:
                    p["ref"] = now
            refs = (refs - {was}) | {now}
            _follow_refs(out, lambda ref, was=was, now=now: now if ref == was else ref)  # its network keeps it
    stage["elements"] = [{"ref": r[0], "between": [r[1], r[2]]} for r in elements]
    if opamps:
        stage["opamps"] = [{"ref": r[0], "plus": r[1], "minus": r[2], "output": r[3]} for r in opamps]
    else:
        stage.pop("opamps", None)
    return prune_parts(out)


def set_gbw_part(data: Data, index: int, row: int, on: bool, catalog: Catalog) -> Data:
    """A copy whose circuit stage ``index``'s op-amp ``row`` takes its gain-bandwidth from
    a part of its own name (a new op-amp part: its default value, the first op-amp grade)
    or, ``on=False``, is ideal (that part goes)."""
    out = copy.deepcopy(data)
    ref = out["stages"][index]["opamps"][row]["ref"]
    has = any(p["ref"] == ref for p in out["parts"])
    if on and not has:
        out, _ = add_part(out, "opamp", catalog, ref)
    elif not on and has:
        out["parts"] = [p for p in out["parts"] if p["ref"] != ref]
    return out


def set_response(data: Data, index: int, response: str) -> Data:
    """A copy whose circuit stage ``index`` is judged as ``response`` ("": from its shape)."""
    out = copy.deepcopy(data)
    if response:
        out["stages"][index]["response"] = response
    else:
        out["stages"][index].pop("response", None)
    return out


def element_rows(stage: Data) -> list[list[str]]:
    """A circuit stage's elements as table rows: ref, node, node."""
    return [[e["ref"], *e["between"]] for e in stage.get("elements", [])]


def opamp_rows(stage: Data) -> list[list[str]]:
    """A circuit stage's op-amps as table rows: ref, +, -, output."""
    return [[o["ref"], o["plus"], o["minus"], o["output"]] for o in stage.get("opamps", [])]
