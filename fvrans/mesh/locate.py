"""Which cell holds a point: candidates from a k-d tree of the cell centroids (scipy), then an
exact point-in-polygon test (crossing number) on each candidate; a point on a cell edge or
within a small tolerance outside the mesh boundary counts as inside the nearest cell.

:meth:`CellLocator.containing` gives *every* cell whose closed polygon holds a point: two
cells for a point on their shared face, all the cells around a vertex for the vertex, so that
a value sampled there can be the average of those cells (the same on a mesh and on its rotated
copy, where round-off would pick either cell).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

from fvrans.errors import CaseError
from fvrans.mesh.mesh import Mesh

#: a point this close to a cell's edges, relative to the cell's size, lies in that cell (see
#: :meth:`CellLocator.containing`); far above round-off of coordinates, far below any cell feature
CONTAINS_TOLERANCE = 1e-8


def _point_in_polygon(px: float, py: float, poly: np.ndarray) -> bool:
    """Crossing-number test (a horizontal ray to +x); ``poly`` (k, 2) in any orientation."""
    x, y = poly[:, 0], poly[:, 1]
    xn, yn = np.roll(x, -1), np.roll(y, -1)
    straddle = (y > py) != (yn > py)
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = x + (py - y) * (xn - x) / (yn - y)
    return bool(np.count_nonzero(straddle & (px < xc)) % 2)


def _distance_to_polygon(px: float, py: float, poly: np.ndarray) -> float:
    """Distance from the point to the polygon's edges."""
    a = poly
    b = np.roll(poly, -1, axis=0)
    ab = b - a
    ap = np.array([px, py]) - a
    t = np.clip(np.einsum("ij,ij->i", ap, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0.0, 1.0)
    d = ap - t[:, None] * ab
    return float(np.min(np.hypot(d[:, 0], d[:, 1])))


#: most points of a sampled line
MAX_LINE_POINTS = 100_000


def line_points(start, end, n: int) -> np.ndarray:
    """``n`` evenly spaced points from ``start`` to ``end`` (both included), shape (n, 2);
    ``n`` from 2 to :data:`MAX_LINE_POINTS`, the ends finite (CaseError otherwise)."""
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or not 2 <= n <= MAX_LINE_POINTS:
        raise CaseError(f"a line of sample points needs an integer count from 2 to {MAX_LINE_POINTS}, got {n!r}")
    a, b = np.asarray(start, dtype=float), np.asarray(end, dtype=float)
    if a.shape != (2,) or b.shape != (2,) or not (np.all(np.isfinite(a)) and np.all(np.isfinite(b))):
        raise CaseError(f"a line of sample points needs finite ends (x, y), got {start!r} and {end!r}")
    t = np.linspace(0.0, 1.0, int(n))[:, None]
    return (1.0 - t) * np.asarray(start, dtype=float) + t * np.asarray(end, dtype=float)


class CellLocator:
    """Locates points in the cells of ``mesh``.

    ``tolerance``: points this close to a cell (relative to the mesh's bounding-box diagonal)
    count as inside it, so that points on the boundary are found.
    """

    def __init__(self, mesh: Mesh, tolerance: float = 1e-9, centroids: np.ndarray | None = None):
        self.mesh = mesh
        off, cp = mesh.cell_offsets, mesh.cell_points
        if centroids is None:
            sizes = np.diff(off)
            sums = np.add.reduceat(mesh.points[cp], off[:-1], axis=0)
            centroids = sums / sizes[:, None]
        self.centroids = np.asarray(centroids, dtype=float)
        self.tree = cKDTree(self.centroids)
        lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
        self.tol = float(tolerance * np.hypot(*(hi - lo)))
        self._box_cache: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None

    def polygon(self, c: int) -> np.ndarray:
        return self.mesh.points[self.mesh.cell_points[self.mesh.cell_offsets[c] : self.mesh.cell_offsets[c + 1]]]

    def find(self, points: np.ndarray) -> np.ndarray:
        """Cell index of each point (n, 2), -1 for points outside the mesh."""
        pts = np.atleast_2d(np.asarray(points, dtype=float))
        out = np.full(len(pts), -1, dtype=np.int64)
        n = self.mesh.n_cells
        for i, (px, py) in enumerate(pts):
            for k in (min(8, n), min(64, n), min(512, n)):
                _, cand = self.tree.query([px, py], k=k)
                cand = np.atleast_1d(cand)
                hit = next((int(c) for c in cand if _point_in_polygon(px, py, self.polygon(int(c)))), -1)
                if hit < 0:  # on an edge or just outside the boundary: the closest cell within tolerance
                    d = [(_distance_to_polygon(px, py, self.polygon(int(c))), int(c)) for c in cand]
                    dmin, c_best = min(d)
                    if dmin <= self.tol:
                        hit = c_best
                if hit >= 0:
                    out[i] = hit
                    break
                if k == min(512, n):
                    break
                # try more candidates only if the point may be inside: within the farthest candidate's reach
                if self.tree.query([px, py], k=1)[0] > 10 * self._cell_size(int(cand[0])):
                    break
        return out

    def containing(self, point, rel_tol: float = CONTAINS_TOLERANCE) -> np.ndarray:
        """Every cell whose closed polygon contains ``point`` (x, y), sorted; empty outside the mesh.

        A cell counts when the point lies inside it (crossing-number test) or within
        ``rel_tol`` times the cell's size (its bounding-box diagonal) of its edges: a point on a
        face shared by two cells gets both, a point on a vertex every cell around it. A point
        just outside the mesh boundary (by at most the locator's boundary tolerance) gets the
        nearest cell, as :meth:`find`.
        """
        px, py = (float(v) for v in np.asarray(point, dtype=float).reshape(2))
        lo, hi, size = self._boxes()
        slack = rel_tol * size
        cand = np.flatnonzero((lo[:, 0] - slack <= px) & (px <= hi[:, 0] + slack)
                              & (lo[:, 1] - slack <= py) & (py <= hi[:, 1] + slack))
        hits = [int(c) for c in cand
                if _distance_to_polygon(px, py, self.polygon(int(c))) <= slack[c]
                or _point_in_polygon(px, py, self.polygon(int(c)))]
        if not hits:
            c = int(self.find(np.array([[px, py]]))[0])
            if c >= 0:
                hits.append(c)
        return np.array(sorted(hits), dtype=np.int64)

    def _boxes(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Per cell: bounding-box corners (nc, 2) and diagonal (nc,), computed once."""
        if self._box_cache is None:
            off, cp = self.mesh.cell_offsets, self.mesh.cell_points
            lo = np.minimum.reduceat(self.mesh.points[cp], off[:-1], axis=0)
            hi = np.maximum.reduceat(self.mesh.points[cp], off[:-1], axis=0)
            self._box_cache = (lo, hi, np.hypot(*(hi - lo).T))
        return self._box_cache

    def _cell_size(self, c: int) -> float:
        p = self.polygon(c)
        return float(np.hypot(*(p.max(axis=0) - p.min(axis=0))))


__all__ = ["CONTAINS_TOLERANCE", "CellLocator", "line_points"]
