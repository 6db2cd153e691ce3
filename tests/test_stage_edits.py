"""The stage editor's edits on the design's dict form (app/qt_stage_edits.py, no Qt): every
result is a design the loader accepts (tolspread.design.design_from_dict, the rules a saved
file is opened with), parts follow their stage, element or role, and a circuit made from a
library stage has the library netlist's response (checked by the engine on both)."""
from __future__ import annotations

import numpy as np
import pytest

from tolspread import load_demo
from tolspread.app import qt_stage_edits as edits
from tolspread.design import design_from_dict
from tolspread.designfile import design_to_dict
from tolspread.engine import frequency_response
from tolspread.topologies import TOPOLOGIES


@pytest.fixture
def demo():
    d = load_demo()
    return d, design_to_dict(d), {p.ref: p.kind for p in d.parts}


def refs(data) -> list[str]:
    return [p["ref"] for p in data["parts"]]


def test_new_stage_has_new_parts_and_removing_it_takes_them(demo):
    d, data, kinds = demo
    grown = edits.new_stage(data, d.catalog, kinds)
    design = design_from_dict(grown)
    assert len(design.stages) == 3
    new = set(refs(grown)) - set(refs(data))
    assert new == set(grown["stages"][2]["parts"].values()) and len(new) == 4
    assert refs(edits.remove_stage(grown, 2)) == refs(data)
    design_from_dict(edits.remove_stage(grown, 2))


def test_moving_a_stage_changes_only_the_order(demo):
    _, data, _ = demo
    moved = edits.move_stage(data, 0, 1)
    assert moved["stages"] == data["stages"][::-1]
    assert edits.move_stage(data, 0, -1) == data  # nothing before the first


@pytest.mark.parametrize("name", list(TOPOLOGIES))
def test_every_topology_keeps_fitting_parts_and_loads(demo, name):
    d, data, kinds = demo
    out = edits.set_topology(data, 0, name, d.catalog, kinds)
    design = design_from_dict(out)  # the loader accepts it (one part, one place; none unused)
    kept = set(out["stages"][0]["parts"].values()) & set(data["stages"][0]["parts"].values())
    needed = design.stages[0].built().roles
    fitting = {k: sum(1 for r in data["stages"][0]["parts"].values() if kinds[r] == k) for k in "RLC"}
    for kind in "RLC":  # as many of the old parts are kept as the new topology has roles of their kind
        want = min(fitting[kind], sum(1 for v in needed.values() if v == kind))
        assert sum(1 for r in kept if kinds[r] == kind) == want, kind


def sallen_key_lowpass(r1, r2, c1, c2, s):
    """Unity-gain Sallen-Key low-pass, R1 in-A, R2 A-B, C1 A-out, C2 B-ground:
    H = 1 / (1 + s C2 (R1 + R2) + s^2 R1 R2 C1 C2) (published closed form, common practice)."""
    return 1.0 / (1.0 + s * c2 * (r1 + r2) + s * s * r1 * r2 * c1 * c2)


def test_library_stage_as_circuit_has_the_same_response(demo):
    """The demo with its second stage turned into a circuit of the same netlist: the engine's
    nominal gain equals the product of the two stages' closed forms (1e-9 dB)."""
    from tolspread.nominal_measure import nominal_coeffs

    d, data, kinds = demo
    out = edits.set_topology(data, 1, edits.CIRCUIT, d.catalog, kinds)
    circuit = design_from_dict(out)
    assert circuit.stages[1].topology == "circuit"
    freqs = np.geomspace(10, 1e5, 60)
    comp, coeffs = nominal_coeffs(circuit)
    got = frequency_response(comp, coeffs, freqs, phase=False).gain_db[0]
    v = {p.ref: p.value for p in d.parts}
    s = 2j * np.pi * freqs
    h = 1.0
    for stage in d.stages:
        r = stage.roles
        h = h * sallen_key_lowpass(v[r["R1"]], v[r["R2"]], v[r["C1"]], v[r["C2"]], s)
    np.testing.assert_allclose(got, 20 * np.log10(np.abs(h)), atol=1e-9)


def test_circuit_rows_rename_parts_and_drop_unused_ones(demo):
    d, data, kinds = demo
    out = edits.set_topology(data, 0, edits.CIRCUIT, d.catalog, kinds)
    stage = out["stages"][0]
    rows = edits.element_rows(stage)
    rows[0][0] = "RIN"  # R1 retyped as RIN: the part is renamed, value and grade kept
    renamed = edits.set_circuit(out, 0, rows, edits.opamp_rows(stage))
    design = design_from_dict(renamed)
    part = next(p for p in design.parts if p.ref == "RIN")
    assert part.value == next(p for p in d.parts if p.ref == "R1").value and "R1" not in refs(renamed)
    grown, ref = edits.add_element(renamed, 0, "C", d.catalog)
    assert ref in refs(grown) and design_from_dict(grown)
    back = edits.remove_row(grown, 0, "elements", len(grown["stages"][0]["elements"]) - 1)
    assert ref not in refs(back)


def test_opamp_part_on_and_off(demo):
    d, data, kinds = demo
    on = edits.set_opamp_part(data, 0, True, d.catalog)
    amp = on["stages"][0]["parts"]["U1"]
    assert design_from_dict(on).parts[-1].kind == "opamp" and amp in refs(on)
    off = edits.set_opamp_part(on, 0, False, d.catalog)
    assert amp not in refs(off) and "U1" not in off["stages"][0]["parts"]
    circuit = edits.set_topology(data, 0, edits.CIRCUIT, d.catalog, kinds)
    with_part = edits.set_gbw_part(circuit, 0, 0, True, d.catalog)
    name = circuit["stages"][0]["opamps"][0]["ref"]
    assert name in refs(with_part) and design_from_dict(with_part)
    assert name not in refs(edits.set_gbw_part(with_part, 0, 0, False, d.catalog))
