"""Fuzz suite of the trust promises (issue 11): nearly valid design files, catalogs and
command lines never end in a traceback, and whatever loads saves and reloads identical.

Invariants, all of the library's own contract (README "Guarantees and their limits"):

* [ONE] bad input is one line on standard error starting "tolspread:" and exit status 2
  (or success: 0; 3 and 4 are the documented "no set meets the target" and "design out
  of limits" outcomes); never a traceback, never a warning (pytest turns warnings into
  errors, so a RuntimeWarning fails the run it happens in);
* [RT] a design or catalog that loads is written and read back identical (text and
  value), and the written design analyses without error;
* [ERR] the library raises only :class:`InputError`, each problem with a one-line reason.

Every hypothesis run is derandomized with no example database; the counts are in
:data:`EXAMPLES` (quoted by README). The explicit regression tests below each reproduce a
failure of issue 11 (they failed before the fixes).
"""
from __future__ import annotations

import contextlib
import copy
import io
import json
import os
import stat
import subprocess
import sys
import traceback
from collections import Counter
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tolspread.app.cli import main
from tolspread.analysis import analyze
from tolspread.designfile import demo_text, dumps, load, loads, save
from tolspread.errors import InputError, ValidationError
from tolspread.evaluate import evaluate
from tolspread.grades import Catalog, builtin_catalog, load_catalog
from test_properties import _get, _paths  # JSON paths of a document (shared helpers)

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = {
    "design_files": 400,    # nearly valid design files: load, and for those that load save/reload/analyse
    "catalog_files": 300,   # nearly valid catalog files: load, and for those that load write/reload
    "cli_in_process": 160,  # command lines run through tolspread.app.cli.main (analyze and design)
}
SUBPROCESS_RUNS = 4         # fuzzed files through the installed ``tolspread`` command


def _settings(key: str):
    return settings(max_examples=EXAMPLES[key], deadline=None, database=None, derandomize=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large,
                                           HealthCheck.filter_too_much])


DEMO = json.loads(demo_text())
EXAMPLE = json.loads((ROOT / "assets/examples/ultrasonic_bandpass.json").read_text(encoding="utf-8"))
CATALOG = builtin_catalog().to_dict()

# Values found by the campaign of issue 11 and their neighbours: limits of floats and
# ints, numbers of thousands of digits, wrong types.
NASTY = [0, -1, 1, 0.5, 1e-320, 5e-324, 1e-300, 1e16, 1e308, -1e308, 1e300, -1e300, 2**31, 2**63 - 1,
         2**63, -(2**31), 5000, -5000, 100, 99.9999, True, False, None, [], {}, [1, 2], {"a": 1}, "",
         " ", "4k7", "1e16", "1e308", "nan", "inf", "-1k", "1e" + "5" * 5000, "1e-" + "5" * 5000,
         "9" * 5000, "x" * 300, "a\nb", "\u00b5", "R-thick-1", "gain", "phase", "delay", "floor",
         float("nan"), float("inf")]
nasty = st.one_of(st.sampled_from(NASTY), st.floats(allow_nan=False, width=64),
                  st.integers(-(2**70), 2**70), st.text(max_size=12))
GRADE_FIELDS = ["name", "kind", "tolerance_pct", "distribution", "coverage", "truncate", "bin_inner_pct",
                "tempco_ppm", "tempco_spread_ppm", "drift_pct", "cost", "technology"]


@st.composite
def grade_dicts(draw, name: str, kind: str | None = None):
    """A grade with a random subset of fields, mostly sensible, sometimes nasty."""
    kinds = st.sampled_from(["R", "C", "L", "opamp", "any"])
    tol = draw(st.one_of(st.floats(0, 99.9), st.sampled_from([30, 50, 99])))
    g = {"name": name, "kind": kind if kind and draw(st.integers(0, 5)) else draw(kinds), "tolerance_pct": tol}
    sensible = {"distribution": st.sampled_from(["normal", "uniform", "binned"]),
                "coverage": st.floats(0.05, 12), "truncate": st.booleans(),
                "bin_inner_pct": st.floats(0, 1).map(lambda f: f * tol), "tempco_ppm": st.floats(-3000, 3000),
                "tempco_spread_ppm": st.floats(0, 3000), "drift_pct": st.floats(0, 60),
                "cost": st.floats(0, 100), "technology": st.text(max_size=10)}
    for k, strat in sensible.items():
        if draw(st.booleans()):
            g[k] = draw(strat) if draw(st.integers(0, 9)) else draw(nasty)
    if g.get("distribution") == "binned" and "bin_inner_pct" not in g and draw(st.integers(0, 5)):
        g["bin_inner_pct"] = tol / 2
    return g


@st.composite
def nearly_valid_designs(draw):
    """The demo or the ultrasonic example after 1-3 edits: a field set to a nasty or random
    value, a field deleted, a grade of the design's own (random fields) given to a part,
    or a span of a random quantity with random limits."""
    doc = copy.deepcopy(draw(st.sampled_from([DEMO, EXAMPLE])))
    for _ in range(draw(st.integers(1, 2))):
        op = draw(st.sampled_from(["scale", "scale", "set", "delete", "grade", "grade", "span", "span"]))
        paths = [p for p, _ in _tree(doc) if p]
        if op == "scale":  # a number moved by a factor: mostly still valid, sometimes at a limit
            numbers = [p for p, v in _tree(doc)
                       if p and p != ("version",) and isinstance(v, (int, float)) and not isinstance(v, bool)]
            if numbers:
                path = draw(st.sampled_from(numbers))
                factor = draw(st.sampled_from([0.5, 0.9, 1.1, 2, 10, 1e3, 1e6, 1e-3, -1, 0]))
                _get(doc, path[:-1])[path[-1]] *= factor
        elif op == "set":
            path = draw(st.sampled_from(paths))
            _get(doc, path[:-1])[path[-1]] = draw(nasty)
        elif op == "delete":
            path = draw(st.sampled_from(paths))
            del _get(doc, path[:-1])[path[-1]]
        elif op == "grade" and isinstance(doc.get("parts"), list) and doc["parts"]:
            part = doc["parts"][draw(st.integers(0, len(doc["parts"]) - 1))]
            if not isinstance(part, dict):
                continue
            ref = part.get("ref") if isinstance(part.get("ref"), str) else "R"
            name = f"G{draw(st.integers(0, 3))}"
            doc.setdefault("grades", [])
            if isinstance(doc["grades"], list):
                kind = "opamp" if ref.startswith("U") else (ref[:1] if ref[:1] in "RCL" else None)
                doc["grades"].append(draw(grade_dicts(name, kind)))
            part["grade"] = name
        elif op == "span" and isinstance(doc.get("mask"), list):
            a = doc.get("analysis") if isinstance(doc.get("analysis"), dict) else {}
            lo, hi = a.get("f_start", 10), a.get("f_stop", 1e5)
            if not all(isinstance(f, (int, float)) and f > 0 for f in (lo, hi)):
                lo, hi = 10, 1e5
            t1, t2 = sorted(draw(st.tuples(st.floats(0, 1), st.floats(0, 1))))
            f1, f2 = lo * (hi / lo) ** (t1 * 0.9), lo * (hi / lo) ** (0.1 + t2 * 0.9)
            if draw(st.integers(0, 7)) == 0:  # sometimes outside the analysed range
                f1, f2 = lo / 10, hi * 10
            q = draw(st.sampled_from(["gain", "phase", "delay"]))
            limits = {"gain": st.floats(-200, 20), "phase": st.floats(-3600, 3600), "delay": st.floats(1e-9, 1)}[q]
            span = {"quantity": q, "kind": "variation" if q == "delay" else draw(st.sampled_from(["floor", "ceiling"])),
                    "f1": f1, "f2": f2, "limit1": draw(limits) if draw(st.integers(0, 4)) else draw(nasty)}
            if q != "delay" and draw(st.booleans()):
                span["limit2"] = draw(limits) if draw(st.integers(0, 4)) else draw(nasty)
            doc["mask"].append(span)
    return json.dumps(doc)  # NaN and Infinity appear as JSON allows them in Python


def _tree(doc):
    """Every (path, value) pair of a JSON document, containers included."""
    return ((p, _get(doc, p)) for p in _paths(doc))


def _check_error(exc: InputError) -> None:
    """[ERR] every problem has a one-line reason and a text path."""
    problems = exc.problems if isinstance(exc, ValidationError) else [exc]
    assert problems
    for p in problems:
        assert isinstance(p.path, str) and isinstance(p.reason, str) and p.reason.strip(), repr(p)
        assert "\n" not in str(p), str(p)


def _library(fn, *args, **kwargs):
    """``fn(...)``, or the InputError it raised; any other exception fails the test."""
    try:
        return fn(*args, **kwargs)
    except InputError as exc:
        _check_error(exc)
        return exc
    except BaseException:  # noqa: BLE001 - the test reports it
        pytest.fail(f"{getattr(fn, '__name__', fn)} raised something other than InputError:\n"
                    f"{traceback.format_exc()}")


def test_nearly_valid_design_files_load_or_say_why_and_reload_identical(tmp_path):
    """[ERR] [RT] the fuzzed files load or raise InputError; a design that loads saves,
    reloads identical (value and text), and analyses or evaluates (50 boards) without an
    error or a warning."""
    seen: Counter = Counter()
    folder = tmp_path
    target = folder / "d.json"

    @_settings("design_files")
    @given(nearly_valid_designs())
    def run(text):
        got = _library(loads, text)
        if isinstance(got, InputError):
            seen["refused"] += 1
            return
        seen["loaded"] += 1
        again = _library(loads, dumps(got))
        assert again == got and dumps(again) == dumps(got)
        _library(save, got, target)
        back = _library(load, target)
        assert back == got and dumps(back) == dumps(got)
        # The whole chain (budget, corners) on the demo's variants; the larger example's
        # corner search takes ~0.5 s, so its variants are only evaluated.
        if len(got.parts) <= len(DEMO["parts"]):
            result = _library(analyze, got, samples=50)
        else:
            result = _library(evaluate, got, samples=50, curves=False)
        if not isinstance(result, InputError):
            seen["analysed"] += 1

    run()
    assert seen["refused"] > 50 and seen["analysed"] > 100, seen  # both outcomes are exercised


@st.composite
def nearly_valid_catalogs(draw):
    """The built-in catalog after 1-3 edits: a field of a grade set to a nasty or random
    value or deleted, a grade added with random fields, a grade duplicated, or the
    structure broken."""
    doc = copy.deepcopy(CATALOG)
    for _ in range(draw(st.integers(1, 3))):
        op = draw(st.sampled_from(["set", "set", "delete", "add", "duplicate", "structure"]))
        grades = doc.get("grades") if isinstance(doc, dict) else None
        if not isinstance(grades, list) or not grades:
            break
        i = draw(st.integers(0, len(grades) - 1))
        if op == "set" and isinstance(grades[i], dict):
            grades[i][draw(st.sampled_from(GRADE_FIELDS))] = draw(nasty)
        elif op == "delete" and isinstance(grades[i], dict):
            grades[i].pop(draw(st.sampled_from(GRADE_FIELDS)), None)
        elif op == "add":
            grades.append(draw(grade_dicts(f"new-{len(grades)}")))
        elif op == "duplicate":
            grades.append(copy.deepcopy(grades[i]))
        else:
            path = draw(st.sampled_from([p for p, _ in _tree(doc)]))
            if path:
                _get(doc, path[:-1])[path[-1]] = draw(nasty)
            else:
                doc = draw(nasty)
    return json.dumps(doc)


def test_nearly_valid_catalog_files_load_or_say_why_and_reload_identical(tmp_path):
    """[ERR] [RT] fuzzed catalog files load or raise InputError; a catalog that loads is
    written and reloads identical, and its cost sums and sampled values are finite."""
    import numpy as np

    from tolspread.sampling import draw_scores, part_values

    seen: Counter = Counter()
    folder = tmp_path
    src, out = folder / "in.json", folder / "out.json"
    scores = draw_scores(1, 1, 0, 512)

    @_settings("catalog_files")
    @given(nearly_valid_catalogs())
    def run(text):
        src.write_text(text, encoding="utf-8")
        got = _library(load_catalog, src)
        if isinstance(got, InputError):
            seen["refused"] += 1
            return
        seen["loaded"] += 1
        out.write_text(json.dumps(got.to_dict(), ensure_ascii=False), encoding="utf-8")
        assert _library(load_catalog, out) == got
        assert Catalog.from_dict(got.to_dict()) == got
        assert np.isfinite(sum(g.cost for g in got.grades))
        for g in got.grades:
            values = part_values([1000.0], [g], scores)
            assert np.all(np.isfinite(values)) and np.all(values > 0), g

    run()
    assert seen["refused"] > 30 and seen["loaded"] > 30, seen


# --- the command line, in process --------------------------------------------------------------

def run_cli(argv: list[str]) -> tuple[int, str, str]:
    """Exit status, stdout and stderr of ``tolspread ARGV`` run through ``tolspread.app.cli.main``;
    an exception escaping main (a traceback for the user) fails the test."""
    out, err = io.StringIO(), io.StringIO()
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                code = main(argv)
            except SystemExit as exc:
                code = exc.code if isinstance(exc.code, int) else (0 if exc.code is None else 1)
    except BaseException:  # noqa: BLE001 - reported with the arguments
        pytest.fail(f"tolspread {argv!r} raised:\n{traceback.format_exc()}")
    return code, out.getvalue(), err.getvalue()


def check_outcome(argv: list[str], code: int, err: str) -> None:
    """[ONE] success, a documented outcome, or one line and exit status 2."""
    assert "Traceback" not in err, (argv, err)
    assert code in (0, 2, 3, 4), (argv, code, err)
    if code == 2:
        lines = err.strip().splitlines()
        assert lines and lines[0].startswith("tolspread: "), (argv, err)
        if "--verbose" in argv and len(lines) > 1:  # --verbose lists every problem, indented
            assert lines[0].endswith(f"{len(lines) - 1} problems:") and all(ln[:2] == "  " for ln in lines[1:])
        else:
            assert len(lines) == 1, (argv, err)


VALUE_TEXTS = ["1k", "2k", "10k", "0", "-1k", "1e16", "1e308", "abc", "", "1e" + "5" * 5000, "4k7", "nan",
               "inf", "1", "100000"]
COUNT_TEXTS = ["1", "20", "200", "0", "-5", "x", "", "1e3", "9" * 5000, "10000001", "2.5"]


def mostly(good, bad) -> st.SearchStrategy:
    """One of ``good`` four times in five, else one of ``bad`` (a list or a strategy)."""
    bad = bad if isinstance(bad, st.SearchStrategy) else st.sampled_from(bad)
    return st.integers(0, 4).flatmap(lambda i: st.sampled_from(good) if i else bad)


@st.composite
def cli_argvs(draw, folder: Path):
    """A command line of ``analyze`` or ``design`` with fuzzed options and files (runs are
    kept small: at most 300 boards, or a bad count)."""
    def opt(name: str, values) -> list[str]:
        return [name, draw(values)] if draw(st.booleans()) else []

    outputs = st.sampled_from(["", " ", str(folder), str(folder / "fifo"), str(folder / "out.json"),
                               str(folder / "no-such-folder" / "x.json")])
    if draw(st.booleans()):
        design = draw(mostly([[], [str(folder / "good.json")]],
                             [[str(folder / "fuzzed.json")], [str(folder / "missing.json")],
                              [str(folder)], [str(folder / "fifo")], ["/dev/zero"]]))
        argv = ["analyze", *design, "--samples", draw(mostly(["20", "100", "300"], COUNT_TEXTS))]
        argv += opt("--seed", mostly(["0", "7", str(2**63 - 1)], ["-1", "x", "9" * 30]))
        argv += opt("--json", mostly([str(folder / "out.json"), "-"], outputs))
        argv += opt("--attenuation-at", mostly(["6k", "50k", "20"], VALUE_TEXTS))
        argv += opt("--interval", mostly(["wilson", "exact"], ["bad"]))
        if draw(st.booleans()):
            argv += ["--half-width", draw(mostly(["5", "10"], ["0", "60", "x", "1e-300"])),
                     "--max-samples", draw(mostly(["300"], ["0", "x"]))]
        argv += ["--qmc"] if draw(st.booleans()) else []
    else:
        argv = ["design", "--response", draw(mostly(["butterworth", "chebyshev", "bessel", "linkwitz-riley"],
                                                    ["elliptic", ""])),
                "--order", draw(mostly(["1", "2", "4", "5"], ["0", "11", "x", "9" * 5000])),
                "--cutoff", draw(mostly(["1k", "2k", "10k"], VALUE_TEXTS)),
                "-o", draw(mostly([str(folder / "out.json")], outputs))]
        argv += opt("--kind", mostly(["lowpass", "highpass"], ["bandpass", "notch"]))
        argv += opt("--bandwidth", mostly(["200", "1k"], VALUE_TEXTS))
        argv += opt("--ripple", mostly(["0.1", "1", "3"], ["7", "-1", "x"]))
        argv += opt("--gbw", mostly(["10M", "1M"], VALUE_TEXTS))
    argv += ["--verbose"] if draw(st.integers(0, 4)) == 0 else []
    return argv


def test_fuzzed_command_lines_end_in_success_or_one_line(tmp_path):
    """[ONE] analyze and design with fuzzed options, files and outputs: success or one line
    and exit 2; special files stay what they were."""
    seen: Counter = Counter()
    folder = tmp_path
    os.mkfifo(folder / "fifo")
    bad = json.loads(demo_text())
    bad["parts"][0]["value"] = "1e" + "5" * 5000
    bad["grades"] = [{"name": "G", "kind": "C", "tolerance_pct": 30, "truncate": False, "technology": 5}]
    bad["parts"][2]["grade"] = "G"
    (folder / "fuzzed.json").write_text(json.dumps(bad), encoding="utf-8")
    (folder / "good.json").write_text(demo_text(), encoding="utf-8")

    @_settings("cli_in_process")
    @given(cli_argvs(folder))
    def run(argv):
        code, _, err = run_cli(argv)
        check_outcome(argv, code, err)
        seen[code] += 1
        assert stat.S_ISFIFO(os.lstat(folder / "fifo").st_mode)
        (folder / "out.json").unlink(missing_ok=True)
        (folder / "out.json.bak").unlink(missing_ok=True)

    run()
    assert seen[0] > 30 and seen[2] > 30, seen


def test_fuzzed_files_through_the_installed_command(tmp_path):
    """[ONE] a few fuzzed design files through the real ``tolspread`` program (separate
    processes, run side by side): success or one line and exit 2, never a traceback."""
    folder = tmp_path
    texts: list[str] = []

    @settings(max_examples=SUBPROCESS_RUNS, deadline=None, database=None, derandomize=True)
    @given(nearly_valid_designs())
    def collect(text):
        texts.append(text)

    collect()
    procs = []
    for i, text in enumerate(texts):
        p = folder / f"f{i}.json"
        p.write_text(text, encoding="utf-8")
        procs.append(subprocess.Popen(
            [sys.executable, "-W", "error", "-m", "tolspread.app.cli", "analyze", str(p), "--samples", "50"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT))
    for proc in procs:
        _, err = proc.communicate(timeout=300)
        check_outcome(proc.args, proc.returncode, err)


# --- issue 11 regressions, each through the command line ---------------------------------------

def _design_file(tmp_path: Path, edit) -> str:
    d = json.loads(demo_text())
    edit(d)
    p = tmp_path / "d.json"
    p.write_text(json.dumps(d), encoding="utf-8")
    return str(p)


def _one_line(argv: list[str], *expect: str) -> str:
    code, _, err = run_cli(argv)
    check_outcome(argv, code, err)
    assert code == 2, (argv, err)
    for e in expect:
        assert e in err, err
    return err


def _own_grade(**fields):
    def edit(d):
        d["grades"] = [{"name": "G", "kind": "R", "tolerance_pct": 1, **fields}]
        d["parts"][0]["grade"] = "G"
    return edit


@pytest.mark.parametrize("fields, where", [
    ({"technology": ["thick film"]}, "grades[0].technology"),   # recommend: unhashable
    ({"technology": 5}, "grades[0].technology"),                # recommend --report: html.escape
    ({"technology": None}, "grades[0].technology"),
    ({"coverage": 1e-320}, "grades[0].coverage"),               # NaN margins, RuntimeWarning
    ({"kind": "any", "coverage": 1e-320}, "grades[0].coverage"),
])
@pytest.mark.parametrize("command", ["analyze", "recommend"])
def test_bad_grade_fields_are_one_line(tmp_path, fields, where, command):
    path = _design_file(tmp_path, _own_grade(**fields))
    extra = ["--target-yield", "0.9", "--report", str(tmp_path / "r.html")] if command == "recommend" else []
    _one_line([command, path, "--samples", "50", *extra], where)


def test_coverage_1e_320_on_an_opamp_grade_is_one_line(tmp_path):
    # issue 11 #1: LinAlgError from the op-amp's grade with an infinite sigma.
    def edit(d):
        d["grades"] = [{"name": "U", "kind": "opamp", "tolerance_pct": 30, "coverage": 1e-320}]
        d["parts"].append({"ref": "U1", "value": "1M", "grade": "U"})
        d["stages"][0]["parts"]["U1"] = "U1"
    _one_line(["analyze", _design_file(tmp_path, edit), "--samples", "50"], "grades[0].coverage")


def test_a_value_with_5000_exponent_digits_is_one_line(tmp_path):
    def edit(d):
        d["parts"][0]["value"] = "1e" + "5" * 5000
    _one_line(["analyze", _design_file(tmp_path, edit)], "parts[0].value", "too large")
    _one_line(["design", "--response", "butterworth", "--order", "2", "--cutoff", "1e" + "5" * 5000,
               "-o", str(tmp_path / "x.json")], "--cutoff")


def test_a_catalog_cost_of_1e308_is_one_line(tmp_path):
    # issue 11 #1: OverflowError in fsum while summing a set's costs.
    cat = builtin_catalog().to_dict()
    for g in cat["grades"]:
        g["cost"] = 1e308
    p = tmp_path / "cat.json"
    p.write_text(json.dumps(cat), encoding="utf-8")
    err = _one_line(["recommend", "--catalog", str(p), "--target-yield", "0.9", "--samples", "50"],
                    f"{p}: grades[0].cost", "more problems (use --verbose)")
    assert "1e+308" in err


@pytest.mark.parametrize("case", ["deep", "huge_int", "fifo", "dev_zero"])
def test_hostile_catalog_files_are_one_line(tmp_path, case):
    p = tmp_path / "cat.json"
    if case == "deep":
        p.write_text('{"grades": ' + "[" * 100000 + "]" * 100000 + "}", encoding="utf-8")
    elif case == "huge_int":
        p.write_text('{"grades": [{"name": "G", "kind": "R", "tolerance_pct": ' + "7" * 5000 + "}]}",
                     encoding="utf-8")
    elif case == "fifo":
        os.mkfifo(p)
    else:
        p = Path("/dev/zero")
    _one_line(["recommend", "--catalog", str(p), "--target-yield", "0.9", "--samples", "50"], str(p))


@pytest.mark.parametrize("argv", [
    ["design", "--response", "butterworth", "--order", "2", "--cutoff", "1k", "-o", ""],
    ["analyze", "--samples", "20", "--json", ""],
    ["analyze", "--samples", "20", "--report", ""],
    ["recommend", "--target-yield", "0.9", "--samples", "20", "--csv", ""],
], ids=["design-o", "analyze-json", "analyze-report", "recommend-csv"])
def test_empty_output_names_are_refused(argv):
    # issue 11 #1 and #10: `design -o ''` was a ValueError traceback; `--json ''` was
    # silently ignored.
    _one_line(argv, "no file name given")


@pytest.mark.parametrize("argv_of", [
    lambda out: ["analyze", "--samples", "20", "--json", out],
    lambda out: ["design", "--response", "butterworth", "--order", "2", "--cutoff", "1k", "-o", out],
], ids=["analyze-json", "design-o"])
def test_outputs_to_special_files_are_refused_and_leave_them_alone(tmp_path, argv_of):
    # issue 11 #7: as root `analyze --json /dev/full` replaced the device node with a
    # regular file, and `design -o /dev/full` copied the endless device into
    # /dev/full.bak. A FIFO and (as root) a copy of /dev/full's node made in a temporary
    # folder stand in for the real device.
    fifo = tmp_path / "fifo"
    os.mkfifo(fifo)
    targets = [fifo]
    dev = tmp_path / "full"
    with contextlib.suppress(OSError, AttributeError):
        os.mknod(dev, stat.S_IFCHR | 0o666, os.makedev(1, 7))  # Linux /dev/full: char 1, 7 (from memory)
        targets.append(dev)
    for t in targets:
        _one_line(argv_of(str(t)), "not a regular file")
        mode = os.lstat(t).st_mode
        assert stat.S_ISFIFO(mode) or stat.S_ISCHR(mode)
        assert not Path(f"{t}.bak").exists()


def test_several_problems_are_one_line_and_verbose_lists_them(tmp_path):
    # issue 11 #10: README promises one line; several problems printed several lines.
    def edit(d):
        d["parts"][0]["value"] = "12q"
        d["parts"][1]["grade"] = "NO-SUCH-GRADE"
        d["analysis"]["samples"] = 0
    path = _design_file(tmp_path, edit)
    err = _one_line(["analyze", path], "parts[0].value", "and 2 more problems (use --verbose)")
    code, _, err = run_cli(["analyze", path, "--verbose"])
    lines = err.strip().splitlines()
    assert code == 2 and lines[0].endswith("3 problems:") and len(lines) == 4
    assert {"parts[0].value", "parts[1].grade", "analysis.samples"} == {ln.split(":")[0].strip() for ln in lines[1:]}


@pytest.mark.parametrize("span", [
    {"quantity": "phase", "kind": "floor", "f1": 10, "f2": 1000, "limit1": -100000},
    {"quantity": "phase", "kind": "ceiling", "f1": 10, "f2": 1000, "limit1": 100000, "limit2": -100000},
    {"quantity": "delay", "kind": "variation", "f1": 10, "f2": 1000, "limit1": 1e12},
    {"quantity": "gain", "kind": "floor", "f1": 10, "f2": 1000, "limit1": -1000, "relative": True},
], ids=["phase-floor", "phase-slope", "delay", "gain"])
def test_limits_at_the_edge_of_their_range_run_without_warnings(tmp_path, span):
    # issue 11 #10: a phase limit of -1e300 printed overflow RuntimeWarnings on a
    # successful run; such limits are now refused (test_designfile), and the largest
    # allowed ones run clean (pytest turns warnings into errors).
    path = _design_file(tmp_path, lambda d: d["mask"].append(span))
    code, out, err = run_cli(["analyze", path, "--samples", "200"])
    assert code == 0 and err == "", err


@pytest.mark.parametrize("limit", [-1e300, 1e300, -100001])
def test_limits_beyond_their_range_are_one_line(tmp_path, limit):
    span = {"quantity": "phase", "kind": "floor", "f1": 10, "f2": 1000, "limit1": limit}
    path = _design_file(tmp_path, lambda d: d["mask"].append(span))
    _one_line(["analyze", path, "--samples", "50"], "mask[4].limit1")
