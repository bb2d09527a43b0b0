"""Probes: cell fields sampled at points and along segments with the cell gradients.

At a sample point x the value is the average, over every cell whose closed polygon contains x
(:meth:`fvrans.mesh.locate.CellLocator.containing`: one cell inside, two on a shared face, all
the cells around a vertex), of the cell's reconstruction phi_c + grad phi_c . (x - x_c) (x_c the
cell centroid). Each reconstruction is exact for fields linear over the cell and second order for
smooth fields; taking the average where cells meet makes the value independent of which cell
round-off would pick, so it is the same on a mesh and on its rotated copy.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.locate import CellLocator, line_points
from fvrans.post.writers import write_csv_atomic

#: the leading columns of a probe table; the sampled fields follow
PROBE_COORDINATES = ("s", "x", "y")


@dataclass(frozen=True)
class Stencil:
    """The cells and weights that sample fields at a set of points.

    Entry k adds ``weight[k] * (phi[cell[k]] + grad phi[cell[k]] . offset[k])`` to the value at
    point ``point[k]``; the weights of a point sum to 1.
    """

    points: np.ndarray  # (n, 2)
    point: np.ndarray  # (m,) index of the sample point of each entry
    cell: np.ndarray  # (m,)
    weight: np.ndarray  # (m,)
    offset: np.ndarray  # (m, 2) x - x_c

    @property
    def cells(self) -> np.ndarray:
        """The distinct cells the stencil reads."""
        return np.unique(self.cell)

    def sample(self, values: np.ndarray, gradient: np.ndarray | None = None) -> np.ndarray:
        """Values (n,) at the points of the cell array ``values`` (nc,) with its ``gradient`` (nc, 2)."""
        v = np.asarray(values, dtype=float)[self.cell]
        if gradient is not None:
            v = v + np.einsum("ij,ij->i", np.asarray(gradient, dtype=float)[self.cell], self.offset)
        return np.bincount(self.point, weights=self.weight * v, minlength=len(self.points))


def build_stencil(locator: CellLocator, centroids: np.ndarray, points, name: str = "probe") -> Stencil:
    """The :class:`Stencil` of ``points`` (n, 2); a point outside the mesh raises CaseError naming
    the probe ``name``."""
    pts = np.atleast_2d(np.asarray(points, dtype=float))
    idx: list[int] = []
    cells: list[int] = []
    weights: list[float] = []
    for i, p in enumerate(pts):
        found = locator.containing(p)
        if len(found) == 0:
            raise CaseError(f"probe {name!r}: the point ({p[0]:.6g}, {p[1]:.6g}) lies outside the mesh; "
                            "move the probe inside the flow domain")
        idx += [i] * len(found)
        cells += found.tolist()
        weights += [1.0 / len(found)] * len(found)
    cell = np.asarray(cells, dtype=np.int64)
    point = np.asarray(idx, dtype=np.int64)
    return Stencil(points=pts, point=point, cell=cell, weight=np.asarray(weights),
                   offset=pts[point] - np.asarray(centroids, dtype=float)[cell])


def sample_stencil(stencil: Stencil, values: Mapping[str, np.ndarray],
                   gradients: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    """One column per entry of ``values`` (cell arrays), reconstructed with ``gradients[name]``
    where given."""
    return {key: stencil.sample(v, gradients.get(key)) for key, v in values.items()}


def sample_line(
    locator: CellLocator,
    centroids: np.ndarray,
    start,
    end,
    n: int,
    values: Mapping[str, np.ndarray],
    gradients: Mapping[str, np.ndarray],
    name: str = "probe",
) -> dict[str, np.ndarray]:
    """Columns ``s`` (distance from ``start``), ``x``, ``y`` and one per entry of ``values``
    (cell arrays (nc,)), reconstructed with ``gradients[name]`` (nc, 2) at ``n`` points from
    ``start`` to ``end``. A point outside the mesh raises CaseError naming the probe."""
    pts = line_points(start, end, n)
    stencil = build_stencil(locator, centroids, pts, name)
    out: dict[str, np.ndarray] = {
        "s": np.hypot(pts[:, 0] - pts[0, 0], pts[:, 1] - pts[0, 1]),
        "x": pts[:, 0],
        "y": pts[:, 1],
    }
    out.update(sample_stencil(stencil, values, gradients))
    return out


def write_probe_csv(path: str | os.PathLike, columns: Mapping[str, np.ndarray],
                    within: str | os.PathLike | None = None) -> None:
    """Write a probe table (header ``s,x,y,...``) atomically (``within``: the output folder it must lie in)."""
    write_csv_atomic(path, list(columns), [np.asarray(c) for c in columns.values()], within=within)


__all__ = ["PROBE_COORDINATES", "Stencil", "build_stencil", "line_points", "sample_line", "sample_stencil",
           "write_probe_csv"]
