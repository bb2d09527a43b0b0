"""The wall shear stress the solver reports for plane Couette and plane Poiseuille flow, on meshes
turned by 30 degrees and on triangles.

Exact solutions (White 2006, Viscous Fluid Flow, 3rd ed., sec. 3-2; from memory): plane Couette
flow u = U y / h has the wall shear mu U / h on both walls; developed plane Poiseuille flow of mean
velocity U between walls h apart, u = 6 U y (h - y) / h^2, has mu 6 U / h.

The second-order wall gradient is exact for quadratic fields (tests/post/test_post_wall.py). A
linear profile is reproduced exactly by the whole scheme on any cells, and so is the parabola on
quads (turned or not): there the reported wall shear is exact to the solver tolerance. On
triangles the interior diffusion fluxes are not exact for a parabola, so the discrete profile
carries an error of second order and the wall shear with it: measured 2.8e-2, 7.0e-3, 1.8e-3 on
4, 8, 16 cells across (turned triangles, faces of the middle half of the channel).
"""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.mesh import Mesh, compute_geometry
from fvrans.mesh.generate import channel
from fvrans.physics.boundary import build_flow_boundary
from fvrans.post.wall import wall_data
from fvrans.solve.simple import SimpleSolver, SolverControls

H, L, U, MU = 1.0, 3.0, 1.0, 0.1
ANGLE = np.radians(30.0)
R = np.array([[np.cos(ANGLE), -np.sin(ANGLE)], [np.sin(ANGLE), np.cos(ANGLE)]])
E_X, E_Y = R[:, 0], R[:, 1]  # along and across the turned channel


def turned_channel(ny: int, triangles: bool) -> Mesh:
    m = channel(L, H, 3 * ny, ny, triangles=triangles)
    return Mesh.from_arrays(m.points @ R.T, [m.cell(c) for c in range(m.n_cells)],
                            {p.name: m.face_points[p.start : p.stop] for p in m.patches})


def solve(mesh: Mesh, inflow, top_speed: float = 0.0):
    geom = compute_geometry(mesh)
    specs = {"inlet": {"kind": "inflow-velocity", "velocity": inflow}, "outlet": {"kind": "outflow-pressure"},
             "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall", "velocity": tuple(top_speed * E_X)}}
    bc = build_flow_boundary(mesh, geom, specs)
    s = SimpleSolver(mesh, geom, bc, rho=1.0, mu=MU, controls=SolverControls(tolerance=1e-11, max_iterations=3000))
    assert s.run()
    walls = {}
    for name in ("lower_wall", "upper_wall"):
        walls[name] = wall_data(mesh, geom, bc, name, s.fields.velocity, s.fields.pressure, s.grad_p, 1.0, MU, 1.0)
    return walls


def along(w) -> np.ndarray:
    """The shear of the traction along the channel axis (the wall tangent may point either way)."""
    return w.traction @ E_X


def poiseuille(x, y):
    eta = x * E_Y[0] + y * E_Y[1]
    u = 6 * U * eta * (H - eta) / H**2
    return u * E_X[0], u * E_X[1]


def test_couette_on_turned_triangles_is_exact():
    walls = solve(turned_channel(6, triangles=True), lambda x, y: tuple(
        np.outer(U * (x * E_Y[0] + y * E_Y[1]) / H, E_X).T), top_speed=U)
    np.testing.assert_allclose(along(walls["lower_wall"]), MU * U / H, rtol=1e-8)
    np.testing.assert_allclose(along(walls["upper_wall"]), -MU * U / H, rtol=1e-8)  # it drags the fluid


def test_poiseuille_on_turned_quads_is_exact():
    walls = solve(turned_channel(8, triangles=False), poiseuille)
    for w in walls.values():
        np.testing.assert_allclose(np.abs(along(w)), 6 * MU * U / H, rtol=1e-9)


@pytest.mark.slow
def test_poiseuille_on_turned_triangles_is_second_order():
    errors = []
    for ny in (4, 8, 16):
        walls = solve(turned_channel(ny, triangles=True), poiseuille)
        e = []
        for w in walls.values():
            xi = np.stack([w.x, w.y], axis=1) @ E_X
            middle = np.abs(xi - L / 2) < L / 4
            e.append(np.max(np.abs(np.abs(along(w))[middle] / (6 * MU * U / H) - 1)))
        errors.append(max(e))
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 3e-3 and np.all(orders > 1.8), (errors, orders)
