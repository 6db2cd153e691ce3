"""Design files: JSON with a format tag and a version, read safely and written atomically.

Nothing in a file is executed (plain ``json``; no eval, no pickle). Oversized or deeply
nested files are refused before any work is done on them. Files of older versions are
migrated step by step; a file from a newer version is refused with a clear message.

Reading and saving go through :mod:`filters.safeio`: only regular files of at most
``MAX_BYTES`` are read; saving writes a temporary file beside the target, flushes it to
disk and renames it over the target in one step, so a failed save never leaves a
half-written design; the previous file is kept as ``NAME.bak`` (an atomic step too).
"""
from __future__ import annotations

import json
from pathlib import Path
from typing import Any, Callable

from .temperature_settings import settings_to_dict
from .design import Design, design_from_dict
from .errors import InputError, ValidationError
from .constraints import purchase_to_dict
from .measured import measured_to_dict
from .stage import stage_to_dict
from .values import format_value, parse_value
from .safeio import parse_json, read_text, remove_orphan_temporaries, write_text_atomic  # noqa: F401 (used by others)

__all__ = [
    "FORMAT_TAG",
    "VERSION",
    "MAX_BYTES",
    "MAX_DEPTH",
    "MIGRATIONS",
    "parse_text",
    "loads",
    "load",
    "design_to_dict",
    "check_design",
    "dumps",
    "save",
    "problems_text",
    "demo_text",
    "load_demo",
]

FORMAT_TAG = "tolspread-design"
VERSION = 2
MAX_BYTES = 2_000_000
MAX_DEPTH = 20


def _v1_to_v2(data: dict[str, Any]) -> dict[str, Any]:
    """Version 1 allowed ``analysis.temperature_c`` as one number and spans without a
    ``quantity``; version 2 always writes ``[low, high]`` and the quantity."""
    out = dict(data)
    a = out.get("analysis")
    if isinstance(a, dict) and "temperature_c" in a:
        t = a["temperature_c"]
        if isinstance(t, (int, float)) and not isinstance(t, bool):
            out["analysis"] = {**a, "temperature_c": [t, t]}
    mask = out.get("mask")
    if isinstance(mask, list):
        out["mask"] = [({"quantity": "gain", **m} if isinstance(m, dict) and "quantity" not in m else m)
                       for m in mask]
    return out


# version n -> function turning a version-n dict into a version n+1 dict
MIGRATIONS: dict[int, Callable[[dict[str, Any]], dict[str, Any]]] = {1: _v1_to_v2}


def parse_text(text: str, source: str = "design") -> dict[str, Any]:
    """Parse design-file text into a current-version dict (migrated), not yet validated.

    Parameters
    ----------
    text : str
        The file's JSON text.
    source : str
        What the text is, for messages (a file name, "design").

    Returns
    -------
    dict[str, Any]
        The design's dict in the current file format.

    Raises
    ------
    InputError
        When the text is not JSON of a design or cannot be migrated.
    """
    data = parse_json(text, source, limit=MAX_BYTES, max_depth=MAX_DEPTH, what="design file")
    if not isinstance(data, dict):
        raise InputError("a design file holds one JSON object", source)
    if data.get("format") != FORMAT_TAG:
        raise InputError(f"not a tolspread design (field 'format' must be {FORMAT_TAG!r})", "format")
    version = data.get("version")
    if isinstance(version, bool) or not isinstance(version, int) or version < 1:
        raise InputError("must be a whole number from 1", "version")
    if version > VERSION:
        raise InputError(f"this file is format version {version}, written by a newer tolspread; "
                         f"this one reads up to version {VERSION}", "version")
    while version < VERSION:
        data = MIGRATIONS[version](data)
        version += 1
        data["version"] = version
    return data


def loads(text: str, source: str = "design") -> Design:
    """Read a design from JSON text; raises InputError/ValidationError naming the field.

    Parameters
    ----------
    text : str
        Design-file JSON text.
    source : str
        What the text is, for messages (a file name, "design").

    Returns
    -------
    Design
        The validated design.
    """
    return design_from_dict(parse_text(text, source))


def load(path: str | Path) -> Design:
    """Read a design file (a regular file of at most ``MAX_BYTES``). Temporary files that
    a killed save of it left beside it are removed (the window's start opens a design
    through here).

    Parameters
    ----------
    path : str or Path
        The design file (JSON).

    Returns
    -------
    Design
        The validated design.

    Raises
    ------
    InputError, ValidationError
        When the file cannot be read or holds no valid design (each problem with its path).
    """
    p = Path(path)
    text = read_text(p, MAX_BYTES, what="design file")
    remove_orphan_temporaries(p)
    return loads(text, str(p))


def _exact_text(x: float) -> str:
    """A value text that parses back to exactly ``x``."""
    text = format_value(x)
    try:
        same = parse_value(text) == x
    except InputError:  # rounding to 4 figures overflowed (x near the largest float)
        same = False
    return text if same else repr(float(x))


def design_to_dict(design: Design) -> dict[str, Any]:
    """The design file's dict form of ``design`` (current format and version); a part keeps
    the value text it was written with, else a text that parses back to its exact value.

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    dict[str, Any]
        Plain JSON-ready data (values in SI units, tolerances in %, frequencies in Hz).
    """
    a = design.analysis
    out: dict[str, Any] = {"format": FORMAT_TAG, "version": VERSION}
    if design.name:
        out["name"] = design.name
    if design.description:
        out["description"] = design.description
    for k in ("revision", "author"):
        if getattr(design, k):
            out[k] = getattr(design, k)
    out["parts"] = []
    for p in design.parts:
        d_part: dict[str, Any] = {"ref": p.ref, "value": p.text or _exact_text(p.value), "grade": p.grade}
        if p.tolerance_pct is not None:
            d_part["tolerance_pct"] = p.tolerance_pct
        if p.bias_v:
            d_part["bias_v"] = p.bias_v
        if p.measured is not None:
            d_part["measured"] = measured_to_dict(p.measured)
        if p.locked:
            d_part["locked"] = True
        if p.forbid:
            d_part["forbid"] = list(p.forbid)
        out["parts"].append(d_part)
    out["stages"] = [stage_to_dict(s) for s in design.stages]
    out["analysis"] = {
        "samples": a.samples, "seed": a.seed, "f_start": a.f_start, "f_stop": a.f_stop,
        "points": a.points, "method": a.method, "cutoff_db": a.cutoff_db,
        "temperature_c": [a.temp_low_c, a.temp_high_c], "lot_share": a.lot_share,
        "interval": a.interval, "confidence": a.confidence,
    }
    if a.attenuation_hz:
        out["analysis"]["attenuation_at_hz"] = list(a.attenuation_hz)
    out["analysis"].update(settings_to_dict(a))  # operating range, judged points, service life
    out["mask"] = [s.to_dict() for s in design.mask]
    if design.grades:
        out["grades"] = [g.to_dict() for g in design.grades]
    if design.networks:
        out["networks"] = [n.to_dict() for n in design.networks]
    if design.channels.count > 1:
        out["channels"] = design.channels.to_dict()
    purchase = purchase_to_dict(design.purchase)
    if purchase is not None:
        out["purchase"] = purchase
    return out


def check_design(design: Design) -> Design:
    """``design`` checked by exactly the loader's rules: its file form is validated as
    :func:`filters.design.design_from_dict` validates a file (about half a millisecond for
    the demo).

    The window calls this before accepting an edit, so whatever it accepts saves into a
    file that opens. Returns the design as the loader builds it; raises
    :class:`ValidationError` listing every problem with its path.

    Parameters
    ----------
    design : Design
        The design to check.

    Returns
    -------
    Design
        The design as the loader builds it from its file form.
    """
    return design_from_dict(design_to_dict(design))


def dumps(design: Design) -> str:
    """The design as design-file text (JSON, indented, ends with a newline).

    Parameters
    ----------
    design : Design
        The design.

    Returns
    -------
    str
        JSON text of the current file format.
    """
    return json.dumps(design_to_dict(design), indent=2, ensure_ascii=False) + "\n"


def save(design: Design, path: str | Path, *, backup: bool = True) -> None:
    """Write ``design`` to ``path`` atomically; keep the previous file as ``path.bak``.

    On failure the old file is intact and :class:`InputError` says why.

    Parameters
    ----------
    design : Design
        The design to write.
    path : str or Path
        The design file to write (JSON).
    backup : bool
        Keep the previous file as ``path.bak``.
    """
    write_text_atomic(path, dumps(design), backup=backup)


def problems_text(exc: InputError) -> list[str]:
    """Every problem of ``exc`` as one line each.

    Parameters
    ----------
    exc : InputError
        An input error (a :class:`ValidationError` lists several problems).

    Returns
    -------
    list[str]
        One line per problem, each with its field path.
    """
    return exc.lines() if isinstance(exc, ValidationError) else [str(exc)]


def demo_text() -> str:
    """The built-in demo design's file text (an invented scenario).

    Returns
    -------
    str
        Design-file JSON text.
    """
    from importlib import resources

    return resources.files(__package__).joinpath("data/demo_design.json").read_text(encoding="utf-8")


def load_demo() -> Design:
    """The built-in demo design.

    Returns
    -------
    Design
        The validated demo design (an invented scenario).
    """
    return loads(demo_text(), "demo design")
