"""Safe file input and output: every file the program reads or writes goes through here.

Reading (:func:`read_bytes`, :func:`read_text`, :func:`parse_json`):

* only regular files are read: a folder, a device (``/dev/zero``, ``/dev/urandom``), a
  pipe (FIFO) or a socket is refused before a byte is read (a FIFO is opened without
  blocking, so it cannot hang the program);
* at most ``limit`` bytes are read, whatever size the file claims to have;
* JSON is parsed with the same guards for every kind of file: size, nesting depth,
  numbers of more digits than Python converts, unpaired surrogates.

Writing (:func:`write_text_atomic`, :func:`write_bytes_atomic`):

* the target must be a regular file or not exist yet (a device, pipe, folder or an empty
  name is refused: :func:`check_output_path`); a symbolic link is written through (the
  file it points to is replaced, the link stays);
* the new content goes to a temporary file beside the target (``.NAME.PID.XXXX.tmp``),
  is flushed to disk and renamed over the target in one step, so the target is complete
  at every moment;
* the previous file is kept as ``NAME.bak`` by an atomic step too: a hard link renamed
  into place (or, where the file system has no hard links, a complete copy renamed into
  place), never by rewriting the backup in place;
* a new file gets the mode the user's umask gives (0644 or 0664 typically), an existing
  file keeps its mode;
* temporary files left by a save that was killed (their process no longer runs) are
  removed by the next save beside them, or by :func:`remove_orphan_temporaries`.

Every problem is an :class:`~tolspread.errors.InputError` naming the path; nothing here
raises ``OSError``.
"""
from __future__ import annotations

import errno
import json
import os
import re
import secrets
import shutil
import stat
import time
from pathlib import Path
from typing import Any

from .errors import InputError

__all__ = [
    "NOT_REGULAR",
    "ORPHAN_AGE_S",
    "read_bytes",
    "read_text",
    "parse_json",
    "check_output_path",
    "remove_orphan_temporaries",
    "write_bytes_atomic",
    "write_text_atomic",
]

NOT_REGULAR = "is not a regular file (a device, pipe or socket)"
_TMP_RE = re.compile(r"^\.(?P<name>.+)\.(?P<pid>\d+)\.[0-9a-f]{12}\.tmp$")
ORPHAN_AGE_S = 24 * 3600.0  # where a process cannot be asked whether it runs (not POSIX)


# --- reading -------------------------------------------------------------------------------

def _mb(limit: int) -> str:
    return f"{limit / 1e6:g} MB"


def read_bytes(path: str | Path, limit: int, *, what: str = "file") -> bytes:
    """The bytes of the regular file ``path``, at most ``limit`` of them.

    Raises :class:`InputError` (path = ``path``) when the file is missing, a folder, not a
    regular file, unreadable or larger than ``limit`` bytes (``what`` names the kind of
    file in that message, e.g. "design file").

    Parameters
    ----------
    path : str or Path
        The file.
    limit : int
        Most bytes allowed.
    what : str
        The kind of file, for messages.

    Returns
    -------
    bytes
        The file's contents.
    """
    p = os.fspath(path)
    if p == "":
        raise InputError("no file name given", "")
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(p, flags)
    except FileNotFoundError:
        raise InputError("no such file", p) from None
    except IsADirectoryError:
        raise InputError(f"is a folder, not a {what}", p) from None
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror or exc}", p) from None
    try:
        st = os.fstat(fd)
        if stat.S_ISDIR(st.st_mode):
            raise InputError(f"is a folder, not a {what}", p)
        if not stat.S_ISREG(st.st_mode):
            raise InputError(f"{NOT_REGULAR}; a {what} must be a regular file", p)
        if st.st_size > limit:
            raise InputError(f"file is larger than {_mb(limit)}; too large for a {what}", p)
        chunks, size = [], 0
        while size <= limit:
            chunk = os.read(fd, min(1 << 20, limit + 1 - size))
            if not chunk:
                break
            chunks.append(chunk)
            size += len(chunk)
        if size > limit:  # the file grew while it was read
            raise InputError(f"file is larger than {_mb(limit)}; too large for a {what}", p)
        return b"".join(chunks)
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror or exc}", p) from None
    finally:
        os.close(fd)


def read_text(path: str | Path, limit: int, *, what: str = "file") -> str:
    """:func:`read_bytes` decoded as UTF-8.

    Parameters
    ----------
    path : str or Path
        The file.
    limit : int
        Most bytes allowed.
    what : str
        The kind of file, for messages.

    Returns
    -------
    str
        The file's text.
    """
    raw = read_bytes(path, limit, what=what)
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError("not a text file (not UTF-8)", os.fspath(path)) from None


def _depth_exceeds(obj: Any, limit: int) -> bool:
    """Whether ``obj`` is nested deeper than ``limit`` levels (without recursion)."""
    stack = [(obj, 1)]
    while stack:
        item, d = stack.pop()
        if d > limit:
            return True
        if isinstance(item, dict):
            stack.extend((v, d + 1) for v in item.values())
        elif isinstance(item, list):
            stack.extend((v, d + 1) for v in item)
    return False


def _has_lone_surrogate(obj: Any) -> bool:
    """Whether any text (key or value) holds an unpaired surrogate, which JSON escapes
    (\\ud800) allow but UTF-8 cannot store, so such a file could never be saved again."""
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


def parse_json(text: str, source: str, *, limit: int, max_depth: int, what: str = "file") -> Any:
    """Parse JSON text with the guards every file of this program gets.

    Refuses (``InputError`` with path ``source``) text over ``limit`` bytes, invalid JSON,
    nesting deeper than ``max_depth``, integers of more digits than Python converts, and
    unpaired surrogates. ``NaN`` and ``Infinity`` parse (as JSON's Python reader allows);
    the validators refuse them where a finite number is needed.

    Parameters
    ----------
    text : str
        JSON text.
    source : str
        Where it came from, the error's path.
    limit : int
        Most bytes allowed.
    max_depth : int
        Deepest nesting allowed.
    what : str
        The kind of file, for messages.

    Returns
    -------
    Any
        The parsed data.
    """
    if len(text) > limit or len(text.encode("utf-8", errors="replace")) > limit:
        raise InputError(f"file is larger than {_mb(limit)}; too large for a {what}", source)
    try:
        data = json.loads(text)
    except RecursionError:
        raise InputError(f"file is nested too deeply to be a {what}", source) from None
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON (line {exc.lineno}, column {exc.colno}: {exc.msg})", source) from None
    except ValueError:  # an integer of more digits than Python converts (over 4300)
        raise InputError(f"holds a number with too many digits to be a {what} value", source) from None
    if _depth_exceeds(data, max_depth):
        raise InputError(f"file is nested too deeply to be a {what}", source)
    if _has_lone_surrogate(data):
        raise InputError("holds text that is not valid Unicode (an unpaired surrogate such as \\ud800)",
                         source)
    return data


# --- writing -------------------------------------------------------------------------------

def check_output_path(path: str | Path | None, option: str = "") -> Path:
    """The path an output may be written to, or :class:`InputError` saying why not.

    Refuses an empty name, a folder, a new file in a folder that does not exist, and
    anything that exists but is not a regular file (a device such as ``/dev/full``, a
    pipe, a socket), following symbolic links. The
    error's path is ``option`` (a command-line option such as ``--json``) when given.

    Parameters
    ----------
    path : str, Path or None
        The output path.
    option : str
        The command-line option or field named in an error.

    Returns
    -------
    Path
        The path.
    """
    text = "" if path is None else os.fspath(path)
    if text.strip() == "":
        raise InputError("no file name given; write the path of the file to create", option)

    def refuse(reason: str) -> InputError:
        return InputError(f"{text!r} {reason}" if option else reason, option or text)

    try:
        st = os.stat(text)
    except FileNotFoundError:
        parent = os.path.dirname(os.path.realpath(text))
        if not os.path.isdir(parent):
            raise refuse(f"cannot be written: the folder {parent} does not exist") from None
        return Path(text)
    except NotADirectoryError:
        raise refuse("cannot be written: a part of its folder path is a file") from None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise refuse("is a loop of symbolic links") from None
        raise refuse(f"cannot be written: {exc.strerror or exc}") from None
    if stat.S_ISDIR(st.st_mode):
        raise refuse("is a folder; give the path of a file")
    if not stat.S_ISREG(st.st_mode):
        raise refuse(f"{NOT_REGULAR}; outputs are written only to regular files")
    return Path(text)


def _pid_running(pid: int) -> bool:
    if os.name != "posix":
        return True  # cannot ask safely; the age rule decides
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # exists, but belongs to someone else
        return True
    return True


def remove_orphan_temporaries(target: str | Path) -> int:
    """Remove temporary files that a killed save of ``target`` (or of its backup) left
    beside it: those of processes that no longer run (elsewhere than POSIX: older than a
    day). Returns how many were removed; problems are ignored (this only tidies).

    Parameters
    ----------
    target : str or Path
        The file whose leftover temporaries are removed.

    Returns
    -------
    int
        Number of files removed.
    """
    t = Path(target)
    folder = t.parent if str(t.parent) else Path(".")
    names = {t.name, t.name + ".bak"}
    removed = 0
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return 0
    now = time.time()
    for e in entries:
        m = _TMP_RE.match(e.name)
        if not m or m["name"] not in names:
            continue
        try:
            if not e.is_file(follow_symlinks=False):
                continue
            old = now - e.stat(follow_symlinks=False).st_mtime > ORPHAN_AGE_S
            if old or not _pid_running(int(m["pid"])):
                os.unlink(e.path)
                removed += 1
        except OSError:
            continue
    return removed


def _new_temp(folder: Path, name: str) -> tuple[int, str]:
    """Create ``.NAME.PID.XXXXXXXXXXXX.tmp`` in ``folder`` (mode from the umask)."""
    flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0) | getattr(os, "O_NOFOLLOW", 0)
    for _ in range(100):
        tmp = os.path.join(folder, f".{name}.{os.getpid()}.{secrets.token_hex(6)}.tmp")
        try:
            return os.open(tmp, flags, 0o666), tmp
        except FileExistsError:
            continue
    raise FileExistsError(errno.EEXIST, "no free temporary file name", str(folder))


def _fsync_folder(folder: Path) -> None:
    if os.name != "posix":
        return
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _keep_mode(fd: int, st: os.stat_result | None) -> None:
    """Give the new file the existing file's mode (and owner, where allowed)."""
    if st is None or os.name != "posix":
        return
    os.fchmod(fd, stat.S_IMODE(st.st_mode))
    if (st.st_uid, st.st_gid) != os.fstat(fd)[4:6]:
        try:
            os.fchown(fd, st.st_uid, st.st_gid)
        except OSError:
            pass


def _make_backup(real: Path, folder: Path) -> None:
    """Put a complete copy of ``real`` at ``real.bak`` in one atomic step: a hard link
    renamed over the backup, or (no hard links here) a flushed copy renamed over it."""
    bak = real.with_name(real.name + ".bak")
    tmp = os.path.join(folder, f".{bak.name}.{os.getpid()}.{secrets.token_hex(6)}.tmp")
    try:
        try:
            os.link(real, tmp, follow_symlinks=False)
        except OSError:
            fd, tmp = _new_temp(folder, bak.name)
            with os.fdopen(fd, "wb") as out, open(real, "rb") as src:
                shutil.copyfileobj(src, out)
                out.flush()
                os.fsync(out.fileno())
                _keep_mode(out.fileno(), os.stat(real))
        os.replace(tmp, bak)
    finally:
        # Also after a successful replace: when the backup already was a hard link of the
        # same file (a save killed between its two renames), rename() does nothing and
        # leaves the temporary name in place (POSIX rename(2)).
        if os.path.lexists(tmp):
            os.unlink(tmp)


def write_bytes_atomic(target: str | Path, data: bytes, *, backup: bool = True, option: str = "") -> None:
    """Write ``data`` to ``target`` atomically (see the module notes); keep the previous
    file as ``target.bak`` when ``backup``. On failure the old file is intact and
    :class:`InputError` says why (path: ``option`` when given, else the target).

    Parameters
    ----------
    target : str or Path
        The file to write.
    data : bytes
        Its new contents.
    backup : bool
        Keep the previous file as ``target.bak``.
    option : str
        The command-line option or field named in an error.
    """
    t = check_output_path(target, option)
    real = Path(os.path.realpath(t)) if os.path.islink(t) else t
    folder = real.parent if str(real.parent) else Path(".")
    remove_orphan_temporaries(real)
    tmp = ""
    try:
        try:
            st: os.stat_result | None = os.stat(real)
        except FileNotFoundError:
            st = None
        fd, tmp = _new_temp(folder, real.name)
        with os.fdopen(fd, "wb") as fh:
            _keep_mode(fh.fileno(), st)
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        if backup and st is not None:
            _make_backup(real, folder)
        os.replace(tmp, real)
        tmp = ""
        _fsync_folder(folder)
    except OSError as exc:
        raise InputError(f"could not save ({exc.strerror or exc}); the previous file is unchanged",
                         str(t)) from None
    finally:
        if tmp and os.path.lexists(tmp):
            try:
                os.unlink(tmp)
            except OSError:
                pass


def write_text_atomic(target: str | Path, text: str, *, backup: bool = True, option: str = "") -> None:
    """:func:`write_bytes_atomic` of ``text`` encoded as UTF-8.

    Parameters
    ----------
    target : str or Path
        The file to write.
    text : str
        Its new text.
    backup : bool
        Keep the previous file as ``target.bak``.
    option : str
        The command-line option or field named in an error.
    """
    try:
        data = text.encode("utf-8")
    except UnicodeEncodeError:
        raise InputError("could not save: the text holds characters UTF-8 cannot store (unpaired "
                         "surrogates); the previous file is unchanged", os.fspath(target) or option) from None
    write_bytes_atomic(target, data, backup=backup, option=option)
