"""Convection operator div(F phi): upwind and linear upwind with deferred correction.

* Steady convection-diffusion u dphi/dx = Gamma d2phi/dx2 on [0, 1], phi(0) = 0, phi(1) = 1,
  exact phi = (exp(Pe x) - 1)/(exp(Pe) - 1), Pe = u L / Gamma (Patankar 1980, Numerical Heat
  Transfer and Fluid Flow, eq. 5.9), laid along x on 2D quads with insulated top and bottom.
  First-order upwind must show observed order ~1, linear upwind (second order) >= 1.8.
* For a constant velocity and a linear field, sum_f F_f phi(x_f) = V u . grad(phi) exactly
  (divergence theorem, midpoint rule exact for linear integrands), so linear upwind with the
  exact gradient must reproduce it on any mesh.
* Barth & Jespersen (1989, AIAA 89-0366) limiting keeps every reconstructed face value within
  the min/max of the cell and its neighbours; so does Venkatakrishnan's (1995, J. Comput. Phys.
  118:120-130) function when eps -> 0.
"""

from __future__ import annotations

import numpy as np
import pytest
from meshes_for_tests import MESH_KINDS, mesh_and_geometry, quad_mesh

from fvrans.fv import (
    LeastSquaresGradient,
    boundary_face_values,
    boundary_scalar,
    convection_coefficients,
    limit_gradient,
    solve_steady_scalar,
)
from fvrans.mesh import compute_geometry

PE = 20.0


def boundary_layer(x):
    return np.expm1(PE * x) / np.expm1(PE)


def _conv_diff_errors(scheme, limiter=None, ns=(64, 128, 256)):
    errs = []
    for n in ns:
        m = quad_mesh(n, 2, ly=0.1)
        g = compute_geometry(m)
        bc = boundary_scalar(
            m, g, {"left": ("dirichlet", 0.0), "right": ("dirichlet", 1.0), "bottom": ("neumann", 0.0),
                   "top": ("neumann", 0.0)},
        )
        flux = g.face_area_vector[:, 0] * 1.0  # u = (1, 0)
        res = solve_steady_scalar(m, g, bc, gamma_f=1.0 / PE, flux=flux, scheme=scheme, limiter=limiter)
        assert res.converged
        e = res.phi - boundary_layer(g.cell_centre[:, 0])
        errs.append(np.sqrt(np.sum(g.cell_area * e**2) / np.sum(g.cell_area)))
    return np.array(errs)


def test_upwind_first_order():
    # cell Peclet numbers 0.31, 0.16, 0.08: asymptotic range of the O(u h / 2) numerical diffusion
    errs = _conv_diff_errors("upwind")
    orders = np.log2(errs[:-1] / errs[1:])
    assert np.all((orders > 0.8) & (orders < 1.2)), orders


@pytest.mark.parametrize("limiter", [None, "barth_jespersen"])
def test_linear_upwind_second_order(limiter):
    """The exact profile is monotone, so Barth-Jespersen limiting should not cost accuracy."""
    errs = _conv_diff_errors("linear_upwind", limiter)
    orders = np.log2(errs[:-1] / errs[1:])
    assert np.all(orders >= 1.8), orders
    assert errs[0] < 0.2 * _conv_diff_errors("upwind", ns=(64,))[0]


@pytest.mark.parametrize("kind", list(MESH_KINDS))
def test_linear_upwind_exact_for_linear_field(kind):
    m, g = mesh_and_geometry(kind, 7)
    u = np.array([0.8, -0.45])
    grad_exact = np.array([1.5, 2.0])

    def lin(x, y):
        return 0.2 + grad_exact[0] * x + grad_exact[1] * y

    bc = boundary_scalar(m, g, {p: ("dirichlet", lin) for p in m.patch_names})
    flux = g.face_area_vector @ u
    phi = lin(*g.cell_centre.T)
    pb = boundary_face_values(m, g, bc, phi)
    grad = LeastSquaresGradient(m, g)(phi, pb)
    c = convection_coefficients(m, g, flux, pb, "linear_upwind", grad)
    conv = -c.residual(m, phi)  # = A phi - b = sum_f F_f phi_f
    assert np.abs(conv - g.cell_area * (u @ grad_exact)).max() < 1e-12
    # first-order upwind is not exact on these meshes (control that the check can fail)
    c1 = convection_coefficients(m, g, flux, pb, "upwind")
    assert np.abs(-c1.residual(m, phi) - g.cell_area * (u @ grad_exact)).max() > 1e-4


def test_upwind_coefficients_by_hand():
    """Two 0.5 x 1 cells side by side, u = (2, 0), inflow value 3 on the left boundary.
    Left cell: 2 phi_L (out through the shared face) - 2 * 3 (in from the boundary) = 0.
    Right cell: 2 phi_R (out to the boundary) - 2 phi_L (in through the shared face) = 0."""
    m = quad_mesh(2, 1)
    g = compute_geometry(m)
    flux = g.face_area_vector[:, 0] * 2.0
    pb = np.full(m.n_boundary_faces, 3.0)
    c = convection_coefficients(m, g, flux, pb, "upwind")
    left = m.face_owner[m.patch("left").start]
    right = 1 - left
    assert m.n_internal_faces == 1
    assert c.diag[left] == 2.0 and c.diag[right] == 2.0
    assert c.source[left] == 6.0 and c.source[right] == 0.0
    # off-diagonal of row `right` in column `left` is -2, the other one 0
    o, n = m.face_owner[0], m.face_neighbour[0]
    off = {(o, n): c.off_owner[0], (n, o): c.off_neighbour[0]}
    assert off[(right, left)] == -2.0 and off[(left, right)] == 0.0


@pytest.mark.parametrize("limiter", ["barth_jespersen", "venkatakrishnan"])
def test_limited_reconstruction_has_no_new_extrema(limiter):
    m, g = mesh_and_geometry("perturbed_mixed", 12)
    x, y = g.cell_centre.T
    phi = np.where(x + 0.3 * y > 0.55, 1.0, 0.0) + 0.1 * np.sin(5 * y)  # a step
    xb, yb = g.face_centre[m.n_internal_faces :].T
    pb = np.where(xb + 0.3 * yb > 0.55, 1.0, 0.0) + 0.1 * np.sin(5 * yb)
    grad = LeastSquaresGradient(m, g)(phi, pb)
    k = 1e-6 if limiter == "venkatakrishnan" else 5.0  # eps -> 0: strictly bounded
    lg, psi = limit_gradient(m, g, phi, pb, grad, limiter, k=k)
    assert np.all((psi >= 0) & (psi <= 1)) and psi.min() < 0.5
    # min/max over each cell and its face neighbours (and its boundary values)
    nfi = m.n_internal_faces
    lo, hi = phi.copy(), phi.copy()
    own, nb = m.face_owner, m.face_neighbour
    np.minimum.at(lo, own[:nfi], phi[nb[:nfi]])
    np.maximum.at(hi, own[:nfi], phi[nb[:nfi]])
    np.minimum.at(lo, nb[:nfi], phi[own[:nfi]])
    np.maximum.at(hi, nb[:nfi], phi[own[:nfi]])
    np.minimum.at(lo, own[nfi:], pb)
    np.maximum.at(hi, own[nfi:], pb)
    tol = 1e-12
    for side, cells in ((0, own), (1, nb[:nfi])):
        fc = g.face_centre[: len(cells)] if side else g.face_centre
        recon = phi[cells] + np.sum(lg[cells] * (fc - g.cell_centre[cells]), axis=1)
        assert np.all(recon <= hi[cells] + tol) and np.all(recon >= lo[cells] - tol)
        unlimited = phi[cells] + np.sum(grad[cells] * (fc - g.cell_centre[cells]), axis=1)
        if side == 0:
            assert np.any(unlimited > hi[cells] + 1e-3)  # the limiter had work to do


def test_barth_jespersen_keeps_linear_fields_on_uniform_quads():
    """Linearity preservation: a linear field is not limited (Barth & Jespersen 1989)."""
    m, g = mesh_and_geometry("quad", 8)

    def lin(x, y):
        return 0.5 * x - 2.0 * y

    phi = lin(*g.cell_centre.T)
    pb = lin(*g.face_centre[m.n_internal_faces :].T)
    grad = LeastSquaresGradient(m, g)(phi, pb)
    _, psi = limit_gradient(m, g, phi, pb, grad, "barth_jespersen")
    assert np.allclose(psi, 1.0, rtol=0, atol=1e-12)


def test_bad_scheme_and_missing_gradient():
    m, g = mesh_and_geometry("quad", 2)
    flux = np.zeros(m.n_faces)
    pb = np.zeros(m.n_boundary_faces)
    with pytest.raises(ValueError, match="unknown scheme"):
        convection_coefficients(m, g, flux, pb, "central")
    with pytest.raises(ValueError, match="needs the cell gradient"):
        convection_coefficients(m, g, flux, pb, "linear_upwind")
