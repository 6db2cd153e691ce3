"""Numbers for people: one formatter for a number with its unit, used by the terminal
summary, the HTML report and the window's exports.

:func:`format_quantity` writes a value in a unit: Hz, s and part units (ohm, F, H) in
engineering notation through :func:`filters.values.format_value` (4 significant figures:
"1.234 kHz"), dB and degrees with fixed decimals and their sign, plain numbers with 4
significant figures. :func:`format_metric_value` writes a metric by its name (its unit
from :mod:`filters.metric_names`; attenuations beyond the float64 floor of trust read
"> 200 dB"). Percentages, counts, costs and sensitivities have their own small writers.
"""
from __future__ import annotations

import html
import math
from typing import Sequence

from ..mask import Span
from ..metric_names import is_log_metric, parse, unit as metric_unit
from ..metrics import ATTENUATION_FLOOR_DB
from ..summary import MetricSummary
from ..values import format_value

__all__ = [
    "format_quantity",
    "format_metric",
    "format_metric_value",
    "beyond_floor",
    "format_pct",
    "format_count",
    "format_cost",
    "format_sensitivity",
    "summary_beyond_floor",
    "summary_cells",
]


def format_quantity(x: float | None, unit: str, signed: bool = True, digits: int | None = None) -> str:
    """``x`` for people in ``unit``: "Hz", "s" or any other SI unit (ohm, F, H...) in
    engineering notation with ``digits`` significant figures (default 4, seconds 3); "dB"
    with 3 decimals and "deg" with 2, signed unless ``signed`` is False (spreads); "" a
    plain number (4 significant figures). None, NaN and infinities read "n/a".

    Parameters
    ----------
    x : float or None
        The value, in ``unit``.
    unit : str
        Its unit.
    signed : bool
        Write a sign.
    digits : int, optional
        Significant figures.

    Returns
    -------
    str
        The text.
    """
    if x is None or not math.isfinite(x):
        return "n/a"
    sign = "+" if signed else ""
    if unit == "dB":
        return f"{x:{sign}.3f} dB"
    if unit == "deg":
        return f"{x:{sign}.2f} deg"
    if unit:
        return format_value(x, unit, digits=digits or (3 if unit == "s" else 4))
    return f"{x:.4g}"


#: The name the report and the terminal have used for :func:`format_quantity`.
format_metric = format_quantity


def beyond_floor(name: str, x: float) -> bool:
    """Whether ``x`` is an attenuation beyond :data:`filters.metrics.ATTENUATION_FLOOR_DB`
    (float64 rounding leaves such figures unresolved).

    Parameters
    ----------
    name : str
        Metric name.
    x : float
        Its value.

    Returns
    -------
    bool
        True beyond the floor.
    """
    return parse(name).kind == "attenuation" and math.isfinite(x) and x > ATTENUATION_FLOOR_DB


def format_metric_value(name: str, x: float | None, mask: Sequence[Span] | None = None,
                        signed: bool = True) -> str:
    """Metric ``name``'s value ``x`` in the metric's own unit (a margin's is its span's:
    pass the ``mask``); an attenuation beyond the floor of trust reads "> 200 dB".

    Parameters
    ----------
    name : str
        Metric name.
    x : float or None
        Its value in its unit.
    mask : sequence of Span, optional
        The spec mask (for margins).
    signed : bool
        Write a sign.

    Returns
    -------
    str
        The text.
    """
    if x is not None and beyond_floor(name, x):
        return f"> {ATTENUATION_FLOOR_DB:g} dB"
    return format_quantity(x, metric_unit(name, mask), signed)


def format_pct(x: float, digits: int = 2) -> str:
    """A fraction as a percentage with ``digits`` decimals: 0.915 -> "91.50 %".

    A fraction that is not exactly 0 or 1 never prints as "0.00 %" or "100.00 %": more
    decimals are added (up to 6) until it differs.

    Parameters
    ----------
    x : float
        A fraction.
    digits : int
        Decimals.

    Returns
    -------
    str
        The text.
    """
    if not math.isfinite(x):
        return "n/a"
    p = 100.0 * x
    d = digits
    while d < 6 and 0.0 < x < 1.0 and (f"{p:.{d}f}" in (f"{100:.{d}f}", f"{0:.{d}f}")):
        d += 1
    return f"{p:.{d}f} %"


def format_count(n: int) -> str:
    """A count with thousands separators: 12000 -> "12,000".

    Parameters
    ----------
    n : int
        A count.

    Returns
    -------
    str
        The text.
    """
    return f"{int(n):,}"


def format_cost(x: float | None) -> str:
    """A relative cost from the catalog, two decimals ("n/a" when unknown).

    Parameters
    ----------
    x : float or None
        A relative cost.

    Returns
    -------
    str
        The text.
    """
    return "n/a" if x is None or not math.isfinite(x) else f"{x:.2f}"


def format_sensitivity(value: float, unit: str) -> str:
    """A sensitivity with 3 significant figures and its unit ("ln/ln" is dimensionless);
    HTML-escaped.

    Parameters
    ----------
    value : float
        The sensitivity.
    unit : str
        Its unit.

    Returns
    -------
    str
        HTML text.
    """
    if not math.isfinite(value):
        return "n/a"
    return f"{value:+.3g}" if unit == "ln/ln" else f"{value:+.3g} {html.escape(unit)}"


def summary_beyond_floor(s: MetricSummary) -> bool:
    """Whether some board has an attenuation ``s`` beyond :data:`filters.metrics.ATTENUATION_FLOOR_DB`.

    Parameters
    ----------
    s : MetricSummary
        A metric's summary.

    Returns
    -------
    bool
        True when some board is beyond the floor.
    """
    return beyond_floor(s.name, s.maximum)


def summary_cells(s: MetricSummary, label: str, mask) -> list[str]:
    """One row of the metric table (figures in the metric's unit; a margin's is its span's
    in ``mask``): label, nominal, mean, std, std/mean, 1st and 99th percentile, min, max.
    Attenuations beyond the floor of trust read "> 200 dB".

    Parameters
    ----------
    s : MetricSummary
        A metric's summary.
    label : str
        The row's label.
    mask : sequence of Span
        The spec mask (for margins).

    Returns
    -------
    list[str]
        The row's cells.
    """
    rel = f"{100 * s.rel_std:.2f} %" if is_log_metric(s.name) and math.isfinite(s.rel_std) else ""

    def fig(x: float, signed: bool = True) -> str:
        return format_metric_value(s.name, x, mask, signed)

    std = "n/a" if summary_beyond_floor(s) else fig(s.std, signed=False)
    return [label, fig(s.nominal), fig(s.mean), std, rel, fig(s.p01), fig(s.p99), fig(s.minimum), fig(s.maximum)]
