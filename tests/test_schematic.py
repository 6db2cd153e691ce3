"""Stage schematics (filters/schematic.py): every library topology and the automatic rail
layout give valid SVG (parsed by the standard library's xml.etree) naming every part, and
the boxes recorded while drawing find the part a click lands on."""
from __future__ import annotations

import re
import subprocess
import sys
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from tolspread import load_demo
from tolspread.netlist import Element, Netlist, OpAmp
from tolspread.schematic import (HIGHLIGHT, draw_rails, draw_topology, stage_schematic,
                                 topology_drawing)
from tolspread.topologies import TOPOLOGIES, build

SVG_NS = "{http://www.w3.org/2000/svg}"

# every library topology with each option that changes its drawing
CASES = [(name, {}) for name in TOPOLOGIES] + [
    ("rc_lowpass", {"sections": 4, "source": True, "load": True}),
    ("rc_highpass", {"sections": 3, "load": True}),
    ("lc_lowpass", {"order": 5, "first": "series"}),
    ("lc_lowpass", {"order": 2}),
    ("sallen_key_lowpass", {"gain": "resistors"}),
    ("sallen_key_highpass", {"gain": "resistors"}),
]


def texts(svg: str) -> list[str]:
    """Every text run of an SVG document, parsed by xml.etree (a malformed file raises)."""
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG_NS}svg"
    assert not list(root.iter(f"{SVG_NS}tspan")), "one text a line (SVG Tiny renderers place no tspans)"
    return ["".join(t.itertext()).strip() for t in root.iter(f"{SVG_NS}text")]


def words(svg: str) -> set[str]:
    return {w for t in texts(svg) for w in t.split()}


@pytest.mark.parametrize(("name", "options"), CASES, ids=[f"{n}{o or ''}" for n, o in CASES])
def test_every_library_topology_draws_every_role(name, options):
    topo = build(name, options)
    sch = topology_drawing(name, options)
    roles = set(topo.roles) | set(topo.optional_roles)
    assert roles <= words(sch.svg), f"{name}: roles missing from the drawing"
    assert {"in", "out"} <= words(sch.svg)
    # one box per part, inside the picture, none empty
    assert sorted(sch.refs()) == sorted(roles)
    for h in sch.hotspots:
        assert 0 <= h.x0 < h.x1 <= 1 and 0 <= h.y0 < h.y1 <= 1, h
    # a click on the middle of a part's symbol finds that part
    for h in sch.hotspots:
        assert sch.part_at((h.x0 + h.x1) / 2, (h.y0 + h.y1) / 2) == h.ref
    root = ET.fromstring(sch.svg)
    assert root.iter(f"{SVG_NS}path") is not None and float(root.get("width").rstrip("pt")) > 100


def test_stage_shows_reference_value_grade_and_opamp():
    design = load_demo()
    for index, stage in enumerate(design.stages):
        sch = stage_schematic(design, index)
        shown = words(sch.svg)
        for role, ref in stage.roles.items():
            part = next(p for p in design.parts if p.ref == ref)
            assert {ref, part.value_text, part.grade} <= shown
        assert "U1" in shown and "ideal" in shown  # the demo maps no op-amp part: ideal
        assert set(sch.refs()) == set(stage.roles.values())


def test_highlighted_part_is_drawn_in_colour():
    design = load_demo()
    plain = stage_schematic(design, 1)
    marked = stage_schematic(design, 1, highlight="C3")
    assert HIGHLIGHT.lower() not in plain.svg.lower()
    assert HIGHLIGHT.lower() in marked.svg.lower()
    colored = [t for t in ET.fromstring(marked.svg).iter(f"{SVG_NS}text")
               if HIGHLIGHT.lower() in (t.get("fill", "") + t.get("style", "")).lower()]
    # stage 2 fills role C1 with part C3: both named
    assert "C3 (C1)" in {t.text for t in colored}


def random_netlist(rng: np.random.Generator, nodes: int, opamps: int) -> Netlist:
    """A random connected netlist of ``nodes`` nodes besides ground (the test's own)."""
    names = ["in", "out"] + [f"x{k}" for k in range(nodes - 2)]
    elements = []
    for k, n in enumerate(names[1:], start=1):  # a chain ties every node in
        elements.append(Element(rng.choice(["R", "C", "L"]), f"E{k}", names[k - 1], n))
    for k in range(nodes):
        a, b = rng.choice(names + ["0"], size=2, replace=False)
        elements.append(Element(rng.choice(["R", "C", "L"]), f"F{k}", str(a), str(b)))
    amps = tuple(OpAmp(f"U{k + 1}", str(rng.choice(names + ["0"])), str(rng.choice(names)),
                       str(rng.choice(names[1:]))) for k in range(opamps))
    return Netlist(tuple(elements), amps)


@pytest.mark.parametrize("seed", range(4))
def test_rail_layout_names_every_element_and_node(seed):
    rng = np.random.default_rng(seed)
    net = random_netlist(rng, nodes=3 + seed, opamps=seed % 3)
    refs = {e.role: e.role for e in net.elements} | {o.role: o.role for o in net.opamps}
    sch = draw_rails(net, {}, refs)
    all_text = texts(sch.svg)
    shown = words(sch.svg)
    nodes = {n for e in net.elements for n in (e.a, e.b)} | {n for o in net.opamps for n in (o.plus, o.minus, o.out)}
    assert set(refs) <= shown
    # every node is a labelled rail (ground and the input say what they are)
    rail_names = {"in (source)", "out", "0 (ground)"} | (nodes - {"in", "out", "0"})
    assert rail_names <= set(all_text)
    # every element says which two nodes it joins, as the netlist has them
    for e in net.elements:
        assert f"{e.a} – {e.b}" in all_text, e
    for h in sch.hotspots:
        assert sch.part_at((h.x0 + h.x1) / 2, (h.y0 + h.y1) / 2) == h.ref
    assert sch.part_at(0.0, 0.0) is None  # the margin holds no part


def test_unknown_layout_falls_back_to_rails():
    topo = build("sallen_key_lowpass")
    odd = type(topo)("my_own", "lowpass", topo.netlist, topo.roles, topo.optional_roles)
    sch = draw_topology(odd)
    assert "0 (ground)" in texts(sch.svg) and set(topo.roles) <= words(sch.svg)


def test_drawing_imports_no_matplotlib_and_writes_text_as_text():
    code = ("import sys; from tolspread.schematic import topology_drawing; "
            "s = topology_drawing('mfb_bandpass'); "
            "assert '<text' in s.svg and 'matplotlib' not in sys.modules; print('ok')")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=60)
    assert out.stdout.strip() == "ok", out.stderr


def test_readme_drawings_are_current():
    """assets/schematics/*.svg are what the library draws today (regenerate with
    write_library_drawings after changing a layout), and README's topology table links each."""
    from pathlib import Path

    from tolspread.schematic import library_drawings

    root = Path(__file__).resolve().parents[1]
    readme = (root / "README.md").read_text(encoding="utf-8")
    for stem, sch in library_drawings().items():
        path = root / "assets" / "schematics" / f"{stem}.svg"
        assert path.read_text(encoding="utf-8") == sch.svg + "\n", f"{path.name} is stale"
        assert f"assets/schematics/{stem}.svg" in readme, f"README does not point to {stem}.svg"


def test_report_figures_follow_the_figure_rules():
    """Each stage's figure: whole-number size, no clip paths or patterns, text >= 12 px
    (the report's figure rules, DEVELOPERS.md)."""
    from tolspread.schematic import schematic_figures

    design = load_demo()
    figs = schematic_figures(design)
    assert [name for name, _, _ in figs] == ["schematic-1", "schematic-2"]
    for _name, svg, caption in figs:
        root = ET.fromstring(svg)
        assert root.get("width").isdigit() and root.get("height").isdigit()
        assert "clipPath" not in svg and "pattern" not in svg
        assert all(float(t.get("font-size")) >= 12 for t in root.iter(f"{SVG_NS}text"))
        assert "Stage" in caption


def test_report_has_a_schematic_of_every_stage():
    """The HTML report's Schematics section holds each stage's drawing inline, naming every
    part (the figure rules themselves are checked for every figure by tests/test_report.py)."""
    from tolspread.analysis import analyze
    from tolspread.report import build_report

    design = load_demo()
    html = build_report(analyze(design, samples=200, curves=50)).html()
    start = html.index('<h2 id="schematics">')
    body = html[start:html.index("<h2 ", start + 1)]
    assert body.count("<svg") == len(design.stages)
    shown = {w for chunk in re.findall(r"<text[^>]*>([^<]*)</text>", body) for w in chunk.split()}
    assert {p.ref for p in design.parts} <= shown
