"""The attenuation metric at chosen frequencies, from the design file and the command line."""
from __future__ import annotations

import json
import math

import numpy as np
import pytest
from scipy import signal

from tolspread.app.cli import main
from tolspread.design import design_from_dict
from tolspread.designfile import dumps, loads
from tolspread.evaluate import evaluate


def butterworth4(fc: float = 1000.0, attenuation=(2000.0,)):
    # A 4th-order Butterworth as two unity-gain Sallen-Key stages with exact values for
    # Q = 0.5412 and 1.3066 (tests/REFERENCES.md section 5, Carter & Mancini Table 16.7 [C]);
    # equal resistors R: C1/C2 = 4 Q^2, w0 = 1/(R sqrt(C1 C2)).
    parts, stages, k = [], [], 0
    for q in (0.5411961, 1.3065630):
        r, c2 = 10e3, 10e-9
        c1 = 4 * q * q * c2
        w0 = 1 / (r * math.sqrt(c1 * c2))
        scale = w0 / (2 * math.pi * fc)  # move f0 to fc by scaling both capacitors
        refs = [f"R{k + 1}", f"R{k + 2}", f"C{k + 1}", f"C{k + 2}"]
        parts += [{"ref": refs[0], "value": r, "grade": "EXACT"}, {"ref": refs[1], "value": r, "grade": "EXACT"},
                  {"ref": refs[2], "value": c1 * scale, "grade": "EXACT"},
                  {"ref": refs[3], "value": c2 * scale, "grade": "EXACT"}]
        stages.append({"topology": "sallen_key_lowpass",
                       "parts": {"R1": refs[0], "R2": refs[1], "C1": refs[2], "C2": refs[3]}})
        k += 2
    return {"format": "tolspread-design", "version": 2, "parts": parts, "stages": stages,
            "analysis": {"samples": 10, "f_start": 10, "f_stop": 1e5, "attenuation_at_hz": list(attenuation)}}


def test_attenuation_of_a_butterworth_matches_the_closed_form():
    # Butterworth attenuation 10 log10(1 + (f/fc)^(2n)) dB (tests/REFERENCES.md section 5 [D]),
    # and scipy.signal.butter(4, wc, analog=True) as the reference library.
    d = design_from_dict(butterworth4(attenuation=(2000.0, 5000.0)))
    m = evaluate(d, samples=3).metrics
    for f in (2000.0, 5000.0):
        want = 10 * math.log10(1 + (f / 1000.0) ** 8)
        np.testing.assert_allclose(m[f"attenuation_db@{f:g}"], want, rtol=1e-6)
        b, a = signal.butter(4, 2 * math.pi * 1000.0, analog=True)
        _, h = signal.freqs(b, a, worN=[2 * math.pi * f])
        np.testing.assert_allclose(m[f"attenuation_db@{f:g}"], -20 * np.log10(abs(h[0])), rtol=1e-6)


def test_attenuation_frequencies_survive_a_save_and_load():
    d = design_from_dict(butterworth4(attenuation=(2000.0, 3000.0)))
    assert loads(dumps(d)) == d
    assert loads(dumps(d)).analysis.attenuation_hz == (2000.0, 3000.0)


def test_bad_attenuation_frequencies_name_the_field():
    bad = butterworth4()
    bad["analysis"]["attenuation_at_hz"] = [-1]
    with pytest.raises(ValueError) as info:
        design_from_dict(bad)
    assert "analysis.attenuation_at_hz" in str(info.value)


def test_command_line_reports_attenuation(tmp_path, capsys):
    out = tmp_path / "r.json"
    assert main(["analyze", "--samples", "200", "--attenuation-at", "6k", "--json", str(out)]) == 0
    data = json.loads(out.read_text())
    s = data["metrics"]["attenuation_db@6000"]
    assert s["p01"] <= s["mean"] <= s["p99"] and 30 < s["nominal"] < 45
    assert "attenuation at 6 kHz" in capsys.readouterr().out
    assert main(["analyze", "--attenuation-at", "abc"]) == 2
