"""Input files that cannot hang or exhaust a run: regular files only, bounded sizes and paths.

Every file fvrans reads by a name from the command line or from another file (case, mesh,
inlet profile, checkpoint, comparison spec, reference data, sweep spec) is checked here first: a
named pipe would block a reader forever and a device such as ``/dev/zero`` would be read until
memory runs out, so only regular files are accepted; a path holding a NUL character, longer than
the system allows or looping through symbolic links is refused with a message instead of an
exception from deep inside the standard library; text files have a size cap.
"""

from __future__ import annotations

import os
import stat
from collections.abc import Callable
from pathlib import Path
from typing import Any

from fvrans.errors import CaseError, FvransError

#: longest path (bytes) and path component accepted (Linux: PATH_MAX 4096, NAME_MAX 255)
MAX_PATH_BYTES = 4096
MAX_NAME_BYTES = 255
#: deepest nesting of tables and lists in a case, spec or JSON file
MAX_NESTING = 32

Fail = Callable[[str], FvransError]


def _default_fail(error: type[FvransError], path: Any, what: str) -> Fail:
    shown = str(path).replace("\x00", "\\0")[:300]
    return lambda msg: error(f"{shown}: {msg}")


def check_path_text(path: Any, fail: Fail, what: str = "file") -> Path:
    """A Path from ``path`` when it is a usable path text (a string without NUL, within the
    system's lengths); ``fail(message)`` makes the error otherwise."""
    if isinstance(path, os.PathLike):
        path = os.fspath(path)
    if isinstance(path, bytes):
        path = os.fsdecode(path)
    if not isinstance(path, str) or not path.strip():
        raise fail(f"the {what} path must be a non-empty string, got {type(path).__name__} {str(path)[:60]!r}")
    if "\x00" in path:
        raise fail(f"the {what} path contains a NUL character; give a plain path")
    raw = os.fsencode(path)
    if len(raw) > MAX_PATH_BYTES:
        raise fail(f"the {what} path is {len(raw)} bytes long, more than the {MAX_PATH_BYTES} a path may have")
    long = [part for part in Path(path).parts if len(os.fsencode(part)) > MAX_NAME_BYTES]
    if long:
        raise fail(f"the {what} path has a name of {len(os.fsencode(long[0]))} bytes ({long[0][:40]}...), more "
                   f"than the {MAX_NAME_BYTES} a file or folder name may have")
    return Path(path)


def input_file(path: Any, what: str = "file", error: type[FvransError] = CaseError,
               max_bytes: int | None = None, fail: Fail | None = None) -> Path:
    """``path`` as a Path when it names a regular file that can be opened (at most ``max_bytes``
    long); otherwise ``error`` (or ``fail(message)``) saying why: missing, a directory, a named
    pipe, device or socket, a symbolic-link loop, too long a path, too large."""
    fail = fail or _default_fail(error, path, what)
    p = check_path_text(path, fail, what)
    try:
        st = os.stat(p)
    except FileNotFoundError:
        raise fail(f"the {what} was not found (looked for {p.absolute()}); check the path") from None
    except OSError as exc:
        import errno

        why = {errno.ELOOP: "its symbolic links loop", errno.ENAMETOOLONG: "the path is too long",
               errno.EACCES: "permission denied", errno.ENOTDIR: "a part of the path is not a folder"}
        raise fail(f"the {what} cannot be opened: {why.get(exc.errno, exc.strerror or str(exc))}") from None
    if stat.S_ISDIR(st.st_mode):
        raise fail(f"{p} is a directory; give the {what} itself")
    if not stat.S_ISREG(st.st_mode):
        kind = ("a named pipe" if stat.S_ISFIFO(st.st_mode) else "a device" if stat.S_ISCHR(st.st_mode)
                or stat.S_ISBLK(st.st_mode) else "a socket" if stat.S_ISSOCK(st.st_mode) else "not a regular file")
        raise fail(f"{p} is {kind}; the {what} must be a regular file (a pipe or device would block or never end)")
    if max_bytes is not None and st.st_size > max_bytes:
        raise fail(f"the {what} is {st.st_size / 2**20:.1f} MiB, more than the {max_bytes / 2**20:g} MiB "
                   f"a {what} may have")
    return p


def read_text(path: Any, what: str = "file", error: type[FvransError] = CaseError,
              max_bytes: int = 64 * 2**20, encoding: str = "utf-8-sig", fail: Fail | None = None) -> str:
    """The text of a regular file of at most ``max_bytes`` (see :func:`input_file`); undecodable
    text and read errors become ``error`` naming the file."""
    fail = fail or _default_fail(error, path, what)
    p = input_file(path, what, error, max_bytes, fail)
    try:
        with open(p, "rb") as f:
            data = f.read(max_bytes + 1)
    except OSError as exc:
        raise fail(f"the {what} cannot be read ({exc.strerror or exc})") from None
    if len(data) > max_bytes:  # grew while being read
        raise fail(f"the {what} is larger than the {max_bytes / 2**20:g} MiB a {what} may have")
    try:
        return data.decode(encoding)
    except UnicodeDecodeError as exc:
        raise fail(f"the {what} is not UTF-8 text (byte {exc.start}); save it as UTF-8") from None


def nesting_depth(obj: Any, limit: int = MAX_NESTING + 1) -> int:
    """Depth of nested tables (dicts) and lists in ``obj`` (a scalar is 0), counted up to ``limit``."""
    depth = 0
    level = [obj]
    while level and depth < limit:
        nxt: list[Any] = []
        for o in level:
            if isinstance(o, dict):
                nxt.extend(o.values())
            elif isinstance(o, (list, tuple)):
                nxt.extend(o)
        if not nxt and not any(isinstance(o, (dict, list, tuple)) for o in level):
            break
        depth += 1
        level = nxt
    return depth


__all__ = ["MAX_NESTING", "check_path_text", "input_file", "nesting_depth", "read_text"]
