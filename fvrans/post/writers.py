"""Atomic output files: JSON, CSV and VTU (for viewers such as ParaView).

Every file is written to a temporary file in the destination directory, flushed and fsynced,
then moved over the destination with ``os.replace`` (atomic on POSIX and Windows). A reader
therefore sees either the old complete file or the new complete file, never a partial one, and
an error while writing leaves the old file (if any) untouched and no temporary file behind.

Each writer takes ``within=``, the output folder the file must lie in: a target that resolves
outside it is refused (a second line of defence behind :func:`safe_file_name`, the one function
that turns names into file names; see :mod:`fvrans.post.filenames`).
"""

from __future__ import annotations

import contextlib
import json
import math
import os
import tempfile
from collections.abc import Callable, Iterator, Mapping, Sequence
from pathlib import Path
from typing import IO, Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.mesh import Mesh
from fvrans.post.filenames import check_inside, output_file, safe_file_name

PathLike = str | os.PathLike

# the process umask, read once (os.umask can only be read by setting it)
_UMASK = os.umask(0)
os.umask(_UMASK)


#: prefix of the temporary files of atomic writes (a killed process may leave one behind;
#: :func:`fvrans.post.outputs.recover` removes them)
TMP_PREFIX = ".fvrans-tmp-"


def fsync_dir(directory: Path) -> None:
    """Make the rename durable (POSIX); silently skipped where directories cannot be opened."""
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


@contextlib.contextmanager
def atomic_path(path: PathLike, suffix: str | None = None, within: PathLike | None = None) -> Iterator[Path]:
    """Yield a temporary path next to ``path``; on success fsync it and move it onto ``path``.

    For writers that insist on opening the file themselves. On an exception the temporary file
    is removed and ``path`` is left as it was. ``within``: refuse a ``path`` outside this folder.
    """
    target = Path(path) if within is None else check_inside(path, within)
    directory = target.parent if str(target.parent) else Path(".")
    if not directory.is_dir():
        raise CaseError(f"cannot write {target}: the directory {directory} does not exist")
    fd, tmp_name = tempfile.mkstemp(
        dir=directory, prefix=f"{TMP_PREFIX}{target.name[:80]}.", suffix=suffix if suffix is not None else ".tmp"
    )
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        with open(tmp, "rb+") as f:
            f.flush()
            os.fsync(f.fileno())
        # mkstemp creates the file private (0600); give it the permissions of a normal new file
        os.chmod(tmp, 0o666 & ~_UMASK)
        os.replace(tmp, target)
    except BaseException:
        with contextlib.suppress(FileNotFoundError):
            tmp.unlink()
        raise
    fsync_dir(directory)


def atomic_write(path: PathLike, write: Callable[[IO[Any]], None], binary: bool = False,
                 within: PathLike | None = None) -> None:
    """Call ``write(f)`` on a temporary file object, then fsync and move it onto ``path``."""
    with atomic_path(path, within=within) as tmp:
        mode = "wb" if binary else "w"
        kw = {} if binary else {"encoding": "utf-8", "newline": "\n"}
        with open(tmp, mode, **kw) as f:
            write(f)
            f.flush()
            os.fsync(f.fileno())


def _json_default(obj: Any) -> Any:
    if isinstance(obj, np.ndarray):
        return obj.tolist()
    if isinstance(obj, np.bool_):
        return bool(obj)
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.floating):
        return float(obj)
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"an object of type {type(obj).__name__} cannot be written to JSON")


def to_jsonable(obj: Any) -> Any:
    """Plain JSON types from nested dicts/lists/tuples with numpy values; non-finite floats become
    ``None`` (JSON has no NaN or infinity)."""
    if isinstance(obj, Mapping):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [to_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (bool, np.bool_)):
        return bool(obj)
    if isinstance(obj, (int, np.integer)):
        return int(obj)
    if isinstance(obj, (float, np.floating)):
        x = float(obj)
        return x if math.isfinite(x) else None
    if obj is None or isinstance(obj, str):
        return obj
    if isinstance(obj, Path):
        return str(obj)
    raise TypeError(f"an object of type {type(obj).__name__} cannot be written to JSON")


def write_json_atomic(path: PathLike, obj: Any, within: PathLike | None = None) -> None:
    """Write ``obj`` as indented JSON (numpy scalars/arrays converted; NaN/inf refused, since
    they are not JSON — pass the object through :func:`to_jsonable` to turn them into null).

    >>> import tempfile, json, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.json"
    >>> write_json_atomic(p, {"n": np.int64(3), "x": [0.5, 1.0]})
    >>> json.loads(p.read_text())
    {'n': 3, 'x': [0.5, 1.0]}
    """
    # serialise first: an unserialisable object fails before any file is touched
    text = json.dumps(obj, indent=2, default=_json_default, allow_nan=False) + "\n"
    atomic_write(path, lambda f: f.write(text), within=within)


def _format_column(col: np.ndarray) -> list[str]:
    """Shortest strings that read back to the same value (Python's float repr)."""
    if col.dtype.kind == "b":
        return [str(int(v)) for v in col.tolist()]
    if col.dtype.kind in "iu":
        return [str(v) for v in col.tolist()]
    return [repr(v) for v in col.astype(np.float64).tolist()]


def write_csv_atomic(path: PathLike, header: Sequence[str], columns: Sequence[np.ndarray],
                     within: PathLike | None = None) -> None:
    """Comma-separated columns under a one-line header; floats at full precision (shortest
    round-trip representation), so ``np.loadtxt(path, delimiter=",", skiprows=1)`` gives the
    values back exactly.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "a.csv"
    >>> write_csv_atomic(p, ["i", "x"], [np.arange(2), np.array([0.1, 2 / 3])])
    >>> print(p.read_text(), end="")
    i,x
    0,0.1
    1,0.6666666666666666
    """
    header = [str(h) for h in header]
    if len(header) != len(columns):
        raise ValueError(f"{path}: {len(header)} column names for {len(columns)} columns")
    bad = [h for h in header if "," in h or "\n" in h]
    if bad:
        raise ValueError(f"{path}: column name {bad[0]!r} contains a comma or a line break")
    cols = [np.asarray(c) for c in columns]
    for h, c in zip(header, cols):
        if c.ndim != 1:
            raise ValueError(f"{path}: column {h!r} has shape {c.shape}; give one 1D array per column")
    n = len(cols[0]) if cols else 0
    for h, c in zip(header, cols):
        if len(c) != n:
            raise ValueError(f"{path}: column {h!r} has {len(c)} values, the first column has {n}")
    text_cols = [_format_column(c) for c in cols]
    lines = [",".join(header)]
    lines.extend(",".join(row) for row in zip(*text_cols))
    text = "\n".join(lines) + "\n"
    atomic_write(path, lambda f: f.write(text), within=within)


# ---------------------------------------------------------------------------------------------
def vtu_cell_blocks(mesh: Mesh) -> tuple[list[tuple[str, np.ndarray]], np.ndarray]:
    """Cell blocks for meshio and the cell order they imply.

    Triangles first ('triangle'), then quads ('quad'), then polygons grouped by vertex count
    ('polygon', increasing count); within a block cells keep their mesh order. Returns
    ``(blocks, order)`` where ``order[k]`` is the mesh cell written at position ``k``.
    """
    sizes = mesh.cell_sizes()
    blocks: list[tuple[str, np.ndarray]] = []
    order_parts: list[np.ndarray] = []
    for k in np.unique(sizes):
        idx = np.nonzero(sizes == k)[0]
        conn = mesh.cell_points[mesh.cell_offsets[idx][:, None] + np.arange(k)[None, :]]
        name = {3: "triangle", 4: "quad"}.get(int(k), "polygon")
        blocks.append((name, np.ascontiguousarray(conn, dtype=np.int64)))
        order_parts.append(idx)
    return blocks, np.concatenate(order_parts)


def _vtu_array(name: str, data: np.ndarray, n_cells: int) -> np.ndarray:
    a = np.asarray(data)
    if a.shape[:1] != (n_cells,):
        raise CaseError(
            f"cell data {name!r} has shape {a.shape}; it needs one value (or vector) per cell, "
            f"i.e. a first dimension of {n_cells}"
        )
    if a.dtype.kind == "b":
        a = a.astype(np.uint8)
    if a.ndim == 2 and a.shape[1] == 2:  # 2D vectors as 3-component vectors (z = 0)
        a = np.column_stack([a, np.zeros(n_cells, dtype=a.dtype)])
    elif a.ndim == 3 and a.shape[1:] == (2, 2):  # 2x2 tensors as 3x3 tensors (9 components)
        t = np.zeros((n_cells, 3, 3), dtype=a.dtype)
        t[:, :2, :2] = a
        a = t.reshape(n_cells, 9)
    elif a.ndim > 2:
        raise CaseError(f"cell data {name!r} has shape {a.shape}; give scalars, 2D vectors or 2x2 tensors")
    return a


def write_vtu_atomic(
    path: PathLike,
    mesh: Mesh,
    cell_data: Mapping[str, np.ndarray],
    point_data: Mapping[str, np.ndarray] | None = None,
    within: PathLike | None = None,
) -> None:
    """Write the mesh with per-cell data as a VTK unstructured grid (``.vtu``, via meshio).

    Points get z = 0; (nc, 2) vectors are written as 3-component vectors with zero z and
    (nc, 2, 2) tensors as 9-component 3x3 tensors. Cells are written in the block order of
    :func:`vtu_cell_blocks`; the cell data follow the same order.
    """
    import meshio

    n = mesh.n_cells
    blocks, order = vtu_cell_blocks(mesh)
    bounds = np.cumsum([0] + [len(b[1]) for b in blocks])
    cd: dict[str, list[np.ndarray]] = {}
    for name, data in cell_data.items():
        a = _vtu_array(name, data, n)[order]
        cd[str(name)] = [a[bounds[i] : bounds[i + 1]] for i in range(len(blocks))]
    pd: dict[str, np.ndarray] = {}
    for name, data in (point_data or {}).items():
        a = np.asarray(data)
        if a.shape[:1] != (mesh.n_points,):
            raise CaseError(
                f"point data {name!r} has shape {a.shape}; it needs a first dimension of {mesh.n_points}"
            )
        if a.ndim == 2 and a.shape[1] == 2:
            a = np.column_stack([a, np.zeros(mesh.n_points, dtype=a.dtype)])
        pd[str(name)] = a
    points = np.column_stack([mesh.points, np.zeros(mesh.n_points)])
    out = meshio.Mesh(points, blocks, cell_data=cd, point_data=pd)
    with atomic_path(path, suffix=".vtu", within=within) as tmp:
        meshio.write(tmp, out, file_format="vtu")


__all__ = [
    "TMP_PREFIX", "atomic_path", "atomic_write", "check_inside", "fsync_dir", "output_file", "safe_file_name",
    "to_jsonable", "vtu_cell_blocks", "write_csv_atomic", "write_json_atomic", "write_vtu_atomic",
]
