"""The second-order wall gradient (fvrans.fv.wall_gradient): exact for quadratic fields at straight
walls on any cells and orientation, kinematics of the velocity at a no-slip wall, and the weights
that keep the deferred wall flux stable on stretched cells along a curved wall."""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.fv.wall_gradient import WallGradient
from fvrans.mesh import Mesh, compute_geometry
from fvrans.mesh.generate import bump_channel, channel, flat_plate_family
from fvrans.mesh.geometry import polygon_second_moments

H = np.array([[0.7, -0.3], [-0.3, 1.1]])
G = np.array([0.4, -0.9])


def quadratic(x: np.ndarray) -> np.ndarray:
    return 0.25 + x @ G + 0.5 * np.einsum("ij,jk,ik->i", x, H, x)


def averages(mesh: Mesh, geom) -> np.ndarray:
    """Exact cell averages of the quadratic: centroid value plus H : I / 2."""
    m = polygon_second_moments(mesh.points, mesh.cell_offsets, mesh.cell_points, geom.cell_centre)
    return quadratic(geom.cell_centre) + 0.5 * (H[0, 0] * m[:, 0] + 2 * H[0, 1] * m[:, 1] + H[1, 1] * m[:, 2])


def turned(mesh: Mesh, angle: float) -> Mesh:
    c, s = np.cos(angle), np.sin(angle)
    return Mesh.from_arrays(mesh.points @ np.array([[c, -s], [s, c]]).T, [mesh.cell(k) for k in range(mesh.n_cells)],
                            {p.name: mesh.face_points[p.start : p.stop] for p in mesh.patches})


@pytest.mark.parametrize("triangles, angle, grading", [
    (False, 0.0, None), (True, 0.0, None), (False, 0.5, 1e-3), (True, 1.1, 0.01),
])
def test_exact_for_quadratic_fields_at_straight_walls(triangles, angle, grading):
    """Every boundary face of the channel (walls and the two open ends, all as known data), corner
    faces included (they take the next ring of cells)."""
    mesh = turned(channel(2.0, 1.0, 10, 12, grading_y=grading, triangles=triangles), angle)
    geom = compute_geometry(mesh)
    nfi = mesh.n_internal_faces
    faces = np.arange(nfi, mesh.n_faces)
    wg = WallGradient(mesh, geom, faces, np.ones(mesh.n_boundary_faces, bool))
    g = wg(averages(mesh, geom), quadratic(geom.face_centre[nfi:]))
    assert np.all(wg.order == 2)
    exact = G + geom.face_centre[faces] @ H
    np.testing.assert_allclose(g, exact, atol=1e-10 * np.abs(exact).max())


def test_velocity_at_a_wall_at_rest_is_pure_shear():
    """u = (a y + b y^2, 0) above the wall y = 0: G = [[0, a], [0, 0]] at the wall (du/dt = 0, and
    continuity gives dv/dy = 0), whatever the fitted normal derivative of v."""
    mesh = channel(2.0, 1.0, 8, 8, triangles=True)
    geom = compute_geometry(mesh)
    wall = mesh.patch("lower_wall")
    known = np.zeros(mesh.n_boundary_faces, bool)
    known[wall.start - mesh.n_internal_faces : wall.stop - mesh.n_internal_faces] = True
    wg = WallGradient(mesh, geom, wall.faces, known)
    y = geom.cell_centre[:, 1]
    m = polygon_second_moments(mesh.points, mesh.cell_offsets, mesh.cell_points, geom.cell_centre)
    u = np.stack([3.0 * y + 2.0 * (y**2 + m[:, 2]), 0.7 * y], axis=1)  # v = 0.7 y: not divergence-free
    ub = np.zeros((mesh.n_boundary_faces, 2))
    gv = wg.velocity(u, ub)
    np.testing.assert_allclose(gv[:, 0, 1], 3.0, rtol=1e-10)
    np.testing.assert_allclose(gv[:, [0, 1, 1], [0, 0, 1]], 0.0, atol=1e-10)


def test_weights_of_stretched_cells_on_a_curved_wall_follow_the_wall():
    """Wall cells of aspect ratio ~250 on the flank of a bump: the fitted d/dn weighs the wall cell
    about as a straight wall would (measured 1.39 .. 1.40 over the distance d, 0.71 at the two corner
    faces; with Cartesian offsets it came out negative on the flank and the run stalled)."""
    mesh = bump_channel(bump_height=0.3, nx_down=40, ny=32, wall_spacing=1e-4)
    geom = compute_geometry(mesh)
    wall = mesh.patch("lower_wall")
    known = np.zeros(mesh.n_boundary_faces, bool)
    known[wall.start - mesh.n_internal_faces : wall.stop - mesh.n_internal_faces] = True
    wg = WallGradient(mesh, geom, wall.faces, known)
    owner = mesh.face_owner[wall.faces]
    r = geom.face_centre[wall.faces] - geom.cell_centre[owner]
    d = np.abs(np.einsum("ij,ij->i", r, geom.face_normal[wall.faces]))
    weight = np.array([wg.coef[wg.ptr[k] : wg.ptr[k + 1]][wg.idx[wg.ptr[k] : wg.ptr[k + 1]] == owner[k]][0]
                       @ wg.normal[k] for k in range(len(owner))]) * d
    assert geom.cell_aspect_ratio[owner].max() > 200
    ends = np.isin(np.arange(len(owner)), np.argsort(geom.face_centre[wall.faces, 0])[[0, -1]])
    assert weight[~ends].min() > 1.2 and weight[~ends].max() < 2.0
    assert weight[ends].min() > 0.5  # the corner faces with the inlet and outlet (next ring of cells)


def test_cells_ahead_of_a_leading_edge_are_left_out():
    """The plate starts at x = 0 after a symmetry plane: the stencil of its first face holds no cell
    with x < 0 (they tied the wall shear to the flow ahead of the plate)."""
    mesh = flat_plate_family("coarse")
    geom = compute_geometry(mesh)
    wall = mesh.patch("plate")
    known = np.zeros(mesh.n_boundary_faces, bool)
    known[wall.start - mesh.n_internal_faces : wall.stop - mesh.n_internal_faces] = True
    wg = WallGradient(mesh, geom, wall.faces, known)
    k = int(np.argmin(geom.face_centre[wall.faces, 0]))
    cells = wg.idx[wg.ptr[k] : wg.ptr[k + 1]]
    cells = cells[cells >= 0]
    assert len(cells) >= 6 and geom.cell_centre[cells, 0].min() > 0.0
    assert wg.order[k] == 2
