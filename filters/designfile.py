"""Design files: JSON with a format tag and a version, read safely and written atomically.

Nothing in a file is executed (plain ``json``; no eval, no pickle). Oversized or deeply
nested files are refused before any work is done on them. Files of older versions are
migrated step by step; a file from a newer version is refused with a clear message.

Saving writes a temporary file beside the target, flushes it to disk and renames it over
the target in one step, so a failed save never leaves a half-written design; the previous
file is kept as ``NAME.bak``.
"""
from __future__ import annotations

import json
import os
import shutil
import tempfile
from pathlib import Path
from typing import Any, Callable

from .design import Design, design_from_dict
from .errors import InputError, ValidationError

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


def _depth(obj: Any, limit: int) -> int:
    """Nesting depth of ``obj``, stopping once ``limit`` is exceeded."""
    stack = [(obj, 1)]
    worst = 0
    while stack:
        item, d = stack.pop()
        worst = max(worst, d)
        if worst > limit:
            return worst
        if isinstance(item, dict):
            stack.extend((v, d + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, d + 1) for v in item)
    return worst


def _has_lone_surrogate(obj: Any) -> bool:
    """Whether any text (key or value) holds an unpaired surrogate, which JSON escapes
    (\\ud800) allow but UTF-8 cannot store, so such a design could never be saved."""
    stack = [obj]
    while stack:
        item = stack.pop()
        if isinstance(item, str):
            try:
                item.encode("utf-8")
            except UnicodeEncodeError:
                return True
        elif isinstance(item, dict):
            stack.extend(item.keys())
            stack.extend(item.values())
        elif isinstance(item, list):
            stack.extend(item)
    return False


def parse_text(text: str, source: str = "design") -> dict[str, Any]:
    """Parse design-file text into a current-version dict (migrated), not yet validated."""
    if len(text) > MAX_BYTES or len(text.encode("utf-8", errors="replace")) > MAX_BYTES:
        raise InputError(f"file is larger than {MAX_BYTES // 1_000_000} MB; a design file is a few kB", source)
    try:
        data = json.loads(text)
    except RecursionError:
        raise InputError("file is nested too deeply to be a design", source) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})", source) from None
    except ValueError:  # an integer of more digits than Python converts (over 4300)
        raise InputError("holds a number with too many digits to be a design value", source) from None
    if _depth(data, MAX_DEPTH) > MAX_DEPTH:
        raise InputError("file is nested too deeply to be a design", source)
    if _has_lone_surrogate(data):
        raise InputError("holds text that is not valid Unicode (an unpaired surrogate such as \\ud800)",
                         source)
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
    """Read a design from JSON text; raises InputError/ValidationError naming the field."""
    return design_from_dict(parse_text(text, source))


def load(path: str | Path) -> Design:
    """Read a design file."""
    p = Path(path)
    try:
        if p.stat().st_size > MAX_BYTES:
            raise InputError(f"file is larger than {MAX_BYTES // 1_000_000} MB; a design file is a few kB", str(p))
        raw = p.read_bytes()
    except FileNotFoundError:
        raise InputError("no such file", str(p)) from None
    except IsADirectoryError:
        raise InputError("is a folder, not a design file", str(p)) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", str(p)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError("not a text file (not UTF-8)", str(p)) from None
    return loads(text, str(p))


def dumps(design: Design) -> str:
    """The design as design-file text (JSON, indented, ends with a newline)."""
    return json.dumps(design.to_dict(), indent=2, ensure_ascii=False) + "\n"


def save(design: Design, path: str | Path, *, backup: bool = True) -> None:
    """Write ``design`` to ``path`` atomically; keep the previous file as ``path.bak``.

    On failure the old file is intact and :class:`InputError` says why.
    """
    write_text_atomic(Path(path), dumps(design), backup=backup)


def write_text_atomic(target: Path, text: str, *, backup: bool = True) -> None:
    """Write ``text`` to ``target`` through a temporary file and an atomic rename."""
    folder = target.parent if str(target.parent) else Path(".")
    tmp_name = None
    try:
        fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
            fh.flush()
            os.fsync(fh.fileno())
        if backup and target.exists():
            # Copy, not move: the target exists at every moment of the save.
            shutil.copy2(target, target.with_name(target.name + ".bak"))
        os.replace(tmp_name, target)
        tmp_name = None
    except OSError as exc:
        raise InputError(f"could not save ({exc.strerror or exc}); the previous file is unchanged",
                         str(target)) from None
    except UnicodeEncodeError:
        raise InputError("could not save: the text holds characters UTF-8 cannot store (unpaired "
                         "surrogates); the previous file is unchanged", str(target)) from None
    finally:
        if tmp_name and os.path.exists(tmp_name):
            os.unlink(tmp_name)


def problems_text(exc: InputError) -> list[str]:
    """Every problem of ``exc`` as one line each."""
    return exc.lines() if isinstance(exc, ValidationError) else [str(exc)]


def demo_text() -> str:
    """The built-in demo design's file text (an invented scenario)."""
    from importlib import resources

    return resources.files("filters").joinpath("data/demo_design.json").read_text(encoding="utf-8")


def load_demo() -> Design:
    """The built-in demo design."""
    return loads(demo_text(), "demo design")
