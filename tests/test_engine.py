"""Checks of tolspread.engine: responses, phase and group delay of compiled designs, held
against references outside the project.

References used below:
  [SCIPY]  scipy.signal.freqs (analog H(jw) from polynomial coefficients), butter, bessel,
           cheby1 (analog=True) - reference library.
  [NODAL]  a direct complex nodal solution written in this file (modified nodal analysis,
           numpy.linalg.solve at each frequency; poles from scipy.linalg.eig of the same
           matrices). The netlists are typed here from the layouts in tests/REFERENCES.md section 6
           and the README topology table, not read from tolspread.topologies, so the check is
           independent of both sympy and the library's netlists.
  [CM]     Carter & Mancini, "Op Amps for Everyone", 5th ed., section 16.9, Tables 16.6
           (Bessel) and 16.7 (Butterworth) [C: confirmed in a stored copy]; the Chebyshev
           rows are [D + M]: derived by computation, partly from memory (tests/REFERENCES.md
           section 5). Printed to four decimals.
  [WT]     Williams & Taylor, "Electronic Filter Design Handbook": doubly terminated
           Butterworth ladder g_k = 2 sin((2k - 1) pi / (2n)), equal terminations, and the
           Butterworth magnitude 1/sqrt(1 + (f/fc)^(2n)) - from memory [M], standard results.
  [TEXT]   elementary circuit theory, from memory: equal terminations halve the voltage
           (-6 dB) of a lossless ladder at DC; unity-gain Sallen-Key with R1 = R2 = R has
           Q = sqrt(C1/C2)/2 and w0 = 1/(R sqrt(C1 C2)) (special case of [KARKI] in
           tests/REFERENCES.md section 6).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.linalg
import scipy.optimize
import scipy.signal

from tolspread.designfile import load_demo
from tolspread.engine import (
    StageCoefficients,
    compile_design,
    frequency_response,
    gain2_at,
    response_blocks,
    stage_coefficients,
)
from tolspread.metrics import pole_pairs, stage_metrics

from designs import butter_q, make, sk_unity  # shared builders: tests/designs.py

TWO_PI = 2 * math.pi
SEED = 7311


# --- helpers -------------------------------------------------------------------------

def scipy_ba(coeffs, i):
    """Sample i's overall (b, a) in scipy's descending order: stage polynomials multiplied."""
    b, a = np.array([1.0]), np.array([1.0])
    for sc in coeffs:
        num, den = sc.unscaled()
        b = np.polymul(b, num[i][::-1])
        a = np.polymul(a, den[i][::-1])
    return b, a


def engine_h(resp):
    """Complex H from the engine's |H|^2 and phase (degrees)."""
    return np.sqrt(resp.gain2) * np.exp(1j * np.deg2rad(resp.phase_deg))


def wrap_deg(x):
    return (np.asarray(x) + 180.0) % 360.0 - 180.0


# --- a direct complex nodal solution, independent of sympy -----------------------------

def mna_matrices(elements, opamps, values):
    """Modified nodal analysis: A(s) = G + s C, right-hand side b, for a netlist typed as
    ``elements`` [(kind, role, a, b)] and ``opamps`` [(plus, minus, out, gbw_role or None)].
    The input is an ideal 1 V source at node 'in'; returns (G, C, b, index of 'out')."""
    nodes = []
    for e in elements:
        nodes += [n for n in e[2:] if n != "0" and n not in nodes]
    for o in opamps:
        nodes += [n for n in o[:3] if n != "0" and n not in nodes]
    idx = {n: i for i, n in enumerate(nodes)}
    inductors = [e for e in elements if e[0] == "L"]
    size = len(nodes) + 1 + len(inductors) + len(opamps)
    g = np.zeros((size, size))
    c = np.zeros((size, size))
    rhs = np.zeros(size)

    def stamp(m, a, b, y):
        for p, q, sign in ((a, a, 1), (b, b, 1), (a, b, -1), (b, a, -1)):
            if p != "0" and q != "0":
                m[idx[p], idx[q]] += sign * y

    row = len(nodes)
    g[idx["in"], row] -= 1  # source current into 'in'
    g[row, idx["in"]] = 1   # V(in) = 1
    rhs[row] = 1
    row += 1
    for kind, role, a, b in elements:
        v = values[role]
        if kind == "R":
            stamp(g, a, b, 1 / v)
        elif kind == "C":
            stamp(c, a, b, v)
        else:  # inductor current a -> b as an extra unknown: V(a) - V(b) - s L i = 0
            for node, sign in ((a, 1), (b, -1)):
                if node != "0":
                    g[idx[node], row] += sign
                    g[row, idx[node]] += sign
            c[row, row] = -v
            row += 1
    for plus, minus, out, gbw in opamps:
        g[idx[out], row] -= 1  # the op-amp output current is free
        if gbw is None:  # V+ - V- = 0
            sign_p, sign_m = 1.0, -1.0
        else:  # s V(out) - wt (V+ - V-) = 0
            c[row, idx[out]] += 1
            wt = TWO_PI * values[gbw]
            sign_p, sign_m = -wt, wt
        if plus != "0":
            g[row, idx[plus]] += sign_p
        if minus != "0":
            g[row, idx[minus]] += sign_m
        row += 1
    return g, c, rhs, idx["out"]


def mna_response(elements, opamps, values, freqs_hz):
    g, c, rhs, out = mna_matrices(elements, opamps, values)
    return np.array([np.linalg.solve(g + 1j * TWO_PI * f * c, rhs)[out] for f in freqs_hz])


def mna_poles(elements, opamps, values):
    """Natural frequencies: det(G + s C) = 0 with the source shorted (generalized eigenvalues)."""
    g, c, _, _ = mna_matrices(elements, opamps, values)
    # Rows and columns are equilibrated first (D1 (G + s C) D2 has the same eigenvalues):
    # entries range from 1e-9 (capacitors) to 1e7 (op-amp bandwidth), and the QZ algorithm
    # is accurate relative to the largest entry only.
    w_typ = math.sqrt(np.abs(g).max() / np.abs(c)[c != 0].min())
    for _ in range(4):
        m = np.abs(g) + w_typ * np.abs(c)
        r = 1 / m.max(axis=1)
        g, c = g * r[:, None], c * r[:, None]
        m = np.abs(g) + w_typ * np.abs(c)
        k = 1 / m.max(axis=0)
        g, c = g * k[None, :], c * k[None, :]
    lam = scipy.linalg.eigvals(g, -c)
    return lam[np.isfinite(lam) & (np.abs(lam) < 1e8 * w_typ)]


def sk_lowpass_net(gain="unity", gbw=None):
    # tests/REFERENCES.md section 6: R1 input to A, R2 A to B, C1 A to output, C2 B to ground
    els = [("R", "R1", "in", "a"), ("R", "R2", "a", "b"), ("C", "C1", "a", "out"), ("C", "C2", "b", "0")]
    minus = "out"
    if gain == "resistors":
        els += [("R", "RF", "out", "m"), ("R", "RG", "m", "0")]
        minus = "m"
    return els, [("b", minus, "out", gbw)]


def sk_highpass_net(gain="unity", gbw=None):
    # tests/REFERENCES.md section 6: C1 input to A, C2 A to B, R1 A to output, R2 B to ground
    els = [("C", "C1", "in", "a"), ("C", "C2", "a", "b"), ("R", "R1", "a", "out"), ("R", "R2", "b", "0")]
    minus = "out"
    if gain == "resistors":
        els += [("R", "RF", "out", "m"), ("R", "RG", "m", "0")]
        minus = "m"
    return els, [("b", minus, "out", gbw)]


def mfb_net(kind, gbw=None):
    # tests/REFERENCES.md section 6 (low-pass, band-pass); high-pass: C1 input to A, C2 A to the
    # inverting input N, C3 A to the output, R1 A to ground, R2 output to N (README table)
    els = {
        "lowpass": [("R", "R1", "in", "a"), ("R", "R2", "a", "out"), ("R", "R3", "a", "n"),
                    ("C", "C1", "a", "0"), ("C", "C2", "out", "n")],
        "highpass": [("C", "C1", "in", "a"), ("C", "C2", "a", "n"), ("C", "C3", "a", "out"),
                     ("R", "R1", "a", "0"), ("R", "R2", "out", "n")],
        "bandpass": [("R", "R1", "in", "a"), ("R", "R2", "a", "0"), ("C", "C1", "a", "n"),
                     ("C", "C2", "a", "out"), ("R", "R3", "out", "n")],
    }[kind]
    return els, [("0", "n", "out", gbw)]


def rc_ladder_net(sections, source, load, highpass=False):
    # README: series R_k and shunt C_k per section (high-pass: series C_k, shunt R_k),
    # optional source resistance RS and load RL across the output
    els, prev = [], "in"
    if source:
        els.append(("R", "RS", "in", "s"))
        prev = "s"
    for k in range(1, sections + 1):
        node = "out" if k == sections else f"x{k}"
        if highpass:
            els += [("C", f"C{k}", prev, node), ("R", f"R{k}", node, "0")]
        else:
            els += [("R", f"R{k}", prev, node), ("C", f"C{k}", node, "0")]
        prev = node
    if load:
        els.append(("R", "RL", "out", "0"))
    return els, []


def lc_ladder_net(order, first):
    # README: RS from the source, reactive elements numbered from the source side, RL
    # across the output; "shunt" starts with C1 across the line, "series" with L1
    els, node = [("R", "RS", "in", "x0")], "x0"
    for k in range(1, order + 1):
        if (k % 2 == 1) == (first == "shunt"):
            els.append(("C", f"C{k}", node, "0"))
        else:
            els.append(("L", f"L{k}", node, f"x{k}"))
            node = f"x{k}"
    els = [(kd, r, "out" if a == node else a, "out" if b == node else b) for kd, r, a, b in els]
    els.append(("R", "RL", "out", "0"))
    return els, []


def butter_ladder_values(order, first, fc=1e3, r0=50.0):
    # source: [WT] g_k = 2 sin((2k - 1) pi / (2n)), scaled: C = g/(R0 wc), L = g R0/wc
    wc = TWO_PI * fc
    vals = {"RS": r0, "RL": r0}
    for k in range(1, order + 1):
        gk = 2 * math.sin((2 * k - 1) * math.pi / (2 * order))
        if (k % 2 == 1) == (first == "shunt"):
            vals[f"C{k}"] = gk / (r0 * wc)
        else:
            vals[f"L{k}"] = gk * r0 / wc
    return vals


def rc_values(sections, source, load, highpass=False):
    vals = {}
    for k in range(1, sections + 1):
        vals[f"R{k}"] = 1e3 * (1 + 0.7 * k)
        vals[f"C{k}"] = 100e-9 / (1 + 0.3 * k)
    if source:
        vals["RS"] = 330.0
    if load:
        vals["RL"] = 4.7e3
    return vals


SK_LP = {"R1": 10e3, "R2": 15e3, "C1": 22e-9, "C2": 4.7e-9}
SK_LP_K = {"R1": 10e3, "R2": 15e3, "C1": 10e-9, "C2": 10e-9, "RF": 6.8e3, "RG": 10e3}  # K = 1.68, Q about 0.67
SK_HP = {"C1": 10e-9, "C2": 15e-9, "R1": 4.7e3, "R2": 33e3}
SK_HP_K = {"C1": 10e-9, "C2": 10e-9, "R1": 10e3, "R2": 10e3, "RF": 3.3e3, "RG": 10e3}  # K = 1.33
MFB_LP = {"R1": 10e3, "R2": 22e3, "R3": 6.8e3, "C1": 47e-9, "C2": 2.2e-9}
MFB_HP = {"C1": 22e-9, "C2": 10e-9, "C3": 10e-9, "R1": 3.3e3, "R2": 47e3}
MFB_BP = {"R1": 10e3, "R2": 1e3, "R3": 100e3, "C1": 10e-9, "C2": 10e-9}

# (id, topology, options, values, typed netlist)
SINGLE_STAGES = [
    ("sk_lp_unity", "sallen_key_lowpass", {}, SK_LP, sk_lowpass_net()),
    ("sk_lp_gain", "sallen_key_lowpass", {"gain": "resistors"}, SK_LP_K, sk_lowpass_net("resistors")),
    ("sk_hp_unity", "sallen_key_highpass", {}, SK_HP, sk_highpass_net()),
    ("sk_hp_gain", "sallen_key_highpass", {"gain": "resistors"}, SK_HP_K, sk_highpass_net("resistors")),
    ("mfb_lp", "mfb_lowpass", {}, MFB_LP, mfb_net("lowpass")),
    ("mfb_hp", "mfb_highpass", {}, MFB_HP, mfb_net("highpass")),
    ("mfb_bp", "mfb_bandpass", {}, MFB_BP, mfb_net("bandpass")),
    ("sk_lp_gbw", "sallen_key_lowpass", {}, {**SK_LP, "U1": 200e3}, sk_lowpass_net(gbw="U1")),
    ("sk_hp_gbw", "sallen_key_highpass", {"gain": "resistors"}, {**SK_HP_K, "U1": 1e6},
     sk_highpass_net("resistors", gbw="U1")),
    ("mfb_lp_gbw", "mfb_lowpass", {}, {**MFB_LP, "U1": 100e3}, mfb_net("lowpass", gbw="U1")),
    ("mfb_hp_gbw", "mfb_highpass", {}, {**MFB_HP, "U1": 3e6}, mfb_net("highpass", gbw="U1")),
    ("mfb_bp_gbw", "mfb_bandpass", {}, {**MFB_BP, "U1": 1e6}, mfb_net("bandpass", gbw="U1")),
]
for _n in (1, 2, 3, 4):
    for _src, _load in ((False, False), (True, True), (True, False), (False, True)):
        SINGLE_STAGES.append((f"rc_lp{_n}_{int(_src)}{int(_load)}", "rc_lowpass",
                              {"sections": _n, "source": _src, "load": _load},
                              rc_values(_n, _src, _load), rc_ladder_net(_n, _src, _load)))
    SINGLE_STAGES.append((f"rc_hp{_n}_11", "rc_highpass", {"sections": _n, "source": True, "load": True},
                          rc_values(_n, True, True, True), rc_ladder_net(_n, True, True, True)))
for _n in (2, 3, 4, 5):
    for _first in ("shunt", "series"):
        SINGLE_STAGES.append((f"lc{_n}_{_first}", "lc_lowpass", {"order": _n, "first": _first},
                              butter_ladder_values(_n, _first), lc_ladder_net(_n, _first)))
STAGE_IDS = [c[0] for c in SINGLE_STAGES]


def perturbed(vals, n, spread, rng):
    """n samples: the values given, then n - 1 rows scattered log-normally by ``spread``."""
    out = {}
    for k, v in vals.items():
        f = np.exp(spread * rng.standard_normal(n))
        f[0] = 1.0
        out[k] = v * f
    return out


def design_cases():
    """(id, circuit, values) for the scipy comparisons."""
    rng = np.random.default_rng(SEED)
    cases = []
    demo = load_demo()
    c = compile_design(demo)
    nom = np.array([p.value for p in demo.parts])
    vals = nom * np.exp(0.05 * rng.standard_normal((6, nom.size)))
    cases.append(("demo", c, np.vstack([nom, vals])))
    for cid, topo, opts, v, _ in SINGLE_STAGES:
        _, c, values = make([(topo, opts, perturbed(v, 4, 0.1, rng))])
        cases.append((cid, c, values))
    # one batch spanning three decades of frequency (the batch shares one w_ref)
    wide = {k: v * np.array([1.0, 30.0, 1 / 30.0, 1000.0]) for k, v in SK_LP.items() if k.startswith("C")}
    wide.update(R1=SK_LP["R1"], R2=SK_LP["R2"])
    _, c, values = make([("sallen_key_lowpass", {}, wide)])
    cases.append(("sk_wide_batch", c, values))
    # mixed cascade: high-pass then low-pass then band-pass
    _, c, values = make([("sallen_key_highpass", {}, perturbed(SK_HP, 3, 0.1, rng)),
                         ("mfb_lowpass", {}, perturbed(MFB_LP, 3, 0.1, rng)),
                         ("rc_lowpass", {"sections": 2, "load": True}, perturbed(rc_values(2, False, True), 3, 0.1, rng))])
    cases.append(("cascade_hp_lp_rc", c, values))
    # The engine multiplies lean stages (degree <= 2, monomial numerator) two at a time and
    # takes one arctan2 per pair; these cascades stress that pairing.
    # five lean stages: two pairs (one with a first-order section) and one left over
    _, c, values = make([("sallen_key_lowpass", {}, perturbed(SK_LP, 3, 0.1, rng)),
                         ("rc_lowpass", {"sections": 1}, perturbed(rc_values(1, False, False), 3, 0.1, rng)),
                         ("mfb_bandpass", {}, perturbed(MFB_BP, 3, 0.1, rng)),
                         ("sallen_key_highpass", {"gain": "resistors"}, perturbed(SK_HP_K, 3, 0.1, rng)),
                         ("mfb_highpass", {}, perturbed(MFB_HP, 3, 0.1, rng))])
    cases.append(("five_lean_stages", c, values))
    # a pair whose stages sit four decades apart (high-pass near 15 Hz, low-pass near 150 kHz)
    hp_low = {k: (v * 1000 if k.startswith("C") else v) for k, v in SK_HP.items()}
    lp_high = {k: (v / 10 if k.startswith("C") else v) for k, v in SK_LP.items()}
    _, c, values = make([("sallen_key_highpass", {}, perturbed(hp_low, 3, 0.1, rng)),
                         ("sallen_key_lowpass", {}, perturbed(lp_high, 3, 0.1, rng))])
    cases.append(("pair_four_decades_apart", c, values))
    # two band-pass sections of Q about 21 tuned 2 % apart (stagger tuning)
    bp_sharp = dict(MFB_BP, R3=1.6e6)
    bp_sharp2 = dict(bp_sharp, C1=bp_sharp["C1"] / 1.02, C2=bp_sharp["C2"] / 1.02)
    _, c, values = make([("mfb_bandpass", {}, perturbed(bp_sharp, 3, 0.01, rng)),
                         ("mfb_bandpass", {}, perturbed(bp_sharp2, 3, 0.01, rng))])
    cases.append(("pair_high_q_stagger", c, values))
    # boards where the gain-setting resistors make a Sallen-Key stage unstable (gain 3.5 > 3
    # with equal parts: negative damping) next to stable ones, paired with a stable stage
    unstable = {k: np.full(3, v) for k, v in SK_LP_K.items()}
    unstable["R2"] = np.full(3, 10e3)
    unstable["RF"] = np.array([6.8e3, 25e3, 22e3])
    _, c, values = make([("sallen_key_lowpass", {"gain": "resistors"}, unstable),
                         ("mfb_lowpass", {}, {k: np.full(3, v) for k, v in MFB_LP.items()})])
    cases.append(("pair_with_unstable_boards", c, values))
    return cases


CASES = design_cases()
CASE_IDS = [c[0] for c in CASES]
FREQS = np.geomspace(1.0, 1e6, 700)


# --- responses against scipy.signal.freqs ---------------------------------------------

@pytest.mark.parametrize("cid, circuit, values", CASES, ids=CASE_IDS)
def test_gain_and_phase_match_scipy_freqs(cid, circuit, values):
    # source: [SCIPY] scipy.signal.freqs on the stages' unscaled coefficients multiplied
    # across stages (numpy.polymul, descending order)
    coeffs = stage_coefficients(circuit, values)
    resp = frequency_response(circuit, coeffs, FREQS, phase=True, delay=False)
    assert resp.gain2.shape == resp.phase_deg.shape == (values.shape[0], FREQS.size)
    for i in range(values.shape[0]):
        b, a = scipy_ba(coeffs, i)
        _, h = scipy.signal.freqs(b, a, worN=TWO_PI * FREQS)
        np.testing.assert_allclose(np.sqrt(resp.gain2[i]), np.abs(h), rtol=1e-9, err_msg=cid)
        np.testing.assert_allclose(10 * np.log10(resp.gain2[i]), 20 * np.log10(np.abs(h)),
                                   rtol=0, atol=1e-8, err_msg=cid)
        # phase modulo 360 degrees
        np.testing.assert_allclose(wrap_deg(resp.phase_deg[i] - np.degrees(np.angle(h))), 0,
                                   rtol=0, atol=1e-7, err_msg=cid)
        # continuity: the engine's phase steps equal those of scipy's unwrapped phase
        ref = np.degrees(np.unwrap(np.angle(h)))
        np.testing.assert_allclose(np.diff(resp.phase_deg[i]), np.diff(ref), rtol=0, atol=1e-7,
                                   err_msg=cid)


@pytest.mark.parametrize("cid, circuit, values", CASES, ids=CASE_IDS)
def test_gain_without_phase_is_the_gain_of_the_phase_path(cid, circuit, values):
    # source: the documented contract of frequency_response (the phase is extra work on the
    # same polynomials, never a different gain): bit for bit, every case above, with and
    # without the group delay
    coeffs = stage_coefficients(circuit, values)
    full = frequency_response(circuit, coeffs, FREQS, phase=True, delay=True)
    bare = frequency_response(circuit, coeffs, FREQS, phase=False, delay=False)
    assert bare.phase_deg is None and bare.delay_s is None
    np.testing.assert_array_equal(bare.gain_db, full.gain_db, err_msg=cid)
    phase_only = frequency_response(circuit, coeffs, FREQS, phase=True, delay=False)
    np.testing.assert_array_equal(phase_only.phase_deg, full.phase_deg, err_msg=cid)


@pytest.mark.parametrize("rows", [1, 2, 3, 5])
def test_response_blocks_equal_the_whole_response_whatever_the_block(rows):
    # source: the documented contract of response_blocks (numbers independent of the
    # blocks, bit for bit; a one-row block would take BLAS's matrix-vector kernel, whose
    # last bits differ, so blocks hold two rows or more); scratch blocks are overwritten,
    # so each is copied at once
    for cid, circuit, values in CASES:
        coeffs = stage_coefficients(circuit, values)
        whole = frequency_response(circuit, coeffs, FREQS, phase=True, delay=True)
        got = {k: np.full(whole.gain_db.shape, np.nan) for k in ("g", "p", "t")}
        for lo, hi, blk in response_blocks(circuit, coeffs, FREQS, phase=True, delay=True, rows=rows):
            assert blk.gain_db.shape == (hi - lo, FREQS.size)
            got["g"][lo:hi], got["p"][lo:hi], got["t"][lo:hi] = blk.gain_db, blk.phase_deg, blk.delay_s
        np.testing.assert_array_equal(got["g"], whole.gain_db, err_msg=cid)
        np.testing.assert_array_equal(got["p"], whole.phase_deg, err_msg=cid)
        np.testing.assert_array_equal(got["t"], whole.delay_s, err_msg=cid)


def test_power_blocks_and_interleaved_calls_give_the_engines_numbers():
    # source: [SCIPY] scipy.signal.freqs for |H|^2 (every case above); and the documented
    # contract of response_blocks: power=True leaves the gain a power ratio whose
    # PowerResponse.gain_db is the dB path's number bit for bit, and two calls interleaved
    # on one thread (each reuses the thread's scratch only when it is free) do not
    # overwrite each other's blocks
    for cid, circuit, values in CASES:
        coeffs = stage_coefficients(circuit, values)
        whole = frequency_response(circuit, coeffs, FREQS, phase=True, delay=True)
        outer = response_blocks(circuit, coeffs, FREQS, phase=True, delay=True, power=True, rows=2)
        lo, hi, first = next(outer)
        power = first.power.copy()
        for lo2, hi2, blk in response_blocks(circuit, coeffs, FREQS, phase=True, rows=3):  # nested
            np.testing.assert_array_equal(blk.gain_db, whole.gain_db[lo2:hi2], err_msg=cid)
        np.testing.assert_array_equal(first.power, power, err_msg=cid)  # not overwritten
        check_power_block(cid, coeffs, whole, lo, hi, first)
        for lo, hi, blk in outer:  # each block checked before the next one takes its scratch
            check_power_block(cid, coeffs, whole, lo, hi, blk)
        # the gain alone: blocks laid out by frequency (F, boards), the same numbers
        for lo, hi, blk in response_blocks(circuit, coeffs, FREQS, phase=False, power=True, rows=3):
            assert blk.by_frequency and blk.power.shape == (FREQS.size, hi - lo) and blk.phase_deg is None
            check_power_block(cid, coeffs, whole, lo, hi, blk)


def check_power_block(cid, coeffs, whole, lo, hi, blk):
    """A PowerResponse block against the dB path (bit for bit) and scipy.signal.freqs."""
    power = blk.power.T if blk.by_frequency else blk.power  # (boards, F)
    np.testing.assert_array_equal(blk.gain_db(power), whole.gain_db[lo:hi], err_msg=cid)
    if blk.phase_deg is not None:
        np.testing.assert_array_equal(blk.phase_deg, whole.phase_deg[lo:hi], err_msg=cid)
    for i in range(lo, hi):
        b, a = scipy_ba(coeffs, i)
        _, h = scipy.signal.freqs(b, a, worN=TWO_PI * FREQS)
        got = 1 / power[i - lo] if blk.inverse else power[i - lo]
        np.testing.assert_allclose(got, np.abs(h) ** 2, rtol=1e-8, err_msg=cid)


def test_response_blocks_keep_each_matrix_product_on_the_calling_thread():
    # source: OpenBLAS's default GEMM_MULTITHREAD_THRESHOLD (4): it threads a product of
    # m x n x k >= 2 x 65536 x 4 (interface/gemm.c, from memory); the engine's blocks stay
    # below BLAS_SOLO_SIZE (< 524288), whatever the grid, and give the same numbers
    from tolspread import engine

    demo = load_demo()
    circuit = compile_design(demo)
    rng = np.random.default_rng(SEED)
    nom = np.array([p.value for p in demo.parts])
    values = nom * np.exp(0.02 * rng.standard_normal((700, nom.size)))
    coeffs = stage_coefficients(circuit, values)
    assert engine.BLAS_SOLO_SIZE < 2 * 65536 * 4
    for freqs in (FREQS, np.geomspace(1.0, 1e6, 3000)):
        k_max = 3  # the demo's pair: P of degree 4, three even coefficients
        whole = frequency_response(circuit, coeffs, freqs, phase=True)
        for lo, hi, blk in response_blocks(circuit, coeffs, freqs, phase=True):
            assert 2 <= hi - lo and (hi - lo) * freqs.size * k_max <= engine.BLAS_SOLO_SIZE
            np.testing.assert_array_equal(blk.gain_db, whole.gain_db[lo:hi])
            np.testing.assert_array_equal(blk.phase_deg, whole.phase_deg[lo:hi])


@pytest.mark.parametrize("cid, circuit, values", CASES, ids=CASE_IDS)
def test_group_delay_matches_numerical_derivative(cid, circuit, values):
    # source: [SCIPY] group delay tau = -d(phase)/d(omega), here by central differences
    # of scipy's phase at w (1 +- 1e-4): dphi = angle(H(w+) / H(w-)) needs no unwrapping
    coeffs = stage_coefficients(circuit, values)
    freqs = np.geomspace(1.0, 1e6, 300)
    resp = frequency_response(circuit, coeffs, freqs, phase=True, delay=True)
    d = 1e-4
    w = TWO_PI * freqs
    for i in range(values.shape[0]):
        b, a = scipy_ba(coeffs, i)
        _, hp = scipy.signal.freqs(b, a, worN=w * (1 + d))
        _, hm = scipy.signal.freqs(b, a, worN=w * (1 - d))
        tau = -np.angle(hp / hm) / (2 * d * w)
        np.testing.assert_allclose(resp.delay_s[i], tau, rtol=1e-5, atol=1e-9 * np.abs(tau).max(),
                                   err_msg=cid)


def test_gain2_at_per_sample_frequencies():
    # source: [SCIPY] scipy.signal.freqs at each sample's own frequencies
    rng = np.random.default_rng(SEED + 1)
    _, circuit, values = make([("sallen_key_lowpass", {}, perturbed(SK_LP, 5, 0.2, rng)),
                               ("mfb_bandpass", {}, perturbed(MFB_BP, 5, 0.2, rng))])
    coeffs = stage_coefficients(circuit, values)
    f = np.exp(rng.uniform(np.log(10), np.log(1e5), (5, 7)))
    g = gain2_at(coeffs, f)
    g1 = gain2_at(coeffs, f[:, 0])
    assert g.shape == (5, 7) and g1.shape == (5,)
    for i in range(5):
        b, a = scipy_ba(coeffs, i)
        _, h = scipy.signal.freqs(b, a, worN=TWO_PI * f[i])
        np.testing.assert_allclose(g[i], np.abs(h) ** 2, rtol=1e-9)
        np.testing.assert_allclose(g1[i], np.abs(h[0]) ** 2, rtol=1e-9)


# --- against a direct nodal solution --------------------------------------------------

@pytest.mark.parametrize("cid, topo, opts, vals, net", SINGLE_STAGES, ids=STAGE_IDS)
def test_response_matches_direct_nodal_solution(cid, topo, opts, vals, net):
    # source: [NODAL] numpy.linalg.solve of the admittance matrix at each frequency
    _, circuit, values = make([(topo, opts, vals)])
    coeffs = stage_coefficients(circuit, values)
    freqs = np.geomspace(1.0, 1e6, 61)
    resp = frequency_response(circuit, coeffs, freqs, phase=True)
    ref = mna_response(*net, vals, freqs)
    np.testing.assert_allclose(engine_h(resp)[0], ref, rtol=1e-9, err_msg=cid)


ACTIVE = [c for c in SINGLE_STAGES if c[4][1]]


@pytest.mark.parametrize("cid, topo, opts, vals, net", ACTIVE, ids=[c[0] for c in ACTIVE])
def test_pole_f0_q_match_nodal_eigenvalues(cid, topo, opts, vals, net):
    # source: [NODAL] poles as the generalized eigenvalues of (G, -C): det(G + s C) = 0;
    # f0 = |p| / (2 pi), Q = |p| / (2 |Re p|) of the complex pair
    _, circuit, values = make([(topo, opts, vals)])
    m = stage_metrics(circuit, stage_coefficients(circuit, values))
    poles = mna_poles(*net, vals)
    pair = poles[poles.imag > 1e-9 * np.abs(poles)]
    assert pair.size == 1, poles
    p = pair[0]
    np.testing.assert_allclose(m["s1.f0_hz"][0], abs(p) / TWO_PI, rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"][0], abs(p) / (2 * abs(p.real)), rtol=1e-9)
    expected_order = 3 if "U1" in vals else 2
    assert poles.size == expected_order
    assert circuit.stages[0].tf.den_degree == expected_order


# --- loaded RC ladder -----------------------------------------------------------------

@pytest.mark.parametrize("sections", [2, 3, 4])
def test_loaded_rc_ladder_is_not_a_product_of_sections(sections):
    # source: [NODAL] for the exact ladder; the product of independent first-order sections
    # 1/(1 + j w R_k C_k) is what buffering between sections would give. Loading must show:
    # with equal R and C the ladder's response differs clearly from the product.
    r, c = 10e3, 10e-9
    vals = {"RS": 100.0, "RL": 100e3}
    for k in range(1, sections + 1):
        vals[f"R{k}"], vals[f"C{k}"] = r, c
    _, circuit, values = make([("rc_lowpass", {"sections": sections, "source": True, "load": True}, vals)])
    coeffs = stage_coefficients(circuit, values)
    fc = 1 / (TWO_PI * r * c)
    freqs = np.geomspace(fc / 100, fc * 100, 41)
    resp = frequency_response(circuit, coeffs, freqs, phase=True)
    exact = mna_response(*rc_ladder_net(sections, True, True), vals, freqs)
    np.testing.assert_allclose(engine_h(resp)[0], exact, rtol=1e-9)
    product = (1 / (1 + 1j * TWO_PI * freqs * r * c)) ** sections
    k = np.argmin(np.abs(freqs - fc))
    assert abs(abs(product[k]) - np.sqrt(resp.gain2[0, k])) > 0.1 * abs(product[k])
    assert np.max(np.abs(engine_h(resp)[0] - product)) > 0.1


# --- doubly terminated LC ladder ------------------------------------------------------

@pytest.mark.parametrize("order", [2, 3, 4, 5])
@pytest.mark.parametrize("first", ["shunt", "series"])
def test_butterworth_lc_ladder_magnitude(order, first):
    # source: [WT] equal-terminated Butterworth ladder (g_k above, 1 kHz, 50 ohm) has
    # |H| = 0.5 / sqrt(1 + (f/fc)^(2n)); 0.5 from the equal terminations [TEXT]
    vals = butter_ladder_values(order, first)
    _, circuit, values = make([("lc_lowpass", {"order": order, "first": first}, vals)])
    assert circuit.stages[0].tf.den_degree == order
    freqs = np.geomspace(10.0, 1e5, 301)
    resp = frequency_response(circuit, stage_coefficients(circuit, values), freqs, phase=False)
    want = 0.5 / np.sqrt(1 + (freqs / 1e3) ** (2 * order))
    np.testing.assert_allclose(np.sqrt(resp.gain2[0]), want, rtol=1e-9)


# --- normalized prototypes -------------------------------------------------------------

# source: [CM] Table 16.7 (Butterworth) and 16.6 (Bessel) [C]; Chebyshev rows [D + M]
# (derived, partly from memory), all as printed in tests/REFERENCES.md section 5.
# Each entry: first-order a (or None), then (a_i, b_i, Q_i) of the sections
# 1 + a_i s + b_i s^2 with Omega = 1 at the -3 dB frequency.
TABLE = {
    ("butter", 2): (None, [(1.4142, 1.0, 0.7071)]),
    ("butter", 4): (None, [(1.8478, 1.0, 0.5412), (0.7654, 1.0, 1.3066)]),
    ("butter", 5): (1.0, [(1.6180, 1.0, 0.6180), (0.6180, 1.0, 1.6180)]),
    ("butter", 6): (None, [(1.9319, 1.0, 0.5176), (1.4142, 1.0, 0.7071), (0.5176, 1.0, 1.9319)]),
    ("bessel", 2): (None, [(1.3617, 0.6180, 0.5774)]),
    ("bessel", 3): (0.7560, [(0.9996, 0.4772, 0.6910)]),
    ("bessel", 4): (None, [(1.3397, 0.4889, 0.5219), (0.7743, 0.3890, 0.8055)]),
    ("bessel", 5): (0.6656, [(1.1402, 0.4128, 0.5635), (0.6216, 0.3245, 0.9165)]),
    ("bessel", 6): (None, [(1.2217, 0.3887, 0.5103), (0.9686, 0.3505, 0.6112), (0.5131, 0.2756, 1.0233)]),
    ("cheby0.5", 2): (None, [(1.3614, 1.3827, 0.8637)]),
    ("cheby0.5", 4): (None, [(2.6282, 3.4341, 0.7051), (0.3648, 1.1509, 2.9406)]),
    ("cheby0.5", 5): (2.9235, [(1.3025, 2.3534, 1.1778), (0.2290, 1.0833, 4.5450)]),
    ("cheby1", 2): (None, [(1.3022, 1.5515, 0.9565)]),
    ("cheby1", 4): (None, [(2.5904, 4.1301, 0.7845), (0.3039, 1.1697, 3.5590)]),
    ("cheby1", 5): (3.5711, [(1.1280, 2.4896, 1.3988), (0.1872, 1.0814, 5.5564)]),
}
FC = 1e3


def prototype_design(first, sections, fc=FC):
    """The test's own construction: one unity-gain Sallen-Key stage per (a, b) section
    (equal R, C1 = 4 Q^2 C2) and a buffered RC section for the real pole."""
    stages = []
    if first is not None:  # 1 + a s/wc: R C = a / wc
        stages.append(("rc_lowpass", {"sections": 1}, {"R1": 10e3, "C1": first / (TWO_PI * fc * 10e3)}))
    for a, b, *_ in sections:
        stages.append(("sallen_key_lowpass", {}, sk_unity(fc / math.sqrt(b), math.sqrt(b) / a)))
    return make(stages)


def scipy_prototype(family, n):
    """scipy's normalized analog prototype (z, p, k) in the table's normalization (Omega = 1
    at -3 dB below the DC gain) and the DC gain of scipy's own normalization."""
    if family == "butter":
        return scipy.signal.butter(n, 1, analog=True, output="zpk"), 1.0
    if family == "bessel":
        return scipy.signal.bessel(n, 1, analog=True, norm="mag", output="zpk"), 1.0
    rp = 0.5 if family == "cheby0.5" else 1.0
    z, p, k = scipy.signal.cheby1(n, rp, 1, analog=True, output="zpk")
    # scipy puts Omega = 1 at the ripple edge; the table puts it where the gain is 3 dB
    # (10 log10 2) below the DC gain (the rows follow that convention: for even orders the
    # DC gain is the ripple trough). Renormalize scipy's poles to that frequency.
    b, a = scipy.signal.zpk2tf(z, p, k)
    h0 = abs(scipy.signal.freqs(b, a, worN=[0.0])[1][0])
    w3 = scipy.optimize.brentq(
        lambda w: abs(scipy.signal.freqs(b, a, worN=[w])[1][0]) / h0 - 1 / math.sqrt(2), 1.0, 3.0,
        xtol=1e-15, rtol=1e-15)
    return (z, p / w3, k / w3 ** n), h0


@pytest.mark.parametrize("family, n", list(TABLE), ids=[f"{f}{n}" for f, n in TABLE])
def test_table_rows_agree_with_scipy_poles(family, n):
    # source: [CM] tables (four decimals) against [SCIPY] prototypes. The printed Q column
    # is free of any frequency normalization and is compared directly; a_i = 2 |Re p| / |p|^2
    # and b_i = 1 / |p|^2 after scipy's Chebyshev poles are renormalized as described in
    # scipy_prototype. Tolerance: half a unit in the fourth decimal, plus one unit for the
    # derived rows' last digit.
    first, sections = TABLE[(family, n)]
    (_, p, _), _ = scipy_prototype(family, n)
    upper = sorted((x for x in p if x.imag > 1e-9), key=lambda x: abs(x) / abs(x.real))
    real = [x.real for x in p if abs(x.imag) <= 1e-9]
    rows = sorted(sections, key=lambda r: r[2])
    np.testing.assert_allclose([abs(x) / (2 * abs(x.real)) for x in upper], [r[2] for r in rows],
                               rtol=0, atol=1.5e-4)
    np.testing.assert_allclose([2 * abs(x.real) / abs(x) ** 2 for x in upper], [r[0] for r in rows],
                               rtol=0, atol=1.5e-4)
    np.testing.assert_allclose([1 / abs(x) ** 2 for x in upper], [r[1] for r in rows], rtol=0, atol=1.5e-4)
    if first is None:
        assert not real
    else:
        assert len(real) == 1
        np.testing.assert_allclose(-1 / real[0], first, rtol=0, atol=1.5e-4)


@pytest.mark.parametrize("family, n", list(TABLE), ids=[f"{f}{n}" for f, n in TABLE])
def test_table_cascade_reproduces_scipy_magnitude(family, n):
    # source: [CM] table values, four decimals, so the cascade can only match [SCIPY] to
    # that precision: rtol 1e-3 in |H| (a rounding error of 5e-5 in a_i or b_i moves |H| by
    # up to about 2Q times as much near a section's f0); both normalized to the DC gain
    first, sections = TABLE[(family, n)]
    _, circuit, values = prototype_design(first, sections)
    freqs = np.geomspace(FC / 100, FC * 20, 400)
    resp = frequency_response(circuit, stage_coefficients(circuit, values), freqs, phase=False)
    (z, p, k), h0 = scipy_prototype(family, n)
    _, h = scipy.signal.freqs_zpk(z, p * TWO_PI * FC, k * (TWO_PI * FC) ** n, worN=TWO_PI * freqs)
    np.testing.assert_allclose(np.sqrt(resp.gain2[0]), np.abs(h) / h0, rtol=1e-3)


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6, 7, 8])
def test_exact_butterworth_cascade_matches_scipy_butter(n):
    # source: [WT] exact Butterworth Q values (butter_q) and a real pole at wc for odd n;
    # [SCIPY] scipy.signal.butter(n, wc, analog=True) to 1e-9
    first = 1.0 if n % 2 else None
    sections = [(1 / q, 1.0) for q in butter_q(n)]
    _, circuit, values = prototype_design(first, sections)
    freqs = np.geomspace(FC / 100, FC * 100, 400)
    resp = frequency_response(circuit, stage_coefficients(circuit, values), freqs, phase=True)
    b, a = scipy.signal.butter(n, TWO_PI * FC, analog=True)
    _, h = scipy.signal.freqs(b, a, worN=TWO_PI * freqs)
    np.testing.assert_allclose(engine_h(resp)[0], h, rtol=1e-9)


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_exact_bessel_cascade_matches_scipy_bessel(n):
    # source: [SCIPY] scipy.signal.bessel(n, wc, analog=True, norm='mag'): the cascade is
    # built from scipy's own poles (exact), so the engine must match to 1e-9
    (_, p, _), _ = scipy_prototype("bessel", n)
    real = [x.real for x in p if abs(x.imag) <= 1e-9]
    first = -1 / real[0] if real else None
    sections = [(2 * -x.real / abs(x) ** 2, 1 / abs(x) ** 2) for x in p if x.imag > 1e-9]
    _, circuit, values = prototype_design(first, sections)
    freqs = np.geomspace(FC / 100, FC * 100, 400)
    resp = frequency_response(circuit, stage_coefficients(circuit, values), freqs, phase=True)
    b, a = scipy.signal.bessel(n, TWO_PI * FC, analog=True, norm="mag")
    _, h = scipy.signal.freqs(b, a, worN=TWO_PI * freqs)
    np.testing.assert_allclose(engine_h(resp)[0], h, rtol=1e-9)


def test_pole_pairs_of_scaled_denominator():
    # source: [SCIPY] scipy.signal.butter(6, 1, analog=True) denominator, ascending and
    # scaled by w_ref = 2 pi 1 kHz: pole pairs at f0 = 1 kHz with the Butterworth Q values
    # of [CM] Table 16.7 (0.5176, 0.7071, 1.9319) [C]
    _, a = scipy.signal.butter(6, 1, analog=True)
    den = a[::-1][None, :]
    f0, q = pole_pairs(den, TWO_PI * 1e3)
    np.testing.assert_allclose(f0[0], 1e3, rtol=1e-9)
    np.testing.assert_allclose(q[0], [0.5176, 0.7071, 1.9319], rtol=0, atol=1e-4)
    sc = StageCoefficients(np.array([[1.0]]), den, TWO_PI * 1e3)
    num_u, den_u = sc.unscaled()
    np.testing.assert_allclose(den_u[0] * (TWO_PI * 1e3) ** np.arange(7), den[0], rtol=1e-12)
