"""Exact wall distance (minimum distance to a union of wall segments).

References:
* Brute force: the Euclidean distance from p to the segment a + t (b - a), t in [0, 1], is
  |p - (a + t* (b - a))| with t* the orthogonal projection parameter clamped to [0, 1]
  (Schneider & Eberly 2003, Geometric Tools for Computer Graphics, sec. 6.1; from memory),
  minimised over every segment, O(N M). It is written here independently of the kernel, which
  uses the perpendicular (cross product) form in the interior.
* Flat wall y = 0 covering the whole domain: d = y (elementary geometry).
* Inscribed regular n-gon of a circle of radius R: the chord k is the line at distance R cos(pi/n)
  from the centre with normal at angle phi_k, of half-length R sin(pi/n), so in that frame
  d = sqrt((u - R cos(pi/n))^2 + max(|v| - R sin(pi/n), 0)^2) (elementary geometry). The polygon
  and the circle are at Hausdorff distance equal to the sagitta R (1 - cos(pi/n)), and a distance
  function changes by at most the Hausdorff distance of the sets (1-Lipschitz), so
  |d - |r - R|| <= R (1 - cos(pi/n)) (elementary geometry).
* Corners: inside a right-angled concave corner d = min(x, y); beyond a convex corner (a step)
  the nearest wall point is the corner itself, d = |p - corner| (elementary geometry).
"""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.errors import CaseError
from fvrans.mesh import Mesh, compute_geometry
from fvrans.physics.wall_distance import (
    SegmentTree,
    boundary_face_wall_distance,
    cell_wall_distance,
    wall_distance,
    wall_segments,
)

ROUND_OFF = 1e-13  # relative to the size of the set-up (lengths are O(1))


# ---------------------------------------------------------------------------------------------
def brute_force(points: np.ndarray, segments: np.ndarray, chunk: int = 256) -> np.ndarray:
    """min over segments of |p - (a + clip(t, 0, 1) e)|, t = (p - a).e / |e|^2 (O(N M))."""
    a = segments[:, 0, :]
    e = segments[:, 1, :] - a
    l2 = np.einsum("ij,ij->i", e, e)
    safe = np.where(l2 > 0.0, l2, 1.0)
    out = np.empty(len(points))
    for lo in range(0, len(points), chunk):
        p = points[lo : lo + chunk, None, :]
        t = np.clip(np.einsum("nmk,mk->nm", p - a[None], e) / safe, 0.0, 1.0)
        q = a[None] + t[..., None] * e[None]
        out[lo : lo + chunk] = np.sqrt(np.sum((p - q) ** 2, axis=2)).min(axis=1)
    return out


def distance_to_segment(points: np.ndarray, segments: np.ndarray) -> np.ndarray:
    """Distance of point i to segment i (same independent formula as brute_force)."""
    a = segments[:, 0, :]
    e = segments[:, 1, :] - a
    l2 = np.einsum("ij,ij->i", e, e)
    t = np.clip(np.einsum("ij,ij->i", points - a, e) / np.where(l2 > 0.0, l2, 1.0), 0.0, 1.0)
    return np.linalg.norm(points - (a + t[:, None] * e), axis=1)


def grid(nx: int, ny: int, x0: float, x1: float, y0: float, y1: float, perturb: float = 0.0, seed: int = 0):
    """Points and quad cells of a structured grid; interior points moved by up to ``perturb``
    times the spacing (convex cells for perturb <= 0.25)."""
    X, Y = np.meshgrid(np.linspace(x0, x1, nx + 1), np.linspace(y0, y1, ny + 1))
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)
    i = np.tile(np.arange(nx + 1), ny + 1)
    j = np.repeat(np.arange(ny + 1), nx + 1)
    if perturb > 0.0:
        inner = (i > 0) & (i < nx) & (j > 0) & (j < ny)
        rng = np.random.default_rng(seed)
        pts[inner] += rng.uniform(-perturb, perturb, (inner.sum(), 2)) * [(x1 - x0) / nx, (y1 - y0) / ny]
    ii, jj = (a.ravel() for a in np.meshgrid(np.arange(nx), np.arange(ny)))

    def p(i, j):
        return j * (nx + 1) + i

    cells = np.stack([p(ii, jj), p(ii + 1, jj), p(ii + 1, jj + 1), p(ii, jj + 1)], axis=1)
    return pts, cells


def boundary_edges(cells: np.ndarray) -> np.ndarray:
    """Edges used by one cell only."""
    e = np.concatenate([np.stack([cells[:, k], cells[:, (k + 1) % cells.shape[1]]], axis=1) for k in range(4)])
    key = np.sort(e, axis=1)
    _, inv, cnt = np.unique(key, axis=0, return_inverse=True, return_counts=True)
    return e[cnt[inv.ravel()] == 1]


def box_mesh(nx: int, ny: int, lx: float, ly: float, perturb: float, seed: int) -> Mesh:
    """[0, lx] x [0, ly] with patches left, right, bottom, top."""
    pts, cells = grid(nx, ny, 0.0, lx, 0.0, ly, perturb, seed)
    e = boundary_edges(cells)
    mid = 0.5 * (pts[e[:, 0]] + pts[e[:, 1]])
    tol = 1e-12
    sides = {
        "left": mid[:, 0] < tol,
        "right": mid[:, 0] > lx - tol,
        "bottom": mid[:, 1] < tol,
        "top": mid[:, 1] > ly - tol,
    }
    return Mesh.from_arrays(pts, cells, {k: e[v] for k, v in sides.items()}, source="test box")


# ---------------------------------------------------------------------------------------------
@pytest.mark.parametrize("seed", range(4))
def test_random_points_and_segments_equal_brute_force(seed: int) -> None:
    """Reference: brute force O(N M) (module docstring). Segment lengths over four decades,
    some of zero length and some repeated; points near and far (up to 50 wall sizes away)."""
    rng = np.random.default_rng(seed)
    m = 400
    centre = rng.uniform(-1.0, 1.0, (m, 2))
    half = 10.0 ** rng.uniform(-4.0, 0.0, m)
    ang = rng.uniform(0.0, np.pi, m)
    d = half[:, None] * np.stack([np.cos(ang), np.sin(ang)], axis=1)
    seg = np.stack([centre - d, centre + d], axis=1)
    seg[:10, 1] = seg[:10, 0]  # points as segments
    seg[10:20] = seg[20:30]  # duplicates
    pts = np.concatenate([rng.uniform(-1.5, 1.5, (2000, 2)), rng.uniform(-50.0, 50.0, (500, 2))])
    dist, near = wall_distance(pts, seg)
    ref = brute_force(pts, seg)
    np.testing.assert_allclose(dist, ref, rtol=ROUND_OFF, atol=ROUND_OFF)
    # the reported segment really is at that distance
    np.testing.assert_allclose(distance_to_segment(pts, seg[near]), ref, rtol=ROUND_OFF, atol=ROUND_OFF)


def test_many_segments_deep_tree_equals_brute_force() -> None:
    """Reference: brute force. A wiggly wall of 5000 faces (deep tree) and clustered faces."""
    rng = np.random.default_rng(7)
    x = np.sort(np.concatenate([rng.uniform(0.0, 1.0, 4000), 0.5 + 1e-3 * rng.standard_normal(1001)]))
    y = 0.05 * np.sin(40.0 * x) + 1e-4 * rng.standard_normal(len(x))
    wall = np.stack([x, y], axis=1)
    seg = np.stack([wall[:-1], wall[1:]], axis=1)
    pts = np.stack([rng.uniform(-0.2, 1.2, 1500), 10.0 ** rng.uniform(-5.0, 0.5, 1500) - 0.1], axis=1)
    dist, near = wall_distance(pts, seg)
    ref = brute_force(pts, seg)
    np.testing.assert_allclose(dist, ref, rtol=ROUND_OFF, atol=ROUND_OFF)
    np.testing.assert_allclose(distance_to_segment(pts, seg[near]), ref, rtol=ROUND_OFF, atol=ROUND_OFF)


@pytest.mark.parametrize(("walls", "seed"), [(["bottom"], 1), (["bottom", "top"], 2), (["left", "top"], 3)])
def test_random_meshes_equal_brute_force(walls: list[str], seed: int) -> None:
    """Reference: brute force over the wall faces of a perturbed quad mesh."""
    mesh = box_mesh(37, 23, 2.0, 1.0, 0.25, seed)
    geom = compute_geometry(mesh)
    faces = np.concatenate([mesh.patch(w).faces for w in walls])
    seg = mesh.points[mesh.face_points[faces]]
    d = cell_wall_distance(mesh, geom, walls)
    assert d.shape == (mesh.n_cells,)
    np.testing.assert_allclose(d, brute_force(geom.cell_centre, seg), rtol=ROUND_OFF, atol=ROUND_OFF)
    db = boundary_face_wall_distance(mesh, geom, walls)
    xb = geom.face_centre[mesh.n_internal_faces :]
    np.testing.assert_allclose(db, brute_force(xb, seg), rtol=0.0, atol=ROUND_OFF)


def test_flat_wall_distance_is_y() -> None:
    """Reference: a flat wall y = 0 under the whole domain gives d = y (module docstring)."""
    mesh = box_mesh(40, 30, 3.0, 1.5, 0.25, 11)
    geom = compute_geometry(mesh)
    d = cell_wall_distance(mesh, geom, ["bottom"])
    np.testing.assert_allclose(d, geom.cell_centre[:, 1], rtol=4e-16, atol=1e-16)
    db = boundary_face_wall_distance(mesh, geom, ["bottom"])
    np.testing.assert_allclose(db, geom.face_centre[mesh.n_internal_faces :, 1], rtol=4e-16, atol=1e-16)
    bottom = mesh.patch("bottom").faces - mesh.n_internal_faces
    assert np.all(db[bottom] == 0.0)


def chord_distance(pts: np.ndarray, n: int, R: float) -> np.ndarray:
    """Distance to the inscribed n-gon, chord by chord in the chord's own frame (module docstring)."""
    phi = (np.arange(n) + 0.5) * 2.0 * np.pi / n  # normal direction of chord k
    u = pts[:, 0, None] * np.cos(phi) + pts[:, 1, None] * np.sin(phi)
    v = -pts[:, 0, None] * np.sin(phi) + pts[:, 1, None] * np.cos(phi)
    du = u - R * np.cos(np.pi / n)
    dv = np.maximum(np.abs(v) - R * np.sin(np.pi / n), 0.0)
    return np.sqrt(du**2 + dv**2).min(axis=1)


def polygon(n: int, R: float) -> np.ndarray:
    th = np.arange(n + 1) * 2.0 * np.pi / n
    v = R * np.stack([np.cos(th), np.sin(th)], axis=1)
    return np.stack([v[:-1], v[1:]], axis=1)


def test_polygon_equals_analytic_chord_distance() -> None:
    """Reference: analytic distance to each chord of an inscribed 48-gon (module docstring);
    includes the centre, from which every chord is a candidate at the same distance."""
    n, R = 48, 1.3
    rng = np.random.default_rng(5)
    r = np.concatenate([[0.0], rng.uniform(0.0, 4.0 * R, 3000)])
    th = rng.uniform(0.0, 2.0 * np.pi, len(r))
    pts = np.stack([r * np.cos(th), r * np.sin(th)], axis=1)
    d, _ = wall_distance(pts, polygon(n, R))
    np.testing.assert_allclose(d, chord_distance(pts, n, R), rtol=ROUND_OFF, atol=ROUND_OFF)
    assert d[0] == pytest.approx(R * np.cos(np.pi / n), rel=1e-15)


def test_fine_polygon_approaches_circle_within_sagitta() -> None:
    """Reference: |d - |r - R|| <= R (1 - cos(pi/n)) (Hausdorff bound, module docstring); the
    bound is reached on the rays through the chord midpoints (d = r - R cos(pi/n) outside) and is
    0 on the rays through the vertices (d = |r - R|)."""
    n, R = 1000, 0.7
    sagitta = R * (1.0 - np.cos(np.pi / n))
    seg = polygon(n, R)
    rng = np.random.default_rng(9)
    r = rng.uniform(0.0, 3.0, 20000)
    th = rng.uniform(0.0, 2.0 * np.pi, len(r))
    d, _ = wall_distance(np.stack([r * np.cos(th), r * np.sin(th)], axis=1), seg)
    assert np.all(np.abs(d - np.abs(r - R)) <= sagitta + ROUND_OFF)

    k = rng.integers(0, n, 200)
    r = rng.uniform(1.01 * R, 5.0 * R, 200)
    mid_dir = (k + 0.5) * 2.0 * np.pi / n
    d_mid, near = wall_distance(np.stack([r * np.cos(mid_dir), r * np.sin(mid_dir)], axis=1), seg)
    np.testing.assert_allclose(d_mid, r - R * np.cos(np.pi / n), rtol=ROUND_OFF)
    np.testing.assert_array_equal(near, k)
    vert_dir = k * 2.0 * np.pi / n
    d_vert, _ = wall_distance(np.stack([r * np.cos(vert_dir), r * np.sin(vert_dir)], axis=1), seg)
    np.testing.assert_allclose(d_vert, r - R, rtol=ROUND_OFF)


def test_concave_corner_distance_is_min_of_x_and_y() -> None:
    """Reference: walls x = 0 and y = 0 of the unit square give d = min(x, y) (module docstring)."""
    mesh = box_mesh(30, 30, 1.0, 1.0, 0.2, 4)
    geom = compute_geometry(mesh)
    d = cell_wall_distance(mesh, geom, ["left", "bottom"])
    np.testing.assert_allclose(d, geom.cell_centre.min(axis=1), rtol=4e-16, atol=1e-16)


def test_convex_corner_of_a_step_gives_distance_to_the_corner() -> None:
    """Reference: the step [-1, 0] x [-1, 0] removed from [-1, 1]^2, walls on its two faces:
    d = y left of the corner, x below it, and |p| (the corner point) in the quadrant beyond it."""
    pts, cells = grid(24, 24, -1.0, 1.0, -1.0, 1.0, 0.0, 0)
    c = pts[cells].mean(axis=1)
    cells = cells[~((c[:, 0] < 0.0) & (c[:, 1] < 0.0))]
    e = boundary_edges(cells)
    mid = 0.5 * (pts[e[:, 0]] + pts[e[:, 1]])
    on_step = ((np.abs(mid[:, 1]) < 1e-12) & (mid[:, 0] < 0.0)) | ((np.abs(mid[:, 0]) < 1e-12) & (mid[:, 1] < 0.0))
    mesh = Mesh.from_arrays(pts, cells, {"step": e[on_step], "open": e[~on_step]}, source="test step")
    geom = compute_geometry(mesh)
    d = cell_wall_distance(mesh, geom, ["step"])
    x, y = geom.cell_centre.T
    expected = np.where((x > 0.0) & (y > 0.0), np.hypot(x, y), np.where(x < 0.0, y, x))
    np.testing.assert_allclose(d, expected, rtol=4e-16, atol=1e-16)
    assert np.count_nonzero((x > 0.0) & (y > 0.0)) > 100  # the corner region is really tested


def test_points_on_the_wall_are_at_zero_distance() -> None:
    """Reference: a point of a segment is at distance 0 (definition). End points, points of
    axis-aligned segments and of 45-degree segments are exactly representable."""
    seg = np.array(
        [
            [[0.0, 0.0], [1.0, 0.0]],
            [[1.0, 0.0], [1.0, 2.0]],
            [[1.0, 2.0], [-1.0, 0.0]],
            [[3.0, 3.0], [3.0, 3.0]],  # a single point
        ]
    )
    on = np.array([[0.0, 0.0], [0.3, 0.0], [1.0, 1.75], [0.5, 1.5], [-0.25, 0.75], [-1.0, 0.0], [3.0, 3.0]])
    d, _ = wall_distance(on, seg)
    np.testing.assert_array_equal(d, 0.0)
    mesh = box_mesh(6, 5, 1.0, 1.0, 0.2, 3)
    geom = compute_geometry(mesh)
    db = boundary_face_wall_distance(mesh, geom, ["left", "top"])
    faces = np.concatenate([mesh.patch("left").faces, mesh.patch("top").faces]) - mesh.n_internal_faces
    np.testing.assert_array_equal(db[faces], 0.0)
    d_pts, _ = wall_distance(mesh.points, wall_segments(mesh, ["left"])[0])
    np.testing.assert_array_equal(d_pts[np.abs(mesh.points[:, 0]) == 0.0], 0.0)


def test_tree_is_reusable_and_empty_queries_work() -> None:
    """Reference: brute force; a tree built once answers repeated queries."""
    rng = np.random.default_rng(2)
    seg = rng.uniform(-1.0, 1.0, (50, 2, 2))
    tree = SegmentTree(seg)
    for _ in range(2):
        pts = rng.uniform(-2.0, 2.0, (300, 2))
        np.testing.assert_allclose(tree.query(pts)[0], brute_force(pts, seg), rtol=ROUND_OFF, atol=ROUND_OFF)
    d, s = tree.query(np.empty((0, 2)))
    assert d.shape == (0,) and s.shape == (0,)


def test_errors_name_the_problem() -> None:
    mesh = box_mesh(3, 3, 1.0, 1.0, 0.0, 0)
    geom = compute_geometry(mesh)
    with pytest.raises(CaseError, match="at least one wall patch"):
        cell_wall_distance(mesh, geom, [])
    with pytest.raises(CaseError, match=r"'wing'.*'left'"):
        cell_wall_distance(mesh, geom, ["wing"])
    with pytest.raises(ValueError, match="no wall segments"):
        wall_distance(np.zeros((3, 2)), np.zeros((0, 2, 2)))
    with pytest.raises(ValueError, match=r"shape \(m, 2, 2\)"):
        wall_distance(np.zeros((3, 2)), np.zeros((4, 2)))
    with pytest.raises(ValueError, match=r"shape \(n, 2\)"):
        wall_distance(np.zeros((3, 3)), np.zeros((1, 2, 2)))
    with pytest.raises(ValueError, match="point 1 is not finite"):
        wall_distance(np.array([[0.0, 0.0], [np.nan, 1.0]]), np.zeros((1, 2, 2)))
    with pytest.raises(ValueError, match="segment 0 has a non-finite"):
        wall_distance(np.zeros((1, 2)), np.array([[[0.0, np.inf], [1.0, 1.0]]]))
