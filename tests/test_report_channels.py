"""The report's Channel match section (issue 15 item 6): for a design of several channels
with match spans, the charts of the largest difference between channels with each match
span's limit, and a table of the match spans, all read from the analysis (never evaluated
again). Run through the command line, as a user does, and compared with the same run's
``--json``."""
from __future__ import annotations

import html
import json
import re
import sys
from pathlib import Path

import pytest

from cli_runs import run_cli

EXAMPLE = Path(__file__).resolve().parents[1] / "assets" / "examples" / "matched_iq_channels.json"


def _section(page: str, key: str) -> str:
    start = page.find(f'<h2 id="{key}"')
    assert start >= 0, f"no section {key}"
    end = page.find("<h2", start + 5)
    return page[start:end if end > 0 else len(page)]


def _cells(row_html: str) -> list[str]:
    return [html.unescape(re.sub(r"<[^>]+>", "", c)).strip()
            for c in re.findall(r"<td[^>]*>(.*?)</td>", row_html, re.S)]


def _number(text: str) -> float:
    return float(re.match(r"[-+]?[0-9.]+", text.replace(",", "")).group(0))


@pytest.fixture(scope="module")
def iq_run(tmp_path_factory):
    """``tolspread analyze`` of the I/Q example with 2,000 boards (all of them drawn: the
    report's figure keeps the curves of up to 2,000 boards) writing the report and JSON."""
    folder = tmp_path_factory.mktemp("iq")
    page, doc = folder / "r.html", folder / "r.json"
    proc = run_cli("analyze", str(EXAMPLE), "--samples", "2000", "--report", str(page), "--json", str(doc))
    assert proc.returncode == 0, proc.stderr
    return page.read_text(encoding="utf-8"), json.loads(doc.read_text(encoding="utf-8"))


def test_channel_match_section_has_a_chart_per_match_quantity_with_its_limits(iq_run):
    page, _ = iq_run
    sec = _section(page, "channel-match")
    assert 'href="#channel-match"' in page  # in the contents line
    for q, axis in (("gain", "gain difference (dB)"), ("phase", "phase difference (deg)")):
        svg = re.search(rf'<svg[^>]*>.*?id="match-{q}-data".*?</svg>', sec, re.S)
        assert svg is not None, q
        assert axis in svg.group(0) and "match span limit" in svg.group(0)
    assert "delay" not in re.sub(r"<svg.*?</svg>", "", sec, flags=re.S).split("Match span")[1].split("</table>")[0]


def test_the_largest_differences_and_failures_are_the_analysis_numbers(iq_run):
    """With every analysed board drawn, the largest difference in a flat match span's band
    over every board is its limit minus the worst margin of the same run's JSON (a match
    span's margin is the limit minus the largest difference, by the span's definition:
    README "Channels"); the failing boards are the JSON's."""
    page, doc = iq_run
    design = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    spans = {s["name"]: s for s in design["mask"] if s["kind"] == "match"}
    fails = {s["name"]: s for s in doc["yield"]["spans"]}
    sec = _section(page, "channel-match")
    table = sec[sec.index("<tbody>"):sec.index("</tbody>")]
    rows = [_cells(r) for r in re.findall(r"<tr>(.*?)</tr>", table, re.S)]
    assert sorted(r[0] for r in rows) == sorted(spans)
    for r in rows:
        span, got = spans[r[0]], fails[r[0]]
        tol = 0.0005 if span["quantity"] == "gain" else 0.005  # dB to 3 decimals, deg to 2 (as written)
        assert _number(r[4]) == pytest.approx(span["limit1"] - got["worst_margin_db"], abs=tol)
        assert _number(r[3]) <= _number(r[4]) + tol  # the central band lies inside every board's
        assert _number(r[5]) == got["failed"]
        assert _number(r[6]) == pytest.approx(got["worst_margin_db"], abs=tol)
        assert f"{span['limit1']:.2f}" in r[1]
    y = doc["yield"]
    assert f"{y['passed']:,} of {y['samples']:,} boards" in sec


def test_one_channel_has_no_channel_match_section(tmp_path):
    design = json.loads(EXAMPLE.read_text(encoding="utf-8"))
    design["channels"] = {"count": 1}
    design["mask"] = [s for s in design["mask"] if s["kind"] != "match"]
    for n in design.get("networks", []):
        n.pop("across_channels", None)
    path, page = tmp_path / "one.json", tmp_path / "one.html"
    path.write_text(json.dumps(design), encoding="utf-8")
    proc = run_cli("analyze", str(path), "--samples", "300", "--report", str(page))
    assert proc.returncode == 0, proc.stderr
    text = page.read_text(encoding="utf-8")
    assert 'id="channel-match"' not in text and "match span limit" not in text


def test_the_channel_match_section_evaluates_nothing(tmp_path, monkeypatch):
    """``tolspread analyze --report`` on the I/Q example evaluates the design's boards the
    same times as without the report (the section reads the analysis's differences)."""
    import tolspread.evaluate as ev
    from tolspread.app.cli import main
    from tolspread.designfile import load

    original = ev.evaluate
    design = load(EXAMPLE)
    calls: list[tuple] = []

    def counting(d, **kw):
        if d == design:
            calls.append((kw.get("start", 0), kw.get("samples"), repr(kw.get("conditions"))))
        return original(d, **kw)

    for mod in list(sys.modules.values()):
        if getattr(mod, "__name__", "").startswith("tolspread") and getattr(mod, "evaluate", None) is original:
            monkeypatch.setattr(mod, "evaluate", counting)
    assert main(["analyze", str(EXAMPLE), "--samples", "1500"]) == 0
    plain = list(calls)
    calls.clear()
    out = tmp_path / "r.html"
    assert main(["analyze", str(EXAMPLE), "--samples", "1500", "--report", str(out)]) == 0
    assert plain and calls == plain
    assert 'id="channel-match"' in out.read_text(encoding="utf-8")
