"""Filter synthesis: prototype sections, synthesized designs, op-amp gain-bandwidth checks,
and ``tolspread design``.

References named beside each check. tests/REFERENCES.md tags: [C] confirmed in a stored copy
of the published document, [M] from memory (not confirmed), [D] derived by computation.
The prototype table is tests/REFERENCES.md section 5: Carter & Mancini, Op Amps for Everyone,
5th ed., section 16.9, Table 16.6 (Bessel) and 16.7 (Butterworth) [C]; the Chebyshev rows
are [D + M]. scipy.signal is the reference library for poles and responses.
"""
from __future__ import annotations

import argparse
import math

import numpy as np
import pytest
from scipy import optimize, signal

from tolspread.app.cli_design import add_parser, run
from tolspread.analysis import analyze
from tolspread.design import design_from_dict
from tolspread.designfile import dumps, load, loads
from tolspread.engine import compile_design, frequency_response, stage_coefficients
from tolspread.errors import InputError
from tolspread.evaluate import evaluate, prepare
from tolspread.component_values import section_values
from tolspread.opamp_check import GbwWarning, gbw_warnings, opamp_shift_table
from tolspread.prototypes import prototype_sections
from tolspread.synthesis import synthesize
from tolspread.values import E_SERIES

TWO_PI = 2 * math.pi
HALF_POWER_DB = 10 * math.log10(2)

# tests/REFERENCES.md section 5: sections 1 + a s + b s^2 (first order: ("a", a)), table order.
# Butterworth and Bessel: Carter & Mancini Tables 16.7 / 16.6 [C]; Chebyshev [D + M].
TABLE = {
    ("butterworth", 2, None): [(1.4142, 1.0)],
    ("butterworth", 4, None): [(1.8478, 1.0), (0.7654, 1.0)],
    ("butterworth", 5, None): [("a", 1.0), (1.6180, 1.0), (0.6180, 1.0)],
    ("butterworth", 6, None): [(1.9319, 1.0), (1.4142, 1.0), (0.5176, 1.0)],
    ("bessel", 2, None): [(1.3617, 0.6180)],
    ("bessel", 3, None): [("a", 0.7560), (0.9996, 0.4772)],
    ("bessel", 4, None): [(1.3397, 0.4889), (0.7743, 0.3890)],
    ("bessel", 5, None): [("a", 0.6656), (1.1402, 0.4128), (0.6216, 0.3245)],
    ("bessel", 6, None): [(1.2217, 0.3887), (0.9686, 0.3505), (0.5131, 0.2756)],
    ("chebyshev", 2, 0.5): [(1.3614, 1.3827)],
    ("chebyshev", 4, 0.5): [(2.6282, 3.4341), (0.3648, 1.1509)],
    ("chebyshev", 5, 0.5): [("a", 2.9235), (1.3025, 2.3534), (0.2290, 1.0833)],
    ("chebyshev", 2, 1.0): [(1.3022, 1.5515)],
    ("chebyshev", 4, 1.0): [(2.5904, 4.1301), (0.3039, 1.1697)],
    ("chebyshev", 5, 1.0): [("a", 3.5711), (1.1280, 2.4896), (0.1872, 1.0814)],
    ("chebyshev", 2, 3.0): [(1.0650, 1.9305)],
    ("chebyshev", 4, 3.0): [(2.1853, 5.5339), (0.1964, 1.2009)],
}
# The table's Q column, same source and tags.
TABLE_Q = {
    ("butterworth", 2, None): [0.7071], ("butterworth", 4, None): [0.5412, 1.3066],
    ("butterworth", 5, None): [0.6180, 1.6180], ("butterworth", 6, None): [0.5176, 0.7071, 1.9319],
    ("bessel", 2, None): [0.5774], ("bessel", 3, None): [0.6910], ("bessel", 4, None): [0.5219, 0.8055],
    ("bessel", 5, None): [0.5635, 0.9165], ("bessel", 6, None): [0.5103, 0.6112, 1.0233],
    ("chebyshev", 2, 0.5): [0.8637], ("chebyshev", 4, 0.5): [0.7051, 2.9406],
    ("chebyshev", 5, 0.5): [1.1778, 4.5450], ("chebyshev", 2, 1.0): [0.9565],
    ("chebyshev", 4, 1.0): [0.7845, 3.5590], ("chebyshev", 5, 1.0): [1.3988, 5.5564],
    ("chebyshev", 2, 3.0): [1.3047], ("chebyshev", 4, 3.0): [1.0765, 5.5789],
}


# --- helpers (independent of tolspread.synthesis) ----------------------------------------

def scipy_prototype(response: str, order: int, ripple: float | None):
    """Normalized low-pass zpk straight from scipy.signal; Chebyshev scaled so that |H|^2 is
    half the DC value at Omega = 1, the scale found here by root finding on scipy's own
    response (not by the closed form the module uses)."""
    if response == "butterworth":
        return signal.butter(order, 1.0, analog=True, output="zpk")
    if response == "bessel":
        return signal.bessel(order, 1.0, analog=True, norm="mag", output="zpk")
    z, p, k = signal.cheby1(order, ripple, 1.0, analog=True, output="zpk")
    wc = chebyshev_omega_c(order, ripple)
    return z, p / wc, k / wc ** order


def chebyshev_omega_c(order: int, ripple: float) -> float:
    z, p, k = signal.cheby1(order, ripple, 1.0, analog=True, output="zpk")
    dc2 = abs(signal.freqs_zpk(z, p, k, worN=[0.0])[1][0]) ** 2

    def f(w: float) -> float:
        return abs(signal.freqs_zpk(z, p, k, worN=[w])[1][0]) ** 2 / dc2 - 0.5

    return optimize.brentq(f, 1.0, 3.0, xtol=1e-15, rtol=4 * np.finfo(float).eps)


def pairs_from_poles(p: np.ndarray) -> tuple[list[float], list[tuple[float, float]]]:
    """Real poles' magnitudes and complex pairs (w0, Q) sorted by Q."""
    p = np.asarray(p, dtype=complex)
    real = sorted(float(-x.real) for x in p if abs(x.imag) <= 1e-9 * abs(x))
    pairs = sorted(((abs(x), abs(x) / (-2 * x.real)) for x in p if x.imag > 1e-9 * abs(x)),
                   key=lambda t: t[1])
    return real, pairs


def values_by_role(design, k: int) -> dict[str, float]:
    vals = {p.ref: p.value for p in design.parts}
    return {role: vals[ref] for role, ref in design.stages[k].roles.items()}


def sk_lowpass_closed_form(v: dict[str, float]) -> tuple[float, float]:
    """f0 (Hz), Q of a unity-gain Sallen-Key low-pass: tests/REFERENCES.md section 6 (Karki,
    SLOA024 [M for equation numbers], re-derived by nodal analysis [D])."""
    prod = v["R1"] * v["R2"] * v["C1"] * v["C2"]
    return 1 / (TWO_PI * math.sqrt(prod)), math.sqrt(prod) / (v["C2"] * (v["R1"] + v["R2"]))


def engine_gain_db(design, f_hz: np.ndarray) -> np.ndarray:
    circuit = compile_design(design)
    coeffs = stage_coefficients(circuit, np.array([[p.value for p in design.parts]]))
    resp = frequency_response(circuit, coeffs, np.asarray(f_hz, dtype=float), phase=False)
    return resp.gain_db[0]


def scipy_gain_db(z, p, k, f_hz: np.ndarray) -> np.ndarray:
    return 20 * np.log10(np.abs(signal.freqs_zpk(z, p, k, worN=TWO_PI * np.asarray(f_hz))[1]))


# --- prototype sections ----------------------------------------------------------------

@pytest.mark.parametrize("key", list(TABLE), ids=lambda k: f"{k[0]}-{k[1]}-{k[2]}")
def test_sections_match_published_table(key):
    # tests/REFERENCES.md section 5 table (source and tag per family: see TABLE above); the
    # table has 4 decimals, so a and b agree within 1e-4 and Q within rtol 2e-3.
    response, order, ripple = key
    got = prototype_sections(response, order, ripple)
    assert len(got) == len(TABLE[key])
    for sec, row in zip(got, TABLE[key]):
        if row[0] == "a":
            assert sec.q is None
            assert sec.a == pytest.approx(row[1], abs=1e-4)  # first order: a = 1/f0
        else:
            a, b = row
            assert sec.a == pytest.approx(a, abs=1e-4)
            assert sec.b == pytest.approx(b, abs=1e-4)
            assert 1 / math.sqrt(sec.b) == pytest.approx(sec.f0_norm, rel=1e-12)  # f0 = 1/sqrt(b)
            assert math.sqrt(b) / a == pytest.approx(sec.q, rel=2e-3)             # Q = sqrt(b)/a
    qs = [s.q for s in got if s.q is not None]
    assert qs == pytest.approx(TABLE_Q[key], rel=2e-3)


@pytest.mark.parametrize("response,order,ripple", [
    ("butterworth", n, None) for n in (1, 2, 3, 5, 8, 10)] + [
    ("bessel", n, None) for n in (1, 2, 4, 7, 10)] + [
    ("chebyshev", n, r) for n, r in ((1, 1.0), (2, 0.1), (3, 2.0), (6, 0.5), (9, 3.0), (10, 1.0))])
def test_sections_match_scipy_poles(response, order, ripple):
    # scipy.signal reference library: poles recomputed here, paired, sorted by Q (rtol 1e-9)
    _, p, _ = scipy_prototype(response, order, ripple)
    real, pairs = pairs_from_poles(p)
    got = prototype_sections(response, order, ripple)
    first = [s for s in got if s.q is None]
    second = [s for s in got if s.q is not None]
    assert [s.f0_norm for s in first] == pytest.approx(real, rel=1e-9)
    assert [s.f0_norm for s in second] == pytest.approx([w for w, _ in pairs], rel=1e-9)
    assert [s.q for s in second] == pytest.approx([q for _, q in pairs], rel=1e-9)
    # order: the first-order section first, then ascending Q (the documented rule)
    assert all(s.q is None for s in got[:len(first)])
    assert [s.q for s in second] == sorted(s.q for s in second)


@pytest.mark.parametrize("response,order,ripple", [("butterworth", 3, None), ("bessel", 6, None),
                                                   ("chebyshev", 4, 0.5), ("chebyshev", 5, 2.0)])
def test_prototype_is_half_power_at_omega_one(response, order, ripple):
    # The stated normalization: |H(j1)|^2 = |H(0)|^2 / 2 (tests/REFERENCES.md section 5 convention),
    # computed from the sections alone.
    secs = prototype_sections(response, order, ripple)
    h0 = h1 = 1.0
    for s in secs:
        h1 *= abs(1 / (1 + s.a * 1j - s.b)) ** 2
    assert h1 / h0 == pytest.approx(0.5, rel=1e-12)


def test_linkwitz_riley_4_is_butterworth_2_squared():
    # Common practice: LR4 = two cascaded Butterworth 2 sections; BW2 Q = 0.7071 (table [C])
    secs = prototype_sections("linkwitz_riley", 4)
    assert [s.f0_norm for s in secs] == pytest.approx([1.0, 1.0], rel=1e-12)
    assert [s.q for s in secs] == pytest.approx([0.7071, 0.7071], rel=1e-4)
    # LR2 = Butterworth 1 squared: one section with a double real pole, Q = 1/2 (common practice)
    (only,) = prototype_sections("linkwitz_riley", 2)
    assert only.q == pytest.approx(0.5, rel=1e-12)


@pytest.mark.parametrize("kwargs,path", [
    (dict(response="cauer", order=4), "response"),
    (dict(response="elliptic", order=4, stopband_db=40.0), "ripple_db"),
    (dict(response="elliptic", order=4, ripple_db=0.5), "stopband_db"),
    (dict(response="elliptic", order=4, ripple_db=0.5, stopband_db=5.0), "stopband_db"),
    (dict(response="inverse_chebyshev", order=4, stopband_db=200.0), "stopband_db"),
    (dict(response="inverse_chebyshev", order=4, ripple_db=0.5, stopband_db=40.0), "ripple_db"),
    (dict(response="butterworth", order=4, stopband_db=40.0), "stopband_db"),
    (dict(response="elliptic", order=1, ripple_db=0.5, stopband_db=40.0), "order"),
    (dict(response="inverse_chebyshev", order=1, stopband_db=40.0), "order"),
    (dict(response="butterworth", order=0), "order"),
    (dict(response="butterworth", order=11), "order"),
    (dict(response="linkwitz_riley", order=3), "order"),
    (dict(response="chebyshev", order=3), "ripple_db"),
    (dict(response="chebyshev", order=3, ripple_db=0.25), "ripple_db"),
    (dict(response="bessel", order=3, ripple_db=1.0), "ripple_db"),
])
def test_prototype_bad_input(kwargs, path):
    with pytest.raises(InputError) as exc:
        prototype_sections(**kwargs)
    assert exc.value.path == path


# --- synthesized designs against scipy.signal ------------------------------------------

def _scipy_target(response, order, fc, kind, ripple, bw=None):
    """The target filter from scipy.signal's own design functions."""
    if response == "chebyshev":
        wc = chebyshev_omega_c(order, ripple)
    if kind == "bandpass":
        w0, b = TWO_PI * fc, TWO_PI * bw
        if response == "chebyshev":
            b = b / wc   # scipy's band edges are ripple edges
        w2 = 0.5 * b + math.sqrt(0.25 * b * b + w0 * w0)
        wn = [w0 * w0 / w2, w2]
    elif response == "chebyshev":
        wn = TWO_PI * fc / wc if kind == "lowpass" else TWO_PI * fc * wc
    else:
        wn = TWO_PI * fc
    if response == "butterworth":
        return signal.butter(order, wn, btype=kind, analog=True, output="zpk")
    if response == "bessel":
        return signal.bessel(order, wn, btype=kind, analog=True, norm="mag", output="zpk")
    return signal.cheby1(order, ripple, wn, btype=kind, analog=True, output="zpk")


CASES = [
    ("butterworth", 4, 2000.0, "lowpass", None, None, None),
    ("butterworth", 7, 50.0, "lowpass", "mfb_lowpass", None, None),
    ("bessel", 5, 10e3, "lowpass", None, None, None),
    ("chebyshev", 4, 1000.0, "lowpass", None, 1.0, None),
    ("chebyshev", 5, 3000.0, "lowpass", "mfb_lowpass", 0.5, None),
    ("butterworth", 3, 100.0, "highpass", None, None, None),
    ("bessel", 4, 1e4, "highpass", "mfb_highpass", None, None),
    ("chebyshev", 5, 500.0, "highpass", "mfb_highpass", 3.0, None),
    ("butterworth", 2, 1000.0, "bandpass", None, None, 200.0),
    ("bessel", 3, 5000.0, "bandpass", None, None, 4000.0),
    ("chebyshev", 4, 1e4, "bandpass", None, 0.5, 1500.0),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: f"{c[0]}{c[1]}-{c[3]}-{c[4] or 'default'}")
def test_unsnapped_design_reproduces_scipy_response(case):
    # scipy.signal reference (butter/bessel/cheby1 at the cutoff, freqs_zpk): with exact
    # resistors the design's response has the prototype's shape within 1e-9 dB.
    response, order, fc, kind, topology, ripple, bw = case
    res = synthesize(response, order, fc, kind=kind, topology=topology, ripple_db=ripple,
                     bandwidth_hz=bw, snap=False)
    a = res.design.analysis
    f = np.geomspace(a.f_start, a.f_stop, 300)
    i0 = int(np.argmin(np.abs(np.log(f / fc))))  # normalize both at one common frequency
    ours = engine_gain_db(res.design, f)
    ref = scipy_gain_db(*_scipy_target(response, order, fc, kind, ripple, bw), f)
    np.testing.assert_allclose(ours - ours[i0], ref - ref[i0], rtol=0, atol=1e-9)
    # every section as targeted, and the cutoff (band-pass: centre and bandwidth) exact
    for s in res.sections:
        assert s.unsnapped_f0_hz == pytest.approx(s.target_f0_hz, rel=1e-9)
        if s.target_q is not None:
            assert s.unsnapped_q == pytest.approx(s.target_q, rel=1e-9)
    assert res.cutoff_unsnapped_hz == pytest.approx(fc, rel=1e-9)
    assert res.cutoff_snapped_hz == pytest.approx(fc, rel=1e-9)  # snap=False: nothing snapped
    if bw is not None:
        assert res.bandwidth_unsnapped_hz == pytest.approx(bw, rel=1e-9)
    # a design nobody snapped keeps its exact values through the design file
    again = loads(dumps(res.design))
    assert [p.value for p in again.parts] == [p.value for p in res.design.parts]


def test_passband_gain_is_unity_for_lowpass_and_highpass():
    # Unity-gain Sallen-Key and gain -1 multiple-feedback sections (tests/REFERENCES.md section 6:
    # Sallen-Key DC gain K = 1; multiple-feedback DC gain -R2/R1 with R1 = R2)
    for kind, topo in (("lowpass", "sallen_key_lowpass"), ("lowpass", "mfb_lowpass"),
                       ("highpass", "sallen_key_highpass"), ("highpass", "mfb_highpass")):
        res = synthesize("butterworth", 5, 1000.0, kind=kind, topology=topo)
        ref = prepare(res.design).nominal.metrics["reference_db"]
        assert ref == pytest.approx(0.0, abs=1e-12)


def test_mfb_bandpass_sections_follow_the_closed_forms():
    # tests/REFERENCES.md section 6, multiple-feedback band-pass with C1 = C2 = C:
    # f_m = (1/2piC) sqrt((R1+R2)/(R1 R3 R2)), Q = pi f_m R3 C, A_m = -R3/(2 R1)
    res = synthesize("butterworth", 3, 2000.0, kind="bandpass", bandwidth_hz=800.0)
    rows = opamp_shift_table(res.design)
    exact = synthesize("butterworth", 3, 2000.0, kind="bandpass", bandwidth_hz=800.0, snap=False)
    for k, s in enumerate(res.sections):
        v = values_by_role(res.design, k)
        c = v["C1"]
        assert v["C2"] == c
        fm = math.sqrt((v["R1"] + v["R2"]) / (v["R1"] * v["R3"] * v["R2"])) / (TWO_PI * c)
        assert fm == pytest.approx(s.snapped_f0_hz, rel=1e-9)
        assert math.pi * fm * v["R3"] * c == pytest.approx(s.snapped_q, rel=1e-9)
        assert rows[k].gain == pytest.approx(v["R3"] / (2 * v["R1"]), rel=1e-9)
        # the documented midband gain choice of each section (exact resistors): its own loss
        # at the centre, sqrt(1 + Q^2 (fc/f0 - f0/fc)^2) for a second-order band-pass
        # (common practice), at most Q^2
        ve = values_by_role(exact.design, k)
        x = 2000.0 / s.target_f0_hz - s.target_f0_hz / 2000.0
        wanted = min(math.sqrt(1 + (s.target_q * x) ** 2), s.target_q ** 2)
        assert ve["R3"] / (2 * ve["R1"]) == pytest.approx(wanted, rel=1e-9)


def test_snapped_bandpass_report_matches_independent_evaluation():
    # Multiple-feedback band-pass, C1 = C2 = C (tests/REFERENCES.md section 6):
    # H = -(s/(R1 C)) / (s^2 + s 2/(R3 C) + (1/R1 + 1/R2)/(R3 C^2)), whose midband gain is
    # -R3/(2 R1) and Q = pi f_m R3 C as listed there. Cascade evaluated here; band edges at
    # cutoff_db below the peak (even-order Chebyshev: 3.01 + ripple dB, as documented).
    res = synthesize("chebyshev", 4, 10e3, kind="bandpass", bandwidth_hz=1500.0, ripple_db=0.5)
    assert res.cutoff_db == pytest.approx(HALF_POWER_DB + 0.5, rel=1e-12)
    stages = [values_by_role(res.design, k) for k in range(len(res.sections))]

    def g2(f: float) -> float:
        s = 1j * TWO_PI * f
        h = 1.0
        for v in stages:
            c = v["C1"]
            h *= -(s / (v["R1"] * c)) / (s * s + s * 2 / (v["R3"] * c) + (1 / v["R1"] + 1 / v["R2"]) / (v["R3"] * c * c))
        return abs(h) ** 2

    f = np.geomspace(5e3, 20e3, 20001)
    grid = np.array([g2(x) for x in f])
    i = int(np.argmax(grid))
    peak = -optimize.minimize_scalar(lambda x: -g2(x), bounds=(f[i - 1], f[i + 1]), method="bounded",
                                     options={"xatol": 1e-9}).fun
    level = peak * 10 ** (-res.cutoff_db / 10)
    above = np.nonzero(grid >= level)[0]
    lo = optimize.brentq(lambda x: g2(x) - level, f[above[0] - 1], f[above[0]], xtol=1e-10)
    hi = optimize.brentq(lambda x: g2(x) - level, f[above[-1]], f[above[-1] + 1], xtol=1e-10)
    assert res.cutoff_snapped_hz == pytest.approx(math.sqrt(lo * hi), rel=1e-8)
    assert res.bandwidth_snapped_hz == pytest.approx(hi - lo, rel=1e-7)
    assert res.bandwidth_error == pytest.approx((hi - lo) / 1500.0 - 1, rel=1e-5)


def test_snapped_report_matches_independent_evaluation():
    # The report's snapped f0, Q and cutoff against the closed forms of tests/REFERENCES.md
    # section 6 evaluated here on the design's part values (unity-gain Sallen-Key), and a
    # cutoff found by root finding on the product of those closed-form stages.
    res = synthesize("butterworth", 4, 2000.0)
    d = res.design
    assert all(p.value == pytest.approx(float(np.round(p.value / 10 ** math.floor(math.log10(p.value)), 1))
                                        * 10 ** math.floor(math.log10(p.value)), rel=1e-12)
               for p in d.parts)  # E24 and E12 values have two figures (IEC 60063, section 1 [C])
    dens = []
    for k, s in enumerate(res.sections):
        v = values_by_role(d, k)
        f0, q = sk_lowpass_closed_form(v)
        assert s.snapped_f0_hz == pytest.approx(f0, rel=1e-9)
        assert s.snapped_q == pytest.approx(q, rel=1e-9)
        dens.append((v["R1"] * v["R2"] * v["C1"] * v["C2"], v["C2"] * (v["R1"] + v["R2"])))

    def level(f: float) -> float:
        w = TWO_PI * f
        g2 = 1.0
        for b, a in dens:
            g2 /= (1 - b * w * w) ** 2 + (a * w) ** 2
        return 10 * math.log10(g2) + HALF_POWER_DB

    fc = optimize.brentq(level, 1000.0, 4000.0, xtol=1e-10)
    assert res.cutoff_snapped_hz == pytest.approx(fc, rel=1e-9)
    assert res.cutoff_error == pytest.approx(fc / 2000.0 - 1, rel=1e-6)
    assert res.cutoff_error != 0.0  # snapping to E24 moved it (it must, for these values)
    text = res.text_report()
    assert f"{100 * res.cutoff_error:+.3f}%" in text
    for s in res.sections:
        assert s.stage in text


def test_snapping_uses_the_series_and_keeps_caps_from_cap_series():
    # IEC 60063 values (tests/REFERENCES.md section 1 [C]) via tolspread.values.E_SERIES
    res = synthesize("chebyshev", 6, 7000.0, ripple_db=2.0, series="E96", cap_series="E6",
                     topology="mfb_lowpass")
    for p in res.design.parts:
        mant = p.value / 10 ** math.floor(math.log10(p.value) + 1e-12)
        table = E_SERIES["E96"] if p.kind == "R" else E_SERIES["E6"]
        assert min(abs(mant / m - 1) for m in table) < 1e-12
    # E96 steps are about 2.4 %, so a stage's f0 moves less than about 2.4 % (half steps,
    # each resistor under a square root, two resistors: common practice reasoning)
    assert max(abs(s.f0_error) for s in res.sections) < 0.025


def test_reference_designators_run_across_the_design():
    res = synthesize("butterworth", 5, 1000.0, gbw_hz=10e6)
    refs = [p.ref for p in res.design.parts]
    for letter, count in (("R", 1 + 2 * 2), ("C", 1 + 2 * 2), ("U", 2)):
        assert [r for r in refs if r[0] == letter] == [f"{letter}{i}" for i in range(1, count + 1)]
    assert res.design.stages[0].topology == "rc_lowpass"
    assert "U1" not in res.design.stages[0].roles          # the passive stage has no op-amp
    assert [s.roles["U1"] for s in res.design.stages[1:]] == ["U1", "U2"]
    assert {p.grade for p in res.design.parts} == {"R-thick-1", "C-C0G-5", "OPAMP-GBW-50"}


def test_linkwitz_riley_crossover_is_minus_6_db_and_sums_flat():
    # Common practice: a Linkwitz-Riley low-pass is -6.02 dB at the crossover, and its
    # low-pass and high-pass outputs (LR4: both non-inverting) add to a flat magnitude.
    lp = synthesize("linkwitz_riley", 4, 1000.0, snap=False)
    hp = synthesize("linkwitz_riley", 4, 1000.0, kind="highpass", snap=False)
    f = np.geomspace(10.0, 1e5, 201)
    for res in (lp, hp):
        assert engine_gain_db(res.design, np.array([1000.0]))[0] == pytest.approx(
            20 * math.log10(0.5), abs=1e-9)
        assert res.cutoff_unsnapped_hz == pytest.approx(1000.0, rel=1e-9)  # cutoff = -6 dB crossover
    total = np.zeros(f.size, dtype=complex)
    for res in (lp, hp):
        circuit = compile_design(res.design)
        coeffs = stage_coefficients(circuit, np.array([[p.value for p in res.design.parts]]))
        r = frequency_response(circuit, coeffs, f, phase=True)
        total += np.sqrt(r.gain2[0]) * np.exp(1j * np.radians(r.phase_deg[0]))
    np.testing.assert_allclose(20 * np.log10(np.abs(total)), 0.0, atol=1e-9)


@pytest.mark.parametrize("case", [CASES[0], CASES[3], CASES[6], CASES[10]],
                         ids=["bw-lp", "cheb-lp", "bessel-hp", "cheb-bp"])
def test_starting_mask_passes_nominal_with_stopband_margin_near_6_db(case):
    # Documented starting mask, from the ideal response (scipy.signal, _scipy_target): a
    # design within the error limits passes it nominally; the stopband ceiling sits the
    # rounded 6 dB above the ideal response's worst point in the span (the built one is
    # within a dB of it); the passband ceiling is the ideal peak + 0.5 dB, rounded up.
    response, order, fc, kind, topology, ripple, bw = case
    res = synthesize(response, order, fc, kind=kind, topology=topology, ripple_db=ripple, bandwidth_hz=bw,
                     series="E96")
    assert not res.exceeded
    marg = prepare(res.design).nominal.margins
    assert np.all(marg >= 0.0)
    spans = res.design.mask
    stops = [m for m, s in zip(marg, spans) if s.name.startswith("stopband")]
    assert stops and all(4.5 <= m <= 7.5 for m in stops)
    (top,) = [s for s in spans if s.name == "passband ceiling"]
    f = np.geomspace(top.f1, top.f2, 2001)
    ideal = scipy_gain_db(*_scipy_target(response, order, fc, kind, ripple, bw), f)
    ref = {"lowpass": scipy_gain_db(*_scipy_target(response, order, fc, kind, ripple, bw), np.array([1e-6 * fc]))[0],
           "highpass": scipy_gain_db(*_scipy_target(response, order, fc, kind, ripple, bw), np.array([1e6 * fc]))[0],
           "bandpass": float(np.max(ideal))}[kind]
    assert top.limit1 == pytest.approx(math.ceil(10 * (np.max(ideal) - ref + 0.5)) / 10, abs=0.1)


@pytest.mark.parametrize("kwargs,path", [
    (dict(cutoff_hz=0.0), "cutoff_hz"),
    (dict(cutoff_hz=float("nan")), "cutoff_hz"),
    (dict(kind="allpass"), "kind"),
    (dict(kind="bandpass"), "bandwidth_hz"),
    (dict(kind="bandstop"), "bandwidth_hz"),
    (dict(kind="bandstop", bandwidth_hz=100.0, topology="mfb_bandpass"), "topology"),
    (dict(response="elliptic", ripple_db=0.5, stopband_db=40.0, kind="bandpass", bandwidth_hz=100.0), "kind"),
    (dict(response="inverse_chebyshev", stopband_db=40.0, topology="sallen_key_lowpass"), "topology"),
    (dict(response="inverse_chebyshev"), "stopband_db"),
    (dict(bandwidth_hz=100.0), "bandwidth_hz"),
    (dict(topology="mfb_bandpass"), "topology"),
    (dict(series="E7"), "series"),
    (dict(cap_series="E5"), "cap_series"),
    (dict(resistor_grade="C-C0G-5"), "resistor_grade"),
    (dict(gbw_hz=-1.0), "gbw_hz"),
])
def test_synthesize_bad_input(kwargs, path):
    args = dict(response="butterworth", order=4, cutoff_hz=1000.0)
    args.update(kwargs)
    with pytest.raises(InputError) as exc:
        synthesize(**args)
    assert exc.value.path == path


# --- op-amp gain-bandwidth -------------------------------------------------------------

def _one_stage(topology: str, f0: float, q: float, gbw: float | None):
    vals = section_values(topology, f0, q)
    parts = [{"ref": r, "value": v, "grade": "EXACT"} for r, v in vals.items()]
    roles = {r: r for r in vals}
    if gbw is not None:
        parts.append({"ref": "U1", "value": gbw, "grade": "OPAMP-GBW-50"})
        roles["U1"] = "U1"
    stage = {"topology": topology, "parts": roles}
    if topology.startswith("sallen_key"):
        stage["options"] = {"gain": "unity"}
    return design_from_dict({"format": "tolspread-design", "version": 1, "parts": parts,
                             "stages": [stage], "analysis": {"f_start": f0 / 100, "f_stop": f0 * 100}})


def test_gbw_ideal_limit_and_q_enhancement():
    # Q rises as GBW falls (Q enhancement: Budak & Petrela 1972, from memory [M]); with a
    # 1e12 Hz op-amp the ideal f0 and Q come back to rtol 1e-6.
    d = _one_stage("sallen_key_lowpass", 2000.0, 2.0, None)
    (ideal,) = opamp_shift_table(d, gbw_hz=1e12)
    assert ideal.gbw_q == pytest.approx(ideal.ideal_q, rel=1e-6)
    assert ideal.gbw_f0_hz == pytest.approx(ideal.ideal_f0_hz, rel=1e-6)
    assert ideal.ideal_q == pytest.approx(2.0, rel=1e-9)
    qs = [opamp_shift_table(d, gbw_hz=g)[0].gbw_q for g in np.geomspace(1e9, 1e5, 9)]
    assert all(b > a for a, b in zip(qs, qs[1:]))
    for topo in ("mfb_lowpass", "mfb_bandpass", "sallen_key_highpass", "mfb_highpass"):
        dd = _one_stage(topo, 2000.0, 2.0, None)
        q_lo = [opamp_shift_table(dd, gbw_hz=g)[0].gbw_q for g in (1e9, 1e7, 1e6, 3e5)]
        assert all(b > a for a, b in zip(q_lo, q_lo[1:]))


def test_gbw_first_order_shift_of_unity_gain_sallen_key():
    # Derived here by nodal analysis [D] (not a published figure): a unity-gain Sallen-Key
    # low-pass with A(s) = wt/s has, to first order in w0/wt, the quadratic
    # 1 + s C2(R1+R2) + s^2 (R1R2C1C2 + R1C1/wt), so
    # Q_gbw/Q = sqrt(1 + 1/(wt R2 C2)) and f0_gbw/f0 = 1/sqrt(1 + 1/(wt R2 C2)).
    # Agreement within 3 % of the shift (the neglected terms are of order w0/wt).
    f0, q = 2000.0, 2.0
    d = _one_stage("sallen_key_lowpass", f0, q, None)
    v = values_by_role(d, 0)
    for gbw in (50e6, 5e6):
        row = opamp_shift_table(d, gbw_hz=gbw)[0]
        eps = 1 / (TWO_PI * gbw * v["R2"] * v["C2"])
        assert row.q_shift == pytest.approx(math.sqrt(1 + eps) - 1, rel=0.03)
        assert row.f0_shift == pytest.approx(1 / math.sqrt(1 + eps) - 1, rel=0.03)


def test_gbw_warnings_flag_a_slow_opamp():
    # Rule (tests/REFERENCES.md section 7 [C, secondary, after Op Amps for Everyone ch. 16]):
    # GBW >= 100 G Q f0. A unity-gain (G = 1) Q = 5 stage at 2 kHz needs 1 MHz: a 100 kHz
    # op-amp is far too slow, a 100 MHz one is fine.
    slow = gbw_warnings(_one_stage("sallen_key_lowpass", 2000.0, 5.0, 100e3))
    fast = gbw_warnings(_one_stage("sallen_key_lowpass", 2000.0, 5.0, 100e6))
    assert isinstance(slow[0], GbwWarning)
    assert slow[0].required_gbw_hz == pytest.approx(100 * 1 * 5 * 2000, rel=1e-9)
    assert slow[0].gain == pytest.approx(1.0, rel=1e-12)
    assert slow[0].too_low and not fast[0].too_low
    assert slow[0].q_shift > fast[0].q_shift > 0
    # peak gain of a Q = 5 low-pass: Q / sqrt(1 - 1/(4 Q^2)) (standard second-order result [D])
    assert slow[0].peak_gain == pytest.approx(5 / math.sqrt(1 - 1 / 100), rel=1e-4)
    # no op-amp part: nothing to warn about
    assert gbw_warnings(_one_stage("sallen_key_lowpass", 2000.0, 5.0, None)) == []


def test_synthesize_with_gbw_reports_the_slow_stage():
    # Chebyshev 1 dB order 5 at 10 kHz: its Q 5.56 stage needs 100 x 5.56 x 9.6 kHz, about
    # 5.3 MHz (rule of tests/REFERENCES.md section 7), so 1 MHz is flagged, 100 MHz is not.
    slow = synthesize("chebyshev", 5, 10e3, ripple_db=1.0, gbw_hz=1e6)
    fast = synthesize("chebyshev", 5, 10e3, ripple_db=1.0, gbw_hz=100e6)
    assert [w.too_low for w in slow.gbw] == [False, True]
    assert not any(w.too_low for w in fast.gbw)
    assert "GBW TOO LOW" in slow.text_report()
    # the op-amps lower the cutoff further than snapping alone (Q and f0 shift, [M] above)
    assert slow.cutoff_gbw_hz < slow.cutoff_snapped_hz
    assert abs(fast.cutoff_gbw_hz / fast.cutoff_snapped_hz - 1) < 1e-3


# --- the command line ------------------------------------------------------------------

def _parse(argv: list[str]) -> argparse.Namespace:
    p = argparse.ArgumentParser()
    sub = p.add_subparsers(dest="command")
    add_parser(sub)
    return p.parse_args(["design", *argv])


def test_cli_design_writes_a_design_that_analyzes(tmp_path, capsys):
    out = tmp_path / "lp.json"
    code = run(_parse(["--response", "butterworth", "--order", "4", "--cutoff", "2k", "-o", str(out)]))
    assert code == 0
    text = capsys.readouterr().out
    assert "snapped" in text and "from snapping" in text and str(out) in text
    d = load(out)
    res = synthesize("butterworth", 4, 2000.0)
    assert [p.value for p in d.parts] == [p.value for p in res.design.parts]
    result = analyze(d, samples=200, seed=3)
    assert result.samples == 200
    assert result.ensemble.nominal.metrics["cutoff_hz"] == pytest.approx(res.cutoff_snapped_hz, rel=1e-9)


def test_cli_design_bandpass_with_gbw(tmp_path, capsys):
    out = tmp_path / "bp.json"
    code = run(_parse(["--response", "bessel", "--order", "2", "--kind", "bandpass", "--cutoff", "1k",
                       "--bandwidth", "300", "--gbw", "10M", "--series", "E96", "-o", str(out)]))
    assert code == 0
    d = load(out)
    assert [s.topology for s in d.stages] == ["mfb_bandpass", "mfb_bandpass"]
    assert sum(p.kind == "opamp" for p in d.parts) == 2
    assert "with GBW" in capsys.readouterr().out


@pytest.mark.parametrize("argv,path", [
    (["--response", "butterworth", "--order", "four", "--cutoff", "1k"], "--order"),
    (["--response", "butterworth", "--order", "12", "--cutoff", "1k"], "--order"),
    (["--response", "linkwitz-riley", "--order", "3", "--cutoff", "1k"], "--order"),
    (["--response", "chebyshev", "--order", "3", "--cutoff", "1k"], "--ripple"),
    (["--response", "butterworth", "--order", "3", "--cutoff", "fast"], "--cutoff"),
    (["--response", "butterworth", "--order", "3", "--cutoff", "-5"], "--cutoff"),
    (["--response", "butterworth", "--order", "3", "--cutoff", "1k", "--kind", "bandpass"], "--bandwidth"),
    (["--response", "sinc", "--order", "3", "--cutoff", "1k"], "--response"),
    (["--response", "butterworth", "--order", "3", "--cutoff", "1k", "--series", "E7"], "--series"),
    (["--response", "butterworth", "--order", "3", "--cutoff", "1k", "--gbw", "1x"], "--gbw"),
])
def test_cli_design_bad_input_names_the_option(argv, path, tmp_path):
    out = tmp_path / "x.json"
    with pytest.raises(InputError) as exc:
        run(_parse([*argv, "-o", str(out)]))
    assert exc.value.path == path
    assert not out.exists()


def test_highpass_with_finite_gbw_keeps_a_passband_reference():
    # A single-pole op-amp (A = wt/s) rolls every active high-pass off at high frequency,
    # so the passband reference is the peak there (tolspread.metrics.reference_gain2); the
    # nominal cutoff then stays near the ideal one when the GBW is ample (ideal limit,
    # Budak & Petrela 1972, from memory).
    fast = synthesize("butterworth", 4, 1000.0, kind="highpass", gbw_hz=1e9, snap=False)
    ideal = synthesize("butterworth", 4, 1000.0, kind="highpass", snap=False)
    m_fast = evaluate(fast.design, samples=1).nominal.metrics
    m_ideal = evaluate(ideal.design, samples=1).nominal.metrics
    assert m_fast["cutoff_hz"] == pytest.approx(m_ideal["cutoff_hz"], rel=1e-4)
    assert m_fast["reference_db"] == pytest.approx(m_ideal["reference_db"], abs=1e-3)
