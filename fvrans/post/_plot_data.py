"""Readers for the files of a result directory, as used by :mod:`fvrans.post.plots`.

Every reader turns a missing or malformed file into a :class:`~fvrans.errors.CaseError` that
names the file and what is wrong, instead of a numpy or XML traceback.
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError

#: characters of user text drawn on a plot: a case title, and a name (patch, probe, item) or label
MAX_TITLE_CHARS = 200
MAX_NAME_CHARS = 60


def cap_text(text: Any, limit: int = MAX_NAME_CHARS) -> str:
    """``text`` as one line of at most ``limit`` characters (cut with an ellipsis): user text drawn
    on a plot must not make drawing slow (a 100 000-character title took a minute) or the plot
    unreadable.

    >>> cap_text("wall"), cap_text("x" * 100, 10)
    ('wall', 'xxxxxxxxx…')
    """
    s = " ".join(str(text).split())
    return s if len(s) <= limit else s[: limit - 1] + "…"


def read_summary(path: str | os.PathLike) -> dict[str, Any]:
    """The content of ``summary.json`` ({} if the file does not exist)."""
    p = Path(path)
    if not p.exists():
        return {}
    try:
        out = json.loads(p.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise CaseError(f"{p}: cannot read the run summary ({exc}); re-run the case to rewrite it") from None
    if not isinstance(out, dict):
        raise CaseError(f"{p}: the run summary is not a JSON object; re-run the case to rewrite it")
    return out


def read_csv_columns(path: str | os.PathLike, required: tuple[str, ...] = ()) -> dict[str, np.ndarray]:
    """Columns of a comma-separated table with a one-line header, as float arrays by name.

    ``required`` names columns that must be present (a CaseError names the missing ones).
    """
    p = Path(path)
    try:
        with open(p, encoding="utf-8") as f:
            header = f.readline().strip()
            body = f.read()
    except OSError as exc:
        raise CaseError(f"{p}: cannot read the table ({exc.strerror or exc})") from None
    names = [h.strip() for h in header.split(",")] if header else []
    if not names or any(not n for n in names):
        raise CaseError(f"{p}: the first line must be a header of comma-separated column names")
    missing = [r for r in required if r not in names]
    if missing:
        raise CaseError(f"{p}: column(s) {', '.join(missing)} missing; the header has {', '.join(names)}")
    rows = [ln for ln in body.splitlines() if ln.strip()]
    if not rows:
        return {n: np.zeros(0) for n in names}
    try:
        data = np.loadtxt(rows, delimiter=",", ndmin=2, dtype=float)
    except ValueError as exc:
        raise CaseError(f"{p}: a row is not a list of {len(names)} numbers ({exc})") from None
    if data.shape[1] != len(names):
        raise CaseError(f"{p}: rows have {data.shape[1]} values but the header names {len(names)} columns")
    return {n: data[:, k] for k, n in enumerate(names)}


_CELL_TYPES = ("triangle", "quad", "polygon")


@dataclass
class FieldData:
    """Cells and per-cell data of ``fields.vtu`` in the file's cell order.

    ``blocks``: list of (m, k) point-index arrays (cells with k vertices, counter-clockwise);
    ``data``: name -> array with one entry (scalar or vector) per cell over all blocks in order.
    """

    points: np.ndarray
    blocks: list[np.ndarray]
    data: dict[str, np.ndarray] = field(default_factory=dict)
    source: str = "fields"

    @property
    def n_cells(self) -> int:
        return int(sum(len(b) for b in self.blocks))

    def polygons(self) -> list[np.ndarray]:
        """One (k, 2) vertex array per cell, in cell order."""
        out: list[np.ndarray] = []
        for b in self.blocks:
            out.extend(self.points[b])
        return out

    def areas(self) -> np.ndarray:
        """Cell areas (shoelace formula, absolute), shape (n,)."""
        parts = []
        for b in self.blocks:
            p = self.points[b]
            q = np.roll(p, -1, axis=1)
            parts.append(np.abs(0.5 * (p[..., 0] * q[..., 1] - q[..., 0] * p[..., 1]).sum(axis=1)))
        return np.concatenate(parts) if parts else np.zeros(0)

    def centroids(self) -> np.ndarray:
        """Area centroids of the cells (shoelace formula), shape (n, 2)."""
        parts = []
        for b in self.blocks:
            p = self.points[b]  # (m, k, 2)
            q = np.roll(p, -1, axis=1)
            cross = p[..., 0] * q[..., 1] - q[..., 0] * p[..., 1]
            area = 0.5 * cross.sum(axis=1)
            cx = ((p[..., 0] + q[..., 0]) * cross).sum(axis=1)
            cy = ((p[..., 1] + q[..., 1]) * cross).sum(axis=1)
            with np.errstate(divide="ignore", invalid="ignore"):
                c = np.stack([cx, cy], axis=1) / (6.0 * area[:, None])
            bad = ~np.isfinite(c).all(axis=1)
            c[bad] = p[bad].mean(axis=1)
            parts.append(c)
        return np.concatenate(parts) if parts else np.zeros((0, 2))

    def triangles(self) -> np.ndarray:
        """Fan triangulation of the cells (convex cells give valid triangles), shape (nt, 3)."""
        parts = []
        for b in self.blocks:
            k = b.shape[1]
            for j in range(1, k - 1):
                parts.append(np.stack([b[:, 0], b[:, j], b[:, j + 1]], axis=1))
        return np.concatenate(parts) if parts else np.zeros((0, 3), dtype=np.int64)

    def bounds(self) -> tuple[float, float, float, float]:
        used = np.unique(np.concatenate([b.ravel() for b in self.blocks])) if self.blocks else np.zeros(0, int)
        p = self.points[used]
        return float(p[:, 0].min()), float(p[:, 0].max()), float(p[:, 1].min()), float(p[:, 1].max())


def read_fields(path: str | os.PathLike) -> FieldData:
    """Read ``fields.vtu`` (triangles, quads, polygons with cell data) with meshio."""
    import meshio

    p = Path(path)
    if not p.is_file():
        raise CaseError(f"{p}: no such field file; re-run the case with field output on")
    try:
        # the VTU reader itself: meshio.read would print and exit the process on a bad file
        m = meshio.vtu.read(str(p))
    except Exception as exc:  # meshio raises many kinds (ReadError, XML errors, KeyError, ...)
        why = str(exc) or "not a valid VTU (VTK XML unstructured grid) file"
        raise CaseError(f"{p}: cannot read the field file ({why}); re-run the case to rewrite it") from None
    keep = [i for i, blk in enumerate(m.cells) if blk.type.startswith(_CELL_TYPES)]
    if not keep:
        raise CaseError(f"{p}: the field file has no triangle, quad or polygon cells")
    blocks = [np.asarray(m.cells[i].data, dtype=np.int64) for i in keep]
    data: dict[str, np.ndarray] = {}
    for name, arrays in m.cell_data.items():
        data[name] = np.concatenate([np.asarray(arrays[i]) for i in keep])
    return FieldData(np.asarray(m.points, dtype=float)[:, :2], blocks, data, source=str(p))
