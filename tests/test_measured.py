"""Measured parts (tolspread.measured, ``tolspread measure``) against outside checks.

Checks: the bootstrap yield of a one-part design against the fraction of measured values
inside the passing band, counted with numpy; the spread of that yield over resampled
measured sets against the binomial standard deviation sqrt(q (1 - q) / n) of a proportion
(the bootstrap of a proportion); CSV errors with their line numbers; the command line as a
user runs it (subprocess).
"""
from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from scipy import stats

from designs import rc_capacitor_band
from tolspread.designfile import design_to_dict, load
from tolspread.design import design_from_dict
from tolspread.errors import InputError
from tolspread.evaluate import evaluate
from tolspread.measured import measured_yield, read_measured_csv

C_LO, C_HI = 10.2e-9, 11.6e-9


def _values(n: int, seed: int = 0) -> np.ndarray:
    # an invented reel: 10n parts centred 1 % high with 3 % spread
    return 10e-9 * (1.01 + 0.03 * np.random.default_rng(seed).standard_normal(n))


def _csv(path, values, header: str | None = "value", extra=None) -> None:
    lines = [header] if header else []
    for k, v in enumerate(values):
        cells = [f"{v * 1e9:.5f}n"] + ([] if extra is None else [str(x) for x in extra(k)])
        lines.append(",".join(cells))
    path.write_text("\n".join(lines) + "\n")


def _band(tmp_path, measured_values=None) -> dict:
    data = rc_capacitor_band({"name": "C-test-5", "kind": "C", "tolerance_pct": 5.0}, C_LO, C_HI,
                             samples=40000, seed=2)
    if measured_values is not None:
        data["parts"][1]["measured"] = {"values": list(map(float, measured_values)), "source": "reel.csv"}
    return data


def test_csv_forms_and_errors(tmp_path):
    v = _values(30)
    p = tmp_path / "a.csv"
    _csv(p, v, header=None)
    m = read_measured_csv(p)
    assert np.allclose(m.values, np.round(v * 1e9, 5) * 1e-9) and m.lot_count == 1
    _csv(p, v, header="value,lot", extra=lambda k: [f"L{k % 3}"])
    assert read_measured_csv(p).lot_count == 3
    p.write_text("value\n10n\n10.1n\nten\n")
    with pytest.raises(InputError, match="line 4"):
        read_measured_csv(p)
    p.write_text("value\n" + "10n\n" * 5)
    with pytest.raises(InputError, match="at least 10"):
        read_measured_csv(p)
    p.write_text("value,colour\n10n,red\n")
    with pytest.raises(InputError, match="line 1"):
        read_measured_csv(p)


def test_bootstrap_yield_matches_the_measured_fraction(tmp_path):
    v = _values(50)
    design = design_from_dict(_band(tmp_path, v))
    q = float(np.mean((v >= C_LO) & (v <= C_HI)))  # numpy count of the measured values that pass
    ens = evaluate(design, curves=False, metrics=False)
    k = int(ens.passed.sum())
    ci = stats.binomtest(k, ens.samples).proportion_ci(0.999, method="wilson")
    assert ci.low <= q <= ci.high
    # the design file keeps the measured values
    again = design_from_dict(design_to_dict(design))
    assert again.parts[1].measured == design.parts[1].measured


def test_measurement_spread_matches_a_proportions_bootstrap(tmp_path):
    v = _values(50, seed=4)
    design = design_from_dict(_band(tmp_path, v))
    q = float(np.mean((v >= C_LO) & (v <= C_HI)))
    res = measured_yield(design, samples=20000, replicates=200)
    # bootstrap of a proportion of n = 50 values: sd = sqrt(q (1 - q) / n) (binomial variance);
    # each replicate also carries the boards' noise, sqrt(q (1 - q) / 20000), which is small
    expected = math.sqrt(q * (1 - q) / 50)
    assert res.measurement_sd == pytest.approx(expected, rel=0.25)
    assert res.low < res.estimate < res.high
    assert res.high - res.low > 2 * 1.9 * expected  # the interval holds the measurement's spread


def test_measured_yield_stops_when_asked(tmp_path):
    # the window's background run: should_stop() true after k questions ends it with Cancelled
    from tolspread.errors import Cancelled

    design = design_from_dict(_band(tmp_path, _values(30)))
    asked = []

    def stop() -> bool:
        asked.append(1)
        return len(asked) > 3

    with pytest.raises(Cancelled):
        measured_yield(design, samples=2000, replicates=50, should_stop=stop)
    assert len(asked) < 50  # it did not run the remaining replicates


def test_measure_command(tmp_path):
    design = tmp_path / "band.json"
    design.write_text(json.dumps(_band(tmp_path)))
    reel = tmp_path / "reel_c1.csv"
    _csv(reel, _values(40))
    out = tmp_path / "measured.json"
    r = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "measure", str(design), "--part",
                        f"C1={reel}", "--samples", "4000", "-o", str(out)], capture_output=True, text=True,
                       timeout=300)
    assert r.returncode == 0, r.stderr
    assert "reel_c1.csv" in r.stdout and "lot-to-lot" in r.stdout and "grades' model" in r.stdout
    assert load(str(out)).parts[1].measured is not None
    bad = tmp_path / "bad.csv"
    bad.write_text("10n\n10.2n\n-3n\n")
    r = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "measure", str(design), "--part",
                        f"C1={bad}"], capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and "bad.csv line 3" in r.stderr and "Traceback" not in r.stderr
    r = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "measure", str(design), "--part", "C1"],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and "REF=CSV" in r.stderr
