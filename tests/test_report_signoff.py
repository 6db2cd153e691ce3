"""A report that can be signed (issue 16 item 6), through the user's paths.

``tolspread recommend --report`` and ``tolspread analyze --report`` run in their own
processes; the HTML is read with the standard library's html.parser, and its numbers are
checked against the library functions run here on their own (compare_sets, shape_yields,
numpy on the measured CSV). The title block's fields come from the design file or the
``--author``/``--revision`` options. The window's part (the Report details dialog and the
PDF's page numbers) is in tests/acceptance/test_report_signoff_window.py.
"""
from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
from datetime import datetime, timezone
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

from tolspread import __version__
from tolspread.designfile import design_to_dict, dumps, load, load_demo, loads
from tolspread.errors import InputError, ValidationError
from tolspread.grade_sets import compare_sets
from tolspread.robustness import SHAPES, shape_yields

SAMPLES = 2000  # boards per run: enough for the numbers to differ between sets, quick under load


def run_cli(*args: str, cwd: Path | None = None, timeout: float = 300):
    """``tolspread ARGS`` in its own process, as a person runs it in a terminal."""
    return subprocess.run([sys.executable, "-m", "tolspread.app.cli", *args], capture_output=True, text=True,
                          timeout=timeout, cwd=cwd)


class Sections(HTMLParser):
    """The report's text and tables by section anchor (``<h2 id=...>``); the part before the
    first section is under "head". Tables are lists of rows of cell texts; ``classes`` maps a
    cell's class to its text."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.key = "head"
        self.order: list[str] = ["head"]
        self.text: dict[str, list[str]] = {"head": []}
        self.tables: dict[str, list[list[list[str]]]] = {"head": []}
        self.classes: dict[str, str] = {}
        self._cell: list[str] | None = None
        self._cls = ""
        self._table_class: list[str] = []
        self.table_classes: dict[str, list[str]] = {"head": []}

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "h2" and a.get("id"):
            self.key = a["id"]
            self.order.append(self.key)
            self.text[self.key], self.tables[self.key], self.table_classes[self.key] = [], [], []
        elif tag == "table":
            self.tables[self.key].append([])
            self.table_classes[self.key].append(a.get("class") or "")
        elif tag == "tr":
            self.tables[self.key][-1].append([])
        elif tag in ("td", "th"):
            self._cell, self._cls = [], a.get("class") or ""

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None:
            t = " ".join("".join(self._cell).split())
            self.tables[self.key][-1][-1].append(t)
            if self._cls:
                self.classes[self._cls] = t
            self._cell = None

    def handle_data(self, data):
        self.text[self.key].append(data)
        if self._cell is not None:
            self._cell.append(data)

    def words(self, key: str) -> str:
        return " ".join("".join(self.text[key]).split())


def parse(html: str) -> Sections:
    p = Sections()
    p.feed(html)
    return p


def pct(x: float) -> str:
    """A fraction as the report writes it (two decimals; from memory of numbers.format_pct)."""
    return f"{100 * x:.2f} %"


@pytest.fixture(scope="module")
def recommended(tmp_path_factory):
    """``tolspread recommend --target-yield 0.9 --report r.html --author "A. Person" --revision B``,
    with a set of the user's own and the chosen design written out."""
    d = tmp_path_factory.mktemp("signoff")
    run = run_cli("recommend", "--target-yield", "0.9", "--samples", str(SAMPLES), "--report", "r.html",
                  "--author", "A. Person", "--revision", "B", "--compare", "C1=C-C0G-2,C3=C-C0G-2",
                  "-o", "chosen.json", cwd=d)
    assert run.returncode == 0, run.stderr
    return d, parse((d / "r.html").read_text(encoding="utf-8")), load(d / "chosen.json")


def test_title_block_names_design_revision_author_date_and_tool(recommended):
    _, rep, chosen = recommended
    demo = load_demo()
    assert rep.classes["tb-design"] == demo.name
    assert rep.classes["tb-revision"] == "B" and rep.classes["tb-author"] == "A. Person"
    assert rep.classes["tb-tool"] == f"tolspread {__version__}"
    # the date the report was written: today (local time of the run; either side of midnight UTC)
    today = {datetime.now().strftime("%Y-%m-%d"), datetime.now(timezone.utc).strftime("%Y-%m-%d")}
    assert rep.classes["tb-date"][:10] in today
    # the options went into the design the recommendation wrote, too
    assert (chosen.revision, chosen.author) == ("B", "A. Person")


def _set_from_cell(demo, cell: str, first: tuple[str, ...]) -> tuple[str, ...]:
    """A set's grade names from its "changes from the first set" cell ("R1 R-thick-5, ...")."""
    names = list(first)
    for item in re.findall(r"\b([RC]\d+) ([A-Za-z0-9.-]+)", cell):
        names[demo.part_index(item[0])] = item[1]
    return tuple(names)


def test_comparison_numbers_are_compare_sets_on_the_same_boards(recommended):
    _, rep, chosen = recommended
    demo = load_demo()
    [tab] = rep.tables["comparison"]
    head, rows = tab[0], tab[1:]
    assert head[0] == "Set" and head[6].startswith("Target")  # the demo's after-life columns follow (issue 15)
    labels = [r[0] for r in rows]
    assert labels[:2] == ["current", "recommended"] and "yours 1" in labels
    current = tuple(p.grade for p in demo.parts)
    sets = [(r[0], current if r[0] == "current" else _set_from_cell(demo, r[1], current)) for r in rows]
    assert dict(sets)["recommended"] == tuple(p.grade for p in chosen.parts)  # the grades -o wrote
    mine = dict(sets)["yours 1"]
    assert mine[demo.part_index("C1")] == "C-C0G-2" and mine[demo.part_index("C3")] == "C-C0G-2"
    # the outside check: compare_sets run here on its own, the same boards (design's seed, SAMPLES)
    found = compare_sets(demo, sets, samples=SAMPLES, confidence=0.95)
    for row, r in zip(rows, found):
        assert row[2] == f"{r.cost:.2f}", row  # relative cost: the demo has no prices
        assert row[3] == pct(r.yield_.estimate), row
        assert row[4] == f"{pct(r.yield_.low)} to {pct(r.yield_.high)}", row
        assert row[5] == pct(r.lower), row
        assert row[6] == ("meets" if r.lower >= 0.9 else "misses"), row
        assert row[7] == pct(r.after.estimate) and row[8] == pct(r.after_lower), row  # the same boards after 20 years
    words = rep.words("comparison")
    assert f"same {SAMPLES:,} boards" in words and "target 90.0 %" in words
    if "no class II" in labels:  # the recommendation put class II dielectrics in the signal path
        assert "class II" in words and "common practice" in words


def test_robustness_table_is_shape_yields_of_the_reported_grades(recommended):
    _, rep, chosen = recommended
    [tab] = rep.tables["robustness"]
    rows = tab[1:]
    assert [r[0] for r in rows] == list(SHAPES)
    # outside check: the five shapes evaluated here on their own, on the report's boards
    for row, sy in zip(rows, shape_yields(chosen, samples=SAMPLES)):
        assert row[2] == pct(sy.yield_.estimate), row
        assert row[3] == f"{pct(sy.yield_.low)} to {pct(sy.yield_.high)}", row
        assert row[4] == pct(sy.lower), row
        assert row[5] == ("meets" if sy.lower >= 0.9 else "misses"), row
    missed = [r[0] for r in rows if r[5] == "misses"]
    words = rep.words("robustness")
    assert ("misses the target" in words) == bool(missed)


def test_high_yield_method_sign_off_and_caution(recommended):
    _, rep, _ = recommended
    # which method gave the yield: plain sampling here, the failing count from the yield section
    y = re.search(r"([\d,]+) of ([\d,]+) boards meet every span", rep.words("yield"))
    passed, boards = (int(g.replace(",", "")) for g in y.groups())
    hy = rep.words("high-yield")
    assert f"{boards - passed:,} of {boards:,} boards failed" in hy and "method that gave the yield" in hy
    # the sign-off block: three roles, name / signature / date, the author written in as preparer
    [tab] = rep.tables["signoff"]
    assert tab[0] == ["Role", "Name", "Signature", "Date"]
    assert [r[0] for r in tab[1:]] == ["Prepared by", "Reviewed by", "Approved by"]
    assert tab[1][1] == "A. Person" and all(c == "" for r in tab[1:] for c in r[2:])
    assert rep.order[-1] == "signoff"
    # the caution (estimates under stated assumptions, measurement and qualified review) comes
    # before the signatures
    caution = rep.words("assumptions")
    assert "estimates under the assumptions" in caution and "measurements of real parts" in caution
    assert "qualified review" in caution and rep.table_classes["assumptions"][-1] == "caution"


def _measured_csv(path: Path, rng) -> np.ndarray:
    values = 22e-9 * (1 + rng.normal(0.004, 0.01, 60))  # an invented reel of 22 nF parts, one lot
    path.write_text("value\n" + "\n".join(f"{v:.6e}" for v in values) + "\n")
    return values


def test_analyze_report_measured_parts_and_importance_estimate(tmp_path):
    csv_values = _measured_csv(tmp_path / "c1.csv", np.random.default_rng(7))
    run = run_cli("measure", "--part", "C1=c1.csv", "--samples", "300", "--replicates", "2", "-o", "m.json",
                  cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    args = ["analyze", "m.json", "--samples", str(SAMPLES), "--rare", "always", "--revision", "C"]
    run = run_cli(*args, "--report", "r.html", "--json", "r.json", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    rep = parse((tmp_path / "r.html").read_text(encoding="utf-8"))
    assert rep.classes["tb-revision"] == "C" and rep.classes["tb-author"] == "(not stated)"
    # measured parts: n, mean and spread of the deviation against numpy on the CSV
    [tab] = rep.tables["measured"]
    [row] = tab[1:]
    dev = (csv_values / 22e-9 - 1) * 100
    assert row[0] == "C1" and row[2] == "60" and row[6] == "1"
    assert row[3] == f"{dev.mean():+.3f} %" and row[4] == f"{dev.std(ddof=1):.3f} %"
    assert "one lot" in rep.words("measured") and "lot-to-lot variation" in rep.words("measured")
    # the high-yield method: the estimate, its interval and the plain-board equivalent
    hy = rep.words("high-yield")
    data = json.loads((tmp_path / "r.json").read_text())["yield"].get("high_yield", {})
    if "failure_rate" in data:
        [tab] = rep.tables["high-yield"]
        cells = dict((r[0], r[1]) for r in tab[1:])
        assert "importance sampling" in cells["Method"]
        assert cells["Failure rate"].startswith(f"{data['failure_rate']:.3g} ")
        assert "Plain boards for the same interval" in cells
    else:  # not made: the report says why, in the analysis's words
        assert data["note"] in hy
    # no comparison without a recommendation; the robustness table without a target column
    assert "comparison" not in rep.order
    [tab] = rep.tables["robustness"]
    assert tab[0][-1] == "Lower bound" and [r[0] for r in tab[1:]] == list(SHAPES)


def test_revision_and_author_round_trip_and_bad_values_name_the_field(tmp_path):
    d = load_demo()
    from dataclasses import replace

    signed = replace(d, revision="D.2", author="B. Person")
    again = loads(dumps(signed))
    assert (again.revision, again.author) == ("D.2", "B. Person") and again == signed
    assert "revision" not in design_to_dict(d)  # not written when not stated
    data = design_to_dict(d)
    data["revision"] = 5
    with pytest.raises(ValidationError) as err:
        loads(json.dumps(data))
    assert any(p.path == "revision" for p in err.value.problems)
    data["revision"], data["author"] = "B", "two\nlines"
    with pytest.raises((InputError, ValidationError)) as err:
        loads(json.dumps(data))
    assert "author" in str(err.value)
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({**design_to_dict(d), "author": ["x"]}))
    run = run_cli("analyze", str(bad), "--samples", "100")
    assert run.returncode == 2 and "author" in run.stderr and "Traceback" not in run.stderr
    run = run_cli("recommend", "--target-yield", "0.9", "--author", "x" * 201)
    assert run.returncode == 2 and "--author" in run.stderr and "Traceback" not in run.stderr


@pytest.mark.skipif(not (shutil.which("chromium") and shutil.which("pdftotext")), reason="needs chromium and poppler")
def test_html_printed_by_a_browser_numbers_its_pages(recommended, tmp_path):
    # the HTML file printed to paper by a browser (headless chromium) carries "page N of M" too
    d, _, _ = recommended
    pdf = tmp_path / "printed.pdf"
    subprocess.run(["chromium", "--headless", "--no-sandbox", "--no-pdf-header-footer", f"--print-to-pdf={pdf}",
                    (d / "r.html").as_uri()], capture_output=True, timeout=120)
    text = subprocess.run(["pdftotext", "-layout", str(pdf), "-"], capture_output=True, text=True,
                          check=True).stdout
    pages = [p for p in text.split("\f") if p.strip()]
    assert len(pages) >= 3
    for i, page in enumerate(pages, start=1):
        assert f"page {i} of {len(pages)}" in page, i


def test_comparison_costs_are_money_per_board_when_priced(tmp_path):
    # a priced catalog and a purchase quantity: the report's cost column is money per board,
    # summed here from the catalog's price breaks (the unit price at the largest break <= 5,000)
    from test_constraints import CATALOG, _rc

    d = _rc("rc_lowpass", "10k", "10n", 100, 1000, -1.6)
    d["parts"][0]["grade"], d["parts"][1]["grade"] = "R-b-1", "C-g-2"
    d["grades"] = CATALOG["grades"]
    d["purchase"] = {"boards": 5000, "currency": "EUR"}
    d["author"] = "C. Person"
    (tmp_path / "design.json").write_text(json.dumps(d))
    run = run_cli("recommend", "design.json", "--target-yield", "0.5", "--samples", "1000", "--report", "r.html",
                  cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    rep = parse((tmp_path / "r.html").read_text(encoding="utf-8"))
    assert rep.classes["tb-author"] == "C. Person" and rep.tables["signoff"][0][1][1] == "C. Person"
    [tab] = rep.tables["comparison"]
    assert tab[0][2] == "Cost (EUR per board at 5,000 boards)"
    price = {g["name"]: [p for q, p in g["prices"] if q <= 5000][-1] for g in CATALOG["grades"]}
    design = load(tmp_path / "design.json")
    for row in tab[1:]:
        names = _set_from_cell(design, row[1], ("R-b-1", "C-g-2"))
        assert row[2] == f"{sum(price[n] for n in names):.4g}", row


def test_robustness_over_an_operating_range_is_judged_over_the_range(tmp_path):
    # a design judged over a range and a life (the built-in demo, -40..85 degC and 20 years):
    # the shapes (all five, "as graded" too) are judged over the operating range as
    # delivered, as the yield is; the report says the service life is not in them
    demo = load_demo()
    assert demo.analysis.operating_range_c is not None and demo.analysis.service_hours > 0
    run = run_cli("analyze", "--samples", "400", "--report", "r.html", cwd=tmp_path)
    assert run.returncode == 0, run.stderr
    rep = parse((tmp_path / "r.html").read_text(encoding="utf-8"))
    [tab] = rep.tables["robustness"]
    for row, sy in zip(tab[1:], shape_yields(demo, samples=400)):
        assert (row[0], row[2], row[4]) == (sy.shape, pct(sy.yield_.estimate), pct(sy.lower)), row
    assert "over the operating range as delivered, not after the service life" in rep.words("robustness")
