"""The command line ``tolspread analyze``: output, JSON, reproducibility, and bad input that
ends in one line on stderr with exit status 2 and never a traceback.

Most tests call ``app.cli.main(argv)`` in-process; one runs ``python -m app.cli`` as a
subprocess to see what a user sees. References are named beside each check.
REFERENCES.md tags: [C] confirmed in a stored copy of the published document, [M] from
memory (not confirmed), [D] derived by computation.
"""
from __future__ import annotations

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from scipy import optimize, stats

from app.cli import main
from filters.designfile import demo_text, load_demo

EXIT_BAD_INPUT = 2  # README: bad input gives exit status 2
SMALL = "400"  # samples for quick runs


def run(argv: list[str], capsys) -> tuple[int, str, str]:
    """Exit status, stdout and stderr of ``tolspread ARGV``, run in-process.

    argparse ends a usage error with SystemExit; the process exit status is its code, so
    it is taken as the status here. Any other exception fails the test (it would be a
    traceback for the user).
    """
    try:
        code = main(argv)
    except SystemExit as exc:
        code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    out, err = capsys.readouterr()
    assert "Traceback" not in err
    assert "Traceback" not in out
    return code, out, err


def _json_run(capsys, *extra: str) -> dict:
    code, out, err = run(["analyze", "--samples", SMALL, *extra, "--json", "-"], capsys)
    assert code == 0, err
    return json.loads(out)


def _rc_file(tmp_path: Path, **over) -> Path:
    data = {
        "format": "tolspread-design", "version": 1, "name": "RC corner",
        "parts": [{"ref": "R1", "value": "10k", "grade": "R-thick-1"},
                  {"ref": "C1", "value": "10n", "grade": "C-C0G-5"}],
        "stages": [{"topology": "rc_lowpass", "options": {"sections": 1}, "parts": {"R1": "R1", "C1": "C1"}}],
        "analysis": {"samples": 500, "seed": 1, "f_start": 10, "f_stop": 1e6, "points": 200},
    }
    data.update(over)
    p = tmp_path / "design.json"
    p.write_text(json.dumps(data), encoding="utf-8")
    return p


# --- the demo ----------------------------------------------------------------------------------

def _demo_closed_form() -> dict[str, float]:
    """Nominal numbers of the demo from closed forms, not from the code under test.

    Unity-gain Sallen-Key low-pass: H = 1/(s^2 R1R2C1C2 + s C2(R1+R2) + 1) (REFERENCES.md
    section 6, [D], layout after TI SLOA024 [M]). Cutoff where |H1 H2| is 3 dB below DC,
    found with scipy.optimize.brentq.
    """
    d = load_demo()
    stages = []
    for s in d.stages:
        v = {role: d.parts[d.part_index(ref)].value for role, ref in s.roles.items()}
        stages.append((v["R1"] * v["R2"] * v["C1"] * v["C2"], v["C2"] * (v["R1"] + v["R2"])))

    def gain_db(f: float) -> float:
        w = 2 * math.pi * f
        return sum(-10 * math.log10((1 - b * w * w) ** 2 + (a * w) ** 2) for b, a in stages)

    fc = optimize.brentq(lambda f: gain_db(f) + 3.0, 500.0, 20_000.0, xtol=1e-9, rtol=1e-13)
    out = {"cutoff_hz": fc}
    for k, (b, a) in enumerate(stages, 1):
        out[f"s{k}.f0_hz"] = 1 / (2 * math.pi * math.sqrt(b))
        out[f"s{k}.q"] = math.sqrt(b) / a
    out["stages"] = stages  # type: ignore[assignment]
    return out


def test_analyze_demo_prints_the_cutoff(capsys):
    code, out, err = run(["analyze", "--samples", SMALL], capsys)
    assert code == 0, err
    assert "cutoff" in out
    assert f"{SMALL} sampled boards" in out
    assert err == ""


def test_json_nominal_numbers_match_closed_forms(capsys):
    doc = _json_run(capsys)
    ref = _demo_closed_form()
    m = doc["metrics"]
    assert m["cutoff_hz"]["nominal"] == pytest.approx(ref["cutoff_hz"], rel=1e-6)
    for k in ("s1.f0_hz", "s1.q", "s2.f0_hz", "s2.q"):
        assert m[k]["nominal"] == pytest.approx(ref[k], rel=1e-9), k


def test_json_file_has_the_documented_keys_and_consistent_values(tmp_path, capsys):
    out_path = tmp_path / "result.json"
    code, out, err = run(["analyze", "--samples", SMALL, "--seed", "17", "--json", str(out_path)], capsys)
    assert code == 0, err
    assert "cutoff" in out  # the summary is still printed when the JSON goes to a file
    doc = json.loads(out_path.read_text("utf-8"))
    assert doc["samples"] == int(SMALL)
    assert doc["seed"] == 17
    c = doc["metrics"]["cutoff_hz"]
    for key in ("nominal", "mean", "std", "p01", "p99"):
        assert isinstance(c[key], float) and math.isfinite(c[key]), key
    assert c["p01"] < c["mean"] < c["p99"]
    assert c["p01"] < c["nominal"] < c["p99"]
    assert c["std"] > 0
    assert c.get("valid", int(SMALL)) == int(SMALL)


def test_json_cutoff_spread_matches_first_order_propagation(capsys):
    # GUM 5.1.6 law of propagation (REFERENCES.md section 4, [M] from memory), first order:
    # u(fc)/fc = sqrt(sum (S_i u_i)^2), S_i = d ln fc / d ln x_i taken by central
    # differences of the closed-form cutoff. u_i: the demo's grades are truncated normals
    # at coverage 2 (README), so u_i = tol/2 * truncnorm(-2, 2).std() (reference library).
    n = 4000
    code, out, err = run(["analyze", "--samples", str(n), "--json", "-"], capsys)
    assert code == 0, err
    c = json.loads(out)["metrics"]["cutoff_hz"]
    d = load_demo()
    values = {p.ref: p.value for p in d.parts}
    tol = {p.ref: d.catalog[p.grade].tolerance_pct / 100 for p in d.parts}
    shrink = stats.truncnorm(-2, 2).std()

    def fc_of(vals: dict[str, float]) -> float:
        stages = []
        for s in d.stages:
            v = {role: vals[ref] for role, ref in s.roles.items()}
            stages.append((v["R1"] * v["R2"] * v["C1"] * v["C2"], v["C2"] * (v["R1"] + v["R2"])))

        def g(f: float) -> float:
            w = 2 * math.pi * f
            return sum(-10 * math.log10((1 - b * w * w) ** 2 + (a * w) ** 2) for b, a in stages) + 3.0

        return optimize.brentq(g, 500.0, 20_000.0, xtol=1e-10, rtol=1e-14)

    h = 1e-4
    var = 0.0
    for ref in values:
        up = dict(values, **{ref: values[ref] * math.exp(h)})
        dn = dict(values, **{ref: values[ref] * math.exp(-h)})
        sens = (math.log(fc_of(up)) - math.log(fc_of(dn))) / (2 * h)
        var += (sens * tol[ref] / 2 * shrink) ** 2
    predicted = math.sqrt(var)
    rel = c["std"] / c["nominal"]
    # std of a sample std ~ sigma/sqrt(2N), 5 of those, plus 1 % for first order
    assert abs(rel / predicted - 1) < 5 / math.sqrt(2 * n) + 0.01
    # mean within 5 standard errors of the nominal, plus a second-order shift of the
    # order of (relative std)^2 times the cutoff
    assert abs(c["mean"] - c["nominal"]) < 5 * c["std"] / math.sqrt(n) + rel ** 2 * c["nominal"]


def test_json_to_stdout_is_pure_json(capsys):
    doc = _json_run(capsys)
    assert doc["samples"] == int(SMALL)
    # without --seed the design's own seed is used
    assert doc["seed"] == json.loads(demo_text())["analysis"]["seed"]
    assert set(doc["metrics"]["cutoff_hz"]) >= {"nominal", "mean", "std", "p01", "p99"}


def test_same_seed_same_json_other_seed_other_numbers(capsys):
    a = _json_run(capsys, "--seed", "5")
    b = _json_run(capsys, "--seed", "5")
    c = _json_run(capsys, "--seed", "6")
    assert a == b
    assert a["metrics"]["cutoff_hz"]["mean"] != c["metrics"]["cutoff_hz"]["mean"]
    assert a["metrics"]["cutoff_hz"]["nominal"] == c["metrics"]["cutoff_hz"]["nominal"]


def test_analyze_a_design_file(tmp_path, capsys):
    p = _rc_file(tmp_path)
    code, out, err = run(["analyze", str(p), "--json", "-"], capsys)
    assert code == 0, err
    doc = json.loads(out)
    assert doc["samples"] == 500 and doc["seed"] == 1
    # first-order RC: nominal 3 dB cutoff of |H|^2 = 1/(1 + (wRC)^2) is
    # sqrt(10^0.3 - 1)/(2 pi R C) (closed form)
    expected = math.sqrt(10 ** 0.3 - 1) / (2 * math.pi * 10e3 * 10e-9)
    assert doc["metrics"]["cutoff_hz"]["nominal"] == pytest.approx(expected, rel=1e-7)


def test_help_exits_0(capsys):
    code, out, _ = run(["analyze", "--help"], capsys)
    assert code == 0
    assert "--samples" in out


# --- bad input: exit 2, one line, no traceback -------------------------------------------------

def test_missing_file_exit_2_one_line_naming_it(tmp_path, capsys):
    p = tmp_path / "no-such-design.json"
    code, out, err = run(["analyze", str(p)], capsys)
    assert code == EXIT_BAD_INPUT
    lines = err.strip().splitlines()
    assert len(lines) == 1
    assert str(p) in lines[0]
    assert out == ""


def test_broken_json_exit_2(tmp_path, capsys):
    p = tmp_path / "broken.json"
    p.write_text('{"format": "tolspread-design", "version": 1,', encoding="utf-8")
    code, _, err = run(["analyze", str(p)], capsys)
    assert code == EXIT_BAD_INPUT
    lines = err.strip().splitlines()
    assert len(lines) == 1 and str(p) in lines[0]


def test_invalid_design_names_the_field_in_the_first_line(tmp_path, capsys):
    p = _rc_file(tmp_path, parts=[{"ref": "R1", "value": "12q", "grade": "R-thick-1"},
                                  {"ref": "C1", "value": "10n", "grade": "NO-SUCH"}])
    code, _, err = run(["analyze", str(p)], capsys)
    assert code == EXIT_BAD_INPUT
    lines = err.strip().splitlines()
    assert "parts[0].value" in lines[0]
    assert str(p) in lines[0]
    assert any("parts[1].grade" in line for line in lines)


def test_newer_version_file_exit_2(tmp_path, capsys):
    p = _rc_file(tmp_path, version=99)
    code, _, err = run(["analyze", str(p)], capsys)
    assert code == EXIT_BAD_INPUT
    assert "newer" in err and len(err.strip().splitlines()) == 1


def test_folder_instead_of_file_exit_2(tmp_path, capsys):
    code, _, err = run(["analyze", str(tmp_path)], capsys)
    assert code == EXIT_BAD_INPUT
    assert str(tmp_path) in err


def test_unknown_option_exit_2(capsys):
    code, out, err = run(["analyze", "--bogus"], capsys)
    assert code == EXIT_BAD_INPUT
    assert "--bogus" in err
    assert len(err.strip().splitlines()) == 1


@pytest.mark.parametrize("value", ["0", "-3", "abc", "2.5", "", "1e3"])
def test_bad_samples_exit_2(value, capsys):
    code, out, err = run(["analyze", "--samples", value], capsys)
    assert code == EXIT_BAD_INPUT
    assert "--samples" in err
    assert len(err.strip().splitlines()) == 1


def test_absurd_samples_exit_2(capsys):
    # More boards than memory can hold must be refused as bad input (exit 2, one line),
    # not end in an out-of-memory traceback. (The design file itself caps samples at
    # filters.design.MAX_SAMPLES.) 10^15 boards cannot be allocated on any machine.
    code, _, err = run(["analyze", "--samples", str(10 ** 15)], capsys)
    assert code == EXIT_BAD_INPUT
    assert "--samples" in err or "samples" in err


@pytest.mark.parametrize("value", ["-1", "x"])
def test_bad_seed_exit_2(value, capsys):
    code, _, err = run(["analyze", "--seed", value], capsys)
    assert code == EXIT_BAD_INPUT
    assert "--seed" in err


def test_json_into_missing_folder_exit_2(tmp_path, capsys):
    target = tmp_path / "no" / "such" / "folder" / "out.json"
    code, _, err = run(["analyze", "--samples", "50", "--json", str(target)], capsys)
    assert code == EXIT_BAD_INPUT
    assert str(target) in err
    assert not target.exists()


def test_subprocess_shows_one_line_and_no_traceback(tmp_path):
    # What a user sees: python -m app.cli with a broken file.
    p = tmp_path / "broken.json"
    p.write_text("[" * 10_000, encoding="utf-8")
    proc = subprocess.run([sys.executable, "-m", "app.cli", "analyze", str(p)], capture_output=True,
                          text=True, timeout=120, cwd=Path(__file__).resolve().parents[1])
    assert proc.returncode == EXIT_BAD_INPUT
    assert "Traceback" not in proc.stderr
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and str(p) in lines[0]
    assert proc.stdout == ""


def test_every_exit_status_is_0_or_2_for_a_sweep_of_bad_inputs(tmp_path, capsys):
    # Deterministic sweep of malformed files: each must give 0 or exit 2, never raise.
    rng = np.random.default_rng(3)
    good = json.dumps(json.loads(demo_text()))
    for i in range(15):
        cut = int(rng.integers(1, len(good)))
        p = tmp_path / f"cut{i}.json"
        p.write_text(good[:cut], encoding="utf-8")
        code, _, err = run(["analyze", str(p), "--samples", "20"], capsys)
        assert code == EXIT_BAD_INPUT, (cut, err)


# --- the installed command, as a user runs it (issue 10) -------------------------------------

TOLSPREAD = str(Path(sys.executable).with_name("tolspread"))  # the console script pip installed
EXIT_NO_SET = 3  # README: "recommend" exits 3 when no set of grades meets the target


def cli(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    """``tolspread ARGS`` in a subprocess; never a traceback, whatever the outcome."""
    proc = subprocess.run([TOLSPREAD, *args], capture_output=True, text=True, timeout=300, cwd=cwd)
    assert "Traceback" not in proc.stderr + proc.stdout
    return proc


def test_recommend_with_too_few_boards_says_so_and_exits_3():
    # 200 boards cannot show 99.5 % at 95 % confidence even if all pass; the boards needed
    # come from the one-sided Wilson bound, recomputed here with scipy.stats.binomtest.
    proc = cli("recommend", "--target-yield", "99.5%", "--samples", "200")
    assert proc.returncode == EXIT_NO_SET, proc.stderr
    assert "too few boards" in proc.stdout and "catalog cannot" not in proc.stdout
    need = next(n for n in range(200, 5000)
                if stats.binomtest(n, n, alternative="greater").proportion_ci(0.95, "wilson").low >= 0.995)
    assert f"--samples {need}" in proc.stdout
    assert stats.binomtest(need - 1, need - 1, alternative="greater").proportion_ci(0.95, "wilson").low < 0.995


def test_recommend_when_the_catalog_cannot_reach_the_target_says_so_and_exits_3(tmp_path):
    cat = json.loads((Path(__file__).parents[1] / "filters" / "data" / "catalog.json").read_text())
    cat["grades"] = [g for g in cat["grades"] if g["name"] in ("R-thick-5", "C-X7R-20")]
    path = tmp_path / "loose.json"
    path.write_text(json.dumps(cat))
    proc = cli("recommend", "--target-yield", "0.95", "--samples", "1000", "--catalog", str(path))
    assert proc.returncode == EXIT_NO_SET, proc.stderr
    assert "the catalog cannot reach the target" in proc.stdout
    assert "too few boards" not in proc.stdout
    # the best set's figures are printed: k of n boards and a yield below 95 %
    m = __import__("re").search(r"passes ([\d,]+) of ([\d,]+) boards \(yield ([\d.]+) %", proc.stdout)
    k, n, y = int(m[1].replace(",", "")), int(m[2].replace(",", "")), float(m[3])
    assert n == 1000 and math.isclose(100 * k / n, y, abs_tol=0.005) and y < 95


@pytest.mark.parametrize("text, understood", [("1", "1 = 100 %"), ("1.5", "1.5 = 150 %"),
                                              ("100", "100 = 10000 %"), ("95", "write 0.95 or 95%"),
                                              ("100%", "read as 100 %"), ("0%", "above 0"),
                                              ("abc", "not a number")])
def test_ambiguous_or_impossible_target_is_refused_saying_what_was_understood(text, understood):
    proc = cli("recommend", "--target-yield", text)
    assert proc.returncode == EXIT_BAD_INPUT
    lines = proc.stderr.strip().splitlines()
    assert len(lines) == 1 and "--target-yield" in lines[0] and understood in lines[0], lines


@pytest.mark.parametrize("text", ["1", "99", "0.3", "30%", "100%"])
def test_bad_confidence_is_refused_naming_the_option(text):
    proc = cli("recommend", "--target-yield", "0.9", "--confidence", text)
    assert proc.returncode == EXIT_BAD_INPUT and "--confidence" in proc.stderr
    assert len(proc.stderr.strip().splitlines()) == 1


def test_target_written_as_fraction_or_percent_is_the_same(tmp_path):
    a = cli("recommend", "--target-yield", "0.9", "--confidence", "90%", "--samples", "300")
    b = cli("recommend", "--target-yield", "90%", "--confidence", "0.9", "--samples", "300")
    assert a.returncode == b.returncode == 0, a.stderr + b.stderr
    assert "yield lower bound >= 90.00 % at 90 % confidence" in a.stdout
    assert a.stdout == b.stdout


@pytest.mark.parametrize("args, field", [
    (["design", "--response", "butterworth", "--order", "2", "--cutoff", "-1k", "-o", "x.json"], "--cutoff"),
    (["analyze", "--samples", "50", "--attenuation-at", "-6k"], "--attenuation-at"),
    (["analyze", "--seed", "-3"], "--seed"),
])
def test_negative_values_get_the_fields_own_message(args, field, tmp_path):
    proc = cli(*args, cwd=tmp_path)
    assert proc.returncode == EXIT_BAD_INPUT
    line = proc.stderr.strip()
    assert "\n" not in line and field in line and "expected one argument" not in line
    assert ("above 0" in line) or ("negative" in line)
    assert not (tmp_path / "x.json").exists()
