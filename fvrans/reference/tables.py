"""Tables of numbers from text files: CSV, and plain-text column files with zones.

Every table keeps the line number of each row, so a later check (a non-monotonic abscissa, a
missing value) can name the file and line. Malformed input raises :class:`CaseError` naming the
file, the line and the column.
"""

from __future__ import annotations

import csv
import os
import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from fvrans.errors import CaseError
from fvrans.files import read_text

#: largest reference data file read
MAX_REFERENCE_BYTES = 256 * 2**20

COMMENT_MARKS = ("#", "%", "!", "//")


@dataclass(frozen=True)
class Table:
    """One zone of numbers: named columns, the source line of each row and of the names."""

    path: str
    names: tuple[str, ...]
    data: np.ndarray  # (n_rows, n_columns) float64
    lines: np.ndarray  # (n_rows,) 1-based source line of each row
    names_line: int = 0  # 1-based line naming the columns (0: no such line, names are "1", "2", ...)
    title: str = ""  # zone title ("" for a file without zones)

    def index(self, column: str | int) -> int:
        """Position of a column given by name or by 1-based number; CaseError naming the file."""
        if isinstance(column, (int, np.integer)) and not isinstance(column, bool):
            if 1 <= int(column) <= len(self.names):
                return int(column) - 1
            raise CaseError(
                f"{self.path}: there is no column number {column}; the file has {len(self.names)} columns "
                f"({', '.join(self.names)})"
            )
        if column in self.names:
            return self.names.index(column)
        where = f" (named on line {self.names_line})" if self.names_line else ""
        raise CaseError(
            f"{self.path}: no column {column!r}; the file has the columns {', '.join(self.names)}{where}. "
            "Give one of these names (or a 1-based column number)"
        )

    def column(self, column: str | int) -> np.ndarray:
        """The values of one column (by name or 1-based number)."""
        return self.data[:, self.index(column)]


@dataclass(frozen=True)
class ZonedTable:
    """All zones of a column file; most files have one."""

    path: str
    zones: tuple[Table, ...] = field(default_factory=tuple)

    def zone(self, which: int | str | None = None) -> Table:
        """Select a zone by 1-based number or title; ``None`` is allowed only for a single zone."""
        if not self.zones:
            raise CaseError(f"{self.path}: the file contains no rows of numbers")
        titles = ", ".join(f"{i + 1}: {z.title or '(untitled)'}" for i, z in enumerate(self.zones))
        if which is None:
            if len(self.zones) == 1:
                return self.zones[0]
            raise CaseError(
                f"{self.path}: the file has {len(self.zones)} zones ({titles}); "
                "choose one with zone = <number or title>"
            )
        if isinstance(which, (int, np.integer)) and not isinstance(which, bool):
            if 1 <= int(which) <= len(self.zones):
                return self.zones[int(which) - 1]
        else:
            for z in self.zones:
                if z.title == which:
                    return z
        raise CaseError(f"{self.path}: there is no zone {which!r}; the zones are {titles}")


def _number(token: str) -> float:
    """A float, also accepting Fortran exponents (1.0D-03)."""
    try:
        return float(token)
    except ValueError:
        return float(token.replace("D", "E").replace("d", "e"))


def _is_number(token: str) -> bool:
    try:
        _number(token)
    except ValueError:
        return False
    return True


def _read_text(path: str | os.PathLike) -> tuple[str, list[str]]:
    p = Path(path)
    if not p.exists() and not p.is_symlink():
        raise CaseError(f"reference file {p} does not exist (paths in a spec are relative to the spec file)")
    text = read_text(p, "reference file", max_bytes=MAX_REFERENCE_BYTES)
    return str(p), text.splitlines()


def _row(path: str, lineno: int, tokens: list[str], names: tuple[str, ...]) -> list[float]:
    if len(tokens) != len(names):
        raise CaseError(
            f"{path}:{lineno}: the row has {len(tokens)} values but {len(names)} columns are named "
            f"({', '.join(names)}); every row needs one value per column"
        )
    out = []
    for k, (tok, name) in enumerate(zip(tokens, names)):
        try:
            out.append(_number(tok))
        except ValueError:
            raise CaseError(
                f"{path}:{lineno}: column {k + 1} ({name!r}) holds {tok!r}, which is not a number"
            ) from None
    return out


def _table(path: str, names: tuple[str, ...], rows: list[list[float]], lines: list[int], names_line: int,
           title: str = "") -> Table:
    data = np.array(rows, dtype=np.float64).reshape(len(rows), len(names))
    return Table(path, names, data, np.array(lines, dtype=np.int64), names_line, title)


def _check_names(path: str, lineno: int, names: list[str]) -> tuple[str, ...]:
    seen: set[str] = set()
    for k, n in enumerate(names):
        if not n:
            raise CaseError(f"{path}:{lineno}: column {k + 1} has no name")
        if n in seen:
            raise CaseError(f"{path}:{lineno}: the column name {n!r} appears twice (column {k + 1})")
        seen.add(n)
    return tuple(names)


def read_csv(path: str | os.PathLike, delimiter: str = ",") -> Table:
    """Read a delimited file: optional comment lines (``#``), one line of column names, then rows.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "r.csv"
    >>> _ = p.write_text("# measured\\nx,cp\\n0.0,1.0\\n0.5,-0.25\\n")
    >>> read_csv(p).column("cp")
    array([ 1.  , -0.25])
    """
    spath, lines = _read_text(path)
    names: tuple[str, ...] | None = None
    names_line = 0
    rows: list[list[float]] = []
    row_lines: list[int] = []
    for lineno, line in enumerate(lines, start=1):
        stripped = line.strip()
        if not stripped or stripped.startswith(COMMENT_MARKS):
            continue
        tokens = [t.strip() for t in next(csv.reader([stripped], delimiter=delimiter))]
        if names is None:
            names = _check_names(spath, lineno, tokens)
            names_line = lineno
            continue
        rows.append(_row(spath, lineno, tokens, names))
        row_lines.append(lineno)
    if names is None or not rows:
        raise CaseError(f"{spath}: no {'column names' if names is None else 'rows of numbers'} found; "
                        "a CSV file needs one line of column names followed by rows of numbers")
    return _table(spath, names, rows, row_lines, names_line)


_VARIABLES = re.compile(r"^\s*variables\s*=\s*(.*)$", re.IGNORECASE)
_ZONE = re.compile(r"^\s*zone\b(.*)$", re.IGNORECASE)
_TITLE = re.compile(r"^\s*title\s*=", re.IGNORECASE)
_ZONE_TITLE = re.compile(r"""\bt\s*=\s*(?:"([^"]*)"|'([^']*)'|(\S+))""", re.IGNORECASE)


def _split_names(text: str) -> list[str]:
    """Names separated by commas and/or blanks, each optionally quoted (quoted names may hold blanks)."""
    quoted = re.findall(r'"([^"]*)"|\'([^\']*)\'|([^\s,"\']+)', text)
    return [a or b or c for a, b, c in quoted]


def _tokens(line: str) -> list[str]:
    return [t for t in re.split(r"[\s,;]+", line.strip()) if t]


def read_columns(path: str | os.PathLike) -> ZonedTable:
    """Read a plain-text column file in the layout common to published data sets.

    - comment lines start with ``#``, ``%``, ``!`` or ``//``; a ``title = ...`` line is ignored;
    - the variables are named by a line ``variables = "x", "u"`` or by the first non-comment line
      whose first token is not a number (names separated by blanks or commas);
    - values are separated by blanks, commas or semicolons; Fortran exponents (``1.0D-3``) are read;
    - zones are separated by blank lines, by ``zone ...`` lines (title from ``t = "..."``) or by a
      non-numeric line after data (taken as the zone title, or as a repeated variables line).

    Without any naming line the columns are called ``"1"``, ``"2"``, ...
    """
    spath, lines = _read_text(path)
    names: tuple[str, ...] | None = None
    names_line = 0
    zones: list[Table] = []
    rows: list[list[float]] = []
    row_lines: list[int] = []
    title = ""
    pending_title = ""
    first_title: tuple[int, str] | None = None

    def close_zone() -> None:
        nonlocal rows, row_lines, title
        if rows:
            assert names is not None
            zones.append(_table(spath, names, rows, row_lines, names_line, title))
        rows, row_lines, title = [], [], pending_title

    for lineno, line in enumerate(lines, start=1):
        stripped = line.strip()
        if stripped.startswith(COMMENT_MARKS) or _TITLE.match(stripped):
            continue
        if not stripped:
            pending_title = ""
            close_zone()
            continue
        m = _VARIABLES.match(stripped)
        if m:
            new = _check_names(spath, lineno, _split_names(m.group(1)))
            if names is not None and new != names and (rows or zones):
                raise CaseError(f"{spath}:{lineno}: the variables change from {', '.join(names)} to "
                                f"{', '.join(new)}; one file must keep the same columns")
            pending_title = ""
            close_zone()
            names, names_line = new, lineno
            continue
        m = _ZONE.match(stripped)
        if m:
            t = _ZONE_TITLE.search(m.group(1))
            pending_title = next((g for g in t.groups() if g is not None), "") if t else ""
            close_zone()
            continue
        tokens = _tokens(stripped)
        if not _is_number(tokens[0]):
            words = _split_names(stripped)
            if names is None:
                names, names_line = _check_names(spath, lineno, words), lineno
            elif tuple(words) == names:
                pending_title = ""
                close_zone()
            else:
                pending_title = stripped
                if first_title is None:
                    first_title = (lineno, stripped)
                close_zone()
            continue
        if names is None:  # numbers without a naming line: columns "1", "2", ...
            names = tuple(str(k + 1) for k in range(len(tokens)))
        rows.append(_row(spath, lineno, tokens, names))
        row_lines.append(lineno)
    pending_title = ""
    close_zone()
    if not zones:
        hint = ""
        if first_title is not None:
            hint = f"; line {first_title[0]} ({first_title[1][:40]!r}) and others were read as zone titles"
        raise CaseError(f"{spath}: no rows of numbers found (a row starts with a number){hint}")
    return ZonedTable(spath, tuple(zones))


def read_table(path: str | os.PathLike, zone: int | str | None = None) -> Table:
    """A CSV file (``.csv``) or a plain-text column file (anything else), one zone of it."""
    if Path(path).suffix.lower() == ".csv":
        if zone not in (None, 1):
            raise CaseError(f"{path}: a CSV file has a single zone; remove zone = {zone!r}")
        return read_csv(path)
    return read_columns(path).zone(zone)
