"""Checks of tolspread.corners (worst-case corners and the RSS estimate) against closed forms
and against the Monte Carlo boards themselves.

References used below:
  [SK]     unity-gain Sallen-Key low-pass: f0 = 1/(2 pi sqrt(R1R2C1C2)) (tests/REFERENCES.md
           section 6, after Karki TI SLOA024, equation numbers from memory [M], re-derived [D]).
  [RC]     first-order RC low-pass |H|^2 = 1/(1 + (f/fc)^2), fc = 1/(2 pi R C) (elementary
           circuit theory, from memory); its 3 dB point is fc sqrt(10^0.3 - 1).
  [GUM]    product of powers: (u_c/y)^2 = sum (p_i u(x_i)/x_i)^2 (JCGM 100:2008 5.1.6, from
           memory [M], tests/REFERENCES.md section 4); every p_i = -1 for fc, -1/2 for f0.
  [BOX]    a function monotone in each part takes its extremes over the tolerance box at
           vertices (elementary calculus); with every grade truncated at its tolerance limits
           no sampled board leaves the box, so none lies beyond the corner extremes of such a
           metric. The README "Grades" section documents the truncation (common practice: a
           maker's final test removes parts outside the tolerance).
  [BW]     Butterworth pole pairs of order n: Q_k = 1/(2 sin((2k-1) pi/(2n))) (from memory [M];
           tests/REFERENCES.md section 5 lists the same Qs for n = 4, 5, 6).
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from tolspread.budget import metric_columns
from tolspread.corners import MAX_EXHAUSTIVE, corners
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate, prepare

from designs import parts_design  # shared builder: tests/designs.py

TWO_PI = 2 * math.pi


def make_design(parts, stages, mask=(), analysis=None, grades=()):
    """:func:`designs.parts_design` over 10 Hz to 100 kHz, 300 points unless ``analysis`` says."""
    return parts_design(parts, stages, mask, analysis or {"f_start": 10, "f_stop": 1e5, "points": 300}, grades)


def assert_inside(name, corner_low, corner_high, samples):
    """Every finite sample inside [corner_low, corner_high] up to rounding (a truncated
    sample may sit exactly at a limit, i.e. on a corner)."""
    y = samples[np.isfinite(samples)]
    tol = 1e-9 * max(1.0, abs(corner_low), abs(corner_high))
    assert corner_low - tol <= y.min(), (name, corner_low, y.min())
    assert y.max() <= corner_high + tol, (name, y.max(), corner_high)


# --- the demo: exhaustive corners bound every Monte Carlo board ---------------------------

def test_demo_monte_carlo_stays_inside_the_exhaustive_corners():
    demo = load_demo()
    assert demo.analysis.temp_low_c == demo.analysis.temp_high_c == 25.0  # no temperature range
    cat = demo.catalog
    assert all(cat[p.grade].truncate and cat[p.grade].distribution == "normal" for p in demo.parts)
    prep = prepare(demo)
    ens = evaluate(demo, samples=20000, seed=31337, curves=False, prepared=prep)
    c = corners(ens, prep)
    assert c.exhaustive and c.varying_parts == 8 and c.boards == 2 ** 8
    assert 8 <= MAX_EXHAUSTIVE
    cols = metric_columns(ens)
    checked = ["cutoff_hz", "s1.f0_hz", "s1.q", "s2.f0_hz", "s2.q"] + \
        [f"margin.{s.label}" for s in demo.mask]
    for name in checked:
        r = c.ranges[name]
        assert_inside(name, r.corner_low, r.corner_high, cols[name])  # [BOX]
    # the worst corner margins are at or below every board's margin; all_pass agrees
    for j, s in enumerate(demo.mask):
        assert c.worst_margins[s.label] <= ens.margins[:, j].min() + 1e-9
    assert c.all_pass == (min(c.worst_margins.values()) >= 0)
    # [SK] [GUM] the f0 corners are the box's vertices: all four parts high / all low
    for k, refs in ((1, ("R1", "R2", "C1", "C2")), (2, ("R3", "R4", "C3", "C4"))):
        v = {p.ref: p.value for p in demo.parts}
        f0 = 1 / (TWO_PI * math.sqrt(math.prod(v[r] for r in refs)))
        hi = math.sqrt(1.01 * 1.01 * 1.05 * 1.05)  # 1 % resistors, 5 % capacitors
        lo = math.sqrt(0.99 * 0.99 * 0.95 * 0.95)
        r = c.ranges[f"s{k}.f0_hz"]
        assert r.nominal == pytest.approx(f0, rel=1e-12)
        assert r.corner_low == pytest.approx(f0 / hi, rel=1e-12)
        assert r.corner_high == pytest.approx(f0 / lo, rel=1e-12)


# --- more than MAX_EXHAUSTIVE parts: guided corners ---------------------------------------

def butterworth8_cascade():
    """8th-order Butterworth, f0 = 1 kHz, four unity-gain Sallen-Key stages (16 parts):
    R1 = R2 = R, C2 = C, C1 = 4 Q^2 C, R = 1/(2 Q C w0) ([SK] with R1 = R2: Q = sqrt(C1/C2)/2,
    w0 = 1/(R sqrt(C1 C2)))."""
    n, f0, c = 8, 1000.0, 10e-9
    w0 = TWO_PI * f0
    parts, stages = [], []
    for k in range(1, n // 2 + 1):
        q = 1 / (2 * math.sin((2 * k - 1) * math.pi / (2 * n)))  # [BW]
        r = 1 / (2 * q * c * w0)
        vals = {"R1": r, "R2": r, "C1": 4 * q * q * c, "C2": c}
        parts += [(f"{role}_{k}", x, "R-thick-1" if role[0] == "R" else "C-C0G-5")
                  for role, x in vals.items()]
        stages.append({"topology": "sallen_key_lowpass", "options": {"gain": "unity"},
                       "parts": {role: f"{role}_{k}" for role in vals}})
    return make_design(parts, stages)


def test_guided_corners_for_sixteen_parts():
    d = butterworth8_cascade()
    assert len(d.parts) == 16 > MAX_EXHAUSTIVE
    prep = prepare(d)
    assert prep.nominal.metrics["cutoff_hz"] == pytest.approx(1000.0, rel=1e-3)  # [BW] -3 dB at f0
    ens = evaluate(d, samples=20000, seed=2718, curves=False, prepared=prep)
    cols = metric_columns(ens)
    names = ["cutoff_hz"] + [f"s{k}.{m}" for k in range(1, 5) for m in ("f0_hz", "q")]
    c = corners(ens, prep, names=names)
    assert not c.exhaustive and c.varying_parts == 16
    assert c.boards == 2 * len(names)  # two corners per metric
    # default names: every metric column, two boards each (all sensitivities finite here)
    c_all = corners(ens, prep)
    assert not c_all.exhaustive and c_all.boards == 2 * len(cols)
    # the cutoff's own two guided corners bound every board
    c_cut = corners(ens, prep, names=["cutoff_hz"])
    assert c_cut.boards == 2
    r = c_cut.ranges["cutoff_hz"]
    assert_inside("cutoff_hz", r.corner_low, r.corner_high, cols["cutoff_hz"])
    # stage f0 is a product of powers [SK]: its guided corners are the exact vertices
    hi = math.sqrt(1.01 * 1.01 * 1.05 * 1.05)
    lo = math.sqrt(0.99 * 0.99 * 0.95 * 0.95)
    for k in range(1, 5):
        rk = c.ranges[f"s{k}.f0_hz"]
        assert rk.corner_low == pytest.approx(1000.0 / hi, rel=1e-9)
        assert rk.corner_high == pytest.approx(1000.0 / lo, rel=1e-9)
        assert_inside(f"s{k}.f0_hz", rk.corner_low, rk.corner_high, cols[f"s{k}.f0_hz"])
        rq = c.ranges[f"s{k}.q"]
        assert_inside(f"s{k}.q", rq.corner_low, rq.corner_high, cols[f"s{k}.q"])


# --- RSS ---------------------------------------------------------------------------------

FC0 = 1 / (TWO_PI * 10e3 * 10e-9)  # [RC] the pole frequency, 1591.55 Hz (s1.fc_hz)
# [RC] the 3 dB cutoff (analysis cutoff_db = 3): 1 + (f/fc)^2 = 10^0.3, just below fc
FC3 = FC0 * math.sqrt(10 ** 0.3 - 1)


def rc_design(r_grade="R-g2", c_grade="C-g4"):
    return make_design(
        [("R1", 10e3, r_grade), ("C1", 10e-9, c_grade)],
        [{"topology": "rc_lowpass", "options": {"sections": 1}, "parts": {"R1": "R1", "C1": "C1"}}],
        analysis={"f_start": 10, "f_stop": 1e5, "points": 60},
        grades=[{"name": "R-g2", "kind": "R", "tolerance_pct": 2, "truncate": False},
                {"name": "C-g4", "kind": "C", "tolerance_pct": 4, "truncate": False}])


def test_rss_std_of_the_rc_cutoff():
    d = rc_design()
    prep = prepare(d)
    ens = evaluate(d, samples=5000, seed=1234, curves=False, prepared=prep)
    s = np.log(ens.values / np.array([10e3, 10e-9])).std(axis=0)
    c = corners(ens, prep, names=["cutoff_hz", "s1.fc_hz"])
    for name, f_nom in (("cutoff_hz", FC3), ("s1.fc_hz", FC0)):
        assert c.ranges[name].nominal == pytest.approx(f_nom, rel=1e-9)
        want = f_nom * math.sqrt(s[0] ** 2 + s[1] ** 2)  # [GUM] with p_R = p_C = -1
        assert c.ranges[name].rss_std == pytest.approx(want, rel=0.01)
        # ln f is linear in ln R, ln C: the sampled spread agrees to first order
        assert np.std(ens.metrics[name]) == pytest.approx(want, rel=0.01)
        # and the population value sqrt(1 %^2 + 2 %^2) f_nom within sampling error (the
        # standard deviation of a sampled std at N = 5000 is ~1 %; bound 5 %)
        assert c.ranges[name].rss_std == pytest.approx(f_nom * math.hypot(0.01, 0.02), rel=0.05)


def test_rc_corners_are_the_tolerance_vertices():
    # [RC] fc falls in R and C: lowest with both at +tol, highest with both at -tol
    d = rc_design("R-thick-1", "C-C0G-5")
    prep = prepare(d)
    ens = evaluate(d, samples=5000, seed=99, curves=False, prepared=prep)
    c = corners(ens, prep, names=["cutoff_hz", "s1.fc_hz"])
    assert c.exhaustive and c.boards == 4
    for name, f_nom in (("cutoff_hz", FC3), ("s1.fc_hz", FC0)):
        r = c.ranges[name]
        assert r.corner_low == pytest.approx(f_nom / (1.01 * 1.05), rel=1e-9)
        assert r.corner_high == pytest.approx(f_nom / (0.99 * 0.95), rel=1e-9)
        assert_inside(name, r.corner_low, r.corner_high, ens.metrics[name])
    # untruncated grades can leave the box: the check above is not vacuous
    d2 = rc_design()  # untruncated, 2 % and 4 %
    prep2 = prepare(d2)
    ens2 = evaluate(d2, samples=5000, seed=99, curves=False, prepared=prep2)
    r2 = corners(ens2, prep2, names=["cutoff_hz"]).ranges["cutoff_hz"]
    y = ens2.metrics["cutoff_hz"]
    # fc beyond the corner extremes needs |ln R + ln C| beyond ~0.059, 2.6 sigma [GUM]:
    # ~1 % of boards, some 50 of 5000
    assert np.count_nonzero((y < r2.corner_low) | (y > r2.corner_high)) > 0


def test_one_sided_margin_is_marked_not_linear_instead_of_an_rss_of_zero():
    # The demo's passband ceiling sits over a flat passband (0 dB at DC whatever the parts:
    # unity-gain Sallen-Key, common practice): at the nominal its margin has zero first-order
    # sensitivity, yet sampled boards with peaking fail it.
    demo = load_demo()
    prep = prepare(demo)
    ens = evaluate(demo, samples=4000, seed=11, curves=False, prepared=prep)
    c = corners(ens, prep)
    ceiling = c.ranges["margin.passband ceiling"]
    j = [s.label for s in demo.mask].index("passband ceiling")
    assert np.count_nonzero(ens.margins[:, j] < 0) > 0
    assert ceiling.linear is False and math.isnan(ceiling.rss_std) and math.isnan(ceiling.rss_limit)
    assert ceiling.to_dict()["linear"] is False
    cutoff = c.ranges["cutoff_hz"]  # smooth in every part: first order holds
    assert cutoff.linear is True
    assert cutoff.rss_std == pytest.approx(np.std(ens.metrics["cutoff_hz"], ddof=1), rel=0.1)
