"""Helpers for the verification tests: a uniform quad mesh with data, written with meshio."""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np


def write_quad_field(path: Path, nx: int, ny: int, lx: float, ly: float, point_fn=None, cell_fn=None) -> None:
    """A uniform nx-by-ny quad mesh of [0, lx] x [0, ly] with optional point/cell data f(x, y)."""
    xs, ys = np.linspace(0.0, lx, nx + 1), np.linspace(0.0, ly, ny + 1)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel(), np.zeros(X.size)])
    idx = np.arange(X.size).reshape(nx + 1, ny + 1)
    quads = np.column_stack([idx[:-1, :-1].ravel(), idx[1:, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()])
    centres = pts[quads].mean(axis=1)
    pd = {} if point_fn is None else {"f": point_fn(pts[:, 0], pts[:, 1])}
    cd = {}
    if cell_fn is not None:
        u = cell_fn(centres[:, 0], centres[:, 1])
        cd = {"f": [u], "velocity": [np.column_stack([u, -u, np.zeros_like(u)])]}
    meshio.write(path, meshio.Mesh(pts, [("quad", quads)], point_data=pd, cell_data=cd), file_format="vtu")
