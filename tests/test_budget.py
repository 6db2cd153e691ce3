"""Checks of tolspread.budget (normalized sensitivities and the spread budget) against
published results and closed forms.

References used below:
  [SVV]    Schaumann & Van Valkenburg, "Design of Analog Filters" (2001), and Huelsman,
           "Active and Passive Analog Filter Design" (1993), normalized sensitivities
           S = (dF/F)/(dx/x) - from memory [M], tests/REFERENCES.md section 6: unity-gain
           Sallen-Key S(w0, each R, C) = -1/2, S(Q, C1) = +1/2, S(Q, C2) = -1/2,
           S(Q, R1) = (R2 - R1)/(2(R1 + R2)); equal-component Sallen-Key S(Q, K) = K/(3 - K).
  [SK]     Sallen-Key low-pass with gain K: w0 = 1/sqrt(R1R2C1C2),
           Q = sqrt(R1R2C1C2)/[C2(R1+R2) + R1C1(1-K)], K = 1 + RF/RG (tests/REFERENCES.md section 6,
           after Karki TI SLOA024, equation numbers from memory [M], re-derived [D]).
           Derived here [D] by differentiating: S(Q, R2) = (R1 - R2)/(2(R1 + R2)); for equal
           components S(Q, R1) = 1/2 - (2-K)/(3-K), S(Q, R2) = 1/2 - 1/(3-K),
           S(Q, C1) = 1/2 - (1-K)/(3-K), S(Q, C2) = 1/2 - 2/(3-K); S(w0, RF) = S(w0, RG) = 0;
           chain rule: dK/K = (K-1)/K dRF/RF, so S(Q, K) = S(Q, RF) K/(K-1), S(Q, RG) = -S(Q, RF).
  [RC]     first-order RC low-pass, fc = 1/(2 pi R C): S(fc, R) = S(fc, C) = -1 (from memory).
  [GUM]    product of powers, (u_c/y)^2 = sum (p_i u(x_i)/x_i)^2 (JCGM 100:2008 5.1.6, from
           memory [M]): for ln fc = -ln R - ln C + const the variance shares are
           s_R^2/(s_R^2 + s_C^2) and s_C^2/(s_R^2 + s_C^2) - 0.2 and 0.8 for 1 % and 2 %.
  [GRADE]  a tolerance read as two standard deviations (coverage factor 2, common practice).
  [CHEB]   doubly terminated Chebyshev ladder, closed-form element values (Matthaei, Young &
           Jones 1964; Williams & Taylor, "Electronic Filter Design Handbook" - from memory
           [M]): beta = ln coth(A/17.37), gamma = sinh(beta/(2n)), a_k = sin((2k-1)pi/(2n)),
           b_k = gamma^2 + sin^2(k pi/n), g_1 = 2 a_1/gamma, g_k = 4 a_(k-1) a_k/(b_(k-1) g_(k-1));
           tabulated for 0.5 dB, n = 5: 1.7058 1.2296 2.5408 1.2296 1.7058 (from memory).
           Poles: s_k = -sinh(u) sin(theta_k) + j cosh(u) cos(theta_k), u = asinh(1/eps)/n,
           theta_k = (2k-1)pi/(2n), eps = sqrt(10^(A/10) - 1); ripple peaks (|T_n| = 0) at
           Omega = cos(theta_k) (from memory); checked here against scipy.signal.cheby1.
  [ORCH]   H. J. Orchard, "Inductorless filters", Electronics Letters 2(6), 1966 (from memory
           [M], tests/REFERENCES.md section 6): at frequencies of maximum power transfer the
           first-order sensitivity of the gain of a doubly terminated lossless ladder to every
           L and C is zero.
  [MPT]    maximum power transfer (elementary circuit theory, from memory): with source and load
           resistances RS, RL, |H|^2 <= RL/(4 RS), equal at a frequency of full transfer; moving
           RL by a small factor keeps the transfer full to first order, so there
           d(20 log10|H|)/d ln RL = +10/ln 10 and d/d ln RS = -10/ln 10 (dB per unit ln) [D].
  [CHAIN]  the ladder's voltage transfer from ABCD (chain) matrices, typed here: series Z
           [[1, Z], [0, 1]], shunt Y [[1, 0], [Y, 1]], H = RL / (A RL + B) with the source
           resistance as the first series element (elementary two-port theory, from memory).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.optimize
import scipy.signal

from tolspread.budget import sensitivities, spread_budget
from tolspread.evaluate import evaluate, prepare

from designs import parts_design  # shared builder: tests/designs.py

TWO_PI = 2 * math.pi
DB_PER_LN = 10 / math.log(10)  # 4.3429 dB: d(10 log10 x)/d ln x


make_design = parts_design  # tests/designs.py: parts [(ref, value, grade)], 10 Hz to 1 MHz


def sk_design(r1, r2, c1, c2, rf=None, rg=None):
    parts = [("R1", r1, "EXACT"), ("R2", r2, "EXACT"), ("C1", c1, "EXACT"), ("C2", c2, "EXACT")]
    roles = {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2"}
    gain = "unity"
    if rf is not None:
        parts += [("RF", rf, "EXACT"), ("RG", rg, "EXACT")]
        roles.update(RF="RF", RG="RG")
        gain = "resistors"
    return make_design(parts, [{"topology": "sallen_key_lowpass", "options": {"gain": gain},
                                "parts": roles}])


def by_ref(design, vec):
    return {p.ref: float(x) for p, x in zip(design.parts, vec)}


# --- Sallen-Key and RC sensitivities ------------------------------------------------------

S_TOL = 1e-6  # central difference of +-1e-4 in ln(value): truncation error ~1e-8 here


def test_unity_gain_sallen_key_sensitivities():
    r1, r2, c1, c2 = 4.7e3, 12e3, 33e-9, 6.8e-9  # R1 != R2 so S(Q, R1) is not zero
    d = sk_design(r1, r2, c1, c2)
    s = sensitivities(prepare(d), ["s1.f0_hz", "s1.q"])
    w0 = by_ref(d, s["s1.f0_hz"])
    q = by_ref(d, s["s1.q"])
    for ref in ("R1", "R2", "C1", "C2"):
        assert w0[ref] == pytest.approx(-0.5, abs=S_TOL)  # [SVV]
    assert q["C1"] == pytest.approx(0.5, abs=S_TOL)  # [SVV]
    assert q["C2"] == pytest.approx(-0.5, abs=S_TOL)  # [SVV]
    assert q["R1"] == pytest.approx((r2 - r1) / (2 * (r1 + r2)), abs=S_TOL)  # [SVV] 0.2186
    assert q["R2"] == pytest.approx((r1 - r2) / (2 * (r1 + r2)), abs=S_TOL)  # [SK] [D]


@pytest.mark.parametrize("k", [1.5, 2.0, 2.5])
def test_equal_component_sallen_key_gain_sensitivity(k):
    r, c, rg = 10e3, 10e-9, 10e3
    d = sk_design(r, r, c, c, rf=(k - 1) * rg, rg=rg)
    s = sensitivities(prepare(d), ["s1.f0_hz", "s1.q"])
    q = by_ref(d, s["s1.q"])
    w0 = by_ref(d, s["s1.f0_hz"])
    # [SVV] S(Q, K) = K/(3 - K) through the chain rule [SK]
    assert q["RF"] * k / (k - 1) == pytest.approx(k / (3 - k), rel=1e-5)
    assert q["RG"] == pytest.approx(-q["RF"], rel=1e-6)
    # [SK] [D] the other parts
    assert q["R1"] == pytest.approx(0.5 - (2 - k) / (3 - k), abs=1e-5)
    assert q["R2"] == pytest.approx(0.5 - 1 / (3 - k), abs=1e-5)
    assert q["C1"] == pytest.approx(0.5 - (1 - k) / (3 - k), abs=1e-5)
    assert q["C2"] == pytest.approx(0.5 - 2 / (3 - k), abs=1e-5)
    for ref in ("R1", "R2", "C1", "C2"):
        assert w0[ref] == pytest.approx(-0.5, abs=S_TOL)
    assert w0["RF"] == pytest.approx(0.0, abs=S_TOL)
    assert w0["RG"] == pytest.approx(0.0, abs=S_TOL)


def rc_design(grades=(("R-g2", "C-g4"))):
    return make_design(
        [("R1", 10e3, grades[0]), ("C1", 10e-9, grades[1])],
        [{"topology": "rc_lowpass", "options": {"sections": 1}, "parts": {"R1": "R1", "C1": "C1"}}],
        analysis={"f_start": 10, "f_stop": 1e5, "points": 60},
        grades=[{"name": "R-g2", "kind": "R", "tolerance_pct": 2, "truncate": False},
                {"name": "C-g4", "kind": "C", "tolerance_pct": 4, "truncate": False}])


def test_first_order_rc_sensitivities():
    d = rc_design(("EXACT", "EXACT"))
    s = sensitivities(prepare(d), ["cutoff_hz", "s1.fc_hz"])
    for name in ("cutoff_hz", "s1.fc_hz"):
        assert s[name] == pytest.approx([-1.0, -1.0], abs=S_TOL)  # [RC]


# --- the spread budget -------------------------------------------------------------------

def test_rc_budget_shares_follow_the_variances():
    d = rc_design()  # sigma_R = 1 %, sigma_C = 2 % [GRADE]
    prep = prepare(d)
    ens = evaluate(d, samples=20000, seed=8080, curves=False, prepared=prep)
    b = spread_budget(ens, prep, names=["cutoff_hz"])["cutoff_hz"]
    share = {e.ref: e.share for e in b.entries}
    # [GUM] 0.2 and 0.8. Sampling error: the shares are ratios of sample variances at
    # N = 20000, standard deviation ~0.0025 (delta method, from memory); bound 0.015 (6 sd).
    assert share["R1"] == pytest.approx(0.2, abs=0.015)
    assert share["C1"] == pytest.approx(0.8, abs=0.015)
    assert [e.ref for e in b.entries] == ["C1", "R1"]  # largest share first
    # ln fc is exactly linear in ln R and ln C: nothing is left to curvature; the sample
    # covariance of R and C (~1/sqrt(N) correlation) is all that can show up: bound 0.02
    assert 0 <= b.remainder < 0.02
    assert b.samples == 20000
    # on these very boards: share = var(ln x_i)/var(ln fc) (slope exactly -1)
    x = np.log(ens.values / prep.nominal.values)
    var_y = np.var(np.log(ens.metrics["cutoff_hz"]))
    assert share["R1"] == pytest.approx(np.var(x[:, 0]) / var_y, abs=1e-4)
    assert share["C1"] == pytest.approx(np.var(x[:, 1]) / var_y, abs=1e-4)
    for e in b.entries:
        assert e.sensitivity == pytest.approx(-1.0, abs=S_TOL)  # [RC]
        assert e.sensitivity_unit == "ln/ln"


def test_budget_of_an_exact_part_is_zero():
    # a part without spread explains none of the variance (and the fit stays defined)
    d = rc_design(("EXACT", "C-g4"))
    prep = prepare(d)
    ens = evaluate(d, samples=4000, seed=5, curves=False, prepared=prep)
    b = spread_budget(ens, prep, names=["cutoff_hz"])["cutoff_hz"]
    share = {e.ref: e.share for e in b.entries}
    assert share["R1"] == 0.0
    assert share["C1"] == pytest.approx(1.0, abs=1e-6)


# --- Orchard: a doubly terminated ladder is insensitive at its ripple peaks --------------

N_ORDER, RIPPLE_DB = 5, 0.5
R0, FP = 1000.0, 10e3  # terminations (ohm) and ripple edge (Hz), Omega = 1 at FP
WP = TWO_PI * FP


def chebyshev_g(n: int, ripple_db: float) -> list[float]:
    """[CHEB] element values, equal terminations (odd n)."""
    beta = math.log(1 / math.tanh(ripple_db / (40 / math.log(10))))  # 17.37 = 40/ln 10
    gam = math.sinh(beta / (2 * n))
    a = [math.sin((2 * k - 1) * math.pi / (2 * n)) for k in range(1, n + 1)]
    b = [gam ** 2 + math.sin(k * math.pi / n) ** 2 for k in range(1, n + 1)]
    g = [2 * a[0] / gam]
    for k in range(2, n + 1):
        g.append(4 * a[k - 2] * a[k - 1] / (b[k - 2] * g[k - 2]))
    return g


def ladder_values() -> dict[str, float]:
    g = chebyshev_g(N_ORDER, RIPPLE_DB)
    return {"RS": R0, "C1": g[0] / (R0 * WP), "L2": g[1] * R0 / WP, "C3": g[2] / (R0 * WP),
            "L4": g[3] * R0 / WP, "C5": g[4] / (R0 * WP), "RL": R0}


def chain_gain_db(v: dict[str, float], f: float) -> float:
    """[CHAIN] 20 log10 |V_out/V_in| of RS, shunt C1, series L2, shunt C3, series L4,
    shunt C5, load RL."""
    s = 1j * TWO_PI * f
    m = np.eye(2, dtype=complex)
    for kind, x in (("z", v["RS"]), ("y", s * v["C1"]), ("z", s * v["L2"]), ("y", s * v["C3"]),
                    ("z", s * v["L4"]), ("y", s * v["C5"])):
        e = np.array([[1, x], [0, 1]]) if kind == "z" else np.array([[1, 0], [x, 1]])
        m = m @ e
    h = v["RL"] / (m[0, 0] * v["RL"] + m[0, 1])
    return float(20 * np.log10(abs(h)))


def ripple_peaks(v: dict[str, float]) -> list[float]:
    """The two ripple peaks above DC, found numerically on the nominal [CHAIN] response
    (maximize in log f inside brackets around the expected places)."""
    out = []
    for k in (1, 2):
        guess = FP * math.cos((2 * k - 1) * math.pi / (2 * N_ORDER))
        r = scipy.optimize.minimize_scalar(
            lambda lf: -chain_gain_db(v, math.exp(lf)),
            bounds=(math.log(guess * 0.97), math.log(guess * 1.03)), method="bounded",
            options={"xatol": 1e-12})
        out.append(math.exp(r.x))
    return out


def peak_mask(peaks):
    # tiny absolute floor spans at the peaks; -6.5 dB keeps every margin positive
    return [{"name": f"peak {i}", "kind": "floor", "f1": f, "f2": f * (1 + 1e-9), "limit1": -6.5}
            for i, f in enumerate(peaks)]


def test_chebyshev_element_values_match_the_table():
    g = chebyshev_g(N_ORDER, RIPPLE_DB)
    assert g == pytest.approx([1.7058, 1.2296, 2.5408, 1.2296, 1.7058], abs=1e-4)  # [CHEB]


def test_orchard_zero_sensitivity_at_the_ripple_peaks():
    v = ladder_values()
    peaks = ripple_peaks(v)
    half_db = 20 * math.log10(0.5)  # -6.0206 dB: full power transfer, equal terminations
    for k, f in enumerate(peaks, 1):
        assert f == pytest.approx(FP * math.cos((2 * k - 1) * math.pi / (2 * N_ORDER)), rel=1e-6)
        assert chain_gain_db(v, f) == pytest.approx(half_db, abs=1e-9)
    d = make_design([(r, x, "EXACT") for r, x in v.items()],
                    [{"topology": "lc_lowpass", "options": {"order": 5, "first": "shunt"},
                      "parts": {r: r for r in v}}],
                    peak_mask(peaks), {"f_start": 100, "f_stop": 1e6, "points": 200})
    prep = prepare(d)
    # the library's ladder is the [CHAIN] ladder: margins -6.0206 + 6.5 dB at both peaks
    assert prep.nominal.margins == pytest.approx([half_db + 6.5] * 2, abs=1e-9)
    names = [f"margin.peak {i}" for i in range(len(peaks))]
    s = sensitivities(prep, names)
    for name in names:
        sv = by_ref(d, s[name])  # dB per 1 %
        for ref in ("C1", "L2", "C3", "L4", "C5"):
            assert abs(sv[ref]) < 1e-6, (name, ref, sv[ref])  # [ORCH]
        # the terminations are not covered by [ORCH]: [MPT] gives +-4.343 dB per unit ln
        assert sv["RL"] == pytest.approx(DB_PER_LN / 100, rel=1e-5)
        assert sv["RS"] == pytest.approx(-DB_PER_LN / 100, rel=1e-5)
        # and [CHAIN] by its own central difference on a 1e-4 step agrees for RL
        up, down = dict(v), dict(v)
        f = peaks[int(name[-1])]
        up["RL"] *= math.exp(1e-4)
        down["RL"] *= math.exp(-1e-4)
        num = (chain_gain_db(up, f) - chain_gain_db(down, f)) / 2e-4 / 100
        assert sv["RL"] == pytest.approx(num, rel=1e-5)


def cascade_parts():
    """An active cascade with the ladder's poles [CHEB]: one unity-gain Sallen-Key stage per
    complex pole pair (R1 = R2 = R, C2 = C, C1 = 4 Q^2 C, R = 1/(2 Q C w0), from [SK]) and a
    first-order RC section R C = 1/sigma for the real pole."""
    eps = math.sqrt(10 ** (RIPPLE_DB / 10) - 1)
    u = math.asinh(1 / eps) / N_ORDER
    th = [(2 * k - 1) * math.pi / (2 * N_ORDER) for k in range(1, N_ORDER + 1)]
    poles = [complex(-math.sinh(u) * math.sin(t), math.cosh(u) * math.cos(t)) for t in th]
    ref = scipy.signal.cheby1(N_ORDER, RIPPLE_DB, 1.0, analog=True, output="zpk")[1]
    assert sorted(poles, key=lambda p: (p.real, p.imag)) == pytest.approx(
        sorted(ref, key=lambda p: (p.real, p.imag)), abs=1e-12)
    c = 10e-9
    parts, stages = [], []
    for i, p in enumerate(poles[:2], 1):  # the upper-half-plane poles of the two pairs
        w0 = abs(p) * WP
        q = abs(p) / (2 * -p.real)
        r = 1 / (2 * q * c * w0)
        vals = {"R1": r, "R2": r, "C1": 4 * q * q * c, "C2": c}
        parts += [(f"{role}_{i}", x, "EXACT") for role, x in vals.items()]
        stages.append({"topology": "sallen_key_lowpass", "options": {"gain": "unity"},
                       "parts": {role: f"{role}_{i}" for role in vals}})
    sigma = -poles[2].real * WP
    parts += [("R_3", 1 / (c * sigma), "EXACT"), ("C_3", c, "EXACT")]
    stages.append({"topology": "rc_lowpass", "options": {"sections": 1},
                   "parts": {"R1": "R_3", "C1": "C_3"}})
    return parts, stages


def test_active_cascade_of_the_same_response_is_sensitive_at_the_peaks():
    v = ladder_values()
    peaks = ripple_peaks(v)
    parts, stages = cascade_parts()
    d = make_design(parts, stages, peak_mask(peaks), {"f_start": 100, "f_stop": 1e6, "points": 200})
    prep = prepare(d)
    # same response as the ladder, 6.0206 dB higher (no terminations): 0 dB at the peaks
    i = [int(np.flatnonzero(prep.freqs_hz == f)[0]) for f in peaks]
    g = 10 * np.log10(prep.nominal.response.gain2[0, i])
    assert g == pytest.approx([chain_gain_db(v, f) - 20 * math.log10(0.5) for f in peaks], abs=1e-9)
    for f in (1e3, 5e3, 12e3, 30e3):
        idx = np.searchsorted(prep.freqs_hz, f)
        ff = float(prep.freqs_hz[idx])
        got = 10 * math.log10(prep.nominal.response.gain2[0, idx])
        assert got == pytest.approx(chain_gain_db(v, ff) - 20 * math.log10(0.5), abs=1e-8)
    names = [f"margin.peak {i}" for i in range(len(peaks))]
    s = sensitivities(prep, names)
    for name in names:
        sv = np.abs(s[name])
        # every part of the cascade moves the gain at the peaks by more than 1e-3 dB per %
        # (measured when written: 0.068 to 0.16 at the upper peak, 0.009 to 0.063 at the lower)
        assert sv.min() > 1e-3, (name, by_ref(d, s[name]))


def test_largest_remainder_rounding_adds_to_exactly_100():
    from tolspread.budget import largest_remainder

    # Hare's largest-remainder method (common practice in seat apportionment): three equal
    # thirds round to 33.4 + 33.3 + 33.3; plain rounding would give 99.9
    assert largest_remainder([1, 1, 1], 100.0, 1) == [33.4, 33.3, 33.3]
    rng = np.random.default_rng(5)
    for _ in range(200):
        v = list(rng.random(rng.integers(2, 9)) ** 3)
        got = largest_remainder(v, 100.0, 1)
        exact = [100 * x / sum(v) for x in v]
        assert math.fsum(got) == pytest.approx(100.0, abs=1e-9)
        assert all(abs(g - e) < 0.1 + 1e-9 for g, e in zip(got, exact))


def test_budget_shares_and_remainder_add_to_one_and_round_to_100():
    from tolspread.designfile import load_demo

    demo = load_demo()
    prep = prepare(demo)
    ens = evaluate(demo, samples=3000, seed=3, curves=False, prepared=prep)
    for b in spread_budget(ens, prep).values():
        total = math.fsum(e.share for e in b.entries) + b.remainder
        if total:
            assert total == pytest.approx(1.0, abs=1e-12), b.metric
            assert math.fsum(v for _, v in b.rounded_percent(3)) == pytest.approx(100.0, abs=1e-9)
