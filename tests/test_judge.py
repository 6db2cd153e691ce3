"""Checks of tolspread.judge (mask judging) and of the frequency grid it works on, held
against references outside the project.

References used below:
  [SCIPY]  scipy.signal.freqs: H(jw) of analog polynomial coefficients (descending powers
           of s), the reference library. The coefficients handed to it are typed here from
           the closed forms below, not taken from the library under test.
  [SK]     Sallen-Key low-pass with gain K (R1 input to A, R2 A to B, C1 A to output, C2 B
           to ground): H = K / (s^2 R1R2C1C2 + s[C2(R1+R2) + R1C1(1-K)] + 1); unity gain is
           K = 1; gain network K = 1 + RF/RG. tests/REFERENCES.md section 6 (layout after Karki,
           TI SLOA024, equation numbers from memory [M]; re-derived by nodal analysis [D]).
  [RC]     first-order RC sections, elementary circuit theory (from memory): low-pass
           H = 1/(1 + sRC), high-pass H = sRC/(1 + sRC).
  [DOC]    the documented behaviour under test (README "Design files", tolspread.mask and
           tolspread.judge docstrings): every span edge is a grid point, a span is checked at
           its ends and every grid point between, a sloped limit is linear in dB against
           log frequency, a relative span is relative to the nominal design's passband gain,
           positive margin = pass.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from tolspread.design import design_from_dict
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate, evaluate_values, frequency_grid, prepare
from tolspread.judge import plan
from tolspread.mask import Span

TWO_PI = 2 * math.pi
DB_TOL = 1e-9  # dB; both sides evaluate the same rational function in double precision


# --- helpers -------------------------------------------------------------------------

def make_design(parts, stages, mask=(), analysis=None):
    data = {"format": "tolspread-design", "version": 1,
            "parts": [{"ref": r, "value": v, "grade": g} for r, v, g in parts],
            "stages": stages, "mask": list(mask),
            "analysis": analysis or {"f_start": 10, "f_stop": 1e6, "points": 400}}
    return design_from_dict(data)


def rc_lowpass_design(mask, r=10e3, c=10e-9, highpass=False):
    topo = "rc_highpass" if highpass else "rc_lowpass"
    return make_design([("R1", r, "EXACT"), ("C1", c, "EXACT")],
                       [{"topology": topo, "options": {"sections": 1},
                         "parts": {"R1": "R1", "C1": "C1"}}], mask)


def gain_db_scipy(b, a, f_hz):
    """20 log10 |H(j 2 pi f)| by [SCIPY]."""
    _, h = scipy.signal.freqs(b, a, worN=TWO_PI * np.asarray(f_hz, dtype=float))
    return 20 * np.log10(np.abs(h))


def sk_ba(r1, r2, c1, c2, k=1.0):
    """[SK] numerator and denominator, descending powers of s."""
    return [k], [r1 * r2 * c1 * c2, c2 * (r1 + r2) + r1 * c1 * (1 - k), 1.0]


def reference_margin(span: dict, freqs, gain_db, reference_db):
    """[DOC] margin of one span: the dB distance to the limit at the span's worst grid
    point; the limit sloped linearly in log f; relative spans shifted by the reference."""
    inside = (freqs >= span["f1"]) & (freqs <= span["f2"])
    f = freqs[inside]
    l1 = span["limit1"]
    l2 = span.get("limit2", l1)
    lim = l1 + (l2 - l1) * np.log(f / span["f1"]) / np.log(span["f2"] / span["f1"])
    if span.get("relative", False):
        lim = lim + reference_db
    d = gain_db[inside] - lim
    return float(d.min() if span["kind"] == "floor" else (-d).min())


# --- the grid holds every mask edge -------------------------------------------------------

def test_mask_edges_are_grid_points():
    # [DOC] edges chosen off the log grid (10..1e6 Hz, 400 points): none is a geomspace point
    mask = [
        {"kind": "floor", "f1": 123.4567, "f2": 1234.5678, "limit1": -1.0, "relative": True},
        {"kind": "ceiling", "f1": 7777.7, "f2": 33333.3, "limit1": -3.0, "limit2": -25.0,
         "relative": True},
    ]
    design = rc_lowpass_design(mask)
    grid = frequency_grid(design)
    log_grid = np.geomspace(10, 1e6, 400)
    for edge in (123.4567, 1234.5678, 7777.7, 33333.3):
        assert not np.any(np.isclose(log_grid, edge, rtol=1e-9, atol=0))  # the check can fail
        assert edge in grid
    prep = prepare(design)
    assert 123.4567 in prep.freqs_hz and 33333.3 in prep.freqs_hz
    # each plan's first and last index are exactly the span's edges
    for p, s in zip(prep.plans, design.mask):
        assert prep.freqs_hz[p.index[0]] == s.f1
        assert prep.freqs_hz[p.index[-1]] == s.f2
    assert np.all(np.diff(grid) > 0)


# --- spans are checked at their ends ------------------------------------------------------

def rc_gain_db(f, r=10e3, c=10e-9, highpass=False):
    """[RC] via [SCIPY]."""
    tau = r * c
    b = [tau, 0.0] if highpass else [1.0]
    return gain_db_scipy(b, [tau, 1.0], f)


def test_floor_caught_exactly_at_its_upper_edge():
    # [RC] a low-pass falls monotonically: inside a floor span its lowest point is f2.
    fc = 1 / (TWO_PI * 10e3 * 10e-9)  # 1591.55 Hz, not a grid point
    f1, f2 = 200.0, fc
    g_f2 = float(rc_gain_db([f2])[0])  # -3.0103 dB
    limit = g_f2 + 0.01  # violated by 0.01 dB only at f2
    design = rc_lowpass_design([{"kind": "floor", "f1": f1, "f2": f2, "limit1": limit}])
    prep = prepare(design)
    f = prep.freqs_hz
    inner = f[(f >= f1) & (f < f2)]
    # without the edge point the span would pass by > 0.05 dB: the check can tell them apart
    assert float(rc_gain_db(inner).min()) - limit > 0.05
    assert prep.nominal.margins[0] == pytest.approx(-0.01, abs=DB_TOL)
    ev = evaluate_values(prep, prep.nominal.values[None, :])
    assert ev.margins[0, 0] == pytest.approx(-0.01, abs=DB_TOL)
    ens = evaluate(design, samples=3, seed=1, curves=False, prepared=prep)
    assert not ens.passed.any()  # EXACT parts: every board is the nominal one


def test_ceiling_caught_at_its_lower_edge_and_floor_of_highpass_at_its_lower_edge():
    fc = 1 / (TWO_PI * 10e3 * 10e-9)
    f1 = fc * 0.987654  # off the grid
    # low-pass ceiling: the highest gain inside [f1, f2] is at f1
    lim_c = float(rc_gain_db([f1])[0]) - 0.02
    # high-pass floor: the lowest gain inside [f1, f2] is at f1
    lim_f = float(rc_gain_db([f1], highpass=True)[0]) + 0.02
    lp = prepare(rc_lowpass_design([{"kind": "ceiling", "f1": f1, "f2": 5 * fc, "limit1": lim_c}]))
    hp = prepare(rc_lowpass_design([{"kind": "floor", "f1": f1, "f2": 5 * fc, "limit1": lim_f}],
                                   highpass=True))
    assert lp.nominal.margins[0] == pytest.approx(-0.02, abs=DB_TOL)
    assert hp.nominal.margins[0] == pytest.approx(-0.02, abs=DB_TOL)


# --- sloped limits: linear in log f -------------------------------------------------------

def test_limit_at_is_linear_in_log_frequency():
    # [DOC] a limit from limit1 at f1 to limit2 at f2, linear in dB against log f:
    # equal frequency ratios give equal limit steps, the log midpoint gives the mean.
    s = Span(kind="floor", f1=100.0, f2=10_000.0, limit1=-1.0, limit2=-5.0)
    r = (s.f2 / s.f1) ** 0.25
    f = s.f1 * r ** np.arange(5)
    assert s.limit_at(f) == pytest.approx([-1.0, -2.0, -3.0, -4.0, -5.0], abs=1e-12)
    assert float(s.limit_at(np.array([1000.0]))[0]) == pytest.approx(-3.0, abs=1e-12)
    # not linear in f: at the arithmetic midpoint (5050 Hz) the limit is near the far end
    mid = float(s.limit_at(np.array([5050.0]))[0])
    assert mid == pytest.approx(-1 - 4 * math.log10(50.5) / 2, abs=1e-12)
    # a level span
    flat = Span(kind="ceiling", f1=10.0, f2=20.0, limit1=0.25)
    assert np.all(flat.limit_at(np.array([10.0, 14.0, 20.0])) == 0.25)


def test_plan_limits_follow_the_slope_and_the_reference():
    s = Span(kind="floor", f1=1200.0, f2=1900.0, limit1=-0.5, limit2=-2.6, relative=True)
    a = Span(kind="floor", f1=1200.0, f2=1900.0, limit1=-0.5, limit2=-2.6, relative=False)
    freqs = np.unique(np.concatenate([np.geomspace(10, 1e5, 400), [1200.0, 1900.0]]))
    p_rel, p_abs = plan((s, a), freqs, nominal_reference_db=6.0)
    f = freqs[p_abs.index]
    assert f[0] == 1200.0 and f[-1] == 1900.0
    expected = -0.5 + (-2.1) * np.log10(f / 1200.0) / np.log10(1900.0 / 1200.0)
    assert p_abs.limit == pytest.approx(expected, abs=1e-12)
    assert p_rel.limit == pytest.approx(expected + 6.0, abs=1e-12)


# --- relative spans follow the nominal passband gain ---------------------------------------

REL_MASK = [
    {"name": "rel floor", "kind": "floor", "f1": 10, "f2": 200, "limit1": -0.5, "relative": True},
    {"name": "abs floor", "kind": "floor", "f1": 10, "f2": 200, "limit1": -0.5},
    {"name": "rel ceiling", "kind": "ceiling", "f1": 10, "f2": 3000, "limit1": 2.0, "relative": True},
    {"name": "abs ceiling", "kind": "ceiling", "f1": 10, "f2": 3000, "limit1": 2.0},
    {"name": "rel stop", "kind": "ceiling", "f1": 20e3, "f2": 1e5, "limit1": -30, "limit2": -50,
     "relative": True},
]


def sk_pair():
    """Two Sallen-Key low-passes with the same poles (f0 = 1/(2 pi 10k 10n), Q = 1) and DC
    gains 1 and 2. [SK]: unity gain with R1 = R2 = R, C1 = 4 C2 gives Q = sqrt(C1/C2)/2 = 1;
    equal components with K = 2 give Q = 1/(3 - K) = 1; both denominators are
    s^2 (RC)^2 + s RC + 1 with RC = 1e-4 s."""
    unity = make_design([("R1", 10e3, "EXACT"), ("R2", 10e3, "EXACT"), ("C1", 20e-9, "EXACT"),
                         ("C2", 5e-9, "EXACT")],
                        [{"topology": "sallen_key_lowpass", "options": {"gain": "unity"},
                          "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2"}}],
                        REL_MASK, {"f_start": 10, "f_stop": 1e5, "points": 300})
    gain2 = make_design([("R1", 10e3, "EXACT"), ("R2", 10e3, "EXACT"), ("C1", 10e-9, "EXACT"),
                         ("C2", 10e-9, "EXACT"), ("RF", 10e3, "EXACT"), ("RG", 10e3, "EXACT")],
                        [{"topology": "sallen_key_lowpass", "options": {"gain": "resistors"},
                          "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2",
                                    "RF": "RF", "RG": "RG"}}],
                        REL_MASK, {"f_start": 10, "f_stop": 1e5, "points": 300})
    return unity, gain2


def test_relative_spans_move_with_the_gain_absolute_spans_do_not():
    unity, gain2 = sk_pair()
    pu, pk = prepare(unity), prepare(gain2)
    k_db = 20 * math.log10(2.0)  # [SK] DC gain K = 1 + RF/RG = 2
    assert pu.nominal.metrics["reference_db"] == pytest.approx(0.0, abs=1e-12)
    assert pk.nominal.metrics["reference_db"] == pytest.approx(k_db, abs=1e-12)
    mu, mk = pu.nominal.margins, pk.nominal.margins
    # relative spans: same shape, same margins
    for j in (0, 2, 4):
        assert mk[j] == pytest.approx(mu[j], abs=DB_TOL)
    # absolute spans: the floor gains 6.02 dB of margin, the ceiling loses it
    assert mk[1] - mu[1] == pytest.approx(k_db, abs=DB_TOL)
    assert mk[3] - mu[3] == pytest.approx(-k_db, abs=DB_TOL)
    # and the values against [SCIPY] on the [SK] coefficients
    f = pk.freqs_hz
    g = gain_db_scipy(*sk_ba(10e3, 10e3, 10e-9, 10e-9, 2.0), f)
    for j, span in enumerate(REL_MASK):
        assert mk[j] == pytest.approx(reference_margin(span, f, g, k_db), abs=DB_TOL)
    assert mk[3] < 0 < mu[3]  # K = 2 breaks the absolute +2 dB ceiling (peak 6.02 + 1.25 dB)


def test_relative_limit_is_the_nominal_gain_not_each_boards_gain():
    # [DOC] "relative to the nominal design's passband reference gain": a board whose gain
    # network is off by 10 % keeps the nominal board's limits.
    _, gain2 = sk_pair()
    prep = prepare(gain2)
    row = prep.nominal.values.copy()
    rf = gain2.part_index("RF")
    row[rf] *= 1.1  # K = 2.1
    ev = evaluate_values(prep, row[None, :])
    f = prep.freqs_hz
    g = gain_db_scipy(*sk_ba(10e3, 10e3, 10e-9, 10e-9, 2.1), f)
    k_db = 20 * math.log10(2.0)
    for j, span in enumerate(REL_MASK):
        assert ev.margins[0, j] == pytest.approx(reference_margin(span, f, g, k_db), abs=DB_TOL)
    # the board's own gain rose by 20 log10(2.1/2) = 0.42 dB, so the floor margin rose with it
    assert ev.margins[0, 0] - prep.nominal.margins[0] == pytest.approx(
        20 * math.log10(2.1 / 2.0), abs=0.01)


# --- margins on the demo against scipy.signal.freqs ---------------------------------------

def demo_gain_db(values, refs, f):
    """[SK] unity-gain stages (R1, R2, C1, C2) and (R3, R4, C3, C4) of the demo, cascaded,
    by [SCIPY]. Part order from the demo file's roles."""
    v = dict(zip(refs, values))
    g1 = gain_db_scipy(*sk_ba(v["R1"], v["R2"], v["C1"], v["C2"]), f)
    g2 = gain_db_scipy(*sk_ba(v["R3"], v["R4"], v["C3"], v["C4"]), f)
    return g1 + g2


def test_demo_margins_match_scipy_at_the_worst_point():
    demo = load_demo()
    spans = [s.to_dict() for s in demo.mask]
    assert any("limit2" in s for s in spans)  # the sloped corner floor is exercised
    prep = prepare(demo)
    refs = [p.ref for p in demo.parts]
    f = prep.freqs_hz
    g_nom = demo_gain_db(prep.nominal.values, refs, f)
    # [SK] unity gain: the passband reference (DC gain) is 0 dB
    assert prep.nominal.metrics["reference_db"] == pytest.approx(0.0, abs=1e-12)
    for j, span in enumerate(spans):
        assert prep.nominal.margins[j] == pytest.approx(reference_margin(span, f, g_nom, 0.0),
                                                        abs=DB_TOL)
    # sampled boards: margins of each board against the same independent computation
    ens = evaluate(demo, samples=60, seed=424242, curves=False, prepared=prep)
    for i in range(ens.samples):
        g = demo_gain_db(ens.values[i], refs, f)
        want = [reference_margin(span, f, g, 0.0) for span in spans]
        assert ens.margins[i] == pytest.approx(want, abs=DB_TOL)
        assert bool(ens.passed[i]) == all(w >= 0 for w in want)
    assert 0 < ens.passed.sum() < ens.samples  # both outcomes occur among these boards
