"""Geometric quantities of a Mesh, as flat contiguous arrays ready for numba kernels.

Conventions (face f with owner O, neighbour N, outward unit normal n of O, length |S_f|):

* ``face_delta``: d = x_N - x_O on internal faces, x_f - x_O on boundary faces; on faces joining a
  periodic pair x_N is the neighbour's image beside the owner, x_N + ``face_shift``.
* ``face_weight``: w such that phi at the point where the segment O-N crosses the face line,
  x_ip = x_O + t d with t = ((x_f - x_O) . n) / (d . n), is w phi_O + (1 - w) phi_N, w = 1 - t.
  Boundary faces have w = 1.
* ``face_skew``: x_f - x_ip, the skewness vector (zero on boundary faces).
* non-orthogonality angle = angle between d and n; skewness = |x_f - x_ip| / |d|.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fvrans.mesh.mesh import Mesh


@dataclass(frozen=True)
class Geometry:
    """Cell and face geometry derived from a :class:`Mesh` (computed once per mesh)."""

    cell_centre: np.ndarray  # (nc, 2) polygon centroids
    cell_area: np.ndarray  # (nc,)
    face_centre: np.ndarray  # (nf, 2) edge mid-points
    face_length: np.ndarray  # (nf,)
    face_normal: np.ndarray  # (nf, 2) unit, out of the owner
    face_area_vector: np.ndarray  # (nf, 2) = normal * length
    face_delta: np.ndarray  # (nf, 2) owner -> neighbour (or -> face centre on the boundary)
    face_weight: np.ndarray  # (nf,) owner weight of linear interpolation
    face_skew: np.ndarray  # (nf, 2) x_f - x_ip
    cell_aspect_ratio: np.ndarray  # (nc,) see cell_aspect_ratios()
    face_shift: np.ndarray  # (nf, 2) moves the neighbour beside the owner (periodic faces; else 0)

    @property
    def face_nonorth_deg(self) -> np.ndarray:
        """(nf,) angle between d and n in degrees (made on each read: the mesh-quality report reads
        it, no solver does, so it is not held beside a run)."""
        d = self.face_delta
        cosang = np.clip(np.einsum("ij,ij->i", d, self.face_normal) / np.hypot(d[:, 0], d[:, 1]), -1.0, 1.0)
        return np.degrees(np.arccos(cosang))

    @property
    def face_skewness(self) -> np.ndarray:
        """(nf,) |x_f - x_ip| / |d| (made on each read, as ``face_nonorth_deg``)."""
        d, skew = self.face_delta, self.face_skew
        return np.hypot(skew[:, 0], skew[:, 1]) / np.hypot(d[:, 0], d[:, 1])

    @property
    def n_cells(self) -> int:
        return len(self.cell_area)

    @property
    def n_faces(self) -> int:
        return len(self.face_length)


def polygon_centroids(points: np.ndarray, offsets: np.ndarray, flat: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Area and centroid of each polygon by the shoelace formulas, relative to its first vertex.

    A = 1/2 sum (x_i y_{i+1} - x_{i+1} y_i),  C = 1/(6A) sum (p_i + p_{i+1}) (x_i y_{i+1} - x_{i+1} y_i).
    """
    n = len(offsets) - 1
    sizes = np.diff(offsets)
    cell_of = np.repeat(np.arange(n), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt = offsets[cell_of] + (pos + 1) % sizes[cell_of]
    base = points[flat[offsets[:-1]]]
    p = points[flat] - base[cell_of]
    q = points[flat[nxt]] - base[cell_of]
    cross = p[:, 0] * q[:, 1] - p[:, 1] * q[:, 0]
    area = 0.5 * np.bincount(cell_of, weights=cross, minlength=n)
    cx = np.bincount(cell_of, weights=(p[:, 0] + q[:, 0]) * cross, minlength=n) / (6.0 * area)
    cy = np.bincount(cell_of, weights=(p[:, 1] + q[:, 1]) * cross, minlength=n) / (6.0 * area)
    centre = base + np.stack([cx, cy], axis=1)
    return area, np.ascontiguousarray(centre)


def polygon_second_moments(
    points: np.ndarray, offsets: np.ndarray, flat: np.ndarray, centre: np.ndarray
) -> np.ndarray:
    """Central second moments of each polygon per unit area, (n, 3) = (I_xx, I_xy, I_yy) with
    I_xx = (1/A) int (x - x_c)^2 dA etc., from the vertices relative to the centroid x_c:
    int x^2 = 1/12 sum c_i (x_i^2 + x_i x_j + x_j^2), int xy = 1/24 sum c_i (x_i y_j + 2 x_i y_i
    + 2 x_j y_j + x_j y_i), c_i = x_i y_j - x_j y_i, j = i + 1 (Green's theorem, edge by edge).

    >>> sq = np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]])
    >>> polygon_second_moments(sq, np.array([0, 4]), np.arange(4), np.array([[1.0, 0.5]])).round(6).tolist()
    [[0.333333, 0.0, 0.083333]]
    """
    n = len(offsets) - 1
    sizes = np.diff(offsets)
    cell_of = np.repeat(np.arange(n), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt = offsets[cell_of] + (pos + 1) % sizes[cell_of]
    p = points[flat] - centre[cell_of]
    q = points[flat[nxt]] - centre[cell_of]
    c = p[:, 0] * q[:, 1] - q[:, 0] * p[:, 1]
    area = 0.5 * np.bincount(cell_of, weights=c, minlength=n)
    ixx = np.bincount(cell_of, weights=c * (p[:, 0] ** 2 + p[:, 0] * q[:, 0] + q[:, 0] ** 2), minlength=n) / 12.0
    iyy = np.bincount(cell_of, weights=c * (p[:, 1] ** 2 + p[:, 1] * q[:, 1] + q[:, 1] ** 2), minlength=n) / 12.0
    ixy = np.bincount(
        cell_of, weights=c * (p[:, 0] * q[:, 1] + 2 * p[:, 0] * p[:, 1] + 2 * q[:, 0] * q[:, 1] + q[:, 0] * p[:, 1]),
        minlength=n,
    ) / 24.0
    return np.stack([ixx, ixy, iyy], axis=1) / area[:, None]


def cell_aspect_ratios(mesh: Mesh, area: np.ndarray) -> np.ndarray:
    """Aspect ratio of each cell: L_max^2 / (k A), k = 2 for triangles, 1 otherwise.

    Equals a/b for an a x b rectangle and 2/sqrt(3) ~ 1.15 for an equilateral triangle.
    """
    sizes = mesh.cell_sizes()
    n = mesh.n_cells
    offsets, flat, pts = mesh.cell_offsets, mesh.cell_points, mesh.points
    cell_of = np.repeat(np.arange(n), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt = offsets[cell_of] + (pos + 1) % sizes[cell_of]
    edge = np.linalg.norm(pts[flat[nxt]] - pts[flat], axis=1)
    lmax = np.zeros(n)
    np.maximum.at(lmax, cell_of, edge)
    k = np.where(sizes == 3, 2.0, 1.0)
    return lmax * lmax / (k * area)


def compute_geometry(mesh: Mesh) -> Geometry:
    """All geometric arrays of ``mesh`` (see the module docstring for the conventions)."""
    pts = mesh.points
    area, centre = polygon_centroids(pts, mesh.cell_offsets, mesh.cell_points)
    p0 = pts[mesh.face_points[:, 0]]
    p1 = pts[mesh.face_points[:, 1]]
    fc = 0.5 * (p0 + p1)
    e = p1 - p0
    length = np.hypot(e[:, 0], e[:, 1])
    normal = np.stack([e[:, 1], -e[:, 0]], axis=1) / length[:, None]
    own = mesh.face_owner
    nb = mesh.face_neighbour
    ni = mesh.n_internal_faces
    xo = centre[own]
    shift = mesh.face_shift()
    xn = fc.copy()
    xn[:ni] = centre[nb[:ni]] + shift[:ni]
    d = xn - xo
    dn = np.einsum("ij,ij->i", d, normal)
    t = np.einsum("ij,ij->i", fc - xo, normal) / dn
    t[ni:] = 1.0
    w = 1.0 - t
    w[ni:] = 1.0
    xip = xo + t[:, None] * d
    skew = fc - xip
    skew[ni:] = 0.0
    c = np.ascontiguousarray
    return Geometry(
        cell_centre=c(centre),
        cell_area=c(area),
        face_centre=c(fc),
        face_length=c(length),
        face_normal=c(normal),
        face_area_vector=c(normal * length[:, None]),
        face_delta=c(d),
        face_weight=c(w),
        face_skew=c(skew),
        cell_aspect_ratio=c(cell_aspect_ratios(mesh, area)),
        face_shift=c(shift),
    )
