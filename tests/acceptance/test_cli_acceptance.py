"""The command line as a person uses it: the installed ``tolspread`` script in its own
process, every subcommand and option with good and bad input.

Bad input: exit status 2, exactly one line on stderr naming the option or file that was
typed, never a traceback. Good input: exit 0 (3 for "no set found", 4 for a design beyond
its error limits), and every output agrees with the others and with the terminal: the
yield, the pass counts, the interval, the failing boards per span, the grades and costs.

Independent references: the Wilson score interval and the Clopper-Pearson interval are
computed here from their published formulas with scipy.stats (Wilson 1927; Clopper and
Pearson 1934); filter poles come from scipy.signal.butter; JSON, CSV and HTML are read
with Python's own json, csv and html.parser modules; PNG by its signature and Qt's reader.
"""
from __future__ import annotations

import csv
import io
import json
import math
import re
from concurrent.futures import ThreadPoolExecutor
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
from scipy import signal, stats

from .conftest import Run, run_cli

DEMO_BOARDS = "400"  # small runs: the layer must stay quick on two cores

YIELD_LINE = re.compile(r"YIELD\s+(\d+\.\d+) %\s+\((\d+) % interval (\d+\.\d+) % to (\d+\.\d+) %, (\w+); "
                        r"([\d,]+) of ([\d,]+) boards pass\)")


def _int(text: str) -> int:
    return int(text.replace(",", ""))


def one_line_error(run: Run, *names: str) -> str:
    """Exit 2, one line on stderr naming every one of ``names``, no traceback."""
    assert run.returncode == 2, (run.args, run.returncode, run.stdout[-500:], run.stderr)
    assert "Traceback" not in run.stderr, run.stderr
    assert len(run.err_lines) == 1, run.stderr
    line = run.err_lines[0]
    assert line.startswith("tolspread: "), line
    for n in names:
        assert n in line, (n, line)
    return line


# --- bad input, run in parallel (each is its own process) ------------------------------------
_LP = ["design", "--response", "butterworth", "--order", "4"]
_OUT = "{tmp}/out.json"
# name -> (arguments, words the one-line message must contain); {tmp} is a fresh folder
# holding broken.json (unreadable JSON) and nothing else
BAD_CASES: dict[str, tuple[list[str], tuple[str, ...]]] = {
    "analyze samples 0": (["analyze", "--samples", "0"], ("--samples", "'0'")),
    "analyze samples text": (["analyze", "--samples", "ten"], ("--samples", "'ten'")),
    "analyze seed negative": (["analyze", "--seed", "-1"], ("--seed",)),
    "analyze half-width 0": (["analyze", "--half-width", "0"], ("--half-width",)),
    "analyze interval": (["analyze", "--interval", "bayes"], ("--interval", "bayes")),
    "analyze attenuation text": (["analyze", "--attenuation-at", "abc"], ("--attenuation-at",)),
    "analyze attenuation negative": (["analyze", "--attenuation-at", "-5k"], ("--attenuation-at",)),
    "analyze missing file": (["analyze", "{tmp}/missing.json"], ("missing.json",)),
    "analyze broken file": (["analyze", "{tmp}/broken.json"], ("broken.json",)),
    "analyze json into a folder": (["analyze", "--samples", "200", "--json", "{tmp}"], ("--json",)),
    "analyze unknown option": (["analyze", "--frobnicate"], ("--frobnicate",)),
    "design order 0": (_LP[:-1] + ["0", "--cutoff", "1k", "-o", _OUT], ("--order",)),
    "design order 11": (_LP[:-1] + ["11", "--cutoff", "1k", "-o", _OUT], ("--order",)),
    "design cutoff text": (_LP + ["--cutoff", "abc", "-o", _OUT], ("--cutoff",)),
    "design cutoff negative": (_LP + ["--cutoff", "-1k", "-o", _OUT], ("--cutoff",)),
    "design response": (["design", "--response", "cauer", "--order", "4", "--cutoff", "1k", "-o", _OUT],
                        ("--response", "cauer")),
    "design band-pass without bandwidth": (_LP + ["--kind", "bandpass", "--cutoff", "1k", "-o", _OUT],
                                           ("--bandwidth",)),
    "design ripple": (["design", "--response", "chebyshev", "--ripple", "0.7", "--order", "4", "--cutoff", "1k",
                       "-o", _OUT], ("--ripple",)),
    "design cutoff 1 GHz": (_LP + ["--cutoff", "1G", "-o", _OUT], ("--cutoff",)),
    "design cutoff 1 mHz": (_LP + ["--cutoff", "1m", "-o", _OUT], ("--cutoff",)),
    "design no output": (_LP + ["--cutoff", "1k"], ("--output",)),
    "recommend target 1": (["recommend", "--target-yield", "1"], ("--target-yield",)),
    "recommend target 1.5": (["recommend", "--target-yield", "1.5"], ("--target-yield",)),
    "recommend target 95": (["recommend", "--target-yield", "95"], ("--target-yield",)),
    "recommend target 100%": (["recommend", "--target-yield", "100%"], ("--target-yield",)),
    "recommend confidence 1": (["recommend", "--target-yield", "0.9", "--confidence", "1"], ("--confidence",)),
    "recommend no target": (["recommend"], ("--target-yield",)),
    "recommend missing catalog": (["recommend", "--target-yield", "0.9", "--catalog", "{tmp}/nocatalog.json"],
                                  ("nocatalog.json",)),
    "window missing file": (["{tmp}/missing.json"], ("missing.json",)),
    "window screenshot without a path": (["--screenshot"], ("--screenshot",)),
}


@pytest.fixture(scope="module")
def bad_runs(tmp_path_factory, cli_env):
    """Every bad case, each its own process, three at a time."""
    tmp = tmp_path_factory.mktemp("bad")
    (tmp / "broken.json").write_text('{"parts": [', encoding="utf-8")
    env = cli_env
    with ThreadPoolExecutor(max_workers=3) as pool:
        futures = {name: pool.submit(run_cli, *[a.format(tmp=tmp) for a in args], cwd=tmp, env=env)
                   for name, (args, _w) in BAD_CASES.items()}
        return tmp, {name: f.result() for name, f in futures.items()}


@pytest.mark.slow  # the fixture runs 30 processes (about 30 s on two busy cores)
@pytest.mark.parametrize("name", list(BAD_CASES))
def test_bad_input_exits_2_with_one_line(bad_runs, name):
    tmp, runs = bad_runs
    args, words = BAD_CASES[name]
    line = one_line_error(runs[name], *words)
    if any(a.startswith("-") and a[1:2].isdigit() for a in args):  # issue 10 #17: '-1k' is a value
        assert "expected one argument" not in line, line
    assert not (tmp / "out.json").exists(), "a refused design must write nothing"


@pytest.mark.slow
def test_ambiguous_target_says_how_it_was_read(bad_runs):
    """issue 10 #17: '1' could mean 1 % or 100 %: the message says what was understood."""
    line = bad_runs[1]["recommend target 1"].err_lines[0]
    assert "fraction" in line and "100 %" in line, line  # how '1' was read
    assert "1%" in line or "1 %" in line, line              # and how to write 1 %


# --- analyze: terminal, JSON and HTML agree ---------------------------------------------------------
class _Text(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.chunks: list[str] = []

    def handle_data(self, data: str) -> None:
        self.chunks.append(data)

    @property
    def text(self) -> str:
        return re.sub(r"\s+", " ", " ".join(self.chunks))


def html_text(path: Path) -> str:
    p = _Text()
    p.feed(path.read_text(encoding="utf-8"))
    return p.text


def wilson(passed: int, n: int, confidence: float) -> tuple[float, float]:
    """Wilson score interval (Wilson 1927), two-sided, from its closed form."""
    z = stats.norm.ppf(0.5 + confidence / 2)
    p = passed / n
    centre = (p + z * z / (2 * n)) / (1 + z * z / n)
    half = z / (1 + z * z / n) * math.sqrt(p * (1 - p) / n + z * z / (4 * n * n))
    return centre - half, centre + half


def clopper_pearson(passed: int, n: int, confidence: float) -> tuple[float, float]:
    """Exact binomial interval (Clopper and Pearson 1934) from the beta distribution."""
    a = 1 - confidence
    lo = 0.0 if passed == 0 else stats.beta.ppf(a / 2, passed, n - passed + 1)
    hi = 1.0 if passed == n else stats.beta.ppf(1 - a / 2, passed + 1, n - passed)
    return lo, hi


@pytest.fixture(scope="module")
def analyzed(tmp_path_factory, cli_env):
    tmp = tmp_path_factory.mktemp("analyze")
    run = run_cli("analyze", "--samples", DEMO_BOARDS, "--seed", "7", "--json", "a.json", "--report", "a.html",
                  "--attenuation-at", "6k", cwd=tmp, env=cli_env)
    return run, tmp


def test_analyze_terminal_json_and_report_agree(analyzed):
    run, tmp = analyzed
    assert run.returncode == 0, run.stderr
    assert run.stderr.strip() == ""
    m = YIELD_LINE.search(run.stdout)
    assert m, run.stdout[:800]
    estimate, conf, lo, hi, method, passed, n = m.groups()
    data = json.loads((tmp / "a.json").read_text(encoding="utf-8"))
    y = data["yield"]
    assert _int(n) == y["samples"] == int(DEMO_BOARDS) == data["samples"]
    assert _int(passed) == y["passed"]
    assert float(estimate) == pytest.approx(100 * y["passed"] / y["samples"], abs=0.005)
    assert float(estimate) == pytest.approx(100 * y["estimate"], abs=0.005)
    # the interval, against the published formula
    assert method == y["method"] == "wilson"
    w_lo, w_hi = wilson(y["passed"], y["samples"], int(conf) / 100)
    assert float(lo) == pytest.approx(100 * w_lo, abs=0.005) and float(hi) == pytest.approx(100 * w_hi, abs=0.005)
    assert y["ci95"] == pytest.approx([w_lo, w_hi], abs=1e-9)
    # failing boards per span: the terminal table and the JSON
    for s in y["spans"]:
        row = next(line for line in run.stdout.splitlines() if line.strip().startswith(s["name"] + " "))
        assert _int(row[len(row) - len(row.lstrip()) + len(s["name"]):].split()[0]) == s["failed"], row
    # the report (HTML) gives the same yield and counts
    text = html_text(tmp / "a.html")
    assert f"{estimate} %" in text or f"{estimate}%" in text, "the report's yield differs from the terminal's"
    assert f"{passed} of {n}" in text
    assert data["design"] in text
    # the extra attenuation point is printed and stored
    assert "attenuation at 6 kHz" in run.stdout
    assert any("atten" in k for k in data["metrics"]), list(data["metrics"])
    assert f"wrote the report to a.html" in run.stdout


def test_analyze_json_to_stdout_is_only_json(analyzed, tmp_path):
    run = run_cli("analyze", "--samples", DEMO_BOARDS, "--seed", "7", "--json", "-", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    data = json.loads(run.stdout)  # nothing but JSON on stdout
    first = json.loads((analyzed[1] / "a.json").read_text(encoding="utf-8"))
    assert data["yield"] == first["yield"], "same seed and boards, different yield"


def test_analyze_exact_interval_and_qmc(tmp_path):
    run = run_cli("analyze", "--samples", DEMO_BOARDS, "--seed", "7", "--interval", "exact", "--qmc",
                  "--json", "q.json", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    m = YIELD_LINE.search(run.stdout)
    assert m and m.group(5) == "exact"
    y = json.loads((tmp_path / "q.json").read_text(encoding="utf-8"))["yield"]
    assert json.loads((tmp_path / "q.json").read_text(encoding="utf-8"))["method"] == "sobol"
    cp_lo, cp_hi = clopper_pearson(y["passed"], y["samples"], 0.95)
    assert float(m.group(3)) == pytest.approx(100 * cp_lo, abs=0.005)
    assert float(m.group(4)) == pytest.approx(100 * cp_hi, abs=0.005)


def test_analyze_half_width_adds_boards_until_the_interval_is_narrow(tmp_path):
    run = run_cli("analyze", "--seed", "7", "--half-width", "2.5", "--max-samples", "20000", "--json", "h.json",
                  cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    y = json.loads((tmp_path / "h.json").read_text(encoding="utf-8"))["yield"]
    lo, hi = wilson(y["passed"], y["samples"], 0.95)
    assert (hi - lo) / 2 <= 0.025 + 1e-9
    assert y["samples"] <= 20000


# --- design ------------------------------------------------------------------------------------------
def butterworth_sections(order: int, cutoff_hz: float) -> list[tuple[float, float]]:
    """(f0, Q) of each pole pair of an analog Butterworth filter, from scipy.signal."""
    _z, p, _k = signal.butter(order, 2 * math.pi * cutoff_hz, analog=True, output="zpk")
    pairs = [q for q in p if q.imag > 0]
    return sorted((abs(q) / (2 * math.pi), abs(q) / (2 * -q.real)) for q in pairs)


def test_design_then_analyze_matches_scipy(tmp_path):
    run = run_cli("design", "--response", "butterworth", "--order", "4", "--cutoff", "2k", "-o", "lp.json",
                  cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    assert (tmp_path / "lp.json").exists() and "wrote lp.json" in run.stdout
    a = run_cli("analyze", str(tmp_path / "lp.json"), "--samples", "200", "--json", "lp_a.json", cwd=tmp_path)
    assert a.returncode == 0, a.stderr
    metrics = json.loads((tmp_path / "lp_a.json").read_text(encoding="utf-8"))["metrics"]
    want = butterworth_sections(4, 2000.0)
    got = sorted((metrics[f"s{i}.f0_hz"]["nominal"], metrics[f"s{i}.q"]["nominal"]) for i in (1, 2))
    for (f0, q), (wf0, wq) in zip(sorted(got, key=lambda t: t[1]), sorted(want, key=lambda t: t[1])):
        assert f0 == pytest.approx(wf0, rel=0.02)  # the design's own limits: 2 % in f0
        assert q == pytest.approx(wq, rel=0.05)   # and 5 % in Q
    assert metrics["cutoff_hz"]["nominal"] == pytest.approx(2000.0, rel=0.02)
    # the terminal's "snapped" figures are the analyzed nominal ones
    for f0, q in got:
        assert f"{q:.4f}" in run.stdout, (q, run.stdout)


def test_design_band_pass_and_gbw(tmp_path):
    run = run_cli("design", "--response", "butterworth", "--order", "2", "--kind", "bandpass", "--cutoff", "1k",
                  "--bandwidth", "300", "--gbw", "1M", "-o", "bp.json", cwd=tmp_path)
    assert run.returncode in (0, 4), run.stderr
    if run.returncode == 4:  # beyond a limit: it says so in words and writes nothing
        assert "--accept-error" in run.stdout + run.stderr
        assert not (tmp_path / "bp.json").exists()
        run = run_cli("design", "--response", "butterworth", "--order", "2", "--kind", "bandpass", "--cutoff",
                      "1k", "--bandwidth", "300", "--gbw", "1M", "--accept-error", "-o", "bp.json", cwd=tmp_path)
        assert run.returncode == 0, run.stderr
    d = json.loads((tmp_path / "bp.json").read_text(encoding="utf-8"))
    assert any(p["ref"].startswith("U") for p in d["parts"]), "--gbw must add op-amp parts"
    assert d["mask"], "a design starts with a mask to edit"


# --- recommend: terminal, CSV, HTML and the written design agree --------------------------------------
@pytest.fixture(scope="module")
def recommended(tmp_path_factory, cli_env):
    tmp = tmp_path_factory.mktemp("recommend")
    run = run_cli("recommend", "--target-yield", "95%", "--samples", DEMO_BOARDS, "--csv", "parts.csv",
                  "--report", "r.html", "-o", "chosen.json", cwd=tmp, env=cli_env)
    return run, tmp


def _terminal_grades(stdout: str, refs: list[str]) -> dict[str, tuple[str, str, float]]:
    """ref -> (current grade, recommended grade, cost) from the terminal table."""
    rows = {}
    for line in stdout.splitlines():
        cells = line.split()
        if cells and cells[0] in refs and len(cells) >= 5:
            rows[cells[0]] = (cells[2], cells[3], float(cells[4]))
    return rows


def test_recommend_outputs_agree(recommended):
    from tolspread.designfile import load, load_demo

    run, tmp = recommended
    assert run.returncode == 0, run.stderr
    demo = load_demo()
    refs = [p.ref for p in demo.parts]
    table = _terminal_grades(run.stdout, refs)
    assert set(table) == set(refs), run.stdout
    # current grades are the demo's own (issue 10 #15)
    assert [table[r][0] for r in refs] == [p.grade for p in demo.parts]
    chosen = load(tmp / "chosen.json")
    assert [table[r][1] for r in refs] == [p.grade for p in chosen.parts]
    total = re.search(r"total relative cost ([\d.]+) \(current grades ([\d.]+)\)", run.stdout)
    assert total, run.stdout
    assert float(total.group(1)) == pytest.approx(sum(c for _g, _r, c in table.values()), abs=0.005)
    # the parts list (a spreadsheet program's view: UTF-8 with BOM, csv module)
    raw = (tmp / "parts.csv").read_bytes()
    assert raw.startswith(b"\xef\xbb\xbf")
    rows = list(csv.DictReader(io.StringIO(raw.decode("utf-8-sig"))))
    assert [r["ref"] for r in rows] == refs
    assert [r["grade"] for r in rows] == [table[r][1] for r in refs]
    assert sum(float(r["relative cost"]) for r in rows) == pytest.approx(float(total.group(1)), abs=0.005)
    assert all(not r["budget metric"].startswith("margin.") for r in rows)  # plain words (#24)
    # the report: both totals, each part's recommended grade
    text = html_text(tmp / "r.html")
    assert total.group(1) in text and total.group(2) in text
    for r in refs:
        assert table[r][1] in text


def test_recommended_grades_meet_the_target_on_fresh_boards(recommended, tmp_path):
    """An independent run on other boards (another seed) finds the target met."""
    _run, tmp = recommended
    a = run_cli("analyze", str(tmp / "chosen.json"), "--samples", "2000", "--seed", "99", "--json", "c.json",
                cwd=tmp_path)
    assert a.returncode == 0, a.stderr
    assert json.loads((tmp_path / "c.json").read_text(encoding="utf-8"))["yield"]["estimate"] >= 0.95


def test_recommend_target_as_fraction_or_percent_is_the_same(recommended, tmp_path):
    run = run_cli("recommend", "--target-yield", "0.95", "--samples", DEMO_BOARDS, cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    first = recommended[0].stdout
    strip = lambda s: [line for line in s.splitlines() if line.strip() and "wrote" not in line]  # noqa: E731
    assert strip(run.stdout) == strip(first)


def test_recommend_too_few_boards_exits_3_and_says_how_many(tmp_path):
    """issue 10 #16: with every board passing, the one-sided Wilson lower bound is
    n / (n + z^2); it reaches p once n >= p z^2 / (1 - p) (closed form, from memory)."""
    run = run_cli("recommend", "--target-yield", "0.995", "--samples", "200", cwd=tmp_path)
    assert run.returncode == 3, (run.returncode, run.stdout, run.stderr)
    assert "Traceback" not in run.stderr
    z = stats.norm.ppf(0.95)
    need = math.ceil(0.995 * z * z / 0.005)
    assert "boards" in run.stdout and f"{need}" in run.stdout.replace(",", ""), run.stdout


@pytest.mark.slow
def test_recommend_curve(tmp_path):
    run = run_cli("recommend", "--target-yield", "0.9", "--samples", "300", "--curve", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    costs = [float(x) for x in re.findall(r"^\s+\d+\.\d+ %\s+([\d.]+)", run.stdout, flags=re.M)]
    assert costs == sorted(costs), "a higher target never costs less"


# --- the window's own options ------------------------------------------------------------------------
def test_version_and_help(tmp_path):
    from tolspread import __version__

    v = run_cli("--version", cwd=tmp_path)
    assert v.returncode == 0 and v.stdout.strip() == f"tolspread {__version__}"
    for sub in ([], ["analyze"], ["design"], ["recommend"]):
        h = run_cli(*sub, "--help", cwd=tmp_path)
        assert h.returncode == 0 and h.stdout.startswith("usage: tolspread"), (sub, h.stderr)


@pytest.mark.gui
def test_screenshot_starts_the_window_and_waits_for_its_figures(tmp_path):
    from PySide6.QtGui import QImage

    shot = tmp_path / "shot.png"
    run = run_cli("--screenshot", str(shot), cwd=tmp_path,
                  env={"QT_QPA_PLATFORM": "offscreen", "TOLSPREAD_CONFIG_DIR": str(tmp_path / "cfg")})
    assert run.returncode == 0, run.stderr
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"  # PNG signature (ISO/IEC 15948)
    img = QImage(str(shot))
    assert (img.width(), img.height()) == (1600, 950)
    # the figures were drawn: the plot area is not a blank page
    grey = np.array([[img.pixelColor(x, y).lightness() for x in range(0, 1600, 16)] for y in range(0, 950, 16)])
    assert (grey < 128).mean() > 0.01
