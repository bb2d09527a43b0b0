"""Inlet profiles from CSV tables, and evaluation of prescribed boundary values at points.

A profile file is comma-separated text: a header line naming the columns, then one row of
numbers per station. Blank lines and lines starting with ``#`` are skipped. Values are
interpolated linearly along the coordinate column (``x`` or ``y``); points beyond the ends of
the table by at most :data:`RANGE_TOLERANCE` times its span take the end values, points
further out are an error.
"""

from __future__ import annotations

import csv
import functools
import io
import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from fvrans.case.formula import VectorFormula, values_at
from fvrans.case.schema import DEFAULT_PROFILE_COLUMNS, BoundarySpec
from fvrans.errors import CaseError
from fvrans.files import input_file, read_text

#: how far (as a fraction of the table's coordinate span) a point may lie beyond the table
RANGE_TOLERANCE = 1e-3
#: largest inlet profile file read (a profile of a million stations is about 50 MiB)
MAX_PROFILE_BYTES = 64 * 2**20
#: mesh axes a profile can run along; the coordinate column carries the axis name
AXES = ("x", "y")
#: the column of nu_t / nu in fvrans's outputs (probe files, fields.vtu); never an inlet input
OUTPUT_RATIO_COLUMN = "eddy_viscosity_ratio"
#: column names that could mean nu_tilde / nu or nu_t / nu; refused unless named in profile_columns
AMBIGUOUS_RATIO_COLUMNS = ("nut_ratio",)


@dataclass(frozen=True, eq=False)
class ProfileTable:
    """The numeric columns of a CSV profile file, by header name, in file order."""

    path: Path
    names: tuple[str, ...]
    columns: dict[str, np.ndarray]


class ProfileFileError(ValueError):
    """A profile file that cannot be read; the message names the file and line."""


def read_profile_table(path: str | Path) -> ProfileTable:
    """Read a CSV profile table (cached while the file is unchanged).

    >>> import tempfile, os
    >>> with tempfile.NamedTemporaryFile("w", suffix=".csv", delete=False) as f:
    ...     _ = f.write("# inlet\\ny, u, v\\n0, 0, 0\\n1, 2.5, 0\\n")
    >>> t = read_profile_table(f.name); os.unlink(f.name)
    >>> t.names, t.columns["u"].tolist()
    (('y', 'u', 'v'), [0.0, 2.5])
    """
    p = input_file(path, "inlet profile file", max_bytes=MAX_PROFILE_BYTES,
                   fail=lambda msg: ProfileFileError(f"{path}: {msg}"))
    st = p.stat()
    return _read_cached(str(p), st.st_mtime_ns, st.st_size)


@functools.lru_cache(maxsize=32)
def _read_cached(path: str, mtime_ns: int, size: int) -> ProfileTable:
    text = read_text(path, "inlet profile file", max_bytes=MAX_PROFILE_BYTES,
                     fail=lambda msg: ProfileFileError(f"{path}: {msg}"))
    names: tuple[str, ...] | None = None
    rows: list[list[float]] = []
    for lineno, line in enumerate(text.splitlines(), 1):
        if not line.strip() or line.lstrip().startswith("#"):
            continue
        cells = [c.strip() for c in next(csv.reader(io.StringIO(line)))]
        if names is None:
            names = tuple(cells)
            if any(not n for n in names):
                raise ProfileFileError(f"{path} line {lineno}: the header has an empty column name; "
                                       "name every column, e.g. y, u, v")
            try:
                [float(n) for n in names]
            except ValueError:
                pass
            else:
                raise ProfileFileError(f"{path} line {lineno}: the first line holds numbers; the file "
                                       "needs a header line naming the columns, e.g. y, u, v")
            dup = [j + 1 for j, n in enumerate(names) if names.count(n) > 1]
            if dup:
                raise ProfileFileError(f"{path} line {lineno}: the header names columns {dup} alike; give "
                                       "each column its own name")
            continue
        if len(cells) != len(names):
            raise ProfileFileError(f"{path} line {lineno}: {len(cells)} value(s) but the header names "
                                   f"{len(names)} columns")
        row = []
        # messages name the file, line and column number only: no file content goes into them
        for j, c in enumerate(cells, 1):
            try:
                x = float(c)
            except ValueError:
                raise ProfileFileError(f"{path} line {lineno}, column {j}: not a number") from None
            if not math.isfinite(x):
                raise ProfileFileError(f"{path} line {lineno}, column {j}: not a finite number")
            row.append(x)
        rows.append(row)
    if names is None:
        raise ProfileFileError(f"{path} is empty; it needs a header line and at least two rows")
    if len(rows) < 2:
        raise ProfileFileError(f"{path} has {len(rows)} data row(s); a profile needs at least two")
    data = np.array(rows, dtype=np.float64)
    cols = {}
    for j, n in enumerate(names):
        a = np.ascontiguousarray(data[:, j])
        a.flags.writeable = False
        cols[n] = a
    return ProfileTable(Path(path), names, cols)


def resolve_profile(
    path: Path, given: Mapping[str, str], fail: Callable[[tuple[str, ...], str], CaseError],
    constant_given: bool = False,
) -> dict[str, str]:
    """Check a profile file against its column mapping; return the resolved mapping.

    ``coordinate``, ``u`` and ``v`` must exist (under the given or default names);
    ``nu_tilde_ratio`` (nu_tilde / nu) is included when named explicitly (then it must exist) or
    when the file has the default column ``nu_tilde_ratio``. One meaning per name: a column
    ``eddy_viscosity_ratio`` holds nu_t / nu (what fvrans writes in its outputs) and a column
    ``nut_ratio`` could mean either; a file with such a column is refused unless the mapping
    names the nu_tilde / nu column, or (for ``eddy_viscosity_ratio`` alone) the inlet gives its
    ``nu_tilde_ratio`` as a constant (``constant_given``). ``k`` and ``omega`` (k-omega SST) are
    included like ``nu_tilde_ratio`` and come together. ``fail(key_suffix, message)`` makes the error.
    """
    for k, v in given.items():
        if not isinstance(v, str) or not v.strip():
            raise fail(("profile_columns", k), f"must be a column name (a quoted string), got {v!r}")
    try:
        table = read_profile_table(path)
    except ProfileFileError as exc:
        raise fail(("profile",), f"{exc}") from None
    cols = {k: given.get(k, DEFAULT_PROFILE_COLUMNS[k]) for k in ("coordinate", "u", "v")}
    if cols["coordinate"] not in AXES:
        raise fail(("profile_columns", "coordinate"),
                   f"must be 'x' or 'y', got {cols['coordinate']!r}: the profile is interpolated along "
                   "that mesh axis, and its CSV column carries the axis name")
    nut_name = given.get("nu_tilde_ratio")
    if nut_name == OUTPUT_RATIO_COLUMN:
        raise fail(("profile_columns", "nu_tilde_ratio"),
                   f"names the column {OUTPUT_RATIO_COLUMN!r}, which holds nu_t / nu (the eddy-viscosity ratio "
                   "fvrans writes in its outputs), while the inlet takes nu_tilde / nu; give a column of "
                   "nu_tilde / nu (from a probe file of fvrans: its column nu_tilde divided by nu)")
    if nut_name is not None:
        cols["nu_tilde_ratio"] = nut_name
    else:
        _refuse_ambiguous(path, table.names, constant_given, fail)
        if DEFAULT_PROFILE_COLUMNS["nu_tilde_ratio"] in table.names:
            cols["nu_tilde_ratio"] = DEFAULT_PROFILE_COLUMNS["nu_tilde_ratio"]
    for key in ("k", "omega"):
        if given.get(key) is not None:
            cols[key] = given[key]
        elif DEFAULT_PROFILE_COLUMNS[key] in table.names:
            cols[key] = DEFAULT_PROFILE_COLUMNS[key]
    if ("k" in cols) != ("omega" in cols):
        has, lacks = ("k", "omega") if "k" in cols else ("omega", "k")
        raise fail(("profile",), f"the profile file {path} gives {has} (column {cols[has]!r}) but not {lacks}; "
                   f"the k-omega SST inflow needs both columns, or neither")
    for k, name in cols.items():
        if name not in table.names:
            how = (f"profile_columns.{k} names it" if k in given else
                   f"the default column for {k}; name another with profile_columns = {{ {k} = \"...\" }}")
            raise fail(("profile",), f"the profile file {path} has no column {name!r} ({how}); "
                       f"its columns are: {', '.join(repr(n) for n in table.names)}")
    s = table.columns[cols["coordinate"]]
    ss = np.sort(s)
    if np.any(np.diff(ss) <= 0):
        dup = float(ss[1:][np.diff(ss) <= 0][0])
        raise fail(("profile",), f"the profile file {path} has the coordinate {cols['coordinate']} = "
                   f"{dup:.6g} twice; give each station once")
    if "nu_tilde_ratio" in cols and np.any(table.columns[cols["nu_tilde_ratio"]] < 0):
        raise fail(("profile",), f"the profile file {path} has negative values in column "
                   f"{cols['nu_tilde_ratio']!r}; nu_tilde / nu must be >= 0")
    if "k" in cols and np.any(table.columns[cols["k"]] < 0):
        raise fail(("profile",), f"the profile file {path} has negative values in column {cols['k']!r}; k must be >= 0")
    if "omega" in cols and np.any(table.columns[cols["omega"]] <= 0):
        raise fail(("profile",), f"the profile file {path} has values <= 0 in column {cols['omega']!r}; "
                   "omega must be > 0")
    return cols


def _refuse_ambiguous(path: Path, names: tuple[str, ...], constant_given: bool,
                      fail: Callable[[tuple[str, ...], str], CaseError]) -> None:
    """Refuse a profile whose turbulence column cannot be told apart (see :func:`resolve_profile`)."""
    fix_map = 'or name the nu_tilde / nu column with profile_columns = { nu_tilde_ratio = "<column>" }'
    for name in AMBIGUOUS_RATIO_COLUMNS:
        if name in names:
            raise fail(("profile",), f"the profile file {path} has a column {name!r}, which could mean nu_tilde / nu "
                       f"or nu_t / nu; rename it to 'nu_tilde_ratio' if it holds nu_tilde / nu (what the inlet "
                       f"takes) or to {OUTPUT_RATIO_COLUMN!r} if it holds nu_t / nu, {fix_map}")
    if OUTPUT_RATIO_COLUMN not in names:
        return
    if DEFAULT_PROFILE_COLUMNS["nu_tilde_ratio"] in names:
        raise fail(("profile",), f"the profile file {path} has both 'nu_tilde_ratio' (nu_tilde / nu) and "
                   f"{OUTPUT_RATIO_COLUMN!r} (nu_t / nu) columns; say which the inlet takes: remove one of them "
                   f"{fix_map}")
    if not constant_given:
        raise fail(("profile",), f"the profile file {path} has a column {OUTPUT_RATIO_COLUMN!r} (nu_t / nu, as "
                   "fvrans writes in probe files) but no 'nu_tilde_ratio' column, and the inlet takes nu_tilde / nu; "
                   "add a column nu_tilde_ratio (from a probe file of fvrans: its column nu_tilde divided by nu), "
                   f"{fix_map}, or give this inlet a constant nu_tilde_ratio = <value>")


def _interpolate(spec: BoundarySpec, x: np.ndarray, y: np.ndarray, what: str, label: str) -> np.ndarray:
    assert spec.profile is not None and spec.profile_columns is not None
    cols = spec.profile_columns
    try:
        table = read_profile_table(spec.profile)
    except (OSError, ProfileFileError) as exc:
        raise CaseError(f"{label}.profile: {exc}") from None
    axis = cols["coordinate"]
    s_tab = table.columns[axis]
    order = np.argsort(s_tab, kind="stable")
    s_tab = s_tab[order]
    vals = table.columns[cols[what]][order]
    s = x if axis == "x" else y
    lo, hi = float(s_tab[0]), float(s_tab[-1])
    tol = RANGE_TOLERANCE * (hi - lo)
    out = (s < lo - tol) | (s > hi + tol)
    if np.any(out):
        far = float(s[out][np.argmax(np.abs(s[out] - 0.5 * (lo + hi)))])
        raise CaseError(
            f"{label}.profile: the patch reaches {axis} = {far:.6g}, outside the range "
            f"[{lo:.6g}, {hi:.6g}] of the profile {spec.profile} (allowed overshoot {tol:.3g}); "
            f"extend the table to cover the whole patch"
        )
    return np.interp(s, s_tab, vals)


def evaluate_velocity(
    spec: BoundarySpec, x: np.ndarray, y: np.ndarray, label: str
) -> tuple[np.ndarray, np.ndarray]:
    """(u, v) arrays of the condition at points (x, y); see :meth:`BoundarySpec.velocity_at`."""
    x, y = np.broadcast_arrays(x, y)
    if spec.profile is not None:
        return _interpolate(spec, x, y, "u", label), _interpolate(spec, x, y, "v", label)
    v = spec.velocity
    if v is None:
        raise CaseError(f"{label}: the patch of kind {spec.kind!r} prescribes no velocity")
    if isinstance(v, VectorFormula):
        return v(x, y)
    if not callable(v):
        return np.full(x.shape, float(v[0])), np.full(x.shape, float(v[1]))
    try:
        res = v(x.copy(), y.copy())
    except Exception as exc:
        raise CaseError(f"{label}.velocity: the Python function raised {type(exc).__name__}: {exc}") from exc
    try:
        if len(res) != 2:
            raise ValueError
        u = np.broadcast_to(np.asarray(res[0], dtype=np.float64), x.shape).copy()
        w = np.broadcast_to(np.asarray(res[1], dtype=np.float64), x.shape).copy()
    except (TypeError, ValueError):
        raise CaseError(f"{label}.velocity: the Python function must return (u, v), two arrays shaped like "
                        f"x {x.shape} (or scalars); it returned {type(res).__name__}") from None
    if not (np.all(np.isfinite(u)) and np.all(np.isfinite(w))):
        i = int(np.nonzero(~(np.isfinite(u) & np.isfinite(w)))[0][0]) if u.ndim else 0
        raise CaseError(f"{label}.velocity: the Python function returned a non-finite velocity at "
                        f"({x.ravel()[i]:.6g}, {y.ravel()[i]:.6g})")
    return u, w


def evaluate_column(spec: BoundarySpec, x: np.ndarray, y: np.ndarray, column: str, label: str) -> np.ndarray:
    """A column of the condition's profile at points (x, y) (linear interpolation)."""
    x, y = np.broadcast_arrays(x, y)
    return _interpolate(spec, x, y, column, label)


def evaluate_nu_tilde_ratio(spec: BoundarySpec, x: np.ndarray, y: np.ndarray, label: str) -> np.ndarray:
    """nu_tilde / nu of the condition at points (x, y)."""
    x, y = np.broadcast_arrays(x, y)
    if spec.profile_columns is not None and "nu_tilde_ratio" in spec.profile_columns:
        return _interpolate(spec, x, y, "nu_tilde_ratio", label)
    if spec.nu_tilde_ratio is None:
        raise CaseError(f"{label}: the patch of kind {spec.kind!r} prescribes no nu_tilde_ratio")
    out = values_at(spec.nu_tilde_ratio, x, y, "nu_tilde_ratio")
    if np.any(out < 0):
        i = int(np.argmin(out))
        raise CaseError(f"{label}.nu_tilde_ratio: the formula {spec.nu_tilde_ratio.text!r} gives "
                        f"{out.ravel()[i]:.6g} < 0 at ({x.ravel()[i]:.6g}, {y.ravel()[i]:.6g}); "
                        "nu_tilde / nu must be >= 0")
    return out
