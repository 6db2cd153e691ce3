"""``tolspread design`` as a user runs it: snapped designs against scipy.signal's ideal filters.

Every case runs the installed console script in a subprocess. A design it writes (exit 0)
must be within the stated error limits (README: 2 % cutoff or centre and section f0, 5 %
bandwidth and section Q, 0.5 dB passband shape and ripple); a design beyond them must be
refused with a warning in words and exit status 4 (and written only with --accept-error,
where this test confirms that a figure really is beyond its limit).

The ideal filter is scipy.signal's own (butter, cheby1, bessel with btype and analog=True,
the -3 dB normalization of tests/REFERENCES.md section 5; ``_scipy_target`` of test_synthesis);
the built design's response is the project's engine on the written file's part values,
and the errors are measured here (crossings interpolated on a dense grid), not read from
the program's report. Issue 10, defects 13 and 14.
"""
from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from tolspread.designfile import load
from tolspread.engine import compile_design, stage_coefficients
from tolspread.metrics import stage_metrics
from tolspread.values import parse_value
from test_synthesis import (_scipy_target, chebyshev_omega_c, engine_gain_db, scipy_gain_db,
                            sk_lowpass_closed_form, values_by_role)

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
EXIT_BAD_INPUT, EXIT_OUT_OF_LIMITS = 2, 4                       # README, "Exit status"
LIMITS = {"cutoff": 0.02, "bandwidth": 0.05, "f0": 0.02, "q": 0.05, "shape_db": 0.5, "ripple_db": 0.5}
HALF_POWER_DB = 10 * math.log10(2)
SLACK = 1e-3  # measured here on a grid: allow 0.1 % of the limit's size for interpolation


def cli(*args: str) -> subprocess.CompletedProcess:
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300)
    assert "Traceback" not in proc.stderr + proc.stdout
    return proc


def design_args(case: tuple, out: Path) -> list[str]:
    response, order, fc, kind, bw, ripple, series = case
    args = ["design", "--response", response, "--order", str(order), "--cutoff", repr(fc), "--kind", kind,
            "--series", series, "-o", str(out)]
    if bw is not None:
        args += ["--bandwidth", repr(bw)]
    if ripple is not None:
        args += ["--ripple", repr(ripple)]
    return args


def _crossings(f: np.ndarray, rel_db: np.ndarray, level_db: float) -> tuple[float, float]:
    """The outermost frequencies where ``rel_db`` crosses ``level_db`` (log-linear interpolation)."""
    above = np.nonzero(rel_db >= level_db)[0]
    i, j = int(above[0]), int(above[-1])

    def cross(a: int, b: int) -> float:
        t = (level_db - rel_db[a]) / (rel_db[b] - rel_db[a])
        return float(np.exp(np.log(f[a]) + t * (np.log(f[b]) - np.log(f[a]))))

    lower = cross(i - 1, i) if i > 0 else math.nan
    upper = cross(j, j + 1) if j < f.size - 1 else math.nan
    return lower, upper


def measure(gain_db, case: tuple) -> dict[str, float]:
    """Cutoff (band-pass: centre and bandwidth, Hz), passband ripple and the passband gain
    curve relative to the reference, of a response ``gain_db(f_hz)``."""
    response, order, fc, kind, bw, ripple, _ = case
    f = np.geomspace(fc / 1e3 if bw is None else min(fc / 1e3, fc - 0.49 * bw), fc * 1e3, 40001)
    g = gain_db(f)
    if kind == "lowpass":
        ref = gain_db(np.array([fc * 1e-5]))[0]
    elif kind == "highpass":
        ref = gain_db(np.array([fc * 1e5]))[0]
    else:
        ref = float(np.max(g))
    level = -HALF_POWER_DB - (ripple if kind == "bandpass" and ripple and order % 2 == 0 else 0.0)
    lower, upper = _crossings(f, g - ref, level)
    omega_p = 1 / chebyshev_omega_c(order, ripple) if ripple else 0.5
    if kind == "lowpass":
        band = np.geomspace(fc / 1e3, omega_p * fc, 2001)
        out = {"cutoff": upper}
    elif kind == "highpass":
        band = np.geomspace(fc / omega_p, fc * 1e3, 2001)
        out = {"cutoff": lower}
    else:
        hi = 0.5 * omega_p * bw + math.sqrt((0.5 * omega_p * bw) ** 2 + fc * fc)
        band = np.geomspace(fc * fc / hi, hi, 2001)
        out = {"cutoff": math.sqrt(lower * upper), "bandwidth": upper - lower}
    rel = gain_db(band) - ref
    out["ripple"] = float(np.ptp(rel))
    out["passband"] = rel
    return out


def ideal_pairs(case: tuple) -> list[tuple[float, float | None]]:
    """(f0 Hz, Q) of scipy's poles: one per complex pair, (|p|, None) per real pole."""
    response, order, fc, kind, bw, ripple, _ = case
    _, p, _ = _scipy_target(response, order, fc, kind, ripple, bw)
    out = [(abs(x) / (2 * math.pi), abs(x) / (-2 * x.real)) for x in p if x.imag > 1e-9 * abs(x)]
    out += [(abs(x.real) / (2 * math.pi), None) for x in p if abs(x.imag) <= 1e-9 * abs(x)]
    return out


def errors(design, case: tuple) -> dict[str, float]:
    """Largest relative or dB error of every figure of ``design`` against scipy's ideal."""
    response, order, fc, kind, bw, ripple, _ = case
    zpk = _scipy_target(response, order, fc, kind, ripple, bw)
    built = measure(lambda f: engine_gain_db(design, f), case)
    ideal = measure(lambda f: scipy_gain_db(*zpk, f), case)
    out = {"cutoff": abs(built["cutoff"] / ideal["cutoff"] - 1),
           "shape_db": float(np.max(np.abs(built["passband"] - ideal["passband"]))),
           "ripple_db": abs(built["ripple"] - ideal["ripple"])}
    if kind == "bandpass":
        out["bandwidth"] = abs(built["bandwidth"] / ideal["bandwidth"] - 1)
    circuit = compile_design(design)
    m = stage_metrics(circuit, stage_coefficients(circuit, np.array([[p.value for p in design.parts]])))
    pairs = ideal_pairs(case)
    f0_err = q_err = 0.0
    for k in range(1, len(design.stages) + 1):
        if f"s{k}.fc_hz" in m:
            f0 = float(m[f"s{k}.fc_hz"][0])
            want = min((p for p in pairs if p[1] is None), key=lambda p: abs(math.log(f0 / p[0])))
            f0_err = max(f0_err, abs(f0 / want[0] - 1))
            continue
        f0, q = float(m[f"s{k}.f0_hz"][0]), float(m[f"s{k}.q"][0])
        want = min((p for p in pairs if p[1] is not None),
                   key=lambda p: abs(math.log(f0 / p[0])) + abs(math.log(q / p[1])))
        f0_err = max(f0_err, abs(f0 / want[0] - 1))
        q_err = max(q_err, abs(q / want[1] - 1))
    out["f0"], out["q"] = f0_err, q_err
    return out


def assert_practical_values(design) -> None:
    # README "Designing from a response": resistors 1 kohm..1 Mohm (a multiple-feedback
    # band-pass shunt resistor R2 from 100 ohm), C0G capacitors 100 pF..1 uF
    for st in design.stages:
        for role, ref in st.roles.items():
            v = next(p.value for p in design.parts if p.ref == ref)
            if role.startswith("R"):
                low = 100.0 if (st.topology, role) == ("mfb_bandpass", "R2") else 1e3
                assert low * (1 - 1e-9) <= v <= 1e6 * (1 + 1e-9), (ref, v)
            elif role.startswith("C"):
                assert 100e-12 * (1 - 1e-9) <= v <= 1e-6 * (1 + 1e-9), (ref, v)


# (response, order, centre or cutoff Hz, kind, bandwidth Hz, ripple dB, resistor series)
TABLE = [
    ("butterworth", 1, 50.0, "lowpass", None, None, "E24"),
    ("butterworth", 4, 1000.0, "lowpass", None, None, "E24"),
    ("bessel", 6, 20e3, "lowpass", None, None, "E24"),
    ("chebyshev", 5, 3000.0, "lowpass", None, 1.0, "E24"),
    ("chebyshev", 8, 100.0, "lowpass", None, 0.5, "E96"),
    ("butterworth", 7, 250e3, "lowpass", None, None, "E24"),
    ("butterworth", 2, 10e3, "highpass", None, None, "E24"),
    ("chebyshev", 5, 1000.0, "highpass", None, 0.5, "E24"),
    ("bessel", 3, 200.0, "highpass", None, None, "E24"),
    ("butterworth", 8, 5000.0, "highpass", None, None, "E24"),
    ("butterworth", 1, 1000.0, "bandpass", 500.0, None, "E24"),
    ("butterworth", 2, 1000.0, "bandpass", 100.0, None, "E24"),
    ("bessel", 3, 5000.0, "bandpass", 4000.0, None, "E24"),
    ("chebyshev", 2, 10e3, "bandpass", 2000.0, 0.5, "E24"),
    ("chebyshev", 3, 1000.0, "bandpass", 300.0, 1.0, "E24"),
    ("butterworth", 4, 2000.0, "bandpass", 1000.0, None, "E96"),
]


@pytest.mark.parametrize("case", TABLE, ids=lambda c: f"{c[0]}{c[1]}-{c[3]}-{c[2]:g}-{c[6]}")
def test_design_is_within_the_limits_or_warns_and_exits_4(case, tmp_path):
    out = tmp_path / "d.json"
    proc = cli(*design_args(case, out))
    if proc.returncode == 0:
        err = errors(load(out), case)
        for key, limit in LIMITS.items():
            if key in err:
                assert err[key] <= limit * (1 + SLACK), (key, err[key], proc.stdout)
        assert "WARNING" not in proc.stdout + proc.stderr
        assert_practical_values(load(out))
        return
    assert proc.returncode == EXIT_OUT_OF_LIMITS, proc.stderr
    assert "WARNING" in proc.stderr and "beyond the limits" in proc.stderr
    assert "nothing written" in proc.stderr and "--accept-error" in proc.stderr
    assert not out.exists()
    again = cli(*design_args(case, out), "--accept-error")
    assert again.returncode == 0 and out.exists()
    assert "WARNING" in again.stdout
    err = errors(load(out), case)
    # the warning is earned: a figure measured here is beyond its limit (less the slack)
    assert any(err[k] > LIMITS[k] * (1 - SLACK) for k in LIMITS if k in err), err


# --- the four cases of issue 10, defect 13 -------------------------------------------------

def test_chebyshev_bandpass_order_5_is_refused_not_built_broken(tmp_path):
    # Chebyshev 1 dB, order 5, centre 1 kHz, 200 Hz wide needs sections of Q 58 (scipy's
    # poles, measured here); a multiple-feedback band-pass section spreads its resistors
    # 4 Q^2 : 1 (tests/REFERENCES.md section 6: R3 = 2Q/(w0 C), R2 ~ 1/(2 Q w0 C)), 13,500 : 1, more
    # than 100 ohm..1 Mohm hold. Before: written with a 19.8 Hz bandwidth, exit 0.
    case = ("chebyshev", 5, 1000.0, "bandpass", 200.0, 1.0, "E24")
    assert max(q for _, q in ideal_pairs(case) if q) == pytest.approx(58.05, abs=0.05)
    out = tmp_path / "bp.json"
    proc = cli(*design_args(case, out))
    assert proc.returncode == EXIT_BAD_INPUT
    assert "--bandwidth" in proc.stderr and "Q 58" in proc.stderr
    assert not out.exists()
    # the transformation and pairing are right: unsnapped, the same sections give scipy's
    # band exactly (checked in test_synthesis); a wider band builds within the limits
    wider = ("chebyshev", 5, 1000.0, "bandpass", 600.0, 1.0, "E96")
    assert cli(*design_args(wider, out)).returncode == 0
    err = errors(load(out), wider)
    assert err["bandwidth"] <= LIMITS["bandwidth"] and err["cutoff"] <= LIMITS["cutoff"]


def test_butterworth_bandpass_order_2_keeps_its_bandwidth(tmp_path):
    # Before: bandwidth -32 % written silently. Now the bandwidth measured here is within
    # 5 %, and a section Q the E24 values cannot hold is warned about (exit 4).
    case = ("butterworth", 2, 1000.0, "bandpass", 100.0, None, "E24")
    out = tmp_path / "bp.json"
    proc = cli(*design_args(case, out), "--accept-error")
    assert proc.returncode == 0
    err = errors(load(out), case)
    assert err["bandwidth"] <= LIMITS["bandwidth"] and err["cutoff"] <= LIMITS["cutoff"]
    fine = ("butterworth", 2, 1000.0, "bandpass", 100.0, None, "E96")
    assert cli(*design_args(fine, out)).returncode == 0
    assert all(v <= LIMITS[k] * (1 + SLACK) for k, v in errors(load(out), fine).items())


def test_chebyshev_highpass_keeps_its_ripple_and_gets_a_passband_ceiling(tmp_path):
    # Chebyshev 0.5 dB high-pass order 5: before, the ripple became a 1.0 dB peak and the
    # starting mask had no passband ceiling. The ideal (scipy cheby1) peaks at the
    # high-frequency reference for an odd order, so the ceiling is 0 + 0.5 dB allowance.
    case = ("chebyshev", 5, 1000.0, "highpass", None, 0.5, "E24")
    out = tmp_path / "hp.json"
    assert cli(*design_args(case, out)).returncode == 0
    d = load(out)
    err = errors(d, case)
    assert err["ripple_db"] <= LIMITS["ripple_db"] and err["shape_db"] <= LIMITS["shape_db"]
    ceilings = [s for s in d.mask if s.kind == "ceiling" and s.f1 <= 1000.0 * 1.0001 and s.f2 > 2000.0]
    assert len(ceilings) == 1 and ceilings[0].relative
    assert ceilings[0].limit1 == pytest.approx(0.5, abs=1e-9)
    # the nominal built design passes it: its peak over the ceiling span, measured here
    f = np.geomspace(ceilings[0].f1, ceilings[0].f2, 4001)
    peak = float(np.max(engine_gain_db(d, f))) - engine_gain_db(d, np.array([1e8]))[0]
    assert peak <= ceilings[0].limit1


def test_butterworth_lowpass_order_4_sections_keep_f0(tmp_path):
    # Before: section 1 f0 +4.85 % (both resistors rounded down). Sallen-Key closed form
    # (tests/REFERENCES.md section 6) on the written values; targets from scipy's butter poles.
    case = ("butterworth", 4, 1000.0, "lowpass", None, None, "E24")
    out = tmp_path / "lp.json"
    proc = cli(*design_args(case, out))
    assert proc.returncode == 0, proc.stderr
    d = load(out)
    pairs = sorted(q for _, q in ideal_pairs(case))
    for k, want_q in enumerate(pairs):
        f0, q = sk_lowpass_closed_form(values_by_role(d, k))
        assert abs(f0 / 1000.0 - 1) <= LIMITS["f0"]
        assert abs(q / want_q - 1) <= LIMITS["q"]


def test_limits_can_be_changed_and_are_named_in_the_warning(tmp_path):
    case = ("butterworth", 4, 1000.0, "lowpass", None, None, "E24")
    out = tmp_path / "lp.json"
    proc = cli(*design_args(case, out), "--max-cutoff-error", "0.01%")
    assert proc.returncode == EXIT_OUT_OF_LIMITS
    assert "cutoff" in proc.stderr and "limit 0.01%" in proc.stderr
    bad = cli(*design_args(case, out), "--max-q-error", "-3")
    assert bad.returncode == EXIT_BAD_INPUT and "--max-q-error" in bad.stderr


# --- defect 14: values in a practical range, or a refusal naming the option ---------------

@pytest.mark.parametrize("cutoff", ["1G", "1m"])
def test_unbuildable_cutoff_is_refused_naming_the_option(cutoff, tmp_path):
    # 1 GHz would need 360 mohm resistors, 1 mHz 160 Mohm and 8.2 uF (issue 10); no
    # impedance level keeps 1 kohm..1 Mohm and 100 pF..1 uF, whose RC products alone span
    # 1/(2 pi 1k 100p) = 1.59 MHz down to 1/(2 pi 1M 1u) = 0.159 Hz (computed here); the
    # message names the narrower window of the hardest section, inside those.
    out = tmp_path / "x.json"
    proc = cli("design", "--response", "butterworth", "--order", "4", "--cutoff", cutoff, "-o", str(out))
    assert proc.returncode == EXIT_BAD_INPUT
    assert proc.stderr.count("\n") == 1 and "--cutoff" in proc.stderr
    assert "1 kohm to 1 Mohm" in proc.stderr and "100 pF to 1 uF" in proc.stderr
    words = proc.stderr.split("from about ")[1].split()
    lo, hi = (parse_value(words[0] + words[1]), parse_value(words[3] + words[4]))
    assert 1 / (2 * math.pi * 1e6 * 1e-6) <= lo < hi <= 1 / (2 * math.pi * 1e3 * 100e-12)
    assert not out.exists()


@pytest.mark.parametrize("cutoff", ["0.5", "500k"])
def test_cutoffs_near_the_range_ends_build_in_range(cutoff, tmp_path):
    out = tmp_path / "x.json"
    proc = cli("design", "--response", "butterworth", "--order", "2", "--cutoff", cutoff, "--series", "E96",
               "-o", str(out), "--accept-error")
    assert proc.returncode == 0, proc.stderr
    assert_practical_values(load(out))


# --- the dialog, driven with keys and clicks ------------------------------------------------

@pytest.fixture
def dialog(qtbot):
    from tolspread.app.qt_synthesis_dialog import SynthesisDialog

    d = SynthesisDialog()
    qtbot.addWidget(d)
    d.show()
    qtbot.waitExposed(d)
    return d


def _type(qtbot, widget, text: str) -> None:
    from PySide6.QtCore import Qt

    widget.setFocus()
    qtbot.keyClick(widget, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier)
    qtbot.keyClick(widget, Qt.Key.Key_Delete)
    qtbot.keyClicks(widget, text)


def test_dialog_shows_the_error_report_and_asks_before_accepting(dialog, qtbot):
    from PySide6.QtCore import QPoint, Qt

    # band-pass, Butterworth order 2, 1 kHz, 100 Hz wide, E24: beyond the Q limit (above)
    dialog.kind.setFocus()
    qtbot.keyClicks(dialog.kind, "band")
    assert dialog.kind.currentData() == "bandpass"
    _type(qtbot, dialog.order, "2")
    _type(qtbot, dialog.cutoff, "1k")
    _type(qtbot, dialog.bandwidth, "100")
    text = dialog.preview.toPlainText()
    assert "against the ideal response (scipy.signal)" in text
    for figure in ("centre", "bandwidth", "S1 Q", "passband shape", "passband ripple"):
        assert figure in text
    assert "EXCEEDS" in text
    assert dialog.warning.isVisible() and "beyond the limits" in dialog.warning.text()
    assert dialog.accept_errors.isVisible() and not dialog.ok_button.isEnabled()
    with qtbot.assertNotEmitted(dialog.accepted):
        qtbot.mouseClick(dialog.ok_button, Qt.MouseButton.LeftButton)
    # the user accepts in words, then OK closes the dialog with that design
    qtbot.mouseClick(dialog.accept_errors, Qt.MouseButton.LeftButton,
                     pos=QPoint(8, dialog.accept_errors.height() // 2))  # on its box
    assert dialog.accept_errors.isChecked() and dialog.ok_button.isEnabled()
    # a changed design needs its own acceptance
    _type(qtbot, dialog.bandwidth, "110")  # also beyond the Q limit with E24 (measured here)
    assert not dialog.accept_errors.isChecked() and not dialog.ok_button.isEnabled()
    qtbot.mouseClick(dialog.accept_errors, Qt.MouseButton.LeftButton, pos=QPoint(8, dialog.accept_errors.height() // 2))
    with qtbot.waitSignal(dialog.accepted, timeout=2000):
        qtbot.mouseClick(dialog.ok_button, Qt.MouseButton.LeftButton)
    assert dialog.result().exceeded


def test_dialog_within_limits_needs_no_acceptance_and_refuses_out_of_range(dialog, qtbot):
    from PySide6.QtCore import Qt

    _type(qtbot, dialog.cutoff, "2k")
    assert "EXCEEDS" not in dialog.preview.toPlainText()
    assert not dialog.warning.isVisible() and not dialog.accept_errors.isVisible()
    assert dialog.ok_button.isEnabled()
    _type(qtbot, dialog.cutoff, "1G")
    assert not dialog.ok_button.isEnabled()
    assert dialog.problems["cutoff"].isVisible()
    assert "1 kohm to 1 Mohm" in dialog.problems["cutoff"].text()
    _type(qtbot, dialog.cutoff, "5k")
    with qtbot.waitSignal(dialog.accepted, timeout=2000):
        qtbot.mouseClick(dialog.ok_button, Qt.MouseButton.LeftButton)
    assert not dialog.result().exceeded


# --- gain at the centre of a band-pass ----------------------------------------------------

def _mfb_bandpass_closed_form(v: dict[str, float]) -> tuple[list[float], list[float]]:
    """Numerator and denominator (descending powers of s) of the multiple-feedback band-pass
    as laid out in filters/topologies.py (R1 in-A, R2 A-ground, C1 A-N, C2 A-out, R3 out-N),
    by nodal analysis written here with an ideal op-amp (N at virtual ground):
    H = -(s / (R1 C2)) / (s^2 + s (C1 + C2) / (C1 C2 R3) + (1/R1 + 1/R2) / (C1 C2 R3));
    with C1 = C2 this is the form of tests/REFERENCES.md section 6 (bandwidth 2/(R3 C))."""
    c1c2r3 = v["C1"] * v["C2"] * v["R3"]
    return ([-1 / (v["R1"] * v["C2"]), 0.0],
            [1.0, (v["C1"] + v["C2"]) / c1c2r3, (1 / v["R1"] + 1 / v["R2"]) / c1c2r3])


def test_stagger_tuned_bandpass_is_near_0_db_at_its_centre(tmp_path):
    # Before: each section's midband gain was min(1, Q^2), so two stagger-tuned sections lost
    # 6.7 dB at the centre. Now each section makes up its own loss there. The cascade is
    # evaluated here with scipy.signal.freqs on the closed forms above, not with the engine.
    from scipy.signal import freqs
    case = ("butterworth", 2, 1000.0, "bandpass", 300.0, None, "E96")
    out = tmp_path / "bp.json"
    proc = cli(*design_args(case, out))
    assert proc.returncode == 0, proc.stderr
    design = load(out)
    w = np.array([2 * math.pi * 1000.0])
    h = np.ones(1, dtype=complex)
    for k in range(len(design.stages)):
        b, a = _mfb_bandpass_closed_form(values_by_role(design, k))
        h = h * freqs(b, a, worN=w)[1]
    assert 20 * math.log10(abs(h[0])) == pytest.approx(0.0, abs=0.5)
    assert "gain at the centre" in proc.stdout and "NOTE" not in proc.stdout


def test_wide_bandpass_says_in_words_that_it_loses_gain_at_its_centre(tmp_path):
    # Low-Q sections (Q 0.57 for a band three times as wide as its centre) can give at most
    # Q^2 each: the report must say so rather than leave a -40 dB passband unremarked.
    case = ("butterworth", 4, 10e3, "bandpass", 30e3, None, "E24")
    proc = cli(*design_args(case, tmp_path / "wide.json"))
    assert proc.returncode == 0, proc.stderr
    assert "NOTE: this band-pass loses" in proc.stdout and "high-pass design followed by a low-pass" in proc.stdout
