"""Wall shear stress, wall pressure, y+, zero-shear points and forces against analytic fields.

References:
* plane Couette flow u = U y / h, tau = mu U / h; plane Poiseuille flow
  u = G y (h - y) / (2 mu) with p = p0 - G x, wall shear G h / 2 and the momentum balance
  "pressure drop x height = shear on both walls": White 2006, Viscous Fluid Flow, 3rd ed.,
  section 3-2 (from memory).
* Archimedes' principle: a body in the hydrostatic pressure p = p0 - rho g y feels the upward
  force rho g A per unit depth (A its area); any constant pressure gives zero net force on a
  closed body (divergence theorem).
* viscous sublayer u+ = y+ (Pope 2000, Turbulent Flows, section 7.1.4, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from post_meshes import cell_averages, channel, channel_boundary, rotation, square_with_hole

from fvrans.errors import CaseError, MeshError
from fvrans.mesh import Mesh, compute_geometry
from fvrans.physics.boundary import build_flow_boundary
from fvrans.post import (
    all_wall_data,
    order_patch_faces,
    patch_forces,
    sign_changes,
    unit_tangent,
    wall_data,
    zero_shear_points,
)

RHO, MU = 1.2, 1.8e-3


def _zeros(nc):
    return np.zeros(nc), np.zeros((nc, 2))


@pytest.mark.parametrize(
    "triangles, perturb, angle",
    [(False, 0.0, 0.0), (True, 0.0, 0.0), (False, 0.25, 0.0), (True, 0.2, np.radians(30.0))],
)
def test_couette_shear_is_exact(triangles, perturb, angle):
    """A linear profile: the wall gradient is exact on any cell shape and rotation."""
    U, h, L = 2.0, 1.0, 2.0
    mesh, geom = channel(8, 5, L, h, triangles=triangles, perturb=perturb, angle=angle)
    R = rotation(angle)
    e_x = R[:, 0]
    e_y = R[:, 1]
    bc = channel_boundary(mesh, geom, top_velocity=U * e_x,
                          inlet_velocity=lambda x, y: tuple(np.outer(U * (x * e_y[0] + y * e_y[1]) / h, e_x).T))
    eta = geom.cell_centre @ e_y  # distance from the bottom wall
    vel = (U * eta / h)[:, None] * e_x[None, :]
    p, gp = _zeros(mesh.n_cells)
    u_ref = 3.0
    bottom = wall_data(mesh, geom, bc, "bottom", vel, p, gp, RHO, MU, u_ref)
    top = wall_data(mesh, geom, bc, "top", vel, p, gp, RHO, MU, u_ref)
    tau = MU * U / h
    np.testing.assert_allclose(bottom.tau_w, tau, rtol=1e-11)
    # the top wall moves faster than the fluid next to it: the fluid holds it back
    np.testing.assert_allclose(top.tau_w, -tau, rtol=1e-11)
    q = 0.5 * RHO * u_ref**2
    np.testing.assert_allclose(bottom.cf, tau / q, rtol=1e-11)
    # tangent (t_x > 0 for both walls here), normal into the fluid
    np.testing.assert_allclose(bottom.tangent, np.tile(e_x, (len(bottom), 1)), atol=1e-14)
    np.testing.assert_allclose(bottom.normal, np.tile(e_y, (len(bottom), 1)), atol=1e-14)
    np.testing.assert_allclose(top.normal, np.tile(-e_y, (len(top), 1)), atol=1e-14)
    np.testing.assert_allclose(bottom.d_perp, eta[mesh.face_owner[bottom.faces]], rtol=1e-12)
    # force on a wall of length L: tau L along the wall, nothing normal to it (p = p_ref)
    for w, sign in ((bottom, 1.0), (top, -1.0)):
        F = patch_forces(w, l_ref=0.5, flow_direction=tuple(e_x))
        np.testing.assert_allclose(F.total, sign * tau * L * e_x, rtol=1e-11, atol=1e-15)
        np.testing.assert_allclose(F.pressure, 0.0, atol=1e-15)
        c = F.coefficients()
        assert c["Cd"] == pytest.approx(sign * tau * L / (q * 0.5), rel=1e-11)
        assert c["Cl"] == pytest.approx(0.0, abs=1e-12)
    # viscous sublayer: u_P / u_tau equals y+ of the first cell for a linear profile
    uP = (vel[mesh.face_owner[bottom.faces]] * e_x).sum(axis=1)
    np.testing.assert_allclose(uP / bottom.u_tau, bottom.y_plus, rtol=1e-11)
    np.testing.assert_allclose(bottom.u_tau, np.sqrt(tau / RHO), rtol=1e-12)


@pytest.mark.parametrize("triangles, perturb, angle", [(False, 0.0, 0.0), (True, 0.2, np.radians(30.0))])
def test_poiseuille_shear_exact_and_pressure(triangles, perturb, angle):
    """Parabolic profile given as exact cell averages: the quadratic wall fit gives the exact
    wall shear G h / 2 on every face (the old one-sided difference gave G (h - y_P) / 2, first
    order), and the momentum balance "pressure drop x height = shear on both walls" holds
    exactly; a linear pressure is extrapolated exactly."""
    G, h, L, p0, p_ref = 0.3, 1.0, 2.0, 5.0, 1.0
    R = rotation(angle)
    e_x, e_y = R[:, 0], R[:, 1]

    def field(x, y):
        eta = x * e_y[0] + y * e_y[1]
        return np.outer(G / (2 * MU) * eta * (h - eta), e_x)

    for ny in (4, 8):
        mesh, geom = channel(6, ny, L, h, triangles=triangles, perturb=perturb, angle=angle)
        bc = channel_boundary(mesh, geom, inlet_velocity=lambda x, y: tuple(field(x, y).T))
        xi = geom.cell_centre @ e_x
        vel = cell_averages(mesh, geom, field)
        p = p0 - G * xi
        gp = np.tile(-G * e_x, (mesh.n_cells, 1))
        walls = all_wall_data(mesh, geom, bc, vel, p, gp, RHO, MU, 1.0, p_ref)
        assert sorted(walls) == ["bottom", "top"]
        for w in walls.values():
            assert np.all(w.fit_order == 2)
            np.testing.assert_allclose(w.tau_w, G * h / 2, rtol=1e-10)
            xw = np.stack([w.x, w.y], 1) @ e_x
            np.testing.assert_allclose(w.p_wall, p0 - G * xw, rtol=1e-13)
            np.testing.assert_allclose(w.cp, (p0 - G * xw - p_ref) / (0.5 * RHO), rtol=1e-12)
        # pressure force on the bottom wall pushes it down: -int (p - p_ref) dx
        Fb = patch_forces(walls["bottom"])
        fp = np.array(Fb.pressure)
        assert fp @ e_y == pytest.approx(-((p0 - p_ref) * L - G * L**2 / 2), rel=1e-13)
        assert fp @ e_x == pytest.approx(0.0, abs=1e-13)
        # momentum balance: shear on both walls balances the pressure drop over the height
        Fx = sum(np.array(patch_forces(w).viscous) @ e_x for w in walls.values())
        assert Fx == pytest.approx(G * L * h, rel=1e-10)


def test_pressure_extrapolation_on_skewed_triangles():
    mesh, geom = channel(5, 4, triangles=True, perturb=0.25, angle=0.4)
    bc = channel_boundary(mesh, geom)
    a, b = np.array([0.7, -1.3]), 2.0
    p = b + geom.cell_centre @ a
    gp = np.tile(a, (mesh.n_cells, 1))
    vel = np.zeros((mesh.n_cells, 2))
    w = wall_data(mesh, geom, bc, "top", vel, p, gp, RHO, MU, 1.0)
    np.testing.assert_allclose(w.p_wall, b + np.stack([w.x, w.y], 1) @ a, rtol=1e-13)


def test_closed_body_archimedes_and_constant_pressure():
    mesh, geom = square_with_hole(3)
    bc = build_flow_boundary(mesh, geom, {"outer": {"kind": "outer-flow", "velocity": (1.0, 0.0)},
                                          "body": {"kind": "wall"}})
    nc = mesh.n_cells
    vel = np.zeros((nc, 2))
    g, p0 = 9.81, 1.0e5
    p = p0 - RHO * g * geom.cell_centre[:, 1]
    gp = np.tile([0.0, -RHO * g], (nc, 1))
    w = wall_data(mesh, geom, bc, "body", vel, p, gp, RHO, MU, 1.0, p_ref=p0)
    F = patch_forces(w)
    area = 4.0  # the body is [1, 3]^2
    assert F.pressure[1] == pytest.approx(RHO * g * area, rel=1e-12)
    assert F.pressure[0] == pytest.approx(0.0, abs=1e-9)
    w2 = wall_data(mesh, geom, bc, "body", vel, np.full(nc, 3.0), np.zeros((nc, 2)), RHO, MU, 1.0)
    np.testing.assert_allclose(patch_forces(w2).pressure, 0.0, atol=1e-12)
    # the loop: one closed piece of length 8, arc length increasing; it starts at the corner of
    # largest x, then smallest y, (3, 1) and keeps the fluid on its left: along y = 1 towards -x
    assert w.closed == (True,)
    assert np.all(np.diff(w.s) > 0) and w.s[-1] + 0.5 * w.length[-1] == pytest.approx(8.0)
    assert (w.x[0], w.y[0], w.direction[0]) == pytest.approx((3.0 - 1.0 / 6.0, 1.0, -1.0))


def test_rigid_rotation_round_a_body_has_no_zero_shear_point():
    """Fluid turning round the square body: the shear along the wall keeps its sign although the
    x-positive tangent flips at two corners."""
    mesh, geom = square_with_hole(2)
    bc = build_flow_boundary(mesh, geom, {"outer": {"kind": "outer-flow", "velocity": (1.0, 0.0)},
                                          "body": {"kind": "wall"}})
    r = geom.cell_centre - 2.0
    vel = np.stack([-r[:, 1], r[:, 0]], axis=1)
    p, gp = _zeros(mesh.n_cells)
    w = wall_data(mesh, geom, bc, "body", vel, p, gp, RHO, MU, 1.0)
    assert np.any(w.tau_w > 0) and np.any(w.tau_w < 0)
    assert zero_shear_points(w) == []
    # the rotation exerts a torque but no net force on the square (symmetry)
    np.testing.assert_allclose(patch_forces(w).total, 0.0, atol=1e-14)


def test_zero_shear_points_of_a_sine_wall_shear():
    mesh, geom = channel(140, 3, length=7.0)
    bc = channel_boundary(mesh, geom, inlet_velocity=lambda x, y: (np.sin(x) * y, 0 * y))
    xc = geom.cell_centre
    dx = 7.0 / 140
    vel = np.zeros((mesh.n_cells, 2))
    # u = sin(x) y: tau_w = mu sin(x) on the bottom wall; exact averages over the rectangular cells
    vel[:, 0] = (np.cos(xc[:, 0] - dx / 2) - np.cos(xc[:, 0] + dx / 2)) / dx * xc[:, 1]
    p, gp = _zeros(mesh.n_cells)
    w = wall_data(mesh, geom, bc, "bottom", vel, p, gp, RHO, MU, 1.0)
    # the quadratic fit is exact up to the third derivatives: |error| <~ dx^2 mu max|u_xxy| = 2.5e-3 mu
    np.testing.assert_allclose(w.tau_w, MU * np.sin(w.x), rtol=0, atol=2.5e-3 * MU)
    pts = zero_shear_points(w)
    # linear interpolation of a zero of sin: error below h^2 max|f''| / (8 min|f'|) ~ 3e-4
    assert [p.x for p in pts] == pytest.approx([np.pi, 2 * np.pi], abs=3e-4)
    assert [p.s for p in pts] == pytest.approx([np.pi, 2 * np.pi], abs=3e-4)
    assert [p.kind for p in pts] == ["+to-", "-to+"]


def test_sign_changes_of_sine_on_scattered_points():
    rng = np.random.default_rng(3)
    x = np.sort(rng.uniform(0.0, 10.0, 400))
    x = np.r_[0.0, x, 10.0]
    h = np.max(np.diff(x))
    expected = [np.pi, 2 * np.pi, 3 * np.pi]
    tol = h**2 / 8 / np.min(np.abs(np.cos(expected))) + 1e-12
    got = sign_changes(x, np.sin(x))
    assert got == pytest.approx(expected, abs=tol)
    perm = rng.permutation(len(x))  # order of the input does not matter
    assert sign_changes(x[perm], np.sin(x)[perm]) == got


def test_sign_changes_zeros_touches_and_wrap():
    s = np.arange(6.0)
    assert sign_changes(s, np.array([1.0, 0.0, -1.0, -2.0, 0.0, -1.0])) == [1.0]  # zero, touch
    assert sign_changes(s, np.array([1.0, 0.0, 0.0, -1.0, -1.0, -1.0])) == [1.5]  # zero run
    assert sign_changes(s, np.array([1.0, 2.0, 3.0, 3.0, 2.0, 1.0])) == []
    tau = np.array([-1.0, 1.0, 2.0, 3.0, 2.0, 3.0])
    assert sign_changes(s, tau) == [0.5]
    assert sign_changes(s, tau, period=6.0) == pytest.approx([0.5, 5.75])  # 3 -> -1 over 5..6


def test_tangent_convention():
    n = np.array([[0.0, -1.0], [0.0, 1.0], [1.0, 0.0], [-1.0, 0.0], [0.6, -0.8], [-0.6, -0.8]])
    t = unit_tangent(n)
    assert np.all((t[:, 0] > 0) | ((t[:, 0] == 0) & (t[:, 1] > 0)))
    np.testing.assert_allclose(np.einsum("ij,ij->i", t, n), 0.0, atol=1e-15)
    np.testing.assert_allclose(np.hypot(t[:, 0], t[:, 1]), 1.0)


def test_order_of_walls_and_pieces():
    mesh, geom = channel(7, 2, triangles=True, perturb=0.2)
    order = order_patch_faces(mesh, geom, "top")
    xf = geom.face_centre[mesh.patch("top").start + order.faces, 0]
    assert np.all(np.diff(xf) > 0) and np.all(order.direction == 1.0)
    np.testing.assert_allclose(order.s, xf)  # the wall is straight and starts at x = 0
    # a patch made of two separate walls: two pieces, each walked in x
    def edges(*names):
        return np.concatenate([mesh.face_points[mesh.patch(n).start : mesh.patch(n).stop] for n in names])

    cells = [mesh.cell(c) for c in range(mesh.n_cells)]
    m2 = Mesh.from_arrays(mesh.points, cells, {"walls": edges("bottom", "top"),
                                               "open": edges("inlet", "outlet")})
    g2 = compute_geometry(m2)
    o2 = order_patch_faces(m2, g2, "walls")
    assert o2.closed == (False, False) and o2.chained == (True, True)
    for k in (0, 1):
        xs = g2.face_centre[m2.patch("walls").start + o2.faces[o2.segment == k], 0]
        assert np.all(np.diff(xs) > 0)
    assert np.all(np.diff(o2.s) > 0)


def test_bad_requests_are_named():
    mesh, geom = channel(3, 2)
    bc = channel_boundary(mesh, geom)
    nc = mesh.n_cells
    vel, gp = np.zeros((nc, 2)), np.zeros((nc, 2))
    with pytest.raises(CaseError, match="'inlet' is of kind 'inflow-velocity'"):
        wall_data(mesh, geom, bc, "inlet", vel, np.zeros(nc), gp, RHO, MU, 1.0)
    with pytest.raises(MeshError, match="no boundary patch named 'wing'"):
        wall_data(mesh, geom, bc, "wing", vel, np.zeros(nc), gp, RHO, MU, 1.0)
    with pytest.raises(CaseError, match="reference velocity"):
        wall_data(mesh, geom, bc, "top", vel, np.zeros(nc), gp, RHO, MU, 0.0)
    with pytest.raises(ValueError, match="velocity has shape"):
        wall_data(mesh, geom, bc, "top", vel[:-1], np.zeros(nc), gp, RHO, MU, 1.0)
