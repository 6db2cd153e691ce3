"""Channels that must match (issue 15 item 6).

Sources named beside each check:
  [VAR]   variance of a difference of two independent, identically distributed variables is
          twice the variance of one (common practice; first order: each channel's band-mean
          gain is, to first order, a linear function of its own parts' deviations).
  [SK]    REFERENCES.md section 6: the unity-gain Sallen-Key low-pass transfer function.
  [GUM]   REFERENCES.md section 4: first-order propagation (GUM 5.1.6).
  numpy   the channels' responses evaluated by the library per channel and compared in numpy
          (max |difference| over the band), an independent restatement of the match rule.
"""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from cli_runs import analyze_json, refused_first_line  # shared: tests/cli_runs.py

from tolspread.channels import channel_values
from tolspread.design import design_from_dict
from tolspread.evaluate import evaluate, evaluate_values, prepare, scores_for
from tolspread.metric_names import mismatch_name, unit

EXAMPLE = Path(__file__).resolve().parent.parent / "assets" / "examples" / "matched_iq_channels.json"

GAIN_MATCH = {"kind": "match", "quantity": "gain", "f1": 100, "f2": 2000, "limit1": 0.05, "name": "gain match"}
PHASE_MATCH = {"kind": "match", "quantity": "phase", "f1": 100, "f2": 2000, "limit1": 0.5, "name": "phase match"}


def two_channels(*, shared=None, lot_share=0.0, mask=(GAIN_MATCH, PHASE_MATCH), count=2) -> dict:
    data = {
        "format": "tolspread-design", "version": 2, "name": "test (invented)",
        "parts": [{"ref": "R1", "value": "10k", "grade": "R-thick-1"},
                  {"ref": "R2", "value": "10k", "grade": "R-thick-1"},
                  {"ref": "C1", "value": "22n", "grade": "C-C0G-2"},
                  {"ref": "C2", "value": "10n", "grade": "C-C0G-2"}],
        "stages": [{"topology": "sallen_key_lowpass",
                    "parts": {"R1": "R1", "R2": "R2", "C1": "C1", "C2": "C2"}}],
        "channels": {"count": count},
        "analysis": {"f_start": 10, "f_stop": 100000, "points": 80, "lot_share": lot_share},
        "mask": list(mask),
    }
    if shared is not None:
        data["channels"]["shared"] = shared
    return data


@pytest.mark.parametrize("how", ["shared parts", "one reel (lot share 1)"])
def test_channels_with_shared_parts_have_zero_mismatch(how):
    data = (two_channels(shared=["R1", "R2", "C1", "C2"]) if how == "shared parts"
            else two_channels(lot_share=1.0))  # at 25 deg C, no drift: a reel gives every copy one value
    design = design_from_dict(data)
    ens = evaluate(design, samples=400, seed=1, curves=False)
    assert np.all(ens.metrics[mismatch_name("gain match")] == 0.0)
    assert np.all(ens.margins[:, 0] == 0.05) and np.all(ens.margins[:, 1] == 0.5)
    assert ens.passed.all()


def test_a_shared_part_is_one_value_in_every_channel_even_in_a_network():
    data = two_channels(shared=["R1"])
    data["networks"] = [{"name": "RN1", "members": ["R1", "R2"], "tolerance_pct": 1, "ratio_pct": 0.2}]
    design = design_from_dict(data)
    prep = prepare(design)
    every = channel_values(design, prep.nominal.values, design.part_grades(), scores_for(design, 200, 5, "random"),
                           design.analysis.conditions, 5, "random", 0)
    assert np.array_equal(every[0][:, 0], every[1][:, 0])  # R1 is one part on the board
    assert not np.array_equal(every[0][:, 1], every[1][:, 1])  # R2 is one per channel


@pytest.mark.parametrize("method", ["random", "sobol"])
def test_independent_channels_mismatch_variance_is_twice_one_channel(method):
    # with Sobol sampling a second scrambled Sobol stream for channel 2 would share channel 1's
    # leading bits and make the channels alike (a defect found while writing this test)
    design = design_from_dict(two_channels())
    ens = evaluate(design, samples=4096, seed=7, curves=True, method=method)
    band = (ens.freqs_hz >= 100) & (ens.freqs_hz <= 2000)
    one_channel = ens.gain_db[:, band].mean(axis=1)  # channel 1's band-mean gain (dB)
    mismatch = ens.metrics[mismatch_name("gain match")]  # channel 2 minus channel 1, band mean
    # [VAR]: Var(G2 - G1) = 2 Var(G1) for independent channels, to first order; numpy sample
    # variances of 4,096 boards (relative standard error ~2 % each)
    assert np.var(mismatch, ddof=1) == pytest.approx(2 * np.var(one_channel, ddof=1), rel=0.1)
    assert unit(mismatch_name("gain match"), design.mask) == "dB"


def test_match_margin_is_the_limit_minus_the_largest_channel_difference():
    design = design_from_dict(two_channels())
    n = 300
    ens = evaluate(design, samples=n, seed=3, curves=False)
    prep = prepare(design)
    every = channel_values(design, prep.nominal.values, design.part_grades(), scores_for(design, n, 3, "random"),
                           design.analysis.conditions, 3, "random", 0)
    # each channel evaluated alone by the library, then compared in numpy
    g = [evaluate_values(prep, every[c], phase=True).response for c in range(2)]
    cols = (prep.freqs_hz >= 100) & (prep.freqs_hz <= 2000)
    gain_diff = np.abs(g[1].gain_db[:, cols] - g[0].gain_db[:, cols]).max(axis=1)
    phase_diff = np.abs(g[1].phase_deg[:, cols] - g[0].phase_deg[:, cols]).max(axis=1)
    np.testing.assert_allclose(ens.margins[:, 0], 0.05 - gain_diff, rtol=0, atol=1e-12)
    np.testing.assert_allclose(ens.margins[:, 1], 0.5 - phase_diff, rtol=0, atol=1e-9)
    # the matched set's yield: a board passes only when both match spans pass
    assert np.array_equal(ens.passed, (gain_diff <= 0.05) & (phase_diff <= 0.5))
    # channel 1 is the board a one-channel design draws (common random numbers)
    single = evaluate(design_from_dict(two_channels(mask=(), count=1)), samples=n, seed=3, curves=False)
    assert np.array_equal(single.values, ens.values)


def test_mismatch_budget_matches_first_order_propagation():
    design = design_from_dict(two_channels(shared=["C2"]))
    n = 3000
    ens = evaluate(design, samples=n, seed=2, curves=False)
    from tolspread.budget import spread_budget

    prep = prepare(design)
    b = spread_budget(ens, prep, ["margin.gain match"])["margin.gain match"]
    shares = {e.ref: e.share for e in b.entries}
    assert shares["C2"] == 0.0  # one part serves both channels: no channel difference to explain

    # [SK] unity-gain Sallen-Key low-pass: H = 1 / (1 + s C2 (R1 + R2) + s^2 R1 R2 C1 C2)
    # (REFERENCES.md section 6); the band-mean gain in dB over the span's grid points
    f = prep.freqs_hz[(prep.freqs_hz >= 100) & (prep.freqs_hz <= 2000)]
    s = 2j * np.pi * f

    def band_mean_db(r1, r2, c1, c2):
        return np.mean(-20 * np.log10(np.abs(1 + s * c2 * (r1 + r2) + s * s * r1 * r2 * c1 * c2)))

    nom = np.array([10e3, 10e3, 22e-9, 10e-9])
    h = 1e-6
    sens = np.array([(band_mean_db(*(nom * np.exp(h * np.eye(4)[i]))) - band_mean_db(*(nom * np.exp(-h * np.eye(4)[i]))))
                     / (2 * h) for i in range(4)])
    every = channel_values(design, prep.nominal.values, design.part_grades(), scores_for(design, n, 2, "random"),
                           design.analysis.conditions, 2, "random", 0)
    var_dx = np.var(np.log(every[1] / every[0]), axis=0, ddof=1)  # numpy sample variances
    # first-order propagation [GUM 5.1.6 via REFERENCES.md section 4]: share_i = S_i^2 Var(dx_i) / sum
    predicted = sens ** 2 * var_dx / np.sum(sens ** 2 * var_dx)
    got = np.array([shares[r] for r in ("R1", "R2", "C1", "C2")])
    np.testing.assert_allclose(got, predicted, atol=0.03)
    assert b.remainder < 0.05


def test_analyze_the_channels_example_on_the_command_line(tmp_path):
    data = analyze_json(EXAMPLE, tmp_path)
    assert any(k.startswith("mismatch.") for k in data["metrics"])


@pytest.mark.parametrize("data, field", [
    (two_channels(count=1), "mask[0].kind"),  # a match span on a one-channel design
    (two_channels(shared=["R9"]), "channels.shared"),
    (two_channels(count=0), "channels.count"),
    (two_channels(mask=({**GAIN_MATCH, "limit1": 0},)), "mask[0].limit1"),
])
def test_bad_channels_exit_2_naming_the_field(tmp_path, data, field):
    assert field in refused_first_line(data, tmp_path)


def test_channels_survive_save_and_load():
    from tolspread.designfile import design_to_dict

    design = design_from_dict(two_channels(shared=["C2"]))
    again = design_from_dict(json.loads(json.dumps(design_to_dict(design))))
    assert again.channels == design.channels and again.mask == design.mask


def test_report_states_the_match_spans_networks_and_channels(tmp_path):
    from cli_runs import run_cli

    report = tmp_path / "review.html"
    proc = run_cli("analyze", str(EXAMPLE), "--samples", "300", "--report", str(report))
    assert proc.returncode == 0, proc.stderr
    text = report.read_text(encoding="utf-8")
    # the limits as the design file states them (0.1 dB, 1 deg), in words
    assert "I/Q gain match: gain difference between any two channels at most 0.1 dB" in text
    assert "I/Q phase match: phase difference between any two channels at most 1 deg" in text
    assert "2 identical channels on each board" in text
    assert "Network RN1 (R1, R2) (one package for all channels)" in text
    # corners cannot judge a difference between channels: both reports say so
    assert "Match spans have no corners" in text
    assert "match spans have no corners" in run_cli("analyze", str(EXAMPLE), "--samples", "300").stdout
