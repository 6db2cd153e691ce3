"""The HTML report: well-formed, self-contained, escaped, and showing the library's numbers.

The references are outside the report code: the numbers come from tolspread.analysis /
tolspread.stats / tolspread.corners, the markup is checked with Python's html.parser and
xml.etree, the figure geometry against the frequency axis it claims to draw.
"""
from __future__ import annotations

import html
import math
import re
import xml.etree.ElementTree as ET
from dataclasses import replace
from datetime import datetime
from html.parser import HTMLParser

import numpy as np
import pytest

from tolspread.analysis import analyze
from tolspread.designfile import load_demo
from tolspread.evaluate import evaluate
from tolspread.report import (CAUTION, FIGURE_BOARDS, build_report, format_pct, svg_bar_chart, svg_cost_yield,
                              svg_histogram, svg_spread_plot, write_report)
from tolspread.sampling import Conditions
from tolspread.stats import yield_estimate
from tolspread.temperature_settings import judged_temperatures
from tolspread.values import format_value

WHEN = datetime(2026, 1, 2, 3, 4)
VOID = {"area", "base", "br", "col", "embed", "hr", "img", "input", "link", "meta", "source", "track", "wbr"}


class TagChecker(HTMLParser):
    """Collects tags and attributes; records every nesting error."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.stack: list[str] = []
        self.errors: list[str] = []
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.comments: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))

    def handle_endtag(self, tag):
        if tag in VOID:
            return
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
            if tag in self.stack:
                while self.stack.pop() != tag:
                    pass
            return
        self.stack.pop()

    def handle_comment(self, data):
        self.comments.append(data)


def parse(doc: str) -> TagChecker:
    p = TagChecker()
    p.feed(doc)
    p.close()
    assert p.errors == []
    assert p.stack == [], f"unclosed: {p.stack}"
    return p


def svg_numbers(root: ET.Element) -> tuple[float, float, list[tuple[float, float, str]]]:
    """viewBox size and every drawn (x, y) point with its element tag."""
    vb = [float(v) for v in root.attrib["viewBox"].split()]
    assert vb[:2] == [0.0, 0.0]
    pts: list[tuple[float, float, str]] = []
    for el in root.iter():
        tag = el.tag.split("}")[-1]
        a = el.attrib
        if tag in ("polyline", "polygon"):
            for pair in a["points"].split():
                x, y = pair.split(",")
                pts.append((float(x), float(y), tag))
        elif tag == "line":
            pts += [(float(a["x1"]), float(a["y1"]), tag), (float(a["x2"]), float(a["y2"]), tag)]
        elif tag == "rect" and "x" in a:
            x, y, w, h = (float(a[k]) for k in ("x", "y", "width", "height"))
            assert w >= 0 and h >= 0
            pts += [(x, y, tag), (x + w, y + h, tag)]
        elif tag == "text":
            pts.append((float(a["x"]), float(a["y"]), tag))
        assert tag != "path", "figures draw with polylines, polygons, lines and rects"
    return vb[2], vb[3], pts


@pytest.fixture(scope="module")
def demo():
    design = load_demo()
    result = analyze(design, samples=2000, curves=FIGURE_BOARDS)
    return design, result, build_report(result, generated=WHEN)


@pytest.fixture(scope="module")
def demo_html(demo):
    return demo[2].html()


def section(doc: str, anchor: str) -> str:
    """The text of one h2 section (to the next h2)."""
    start = doc.index(f'<h2 id="{anchor}">')
    end = doc.find("<h2 ", start + 1)
    return doc[start:end if end > 0 else len(doc)]


# --- structure ---------------------------------------------------------------------------

def test_html_parses_and_every_svg_is_well_formed(demo, demo_html):
    _, _, rep = demo
    p = parse(demo_html)
    names = [t for t, _ in p.tags]
    assert names.count("html") == names.count("body") == 1
    inline = re.findall(r"<svg\b.*?</svg>", demo_html, flags=re.S)
    assert len(inline) == len(rep.figures) >= 5
    for chunk in inline:
        assert ET.fromstring(chunk).tag == "svg"
    for name, svg in rep.figures.items():
        root = ET.fromstring(svg)
        assert root.tag == "{http://www.w3.org/2000/svg}svg", name


def test_self_contained_no_script_no_external_resources(demo_html):
    p = parse(demo_html)
    assert "<script" not in demo_html.lower()
    assert "http://" not in demo_html and "https://" not in demo_html
    for tag, attrs in p.tags:
        assert not tag.startswith("script") and tag not in ("iframe", "object", "embed", "link")
        assert "src" not in attrs, tag
        assert not any(k.startswith("on") for k in attrs), (tag, attrs)
        if "href" in attrs:
            assert attrs["href"].startswith("#"), attrs["href"]
    for ref in re.findall(r"url\(([^)]*)\)", demo_html):
        assert ref.startswith("#"), ref
    ids = [attrs["id"] for _, attrs in p.tags if "id" in attrs]
    assert len(ids) == len(set(ids)), "element ids must be unique across inline figures"
    for ref in re.findall(r'(?:href="|url\()#([^")]+)', demo_html):
        assert ref in ids, ref


def test_every_figure_point_inside_its_viewbox(demo):
    _, _, rep = demo
    for name, svg in rep.figures.items():
        w, h, pts = svg_numbers(ET.fromstring(svg))
        assert pts, name
        for x, y, tag in pts:
            assert 0 <= x <= w and 0 <= y <= h, (name, tag, x, y)


# --- the library's numbers --------------------------------------------------------------------

def test_yield_and_interval_as_the_library_computes_them(demo, demo_html):
    design, result, _ = demo
    a = design.analysis
    ref = yield_estimate(result.ensemble.passed, None, a.confidence, a.interval)
    assert (ref.passed, ref.samples) == (result.yield_.passed, 2000)
    est, lo, hi = (f"{100 * v:.2f} %" for v in (ref.estimate, ref.low, ref.high))
    y = section(demo_html, "yield")
    assert f"<b>{est}</b>" in y
    assert f"<b>{lo} to {hi}</b>" in y
    assert f"{ref.passed:,} of {ref.samples:,} boards" in y
    assert "Wilson score interval" in y
    assert "95 % confidence interval" in y


def test_samples_seed_and_grid_in_assumptions(demo, demo_html):
    design, result, _ = demo
    s = section(demo_html, "assumptions")
    assert f"Sampled boards: {2000:,}; seed {design.analysis.seed};" in s
    assert str(result.seed) == str(design.analysis.seed) == "20261201"
    assert f"{result.prepared.freqs_hz.size} points from 10 Hz to 100 kHz" in s
    assert "PCG64" in s and "coverage factor k = 2" in s and "truncated" in s
    assert "25 \u00b0C" in s and "Lot share 0" in s
    assert "ideal op-amp (infinite gain and bandwidth" in s
    assert "tolspread 0.1.0" in s


def test_every_part_and_span_and_failure_count(demo, demo_html):
    design, result, _ = demo
    d = section(demo_html, "design")
    for p in design.parts:
        assert f"<tr><td>{html.escape(p.ref)}</td>" in d
    f = section(demo_html, "failures")
    fails = ~(result.ensemble.margins >= 0)
    for j, s in enumerate(design.mask):
        assert f"<td>{html.escape(s.label)}</td>" in section(demo_html, "mask")
        count = int(fails[:, j].sum())
        assert f'<tr><td>{html.escape(s.label)}</td><td class="num">{count:,}</td>' in f


def test_budget_shares_and_corners(demo, demo_html):
    design, result, _ = demo
    b = section(demo_html, "budget")
    top = result.budget["cutoff_hz"].entries[0]
    assert f'<tr><td>{top.ref}</td><td class="num">{100 * top.share:.1f} %</td>' in b
    c = section(demo_html, "corners")
    n = len(design.parts)
    assert result.corners.exhaustive
    assert f"all {2 ** n} combinations of the {n} varying parts" in c
    r = result.corners.ranges["cutoff_hz"]
    assert format_value(r.corner_low, "Hz", digits=4) in c and format_value(r.mc_high, "Hz", digits=4) in c
    # a metric that is not linear at the nominal (a one-sided margin) says so, as the
    # terminal does, rather than an RSS near zero or "n/a"
    flat = [name for name, rr in result.corners.ranges.items() if not rr.linear]
    assert ('<td class="num">not linear</td>' in c) == bool(flat)
    assert "see the sampled spread" in c


def test_caution_and_assumptions(demo_html):
    assert '<h2 id="assumptions">Assumptions</h2>' in demo_html
    box = re.search(r'<table class="caution".*?</table>', demo_html, flags=re.S)
    assert box and html.escape(CAUTION) in box.group(0)
    assert demo_html.index("Assumptions</h2>") < box.start()
    assert "confirm" in CAUTION.lower() and "qualified review" in CAUTION and "standards" in CAUTION


# --- images for printing ---------------------------------------------------------------------

def test_html_with_images_substitutes_every_figure(demo):
    _, _, rep = demo
    doc = rep.html_with_images(lambda name: f"figures/{name}.png")
    p = parse(doc)
    srcs = [attrs["src"] for tag, attrs in p.tags if tag == "img"]
    assert sorted(srcs) == sorted(f"figures/{n}.png" for n in rep.figures)
    assert "<svg" not in doc and "figure:" not in "".join(p.comments)
    inline = rep.html()
    # the same document apart from the figures
    strip = lambda s: re.sub(r"<svg\b.*?</svg>|<img [^>]*>", "", s, flags=re.S)  # noqa: E731
    assert strip(doc) == strip(inline)


def test_user_text_is_escaped():
    design = load_demo()
    evil = "<b>bold</b> & <script>x</script>"
    span = replace(design.mask[0], name="<i>floor</i>")
    design = replace(design, name=evil, description="desc <img src=x>").with_mask((span,) + design.mask[1:])
    rep = build_report(analyze(design, samples=300, curves=FIGURE_BOARDS), generated=WHEN, title=None)
    doc = rep.html()
    parse(doc)
    assert "<b>bold</b>" not in doc and "<script" not in doc and "<img" not in doc and "<i>floor" not in doc
    assert html.escape(evil) in doc
    assert html.escape("<i>floor</i>") in doc
    for svg in rep.figures.values():
        ET.fromstring(svg)  # span names inside figure titles are escaped too


# --- figures ---------------------------------------------------------------------------------------

def _frame(root: ET.Element) -> tuple[float, float, float, float]:
    for el in root.iter():
        if el.tag.endswith("rect") and el.attrib.get("fill") == "none":
            x, y, w, h = (float(el.attrib[k]) for k in ("x", "y", "width", "height"))
            return x, y, x + w, y + h
    raise AssertionError("no plot frame")


def test_spread_plot_decade_ticks_and_clipping(demo):
    design, result, rep = demo
    root = ET.fromstring(rep.figures["spread"])
    x0, y0, x1, y1 = _frame(root)
    texts = {el.text: float(el.attrib["x"]) for el in root.iter() if el.tag.endswith("text")}
    lo, hi = design.analysis.f_start, design.analysis.f_stop
    for f in (10.0, 100.0, 1e3, 1e4, 1e5):
        label = format_value(f, "Hz", digits=3)
        assert label in texts, label
        want = x0 + (math.log10(f) - math.log10(lo)) / (math.log10(hi) - math.log10(lo)) * (x1 - x0)
        assert texts[label] == pytest.approx(want, abs=0.11)
    # every data polyline/polygon stays inside the plot frame (also where the curve leaves it)
    for el in root.iter():
        if el.tag.endswith(("polyline", "polygon")):
            for pair in el.attrib["points"].split():
                x, y = (float(v) for v in pair.split(","))
                assert x0 - 0.06 <= x <= x1 + 0.06 and y0 - 0.06 <= y <= y1 + 0.06, (x, y)
    svg = rep.figures["spread"]
    assert "#0072B2" in svg and "#56B4E9" in svg and "#E69F00" in svg and "#CC79A7" in svg
    # hatching as plain strokes, no patterns or clip paths (image converters draw them black or
    # not at all: issue 10 #26); every stroke stays inside the frame
    assert "<pattern" not in svg and "clip-path" not in svg
    data = next(g for g in root.iter() if g.attrib.get("id") == "spread-data")
    for el in data.iter():
        if el.tag.split("}")[-1] == "line":
            for k in ("y1", "y2"):
                assert y0 - 0.06 <= float(el.attrib[k]) <= y1 + 0.06


def test_spread_plot_zoom_keeps_points_inside():
    f = np.geomspace(10, 1e5, 200)
    nominal = -40 * np.log10(1 + (f / 2e3) ** 2)  # falls far below the zoomed range
    svg = svg_spread_plot(f, nominal, None, load_demo().mask, 0.0, y_range=(-3, 1), x_range=(10, 4e3))
    root = ET.fromstring(svg)
    x0, y0, x1, y1 = _frame(root)
    lines = [el for el in root.iter() if el.tag.endswith("polyline")]
    assert lines
    for el in lines:
        for pair in el.attrib["points"].split():
            x, y = (float(v) for v in pair.split(","))
            assert x0 - 0.06 <= x <= x1 + 0.06 and y0 - 0.06 <= y <= y1 + 0.06


def test_spread_figure_draws_the_first_boards_of_the_run(demo):
    """The spread figure's curves are those of the analysed boards themselves (the same
    seed and boards as an independent evaluate call with curves), kept by the one run."""
    design, result, rep = demo
    curves = evaluate(design, samples=2000, seed=result.seed, curves=True)
    assert result.curves is not None and result.curves.boards == 2000
    np.testing.assert_array_equal(result.curves.gain_db, curves.gain_db)
    np.testing.assert_array_equal(result.ensemble.values, curves.values)
    # the demo is judged over its operating range: a board's margin is its smallest over the
    # judged temperatures, each evaluated here alone (25 degC is the curves' own run)
    alone = [evaluate(design, samples=2000, seed=result.seed, curves=False, conditions=Conditions(t, t)).margins
             for t in judged_temperatures(design.analysis)]
    assert len(alone) == 3
    np.testing.assert_array_equal(result.ensemble.margins, np.minimum.reduce(alone))
    with pytest.raises(ValueError, match="curves"):
        build_report(analyze(design, samples=300), generated=WHEN)  # no curves kept: said, not evaluated again


def test_more_boards_than_the_figure_draws_keep_the_same_numbers():
    """With more boards than the figure draws, the first FIGURE_BOARDS keep curves and the
    rest do not; every number equals a run without curves (common random numbers)."""
    design = load_demo()
    plain = analyze(design, samples=2600, seed=11)
    drawn = analyze(design, samples=2600, seed=11, curves=500)
    assert drawn.curves is not None and drawn.curves.boards == 500
    np.testing.assert_array_equal(drawn.ensemble.margins, plain.ensemble.margins)
    np.testing.assert_array_equal(drawn.ensemble.values, plain.ensemble.values)
    for name, col in plain.ensemble.metrics.items():
        np.testing.assert_array_equal(drawn.ensemble.metrics[name], col)
    assert drawn.yield_ == plain.yield_


def test_the_report_path_evaluates_each_board_once(tmp_path, monkeypatch):
    """`tolspread analyze --report` samples every board once: the calls to the evaluation
    entry (tolspread.evaluate.evaluate, wherever it was imported) cover the run's boards
    without overlap. Before the one pipeline, the report evaluated its figure's boards again.
    The robustness table's other distribution shapes are other designs (reshaped grades), each
    evaluated once on the same boards; "as graded" is the analysis's own (issue 16 item 6),
    except over an operating range (the demo's), where every shape is judged over the range."""
    import sys

    import tolspread.evaluate as ev
    from tolspread.app.cli import main

    calls = []
    original = ev.evaluate

    def counting(design, **kw):
        calls.append((kw.get("start", 0), kw.get("samples"), kw.get("conditions"), design))
        return original(design, **kw)

    for mod in list(sys.modules.values()):
        if getattr(mod, "__name__", "").startswith("tolspread") and getattr(mod, "evaluate", None) is original:
            monkeypatch.setattr(mod, "evaluate", counting)
    out = tmp_path / "r.html"
    assert main(["analyze", "--samples", "2500", "--seed", "5", "--report", str(out)]) == 0
    from tolspread.designfile import load_demo
    from tolspread.robustness import SHAPES

    demo = load_demo()
    ranges = sorted((start, start + n) for start, n, cond, d in calls if cond is None and d == demo)
    # one run per other shape; the demo is judged over its operating range, so "as graded"
    # is judged over it by a run of its own too (without a range it is the analysis's own),
    # and each shape's boards at each judged temperature (the calls with conditions) once,
    # but for the board temperature's own (25 degC), which is that run
    others = [(cond, d) for *_, cond, d in calls if d != demo]
    a = demo.analysis
    temps = [t for t in judged_temperatures(a) if (t, t) != (a.temp_low_c, a.temp_high_c)]
    assert temps == [-40.0, 85.0] and len([d for cond, d in others if cond is None]) == len(SHAPES)
    judged = [(repr(cond), repr(d)) for cond, d in others if cond is not None]
    assert len(judged) == len(set(judged)) == len(SHAPES) * len(temps)
    assert ranges[0][0] == 0 and ranges[-1][1] == 2500
    assert all(a[1] == b[0] for a, b in zip(ranges, ranges[1:]))  # contiguous, no board twice
    assert "Spread of the response" in out.read_text(encoding="utf-8")


def test_histogram_counts_from_the_ensemble(demo):
    _, result, rep = demo
    passed = int(result.ensemble.passed.sum())
    svg = rep.figures["histogram"]
    assert f"passing boards ({passed:,})" in svg
    assert f"failing boards ({result.samples - passed:,})" in svg
    v = np.array([0.0, 1.0, 1.0, 2.0, 2.0, 2.0])
    root = ET.fromstring(svg_histogram(v, [-0.5, 0.5, 1.5, 2.5], v > 1.5, "x"))
    bars = [el for el in root.iter() if el.tag.endswith("rect") and el.attrib.get("fill") in ("#0072B2", "#D55E00")
            and float(el.attrib["width"]) > 18]
    heights = sorted((el.attrib["fill"], float(el.attrib["height"])) for el in bars)
    unit = [h for c, h in heights if c == "#0072B2"]
    assert len(unit) == 2 and unit[1] == pytest.approx(2 * unit[0], abs=0.15)  # 1 and 2 passing boards
    fail = [h for c, h in heights if c == "#D55E00"]
    assert len(fail) == 1 and fail[0] == pytest.approx(3 * unit[0], abs=0.2)  # 3 failing boards


def test_bar_chart_lengths_proportional():
    root = ET.fromstring(svg_bar_chart(["R1", "C<2>"], [50.0, 12.5], "budget & more"))
    bars = [el for el in root.iter() if el.tag.endswith("rect") and el.attrib.get("fill") == "#0072B2"]
    assert len(bars) == 2
    texts = [el.text for el in root.iter() if el.tag.endswith("text")]
    assert "C<2>" in texts and "50.0 %" in texts and "12.5 %" in texts and "budget & more" in texts
    grid = {el.text: float(el.attrib["x"]) for el in root.iter() if el.tag.endswith("text") and "%" in (el.text or "")}
    full = grid["100 %"] - grid["0 %"]
    assert float(bars[0].attrib["width"]) == pytest.approx(0.5 * full, abs=0.15)
    assert float(bars[1].attrib["width"]) == pytest.approx(0.125 * full, abs=0.15)


def test_cost_yield_marks_unmet_targets():
    svg = svg_cost_yield([(0.8, 8.5), (0.95, 14.8), (0.999, None)])
    root = ET.fromstring(svg)
    w, h, pts = svg_numbers(root)
    assert all(0 <= x <= w and 0 <= y <= h for x, y, _ in pts)
    crosses = [el for el in root.iter() if el.tag.endswith("line") and el.attrib.get("stroke") == "#D55E00"]
    assert len(crosses) == 2 + 2  # one cross in the plot, one in the legend
    markers = [el for el in root.iter() if el.tag.endswith("rect") and el.attrib.get("width") == "7"]
    assert len(markers) == 2 + 1  # two met targets, one legend swatch
    # the current grades' cost as a dashed line, on the same linear cost axis as the markers
    root = ET.fromstring(svg_cost_yield([(0.8, 8.5), (0.95, 14.8)], current_cost=10.8))
    ys = sorted(float(el.attrib["y"]) + 3.5 for el in root.iter()
                if el.tag.endswith("rect") and el.attrib.get("width") == "7" and float(el.attrib["y"]) > 25)
    dashed = [el for el in root.iter() if el.tag.endswith("line") and "stroke-dasharray" in el.attrib
              and float(el.attrib["x2"]) - float(el.attrib["x1"]) > 100]
    assert len(ys) == 2 and len(dashed) == 1
    y_cheap, y_dear = ys[1], ys[0]  # higher cost is drawn higher up (smaller y)
    want = y_cheap + (10.8 - 8.5) / (14.8 - 8.5) * (y_dear - y_cheap)
    assert float(dashed[0].attrib["y1"]) == pytest.approx(want, abs=0.2)


def test_format_pct():
    assert format_pct(0.915) == "91.50 %"
    assert format_pct(1.0) == "100.00 %" and format_pct(0.0) == "0.00 %"
    assert format_pct(0.99996) == "99.996 %"
    assert format_pct(0.00004) == "0.004 %"
    assert format_pct(float("nan")) == "n/a"


# --- optional sections, files, edge cases --------------------------------------------------------

def test_recommendation_curve_and_parts_list():
    rec_mod = pytest.importorskip("tolspread.recommend")
    design = load_demo()
    result = analyze(design, samples=500, curves=FIGURE_BOARDS)
    rec = rec_mod.recommend(design, 0.6, samples=300, max_evaluations=8, verify_factor=1)
    curve = rec_mod.cost_yield_curve(design, [0.5, 0.99999], samples=300, max_evaluations=8, verify_factor=1)
    rows = rec_mod.parts_list_rows(design, rec, result.budget)
    rep = build_report(result, recommendation=rec, curve=curve, parts_rows=rows, generated=WHEN)
    doc = rep.html()
    parse(doc)
    r = section(doc, "recommendation")
    assert rec.chosen is not None
    assert f"<b>{rec.chosen.cost:.2f}</b>" in r
    assert f"lower bound <b>{100 * rec.chosen.lower:.2f} %</b>" in r
    for g in set(rec.chosen.grades):
        assert f"<td>{html.escape(g)}</td>" in r
    if rec.verified is not None:
        assert f"{rec.verified.passed:,} of {rec.verified.samples:,} boards" in r
    assert "cost-yield" in rep.figures
    assert curve[1][1].chosen is None and "none found" in r  # 99.999 % cannot be shown with 300 boards
    ET.fromstring(rep.figures["cost-yield"])
    p = section(doc, "parts")
    for row in rows:
        assert f"<td>{html.escape(row['ref'])}</td>" in p
    assert doc.index('id="recommendation"') < doc.index('id="parts"') < doc.index('id="assumptions"')


def test_without_recommendation_no_such_sections(demo_html):
    assert 'id="recommendation"' not in demo_html and 'id="parts"' not in demo_html


def test_no_mask_design():
    design = load_demo().with_mask(())
    rep = build_report(analyze(design, samples=200, curves=FIGURE_BOARDS), generated=WHEN)
    doc = rep.html()
    parse(doc)
    assert "no yield" in doc and "margin" not in rep.figures and "passband" not in rep.figures
    for svg in rep.figures.values():
        ET.fromstring(svg)


def test_write_report_round_trip(demo, tmp_path):
    _, _, rep = demo
    path = tmp_path / "report.html"
    write_report(rep, path)
    assert path.read_text(encoding="utf-8") == rep.html()
    assert not (tmp_path / "report.html.bak").exists()


@pytest.mark.gui
def test_figures_render_with_qt(demo, qapp):
    qtsvg = pytest.importorskip("PySide6.QtSvg")
    from PySide6.QtCore import QByteArray
    from PySide6.QtGui import QColor, QImage, QPainter

    _, _, rep = demo
    for name, svg in rep.figures.items():
        r = qtsvg.QSvgRenderer(QByteArray(svg.encode("utf-8")))
        assert r.isValid(), name
        img = QImage(r.defaultSize(), QImage.Format.Format_ARGB32)
        img.fill(QColor("white"))
        painter = QPainter(img)
        r.render(painter)
        painter.end()
        blue = QColor("#0072B2").rgb()
        found = any(img.pixel(x, y) == blue for x in range(0, img.width(), 2) for y in range(0, img.height(), 2))
        assert found, f"{name}: no blue drawn"


# --- issue 10: the recommendation table, generated descriptions, op-amps ---------------------------

class Tables(HTMLParser):
    """Every table as (header cells, body rows of cell texts), and the text of <p class=summary>."""

    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tables: list[tuple[list[str], list[list[str]]]] = []
        self.thead: list[bool] = []
        self._cell: list[str] | None = None
        self._row: list[str] | None = None
        self._in_head = False
        self._p_class: str | None = None
        self.paragraphs: dict[str, list[str]] = {}

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "table":
            self.tables.append(([], []))
            self.thead.append(False)
        elif tag == "thead":
            self._in_head = True
            self.thead[-1] = True
        elif tag == "tr":
            self._row = []
        elif tag in ("td", "th"):
            self._cell = []
        elif tag == "p":
            self._p_class = a.get("class")
            self.paragraphs.setdefault(self._p_class or "", []).append("")

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._cell is not None and self._row is not None:
            self._row.append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None and self.tables:
            (self.tables[-1][0].extend(self._row) if self._in_head else self.tables[-1][1].append(self._row))
            self._row = None
        elif tag == "thead":
            self._in_head = False
        elif tag == "p":
            self._p_class = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)
        if self._p_class is not None:
            self.paragraphs[self._p_class or ""][-1] += data


def tables_of(doc: str) -> Tables:
    t = Tables()
    t.feed(doc)
    t.close()
    return t


def table_with(doc: str, first_header: str, *more: str) -> tuple[list[str], list[list[str]]]:
    for head, rows in tables_of(doc).tables:
        if head[:1] == [first_header] and all(m in head for m in more):
            return head, rows
    raise AssertionError(f"no table headed {first_header!r} {more}")


def test_every_table_header_is_named_and_in_thead(demo_html):
    t = tables_of(demo_html)
    for (head, rows), has_head in zip(t.tables, t.thead):
        if head or rows and "Caution" not in rows[0][0]:
            assert has_head and head and all(h for h in head), head  # no blank, unlabelled column
            assert all(len(r) == len(head) for r in rows), head


@pytest.fixture(scope="module")
def recommended():
    """The command line's way: recommend, then analyse the design with the chosen grades."""
    rec_mod = pytest.importorskip("tolspread.recommend")
    design = load_demo()
    rec = rec_mod.recommend(design, 0.9, samples=400, max_evaluations=40, verify_factor=1)
    assert rec.chosen is not None and tuple(p.grade for p in design.parts) != rec.chosen.grades
    result = analyze(rec.design, samples=400, curves=FIGURE_BOARDS)
    return design, rec, result


@pytest.mark.parametrize("with_current", [False, True])
def test_recommendation_table_shows_the_current_grades_and_both_costs(recommended, with_current):
    # issue 10 #15: the current grades are the design's own (the file's), not the recommended
    design, rec, result = recommended
    doc = build_report(result, recommendation=rec, generated=WHEN,
                       current=design if with_current else None).html()
    head, rows = table_with(section(doc, "recommendation"), "Part", "Current grade", "Recommended grade")
    col = head.index("Current grade")
    assert [r[col] for r in rows] == [p.grade for p in design.parts]
    assert [r[head.index("Recommended grade")] for r in rows] == list(rec.chosen.grades)
    changed = [r[head.index("Changed")] for r in rows]
    assert changed == ["yes" if a != b else "no" for a, b in zip((p.grade for p in design.parts), rec.chosen.grades)]
    # costs summed here from the design's catalog (the reference), as the terminal prints them
    current_cost = sum(design.catalog[p.grade].cost for p in design.parts)
    text = html.unescape(re.sub(r"<[^>]+>", "", section(doc, "recommendation")))
    assert f"recommended grades {rec.chosen.cost:.2f}, current grades {current_cost:.2f}" in text
    assert current_cost != pytest.approx(rec.chosen.cost)
    assert "uses the recommended grades" in text


def test_description_is_generated_from_the_design():
    # issue 10 #22: C1 on an X7R grade; the summary must say so and never claim C0G for it
    design = load_demo().with_part("C1", grade="C-X7R-10")
    result = analyze(design, samples=300, curves=FIGURE_BOARDS)
    doc = build_report(result, generated=WHEN).html()
    summary = tables_of(doc).paragraphs["summary"][0]
    groups = {}
    for p in design.parts:
        groups.setdefault(p.grade, []).append(p.ref)
    for grade, refs in groups.items():  # every grade with exactly its parts, from the design
        assert f"{', '.join(refs)}: grade {grade} (\u00b1{design.catalog[grade].tolerance_pct:g} %" in summary
    for s in design.mask:  # every span's limit, from the mask
        assert s.label in summary and f"{s.limit1:+g} dB" in summary
    assert "at least 37 dB of rejection" in summary  # the demo's -37 dB ceiling
    assert "40 dB" not in doc  # no fixed claim that disagrees with the mask
    assert "thick film, capacitors 5 % C0G" not in doc
    # the designer's own words, when shown, are marked as such (the other notes are the
    # temperature and life tables' own: the demo is judged over a range and a life)
    notes = [n for n in tables_of(doc).paragraphs.get("note", []) if design.description[:40] in n]
    assert notes and all(n.startswith("Note from the design file") for n in notes)


def test_opamp_of_a_stage_is_not_named_by_the_topology_role(demo_html):
    # issue 10 #22: "U2 high-Q stage: op-amp U1 ideal" named the other stage's op-amp
    text = html.unescape(re.sub(r"<[^>]+>", "", demo_html))
    assert "op-amp U1" not in text and "U1 ideal" not in text
    assert "U2 high-Q stage: an ideal op-amp (infinite gain and bandwidth" in text


def test_completed_adds_corners_and_cuts_curves_without_evaluating(monkeypatch):
    """A window-style analysis (no corners, no budget, more curves) completed for the report
    equals the command line's analysis (same boards: common random numbers), and no board
    is evaluated again (tolspread.analysis.evaluate is not called)."""
    import json

    import tolspread.analysis as an

    design = load_demo()
    full = analyze(design, samples=900, seed=4, curves=300)
    shown = analyze(design, samples=900, seed=4, budget=False, with_corners=False, curves=600)
    bare = analyze(design, samples=100, seed=4)  # no curves kept
    monkeypatch.setattr(an, "evaluate", lambda *a, **k: pytest.fail("a board was evaluated again"))
    done = an.completed(shown, curves=300)
    same = lambda x, y: json.dumps(x, sort_keys=True) == json.dumps(y, sort_keys=True)  # NaN == NaN here
    assert same(done.corners.to_dict(), full.corners.to_dict())
    assert same({k: b.to_dict() for k, b in done.budget.items()}, {k: b.to_dict() for k, b in full.budget.items()})
    np.testing.assert_array_equal(done.curves.gain_db, full.curves.gain_db)
    np.testing.assert_array_equal(done.curves.gain_bands.inner_low, full.curves.gain_bands.inner_low)
    np.testing.assert_array_equal(done.curves.gain_bands.high, full.curves.gain_bands.high)
    with pytest.raises(ValueError, match="curves"):
        an.completed(bare, curves=50)
