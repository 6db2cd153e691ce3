"""Notch section, elliptic and inverse Chebyshev responses, band-stop synthesis (issue 14 item 4).

Sources, named beside each check: the notch section's closed forms (tests/REFERENCES.md
section 16, Sedra & Smith [M], re-derived by nodal analysis [D]) and an independent nodal
solution written here; the ideal responses straight from ``scipy.signal`` (``ellip``,
``cheby2``, ``butter``, ``iirfilter(btype='bandstop')``, ``analog=True``), their -3 dB
points found here by root finding on scipy's own response (inverse Chebyshev: the closed
form of tests/REFERENCES.md section 16 [D]).
"""
from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import optimize, signal

from tolspread.design import Design, Part, Stage
from tolspread.designfile import load
from tolspread.engine import compile_design, frequency_response, stage_coefficients
from tolspread.evaluate import prepare
from tolspread.synthesis import synthesize

TWO_PI = 2 * math.pi
NOTCH_ROLES = ("R1", "R2", "R3", "R4", "R5", "R6", "C1", "C2", "C3")


# --- helpers (independent of the library's synthesis) -------------------------------------

def notch_nodal(v: dict[str, float], f_hz: np.ndarray) -> np.ndarray:
    """H(j 2 pi f) of the notch section by nodal analysis written here: ideal op-amps hold
    their inverting inputs X, Y, Z at 0 V; unknowns V_out (U1), V2 (U2), V3 (U3); Kirchhoff's
    current law at X, Y and Z (the netlist of filters/topologies.py::notch, README table)."""
    out = np.empty(f_hz.size, dtype=complex)
    for i, f in enumerate(f_hz):
        s = 1j * TWO_PI * f
        a = np.array([[s * v["C1"] + 1 / v["R1"], 0, 1 / v["R2"]],   # X: C1 || R1 to out, R2 to V3
                      [1 / v["R3"], s * v["C2"], 0],                  # Y: R3 from out, C2 to V2
                      [0, 1 / v["R5"], 1 / v["R6"]]])                 # Z: R5 from V2, R6 to V3
        b = np.array([-s * v["C3"], -1 / v["R4"], 0])                 # the input through C3 and R4
        out[i] = np.linalg.solve(a, b)[0]
    return out


def notch_design(v: dict[str, float], topology: str = "notch_lowpass") -> Design:
    parts = tuple(Part(r, r[0], v[r], "EXACT") for r in NOTCH_ROLES)
    return Design(parts, (Stage(topology, {r: r for r in NOTCH_ROLES}, {}, "notch"),))


def engine_h(design: Design, f_hz: np.ndarray) -> np.ndarray:
    """|H| (linear) of the nominal design from the project's engine."""
    circuit = compile_design(design)
    coeffs = stage_coefficients(circuit, np.array([[p.value for p in design.parts]]))
    resp = frequency_response(circuit, coeffs, np.asarray(f_hz, dtype=float), phase=False)
    return 10 ** (resp.gain_db[0] / 20)


def zpk_h(z, p, k, f_hz: np.ndarray) -> np.ndarray:
    return np.abs(signal.freqs_zpk(z, p, k, worN=TWO_PI * np.asarray(f_hz))[1])


def half_power_omega(z, p, k, lo: float, hi: float) -> float:
    """Where a low-pass zpk's |H|^2 is half its DC value, by brentq on scipy's response."""
    dc2 = zpk_h(z, p, k, np.array([0.0]))[0] ** 2
    return optimize.brentq(lambda w: zpk_h(z, p, k, np.array([w / TWO_PI]))[0] ** 2 / dc2 - 0.5, lo, hi,
                           xtol=1e-15, rtol=4 * np.finfo(float).eps)


def scipy_target(response: str, order: int, fc: float, kind: str, ripple: float | None, stop: float,
                 bw: float | None = None):
    """The target straight from scipy.signal, its -3 dB point (band-stop: edges) put at the
    requested frequencies: elliptic scaled by the root of |H|^2 = DC/2 found here; inverse
    Chebyshev by omega_3 = 1/cosh(arccosh(1/eps)/n), eps^2 = 1/(10^(rs/10) - 1)
    (tests/REFERENCES.md section 16 [D])."""
    if response == "elliptic":
        proto = signal.ellip(order, ripple, stop, 1.0, analog=True, output="zpk")
        w3 = half_power_omega(*proto, 1.0, float(np.min(np.abs(proto[0]))) * (1 - 1e-9))
    else:
        eps = 1 / math.sqrt(10 ** (stop / 10) - 1)
        w3 = 1 / math.cosh(math.acosh(1 / eps) / order)
    args = (order, ripple, stop) if response == "elliptic" else (order, stop)
    design = signal.ellip if response == "elliptic" else signal.cheby2
    if kind == "lowpass":
        return design(*args, TWO_PI * fc / w3, analog=True, output="zpk")
    if kind == "highpass":
        return design(*args, TWO_PI * fc * w3, btype="highpass", analog=True, output="zpk")
    b = TWO_PI * bw * w3  # band-stop: s -> B s/(s^2 + w0^2), so scipy's edges lie bw x w3 apart
    w2 = 0.5 * b + math.sqrt(0.25 * b * b + (TWO_PI * fc) ** 2)
    return signal.iirfilter(order, [(TWO_PI * fc) ** 2 / w2, w2], rp=ripple, rs=stop, btype="bandstop",
                            analog=True, ftype="ellip" if response == "elliptic" else "cheby2", output="zpk")


def assert_same_shape(ours: np.ndarray, theirs: np.ndarray, rel: float) -> None:
    """|H| of ours and scipy's differ only by a constant factor (the sections' gains): the
    ratio's spread within ``rel``."""
    ratio = ours / theirs
    assert np.all(np.isfinite(ratio))
    assert np.max(ratio) / np.min(ratio) - 1 < rel, np.max(ratio) / np.min(ratio) - 1


def run_cli(*args: str, tmp_path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "tolspread.app.cli", "design", *args], capture_output=True,
                          text=True, cwd=tmp_path, timeout=300)


# --- the notch section -----------------------------------------------------------------------

def test_notch_section_against_its_published_formulas_and_a_nodal_solution():
    # every part its own value (no equalities): the general closed forms [D] and the
    # nodal solution written above
    v = {"R1": 47e3, "R2": 15e3, "R3": 18e3, "R4": 22e3, "R5": 10e3, "R6": 12e3,
         "C1": 10e-9, "C2": 8.2e-9, "C3": 3.3e-9}
    d = notch_design(v)
    circuit = compile_design(d)
    num, den = stage_coefficients(circuit, np.array([[p.value for p in d.parts]]))[0].unscaled()
    w0 = math.sqrt(v["R6"] / (v["R2"] * v["R3"] * v["R5"] * v["C1"] * v["C2"]))   # REFERENCES section 16 [D]
    q = w0 * v["R1"] * v["C1"]
    wz = math.sqrt(v["R6"] / (v["R2"] * v["R4"] * v["R5"] * v["C2"] * v["C3"]))
    assert math.sqrt(den[0, 0] / den[0, 2]) == pytest.approx(w0, rel=1e-12)
    assert math.sqrt(den[0, 0] * den[0, 2]) / den[0, 1] == pytest.approx(q, rel=1e-12)
    assert num[0, 1] == pytest.approx(0.0, abs=1e-12 * abs(num[0, 0]))
    assert math.sqrt(num[0, 0] / num[0, 2]) == pytest.approx(wz, rel=1e-12)
    assert num[0, 0] / den[0, 0] == pytest.approx(-v["R3"] / v["R4"], rel=1e-12)   # DC gain [D]
    assert num[0, 2] / den[0, 2] == pytest.approx(-v["C3"] / v["C1"], rel=1e-12)   # HF gain [D]
    f = np.geomspace(10, 1e5, 301)
    np.testing.assert_allclose(engine_h(d, f), np.abs(notch_nodal(v, f)), rtol=1e-9)


def test_notch_section_equal_components_match_the_textbook_form():
    # Sedra & Smith's Tow-Thomas with feedforward (REFERENCES section 16 [M]): equal R and C,
    # damping QR, feedforward C1 (here C3) and R2 (here R4): w0 = 1/CR, wz^2 = 1/(C C1 R R2)
    r, c, qv, c1, r2 = 20e3, 10e-9, 4.0, 2.2e-9, 27e3
    v = {"R1": qv * r, "R2": r, "R3": r, "R4": r2, "R5": 10e3, "R6": 10e3, "C1": c, "C2": c, "C3": c1}
    f = np.geomspace(50, 20e3, 201)
    s = 1j * TWO_PI * f
    textbook = -((c1 / c) * s ** 2 + 1 / (c * c * r * r2)) / (s ** 2 + s / (qv * c * r) + 1 / (c * c * r * r))
    for topology in ("notch_lowpass", "notch_highpass", "notch"):
        np.testing.assert_allclose(engine_h(notch_design(v, topology), f), np.abs(textbook), rtol=1e-9)


# --- elliptic and inverse Chebyshev against scipy.signal -----------------------------------

CASES = [("elliptic", 3, 0.5, 40.0, "lowpass"), ("elliptic", 4, 1.0, 50.0, "lowpass"),
         ("elliptic", 5, 0.1, 60.0, "highpass"), ("inverse_chebyshev", 3, None, 40.0, "lowpass"),
         ("inverse_chebyshev", 4, None, 60.0, "highpass"), ("inverse_chebyshev", 6, None, 50.0, "lowpass")]


@pytest.mark.parametrize(("response", "order", "ripple", "stop", "kind"), CASES)
def test_unsnapped_design_is_the_scipy_response(response, order, ripple, stop, kind):
    # scipy.signal.ellip / cheby2 (analog=True), -3 dB at the cutoff (helpers above): the
    # exact values give the same |H| up to the sections' constant gain, to 1e-9 relative
    fc = 2000.0
    res = synthesize(response, order, fc, kind=kind, ripple_db=ripple, stopband_db=stop, snap=False)
    f = np.geomspace(fc / 100, fc * 100, 2001)
    assert_same_shape(engine_h(res.design, f), zpk_h(*scipy_target(response, order, fc, kind, ripple, stop), f),
                      1e-9)
    assert not res.exceeded
    # every second-order stage is a notch section, an odd order's first stage a passive RC
    names = [s.topology for s in res.design.stages]
    assert names == (["rc_" + kind] if order % 2 else []) + ["notch_" + kind] * (order // 2)


@pytest.mark.parametrize(("response", "order", "ripple", "stop"), [("elliptic", 4, 0.5, 40.0),
                                                                   ("inverse_chebyshev", 4, None, 40.0)])
def test_snapped_design_stays_within_the_errors_it_reports(response, order, ripple, stop):
    # the tool's reported errors against an independent look at the same response and scipy's
    fc = 1000.0
    res = synthesize(response, order, fc, ripple_db=ripple, stopband_db=stop)  # E24 / E12 snapped
    assert not res.exceeded, res.warning_text()
    checks = {c.what: c for c in res.checks}
    z, p, k = scipy_target(response, order, fc, "lowpass", ripple, stop)
    peak = float(np.max(zpk_h(z, p, k, np.geomspace(1, fc, 2001))))
    # stopband edge: where scipy's response first falls stop dB below its peak (brentq here)
    edge = optimize.brentq(lambda x: 20 * math.log10(zpk_h(z, p, k, np.array([x]))[0] / peak) + stop,
                           fc, float(np.min(np.abs(z))) / TWO_PI * (1 - 1e-9), xtol=1e-12)
    ours = engine_h(res.design, np.array([0.0]))[0]
    stop_f = np.geomspace(edge, fc * 100, 4001)
    worst = 20 * np.log10(np.max(engine_h(res.design, stop_f)) / ours)
    guaranteed = 20 * math.log10(peak / zpk_h(z, p, k, np.array([0.0]))[0]) - stop
    assert worst <= guaranteed + checks["stopband"].error + 0.01  # 0.01 dB: our grid, not the tool's
    # passband (up to the ripple edge, or half the cutoff): shape against scipy's
    p_edge = fc / 2 if response == "inverse_chebyshev" else fc * 0.9
    pf = np.geomspace(fc / 100, p_edge, 801)
    dev = 20 * np.log10(engine_h(res.design, pf) / ours) - 20 * np.log10(zpk_h(z, p, k, pf) / zpk_h(z, p, k, [0.0])[0])
    assert np.max(np.abs(dev)) <= abs(checks["passband shape"].error) + 0.02


@pytest.mark.parametrize("order", [4, 5])
def test_starting_mask_holds_the_guaranteed_stopband(order):
    # scipy's response: the stopband edge and the level it guarantees (helpers above); the
    # mask is relative to the DC gain, which for an even order is the ripple's bottom
    fc, stop, ripple = 1000.0, 50.0, 0.5
    res = synthesize("elliptic", order, fc, ripple_db=ripple, stopband_db=stop, snap=False)
    (span,) = [s for s in res.design.mask if s.name == "stopband ceiling"]
    z, p, k = scipy_target("elliptic", order, fc, "lowpass", ripple, stop)
    peak = float(np.max(zpk_h(z, p, k, np.geomspace(1, fc, 20001))))  # scipy: 1 (0 dB) for ellip
    edge = optimize.brentq(lambda x: 20 * math.log10(zpk_h(z, p, k, np.array([x]))[0] / peak) + stop,
                           fc, float(np.min(np.abs(z))) / TWO_PI * (1 - 1e-9), xtol=1e-12)
    assert span.f1 == pytest.approx(edge, rel=1e-6)
    assert span.f2 == pytest.approx(res.design.analysis.f_stop)
    dc_db = 20 * math.log10(zpk_h(z, p, k, np.array([0.0]))[0] / peak)
    assert dc_db == pytest.approx(0.0 if order % 2 else -ripple, abs=1e-6)  # scipy ellip's DC gain (peak on a grid)
    assert span.limit1 == pytest.approx(math.ceil(10 * (-stop - dc_db) - 1e-6) / 10)
    assert span.relative


# --- band-stop ---------------------------------------------------------------------------------

@pytest.mark.parametrize(("response", "order", "ripple", "stop"), [("butterworth", 2, None, None),
                                                                   ("butterworth", 3, None, None),
                                                                   ("elliptic", 3, 0.5, 40.0)])
def test_bandstop_unsnapped_is_scipys_bandstop(response, order, ripple, stop):
    # scipy.signal.iirfilter(btype='bandstop', analog=True): Butterworth edges are the -3 dB
    # points; elliptic through scipy_target (ripple edges bw x omega_3 apart)
    fc, bw = 1000.0, 300.0
    res = synthesize(response, order, fc, kind="bandstop", bandwidth_hz=bw, ripple_db=ripple,
                     stopband_db=stop, snap=False)
    if response == "butterworth":
        w2 = TWO_PI * (0.5 * bw + math.sqrt(0.25 * bw * bw + fc * fc))
        target = signal.iirfilter(order, [(TWO_PI * fc) ** 2 / w2, w2], btype="bandstop", analog=True,
                                  ftype="butter", output="zpk")
    else:
        target = scipy_target(response, order, fc, "bandstop", ripple, stop, bw)
    f = np.concatenate([np.geomspace(10, 990, 800), np.geomspace(1010, 1e5, 800)])  # not on the notch itself
    assert_same_shape(engine_h(res.design, f), zpk_h(*target, f), 1e-9)
    assert {s.topology for s in res.design.stages} == {"notch"}
    # the analysis' own band-stop metrics: the -3 dB edges of the exact design [scipy: Wn]
    m = prepare(res.design).nominal.metrics
    if response == "butterworth":
        assert m["centre_hz"] == pytest.approx(fc, rel=1e-8)
        assert m["bandwidth_hz"] == pytest.approx(bw, rel=1e-8)


# --- through the command line -------------------------------------------------------------

def test_design_command_writes_an_elliptic_design(tmp_path):
    run = run_cli("--response", "elliptic", "--ripple", "0.5", "--stopband", "40dB", "--order", "5",
                  "--cutoff", "1k", "-o", "cauer.json", tmp_path=tmp_path)
    assert run.returncode == 0, run.stderr
    assert "stopband" in run.stdout and "S2 notch" in run.stdout
    d = load(tmp_path / "cauer.json")
    assert [s.topology for s in d.stages] == ["rc_lowpass", "notch_lowpass", "notch_lowpass"]
    doc = json.loads((tmp_path / "cauer.json").read_text())
    assert any(s.get("name") == "stopband ceiling" for s in doc["mask"])


@pytest.mark.parametrize(("args", "option"), [
    (["--response", "elliptic", "--ripple", "0.5", "--stopband", "5"], "--stopband"),
    (["--response", "elliptic", "--ripple", "0.5", "--stopband", "lots"], "--stopband"),
    (["--response", "elliptic", "--stopband", "40"], "--ripple"),
    (["--response", "inverse_chebyshev", "--stopband", "40", "--ripple", "1"], "--ripple"),
    (["--response", "butterworth", "--stopband", "40"], "--stopband"),
    (["--response", "butterworth", "--kind", "bandstop"], "--bandwidth"),
    (["--response", "elliptic", "--ripple", "1", "--stopband", "40", "--kind", "bandpass", "--bandwidth", "100"],
     "--kind"),
])
def test_design_command_refuses_bad_input_naming_the_option(tmp_path, args, option):
    run = run_cli(*args, "--order", "4", "--cutoff", "1k", "-o", "x.json", tmp_path=tmp_path)
    assert run.returncode == 2, (run.stdout, run.stderr)
    assert option in run.stderr and "Traceback" not in run.stderr
    assert len(run.stderr.strip().splitlines()) == 1
    assert not (tmp_path / "x.json").exists()
