"""The command line ``tolspread analyze``: output, JSON, reproducibility, and bad input that
ends in one line on stderr with exit status 2 and never a traceback.

Most tests call ``tolspread.app.cli.main(argv)`` in-process; one runs ``python -m tolspread.app.cli`` as a
subprocess to see what a user sees. References are named beside each check.
tests/REFERENCES.md tags: [C] confirmed in a stored copy of the published document, [M] from
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

from tolspread.app.cli import main
from tolspread.designfile import demo_text, load_demo

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

    Unity-gain Sallen-Key low-pass: H = 1/(s^2 R1R2C1C2 + s C2(R1+R2) + 1) (tests/REFERENCES.md
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
    # GUM 5.1.6 law of propagation (tests/REFERENCES.md section 4, [M] from memory), first order:
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
    assert len(lines) == 1 and "1 more problem (use --verbose)" in lines[0]
    code, _, err = run(["analyze", str(p), "--verbose"], capsys)
    assert code == EXIT_BAD_INPUT
    assert any("parts[1].grade" in line for line in err.strip().splitlines())


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
    # tolspread.design.MAX_SAMPLES.) 10^15 boards cannot be allocated on any machine.
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
    # What a user sees: python -m tolspread.app.cli with a broken file.
    p = tmp_path / "broken.json"
    p.write_text("[" * 10_000, encoding="utf-8")
    proc = subprocess.run([sys.executable, "-m", "tolspread.app.cli", "analyze", str(p)], capture_output=True,
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


def _blocks(text: str, first: str) -> list[list[str]]:
    """The lines of every table whose header line starts with ``first`` (each up to a blank
    line or a note)."""
    lines = text.splitlines()
    out = []
    for i in (k for k, line in enumerate(lines) if line.strip().startswith(first)):
        block = []
        for line in lines[i:]:
            if not line.strip() or line.strip().startswith("note:"):
                break
            block.append(line)
        out.append(block)
    return out


def _block(text: str, first: str, containing: str = "") -> list[str]:
    """The lines of the first table whose header line starts with ``first`` and holds
    ``containing`` (up to a blank line or a note)."""
    return next(b for b in _blocks(text, first) if containing in b[0])


def _long_names_design(tmp_path: Path) -> Path:
    data = json.loads(demo_text())
    for k, st in enumerate(data["stages"]):
        st["name"] = f"stage {k + 1}: a very long descriptive name of this Sallen-Key section"
    p = tmp_path / "long.json"
    p.write_text(json.dumps(data))
    return p


def test_analyze_tables_align_with_long_names_and_agree_with_json(tmp_path):
    path = _long_names_design(tmp_path)
    js = tmp_path / "r.json"
    proc = cli("analyze", str(path), "--samples", "3000", "--attenuation-at", "1M", "--json", str(js))
    assert proc.returncode == 0, proc.stderr
    doc = json.loads(js.read_text())
    out = proc.stdout
    # counts with thousands separators (common practice), the same count as the JSON
    assert f"{doc['samples']:,} sampled boards" in out and "3,000 sampled boards" in out
    y = doc["yield"]
    assert f"{y['passed']:,} of {y['samples']:,} boards pass" in out
    for first in ("metric ", "span "):
        # every such table: over the demo's operating range the span and metric tables per
        # temperature too
        for block in _blocks(out, first):
            header = block[0]
            # right-aligned columns: every row ends where the header ends, and each header
            # word's right edge is a column edge that every row respects (a space or the end)
            assert all(len(r) == len(header) for r in block), block
            edges = [m.end() for m in __import__("re").finditer(r"\S+(?= {2}|$)", header)][1:]
            for r in block[1:]:
                for e in edges:
                    assert e == len(r) or r[e] == " ", (r, e)
    metrics = _block(out, "metric ", " std/mean")
    # standard deviations carry no sign: the std column ends where its header word ends
    h = metrics[0]
    for r in metrics[1:]:
        cell = r[h.index(" mean ") + 5:h.index(" std/mean")].strip()
        assert cell and cell[0] not in "+-", r
    # the nominal cutoff as printed agrees with the JSON to its 4 digits
    row = next(r for r in metrics if r.strip().startswith("cutoff"))
    assert f"{doc['metrics']['cutoff_hz']['nominal'] / 1e3:.4g} kHz" in row


def test_attenuation_beyond_the_floor_is_not_printed_as_a_figure(tmp_path):
    js = tmp_path / "r.json"
    proc = cli("analyze", "--samples", "300", "--attenuation-at", "1M", "--attenuation-at", "6k", "--json", str(js))
    doc = json.loads(js.read_text())
    far = doc["metrics"]["attenuation_db@1e+06"]
    near = doc["metrics"]["attenuation_db@6000"]
    # a 4th-order low-pass near 2 kHz: about 80 dB/decade x 2.7 decades, far beyond 200 dB
    # (common practice: 20 dB per decade per order)
    assert far["nominal"] > 200 and doc["attenuation_floor_db"] == 200
    row = next(r for r in proc.stdout.splitlines() if "attenuation at 1 MHz" in r)
    assert "> 200 dB" in row and f"{far['nominal']:.1f}" not in row
    row6 = next(r for r in proc.stdout.splitlines() if "attenuation at 6 kHz" in r)
    assert f"{near['nominal']:+.3f} dB" in row6  # below the floor: the figure, as in the JSON


def test_rss_of_a_one_sided_margin_is_not_printed_as_zero(tmp_path):
    js = tmp_path / "r.json"
    proc = cli("analyze", "--samples", "5000", "--json", str(js))
    doc = json.loads(js.read_text())
    ceiling = doc["corners"]["metrics"]["margin.passband ceiling"]
    fails = next(s for s in doc["yield"]["spans"] if s["name"] == "passband ceiling")["failed"]
    assert fails > 0  # boards fail this span, so its spread is not zero
    assert ceiling["linear"] is False and ceiling["rss_std"] is None
    corners = proc.stdout[proc.stdout.index("CORNERS"):]
    line = next(r for r in corners.splitlines() if "passband ceiling" in r and "dB" in r)
    assert "not linear" in line and "0.000" not in line.split("dB")[-1]
    assert "not linear at the nominal" in corners and "sampled spread" in corners


def test_budget_lines_add_to_100_percent_and_match_json(tmp_path):
    js = tmp_path / "r.json"
    proc = cli("analyze", "--samples", "2000", "--json", str(js))
    doc = json.loads(js.read_text())
    text = proc.stdout[proc.stdout.index("SPREAD BUDGET"):proc.stdout.index("CORNERS")]
    lines = [r for r in text.splitlines()[1:] if "%" in r]
    assert lines
    import re
    for line in lines:
        pcts = [float(x) for x in re.findall(r"([\d.]+) %", line)]
        assert math.fsum(pcts) == pytest.approx(100.0, abs=1e-9), line
    # the largest share as printed is the JSON's, rounded to one decimal
    cutoff = next(r for r in lines if r.strip().startswith("cutoff"))
    top = doc["budget"]["cutoff_hz"]["parts"][0]
    assert f"{top['ref']} {100 * top['share']:.1f} %" in cutoff or \
        abs(float(re.search(rf"{top['ref']} ([\d.]+) %", cutoff)[1]) - 100 * top["share"]) <= 0.1


def test_wide_bandpass_has_a_stable_centre_from_its_band_edges(tmp_path):
    # issue 10: a Butterworth band-pass, centre 10 kHz, 30 kHz wide. The centre is the
    # geometric mean of the band edges (scipy.signal.lp2bp places the edges symmetric about
    # it on a log scale: f_lo f_hi = f0^2, from memory), so its spread follows the edges'.
    d = tmp_path / "wide.json"
    made = cli("design", "--response", "butterworth", "--order", "4", "--kind", "bandpass", "--cutoff", "10k",
               "--bandwidth", "30k", "--accept-error", "-o", str(d))
    assert made.returncode == 0, made.stderr
    js = tmp_path / "r.json"
    proc = cli("analyze", str(d), "--samples", "2000", "--json", str(js))
    assert proc.returncode == 0, proc.stderr
    m = json.loads(js.read_text())["metrics"]
    assert "cutoff_hz" not in m
    c, lo, hi = m["centre_hz"], m["lower_hz"], m["upper_hz"]
    assert c["nominal"] == pytest.approx(math.sqrt(lo["nominal"] * hi["nominal"]), rel=1e-12)
    assert c["nominal"] == pytest.approx(10e3, rel=0.03)  # design target, within snapping
    rel = lambda s: s["std"] / s["mean"]  # noqa: E731
    assert rel(c) <= max(rel(lo), rel(hi))  # no longer 53.7 % from a flat top's wandering peak
    assert c["min"] > lo["max"] and c["max"] < hi["min"]
    text = proc.stdout
    for label, key in (("centre (Hz)", "centre_hz"), ("lower band edge (Hz)", "lower_hz"),
                       ("upper band edge (Hz)", "upper_hz")):
        row = next(r for r in text.splitlines() if r.strip().startswith(label))
        from tolspread.values import format_value
        assert format_value(m[key]["nominal"], "Hz", digits=4) in row
    assert "cutoff (Hz)" not in text


def test_recommend_table_aligns_and_agrees_with_the_parts_csv(tmp_path):
    import csv

    out_csv = tmp_path / "parts.csv"
    proc = cli("recommend", "--target-yield", "90%", "--samples", "400", "--csv", str(out_csv))
    assert proc.returncode == 0, proc.stderr
    block = _block(proc.stdout, "part ")
    header = block[0]
    col = header.index("recommended")
    rows = {r.split()[0]: r for r in block[1:]}
    with open(out_csv, encoding="utf-8-sig", newline="") as fh:
        parts = list(csv.DictReader(fh))
    assert [p["ref"] for p in parts] == list(rows)
    for p in parts:  # the grade bought is the one the terminal recommends, in its column
        assert rows[p["ref"]][col:].split()[0] == p["grade"]
    total = math.fsum(float(p["relative cost"]) for p in parts)
    assert f"total relative cost {total:.2f}" in proc.stdout
    # the current cost is the design's own grades (demo: 4 resistors R-thick-1, 4 capacitors
    # C-C0G-5, priced from the built-in catalog)
    cat = {g["name"]: g["cost"] for g in json.loads(
        (Path(__file__).parents[1] / "filters" / "data" / "catalog.json").read_text())["grades"]}
    current = math.fsum(cat[p.grade] for p in load_demo().parts)
    assert f"(current grades {current:.2f})" in proc.stdout
