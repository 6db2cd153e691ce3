"""The report's words: grades, distributions, temperature coefficients, op-amps and the
spec mask described in sentences generated from the design (no fixed claims about a
particular design: change a grade or a limit and the sentence changes with it)."""
from __future__ import annotations

from typing import Sequence

from ..grades import Grade
from ..mask import Span
from ..metric_names import MATCH_WORDS, SPAN_UNIT
from .numbers import format_quantity

__all__ = [
    "INTERVAL_NAMES",
    "METHOD_NAMES",
    "describe_distribution",
    "tempco_text",
    "drift_text",
    "opamp_text",
    "span_words",
    "MATCH_NOTE",
    "describe_design",
]


def describe_distribution(g: Grade, short: bool = False) -> str:
    """How a grade's values are distributed, in words (``short``: for a table cell).

    Parameters
    ----------
    g : Grade
        A grade.
    short : bool
        Short form, for a table cell.

    Returns
    -------
    str
        The words.
    """
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


def tempco_text(g: Grade) -> str:
    """A grade's temperature coefficient in words (ppm/K, with its spread).

    Parameters
    ----------
    g : Grade
        A grade.

    Returns
    -------
    str
        The words.
    """
    if not g.tempco_ppm and not g.tempco_spread_ppm:
        return "0"
    if not g.tempco_ppm:
        return f"\u00b1{g.tempco_spread_ppm:g} ppm/K"
    return f"{g.tempco_ppm:+g} \u00b1 {g.tempco_spread_ppm:g} ppm/K"


def drift_text(g: Grade) -> str:
    """A grade's drift in words, as the grade states it: a fixed drift (plus/minus %), its
    load-life rating ("load life ±1 % after 1,000 h at 70 °C", with the activation energy
    that scales it to other temperatures) and class II ageing (% per decade of hours);
    "none" when it states none of them.

    Parameters
    ----------
    g : Grade
        A grade.

    Returns
    -------
    str
        The words.
    """
    parts = []
    if g.drift_pct:
        parts.append(f"\u00b1{g.drift_pct:g} %")
    if g.life_drift_pct:
        scale = f", scaled by {g.activation_ev:g} eV" if g.activation_ev else ""
        parts.append(f"load life \u00b1{g.life_drift_pct:g} % after {g.life_hours:,.0f} h at "
                     f"{g.life_temp_c:g} \u00b0C{scale}")
    if g.ageing_pct_per_decade:
        parts.append(f"ageing {g.ageing_pct_per_decade:g} % per decade-hour")
    return "; ".join(parts) or "none"


INTERVAL_NAMES = {"wilson": "Wilson score interval (without continuity correction)",
                   "exact": "Clopper-Pearson exact interval"}
METHOD_NAMES = {"random": "random (numpy PCG64 generator seeded through SeedSequence)",
                 "sobol": "scrambled Sobol points (quasi-Monte Carlo)"}


def opamp_text(d, stage, topo) -> str:
    """The stage's op-amps in words. An op-amp that a part of the design models is named by
    that part's reference; the op-amp of a library topology that no part models is ideal and
    has no designator of its own (its topology role, such as "U1", is not a part: naming it
    would point at another stage's op-amp); a circuit stage's op-amps keep their own names.

    Parameters
    ----------
    d : Design
        The design.
    stage : Stage
        The stage.
    topo : Topology
        Its built topology.

    Returns
    -------
    str
        The words.
    """
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
                       f"{format_quantity(part.value, 'Hz')}")
        elif stage.topology == "circuit":
            out.append(f"op-amp {role} ideal (infinite gain and bandwidth; no part models it)")
        else:
            unnamed += 1
    if unnamed:
        what = "an ideal op-amp" if unnamed == 1 else f"{unnamed} ideal op-amps"
        out.append(f"{what} (infinite gain and bandwidth; no part of the design models "
                   f"{'it' if unnamed == 1 else 'them'})")
    return "; ".join(out)


#: Why corners say nothing of match spans (terminal and HTML report).
MATCH_NOTE = ("match spans have no corners (a corner board is one channel standing for all, so its channels "
              "never differ) and the worst-case verdict is about the other spans; read their sampled spread")


def span_words(s: Span) -> str:
    """One span of the mask in words, from its own limits (gain, phase or delay).

    Parameters
    ----------
    s : Span
        A span.

    Returns
    -------
    str
        The words.
    """
    where = f"from {format_quantity(s.f1, 'Hz')} to {format_quantity(s.f2, 'Hz')}"
    if s.kind == "match":  # boards of several channels (filters/channels.py)
        lim = format_quantity(s.limit1, 's', digits=4) if s.quantity == "delay" else f"{s.limit1:g} {SPAN_UNIT[s.quantity]}"
        return f"{s.label}: {MATCH_WORDS[s.quantity]} between any two channels at most {lim} {where}"
    if s.quantity == "delay":
        return (f"{s.label}: group delay varies by at most {format_quantity(s.limit1, 's', digits=4)} {where}")
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
    sentence changes with it.

    Parameters
    ----------
    d : Design
        The design.
    grades : sequence of Grade
        (P,) the grade in use per part.

    Returns
    -------
    list[str]
        Sentences.
    """
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
    for net in d.networks:  # filters/networks.py
        one = " (one package for all channels)" if net.across_channels and d.channels.count > 1 else ""
        out.append(f"Network {net.name} ({', '.join(net.members)}){one}: \u00b1{net.tolerance_pct:g} % each, ratio "
                   f"\u00b1{net.ratio_pct:g} %, temperature coefficients tracking within {net.tracking_ppm:g} ppm/K; "
                   "its members' grades give their temperature coefficient, drift and cost.")
    if d.channels.count > 1:  # filters/channels.py
        shared = f"; shared by all channels: {', '.join(d.channels.shared)}" if d.channels.shared else ""
        out.append(f"{d.channels.count} identical channels on each board, each with its own parts{shared}.")
    if d.mask:
        out.append("Spec mask: " + "; ".join(span_words(s) for s in d.mask) + ".")
    else:
        out.append("No spec mask.")
    return out
