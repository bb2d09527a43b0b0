"""Exact distance to the nearest no-slip wall, as needed by the Spalart-Allmaras model.

The wall is the union of the wall faces, i.e. of straight line segments. For each query point
``d(p) = min_s |p - proj_s(p)|`` with ``proj_s(p)`` the closest point of segment ``s``; the result
is exact to round-off (no field equation, no nearest-face-centre approximation).

Search: a bounding-box tree over the segments (recursive median splits, a k-d tree whose nodes
carry the boxes of their segments) is walked depth first, nearer child first, skipping every
node whose box is farther than the best segment found so far. The box distance is a lower bound
of the distance to each segment inside, so nothing closer can be skipped and the minimum is
exact, in O(log M) node visits per point for ordinary walls: O(N log M) in all.

(A k-d tree over segment sample points with the proof "k-th sample farther than d + h" is also
exact, but its candidate count grows like sqrt(d / h) away from the wall: measured over 10x slower
for 100k points around a 1000-face circle; the box bound stays tight however far the point is.)

The distance only depends on the mesh: compute it once per mesh and keep it.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.physics import _wall_distance_kernels as kern


def _as_points(points: np.ndarray) -> np.ndarray:
    p = np.asarray(points, dtype=np.float64)
    if p.ndim != 2 or p.shape[1] != 2:
        raise ValueError(f"wall distance: points must have shape (n, 2), got {p.shape}")
    if not np.all(np.isfinite(p)):
        bad = int(np.flatnonzero(~np.all(np.isfinite(p), axis=1))[0])
        raise ValueError(f"wall distance: point {bad} is not finite: {p[bad].tolist()}")
    return np.ascontiguousarray(p)


def _as_segments(segments: np.ndarray) -> np.ndarray:
    s = np.asarray(segments, dtype=np.float64)
    if s.ndim != 3 or s.shape[1:] != (2, 2):
        raise ValueError(f"wall distance: segments must have shape (m, 2, 2) (m x end point x xy), got {s.shape}")
    if s.shape[0] == 0:
        raise ValueError("wall distance: there are no wall segments to measure the distance to")
    if not np.all(np.isfinite(s)):
        bad = int(np.flatnonzero(~np.all(np.isfinite(s), axis=(1, 2)))[0])
        raise ValueError(f"wall distance: segment {bad} has a non-finite end point: {s[bad].tolist()}")
    return s


class SegmentTree:
    """Bounding-box tree over fixed wall segments, reusable for any number of point queries."""

    def __init__(self, segments: np.ndarray):
        seg = _as_segments(segments)
        self.a = np.ascontiguousarray(seg[:, 0, :])
        self.e = np.ascontiguousarray(seg[:, 1, :] - seg[:, 0, :])
        self.l2 = np.ascontiguousarray(np.einsum("ij,ij->i", self.e, self.e))
        self.nodes = kern.build_tree(self.a, self.e)

    @property
    def n_segments(self) -> int:
        return len(self.a)

    def query(self, points: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(distance (n,), nearest segment (n,)) of each point; see :func:`wall_distance`."""
        p = _as_points(points)
        dist = np.empty(len(p))
        nearest = np.empty(len(p), dtype=np.int64)
        kern.nearest_segment(p, self.a, self.e, self.l2, *self.nodes, dist, nearest)
        return dist, nearest


def wall_distance(points: np.ndarray, segments: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Exact minimum Euclidean distance from each point to the union of line segments.

    Parameters
    ----------
    points : (n, 2) query points.
    segments : (m, 2, 2) segment end points, ``segments[s] = [[xa, ya], [xb, yb]]``.

    Returns
    -------
    distance : (n,) ``min_s dist(p, s)``, exact to round-off.
    nearest : (n,) int, the segment reaching it (the lowest index among equal distances).

    >>> d, s = wall_distance(np.array([[0.5, 2.0], [4.0, 4.0]]), np.array([[[0.0, 0.0], [1.0, 0.0]]]))
    >>> d.tolist(), s.tolist()
    ([2.0, 5.0], [0, 0])
    """
    return SegmentTree(segments).query(points)


def wall_segments(mesh: Mesh, wall_patches: Sequence[str]) -> tuple[np.ndarray, np.ndarray]:
    """The faces of the named patches as segments (m, 2, 2), with their face indices (m,)."""
    if isinstance(wall_patches, str):
        wall_patches = [wall_patches]
    names = list(wall_patches)
    if not names:
        raise CaseError(
            f"{mesh.source}: the wall distance needs at least one wall patch; mark one of {mesh.patch_names} as a wall"
        )
    known = set(mesh.patch_names)
    for name in names:
        if name not in known:
            raise CaseError(
                f"{mesh.source}: no boundary patch named {name!r} for the wall distance; the mesh has "
                f"{', '.join(repr(x) for x in mesh.patch_names) or 'no patches'}"
            )
    faces = np.concatenate([mesh.patch(name).faces for name in dict.fromkeys(names)])
    if faces.size == 0:
        raise CaseError(
            f"{mesh.source}: the wall patches {names} have no faces, so there is no wall to measure "
            "the distance to; check the patch names of the mesh"
        )
    return mesh.points[mesh.face_points[faces]], faces


def periodic_images(mesh: Mesh, segments: np.ndarray) -> np.ndarray:
    """The segments and their copies moved by -1, 0, +1 times each periodic translation of the
    mesh (every combination): on a periodic mesh the nearest wall may lie across a joined pair."""
    out = np.asarray(segments, dtype=float)
    for pair in mesh.periodic:
        t = np.asarray(pair.translation, dtype=float)
        out = np.concatenate([out - t, out, out + t])
    return out


def cell_wall_distance(mesh: Mesh, geom: Geometry, wall_patches: Sequence[str]) -> np.ndarray:
    """Exact distance (n_cells,) from each cell centre to the union of the named patches' faces
    (with their periodic images, see :func:`periodic_images`)."""
    segments, _ = wall_segments(mesh, wall_patches)
    return wall_distance(geom.cell_centre, periodic_images(mesh, segments))[0]


def boundary_face_wall_distance(mesh: Mesh, geom: Geometry, wall_patches: Sequence[str]) -> np.ndarray:
    """Exact wall distance (n_boundary_faces,) of each boundary face centre (index face -
    n_internal_faces); exactly 0 on the wall faces themselves."""
    segments, faces = wall_segments(mesh, wall_patches)
    d = wall_distance(geom.face_centre[mesh.n_internal_faces :], periodic_images(mesh, segments))[0]
    d[faces - mesh.n_internal_faces] = 0.0
    return d
