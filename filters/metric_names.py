"""Names of metrics: built, parsed, given a unit, a label for people and a scale, here only.

Every per-board number tolspread reports has a name: a key of ``Ensemble.metrics``, of a
spread budget, of the corners and of ``tolspread analyze --json``. The names are

==============================  ===================================================  =====
name                            what                                                 unit
==============================  ===================================================  =====
``cutoff_hz``                   low-/high-pass cutoff                                Hz
``centre_hz``, ``lower_hz``,    band-pass centre, band edges, bandwidth              Hz
``upper_hz``, ``bandwidth_hz``
``reference_db``                passband gain                                        dB
``peaking_db``                  peak above the passband gain                         dB
``attenuation_db@<f>``          attenuation below the passband gain at f Hz          dB
``s<k>.f0_hz``, ``s<k>.q``      stage k's (from 1) highest-Q pole pair               Hz, -
``s<k>.fc_hz``                  a first-order stage's corner                         Hz
``s<k>.p<j>.f0_hz``, ``.q``     pole pair j (from 1) of a stage of order > 2         Hz, -
``margin.<span label>``         a span's margin (positive: met), in its quantity's   dB,
                                unit: gain dB, phase degrees, delay variation s      deg, s
``mismatch.<span label>``       a match span's signed channel difference: the mean   dB,
                                over its band of channel 2 minus channel 1           deg, s
==============================  ===================================================  =====

Match spans (``kind`` "match", boards of several channels) limit the difference between
any two channels: gain difference (dB), phase difference (deg), group-delay difference
(s); :data:`MATCH_WORDS` names them for people.

A margin's unit is its span's, so :func:`unit`, :func:`metric_label` and
:func:`sensitivity_unit` need the design's mask for margins (a ``ValueError`` without it:
nothing guesses). Span labels are unique within a design (the loader refuses two spans of
one label, :func:`duplicate_label`), so ``margin.<label>`` names one span.

Frequencies and Q are budgeted on a log scale (:func:`is_log_metric`); decibels, degrees
and seconds linearly.
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Literal, Sequence

from .mask import Span

__all__ = [
    "MetricKind",
    "SPAN_UNIT",
    "RESPONSE_METRICS",
    "STAGE_METRICS",
    "MARGIN_PREFIX",
    "MISMATCH_PREFIX",
    "MATCH_WORDS",
    "mismatch_name",
    "ATTENUATION_PREFIX",
    "MetricId",
    "margin_name",
    "margin_names",
    "stage_metric_name",
    "attenuation_name",
    "parse",
    "is_margin",
    "is_pair_metric",
    "span_of",
    "unit",
    "is_log_metric",
    "sensitivity_unit",
    "metric_words",
    "metric_label",
    "duplicate_label",
    "unique_span_name",
]

MetricKind = Literal["response", "attenuation", "stage", "margin", "mismatch"]

#: The unit of each span quantity's limits and margins.
SPAN_UNIT = {"gain": "dB", "phase": "deg", "delay": "s"}

#: What a match span of each quantity limits, in words.
MATCH_WORDS = {"gain": "gain difference", "phase": "phase difference", "delay": "group-delay difference"}

#: The response's own metrics: name -> (words, unit).
RESPONSE_METRICS = {
    "cutoff_hz": ("cutoff", "Hz"),
    "centre_hz": ("centre", "Hz"),
    "bandwidth_hz": ("bandwidth", "Hz"),
    "lower_hz": ("lower band edge", "Hz"),
    "upper_hz": ("upper band edge", "Hz"),
    "reference_db": ("passband gain", "dB"),
    "peaking_db": ("peaking", "dB"),
}

#: A stage's metrics: quantity -> (words, unit).
STAGE_METRICS = {"f0_hz": ("f0", "Hz"), "q": ("Q", ""), "fc_hz": ("fc", "Hz")}

MARGIN_PREFIX = "margin."
MISMATCH_PREFIX = "mismatch."
ATTENUATION_PREFIX = "attenuation_db@"
_STAGE = re.compile(r"s([1-9]\d*)(?:\.p([1-9]\d*))?\.([a-z0-9_]+)")


@dataclass(frozen=True)
class MetricId:
    """A parsed metric name.

    ``kind``: "response" (``quantity`` is the whole name, e.g. ``cutoff_hz``),
    "attenuation" (``freq_hz``), "stage" (``stage`` from 1, ``pair`` from 1 or 0 for the
    stage's highest-Q pair, ``quantity`` one of :data:`STAGE_METRICS`) or "margin"
    (``span``: the span's label) or "mismatch" (``span``: the match span's label).
    """

    kind: MetricKind
    quantity: str = ""
    stage: int = 0
    pair: int = 0
    span: str = ""
    freq_hz: float = math.nan

    @property
    def name(self) -> str:
        """The metric name this id was parsed from (:func:`parse` inverts it)."""
        if self.kind == "margin":
            return margin_name(self.span)
        if self.kind == "mismatch":
            return mismatch_name(self.span)
        if self.kind == "attenuation":
            return attenuation_name(self.freq_hz)
        if self.kind == "stage":
            return stage_metric_name(self.stage, self.quantity, self.pair)
        return self.quantity


# --- building -------------------------------------------------------------------------------

def margin_name(span: Span | str) -> str:
    """``margin.<label>`` of a span (or of a span label).

    Parameters
    ----------
    span : Span or str
        A span, or a span label.

    Returns
    -------
    str
        The metric name.
    """
    return MARGIN_PREFIX + (span if isinstance(span, str) else span.label)


def mismatch_name(span: Span | str) -> str:
    """``mismatch.<label>`` of a match span (or of its label): the signed channel difference.

    Parameters
    ----------
    span : Span or str
        A span, or a span label.

    Returns
    -------
    str
        The metric name.
    """
    return MISMATCH_PREFIX + (span if isinstance(span, str) else span.label)


def margin_names(mask: Sequence[Span]) -> list[str]:
    """The margin names of a mask's spans, in mask order.

    Parameters
    ----------
    mask : sequence of Span
        The spec mask.

    Returns
    -------
    list[str]
        One name per span.
    """
    return [margin_name(s) for s in mask]


def stage_metric_name(k: int, quantity: str, pair: int = 0) -> str:
    """``s<k>.<quantity>`` (stage ``k`` from 1), or ``s<k>.p<pair>.<quantity>`` for one
    pole pair (``pair`` from 1) of a stage of order above 2. ``quantity``: f0_hz, q, fc_hz.

    Parameters
    ----------
    k : int
        Stage number, from 1.
    quantity : str
        ``"f0_hz"``, ``"q"`` or ``"fc_hz"``.
    pair : int
        Pole pair number from 1, or 0 for the stage itself.

    Returns
    -------
    str
        The metric name.
    """
    if quantity not in STAGE_METRICS:
        raise ValueError(f"unknown stage metric {quantity!r}")
    if int(k) < 1 or int(pair) < 0:
        raise ValueError(f"stage {k} and pair {pair} count from 1")
    return f"s{int(k)}.p{int(pair)}.{quantity}" if pair else f"s{int(k)}.{quantity}"


def attenuation_name(f_hz: float) -> str:
    """Metric name of the attenuation (dB below the passband reference) at ``f_hz`` Hz.

    Parameters
    ----------
    f_hz : float
        Frequency in Hz.

    Returns
    -------
    str
        The metric name.
    """
    return f"{ATTENUATION_PREFIX}{f_hz:g}"


# --- parsing --------------------------------------------------------------------------------

def parse(name: str) -> MetricId:
    """The :class:`MetricId` of a metric name; ``ValueError`` for a name no module makes.

    Parameters
    ----------
    name : str
        A metric name.

    Returns
    -------
    MetricId
        Kind, stage, pair, quantity or span label of the name.
    """
    if name.startswith(MARGIN_PREFIX):
        return MetricId("margin", "margin", span=name[len(MARGIN_PREFIX):])
    if name.startswith(MISMATCH_PREFIX):
        return MetricId("mismatch", "mismatch", span=name[len(MISMATCH_PREFIX):])
    if name in RESPONSE_METRICS:
        return MetricId("response", name)
    if name.startswith(ATTENUATION_PREFIX):
        try:
            f = float(name[len(ATTENUATION_PREFIX):])
        except ValueError:
            f = math.nan
        if math.isfinite(f) and f > 0:
            return MetricId("attenuation", "attenuation_db", freq_hz=f)
    m = _STAGE.fullmatch(name)
    if m and m.group(3) in STAGE_METRICS and not (m.group(2) and m.group(3) == "fc_hz"):
        return MetricId("stage", m.group(3), stage=int(m.group(1)), pair=int(m.group(2) or 0))
    raise ValueError(f"not a metric name: {name!r}")


def is_margin(name: str) -> bool:
    """A span's margin (``margin.<label>``).

    Parameters
    ----------
    name : str
        A metric name.

    Returns
    -------
    bool
        True for a span's margin.
    """
    return name.startswith(MARGIN_PREFIX)


def is_pair_metric(name: str) -> bool:
    """``s1.p2.q``: one pole pair of a higher-order stage (kept out of default lists).

    Parameters
    ----------
    name : str
        A metric name.

    Returns
    -------
    bool
        True for a metric of one pole pair.
    """
    try:
        return parse(name).pair > 0
    except ValueError:
        return False


def span_of(name: str, mask: Sequence[Span]) -> Span:
    """The span of margin ``name`` in ``mask``; ``ValueError`` when it has none.

    Parameters
    ----------
    name : str
        A margin's name.
    mask : sequence of Span
        The spec mask.

    Returns
    -------
    Span
        The span.
    """
    mid = parse(name)
    if mid.kind in ("margin", "mismatch"):
        for s in mask:
            if s.label == mid.span:
                return s
    raise ValueError(f"{name!r} is not the margin of a span of this mask")


# --- units, scale and words -----------------------------------------------------------------

def unit(name: str, mask: Sequence[Span] | None = None) -> str:
    """The unit of metric ``name``: "Hz", "dB", "deg", "s", or "" for Q. A margin's is its
    span's (:data:`SPAN_UNIT`), looked up in ``mask`` (needed for margins).

    Parameters
    ----------
    name : str
        A metric name.
    mask : sequence of Span, optional
        The spec mask (needed for margins).

    Returns
    -------
    str
        The unit symbol.
    """
    mid = parse(name)
    if mid.kind in ("margin", "mismatch"):
        if mask is None:
            raise ValueError(f"the unit of {name!r} is its span's: pass the design's mask")
        return SPAN_UNIT[span_of(name, mask).quantity]
    if mid.kind == "attenuation":
        return "dB"
    if mid.kind == "stage":
        return STAGE_METRICS[mid.quantity][1]
    return RESPONSE_METRICS[name][1]


def is_log_metric(name: str) -> bool:
    """Frequencies and Q are budgeted (and their sensitivities taken) on a log scale;
    decibels, degrees and seconds (every margin) linearly.

    Parameters
    ----------
    name : str
        A metric name.

    Returns
    -------
    bool
        True for a frequency or a Q.
    """
    mid = parse(name)
    if mid.kind == "stage":
        return True
    return mid.kind == "response" and RESPONSE_METRICS[name][1] == "Hz"


def sensitivity_unit(name: str, mask: Sequence[Span] | None = None) -> str:
    """The unit of a normalized sensitivity of ``name``: "ln/ln" (d ln metric / d ln
    value) for a log metric, else the metric's unit per 1 % change ("dB per %",
    "deg per %", "s per %").

    Parameters
    ----------
    name : str
        A metric name.
    mask : sequence of Span, optional
        The spec mask (needed for margins).

    Returns
    -------
    str
        The unit text.
    """
    return "ln/ln" if is_log_metric(name) else f"{unit(name, mask)} per %"


def metric_words(name: str, stage_names: Sequence[str] | None = None) -> str:
    """What metric ``name`` is, in words without its unit: ``cutoff``, ``U2 high-Q stage
    Q`` (``stage 2 Q`` without ``stage_names``), ``margin of 'phase floor'``,
    ``attenuation at 4 kHz``.

    Parameters
    ----------
    name : str
        A metric name.
    stage_names : sequence of str, optional
        Stage names in design order (default: "stage k").

    Returns
    -------
    str
        The words.
    """
    mid = parse(name)
    if mid.kind == "response":
        return RESPONSE_METRICS[name][0]
    if mid.kind == "attenuation":
        from .values import format_value

        return f"attenuation at {format_value(mid.freq_hz, 'Hz')}"
    if mid.kind == "stage":
        k = mid.stage
        stage = stage_names[k - 1] if stage_names and k - 1 < len(stage_names) else f"stage {k}"
        pair = f" pair {mid.pair}" if mid.pair else ""
        return f"{stage}{pair} {STAGE_METRICS[mid.quantity][0]}"
    if mid.kind == "mismatch":
        return f"channel 2 minus channel 1 of '{mid.span}'"
    return f"margin of '{mid.span}'"


def metric_label(name: str, stage_names: Sequence[str] | None = None,
                 mask: Sequence[Span] | None = None) -> str:
    """A label for people: :func:`metric_words` with the :func:`unit` in brackets,
    ``cutoff (Hz)``, ``U2 high-Q stage Q`` (no unit), ``margin of 'phase floor' (deg)``
    (margins need ``mask``).

    Parameters
    ----------
    name : str
        A metric name.
    stage_names : sequence of str, optional
        Stage names in design order (default: "stage k").
    mask : sequence of Span, optional
        The spec mask (needed for margins).

    Returns
    -------
    str
        The label.
    """
    u = unit(name, mask)
    return f"{metric_words(name, stage_names)} ({u})" if u else metric_words(name, stage_names)


# --- span labels ----------------------------------------------------------------------------

def duplicate_label(mask: Sequence[Span]) -> tuple[int, int] | None:
    """The first pair of mask indexes (earlier, later) whose spans share a label, or None.
    Two such spans would share one margin name and merge in every result.

    Parameters
    ----------
    mask : sequence of Span
        The spec mask.

    Returns
    -------
    tuple[int, int] or None
        The two indexes, or None when every label is unique.
    """
    seen: dict[str, int] = {}
    for i, s in enumerate(mask):
        if s.label in seen:
            return seen[s.label], i
        seen[s.label] = i
    return None


def unique_span_name(stem: str, mask: Sequence[Span], first: int | None = None) -> str:
    """A span name no span of ``mask`` is labelled with: ``stem`` itself when free and
    ``first`` is None, else ``"<stem> <n>"`` for the smallest free n from ``first`` (or 2).

    Parameters
    ----------
    stem : str
        The name wanted ("floor", "phase floor").
    mask : sequence of Span
        The spec mask.
    first : int, optional
        Number from which to count (None: ``stem`` alone when free).

    Returns
    -------
    str
        A label free in ``mask``.
    """
    taken = {s.label for s in mask}
    if first is None and stem not in taken:
        return stem
    n = 2 if first is None else first
    while f"{stem} {n}" in taken:
        n += 1
    return f"{stem} {n}"
