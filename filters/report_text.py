"""The report's words and numbers for people: percentages, counts, metric values with
their units, grades and distributions described in words, and the list of assumptions.
Everything here is generated from the design and the result (no fixed claims about a
particular design)."""
from __future__ import annotations

import html
import math
from typing import Sequence

from .grades import Grade
from .mask import Span
from .metric_names import SPAN_UNIT
from .values import format_value

__all__ = [
    "format_pct",
    "format_count",
    "format_metric",
    "describe_distribution",
    "describe_design",
]

esc = html.escape

# --- number formatting for people ------------------------------------------------------

def format_pct(x: float, digits: int = 2) -> str:
    """A fraction as a percentage with ``digits`` decimals: 0.915 -> "91.50 %".

    A fraction that is not exactly 0 or 1 never prints as "0.00 %" or "100.00 %": more
    decimals are added (up to 6) until it differs.
    """
    if not math.isfinite(x):
        return "n/a"
    p = 100.0 * x
    d = digits
    while d < 6 and 0.0 < x < 1.0 and (f"{p:.{d}f}" in (f"{100:.{d}f}", f"{0:.{d}f}")):
        d += 1
    return f"{p:.{d}f} %"


def format_count(n: int) -> str:
    """A count with thousands separators: 12000 -> "12,000"."""
    return f"{int(n):,}"


def format_metric(x: float, unit: str, signed: bool = True) -> str:
    """A metric value for people in ``unit`` (Hz, dB, deg, s or "" for plain numbers);
    dB and degrees carry their sign unless ``signed`` is False (spreads)."""
    if x is None or not math.isfinite(x):
        return "n/a"
    sign = "+" if signed else ""
    if unit == "Hz":
        return format_value(x, "Hz", digits=4)
    if unit == "dB":
        return f"{x:{sign}.3f} dB"
    if unit == "deg":
        return f"{x:{sign}.2f} deg"
    if unit == "s":
        return format_value(x, "s", digits=3)
    return f"{x:.4g}"


def _cost(x: float | None) -> str:
    return "n/a" if x is None or not math.isfinite(x) else f"{x:.2f}"


def describe_distribution(g: Grade, short: bool = False) -> str:
    """How a grade's values are distributed, in words (``short``: for a table cell)."""
    tol = g.tolerance_pct
    if tol == 0:
        return "none (exact)" if short else "no spread (exact value)"
    if g.distribution == "uniform":
        return "uniform" if short else f"uniform within \u00b1{tol:g} %"
    if short:
        if g.distribution == "binned":
            return f"binned, k = {g.coverage:g}, centre \u00b1{g.bin_inner_pct:g} % removed"
        return f"normal, k = {g.coverage:g}, {'truncated' if g.truncate else 'not truncated'}"
    if g.distribution == "binned":
        return (f"binned: normal with coverage factor k = {g.coverage:g} (\u03c3 = {tol / g.coverage:.3g} %), "
                f"the centre within \u00b1{g.bin_inner_pct:g} % removed (sold as a tighter grade), "
                f"limited to \u00b1{tol:g} %")
    cut = f"truncated at \u00b1{tol:g} %" if g.truncate else "not truncated"
    return f"normal with coverage factor k = {g.coverage:g} (\u03c3 = {tol / g.coverage:.3g} %), {cut}"


def _tempco(g: Grade) -> str:
    if not g.tempco_ppm and not g.tempco_spread_ppm:
        return "0"
    if not g.tempco_ppm:
        return f"\u00b1{g.tempco_spread_ppm:g} ppm/K"
    return f"{g.tempco_ppm:+g} \u00b1 {g.tempco_spread_ppm:g} ppm/K"


def _drift(g: Grade) -> str:
    return f"\u00b1{g.drift_pct:g} %" if g.drift_pct else "none"


_INTERVAL_NAMES = {"wilson": "Wilson score interval (without continuity correction)",
                   "exact": "Clopper-Pearson exact interval"}
_METHOD_NAMES = {"random": "random (numpy PCG64 generator seeded through SeedSequence)",
                 "sobol": "scrambled Sobol points (quasi-Monte Carlo)"}


def _sensitivity(value: float, unit: str) -> str:
    if not math.isfinite(value):
        return "n/a"
    return f"{value:+.3g}" if unit == "ln/ln" else f"{value:+.3g} {esc(unit)}"


def _opamp_text(d, stage, topo) -> str:
    """The stage's op-amps in words. An op-amp that a part of the design models is named by
    that part's reference; the op-amp of a library topology that no part models is ideal and
    has no designator of its own (its topology role, such as "U1", is not a part: naming it
    would point at another stage's op-amp); a circuit stage's op-amps keep their own names."""
    amps = [o.role for o in topo.netlist.opamps]
    if not amps:
        return "passive"
    out = []
    unnamed = 0
    for role in amps:
        ref = stage.roles.get(role)
        if ref is not None:
            part = d.parts[d.part_index(ref)]
            out.append(f"op-amp {ref} (a part of the design), single-pole with gain-bandwidth "
                       f"{format_value(part.value, 'Hz', digits=4)}")
        elif stage.topology == "circuit":
            out.append(f"op-amp {role} ideal (infinite gain and bandwidth; no part models it)")
        else:
            unnamed += 1
    if unnamed:
        what = "an ideal op-amp" if unnamed == 1 else f"{unnamed} ideal op-amps"
        out.append(f"{what} (infinite gain and bandwidth; no part of the design models "
                   f"{'it' if unnamed == 1 else 'them'})")
    return "; ".join(out)


def _span_words(s: Span) -> str:
    """One span of the mask in words, from its own limits (gain, phase or delay)."""
    where = f"from {format_value(s.f1, 'Hz', digits=4)} to {format_value(s.f2, 'Hz', digits=4)}"
    if s.quantity == "delay":
        return (f"{s.label}: group delay varies by at most {format_value(s.limit1, 's', digits=4)} {where}")
    unit = SPAN_UNIT[s.quantity]
    lim = f"{s.limit1:+g} {unit}"
    if s.limit2 is not None and s.limit2 != s.limit1:
        lim += f" (sloping to {s.limit2:+g} {unit})"
    bound = "at least" if s.kind == "floor" else "at most"
    ref = " relative to the passband gain" if s.relative and s.quantity == "gain" else ""
    extra = ""
    if s.quantity == "gain" and s.kind == "ceiling" and max(s.limit1, s.end_limit) < 0:
        extra = f", that is at least {-max(s.limit1, s.end_limit):g} dB of rejection"
    return f"{s.label}: {s.quantity} {bound} {lim}{ref}{extra} {where}"


def describe_design(d, grades: Sequence[Grade]) -> list[str]:
    """Sentences (plain text) that describe the design from its own data: the stages, the
    parts grouped by grade (``grades``: the grade in use per part, design order) and every
    span of the mask. Nothing here is a fixed claim: change a grade or a limit and the
    sentence changes with it."""
    out: list[str] = []
    stages = []
    for k, s in enumerate(d.stages, start=1):
        topo = s.built()
        opts = ", ".join(f"{key} {val}" for key, val in s.options.items())
        stages.append(f"{s.name or f'stage {k}'} ({topo.description}{', ' + opts if opts else ''})")
    out.append(f"{len(d.stages)} stage{'s' if len(d.stages) != 1 else ''}: " + "; ".join(stages) + ".")
    by_grade: dict[str, tuple[Grade, list[str], set[str]]] = {}
    for p, g in zip(d.parts, grades):
        entry = by_grade.setdefault(g.name, (g, [], set()))
        entry[1].append(p.ref)
        entry[2].add(p.kind)
    kinds = {"R": "resistor", "C": "capacitor", "L": "inductor", "opamp": "op-amp"}
    groups = []
    for name, (g, refs, part_kinds) in by_grade.items():
        noun = (kinds.get(next(iter(part_kinds)), "part") if len(part_kinds) == 1 else "part") + (
            "s" if len(refs) > 1 else "")
        tech = f", {g.technology}" if g.technology else ""
        groups.append(f"{noun} {', '.join(refs)}: grade {name} (\u00b1{g.tolerance_pct:g} %{tech})")
    out.append("Parts by grade: " + "; ".join(groups) + ".")
    if d.mask:
        out.append("Spec mask: " + "; ".join(_span_words(s) for s in d.mask) + ".")
    else:
        out.append("No spec mask.")
    return out
