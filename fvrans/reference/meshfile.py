"""Mesh files with data: any 2D mesh meshio reads (VTU, Gmsh .msh with node or element data, ...)."""

from __future__ import annotations

import contextlib
import io
import os
import warnings
from dataclasses import dataclass
from functools import cached_property
from pathlib import Path

import numpy as np

from fvrans.errors import CaseError
from fvrans.reference.interpolate import MISSING, DataSet, Domain, stencil

#: meshio cell types read as 2D cells
CELL_TYPES = ("triangle", "quad", "polygon")


@dataclass(frozen=True)
class FieldFile:
    """A mesh with point and cell data from any format meshio reads (2D: z is dropped).

    Cells are numbered block after block as in the file; ``cell_data`` holds only the 2D cells'
    values (meshio also keeps values of line and vertex elements, which are dropped).
    """

    path: str
    points: np.ndarray  # (np, 2)
    domain: Domain  # every cell split into a fan of triangles
    cell_centre: np.ndarray  # (nc, 2) area-weighted centroid
    cell_area: np.ndarray  # (nc,)
    point_data: dict[str, np.ndarray]
    cell_data: dict[str, np.ndarray]

    @property
    def triangles(self) -> np.ndarray:
        return self.domain.triangles

    @property
    def triangle_cell(self) -> np.ndarray:
        return self.domain.triangle_cell

    def names(self) -> list[str]:
        return sorted(set(self.point_data) | set(self.cell_data))

    def values(self, name: str, component: int | None = None) -> tuple[str, np.ndarray]:
        """``("nodes" | "cells", values)`` of field ``name`` (one component of a vector field)."""
        if name in self.point_data:
            values, where = self.point_data[name], "nodes"
        elif name in self.cell_data:
            values, where = self.cell_data[name], "cells"
        else:
            raise CaseError(f"{self.path}: no field {name!r}; the file has {', '.join(self.names()) or 'no fields'}")
        return where, _component(self.path, name, np.asarray(values), component)

    @cached_property
    def _sets(self) -> dict[str, DataSet]:
        return {"nodes": DataSet(f"{self.path}: point data", "nodes", self.points, {}, self.domain),
                "cells": DataSet(f"{self.path}: cell data", "cells", self.cell_centre, {}, self.domain)}

    def sample(self, name: str, xy: np.ndarray, component: int | None = None,
               cell_values: str = "linear") -> np.ndarray:
        """Values of a field at points ``xy`` (m, 2); NaN outside the mesh (never extrapolated).

        Point data: linear within the file's own cells (triangulated). Cell data: ``"constant"``
        takes the value of the containing cell, ``"linear"`` interpolates linearly between cell
        centres (Delaunay triangles of the centres) and takes the containing cell's value between
        the outermost centres and the boundary (:mod:`fvrans.reference.interpolate`).
        """
        where, values = self.values(name, component)
        st = stencil(self._sets[where], xy, outside="nan", cell_values=cell_values, refuse_no_overlap=False)
        out = st.apply(values)
        out[st.status == MISSING] = np.nan
        return out

    def cells_along(self, start: np.ndarray, end: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """The cells the segment start-end crosses and the distance s from ``start`` of the foot of
        each cell centre on the segment, sorted by s (centres whose foot falls outside are left out).

        A cell is crossed when one of its triangles has vertices strictly on one side of the line
        and on or beyond the other (a line along a cell edge picks the cells on one side only).
        """
        a, b = np.asarray(start, dtype=np.float64), np.asarray(end, dtype=np.float64)
        length = float(np.hypot(*(b - a)))
        if length <= 0.0:
            raise CaseError(f"{self.path}: the line starts and ends at the same point {tuple(a)}")
        t = (b - a) / length
        nrm = np.array([-t[1], t[0]])
        rel = self.points - a
        across = (rel @ nrm)[self.triangles]  # (nt, 3)
        along = (rel @ t)[self.triangles]
        hit = (across.min(axis=1) < 0.0) & (across.max(axis=1) >= 0.0)
        hit &= (along.max(axis=1) >= 0.0) & (along.min(axis=1) <= length)
        cells = np.unique(self.triangle_cell[hit])
        s = (self.cell_centre[cells] - a) @ t
        keep = (s >= 0.0) & (s <= length)
        o = np.argsort(s[keep], kind="stable")
        return cells[keep][o], s[keep][o]

    def cell_values(self, name: str, cells: np.ndarray, component: int | None = None) -> np.ndarray:
        """Values of cell field ``name`` (one component of a vector field) in ``cells``."""
        if name not in self.cell_data:
            have = ", ".join(sorted(self.cell_data)) or "no cell fields"
            raise CaseError(f"{self.path}: no cell field {name!r}; the file has {have}")
        return _component(self.path, name, np.asarray(self.cell_data[name]), component)[cells]


def _component(path: str, name: str, v: np.ndarray, component: int | None) -> np.ndarray:
    v = np.asarray(v, dtype=np.float64)
    if v.ndim == 2 and v.shape[1] == 1:
        v = v[:, 0]
    if v.ndim == 2:
        if component is None:
            raise CaseError(f"{path}: field {name!r} has {v.shape[1]} components; give component = 0, 1, ...")
        if not 0 <= component < v.shape[1]:
            raise CaseError(f"{path}: field {name!r} has no component {component} "
                            f"(it has {v.shape[1]}, numbered from 0)")
        return v[:, component]
    if v.ndim != 1:
        raise CaseError(f"{path}: field {name!r} has values of shape {v.shape[1:]} per entry; "
                        "fvrans reads scalars and vectors")
    if component not in (None, 0):
        raise CaseError(f"{path}: field {name!r} is a scalar; remove component = {component}")
    return v


def _polygon_centres(pts: np.ndarray, conn: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    poly = pts[conn]  # (n, k, 2)
    x, y = poly[..., 0], poly[..., 1]
    xn, yn = np.roll(x, -1, axis=1), np.roll(y, -1, axis=1)
    cross = x * yn - xn * y
    a = 0.5 * cross.sum(axis=1)
    with np.errstate(divide="ignore", invalid="ignore"):
        c = np.column_stack([((x + xn) * cross).sum(axis=1), ((y + yn) * cross).sum(axis=1)]) / (6 * a[:, None])
    bad = ~np.isfinite(c).all(axis=1)
    c[bad] = poly[bad].mean(axis=1)
    return c, np.abs(a)


def read_field(path: str | os.PathLike) -> FieldFile:
    """Read a field file with meshio; 2D cells (triangles, quads, polygons) are kept."""
    import meshio

    p = Path(path)
    if not p.is_file():
        raise CaseError(f"field file {p} does not exist")
    noise = io.StringIO()
    fmt = "gmsh" if p.suffix.lower() == ".msh" else None  # meshio would try another format first
    try:
        with contextlib.redirect_stderr(noise), contextlib.redirect_stdout(noise), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            m = meshio.read(p, file_format=fmt)
    except (Exception, SystemExit) as exc:  # meshio raises many types (and exits) for unreadable files
        why = noise.getvalue().strip().replace("\n", " ") or f"{type(exc).__name__}: {exc}"
        raise CaseError(f"{p}: cannot be read as a field file ({why})") from None
    pts = np.asarray(m.points, dtype=np.float64)[:, :2]
    keep = [b for b, blk in enumerate(m.cells) if blk.type in CELL_TYPES and np.asarray(blk.data).ndim == 2]
    if not keep:
        raise CaseError(f"{p}: no 2D cells (triangles, quads or polygons) found")
    blocks = [np.asarray(m.cells[b].data, dtype=np.int64) for b in keep]
    parts = [_polygon_centres(pts, conn) for conn in blocks]
    cell_data = {name: np.concatenate([np.asarray(arrays[b]) for b in keep]) for name, arrays in m.cell_data.items()}
    point_data = {k: np.asarray(v) for k, v in m.point_data.items()}
    try:
        domain = Domain.from_blocks(pts, blocks)
    except (IndexError, ValueError) as exc:
        raise CaseError(f"{p}: the cells refer to points that do not exist ({exc})") from None
    return FieldFile(str(p), pts, domain, np.concatenate([c for c, _ in parts]),
                     np.concatenate([a for _, a in parts]), point_data, cell_data)
