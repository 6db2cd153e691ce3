"""The derivation cache: derived transfer functions kept as data in the user's cache folder.

Deriving H(s) of a netlist needs sympy (about a second to import and derive); the result
is a short list of coefficient terms. One JSON file per netlist keeps it, so later runs
import neither sympy nor the derivation: ``<cache folder>/derivations/<key>.json``, where
``<key>`` is the SHA-256 of the netlist's description (its elements and op-amps in their
own order, :meth:`filters.netlist.Netlist.description`).

A coefficient is stored as plain JSON numbers and role names, never as code:
``[[number, [[role, power], ...]], ...]`` (terms summed in order, factors multiplied in
order after the number). Nothing is pickled, evaluated or imported from the file.

On load an entry is checked: format name and :data:`VERSION`, the description and key of
the netlist asked for, the roles, the shape of every term (finite numbers, known roles,
whole powers 1 to 16), and a SHA-256 checksum over the content. A file that fails any
check, cannot be read or is not JSON is ignored (the caller derives again and rewrites
it); a folder that cannot be written is no error, the derivation just is not kept.
:func:`filters.netlist.derive` also holds a loaded entry against a numerical nodal
solution before using it.

The folder: ``$TOLSPREAD_CACHE_DIR`` when set (the tests point it at a temporary folder),
else ``$XDG_CACHE_HOME/tolspread`` (``~/.cache/tolspread``) on Linux and other Unix
systems, ``~/Library/Caches/tolspread`` on macOS and ``%LOCALAPPDATA%\\tolspread\\Cache``
on Windows. Deleting it is always safe.
"""
from __future__ import annotations

import hashlib
import json
import math
import os
import sys
from pathlib import Path
from typing import Any

from .errors import InputError
from .safeio import parse_json, read_text, write_text_atomic

__all__ = [
    "FORMAT",
    "VERSION",
    "MAX_BYTES",
    "MAX_POWER",
    "Coefficients",
    "cache_dir",
    "key_of",
    "entry_path",
    "load",
    "store",
]

FORMAT = "tolspread-derivation"
# Bump when the derivation or the stored layout changes: older entries are then rewritten.
VERSION = 1
MAX_BYTES = 1_000_000
MAX_POWER = 16

Coefficients = tuple[tuple[tuple[float, tuple[tuple[str, int], ...]], ...], ...]


def cache_dir() -> Path | None:
    """The folder of this program's caches (see the module notes); ``None`` when no home
    folder is known.

    Returns
    -------
    Path or None
        The folder (it may not exist yet).
    """
    env = os.environ.get("TOLSPREAD_CACHE_DIR")
    if env:
        return Path(env)
    try:
        if sys.platform == "win32":
            local = os.environ.get("LOCALAPPDATA")
            base = Path(local) if local else Path.home() / "AppData" / "Local"
            return base / "tolspread" / "Cache"
        if sys.platform == "darwin":
            return Path.home() / "Library" / "Caches" / "tolspread"
        xdg = os.environ.get("XDG_CACHE_HOME", "")
        base = Path(xdg) if os.path.isabs(xdg) else Path.home() / ".cache"  # XDG: relative -> ignored
        return base / "tolspread"
    except RuntimeError:  # Path.home() without a home folder
        return None


def _canonical(data: Any) -> str:
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=True, allow_nan=False)


def key_of(description: dict[str, Any]) -> str:
    """SHA-256 (hex) of a netlist's description: the entry's file name.

    Parameters
    ----------
    description : dict
        The netlist's description (:meth:`filters.netlist.Netlist.description`).

    Returns
    -------
    str
        64 hex digits.
    """
    return hashlib.sha256(_canonical(description).encode("ascii")).hexdigest()


def entry_path(description: dict[str, Any]) -> Path | None:
    """The cache file of a netlist's derivation.

    Parameters
    ----------
    description : dict
        The netlist's description.

    Returns
    -------
    Path or None
        ``<cache folder>/derivations/<key>.json``, or None without a cache folder.
    """
    folder = cache_dir()
    return None if folder is None else folder / "derivations" / f"{key_of(description)}.json"


def _checksum(body: dict[str, Any]) -> str:
    return hashlib.sha256(_canonical(body).encode("ascii")).hexdigest()


def _as_data(coeffs: Coefficients) -> list:
    return [[[float(n), [[r, int(p)] for r, p in factors]] for n, factors in c] for c in coeffs]


def _from_data(data: Any, roles: tuple[str, ...]) -> Coefficients | None:
    """Stored coefficients back as tuples, or ``None`` when anything is out of shape."""
    if not isinstance(data, list) or not data or not data[-1]:
        return None  # at least one coefficient, the highest power's not zero
    known = set(roles)
    out = []
    for c in data:
        if not isinstance(c, list):
            return None
        terms = []
        for t in c:
            if not (isinstance(t, list) and len(t) == 2 and type(t[0]) is float and math.isfinite(t[0])
                    and t[0] != 0 and isinstance(t[1], list)):
                return None
            factors = []
            for f in t[1]:
                if not (isinstance(f, list) and len(f) == 2 and f[0] in known and type(f[1]) is int
                        and 1 <= f[1] <= MAX_POWER):
                    return None
                factors.append((f[0], f[1]))
            terms.append((t[0], tuple(factors)))
        out.append(tuple(terms))
    return tuple(out)


def load(description: dict[str, Any], roles: tuple[str, ...]) -> tuple[Coefficients, Coefficients] | None:
    """The stored (numerator, denominator) coefficients of the netlist ``description``
    with value roles ``roles``, or ``None`` when there is no valid entry.

    Parameters
    ----------
    description : dict
        The netlist's description (:meth:`filters.netlist.Netlist.description`).
    roles : tuple of str
        The value roles, in order.

    Returns
    -------
    tuple[Coefficients, Coefficients] or None
        Numerator and denominator terms (ascending powers of s), or None.
    """
    path = entry_path(description)
    if path is None:
        return None
    try:
        data = parse_json(read_text(path, MAX_BYTES, what="cache file"), str(path),
                          limit=MAX_BYTES, max_depth=12, what="cache file")
    except InputError:
        return None
    if not isinstance(data, dict) or data.get("format") != FORMAT or data.get("version") != VERSION:
        return None
    body = data.get("content")
    try:
        if not isinstance(body, dict) or data.get("checksum") != _checksum(body):
            return None
    except ValueError:  # NaN or Infinity somewhere: not what store() writes
        return None
    if body.get("netlist") != description or body.get("key") != key_of(description) \
            or body.get("roles") != list(roles):
        return None
    num = _from_data(body.get("numerator"), roles)
    den = _from_data(body.get("denominator"), roles)
    if num is None or den is None:
        return None
    return num, den


def store(description: dict[str, Any], roles: tuple[str, ...], num: Coefficients,
          den: Coefficients) -> bool:
    """Keep a derivation; ``False`` (and nothing raised) when the folder is not writable.

    Parameters
    ----------
    description : dict
        The netlist's description (:meth:`filters.netlist.Netlist.description`).
    roles : tuple of str
        The value roles, in order.
    num : Coefficients
        Numerator terms, ascending powers of s.
    den : Coefficients
        Denominator terms, ascending powers of s.

    Returns
    -------
    bool
        True when the entry was written.
    """
    path = entry_path(description)
    if path is None:
        return False
    body = {"netlist": description, "key": key_of(description), "roles": list(roles),
            "numerator": _as_data(num), "denominator": _as_data(den)}
    entry = {"format": FORMAT, "version": VERSION, "checksum": _checksum(body), "content": body}
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        write_text_atomic(path, json.dumps(entry) + "\n", backup=False)
    except (OSError, InputError):
        return False
    return True
