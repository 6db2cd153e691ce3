"""The analysis settings of temperature and service life, as the design file states them.

``operating_range_c`` [low, high] (deg C), ``judge_at_c`` [extra judged temperatures] and
``service_life`` {"hours": h, "temperature_c": t}; see :mod:`filters.temperature` for what
the analysis does with them. Kept apart so the design loader reads them without importing
the evaluation.
"""
from __future__ import annotations

from typing import Any

from .errors import InputError, is_finite_number
from .temperature_physics import REFERENCE_CELSIUS

__all__ = [
    "HOURS_PER_YEAR",
    "MAX_JUDGED",
    "judged_temperatures",
    "over_range_or_life",
    "settings_from_dict",
    "settings_to_dict",
]

HOURS_PER_YEAR = 8766.0  # 365.25 days
MAX_JUDGED = 12          # judged temperatures at most: each is one more evaluation of every board


def judged_temperatures(analysis: Any) -> tuple[float, ...]:
    """The temperatures (deg C, rising) every board is judged at; () without a range.

    Parameters
    ----------
    analysis : Analysis
        The design's analysis settings.

    Returns
    -------
    tuple[float, ...]
        Temperatures in deg C.
    """
    rng = getattr(analysis, "operating_range_c", None)
    if rng is None:
        return ()
    lo, hi = rng
    pts = {float(lo), float(hi), *(float(t) for t in analysis.judge_at_c)}
    if lo <= REFERENCE_CELSIUS <= hi:
        pts.add(REFERENCE_CELSIUS)
    return tuple(sorted(pts))


def over_range_or_life(analysis: Any) -> bool:
    """True when the boards are judged again beyond the base run: over an operating range or
    after a service life (:mod:`filters.temperature`).

    Parameters
    ----------
    analysis : Analysis
        The design's analysis settings.

    Returns
    -------
    bool
        True with a range or a life.
    """
    return analysis.operating_range_c is not None or bool(analysis.service_hours)


def settings_from_dict(data: dict, problems: list[InputError], path: str) -> dict[str, Any]:
    """The analysis fields of this module from the design file's ``analysis`` object:
    ``operating_range_c`` [low, high], ``judge_at_c`` [extra points], ``service_life``
    {"hours": h, "temperature_c": t}. Problems are added with their field paths.

    Parameters
    ----------
    data : dict
        The file's ``analysis`` object.
    problems : list of InputError
        Each problem found is appended here.
    path : str
        Field path of ``data``.

    Returns
    -------
    dict[str, Any]
        Analysis field -> value (temperatures in deg C, hours).
    """
    out: dict[str, Any] = {}
    if "operating_range_c" in data:
        r = data["operating_range_c"]
        if (not isinstance(r, list) or len(r) != 2 or not all(is_finite_number(x) for x in r)
                or not -273.15 < r[0] < r[1] < 1000):
            problems.append(InputError("must be [low, high] in deg C with low below high, above -273.15 deg C",
                                       f"{path}.operating_range_c"))
        else:
            out["operating_range_c"] = (float(r[0]), float(r[1]))
    if "judge_at_c" in data:
        pts = data["judge_at_c"]
        rng = out.get("operating_range_c")
        if rng is None:
            problems.append(InputError("needs operating_range_c (the points must lie inside the range)",
                                       f"{path}.judge_at_c"))
        elif (not isinstance(pts, list) or len(pts) > MAX_JUDGED - 3
              or not all(is_finite_number(x) and rng[0] <= x <= rng[1] for x in pts)):
            problems.append(InputError(f"must be a list of up to {MAX_JUDGED - 3} temperatures inside "
                                       f"{rng[0]:g} to {rng[1]:g} deg C", f"{path}.judge_at_c"))
        else:
            out["judge_at_c"] = tuple(float(x) for x in pts)
    if "service_life" in data:
        s = data["service_life"]
        ok = isinstance(s, dict) and set(s) <= {"hours", "temperature_c"} and "hours" in s
        h, t = (s.get("hours"), s.get("temperature_c", REFERENCE_CELSIUS)) if ok else (None, None)
        if not (ok and is_finite_number(h) and 0 < h <= 1e6 and is_finite_number(t) and -273.15 < t < 1000):
            problems.append(InputError('must be {"hours": 0 to 1e6 h, "temperature_c": deg C}',
                                       f"{path}.service_life"))
        else:
            out["service_hours"], out["service_temp_c"] = float(h), float(t)
    return out


def settings_to_dict(analysis: Any) -> dict[str, Any]:
    """The design-file keys of this module's settings (none at their defaults).

    Parameters
    ----------
    analysis : Analysis
        The design's analysis settings.

    Returns
    -------
    dict[str, Any]
        JSON-ready data.
    """
    out: dict[str, Any] = {}
    if analysis.operating_range_c is not None:
        out["operating_range_c"] = list(analysis.operating_range_c)
    if analysis.judge_at_c:
        out["judge_at_c"] = list(analysis.judge_at_c)
    if analysis.service_hours:
        out["service_life"] = {"hours": analysis.service_hours, "temperature_c": analysis.service_temp_c}
    return out
