"""Circuit stages and loaded stages (issue 14 items 1-3) against an independent solver.

The solver here is modified nodal analysis written for these tests alone: numeric complex
admittance matrices, one extra unknown for the source current and one per op-amp output
current, an ideal op-amp as the constraint V+ = V-, a single-pole one as
V+ - V- = V_out s / (2 pi GBW), solved with numpy.linalg.solve (no sympy, nothing of the
engine's: the engine replaces KCL rows instead and derives coefficients symbolically).
Designs are written as a user writes design files and read with the loader.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from tolspread.circuit_derive import derive_circuit_uncached
from tolspread.designfile import dumps, loads
from tolspread.engine import compile_design, frequency_response, stage_coefficients
from tolspread.errors import InputError
from tolspread.netlist import Element, Netlist, OpAmp
from tolspread.topologies import build

GRADE = {"R": "R-thin-0.1", "C": "C-C0G-1", "L": "L-2", "opamp": "OPAMP-GBW-30"}


# --- the independent solver -------------------------------------------------------------

def mna_response(elements, opamps, values, freqs_hz):
    """H = V(out) / V(in) by modified nodal analysis.

    ``elements``: (kind, ref, a, b); ``opamps``: (plus, minus, output, gbw_ref or None);
    ``values``: ref -> SI value; returns complex H at ``freqs_hz`` (F,)."""
    nodes = sorted(({n for _k, _r, a, b in elements for n in (a, b)}
                    | {n for o in opamps for n in o[:3]}) - {"0"})
    idx = {n: i for i, n in enumerate(nodes)}
    n, m = len(nodes), 1 + len(opamps)
    out = np.empty(len(freqs_hz), dtype=complex)
    for k, f in enumerate(freqs_hz):
        s = 2j * math.pi * f
        a = np.zeros((n + m, n + m), dtype=complex)
        rhs = np.zeros(n + m, dtype=complex)
        for kind, ref, p, q in elements:
            v = values[ref]
            y = {"R": 1 / v, "C": s * v, "L": 1 / (s * v)}[kind]
            for x, z in ((p, q), (q, p)):
                if x != "0":
                    a[idx[x], idx[x]] += y
                    if z != "0":
                        a[idx[x], idx[z]] -= y
        # the source: current i_s into node in, V(in) = 1
        a[idx["in"], n] += 1
        a[n, idx["in"]] = 1
        rhs[n] = 1
        for j, (plus, minus, output, gbw) in enumerate(opamps, start=n + 1):
            a[idx[output], j] += 1  # the op-amp's output current enters its output node
            for node, sign in ((plus, 1), (minus, -1)):
                if node != "0":
                    a[j, idx[node]] += sign
            if gbw is not None:
                a[j, idx[output]] -= s / (2 * math.pi * values[gbw])
        out[k] = np.linalg.solve(a, rhs)[idx["out"]]
    return out


# --- helpers ----------------------------------------------------------------------------

def design_file(parts, stages, f_start=10.0, f_stop=1e6):
    """A design file's text: ``parts`` as (ref, kind, value)."""
    return json.dumps({
        "format": "tolspread-design", "version": 2, "name": "test circuit (invented)",
        "parts": [{"ref": r, "value": v, "grade": GRADE[k]} for r, k, v in parts],
        "stages": stages, "analysis": {"f_start": f_start, "f_stop": f_stop, "samples": 200}})


def engine_response(design, values, freqs_hz):
    """Complex H of the whole design for part values ``values`` (S, parts), (S, F)."""
    circuit = compile_design(design)
    coeffs = stage_coefficients(circuit, values)
    r = frequency_response(circuit, coeffs, freqs_hz)
    return 10 ** (r.gain_db / 20) * np.exp(1j * np.radians(r.phase_deg))


def scattered(design, rows, rng, spread=0.3):
    """Nominal values and ``rows - 1`` boards scattered by up to +-spread (relative)."""
    nominal = np.array([p.value for p in design.parts])
    factors = np.vstack([np.ones(nominal.size), rng.uniform(1 - spread, 1 + spread, (rows - 1, nominal.size))])
    return nominal * factors


def close(got, want, rtol):
    return np.max(np.abs(got - want) / np.abs(want)) <= rtol


# library topologies to enter again as circuits: (name, options, part values by role)
LIBRARY = [
    ("sallen_key_lowpass", {}, {"R1": 10e3, "R2": 22e3, "C1": 22e-9, "C2": 4.7e-9}),
    ("sallen_key_highpass", {"gain": "resistors"},
     {"R1": 15e3, "R2": 33e3, "C1": 10e-9, "C2": 10e-9, "RF": 10e3, "RG": 22e3}),
    ("mfb_bandpass", {}, {"R1": 10e3, "R2": 1e3, "R3": 47e3, "C1": 10e-9, "C2": 10e-9}),
    ("lc_lowpass", {"order": 5}, {"RS": 50.0, "RL": 50.0, "C1": 1e-9, "L2": 3e-6, "C3": 2e-9,
                                  "L4": 3e-6, "C5": 1e-9}),
    ("rc_highpass", {"sections": 3, "source": True, "load": True},
     {"RS": 100.0, "RL": 1e5, "R1": 10e3, "R2": 22e3, "R3": 47e3, "C1": 1e-8, "C2": 4.7e-9, "C3": 2.2e-9}),
]


def _kind(role):
    return "opamp" if role.startswith("U") else role[0]


CASES = [(*case, gbw) for case in LIBRARY for gbw in (None, 3e6)
         if gbw is None or build(case[0], case[1]).netlist.opamps]


@pytest.mark.parametrize("name,options,role_values,gbw", CASES,
                         ids=[f"{c[0]}-{'ideal' if c[3] is None else 'single-pole'}" for c in CASES])
def test_a_library_topology_entered_as_a_circuit_gives_the_same_response(name, options, role_values, gbw):
    topo = build(name, options)
    values = dict(role_values)
    amps = list(topo.netlist.opamps)
    if gbw is not None:
        values["U1"] = gbw
    # the library stage maps role -> part "P_<role>"; the circuit names the same parts
    parts = [(f"P_{r}", _kind(r), v) for r, v in values.items()]
    lib = {"topology": name, "options": options, "parts": {r: f"P_{r}" for r in values}}
    circ = {"topology": "circuit",
            "elements": [{"ref": f"P_{e.role}", "between": [e.a, e.b]} for e in topo.netlist.elements],
            "opamps": [{"ref": f"P_{o.role}" if gbw else f"X_{o.role}", "plus": o.plus, "minus": o.minus,
                        "output": o.out} for o in amps]}
    f = np.geomspace(10, 1e6, 60)
    d_lib, d_circ = loads(design_file(parts, [lib])), loads(design_file(parts, [circ]))
    assert d_circ.stages[0].topology == "circuit"
    rows = scattered(d_lib, 6, np.random.default_rng(1))
    h_lib, h_circ = engine_response(d_lib, rows, f), engine_response(d_circ, rows, f)
    # the same circuit through the library path and the circuit path: equal to 1e-9
    assert close(h_circ, h_lib, 1e-9)
    # and both equal the independent nodal solution (modified nodal analysis, this file)
    els = [(e.kind, f"P_{e.role}", e.a, e.b) for e in topo.netlist.elements]
    ops = [(o.plus, o.minus, o.out, "P_U1" if gbw else None) for o in amps]
    for row, h in zip(rows, h_circ):
        want = mna_response(els, ops, dict(zip((p.ref for p in d_circ.parts), row)), f)
        assert close(h, want, 1e-9)
    assert compile_design(d_circ).kind == compile_design(d_lib).kind


def _random_circuit(rng, inner):
    """A random circuit: ``inner`` own nodes besides in, out and 0, R/L/C elements, at most
    one op-amp (a follower or a non-inverting gain stage onto out)."""
    nodes = ["in"] + [f"n{k}" for k in range(inner)] + ["out"]
    elements = []
    count = {"R": 0, "C": 0, "L": 0}

    def add(a, b):
        kind = rng.choice(["R", "R", "C", "C", "L"])
        count[kind] += 1
        value = {"R": 10 ** rng.uniform(2.5, 4.5), "C": 10 ** rng.uniform(-9, -7),
                 "L": 10 ** rng.uniform(-3, -1)}[kind]
        elements.append((kind, f"{kind}{count[kind]}", a, b, value))

    for a, b in zip(nodes[:-1], nodes[1:]):  # a path from in to out
        add(a, b)
    for node in nodes[1:]:  # every node also to ground or to another node
        add(node, "0" if rng.uniform() < 0.6 else nodes[int(rng.integers(0, len(nodes)))])
    for _ in range(int(rng.integers(0, 4))):
        a, b = rng.choice(nodes + ["0"], 2, replace=False)
        add(str(a), str(b))
    elements = [e for e in elements if e[2] != e[3]]
    opamps = []
    if inner >= 1 and rng.uniform() < 0.5:  # buffer the last own node onto a new output
        last = f"n{inner - 1}"
        elements = [(k, r, "x" if a == "out" else a, "x" if b == "out" else b, v) for k, r, a, b, v in elements]
        elements.append(("R", "RF", "out", "m", 10e3))
        elements.append(("R", "RG", "m", "0", 22e3))
        opamps.append((last, "m", "out", None))
    return elements, opamps


def test_random_circuits_against_the_independent_solver():
    rng = np.random.default_rng(2024)
    f = np.geomspace(10, 1e6, 40)
    checked = with_opamp = 0
    for trial in range(12):
        inner = 1 + trial % 6  # 3 to 8 nodes with in and out
        elements, opamps = _random_circuit(rng, inner)
        parts = [(r, k, v) for k, r, _a, _b, v in elements]
        stage = {"topology": "circuit",
                 "elements": [{"ref": r, "between": [a, b]} for _k, r, a, b, _v in elements],
                 "opamps": [{"ref": f"U{j}", "plus": p, "minus": m, "output": o}
                            for j, (p, m, o, _g) in enumerate(opamps, 1)]}
        try:
            design = loads(design_file(parts, [stage]))
        except InputError:  # a dangling node or a floating island: the loader refuses it
            continue
        rows = scattered(design, 3, rng, 0.2)
        h = engine_response(design, rows, f)
        els = [(k, r, a, b) for k, r, a, b, _v in elements]
        for row, got in zip(rows, h):
            want = mna_response(els, opamps, dict(zip((p.ref for p in design.parts), row)), f)
            assert close(got, want, 1e-8), (trial, elements)
        checked += 1
        with_opamp += bool(opamps)
    assert checked >= 8 and with_opamp >= 2


def test_twin_t_notch_at_one_over_2_pi_r_c():
    # A balanced twin-T (R, R, R/2 and C, C, 2C) unloaded (a follower after it) has
    # H(s) = (s^2 + w0^2) / (s^2 + 4 w0 s + w0^2), w0 = 1 / (R C): a zero on the axis at
    # f = 1 / (2 pi R C) (the twin-T closed form, REFERENCES.md section 6, from memory and
    # re-derived by nodal analysis). 2C is two parallel C parts.
    r, c = 10e3, 100e-9
    parts = [("R1", "R", r), ("R2", "R", r), ("R3", "R", r / 2), ("C1", "C", c), ("C2", "C", c),
             ("C3", "C", c), ("C4", "C", c)]
    stage = {"topology": "circuit", "elements": [
        {"ref": "R1", "between": ["in", "t"]}, {"ref": "R2", "between": ["t", "x"]},
        {"ref": "C3", "between": ["t", "0"]}, {"ref": "C4", "between": ["0", "t"]},
        {"ref": "C1", "between": ["in", "u"]}, {"ref": "C2", "between": ["u", "x"]},
        {"ref": "R3", "between": ["u", "0"]}],
        "opamps": [{"ref": "follower", "plus": "x", "minus": "out", "output": "out"}]}
    design = loads(design_file(parts, [stage], 1.0, 1e5))
    f0 = 1 / (2 * math.pi * r * c)
    f = np.concatenate([np.geomspace(1, 1e5, 50), [f0]])
    h = engine_response(design, np.array([[p.value for p in design.parts]] * 2), f)[0]
    w0, s = 1 / (r * c), 2j * math.pi * f
    want = (s ** 2 + w0 ** 2) / (s ** 2 + 4 * w0 * s + w0 ** 2)
    assert close(h[:-1], want[:-1], 1e-9)
    # the notch: at f0 the response is zero in exact arithmetic; here below -200 dB
    assert 20 * np.log10(abs(h[-1])) < -200
    # a 1 % larger R3 leaves a finite notch depth, as the solver says (independent check)
    rows = np.array([[p.value * (1.01 if p.ref == "R3" else 1) for p in design.parts]] * 2)
    got = engine_response(design, rows, np.array([f0]))[0, 0]
    els = [(e.kind, e.ref, e.a, e.b) for e in design.stages[0].elements]
    want0 = mna_response(els, [("x", "out", "out", None)], dict(zip((p.ref for p in design.parts), rows[0])),
                         [f0])[0]
    assert abs(got - want0) <= 1e-9 * abs(want0) and -80 < 20 * np.log10(abs(want0)) < -30


def test_loaded_rc_network_ahead_of_a_sallen_key_is_the_whole_networks_solution():
    parts = [("RA", "R", 4.7e3), ("CA", "C", 10e-9), ("R1", "R", 10e3), ("R2", "R", 10e3),
             ("C1", "C", 22e-9), ("C2", "C", 10e-9), ("U1", "opamp", 5e6)]
    stages = [{"topology": "rc_lowpass", "name": "input", "parts": {"R1": "RA", "C1": "CA"}, "buffered": False},
              {"topology": "sallen_key_lowpass", "name": "main",
               "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2", "U1": "U1"}}]
    loaded = loads(design_file(parts, stages))
    buffered = loads(design_file(parts, [dict(stages[0], buffered=True), stages[1]]))
    f = np.geomspace(10, 1e6, 60)
    rows = scattered(loaded, 5, np.random.default_rng(5), 0.2)
    h = engine_response(loaded, rows, f)
    # the whole network by the independent solver: RC output node 'a' is Sallen-Key's input
    els = [("R", "RA", "in", "a"), ("C", "CA", "a", "0"), ("R", "R1", "a", "p"), ("R", "R2", "p", "b"),
           ("C", "C1", "p", "out"), ("C", "C2", "b", "0")]
    for row, got in zip(rows, h):
        want = mna_response(els, [("b", "out", "out", "U1")], dict(zip((p.ref for p in loaded.parts), row)), f)
        assert close(got, want, 1e-9)
    # loading matters here: the buffered cascade differs by more than 0.1 dB somewhere
    h_buf = engine_response(buffered, rows, f)
    assert np.max(np.abs(20 * np.log10(np.abs(h_buf / h)))) > 0.1
    assert len(compile_design(loaded).stages) == 1 and len(compile_design(buffered).stages) == 2
    assert compile_design(loaded).stages[0].name == "input + main"


def test_circuit_stage_round_trips_through_the_file():
    parts = [("R1", "R", 1e3), ("C1", "C", 1e-9), ("U7", "opamp", 1e6)]
    stage = {"topology": "circuit", "name": "mine", "response": "lowpass", "buffered": False,
             "elements": [{"ref": "R1", "between": ["in", "a"]}, {"ref": "C1", "between": ["a", "0"]}],
             "opamps": [{"ref": "U7", "plus": "a", "minus": "out", "output": "out"}]}
    lib = {"topology": "rc_lowpass", "parts": {"R1": "RB", "C1": "CB"}}
    design = loads(design_file(parts + [("RB", "R", 1e3), ("CB", "C", 1e-9)], [stage, lib]))
    st = design.stages[0]
    assert st.roles == {"R1": "R1", "C1": "C1", "U7": "U7"} and not st.buffered
    assert [e.kind for e in st.elements] == ["R", "C"]
    again = loads(dumps(design))
    assert again == design
    written = json.loads(dumps(design))["stages"]
    assert written[0] == stage  # the file form as the user wrote it, nothing added
    assert "buffered" not in written[1] and "response" not in written[1]


def test_the_derivation_is_kept_and_read_back_without_sympy(tmp_path):
    # a 10-node, 3-op-amp circuit: derived once (the first process), then read from the
    # derivation cache by a second process that never imports sympy
    text = _state_variable_text()
    path = tmp_path / "sv.json"
    path.write_text(text)
    code = ("import sys, json; from tolspread.designfile import load; from tolspread.engine import compile_design;"
            f"c = compile_design(load({str(path)!r})); print(json.dumps(['sympy' in sys.modules,"
            " [s.tf.den_degree for s in c.stages]]))")
    env_run = lambda: json.loads(subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                                                timeout=120, check=True).stdout)
    first = env_run()
    second = env_run()
    assert first[1] == second[1] == [7]
    assert second[0] is False


def _state_variable_text():
    """A state-variable (three op-amp) band-pass behind a two-section RC network: 10 nodes."""
    parts = [("RA", "R", 1e3), ("CA", "C", 10e-9), ("RB", "R", 1e3), ("CB", "C", 10e-9),
             ("R1", "R", 10e3), ("R2", "R", 10e3), ("R3", "R", 10e3), ("R4", "R", 3.3e3),
             ("R5", "R", 16e3), ("C1", "C", 1e-9), ("R6", "R", 16e3), ("C2", "C", 1e-9), ("R7", "R", 10e3),
             ("U1", "opamp", 10e6), ("U2", "opamp", 10e6), ("U3", "opamp", 10e6)]
    els = [("RA", "in", "a1"), ("CA", "a1", "0"), ("RB", "a1", "a2"), ("CB", "a2", "0"),
           ("R1", "a2", "m1"), ("R2", "hp", "m1"), ("R3", "out", "p1"), ("R4", "p1", "0"),
           ("R5", "hp", "m2"), ("C1", "m2", "bp"), ("R6", "bp", "m3"), ("C2", "m3", "lp"), ("R7", "lp", "m1")]
    stage = {"topology": "circuit", "elements": [{"ref": r, "between": [a, b]} for r, a, b in els],
             "opamps": [{"ref": "U1", "plus": "p1", "minus": "m1", "output": "hp"},
                        {"ref": "U2", "plus": "0", "minus": "m2", "output": "out"},
                        {"ref": "U3", "plus": "0", "minus": "m3", "output": "lp"}]}
    stage["elements"][9]["between"] = ["m2", "out"]   # C1: the band-pass output is node out
    stage["elements"][10]["between"] = ["out", "m3"]  # R6
    stage["elements"][6]["between"] = ["out", "p1"]   # R3
    return design_file(parts, [stage], 100.0, 1e6)


def test_a_derivation_past_its_time_limit_stops_and_says_so():
    # 14 nodes, every one joined to its neighbours and the next but one: the expansion has
    # far more than 64 minors, so a limit of a nanosecond is passed at the first check
    nodes = ["in"] + [f"n{k}" for k in range(12)] + ["out"]
    els = [Element("R", f"R{k}", a, b) for k, (a, b) in enumerate(zip(nodes, nodes[1:]))]
    els += [Element("C", f"C{k}", a, b) for k, (a, b) in enumerate(zip(nodes, nodes[2:]))]
    els += [Element("C", f"G{k}", n, "0") for k, n in enumerate(nodes[1:])]
    with pytest.raises(InputError, match="longer than 1e-09 s"):
        derive_circuit_uncached(Netlist(tuple(els), (OpAmp("U", "n3", "out", "n11"),)), seconds=1e-9)


def test_roots_of_a_batch_of_denominators_equal_numpy_roots():
    # a circuit stage of higher order finds its poles for all boards at once
    # (filters/poly_roots.py); numpy.roots of each board's polynomial is the oracle
    from tolspread.poly_roots import batch_roots

    rng = np.random.default_rng(11)
    for n in (3, 4, 5, 7):
        nominal = np.real(np.poly(_stable_poles(rng, n)))[::-1]
        den = nominal * rng.uniform(0.9, 1.1, (300, n + 1))
        if n == 3:
            den[7] = [1.0, 3.0, 3.0, 1.0]  # (s + 1)^3: a triple root
        got = batch_roots(den)
        for row, roots in zip(den, got):
            want = np.roots(row[::-1])
            # every root found, each within 1e-9 of numpy's (1e-4 for the triple root)
            tol = 1e-4 if n == 3 and np.allclose(row, [1, 3, 3, 1]) else 1e-9
            assert np.max(np.min(np.abs(roots[:, None] - want[None, :]), axis=1) / np.abs(want).max()) < tol
            assert np.max(np.min(np.abs(want[:, None] - roots[None, :]), axis=1) / np.abs(want).max()) < tol


def _stable_poles(rng, n):
    poles = []
    for _ in range(n // 2):
        w, q = rng.uniform(0.5, 2), rng.uniform(0.5, 8)
        re, im = -w / (2 * q), w * math.sqrt(1 - 1 / (4 * q * q))
        poles += [complex(re, im), complex(re, -im)]
    return poles + [-rng.uniform(0.3, 3)] * (n % 2)


@pytest.mark.slow
def test_the_circuit_example_through_the_command_line(tmp_path):
    # assets/examples/weigh_scale_notch.json: a loaded stage and a circuit stage, as a user runs it
    from cli_runs import analyze_json, run_cli

    example = Path(__file__).resolve().parent.parent / "assets" / "examples" / "weigh_scale_notch.json"
    result = analyze_json(example, tmp_path, samples=300)  # exit 0, no traceback
    assert 0.5 < result["yield"]["estimate"] < 1.0  # the notch misses on some boards
    proc = run_cli("recommend", str(example), "--target-yield", "90%", "--samples", "300")
    assert proc.returncode == 0, proc.stderr
    assert "recommended" in proc.stdout and "C1" in proc.stdout


def test_a_circuit_too_large_to_evaluate_is_refused_in_about_a_second():
    # 14 nodes joined by 48 elements at random: its determinant would have far more than
    # MAX_TERMS terms; the expansion stops as soon as a minor passes the bound
    from tolspread.circuit_derive import MAX_TERMS

    rng = np.random.default_rng(3)
    nodes = ["in"] + [f"n{k}" for k in range(12)] + ["out"]
    els = [Element("R", f"R{k}", a, b) for k, (a, b) in enumerate(zip(nodes, nodes[1:]))]
    while len(els) < 48:
        a, b = rng.choice(nodes + ["0"], 2, replace=False)
        els.append(Element("C", f"C{len(els)}", str(a), str(b)))
    with pytest.raises(InputError, match=f"more than {MAX_TERMS:,} terms"):
        derive_circuit_uncached(Netlist(tuple(els)), seconds=60)


@pytest.mark.parametrize("kind", ["lowpass", "highpass"])
def test_a_fourth_order_circuit_stage_has_the_library_cascades_continuous_phase(kind):
    # two unity-gain Sallen-Key sections as one circuit stage (one 4th-order network, its
    # phase unwrapped) and as the library's two stages (a pair, one arctan2): the same
    # gain and the same phase in degrees, not only modulo 360
    lp = kind == "lowpass"
    r, c = ("R", "C") if lp else ("C", "R")
    parts = [(f"{r}1", r, 10e3 if lp else 10e-9), (f"{r}2", r, 10e3 if lp else 10e-9),
             (f"{c}1", c, 22e-9 if lp else 22e3), (f"{c}2", c, 10e-9 if lp else 10e3),
             (f"{r}3", r, 10e3 if lp else 10e-9), (f"{r}4", r, 10e3 if lp else 10e-9),
             (f"{c}3", c, 100e-9 if lp else 4.7e3), (f"{c}4", c, 4.7e-9 if lp else 100e3)]
    # Sallen-Key (library layout, REFERENCES.md section 6): first pair in series from the
    # input, the third part from their junction to the output, the fourth to ground
    one = [(f"{r}1", "in", "a1"), (f"{r}2", "a1", "b1"), (f"{c}1", "a1", "m"), (f"{c}2", "b1", "0"),
           (f"{r}3", "m", "a2"), (f"{r}4", "a2", "b2"), (f"{c}3", "a2", "out"), (f"{c}4", "b2", "0")]
    circuit_stage = {"topology": "circuit", "elements": [{"ref": x, "between": [a, b]} for x, a, b in one],
                     "opamps": [{"ref": "X1", "plus": "b1", "minus": "m", "output": "m"},
                                {"ref": "X2", "plus": "b2", "minus": "out", "output": "out"}]}
    roles = ["R1", "R2", "C1", "C2"] if lp else ["C1", "C2", "R1", "R2"]
    library = [{"topology": f"sallen_key_{kind}", "parts": dict(zip(roles, [p[0] for p in parts[:4]]))},
               {"topology": f"sallen_key_{kind}", "parts": dict(zip(roles, [p[0] for p in parts[4:]]))}]
    d_one, d_lib = loads(design_file(parts, [circuit_stage])), loads(design_file(parts, library))
    assert compile_design(d_one).stages[0].tf.den_degree == 4 and compile_design(d_one).kind == kind
    f = np.geomspace(10, 1e6, 300)
    rows = scattered(d_one, 4, np.random.default_rng(8), 0.2)
    got = [frequency_response(compile_design(d), stage_coefficients(compile_design(d), rows), f)
           for d in (d_one, d_lib)]
    assert np.max(np.abs(got[0].gain_db - got[1].gain_db)) < 1e-8
    assert np.max(np.abs(got[0].phase_deg - got[1].phase_deg)) < 1e-7
    # and the phase is H's own (the independent solver's, modulo 360)
    h = mna_response([(p[1], p[0], a, b) for p, (_x, a, b) in zip(sorted(parts), sorted(one))],
                     [("b1", "m", "m", None), ("b2", "out", "out", None)],
                     dict(zip((p.ref for p in d_one.parts), rows[0])), f)
    wrapped = (got[0].phase_deg[0] - np.degrees(np.angle(h)) + 180) % 360 - 180
    assert np.max(np.abs(wrapped)) < 1e-7
