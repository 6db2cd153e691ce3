"""Checks of tolspread.metrics (cutoff, band edges, peaking, stage f0/Q, pole pairs,
attenuation), through tolspread.evaluate, against closed forms and reference libraries.

References used below (tags as in tests/REFERENCES.md):
  [KARKI]  J. Karki, TI SLOA024, Sallen-Key closed forms (equation numbers from memory [M];
           expressions re-derived by nodal analysis [D], REFERENCES.md section 6).
  [SLOA049] TI SLOA049, multiple-feedback low-pass and band-pass closed forms (as above).
  [CM]     Carter & Mancini, "Op Amps for Everyone", 5th ed., Table 16.7 (Butterworth) [C].
  [BW]     Butterworth attenuation 10 log10(1 + Omega^(2n)) dB [D, REFERENCES.md section 5];
           Butterworth Q_k = 1/(2 sin((2k - 1) pi/(2n))) - from memory, standard result.
  [TEXT]   standard second-order results, from memory: first-order RC corner 1/(2 pi R C);
           low-pass peaking 20 log10(Q^2 / sqrt(Q^2 - 1/4)) dB at w0 sqrt(1 - 1/(2 Q^2)) for
           Q > 1/sqrt(2); a second-order band-pass has half-power bandwidth w0/Q exactly and
           band edges geometrically symmetric about w0 (f_lo f_hi = f0^2); two equal
           unbuffered RC sections give D(s) = 1 + 3 s R C + (s R C)^2 (Q = 1/3).
  [SCIPY]  scipy.signal.butter (analog=True) - reference library.

"Half power" below is 10 log10(2) = 3.0103 dB: the closed forms above hold there exactly;
the design files' default cutoff_db of 3 dB is a slightly different level.
"""
from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from tolspread.design import design_from_dict
from tolspread.designfile import load_demo
from tolspread.engine import StageCoefficients, compile_design, frequency_response, stage_coefficients
from tolspread.evaluate import evaluate
from tolspread.metrics import attenuation_db, cutoff_metrics, pole_pairs, reference_gain2

from designs import butter_q, sk_unity  # shared builders: tests/designs.py

TWO_PI = 2 * math.pi
HALF_POWER_DB = 10 * math.log10(2)


def make(stages, analysis=None, grade="EXACT"):
    """A design from [(topology, options, {role: value})], every part of ``grade``
    (a dict role -> grade may be given per stage as a fourth item)."""
    parts, st = [], []
    for k, stage in enumerate(stages, 1):
        topo, options, vals = stage[:3]
        grades = stage[3] if len(stage) > 3 else {}
        roles = {}
        for role, v in vals.items():
            ref = f"{role}_{k}"
            parts.append({"ref": ref, "value": float(v), "grade": grades.get(role, grade)})
            roles[role] = ref
        st.append({"topology": topo, "options": options, "parts": roles})
    data = {"format": "tolspread-design", "version": 1, "parts": parts, "stages": st}
    if analysis:
        data["analysis"] = analysis
    return design_from_dict(data)


def col(ens, ref):
    return ens.values[:, ens.design.part_index(ref)]


def butter_cascade(n, fc, analysis):
    stages = [("sallen_key_lowpass", {}, sk_unity(fc, q)) for q in butter_q(n)]
    if n % 2:
        stages.insert(0, ("rc_lowpass", {"sections": 1}, {"R1": 10e3, "C1": 1 / (TWO_PI * fc * 10e3)}))
    return make(stages, analysis)


# --- low-pass and high-pass cutoffs -------------------------------------------------------

def test_first_order_rc_cutoff_every_sample():
    # source: [TEXT] fc = 1/(2 pi R C) at half power, for each sampled board's own R and C
    d = make([("rc_lowpass", {"sections": 1}, {"R1": 4.7e3, "C1": 33e-9},
               {"R1": "R-thick-5", "C1": "C-X7R-20"})],
             {"f_start": 10, "f_stop": 1e6, "points": 60, "cutoff_db": HALF_POWER_DB})
    ens = evaluate(d, samples=400, seed=3, curves=False)
    r, c = col(ens, "R1_1"), col(ens, "C1_1")
    assert np.std(r * c) > 0.01 * np.mean(r * c)  # the boards really differ
    np.testing.assert_allclose(ens.metrics["cutoff_hz"], 1 / (TWO_PI * r * c), rtol=1e-9)
    np.testing.assert_allclose(ens.nominal.metrics["cutoff_hz"], 1 / (TWO_PI * 4.7e3 * 33e-9), rtol=1e-9)
    np.testing.assert_allclose(ens.metrics["s1.fc_hz"], 1 / (TWO_PI * r * c), rtol=1e-12)
    np.testing.assert_allclose(ens.metrics["reference_db"], 0.0, rtol=0, atol=1e-12)


def test_first_order_rc_cutoff_at_3_db():
    # source: [TEXT] |H|^2 = 1/(1 + (f/fc)^2) equals 10^(-0.3) at f = fc sqrt(10^0.3 - 1) [D]
    r, c = 10e3, 10e-9
    d = make([("rc_lowpass", {"sections": 1}, {"R1": r, "C1": c})],
             {"f_start": 10, "f_stop": 1e6, "points": 50, "cutoff_db": 3})
    m = evaluate(d, samples=1).nominal.metrics
    np.testing.assert_allclose(m["cutoff_hz"], math.sqrt(10 ** 0.3 - 1) / (TWO_PI * r * c), rtol=1e-9)


@pytest.mark.parametrize("n", [2, 3, 4, 5, 6])
def test_butterworth_cutoff_is_exact_on_a_coarse_grid(n):
    # source: [BW] |H|^2 = 1/(1 + (f/fc)^(2n)) is 1/2 exactly at fc. A 50-point grid over
    # four decades does not hold fc = 1 kHz; the refined crossing must still hit it to 1e-8.
    fc = 1e3
    d = butter_cascade(n, fc, {"f_start": 10, "f_stop": 1e5, "points": 50, "cutoff_db": HALF_POWER_DB})
    ens = evaluate(d, samples=1)
    assert np.min(np.abs(ens.freqs_hz / fc - 1)) > 0.01  # fc is not a grid point
    np.testing.assert_allclose(ens.nominal.metrics["cutoff_hz"], fc, rtol=1e-8)


def test_first_order_rc_highpass_cutoff():
    # source: [TEXT] fc = 1/(2 pi R C) at half power; reference = high-frequency gain 1
    r, c = 2.2e3, 47e-9
    d = make([("rc_highpass", {"sections": 1}, {"R1": r, "C1": c})],
             {"f_start": 1, "f_stop": 1e6, "points": 40, "cutoff_db": HALF_POWER_DB})
    m = evaluate(d, samples=1).nominal.metrics
    np.testing.assert_allclose(m["cutoff_hz"], 1 / (TWO_PI * r * c), rtol=1e-9)
    np.testing.assert_allclose(m["reference_db"], 0.0, rtol=0, atol=1e-12)


def test_butterworth_sallen_key_highpass_cutoff():
    # source: [KARKI] unity-gain high-pass with C1 = C2 = C: Q = sqrt(R2/R1)/2, so R2 = 2 R1
    # gives Q = 1/sqrt(2) (Butterworth), whose half-power point is f0 = 1/(2 pi C sqrt(R1 R2))
    r1, c = 5.6e3, 22e-9
    d = make([("sallen_key_highpass", {}, {"C1": c, "C2": c, "R1": r1, "R2": 2 * r1})],
             {"f_start": 1, "f_stop": 1e6, "points": 50, "cutoff_db": HALF_POWER_DB})
    m = evaluate(d, samples=1).nominal.metrics
    f0 = 1 / (TWO_PI * c * math.sqrt(2) * r1)
    np.testing.assert_allclose(m["cutoff_hz"], f0, rtol=1e-8)
    np.testing.assert_allclose(m["s1.q"], 1 / math.sqrt(2), rtol=1e-12)


def test_demo_is_a_2khz_butterworth():
    # source: README "The demo design": a 4th-order Butterworth low-pass at 2 kHz from
    # standard-value parts; [CM] Table 16.7 Q values 0.5412 and 1.3066 [C]. Rounded part
    # values allow about 1 %.
    m = evaluate(load_demo(), samples=1).nominal.metrics
    np.testing.assert_allclose(m["cutoff_hz"], 2000, rtol=1e-2)
    np.testing.assert_allclose([m["s1.f0_hz"], m["s2.f0_hz"]], 2000, rtol=1e-2)
    np.testing.assert_allclose([m["s1.q"], m["s2.q"]], [0.5412, 1.3066], rtol=1e-2)


# --- band-pass ------------------------------------------------------------------------

R1_BP, R2_BP, R3_BP, C_BP = 10e3, 1e3, 100e3, 10e-9
# source: [SLOA049] C1 = C2 = C: f_m = (1/2 pi C) sqrt((R1 + R2)/(R1 R3 R2)), Q = pi f_m R3 C,
# A_m = -R3/(2 R1), bandwidth 1/(pi R3 C) (= f_m / Q)
FM = 1 / (TWO_PI * C_BP) * math.sqrt((R1_BP + R2_BP) / (R1_BP * R3_BP * R2_BP))
BW = 1 / (math.pi * R3_BP * C_BP)
AM_DB = 20 * math.log10(R3_BP / (2 * R1_BP))


def bandpass_design(points=400, f_start=10.0, f_stop=1e5):
    return make([("mfb_bandpass", {}, {"R1": R1_BP, "R2": R2_BP, "R3": R3_BP, "C1": C_BP, "C2": C_BP})],
                {"f_start": f_start, "f_stop": f_stop, "points": points, "cutoff_db": HALF_POWER_DB})


def test_bandpass_centre_uniform_grid():
    # source: [SLOA049] f_m; the centre is a parabola through the top three grid points,
    # so rtol 1e-3 on a 400-point log grid
    m = evaluate(bandpass_design(), samples=1).nominal.metrics
    np.testing.assert_allclose(m["centre_hz"], FM, rtol=1e-3)
    np.testing.assert_allclose(m["s1.f0_hz"], FM, rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"], FM / BW, rtol=1e-9)


def test_bandpass_centre_grid_with_extra_points():
    # source: [SLOA049] f_m, rtol 1e-3 as above. Mask edges and extra frequencies are
    # merged into the grid (tolspread.evaluate.frequency_grid), so the grid is no longer
    # evenly spaced in log f; here the extra point is f_m itself, the best case.
    m = evaluate(bandpass_design(), samples=1, extra_freqs=[FM]).nominal.metrics
    np.testing.assert_allclose(m["centre_hz"], FM, rtol=1e-3)


def test_bandpass_edges_exact_when_peak_is_on_the_grid():
    # source: [SLOA049] bandwidth 1/(pi R3 C) and A_m; [TEXT] f_lo f_hi = f_m^2. With f_m on
    # the grid the reference (peak) is exact, and the refined crossings give 1e-8.
    m = evaluate(bandpass_design(points=50), samples=1, extra_freqs=[FM]).nominal.metrics
    np.testing.assert_allclose(m["bandwidth_hz"], BW, rtol=1e-8)
    np.testing.assert_allclose(m["upper_hz"] - m["lower_hz"], BW, rtol=1e-8)
    np.testing.assert_allclose(m["lower_hz"] * m["upper_hz"], FM ** 2, rtol=1e-8)
    np.testing.assert_allclose(m["reference_db"], AM_DB, rtol=0, atol=1e-9)


@pytest.mark.parametrize("points", [50, 400])
def test_bandpass_bandwidth_does_not_depend_on_the_grid(points):
    # source: [SLOA049]/[TEXT] half-power bandwidth f_m/Q = 1/(pi R3 C) exactly, midband
    # gain 20 log10(R3/(2 R1)); tolspread.metrics promises crossings that do not depend on
    # the grid density. f_m is not a grid point here.
    ens = evaluate(bandpass_design(points=points), samples=1)
    assert np.min(np.abs(ens.freqs_hz / FM - 1)) > 1e-4
    m = ens.nominal.metrics
    np.testing.assert_allclose(m["lower_hz"] * m["upper_hz"], FM ** 2, rtol=1e-8)
    np.testing.assert_allclose(m["bandwidth_hz"], BW, rtol=1e-6)
    np.testing.assert_allclose(m["reference_db"], AM_DB, rtol=0, atol=1e-6)


# --- peaking ----------------------------------------------------------------------------

Q_PEAK = 2.0
F0_PEAK = 1e3
PEAK_DB = 20 * math.log10(Q_PEAK ** 2 / math.sqrt(Q_PEAK ** 2 - 0.25))  # source: [TEXT]
F_PEAK = F0_PEAK * math.sqrt(1 - 1 / (2 * Q_PEAK ** 2))                 # source: [TEXT]


def test_peaking_of_a_q2_sallen_key_exact_with_peak_on_grid():
    # source: [TEXT] peaking 20 log10(Q^2/sqrt(Q^2 - 1/4)) = 6.0 dB for Q = 2, at
    # f0 sqrt(1 - 1/(2 Q^2)); the peak frequency is put on the grid
    d = make([("sallen_key_lowpass", {}, sk_unity(F0_PEAK, Q_PEAK))],
             {"f_start": 10, "f_stop": 1e5, "points": 100})
    ens = evaluate(d, samples=1, extra_freqs=[F_PEAK])
    np.testing.assert_allclose(ens.nominal.metrics["peaking_db"], PEAK_DB, rtol=1e-9)
    np.testing.assert_allclose(ens.nominal.metrics["s1.q"], Q_PEAK, rtol=1e-12)
    np.testing.assert_allclose(ens.nominal.metrics["s1.f0_hz"], F0_PEAK, rtol=1e-12)


def test_peaking_on_the_default_grid_is_close_and_never_above():
    # source: [TEXT] as above. The peak on a 400-point grid over four decades (step 2.3 %
    # in f) lies within 0.01 dB below the true peak of this Q = 2 section.
    d = make([("sallen_key_lowpass", {}, sk_unity(F0_PEAK, Q_PEAK))],
             {"f_start": 10, "f_stop": 1e5, "points": 400})
    p = evaluate(d, samples=1).nominal.metrics["peaking_db"]
    assert PEAK_DB - 0.01 < p <= PEAK_DB + 1e-12


# --- stage f0 and Q -------------------------------------------------------------------

def test_stage_metrics_every_sample_against_closed_forms():
    # source: [KARKI] Sallen-Key with K = 1 + RF/RG: f0 = 1/(2 pi sqrt(R1R2C1C2)),
    # Q = sqrt(R1R2C1C2)/[C2(R1+R2) + R1C1(1-K)]; [SLOA049] multiple-feedback low-pass
    # Q = sqrt(R2R3C1C2)/[C2(R2 + R3 + R2R3/R1)]; [TEXT] first-order corner 1/(2 pi R C)
    sk = {"R1": 10e3, "R2": 12e3, "C1": 10e-9, "C2": 10e-9, "RF": 5.6e3, "RG": 10e3}
    mfb = {"R1": 10e3, "R2": 22e3, "R3": 6.8e3, "C1": 47e-9, "C2": 2.2e-9}
    rc = {"R1": 3.3e3, "C1": 4.7e-9}
    grades = {"R1": "R-thick-5", "R2": "R-thick-5", "R3": "R-thick-5", "RF": "R-thick-5",
              "RG": "R-thick-5", "C1": "C-X7R-10", "C2": "C-X7R-10"}
    d = make([("sallen_key_lowpass", {"gain": "resistors"}, sk, grades),
              ("mfb_lowpass", {}, mfb, grades), ("rc_lowpass", {"sections": 1}, rc, grades)])
    ens = evaluate(d, samples=300, seed=11, curves=False)
    m = ens.metrics
    v = {p.ref: col(ens, p.ref) for p in d.parts}
    k = 1 + v["RF_1"] / v["RG_1"]
    b2 = v["R1_1"] * v["R2_1"] * v["C1_1"] * v["C2_1"]
    b1 = v["C2_1"] * (v["R1_1"] + v["R2_1"]) + v["R1_1"] * v["C1_1"] * (1 - k)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * np.sqrt(b2)), rtol=1e-9)
    np.testing.assert_allclose(m["s1.q"], np.sqrt(b2) / b1, rtol=1e-9)
    b2 = v["R2_2"] * v["R3_2"] * v["C1_2"] * v["C2_2"]
    b1 = v["C2_2"] * (v["R2_2"] + v["R3_2"] + v["R2_2"] * v["R3_2"] / v["R1_2"])
    np.testing.assert_allclose(m["s2.f0_hz"], 1 / (TWO_PI * np.sqrt(b2)), rtol=1e-9)
    np.testing.assert_allclose(m["s2.q"], np.sqrt(b2) / b1, rtol=1e-9)
    np.testing.assert_allclose(m["s3.fc_hz"], 1 / (TWO_PI * v["R1_3"] * v["C1_3"]), rtol=1e-12)


def test_two_section_rc_ladder_q_one_third():
    # source: [TEXT] two equal unbuffered RC sections: D(s) = 1 + 3 sRC + (sRC)^2, so
    # f0 = 1/(2 pi R C) and Q = 1/3 (real poles; the degree-2 closed form reports Q < 1/2)
    r, c = 10e3, 10e-9
    d = make([("rc_lowpass", {"sections": 2}, {"R1": r, "C1": c, "R2": r, "C2": c})])
    m = evaluate(d, samples=1).nominal.metrics
    np.testing.assert_allclose(m["s1.q"], 1 / 3, rtol=1e-12)
    np.testing.assert_allclose(m["s1.f0_hz"], 1 / (TWO_PI * r * c), rtol=1e-12)


def test_pole_pairs_butterworth_5():
    # source: [SCIPY] scipy.signal.butter(5, 1, analog=True) denominator; [CM] Table 16.7:
    # Q 0.6180 and 1.6180 [C]; exact values 1/(2 sin(3 pi/10)), 1/(2 sin(pi/10)) [BW];
    # poles on the unit circle: f0 = 1/(2 pi) Hz
    _, a = scipy.signal.butter(5, 1, analog=True)
    den = a[::-1][None, :]
    f0, q = pole_pairs(den, 1.0)
    assert f0.shape == q.shape == (1, 2)
    np.testing.assert_allclose(q[0], [0.6180, 1.6180], rtol=0, atol=1e-4)
    np.testing.assert_allclose(q[0], sorted(butter_q(5)), rtol=1e-12)
    np.testing.assert_allclose(f0[0], 1 / TWO_PI, rtol=1e-12)
    # scaled to s' = s / w_ref the same pairs come back at w_ref / (2 pi) Hz
    w_ref = TWO_PI * 2.5e3
    f0s, qs = pole_pairs(den, w_ref)
    np.testing.assert_allclose(f0s[0], 2.5e3, rtol=1e-12)
    np.testing.assert_allclose(qs[0], q[0], rtol=1e-12)


def test_pole_pairs_second_order_closed_form():
    # source: [TEXT] D(s) = d0 + d1 s + d2 s^2: w0 = sqrt(d0/d2), Q = sqrt(d0 d2)/d1
    den = np.array([[4.0, 1.0, 1.0], [1.0, 3.0, 1.0], [9.0, 0.3, 0.25]])
    f0, q = pole_pairs(den, 1.0)
    np.testing.assert_allclose(f0[:, 0] * TWO_PI, [2.0, 1.0, 6.0], rtol=1e-14)
    np.testing.assert_allclose(q[:, 0], [2.0, 1 / 3, 5.0], rtol=1e-14)


# --- attenuation ------------------------------------------------------------------------

@pytest.mark.parametrize("n", [2, 4, 5])
def test_butterworth_attenuation_at_twice_cutoff(n):
    # source: [BW] 10 log10(1 + Omega^(2n)) dB [D]; n = 4 at Omega = 2: 10 log10(257)
    fc = 1e3
    d = butter_cascade(n, fc, {"f_start": 10, "f_stop": 1e5, "points": 50})
    circuit = compile_design(d)
    values = np.array([[p.value for p in d.parts]])
    coeffs = stage_coefficients(circuit, values)
    resp = frequency_response(circuit, coeffs, np.geomspace(10, 1e5, 50), phase=False)
    ref2 = reference_gain2(circuit, coeffs, resp)
    np.testing.assert_allclose(ref2, 1.0, rtol=1e-12)
    for omega in (2.0, 3.7, 10.0):
        att = attenuation_db(coeffs, ref2, omega * fc)
        np.testing.assert_allclose(att, 10 * math.log10(1 + omega ** (2 * n)), rtol=1e-9)
    m = cutoff_metrics(circuit, coeffs, resp, HALF_POWER_DB)
    np.testing.assert_allclose(m["cutoff_hz"], fc, rtol=1e-8)
    if n == 4:
        np.testing.assert_allclose(attenuation_db(coeffs, ref2, 2 * fc), 10 * math.log10(257), rtol=1e-9)


def test_attenuation_relative_to_highpass_reference():
    # source: [TEXT] first-order high-pass |H|^2 = (f/fc)^2/(1 + (f/fc)^2): attenuation
    # 10 log10(1 + (fc/f)^2) dB below the high-frequency gain
    r, c = 10e3, 10e-9
    fc = 1 / (TWO_PI * r * c)
    d = make([("rc_highpass", {"sections": 1}, {"R1": r, "C1": c})])
    circuit = compile_design(d)
    coeffs = stage_coefficients(circuit, np.array([[p.value for p in d.parts]]))
    resp = frequency_response(circuit, coeffs, np.geomspace(10, 1e6, 50), phase=False)
    ref2 = reference_gain2(circuit, coeffs, resp)
    for f in (fc / 10, fc / 3, fc):
        np.testing.assert_allclose(attenuation_db(coeffs, ref2, f), 10 * math.log10(1 + (fc / f) ** 2),
                                   rtol=1e-9)


def test_stage_coefficients_container_roundtrip():
    # source: [TEXT] H(s) = 1/(1 + s R C) written in s' = s / w_ref is 1/(1 + s' w_ref R C):
    # unscaled() must give back (1, R C) up to a common factor
    sc = StageCoefficients(np.array([[0.5]]), np.array([[0.5, 0.5 * 2.0]]), 1e4)
    num, den = sc.unscaled()
    np.testing.assert_allclose(den[0, 1] / den[0, 0], 2.0 / 1e4, rtol=1e-15)
    np.testing.assert_allclose(num[0, 0] / den[0, 0], 1.0, rtol=1e-15)


def test_bandpass_centre_is_the_geometric_mean_of_the_edges_and_no_cutoff():
    # [TEXT] a second-order band-pass has f_lo f_hi = f_m^2, so the geometric mean of the
    # refined -3 dB edges is [SLOA049]'s f_m to the crossings' precision, on any grid
    for points in (37, 50, 400):
        m = evaluate(bandpass_design(points=points), samples=1).nominal.metrics
        assert "cutoff_hz" not in m  # one centre, no duplicate under another name
        np.testing.assert_allclose(m["centre_hz"], math.sqrt(m["lower_hz"] * m["upper_hz"]), rtol=1e-12)
        np.testing.assert_allclose(m["centre_hz"], FM, rtol=1e-8)


# --- a cutoff that does not depend on the grid (issue 10, defect 21) -------------------------
# An LC ladder RS - shunt C1 - series L2 - shunt C3 - load RL whose L2-C3 resonance, lightly
# damped by a large RL, pokes just above the -3 dB level far past the main RS-C1 corner
# (about 0.3 % wide: narrower than any grid spacing used below). The cutoff is defined as
# the highest frequency above which the gain stays below the level, so it is the upper
# edge of that resonance on every grid.
LADDER = {"RS": 1e3, "C1": 4e-7, "L2": 1.22, "C3": 1.22e-12, "RL": 3e8}


def ladder_ba(v):
    """[CHAIN] H(s) = RL / (A RL + B) of the ladder's ABCD chain, as polynomials in s
    (descending powers, numpy convention), derived here independently of the library."""
    a0, b0, c0 = np.array([v["RS"] * v["C1"], 1.0]), np.array([v["RS"]]), np.array([v["C1"], 0.0])
    a1 = a0
    b1 = np.polyadd(np.polymul(a0, [v["L2"], 0.0]), b0)
    a2 = np.polyadd(a1, np.polymul(b1, [v["C3"], 0.0]))
    del c0  # C and D of the chain do not enter the output voltage into RL
    return np.array([v["RL"]]), np.polyadd(a2 * v["RL"], b1)


def ladder_cutoff_reference(v, cutoff_db):
    """The last -cutoff_db crossing by scipy.signal.freqs on a dense grid, refined by brentq."""
    import scipy.optimize

    b, a = ladder_ba(v)
    f = np.geomspace(10, 1e6, 2_000_001)
    _, h = scipy.signal.freqs(b, a, worN=2 * math.pi * f)
    dc2 = (b[-1] / a[-1]) ** 2
    level2 = dc2 * 10 ** (-cutoff_db / 10)
    g2 = np.abs(h) ** 2
    i = np.flatnonzero(g2 >= level2)[-1]

    def excess(x):
        return abs(scipy.signal.freqs(b, a, worN=[2 * math.pi * x])[1][0]) ** 2 / level2 - 1

    return scipy.optimize.brentq(excess, f[i], f[i + 1], xtol=1e-9, rtol=1e-14), f, g2, level2


def ladder_design(points):
    return design_from_dict({
        "format": "tolspread-design", "version": 1,
        "parts": [{"ref": r, "value": x, "grade": "EXACT"} for r, x in LADDER.items()],
        "stages": [{"topology": "lc_lowpass", "options": {"order": 3, "first": "shunt"},
                    "parts": {r: r for r in LADDER}}],
        "analysis": {"f_start": 10, "f_stop": 1e6, "points": points}})


def test_cutoff_of_a_ladder_with_a_narrow_resonance_does_not_depend_on_the_grid():
    ref, f, g2, level2 = ladder_cutoff_reference(LADDER, ladder_design(50).analysis.cutoff_db)
    above = g2 >= level2
    main = f[np.argmax(~above)]  # the first fall below the level: the main corner
    assert main < 1e3 and ref > 100 * main  # the resonance is the highest crossing
    width = np.count_nonzero(above[f > 10 * main]) * math.log(f[1] / f[0])
    assert width < math.log(1e5) / 3000  # narrower than the spacing of every grid below
    for points in (30, 40, 50, 60, 400, 1000, 3000):
        got = evaluate(ladder_design(points), samples=1).nominal.metrics["cutoff_hz"]
        assert got == pytest.approx(ref, rel=1e-9), points


# --- cutoffs of many boards against a per-board reference (issue 13, part A) ---------------
# The crossing searches a pole's resonance only where it could move the answer (a bound on
# |H|^2 decides); these boards are refined with the bracket ends taken from the grid.
# Reference per board: the Sallen-Key closed forms [KARKI] (unity gain,
# D(s) = 1 + s C2 (R1 + R2) + s^2 R1 R2 C1 C2 for the low-pass;
# 1 + s R1 (C1 + C2) + s^2 R1 R2 C1 C2 over s^2 R1 R2 C1 C2 for the high-pass) evaluated
# with numpy's polyval, the edge found on a dense grid and refined by scipy's brentq.

def _sk_h2(kind, r1, r2, c1, c2):
    """|H(j 2 pi f)|^2 of one unity-gain Sallen-Key section, per board, as a function of f."""
    def h2(f):
        s = 1j * TWO_PI * f
        d = 1 + s * (c2 * (r1 + r2) if kind == "lowpass" else r1 * (c1 + c2)) + s * s * r1 * r2 * c1 * c2
        n = 1 if kind == "lowpass" else s * s * r1 * r2 * c1 * c2
        return np.abs(n / d) ** 2
    return h2


def _reference_edge(h2, level2, falling, f_lo, f_hi):
    import scipy.optimize

    f = np.geomspace(f_lo, f_hi, 20_001)
    above = h2(f) >= level2
    i = np.flatnonzero(above)[-1] if falling else np.flatnonzero(above)[0] - 1
    return scipy.optimize.brentq(lambda x: math.log(h2(x) / level2), f[i], f[i + 1], xtol=1e-14, rtol=1e-15)


@pytest.mark.parametrize("kind", ["lowpass", "highpass"])
def test_cutoff_of_every_board_matches_a_per_board_reference(kind):
    fc = 1e3
    stages = []
    for q in butter_q(4):  # [BW] Butterworth Qs
        c = 22e-9
        w0 = TWO_PI * fc
        if kind == "lowpass":  # [KARKI] equal R: Q = sqrt(C1/C2)/2, w0 = 1/(R sqrt(C1 C2))
            v = sk_unity(fc, q)
        else:  # [KARKI] equal C: Q = sqrt(R2/R1)/2, w0 = 1/(C sqrt(R1 R2))
            r1 = 1 / (2 * q * w0 * c)
            v = {"C1": c, "C2": c, "R1": r1, "R2": 4 * q * q * r1}
        stages.append((f"sallen_key_{kind}", {}, v, {"R1": "R-thick-1", "R2": "R-thick-1",
                                                     "C1": "C-C0G-5", "C2": "C-C0G-5"}))
    d = make(stages, {"f_start": 10, "f_stop": 1e5, "points": 400, "cutoff_db": 3.0})
    ens = evaluate(d, samples=300, seed=7, curves=False)
    got = ens.metrics["cutoff_hz"]
    level2 = 10 ** (-3.0 / 10)  # both references are 1 (DC gain, or gain at infinity)
    for k in range(ens.samples):
        secs = [_sk_h2(kind, *(col(ens, f"{r}_{j}")[k] for r in ("R1", "R2", "C1", "C2"))) for j in (1, 2)]
        ref = _reference_edge(lambda f: secs[0](f) * secs[1](f), level2, kind == "lowpass", fc / 10, fc * 10)
        assert got[k] == pytest.approx(ref, rel=1e-9), k


def test_pole_bound_holds_on_dense_grids():
    # The bound that lets the crossing skip a pole's search must never be below |H|^2
    # anywhere on its interval: checked against scipy.signal.freqs on 2,001 points of
    # random intervals, for the demo's boards, the LC ladder and the band-pass example.
    from pathlib import Path

    from tolspread.designfile import load
    from tolspread.metrics import _all_poles, _gain2_bound

    rng = np.random.default_rng(5)
    example = Path(__file__).resolve().parents[1] / "assets" / "examples" / "ultrasonic_bandpass.json"
    for design in (load_demo(), ladder_design(400), load(str(example))):
        ens = evaluate(design, samples=40, seed=11, curves=False)
        circuit = compile_design(design)
        coeffs = stage_coefficients(circuit, ens.values)
        poles = _all_poles(coeffs)
        lo_all = ens.freqs_hz[0]
        for k in range(ens.samples):
            num, den = np.array([1.0]), np.array([1.0])
            for c in coeffs:
                n_, d_ = c.unscaled()
                num, den = np.polymul(num, n_[k][::-1]), np.polymul(den, d_[k][::-1])
            f1, f2 = np.sort(lo_all * 10 ** rng.uniform(0, 4, 2))
            f = np.geomspace(f1, f2, 2_001)
            _, h = scipy.signal.freqs(num, den, worN=TWO_PI * f)
            g2 = np.abs(h) ** 2
            for f_ref in (f1, f2, math.sqrt(f1 * f2)):
                g_ref = np.abs(scipy.signal.freqs(num, den, worN=[TWO_PI * f_ref])[1][0]) ** 2
                bound = _gain2_bound(coeffs, poles, np.array([k]), np.array([g_ref]), np.array([f_ref]),
                                     np.array([f1]), np.array([f2]))[0]
                assert bound >= g2.max() * (1 - 1e-9), (design.stages[0].topology, k, f1, f2)



def test_low_pass_grid_readings_gathered_block_by_block_equal_reading_the_whole_gain():
    # evaluate() reads a low-pass's peak index and last grid point above the level while
    # each block of the response is in the CPU cache (metrics.scan_block); its metrics must
    # be those of cutoff_metrics reading the finished (S, F) gain, bit for bit (the same
    # comparisons of the same numbers).
    from tolspread.engine import Response
    from tolspread.evaluate import prepare

    design = load_demo()
    prep = prepare(design)
    ens = evaluate(design, samples=600, curves=True, phase=False, prepared=prep)
    coeffs = stage_coefficients(prep.circuit, ens.values, prep.w_refs)
    whole = cutoff_metrics(prep.circuit, coeffs, Response(ens.freqs_hz, ens.gain_db, None, None),
                           design.analysis.cutoff_db)
    for name in ("cutoff_hz", "peaking_db", "reference_db"):
        np.testing.assert_array_equal(ens.metrics[name], whole[name], err_msg=name)
    # independent check (scipy.signal.freqs on each board's whole H): at the cutoff the gain
    # is 3 dB below the DC gain (the design's cutoff_db; common practice)
    for k in range(0, 600, 150):
        num, den = np.array([1.0]), np.array([1.0])
        for c in coeffs:
            n_k, d_k = c.unscaled()
            num, den = np.polymul(num, n_k[k][::-1]), np.polymul(den, d_k[k][::-1])
        _, h = scipy.signal.freqs(num, den, worN=[0.0, 2 * math.pi * ens.metrics["cutoff_hz"][k]])
        drop = 20 * math.log10(abs(h[0]) / abs(h[1]))
        assert drop == pytest.approx(design.analysis.cutoff_db, abs=1e-8)
