"""Steady Navier-Stokes with a manufactured solution (method of manufactured solutions:
Roache 2002, J. Fluids Eng. 124, 4-10; Salari & Knupp 2000, Sandia report SAND2000-1444).

Stream function psi = sin(1.3 x + 0.4) cos(1.1 y + 0.2) + x^2 y / 4, u = d psi/dy,
v = -d psi/dx (divergence-free, no symmetry aligned with the grid), p = cos x sin y; the body
force f = rho (u . grad) u + grad p - mu lap u (derived symbolically, written out below) makes it
an exact steady solution. Velocity is prescribed on the whole boundary; each boundary face gets
the exact volume flux psi(end) - psi(start) (the face-centre value with its normal part scaled),
so the discrete boundary fluxes balance exactly and p is compared after removing its mean.

Grid families are systematically refined (Roache 1998, Verification and Validation in
Computational Science and Engineering, ch. 5): quads on a smooth sinusoidal mapping of the unit
square, squares split into triangles along parallel diagonals, and the mapped quads split the
same way (triangles with skewed faces).

On triangles the midpoint-rule errors of the three face fluxes do not cancel as they do over
opposite faces of a quad: with linear face interpolation the continuity equation keeps an O(h)
truncation error of alternating sign between neighbouring triangles, and the pressure an O(h)
oscillation (its L2 order fell to 1.53, 1.32, 1.16 from 12 to 96 cells across). The Rhie-Chow
fluxes therefore carry the second-derivative terms of the face value and of the face integral on
meshes with cells other than quads (``SolverControls.quadratic_face_flux``). Measured observed
orders (L2, pairs 12-24, 24-48, 48-96 cells across):

- mapped quads: velocity 1.86, 1.97, 2.01; pressure 1.81, 1.83, 1.78
- triangles: velocity 1.93, 1.96, 1.91; pressure 1.85, 1.82, 1.75
- mapped triangles: velocity 1.84, 1.93, 1.95; pressure 1.85, 1.84, 1.77 (1.54, 1.34, 1.17
  without the second-derivative terms)

The pressure order falls slowly on every family (96-192: triangles 1.61, mapped quads 1.64): the
momentum truncation error is O(1) in the first layer of cells at the boundary (one-sided
gradients in the boundary fluxes), reaches the face fluxes through H/A and leaves an O(h)
continuity error in that layer (with the exact fields inserted and H/A replaced by u + (V/a_P)
grad p it becomes second order there). The tests use 12, 24 and 48 cells across.

The simultaneous u-v-p solve (``solver.coupling = "simultaneous"``) discretises the same equations:
its errors on every grid are the segregated loop's (to the iteration tolerance), so it has the same
orders.
"""

from __future__ import annotations

import numpy as np
import pytest
from flows import split_same_diagonal
from meshes_for_tests import quad_mesh

from fvrans.mesh import Mesh, compute_geometry
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.coupled import SimultaneousSolver
from fvrans.solve.simple import SimpleSolver, SolverControls

RHO, MU = 1.0, 0.05
PI = np.pi
sin, cos = np.sin, np.cos


def stream_function(x, y):
    return sin(1.3 * x + 0.4) * cos(1.1 * y + 0.2) + 0.25 * x**2 * y


def exact_velocity(x, y):
    return (x**2 / 4 - 1.1 * sin(1.3 * x + 0.4) * sin(1.1 * y + 0.2),
            -x * y / 2 - 1.3 * cos(1.3 * x + 0.4) * cos(1.1 * y + 0.2))


def exact_pressure(x, y):
    return cos(x) * sin(y)


def body_force(xc):
    x, y = xc[:, 0], xc[:, 1]
    sa, ca = sin(1.3 * x + 0.4), cos(1.3 * x + 0.4)
    sb, cb = sin(1.1 * y + 0.2), cos(1.1 * y + 0.2)
    fx = (-MU * (6.38 * sa * sb + 1) / 2
          + RHO * ((x - 2.86 * sb * ca) * (x**2 - 4.4 * sa * sb) + 4.84 * (x * y + 2.6 * ca * cb) * sa * cb) / 8
          - sin(x) * sin(y))
    fy = (-3.77 * MU * ca * cb
          + RHO * (2 * (x - 2.86 * sb * ca) * (x * y + 2.6 * ca * cb)
                   - (x**2 - 4.4 * sa * sb) * (y - 3.38 * sa * cb)) / 8
          + cos(x) * cos(y))
    return np.stack([fx, fy], axis=1)


def solve_errors(mesh, coupling="simplec"):
    geom = compute_geometry(mesh)
    spec = {"kind": "inflow-velocity", "velocity": exact_velocity}
    bc = build_flow_boundary(mesh, geom, {p: spec for p in mesh.patch_names})
    ni = mesh.n_internal_faces
    a, b = mesh.points[mesh.face_points[ni:, 0]], mesh.points[mesh.face_points[ni:, 1]]
    flux = stream_function(b[:, 0], b[:, 1]) - stream_function(a[:, 0], a[:, 1])  # exact outward volume flux
    n, length = geom.face_normal[ni:], geom.face_length[ni:]
    bc.velocity[:] += n * (flux / length - np.einsum("ij,ij->i", bc.velocity, n))[:, None]
    ctl = SolverControls(coupling=coupling, max_iterations=4000, tolerance=1e-9)
    cls = SimultaneousSolver if coupling == "simultaneous" else SimpleSolver
    solver = cls(mesh, geom, bc, rho=RHO, mu=MU, controls=ctl, body_force=body_force)
    assert solver.run(), "the manufactured case did not converge"
    xc, area = geom.cell_centre, geom.cell_area
    ue, ve = exact_velocity(xc[:, 0], xc[:, 1])
    du = solver.fields.velocity - np.stack([ue, ve], axis=1)
    pe = exact_pressure(xc[:, 0], xc[:, 1])
    pn = solver.fields.pressure
    dp = (pn - np.average(pn, weights=area)) - (pe - np.average(pe, weights=area))
    l2 = lambda e: float(np.sqrt(np.sum(area * e**2) / np.sum(area)))  # noqa: E731
    return l2(np.hypot(du[:, 0], du[:, 1])), l2(dp)


def observed_orders(errors):
    e = np.asarray(errors)
    return np.log2(e[:-1] / e[1:])


def mapped_quads(n: int, amplitude: float = 0.04) -> Mesh:
    """n x n quads on the smooth mapping x' = x + a sin(2 pi x) sin(2 pi y),
    y' = y + a sin(pi x) sin(2 pi y) (boundary points stay on the boundary)."""
    m = quad_mesh(n)
    x, y = m.points[:, 0], m.points[:, 1]
    pts = np.stack(
        [x + amplitude * np.sin(2 * PI * x) * np.sin(2 * PI * y), y + amplitude * np.sin(PI * x) * np.sin(2 * PI * y)],
        axis=1,
    )
    cells = [m.cell(c) for c in range(m.n_cells)]
    return Mesh.from_arrays(pts, cells, {p.name: m.face_points[p.start : p.stop] for p in m.patches})


MESHES = {
    "mapped_quads": mapped_quads,
    "triangles": lambda n: split_same_diagonal(quad_mesh(n)),
    "mapped_triangles": lambda n: split_same_diagonal(mapped_quads(n)),
}
_ERRORS: dict = {}


def errors_on(kind: str, coupling: str = "simplec"):
    if (kind, coupling) not in _ERRORS:
        _ERRORS[kind, coupling] = [solve_errors(MESHES[kind](n), coupling) for n in (12, 24, 48)]
    return _ERRORS[kind, coupling]


@pytest.mark.parametrize("kind", sorted(MESHES))
def test_manufactured_velocity_second_order(kind):
    eu = [e[0] for e in errors_on(kind)]
    ou = observed_orders(eu)
    assert ou[-1] >= 1.8, f"{kind}: velocity errors {eu}, observed orders {ou}"


@pytest.mark.parametrize("kind", sorted(MESHES))
def test_manufactured_pressure_order(kind):
    ep = [e[1] for e in errors_on(kind)]
    op = observed_orders(ep)
    assert op[-1] >= 1.5, f"{kind}: pressure errors {ep}, observed orders {op}"


@pytest.mark.parametrize("kind", sorted(MESHES))
def test_manufactured_errors_same_on_the_simultaneous_path(kind):
    """Same errors, hence same orders: velocity and pressure L2 errors within 1e-4 relative of the
    segregated loop's on every grid (both stopped at normalised imbalance 1e-9)."""
    seg = np.asarray(errors_on(kind))
    sim = np.asarray(errors_on(kind, "simultaneous"))
    np.testing.assert_allclose(sim, seg, rtol=1e-4)
    assert observed_orders(sim[:, 0])[-1] >= 1.8 and observed_orders(sim[:, 1])[-1] >= 1.5
