"""Checks of tolspread.netlist and tolspread.topologies: the transfer functions the engine
derives by sympy nodal analysis, held against published closed forms.

Sources, abbreviated below (see tests/REFERENCES.md for tags):
  [KARKI]  J. Karki, "Analysis of the Sallen-Key Architecture", TI SLOA024 (equation
           numbers from memory [M]); the expressions as written in REFERENCES.md section 6
           were re-derived by nodal analysis [D].
  [SLOA049] TI SLOA049, "Active Low-Pass Filter Design" (multiple-feedback low-pass and
           band-pass forms, equation numbers from memory [M]); expressions [D] as above.
  [BUDAK]  A. Budak, D. M. Petrela, "Frequency limitations of active filters using
           operational amplifiers", IEEE Trans. Circuit Theory CT-19 (1972) - from memory [M]:
           a finite gain-bandwidth raises Q (Q enhancement).
  [TEXT]   elementary circuit theory (voltage divider, first-order RC, series RLC,
           inverting and non-inverting amplifier, single-pole op-amp A(s) = wt/s) - from
           memory, standard textbook results.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import sympy as sp

from tolspread.engine import frequency_response, stage_coefficients
from tolspread.metrics import stage_metrics
from tolspread.netlist import Element, Netlist, OpAmp, derive, symbolic_coefficients
from tolspread.topologies import TOPOLOGIES, build

from designs import make  # shared builder: tests/designs.py

TWO_PI = 2 * math.pi
RNG_SEED = 20240611


# --- helpers -------------------------------------------------------------------------

def log_uniform(rng, lo, hi, n):
    return np.exp(rng.uniform(math.log(lo), math.log(hi), n))


def sym(*names):
    # derive() makes its symbols positive; equal assumptions are needed for equal symbols
    return [sp.Symbol(n, positive=True) for n in names]


class Derived:
    """``derive(net)`` (the coefficient data the engine evaluates) with the exact sympy
    coefficients of the same netlist beside it (``num_expr``, ``den_expr``)."""

    def __init__(self, net):
        self.tf = derive(net)
        self.num_expr, self.den_expr = symbolic_coefficients(net)
        assert (self.tf.num_degree, self.tf.den_degree) == (len(self.num_expr) - 1, len(self.den_expr) - 1)

    def __getattr__(self, name):
        return getattr(self.tf, name)


def same_up_to_factor(got, want):
    """True when the coefficient tuples are proportional (cross products vanish)."""
    if len(got) != len(want):
        return False
    return all(sp.simplify(got[k] * want[0] - got[0] * want[k]) == 0 for k in range(len(got)))


# --- small hand-written netlists -------------------------------------------------------

def test_voltage_divider():
    # source: [TEXT] H = R2 / (R1 + R2)
    net = Netlist((Element("R", "R1", "in", "out"), Element("R", "R2", "out", "0")))
    tf = Derived(net)
    r1, r2 = sym("R1", "R2")
    assert tf.num_degree == 0 and tf.den_degree == 0
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] - r2 / (r1 + r2)) == 0
    vals = {"R1": np.array([1e3, 4.7e3]), "R2": np.array([3e3, 100.0])}
    h = tf.numerator(vals)[:, 0] / tf.denominator(vals)[:, 0]
    np.testing.assert_allclose(h, [0.75, 100 / 4800], rtol=1e-14)


def test_rc_lowpass_coefficients_are_ascending_in_s():
    # source: [TEXT] H = 1 / (1 + s R C); coefficients ascending: den = (1, RC) up to a factor
    net = Netlist((Element("R", "R", "in", "out"), Element("C", "C", "out", "0")))
    tf = Derived(net)
    vals = {"R": np.array([1e3, 10e3]), "C": np.array([1e-6, 3.3e-9])}
    num, den = tf.numerator(vals), tf.denominator(vals)
    assert num.shape == (2, 1) and den.shape == (2, 2)
    np.testing.assert_allclose(den[:, 1] / den[:, 0], vals["R"] * vals["C"], rtol=1e-14)
    np.testing.assert_allclose(num[:, 0] / den[:, 0], 1.0, rtol=1e-14)


def test_series_rlc_bandpass():
    # source: [TEXT] output across R of a series RLC: H = s R C / (1 + s R C + s^2 L C)
    net = Netlist((Element("L", "L", "in", "x"), Element("C", "C", "x", "out"),
                   Element("R", "R", "out", "0")))
    tf = Derived(net)
    r, l, c = sym("R", "L", "C")
    assert same_up_to_factor(tf.den_expr, (1, r * c, l * c))
    assert same_up_to_factor(tf.num_expr, (0, r * c, 0)[:len(tf.num_expr)])
    assert tf.num_expr[0] == 0
    assert sp.simplify(tf.num_expr[1] / tf.den_expr[0] - r * c) == 0


def test_ideal_opamp_amplifiers():
    # source: [TEXT] non-inverting amplifier 1 + RF/RG; inverting amplifier -R2/R1
    rf, rg, r1, r2 = sym("RF", "RG", "R1", "R2")
    non_inv = Netlist((Element("R", "RF", "out", "m"), Element("R", "RG", "m", "0")),
                      (OpAmp("U1", "in", "m", "out"),))
    tf = Derived(non_inv)
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] - (1 + rf / rg)) == 0
    inv = Netlist((Element("R", "R1", "in", "n"), Element("R", "R2", "n", "out")),
                  (OpAmp("U1", "0", "n", "out"),))
    tf = Derived(inv)
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] + r2 / r1) == 0


def test_single_pole_follower():
    # source: [TEXT] follower with A(s) = wt/s: H = wt / (s + wt), wt = 2 pi GBW
    net = Netlist((Element("R", "RL", "out", "0"),), (OpAmp("U1", "in", "out", "out", "GBW"),))
    tf = Derived(net)
    (gbw,) = sym("GBW")
    wt = 2 * sp.pi * gbw
    assert tf.roles == ("RL", "GBW")
    assert same_up_to_factor(tf.den_expr, (wt, 1))
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] - 1) == 0


def test_netlist_without_output_node_is_refused():
    # source: tolspread.netlist docstring contract (input node 'in', output node 'out')
    with pytest.raises(ValueError):
        derive(Netlist((Element("R", "R1", "in", "x"), Element("R", "R2", "x", "0"))))


def test_every_registered_topology_builds_with_declared_roles():
    # source: README.md "Topologies and their roles" table (project documentation of the
    # role names; the check is that each built netlist uses exactly the roles it declares)
    for name in TOPOLOGIES:
        topo = build(name)
        assert set(topo.netlist.roles) == set(topo.roles), name
        assert topo.kind in ("lowpass", "highpass", "bandpass", "bandstop")
        with_u = topo.with_opamps({"U1"})
        if topo.optional_roles:
            assert "U1" in with_u.roles and "U1" not in topo.netlist.roles


# --- Sallen-Key low-pass --------------------------------------------------------------

@pytest.mark.parametrize("gain", ["unity", "resistors"])
def test_sallen_key_lowpass_symbolic_denominator(gain):
    # source: [KARKI] D(s) = s^2 R1R2C1C2 + s[C2(R1+R2) + R1C1(1-K)] + 1, DC gain K,
    # K = 1 (unity) or 1 + RF/RG; [D] re-derived by nodal analysis
    tf = Derived(build("sallen_key_lowpass", {"gain": gain}).netlist)
    r1, r2, c1, c2, rf, rg = sym("R1", "R2", "C1", "C2", "RF", "RG")
    k = 1 if gain == "unity" else 1 + rf / rg
    want = (sp.Integer(1), c2 * (r1 + r2) + r1 * c1 * (1 - k), r1 * r2 * c1 * c2)
    assert tf.den_degree == 2
    assert same_up_to_factor(tf.den_expr, want)
    assert tf.num_degree == 0
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] - k) == 0


@pytest.mark.parametrize("gain", ["unity", "resistors"])
def test_sallen_key_lowpass_numeric_random_values(gain):
    # source: [KARKI] as above: f0 = 1/(2 pi sqrt(R1R2C1C2)),
    # Q = sqrt(R1R2C1C2)/[C2(R1+R2) + R1C1(1-K)], DC gain K
    rng = np.random.default_rng(RNG_SEED)
    n = 300
    vals = {"R1": log_uniform(rng, 100, 1e6, n), "R2": log_uniform(rng, 100, 1e6, n),
            "C1": log_uniform(rng, 1e-12, 1e-5, n), "C2": log_uniform(rng, 1e-12, 1e-5, n)}
    if gain == "resistors":
        vals["RF"] = log_uniform(rng, 100, 1e5, n)
        vals["RG"] = log_uniform(rng, 1e3, 1e5, n)
        k = 1 + vals["RF"] / vals["RG"]
    else:
        k = np.ones(n)
    r1, r2, c1, c2 = vals["R1"], vals["R2"], vals["C1"], vals["C2"]
    _, circuit, values = make([("sallen_key_lowpass", {"gain": gain}, vals)])
    coeffs = stage_coefficients(circuit, values)
    num, den = coeffs[0].unscaled()
    b1 = c2 * (r1 + r2) + r1 * c1 * (1 - k)
    b2 = r1 * r2 * c1 * c2
    np.testing.assert_allclose(den[:, 1] / den[:, 0], b1, rtol=1e-9, atol=1e-9 * np.abs(b1).max())
    np.testing.assert_allclose(den[:, 2] / den[:, 0], b2, rtol=1e-9)
    np.testing.assert_allclose(num[:, 0] / den[:, 0], k, rtol=1e-12)
    m = stage_metrics(circuit, coeffs)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * np.sqrt(b2)), rtol=1e-9)
    ok = np.abs(b1) > 1e-6 * np.sqrt(b2)  # leave out samples at the edge of oscillation
    np.testing.assert_allclose(m["s1.q"][ok], (np.sqrt(b2) / b1)[ok], rtol=1e-8)


@pytest.mark.parametrize("ratio", [0.01, 0.5, 1.0, 1.5, 1.9, 1.99])
def test_sallen_key_equal_components_q(ratio):
    # source: [KARKI] equal components R1 = R2, C1 = C2: Q = 1/(3 - K), K = 1 + RF/RG;
    # f0 = 1/(2 pi R C)
    r, c = 12e3, 6.8e-9
    vals = {"R1": r, "R2": r, "C1": c, "C2": c, "RF": ratio * 10e3, "RG": 10e3}
    _, circuit, values = make([("sallen_key_lowpass", {"gain": "resistors"}, vals)])
    coeffs = stage_coefficients(circuit, values)
    m = stage_metrics(circuit, coeffs)
    k = 1 + ratio
    np.testing.assert_allclose(m["s1.q"], 1 / (3 - k), rtol=1e-10)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * r * c), rtol=1e-12)
    num, den = coeffs[0].unscaled()
    np.testing.assert_allclose(num[:, 0] / den[:, 0], k, rtol=1e-12)


# --- Sallen-Key high-pass -------------------------------------------------------------

def test_sallen_key_highpass_equal_capacitors():
    # source: [KARKI] unity gain, C1 = C2 = C (R1 feedback, R2 to ground):
    # w0 = 1/(C sqrt(R1R2)), Q = (1/2) sqrt(R2/R1); high-frequency gain 1 (K = 1)
    rng = np.random.default_rng(RNG_SEED + 1)
    n = 200
    r1, r2 = log_uniform(rng, 100, 1e6, n), log_uniform(rng, 100, 1e6, n)
    c = log_uniform(rng, 1e-11, 1e-6, n)
    _, circuit, values = make([("sallen_key_highpass", {}, {"C1": c, "C2": c, "R1": r1, "R2": r2})])
    assert circuit.kind == "highpass"
    coeffs = stage_coefficients(circuit, values)
    m = stage_metrics(circuit, coeffs)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * c * np.sqrt(r1 * r2)), rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"], 0.5 * np.sqrt(r2 / r1), rtol=1e-9)
    num, den = coeffs[0].unscaled()
    assert np.all(num[:, :2] == 0)  # a pure s^2 numerator: a second-order high-pass
    np.testing.assert_allclose(num[:, 2] / den[:, 2], 1.0, rtol=1e-12)


# --- multiple feedback ----------------------------------------------------------------

def test_mfb_lowpass_symbolic_and_numeric():
    # source: [SLOA049] D(s) = s^2 R2R3C1C2 + s C2(R2 + R3 + R2R3/R1) + 1, DC gain -R2/R1,
    # w0 = 1/sqrt(R2R3C1C2), Q = sqrt(R2R3C1C2)/[C2(R2 + R3 + R2R3/R1)]; [D] re-derived
    tf = Derived(build("mfb_lowpass").netlist)
    r1, r2, r3, c1, c2 = sym("R1", "R2", "R3", "C1", "C2")
    assert same_up_to_factor(tf.den_expr, (sp.Integer(1), c2 * (r2 + r3 + r2 * r3 / r1), r2 * r3 * c1 * c2))
    assert sp.simplify(tf.num_expr[0] / tf.den_expr[0] + r2 / r1) == 0

    rng = np.random.default_rng(RNG_SEED + 2)
    n = 200
    v = {"R1": log_uniform(rng, 100, 1e6, n), "R2": log_uniform(rng, 100, 1e6, n),
         "R3": log_uniform(rng, 100, 1e6, n), "C1": log_uniform(rng, 1e-12, 1e-5, n),
         "C2": log_uniform(rng, 1e-12, 1e-5, n)}
    _, circuit, values = make([("mfb_lowpass", {}, v)])
    coeffs = stage_coefficients(circuit, values)
    num, den = coeffs[0].unscaled()
    b1 = v["C2"] * (v["R2"] + v["R3"] + v["R2"] * v["R3"] / v["R1"])
    b2 = v["R2"] * v["R3"] * v["C1"] * v["C2"]
    np.testing.assert_allclose(den[:, 1] / den[:, 0], b1, rtol=1e-9)
    np.testing.assert_allclose(den[:, 2] / den[:, 0], b2, rtol=1e-9)
    np.testing.assert_allclose(num[:, 0] / den[:, 0], -v["R2"] / v["R1"], rtol=1e-12)
    m = stage_metrics(circuit, coeffs)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * np.sqrt(b2)), rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"], np.sqrt(b2) / b1, rtol=1e-9)


def test_mfb_bandpass_equal_capacitors():
    # source: [SLOA049] C1 = C2 = C, R1 input, R2 to ground, R3 feedback:
    # f_m = (1/2 pi C) sqrt((R1 + R2)/(R1 R3 R2)), Q = pi f_m R3 C, A_m = -R3/(2 R1),
    # bandwidth 1/(pi R3 C)
    rng = np.random.default_rng(RNG_SEED + 3)
    n = 100
    r1, r2, r3 = (log_uniform(rng, 100, 1e6, n) for _ in range(3))
    c = log_uniform(rng, 1e-11, 1e-6, n)
    _, circuit, values = make([("mfb_bandpass", {}, {"R1": r1, "R2": r2, "R3": r3, "C1": c, "C2": c})])
    assert circuit.kind == "bandpass"
    coeffs = stage_coefficients(circuit, values)
    fm = 1 / (TWO_PI * c) * np.sqrt((r1 + r2) / (r1 * r3 * r2))
    m = stage_metrics(circuit, coeffs)
    np.testing.assert_allclose(m["s1.f0_hz"], fm, rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"], math.pi * fm * r3 * c, rtol=1e-9)
    num, den = coeffs[0].unscaled()
    assert num.shape[1] == 2 and np.all(num[:, 0] == 0)  # N(s) = k s: a band-pass
    # -3 dB bandwidth of a second-order band-pass in rad/s is d1/d2
    np.testing.assert_allclose(den[:, 1] / den[:, 2] / TWO_PI, 1 / (math.pi * r3 * c), rtol=1e-9)
    # midband gain -R3/(2 R1): |H(j w_m)|^2 and a phase of 180 degrees there
    for i in range(0, n, 17):
        one = [type(sc)(sc.num[i:i + 1], sc.den[i:i + 1], sc.w_ref) for sc in coeffs]
        resp = frequency_response(circuit, one, np.array([fm[i]]), phase=True)
        np.testing.assert_allclose(resp.gain2[0, 0], (r3[i] / (2 * r1[i])) ** 2, rtol=1e-9)
        assert abs((resp.phase_deg[0, 0] % 360) - 180) < 1e-6


def test_mfb_highpass_shape_and_hf_gain():
    # source: standard result, from memory [M]: the multiple-feedback high-pass has a pure
    # s^2 numerator and high-frequency gain -C1/C3 (C1 input, C3 the feedback capacitor
    # from node A to the output); its f0/Q are checked against a numeric nodal solution in
    # tests/test_engine.py
    rng = np.random.default_rng(RNG_SEED + 4)
    n = 100
    v = {"C1": log_uniform(rng, 1e-11, 1e-6, n), "C2": log_uniform(rng, 1e-11, 1e-6, n),
         "C3": log_uniform(rng, 1e-11, 1e-6, n), "R1": log_uniform(rng, 100, 1e6, n),
         "R2": log_uniform(rng, 100, 1e6, n)}
    _, circuit, values = make([("mfb_highpass", {}, v)])
    assert circuit.kind == "highpass"
    coeffs = stage_coefficients(circuit, values)
    num, den = coeffs[0].unscaled()
    assert num.shape[1] == 3 and np.all(num[:, :2] == 0)
    np.testing.assert_allclose(num[:, 2] / den[:, 2], -v["C1"] / v["C3"], rtol=1e-12)
    # 40 dB/decade in the far stopband: |H(f)|/|H(f/10)| -> 100 (a double zero at s = 0)
    # (far below both poles: the lower pole of a low-Q pair is near d0/d1 rad/s)
    f_low = np.minimum(np.sqrt(den[:, 0] / den[:, 2]), den[:, 0] / den[:, 1]) / TWO_PI
    for i in range(0, n, 25):
        one = [type(sc)(sc.num[i:i + 1], sc.den[i:i + 1], sc.w_ref) for sc in coeffs]
        g = frequency_response(circuit, one, np.array([1e-5, 1e-6]) * f_low[i], phase=False).gain2[0]
        np.testing.assert_allclose(g[0] / g[1], 1e4, rtol=1e-3)


# --- finite gain-bandwidth ------------------------------------------------------------

SK_VALUES = {"R1": 10e3, "R2": 10e3, "C1": 22e-9, "C2": 4.7e-9}  # unity gain, Q about 1.08
MFB_VALUES = {"R1": 10e3, "R2": 10e3, "R3": 4.7e3, "C1": 47e-9, "C2": 2.2e-9}


def _ideal_sk(v):
    # source: [KARKI] unity gain (K = 1)
    b2 = v["R1"] * v["R2"] * v["C1"] * v["C2"]
    b1 = v["C2"] * (v["R1"] + v["R2"])
    return 1 / (TWO_PI * math.sqrt(b2)), math.sqrt(b2) / b1


def _ideal_mfb(v):
    # source: [SLOA049]
    b2 = v["R2"] * v["R3"] * v["C1"] * v["C2"]
    b1 = v["C2"] * (v["R2"] + v["R3"] + v["R2"] * v["R3"] / v["R1"])
    return 1 / (TWO_PI * math.sqrt(b2)), math.sqrt(b2) / b1


def _f0_q_with_gbw(topology, vals, gbws):
    n = len(gbws)
    v = {k: np.full(n, x) for k, x in vals.items()}
    v["U1"] = np.asarray(gbws, dtype=float)
    _, circuit, values = make([(topology, {}, v)])
    assert circuit.stages[0].tf.den_degree == 3  # the op-amp pole adds one order
    m = stage_metrics(circuit, stage_coefficients(circuit, values))
    return m["s1.f0_hz"], m["s1.q"]


@pytest.mark.parametrize("topology, vals, ideal", [
    ("sallen_key_lowpass", SK_VALUES, _ideal_sk),
    ("mfb_lowpass", MFB_VALUES, _ideal_mfb),
])
def test_gbw_limit_is_the_ideal_opamp(topology, vals, ideal):
    # source: [KARKI]/[SLOA049] ideal closed forms; as GBW -> infinity the single-pole
    # model A = wt/s tends to the ideal op-amp [TEXT]
    f0, q = _f0_q_with_gbw(topology, vals, [1e12])
    f0_i, q_i = ideal(vals)
    np.testing.assert_allclose(f0[0], f0_i, rtol=1e-6)
    np.testing.assert_allclose(q[0], q_i, rtol=1e-6)


@pytest.mark.parametrize("topology, vals, ideal", [
    ("sallen_key_lowpass", SK_VALUES, _ideal_sk),
    ("mfb_lowpass", MFB_VALUES, _ideal_mfb),
])
def test_gbw_q_enhancement(topology, vals, ideal):
    # source: [BUDAK] (from memory): Q rises as GBW falls; the first-order deviation is
    # proportional to f0/GBW, so ten times the GBW gives about a tenth of the deviation
    f0_i, q_i = ideal(vals)
    gbws = f0_i * np.array([1e5, 1e4, 1e3, 300, 100, 30])
    _, q = _f0_q_with_gbw(topology, vals, gbws)
    assert np.all(q > q_i)
    assert np.all(np.diff(q) > 0)
    dev = q / q_i - 1
    np.testing.assert_allclose(dev[0] / dev[1], 0.1, rtol=0.02)
    np.testing.assert_allclose(dev[1] / dev[2], 0.1, rtol=0.05)
