"""Line probes: cell fields sampled along a segment with the cell gradients.

At a sample point x in cell c the value is phi_c + grad phi_c . (x - x_c) (x_c the cell centroid),
exact for fields linear over the cell, second order for smooth fields. The containing cell is
found with :class:`fvrans.mesh.locate.CellLocator` (k-d tree candidates, point-in-polygon test).
"""

from __future__ import annotations

import os
from collections.abc import Mapping

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.locate import CellLocator, line_points
from fvrans.post.writers import write_csv_atomic

#: the leading columns of a probe table; the sampled fields follow
PROBE_COORDINATES = ("s", "x", "y")


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
    cells = locator.find(pts)
    if np.any(cells < 0):
        k = int(np.flatnonzero(cells < 0)[0])
        raise CaseError(f"probe {name!r}: the point ({pts[k, 0]:.6g}, {pts[k, 1]:.6g}) lies outside the mesh; "
                        "move the probe's start / end inside the flow domain")
    d = pts - centroids[cells]
    out: dict[str, np.ndarray] = {
        "s": np.hypot(pts[:, 0] - pts[0, 0], pts[:, 1] - pts[0, 1]),
        "x": pts[:, 0],
        "y": pts[:, 1],
    }
    for key, v in values.items():
        v = np.asarray(v, dtype=float)
        g = gradients.get(key)
        out[key] = v[cells] if g is None else v[cells] + np.einsum("ij,ij->i", np.asarray(g)[cells], d)
    return out


def write_probe_csv(path: str | os.PathLike, columns: Mapping[str, np.ndarray],
                    within: str | os.PathLike | None = None) -> None:
    """Write a probe table (header ``s,x,y,...``) atomically (``within``: the output folder it must lie in)."""
    write_csv_atomic(path, list(columns), [np.asarray(c) for c in columns.values()], within=within)


__all__ = ["PROBE_COORDINATES", "line_points", "sample_line", "write_probe_csv"]
