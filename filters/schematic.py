"""Schematics of stages: each part's symbol with its reference designator, value and grade.

Over 500 lines only with its docstrings (numpydoc Parameters/Returns sections on every
public function, issue 12 item 7); its code is under 500 lines.

Drawn with ``schemdraw`` (its own SVG backend: no matplotlib, text kept as ``<text>`` so a
reader can search and copy it). A library topology gets a hand-made layout in the usual
textbook form (ladders along a line with the shunt parts to ground; Sallen-Key and
multiple-feedback sections around their op-amp); a circuit stage, or any netlist without a
layout of its own, is laid out automatically so a person can check it against their own
schematic: every node is a labelled horizontal rail (``in`` at the top, ``0`` ground at the
bottom), every element its standard symbol in its own column between its two rails (a dot
where it joins a rail; a wire that crosses a rail without a dot is not connected), every
op-amp a triangle whose ``+``, ``-`` and output wires end on their rails with the node named
at each pin.

:class:`Schematic` holds the SVG text and, for each part, the box its symbol and label take
as fractions of the picture's width and height (0 at the top left), so a viewer of any size
can tell which part was clicked (:meth:`Schematic.part_at`).
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

from .netlist import GROUND, INPUT, OUTPUT, Element, Netlist, OpAmp
from .topologies import Topology, build

__all__ = [
    "HIGHLIGHT",
    "PART_COLOUR",
    "Hotspot",
    "Schematic",
    "draw_topology",
    "draw_rails",
    "stage_labels",
    "stage_schematic",
    "design_schematics",
    "topology_drawing",
    "LIBRARY_DRAWINGS",
    "library_drawings",
    "write_library_drawings",
    "schematic_figures",
]

HIGHLIGHT = "#D55E00"   # a selected part's colour (the window's error/selection orange)
PART_COLOUR = "#0072B2"  # parts and their labels (the project's blue); wires and nodes black
FONT_PT = 12.0          # label text size in points (the report's figures keep text >= 12 px)
INCHES_PER_UNIT = 0.5   # schemdraw's scale: one drawing unit is 36 pt
MARGIN = 0.8            # white space around the drawing, drawing units (labels never clipped)
LEN = 3.0               # a two-terminal symbol's length, drawing units
RAIL_GAP = 3.3          # distance between rails in the automatic layout
COLUMN = 2.8            # width of one element's column in the automatic layout


@dataclass(frozen=True)
class Hotspot:
    """Where one part is drawn: ``ref`` (the design's reference designator), ``role`` (the
    topology's name for it) and its box ``x0, y0, x1, y1`` as fractions of the picture's
    width and height, measured from the top left."""

    ref: str
    role: str
    x0: float
    y0: float
    x1: float
    y1: float

    def contains(self, fx: float, fy: float) -> bool:
        return self.x0 <= fx <= self.x1 and self.y0 <= fy <= self.y1

    @property
    def area(self) -> float:
        return (self.x1 - self.x0) * (self.y1 - self.y0)


@dataclass(frozen=True)
class Schematic:
    """One stage's drawing: ``svg`` (an SVG 1.1 document, UTF-8 text), its natural size in
    points and the parts' boxes (:class:`Hotspot`)."""

    svg: str
    width_pt: float
    height_pt: float
    hotspots: tuple[Hotspot, ...]
    title: str = ""

    def part_at(self, fx: float, fy: float) -> str | None:
        """The part drawn at ``(fx, fy)`` (fractions of width and height from the top left),
        the smallest box holding the point when boxes overlap; None between parts."""
        hits = [h for h in self.hotspots if h.contains(fx, fy)]
        return min(hits, key=lambda h: h.area).ref if hits else None

    def refs(self) -> tuple[str, ...]:
        return tuple(h.ref for h in self.hotspots)


# --- drawing primitives ------------------------------------------------------------------
Point = tuple[float, float]


def _schemdraw():
    """schemdraw on first use, with its SVG backend writing text as text."""
    import schemdraw
    import schemdraw.elements as elm

    schemdraw.svgconfig.text = "text"
    return schemdraw, elm


class _Sheet:
    """A schemdraw drawing plus the parts drawn on it (element -> ref, role)."""

    def __init__(self, labels: Mapping[str, Sequence[str]], refs: Mapping[str, str],
                 highlight: str | None) -> None:
        self.sd, self.elm = _schemdraw()
        self.d = self.sd.Drawing(canvas="svg", show=False)
        self.d.config(unit=LEN, inches_per_unit=INCHES_PER_UNIT, fontsize=FONT_PT, margin=MARGIN,
                      font="sans-serif", lw=1.6)
        self.labels = labels
        self.refs = refs
        self.highlight = highlight
        self.parts: list[tuple[Any, str, str]] = []  # (element, ref, role)

    def _colour(self, role: str) -> str:
        ref = self.refs.get(role)
        return HIGHLIGHT if self.highlight is not None and ref == self.highlight else PART_COLOUR

    def _text(self, role: str) -> str:
        return "\n".join(self.labels.get(role, (role,)))

    def part(self, kind: str, role: str, p1: Point, p2: Point, side: str = "top") -> None:
        """A resistor, capacitor or inductor from ``p1`` to ``p2`` with its label on ``side``
        (``top``: above a horizontal part, left of a downward one; ``bottom``: below or right)."""
        cls = {"R": self.elm.Resistor, "C": self.elm.Capacitor, "L": self.elm.Inductor2}[kind]
        colour = self._colour(role)
        e = cls(color=colour).endpoints(p1, p2).label(self._text(role), loc=side, color=colour)
        self.d.add(e)
        self.parts.append((e, self.refs.get(role, ""), role))

    def wire(self, *points: Point) -> None:
        for a, b in zip(points, points[1:]):
            if a != b:
                self.d.add(self.elm.Line().endpoints(a, b))

    def dot(self, p: Point) -> None:
        self.d.add(self.elm.Dot().at(p))

    def ground(self, p: Point) -> None:
        self.d.add(self.elm.Ground().right().at(p))

    def terminal(self, p: Point, text: str, side: str = "left") -> None:
        self.d.add(self.elm.Dot(open=True).at(p).label(text, loc=side))

    def text(self, p: Point, text: str, halign: str = "center", valign: str = "center",
             colour: str = "black") -> None:
        self.d.add(self.elm.Label().at(p).label(text, halign=halign, valign=valign, color=colour))

    def opamp(self, role: str, anchor: str, at: Point, plus_on_top: bool, label_at: Point,
              valign: str = "bottom") -> Any:
        """An op-amp triangle with its ``anchor`` pin (``in1``: the - input, ``in2``: the +
        input, ``out``) at ``at``, '+' on top if ``plus_on_top``; its label (reference,
        gain-bandwidth or "ideal", grade) left-aligned at ``label_at`` beside the triangle
        (a grade's name does not fit inside). Returns the element (``in1``, ``in2``, ``out``)."""
        colour = self._colour(role)
        e = self.elm.Opamp(flip=plus_on_top, anchor=anchor, color=colour).right().at(at)
        self.d.add(e)
        self.text(label_at, self._text(role), halign="left", valign=valign, colour=colour)
        if role in self.refs:
            self.parts.append((e, self.refs[role], role))
        return e

    def finish(self, title: str = "") -> Schematic:
        raw = self.d.get_imagedata("svg").decode("utf-8")
        m = re.search(r'viewBox="([-\d.eE]+) ([-\d.eE]+) ([\d.eE]+) ([\d.eE]+)"', raw)
        x0, y0, w, h = (float(v) for v in m.groups())
        scale = 72.0 * INCHES_PER_UNIT
        spots = []
        for e, ref, role in self.parts:
            if not ref:
                continue
            b = e.get_bbox(transform=True, includetext=True)
            spots.append(Hotspot(ref, role, (b.xmin * scale - x0) / w, (-b.ymax * scale - y0) / h,
                                 (b.xmax * scale - x0) / w, (-b.ymin * scale - y0) / h))
        return Schematic(_tidy(raw, x0, y0, w, h), w, h, tuple(spots), title)


SVG_NS = "http://www.w3.org/2000/svg"
# where a line's baseline sits below its alignment point, in font sizes (SVG 1.1 renderers
# that ignore dominant-baseline, e.g. Qt's SVG Tiny renderer, then place text as browsers do)
_BASELINE = {"central": 0.35, "middle": 0.35, "hanging": 0.8, "text-before-edge": 0.8}


def _tidy(svg: str, x0: float, y0: float, w: float, h: float) -> str:
    """schemdraw's SVG in the form of the report's figures, drawn alike by browsers and by
    Qt's SVG Tiny renderer: the view box from (0, 0) (every point moved by ``-x0, -y0``),
    whole-number width and height, polylines instead of paths (schemdraw draws with moves
    and lines only), and each line of text its own ``<text>`` at its own baseline (no
    ``tspan``, no ``dominant-baseline``)."""
    import xml.etree.ElementTree as ET

    ET.register_namespace("", SVG_NS)
    ET.register_namespace("xlink", "http://www.w3.org/1999/xlink")
    root = ET.fromstring(svg)
    root.set("viewBox", f"0 0 {w:.2f} {h:.2f}")
    root.set("width", str(round(w)))
    root.set("height", str(round(h)))

    def xy(x: str, y: str) -> str:
        return f"{float(x) - x0:.2f},{float(y) - y0:.2f}"

    for parent in list(root.iter()):
        for i, el in reversed(list(enumerate(list(parent)))):
            tag = el.tag.split("}")[-1]
            if tag == "path":
                parent.remove(el)
                style = el.get("style", "").replace("stroke-dasharray:-;", "")
                runs = [run.replace("L", " ").split() for run in el.get("d", "").split("M") if run.strip()]
                for k, run in enumerate(runs):
                    pts = " ".join(xy(*p.split(",")) for p in run)
                    parent.insert(i + k, ET.Element(f"{{{SVG_NS}}}polyline", {"points": pts, "style": style}))
            elif tag == "circle":
                el.set("cx", f"{float(el.get('cx')) - x0:.2f}")
                el.set("cy", f"{float(el.get('cy')) - y0:.2f}")
            elif tag == "text":
                parent.remove(el)
                for k, line in enumerate(_text_lines(el, x0, y0)):
                    parent.insert(i + k, line)
    return ET.tostring(root, encoding="unicode")


def _text_lines(t, x0: float, y0: float) -> list:
    """One ``<text>`` per line of ``t`` (its ``tspan`` lines, or itself), at its baseline."""
    import xml.etree.ElementTree as ET

    size = float(t.get("font-size", FONT_PT))
    shift = _BASELINE.get(t.attrib.pop("dominant-baseline", ""), 0.0) * size
    spans = [c for c in t if c.tag == f"{{{SVG_NS}}}tspan"] or [t]
    y = float(t.get("y", 0))
    out = []
    for span in spans:
        if span is not t:
            y += float(span.get("dy", 0))
        x = float(span.get("x", t.get("x", "0")))
        line = ET.Element(t.tag, {**t.attrib, "x": f"{x - x0:.2f}", "y": f"{y + shift - y0:.2f}"})
        line.text = span.text
        out.append(line)
    return out


# --- layouts -----------------------------------------------------------------------------
def _between(net: Netlist, a: str, b: str) -> Element | None:
    for e in net.elements:
        if {e.a, e.b} == {a, b}:
            return e
    return None


def _ladder(s: _Sheet, net: Netlist) -> bool:
    """Series parts along a line from ``in``, shunt parts down to ground; False if ``net``
    is not such a ladder (then nothing is drawn)."""
    plan: list[tuple[Element, bool]] = []
    node = INPUT
    for e in net.elements:
        if GROUND in (e.a, e.b) and node in (e.a, e.b):
            plan.append((e, True))
        elif node in (e.a, e.b) and GROUND not in (e.a, e.b):
            node = e.b if e.a == node else e.a
            plan.append((e, False))
        else:
            return False
    if node != OUTPUT or net.opamps:
        return False
    x = 0.0
    s.terminal((0.0, 0.0), "in")
    last_shunt = True
    for e, shunt in plan:
        if shunt:
            if last_shunt:
                s.wire((x, 0.0), (x + 2.4, 0.0))
                x += 2.4
            s.dot((x, 0.0))
            s.part(e.kind, e.role, (x, 0.0), (x, -LEN), side="bottom")
            s.ground((x, -LEN))
        else:
            s.part(e.kind, e.role, (x, 0.0), (x + LEN, 0.0))
            x += LEN
        last_shunt = shunt
    s.wire((x, 0.0), (x + 1.8, 0.0))
    s.terminal((x + 1.8, 0.0), "out", side="right")
    return True


def _gain_feedback(s: _Sheet, net: Netlist, minus_pin: Point, out_x: float, out_y: float) -> None:
    """The op-amp's inverting input back to its output: a wire (unity gain), or RF from the
    output and RG to ground at node ``m`` (gain 1 + RF/RG)."""
    y = min(minus_pin[1], out_y) - 2.2
    xm = minus_pin[0] - 0.6
    rf = _between(net, OUTPUT, "m")
    rg = _between(net, "m", GROUND)
    s.wire(minus_pin, (xm, minus_pin[1]), (xm, y))
    if rf is None or rg is None:
        s.wire((xm, y), (out_x, y), (out_x, out_y))
        return
    s.part(rf.kind, rf.role, (xm, y), (out_x, y))
    s.wire((out_x, y), (out_x, out_y))
    s.dot((xm, y))
    s.wire((xm, y), (xm - 1.4, y))
    s.part(rg.kind, rg.role, (xm - 1.4, y), (xm - 1.4, y - LEN), side="top")
    s.ground((xm - 1.4, y - LEN))


def _sallen_key(s: _Sheet, net: Netlist) -> bool:
    """in - series - a - series - b to '+'; the part from a to the output over the top; the
    part from b to ground; the gain network under the op-amp."""
    first, second = _between(net, INPUT, "a"), _between(net, "a", "b")
    fb, shunt = _between(net, "a", OUTPUT), _between(net, "b", GROUND)
    if None in (first, second, fb, shunt) or len(net.opamps) != 1:
        return False
    amp = net.opamps[0]
    s.terminal((0.0, 0.0), "in")
    s.part(first.kind, first.role, (0.0, 0.0), (LEN, 0.0))
    s.part(second.kind, second.role, (LEN, 0.0), (2 * LEN, 0.0))
    s.dot((LEN, 0.0))
    s.dot((2 * LEN, 0.0))
    s.part(shunt.kind, shunt.role, (2 * LEN, 0.0), (2 * LEN, -LEN), side="top")
    s.ground((2 * LEN, -LEN))
    x_in = 2 * LEN + 2.6
    s.wire((2 * LEN, 0.0), (x_in, 0.0))
    u = s.opamp(amp.role, "in2", (x_in, 0.0), plus_on_top=True, label_at=(x_in, 0.85))
    out = (u.out[0] + 0.8, u.out[1])
    s.wire(u.out, out)
    s.dot(out)
    top = 2.6
    s.wire((LEN, 0.0), (LEN, top))
    s.part(fb.kind, fb.role, (LEN, top), (out[0], top))
    s.wire((out[0], top), out, (out[0] + 1.4, out[1]))
    s.terminal((out[0] + 1.4, out[1]), "out", side="right")
    _gain_feedback(s, net, (u.in1[0], u.in1[1]), out[0], out[1])
    return True


def _multiple_feedback(s: _Sheet, net: Netlist) -> bool:
    """in - part - a; a to ground; a - part - n to '-'; a to the output over the top (outer
    loop) and n to the output (inner loop); '+' grounded."""
    first, shunt = _between(net, INPUT, "a"), _between(net, "a", GROUND)
    series, outer, inner = _between(net, "a", "n"), _between(net, "a", OUTPUT), _between(net, "n", OUTPUT)
    if None in (first, shunt, series, outer, inner) or len(net.opamps) != 1:
        return False
    amp = net.opamps[0]
    s.terminal((0.0, 0.0), "in")
    s.part(first.kind, first.role, (0.0, 0.0), (LEN, 0.0))
    s.dot((LEN, 0.0))
    s.part(shunt.kind, shunt.role, (LEN, 0.0), (LEN, -LEN), side="top")
    s.ground((LEN, -LEN))
    s.part(series.kind, series.role, (LEN, 0.0), (2 * LEN, 0.0))
    s.dot((2 * LEN, 0.0))
    x_in = 2 * LEN + 1.6
    s.wire((2 * LEN, 0.0), (x_in, 0.0))
    u = s.opamp(amp.role, "in1", (x_in, 0.0), plus_on_top=False, label_at=(x_in, 0.85))
    s.wire(u.in2, (u.in2[0] - 0.5, u.in2[1]), (u.in2[0] - 0.5, u.in2[1] - 0.9))
    s.ground((u.in2[0] - 0.5, u.in2[1] - 0.9))
    out = (u.out[0] + 0.8, u.out[1])
    s.wire(u.out, out)
    s.dot(out)
    mid, top = 2.4, 4.8
    s.wire((2 * LEN, 0.0), (2 * LEN, mid))
    s.part(inner.kind, inner.role, (2 * LEN, mid), (out[0], mid))
    s.wire((LEN, 0.0), (LEN, top))
    s.part(outer.kind, outer.role, (LEN, top), (out[0], top))
    s.wire((out[0], top), (out[0], mid), out, (out[0] + 1.4, out[1]))
    s.dot((out[0], mid))
    s.terminal((out[0] + 1.4, out[1]), "out", side="right")
    return True


def _rail_nodes(net: Netlist) -> list[str]:
    """Nodes top to bottom: ``in``, the others in order of first use, ``out``, ground."""
    pins = [n for e in net.elements for n in (e.a, e.b)] + [n for o in net.opamps for n in (o.plus, o.minus, o.out)]
    inner = [n for n in dict.fromkeys(pins) if n not in (INPUT, OUTPUT, GROUND)]
    return [INPUT, *inner, OUTPUT, GROUND]


def draw_rails(net: Netlist, labels: Mapping[str, Sequence[str]], refs: Mapping[str, str],
               highlight: str | None = None, title: str = "") -> Schematic:
    """The automatic layout: each node a labelled horizontal rail, each element its symbol
    in its own column between its two rails, each op-amp a triangle wired to three rails.

    ``labels`` maps a role to its lines of text (ref, value, grade); ``refs`` maps a role
    to the part's reference designator (roles without one, e.g. an ideal op-amp, get no
    hotspot); ``highlight`` draws that part in :data:`HIGHLIGHT`.

    Parameters
    ----------
    net : Netlist
        The netlist.
    labels : mapping of str to sequence of str
        Role -> lines of text.
    refs : mapping of str to str
        Role -> reference designator.
    highlight : str, optional
        A reference drawn in colour.
    title : str
        Title above the drawing.

    Returns
    -------
    Schematic
        The drawing.
    """
    named = {e.role: (*labels.get(e.role, (e.role,)), f"{e.a} – {e.b}") for e in net.elements}
    s = _Sheet({**labels, **named}, refs, highlight)
    nodes = _rail_nodes(net)
    y = {n: -RAIL_GAP * i for i, n in enumerate(nodes)}
    x = 1.2
    joins: list[Point] = []
    for e in net.elements:
        ya, yb = y[e.a], y[e.b]
        if ya == yb:  # both ends on one node: drawn as a loop above the rail
            s.part(e.kind, e.role, (x, ya + 2.4), (x, ya), side="bottom")
            s.wire((x, ya + 2.4), (x - 0.9, ya + 2.4), (x - 0.9, ya))
            joins += [(x, ya), (x - 0.9, ya)]
        else:  # the symbol just under its upper rail, a wire on to the lower one
            hi, lo = max(ya, yb), min(ya, yb)
            s.part(e.kind, e.role, (x, hi), (x, hi - LEN), side="bottom")
            s.wire((x, hi - LEN), (x, lo))
            joins += [(x, hi), (x, lo)]
        x += COLUMN
    for o in net.opamps:
        x = _rail_opamp(s, o, y, x + 0.4, joins)
    right = x + 0.2
    for n in nodes:
        s.wire((0.0, y[n]), (right, y[n]))
        name = {INPUT: "in (source)", OUTPUT: "out", GROUND: "0 (ground)"}.get(n, n)
        s.text((-0.3, y[n]), name, halign="right")
    s.ground((0.0, y[GROUND]))
    for p in joins:
        s.dot(p)
    return s.finish(title)


def _rail_opamp(s: _Sheet, o: OpAmp, y: Mapping[str, float], x: float, joins: list[Point]) -> float:
    """One op-amp between its rails, inputs from the left and output to the right; returns
    the x after it."""
    yp, ym, yo = y[o.plus], y[o.minus], y[o.out]
    plus_on_top = yp > ym
    # the triangle in the gap between two rails nearest the middle of its inputs' rails, so no
    # rail runs through it (the gap is wider than the triangle is tall)
    gap = min(max(round(-(yp + ym) / 2 / RAIL_GAP - 0.5), 0), len(y) - 2)
    yc = -(gap + 0.5) * RAIL_GAP
    x_in = x + 1.4
    # '+' is schemdraw's 'in2', '-' its 'in1'; flipping puts '+' on top; inputs 1.25 apart
    label_x = x_in + 2.165 + 0.8  # right of the output wire, under the output
    u = s.opamp(o.role, "in1", (x_in, yc + (-0.625 if plus_on_top else 0.625)), plus_on_top,
                label_at=(label_x, yc - 0.1), valign="top")
    pin_plus, pin_minus = u.in2, u.in1
    for pin, rail, dx, node in ((pin_plus, yp, 0.5, o.plus), (pin_minus, ym, 1.0, o.minus)):
        s.wire(pin, (pin[0] - dx, pin[1]), (pin[0] - dx, rail))
        joins.append((pin[0] - dx, rail))
        s.text((pin[0] - dx - 0.1, pin[1] + 0.25), node, halign="right", valign="bottom")
    xo = u.out[0] + 0.6
    s.wire(u.out, (xo, u.out[1]), (xo, yo))
    joins.append((xo, yo))
    s.text((xo + 0.1, u.out[1] + 0.25), o.out, halign="left", valign="bottom")
    return xo + 3.0  # room for the label


_LAYOUTS = {"rc_": _ladder, "lc_": _ladder, "sallen_key": _sallen_key, "mfb_": _multiple_feedback}


def draw_topology(topology: Topology, labels: Mapping[str, Sequence[str]] | None = None,
                  refs: Mapping[str, str] | None = None, highlight: str | None = None,
                  title: str = "") -> Schematic:
    """``topology`` drawn in its own layout (the automatic rail layout for one without).

    ``labels`` (role -> lines of text) defaults to the role names; ``refs`` (role -> the
    part's reference designator, used for the hotspots) defaults to the roles themselves.

    Parameters
    ----------
    topology : Topology
        The topology.
    labels : mapping of str to sequence of str, optional
        Role -> lines of text.
    refs : mapping of str to str, optional
        Role -> reference designator.
    highlight : str, optional
        A reference drawn in colour.
    title : str
        Title above the drawing.

    Returns
    -------
    Schematic
        The drawing: SVG text, its size in points and the parts' boxes.
    """
    roles = {**topology.roles, **topology.optional_roles}
    labels = dict(labels) if labels is not None else {r: (r,) for r in roles}
    refs = dict(refs) if refs is not None else {r: r for r in roles}
    net = topology.netlist
    for prefix, layout in _LAYOUTS.items():
        if topology.name.startswith(prefix):
            s = _Sheet(labels, refs, highlight)
            if layout(s, net):
                return s.finish(title)
    return draw_rails(net, labels, refs, highlight, title)


# --- designs -----------------------------------------------------------------------------
def stage_labels(design: Any, index: int) -> tuple[dict[str, tuple[str, ...]], dict[str, str]]:
    """Each role of stage ``index``: its lines of text (reference designator, with the role
    after it where the two differ; value; grade) and its part's reference designator.

    Parameters
    ----------
    design : Design
        The design.
    index : int
        Stage index, from 0.

    Returns
    -------
    tuple[dict[str, tuple[str, ...]], dict[str, str]]
        Role -> lines of text, and role -> reference designator.
    """
    stage = design.stages[index]
    topo = stage.built()
    parts = {p.ref: p for p in design.parts}
    labels: dict[str, tuple[str, ...]] = {}
    refs: dict[str, str] = {}
    for role, kind in {**topo.roles, **topo.optional_roles}.items():
        ref = stage.roles.get(role)
        part = parts.get(ref) if ref else None
        if part is None:
            labels[role] = (role, "ideal") if kind == "opamp" else (role,)
            continue
        name = ref if ref == role else f"{ref} ({role})"
        value = f"GBW {part.value_text}Hz" if kind == "opamp" else part.value_text
        labels[role] = (name, value, part.grade)
        refs[role] = ref
    return labels, refs


def stage_schematic(design: Any, index: int, highlight: str | None = None) -> Schematic:
    """Stage ``index`` of ``design`` (0-based) with its parts' references, values and grades;
    a circuit stage in the automatic rail layout. ``highlight``: a part ref drawn in colour.

    Parameters
    ----------
    design : Design
        The design.
    index : int
        Stage index, from 0.
    highlight : str, optional
        A part ref drawn in colour.

    Returns
    -------
    Schematic
        The drawing.
    """
    stage = design.stages[index]
    labels, refs = stage_labels(design, index)
    topo = stage.built()
    title = f"Stage {index + 1}" + (f": {stage.name}" if stage.name else "") + f" ({topo.description or topo.name})"
    if stage.topology == "circuit":
        return draw_rails(topo.netlist, labels, refs, highlight, title)
    return draw_topology(topo, labels, refs, highlight, title)


def design_schematics(design: Any) -> list[Schematic]:
    """Every stage's schematic, in signal order.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[Schematic]
        One drawing per stage.
    """
    return [stage_schematic(design, i) for i in range(len(design.stages))]


def topology_drawing(name: str, options: Mapping[str, Any] | None = None) -> Schematic:
    """Library topology ``name`` with ``options``, its parts labelled by role (the README's
    topology table points to these drawings).

    Parameters
    ----------
    name : str
        Topology name.
    options : mapping, optional
        Its options.

    Returns
    -------
    Schematic
        The drawing.
    """
    topo = build(name, dict(options or {}))
    return draw_topology(topo, title=f"{name} ({topo.description})")


# The drawings README's topology table points to (assets/schematics/<file>.svg): each library
# topology with the options that show all its roles.
LIBRARY_DRAWINGS: dict[str, tuple[str, dict[str, Any]]] = {
    "rc_lowpass": ("rc_lowpass", {"sections": 2, "source": True, "load": True}),
    "rc_highpass": ("rc_highpass", {"sections": 2, "source": True, "load": True}),
    "lc_lowpass_shunt": ("lc_lowpass", {"order": 3, "first": "shunt"}),
    "lc_lowpass_series": ("lc_lowpass", {"order": 3, "first": "series"}),
    "sallen_key_lowpass": ("sallen_key_lowpass", {"gain": "resistors"}),
    "sallen_key_highpass": ("sallen_key_highpass", {"gain": "resistors"}),
    "mfb_lowpass": ("mfb_lowpass", {}),
    "mfb_highpass": ("mfb_highpass", {}),
    "mfb_bandpass": ("mfb_bandpass", {}),
    "notch": ("notch", {}),  # notch_lowpass and notch_highpass: the same section
}


def library_drawings() -> dict[str, Schematic]:
    """File stem -> drawing, for :data:`LIBRARY_DRAWINGS`.

    Returns
    -------
    dict[str, Schematic]
        File stem -> drawing.
    """
    return {stem: topology_drawing(name, opts) for stem, (name, opts) in LIBRARY_DRAWINGS.items()}


def write_library_drawings(folder: str) -> list[str]:
    """Write :func:`library_drawings` as ``folder/<stem>.svg`` (UTF-8); returns the paths.
    Run after changing a layout: ``python -c "from tolspread.schematic import
    write_library_drawings as w; w('assets/schematics')"``.

    Parameters
    ----------
    folder : str
        The folder to write into.

    Returns
    -------
    list[str]
        The paths written.
    """
    from pathlib import Path

    from .safeio import write_text_atomic

    out = []
    for stem, sch in library_drawings().items():
        path = Path(folder) / f"{stem}.svg"
        write_text_atomic(path, sch.svg + "\n", backup=False)
        out.append(str(path))
    return out


REPORT_WIDTH = 760  # the report's figures are this wide (px); a narrower drawing is centred in it


def _widened(svg: str, width: float) -> str:
    """``svg`` centred in a picture ``width`` wide (unchanged if it is wider): the report
    scales every figure to the page's width, so each drawing keeps the charts' scale."""
    import xml.etree.ElementTree as ET

    root = ET.fromstring(svg)
    w, h = float(root.get("width")), float(root.get("height"))
    if w >= width:
        return svg
    group = ET.Element(f"{{{SVG_NS}}}g", {"transform": f"translate({(width - w) / 2:.2f},0)"})
    for child in list(root):
        root.remove(child)
        group.append(child)
    root.append(group)
    root.set("width", str(round(width)))
    root.set("viewBox", f"0 0 {width:.2f} {h:.2f}")
    return ET.tostring(root, encoding="unicode")


def schematic_figures(design: Any) -> list[tuple[str, str, str]]:
    """The report's schematics: ``(figure name, SVG text, caption)`` for each stage, each at
    least :data:`REPORT_WIDTH` wide (the charts' scale).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    list[tuple[str, str, str]]
        (figure name, SVG text, caption) per stage.
    """
    figures = []
    for i, sch in enumerate(design_schematics(design)):
        figures.append((f"schematic-{i + 1}", _widened(sch.svg, REPORT_WIDTH),
                        f"{sch.title}: each part with its reference designator (and the topology's "
                        "role for it where they differ), marked value and grade."))
    return figures
