"""Bad circuit stages (issue 14 item 2): each rule through ``tolspread analyze FILE`` in a
subprocess, as a user meets it: exit 2, one line naming the element and its field path,
no traceback (tests/cli_runs.py asserts that)."""
from __future__ import annotations

import copy
import json
from concurrent.futures import ThreadPoolExecutor

import pytest

from cli_runs import analyze_json, refused_first_line

GRADES = {"R": "R-thin-0.1", "C": "C-C0G-1", "U": "OPAMP-GBW-30"}


def sallen_key_circuit():
    """A good design: a unity-gain Sallen-Key low-pass entered as a circuit stage."""
    parts = {"R1": "10k", "R2": "10k", "C1": "10n", "C2": "4n7", "U1": "1M"}
    return {
        "format": "tolspread-design", "version": 2, "name": "rules (invented)",
        "parts": [{"ref": r, "value": v, "grade": GRADES[r[0]]} for r, v in parts.items()],
        "stages": [{"topology": "circuit", "elements": [
            {"ref": "R1", "between": ["in", "a"]}, {"ref": "R2", "between": ["a", "b"]},
            {"ref": "C1", "between": ["a", "out"]}, {"ref": "C2", "between": ["b", "0"]}],
            "opamps": [{"ref": "U1", "plus": "b", "minus": "out", "output": "out"}]}],
        "analysis": {"f_start": 10, "f_stop": 1e6}}


def with_parts(data, *refs_values):
    for ref, value in refs_values:
        data["parts"].append({"ref": ref, "value": value, "grade": GRADES[ref[0]]})
    return data


def unknown_part(d):
    d["stages"][0]["elements"][1]["ref"] = "R9"


def part_twice(d):
    d["stages"][0]["elements"][1]["ref"] = "R1"
    d["parts"] = [p for p in d["parts"] if p["ref"] != "R2"]


def part_in_two_stages(d):
    d["stages"].append({"topology": "rc_lowpass", "parts": {"R1": "R1", "C1": "C5"}})
    with_parts(d, ("C5", "1n"))


def dangling_node(d):
    d["stages"][0]["elements"].append({"ref": "R3", "between": ["b", "loose"]})
    with_parts(d, ("R3", "1k"))


def floating_island(d):  # p and q only joined to each other, and p to an op-amp input
    d["stages"][0]["elements"] += [{"ref": "R3", "between": ["p", "q"]}, {"ref": "R4", "between": ["q", "p"]}]
    d["stages"][0]["opamps"].append({"ref": "U2", "plus": "p", "minus": "m", "output": "m"})
    d["stages"][0]["elements"].append({"ref": "R5", "between": ["m", "0"]})
    with_parts(d, ("R3", "1k"), ("R4", "1k"), ("R5", "1k"))


def output_on_ground(d):
    d["stages"][0]["opamps"][0]["output"] = "0"


def outputs_tied(d):
    d["stages"][0]["opamps"].append({"ref": "U2", "plus": "a", "minus": "out", "output": "out"})


def no_out_node(d):
    d["stages"][0]["elements"][2]["between"] = ["a", "y"]
    d["stages"][0]["opamps"][0].update(minus="y", output="y")


def singular(d):  # an ideal open-loop comparator: nothing ties its output back, only R5 loads it
    d["stages"][0] = {"topology": "circuit", "elements": [
        {"ref": "R1", "between": ["in", "a"]}, {"ref": "R2", "between": ["a", "b"]},
        {"ref": "C1", "between": ["a", "0"]}, {"ref": "C2", "between": ["b", "0"]},
        {"ref": "R3", "between": ["in", "m"]}, {"ref": "R4", "between": ["m", "0"]},
        {"ref": "R5", "between": ["out", "0"]}],
        "opamps": [{"ref": "comparator", "plus": "b", "minus": "m", "output": "out"}]}
    d["parts"] = [p for p in d["parts"] if p["ref"] != "U1"]
    with_parts(d, ("R3", "1k"), ("R4", "1k"), ("R5", "1k"))


def too_many_nodes(d):  # an RC ladder of 15 own nodes: 18 with in, out and 0
    nodes = ["in"] + [f"n{k}" for k in range(1, 16)] + ["out"]
    d["parts"] = []
    els = []
    for k, (a, b) in enumerate(zip(nodes, nodes[1:]), 1):
        els += [{"ref": f"R{k}", "between": [a, b]}, {"ref": f"C{k}", "between": [b, "0"]}]
        with_parts(d, (f"R{k}", "1k"), (f"C{k}", "1n"))
    d["stages"][0] = {"topology": "circuit", "elements": els}


def too_many_opamps(d):  # seven ideal followers in a row
    nodes = ["in"] + [f"n{k}" for k in range(1, 7)] + ["out"]
    d["stages"][0]["opamps"] = [{"ref": f"X{k}", "plus": a, "minus": b, "output": b}
                                for k, (a, b) in enumerate(zip(nodes, nodes[1:]), 1)]
    d["stages"][0]["elements"] = [{"ref": "R1", "between": ["out", "0"]}]
    d["parts"] = d["parts"][:1]


def both_ends_on_one_node(d):
    d["stages"][0]["elements"][3]["between"] = ["b", "b"]


def element_on_an_opamp_part(d):
    d["stages"][0]["elements"][3]["ref"] = "U1"
    d["stages"][0]["opamps"][0]["ref"] = "ideal"
    d["parts"] = [p for p in d["parts"] if p["ref"] != "C2"]


def last_stage_not_buffered(d):
    d["stages"][0]["buffered"] = False


RULES = [  # (change, words the message must hold, field path)
    (unknown_part, "element R9: no part R9 in the parts list", "stages[0].elements[1]"),
    (part_twice, "element R1: part R1 is used twice", "stages[0].elements[1]"),
    (part_in_two_stages, "part R1 already fills stages[0].elements[0]", "stages[1].parts.R1"),
    (dangling_node, "node loose connects only to R3", "stages[0].elements[4]"),
    (floating_island, "node p (R3, R4, U2 +) has no path to ground or to the input", "stages[0].elements[4]"),
    (output_on_ground, "op-amp U1: its output is tied to ground", "stages[0].opamps[0].output"),
    (outputs_tied, "op-amp U2: its output is tied to op-amp U1's output", "stages[0].opamps[1].output"),
    (no_out_node, "no node named out", "stages[0].elements"),
    (singular, "singular at the nominal values: the voltage at node out", "stages[0]"),
    (too_many_nodes, "18 nodes (counting in, out and 0); a circuit may have at most 16", "stages[0].elements"),
    (too_many_opamps, "7 op-amps; a circuit may have at most 6", "stages[0].opamps"),
    (both_ends_on_one_node, "element C2 has both ends on node b", "stages[0].elements[3].between"),
    (element_on_an_opamp_part, "element U1: part U1 is an op-amp", "stages[0].elements[3]"),
    (last_stage_not_buffered, "the last stage has no next stage to load it", "stages[0].buffered"),
]


def _refusal(rule, folder):
    change, words, where = rule
    data = copy.deepcopy(sallen_key_circuit())
    change(data)
    folder.mkdir()
    line = refused_first_line(data, folder)  # exit 2, no traceback
    return None if words in line and f"{where}: " in line else f"{change.__name__}: {line}"


@pytest.mark.slow
def test_each_bad_circuit_is_refused_naming_the_element(tmp_path):
    # one subprocess per rule, run side by side (each is a command-line start of ~1 s)
    with ThreadPoolExecutor(4) as pool:
        wrong = [w for w in pool.map(lambda r: _refusal(r, tmp_path / r[0].__name__), RULES) if w]
    assert not wrong, "\n".join(wrong)


def test_the_good_circuit_is_accepted(tmp_path):
    path = tmp_path / "good.json"
    path.write_text(json.dumps(sallen_key_circuit()))
    assert analyze_json(path, tmp_path, samples=50)["samples"] == 50
