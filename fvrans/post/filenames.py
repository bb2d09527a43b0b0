"""Names to file names: the one place where a name (a patch, a probe, a comparison item, a grid
label, anything read from an input file) becomes a path component inside an output folder.

:func:`safe_file_name` keeps a name that is already a plain, portable file name (ASCII letters,
digits, ``_``, ``-``, ``.``, ``@`` and ``=``, not starting with ``.`` or ``-``, at most :data:`MAX_KEPT`
characters), so existing outputs keep their names: ``wall/lower_wall.csv``. Any other name is
mapped to a readable stem (each run of other characters, and of dots, replaced by ``_``, cut to
:data:`READABLE_CHARS` characters) joined by ``+`` to the first :data:`HASH_CHARS` hex digits of
the SHA-256 of the name: ``../../x`` -> ``x+1b5e...``. Kept names contain no ``+``, so a mapped
name never equals a kept one, and two different mapped names differ in their hash: the mapping is
one-to-one (up to a 64-bit hash collision). It is a pure function of the name, so a reader finds
the file a writer wrote (``fvrans compare``, sweep outputs). An empty name is refused.

:func:`output_file` joins the mapped name to a folder and checks that the result stays inside it;
the writers of :mod:`fvrans.post.writers` check the same again (``within=``).
"""

from __future__ import annotations

import hashlib
import os
import re
from pathlib import Path

from fvrans.errors import CaseError

#: names kept as they are: plain ASCII, not hidden, not an option, not "." or ".."
_KEPT = re.compile(r"[A-Za-z0-9_][A-Za-z0-9_.@=-]*")
_OTHER = re.compile(r"[^A-Za-z0-9_.@=-]+")
_RUNS = re.compile(r"\.{2,}|_{2,}|[._-]*_[._-]*")
#: longest name kept as it is (a file-name component may hold 255 bytes; prefixes and suffixes
#: such as ``wall_`` and ``_cf.png`` are added to it)
MAX_KEPT = 100
#: characters of a mapped name's readable part
READABLE_CHARS = 60
#: hex digits of the SHA-256 of a mapped name (64 bits)
HASH_CHARS = 16


def safe_file_name(name: str, what: str = "a name") -> str:
    """The file-name stem of ``name`` (see the module docstring); CaseError for an empty name or
    one that is not a string. ``what`` says in messages what the name is for.

    >>> safe_file_name("lower_wall"), safe_file_name("x_4.5")
    ('lower_wall', 'x_4.5')
    >>> safe_file_name("../../escaped")
    'escaped+ea03bc47f879c94c'
    >>> safe_file_name("outer wall")
    'outer_wall+d3af3c9b6d230cd5'
    """
    if not isinstance(name, str):
        raise CaseError(f"{what} must be a string to become a file name, got {type(name).__name__} {name!r}")
    if not name.strip():
        raise CaseError(f"{what} is empty ({name!r}); an empty name cannot become a file name — give it a name")
    if len(name) <= MAX_KEPT and _KEPT.fullmatch(name):
        return name
    readable = _RUNS.sub("_", _OTHER.sub("_", name)).strip("._-")[:READABLE_CHARS] or "name"
    digest = hashlib.sha256(name.encode("utf-8", "surrogatepass")).hexdigest()[:HASH_CHARS]
    return f"{readable}+{digest}"


def check_inside(target: str | os.PathLike, folder: str | os.PathLike) -> Path:
    """``target`` as a Path when it lies inside ``folder`` (after resolving ``..`` and symbolic
    links of its parent folder); CaseError otherwise."""
    t = Path(target)
    root = Path(folder).resolve()
    parent = t.parent.resolve()
    if t.name in ("", ".", "..") or (parent != root and root not in parent.parents):
        raise CaseError(f"refusing to write {t}: it lies outside the output folder {root}")
    return t


def output_file(folder: str | os.PathLike, name: str, suffix: str = "", prefix: str = "",
                subfolder: str | None = None, what: str = "a name") -> Path:
    """``folder[/subfolder]/<prefix><safe_file_name(name)><suffix>``, checked to lie inside
    ``folder``. ``prefix``, ``suffix`` and ``subfolder`` are fvrans's own constants.

    >>> output_file("out", "lower_wall", ".csv", subfolder="wall").as_posix()
    'out/wall/lower_wall.csv'
    """
    base = Path(folder)
    where = base / subfolder if subfolder else base
    target = where / f"{prefix}{safe_file_name(name, what)}{suffix}"
    check_inside(target, base)
    return target


__all__ = ["HASH_CHARS", "MAX_KEPT", "check_inside", "output_file", "safe_file_name"]
