"""Operators do not depend on the cell numbering: renumbering the cells (Mesh.permuted) and
mapping the results back gives the same gradients, diffusion matrix action and convection
residual, to round-off. (A property of any correct face-based assembly.)"""

from __future__ import annotations

import numpy as np
import pytest
from meshes_for_tests import mesh_and_geometry

from fvrans.fv import (
    CsrAssembler,
    GreenGaussGradient,
    LeastSquaresGradient,
    boundary_face_values,
    boundary_scalar,
    convection_coefficients,
    diffusion_coefficients,
    face_diffusivity,
    limit_gradient,
)
from fvrans.mesh import compute_geometry


def field(x, y):
    return np.sin(3 * x) * np.exp(y) + x * y


def bc_spec():
    return {
        "left": ("dirichlet", field),
        "bottom": ("dirichlet", lambda x, y: 1.0 + x),
        "right": ("neumann", lambda x, y: np.cos(4 * y)),
        "top": ("neumann", 0.5),
    }


def operators(m, g):
    x, y = g.cell_centre.T
    phi = field(x, y)
    bc = boundary_scalar(m, g, bc_spec())
    lsq = LeastSquaresGradient(m, g)
    grad = lsq(phi, boundary_face_values(m, g, bc, phi))
    pb = boundary_face_values(m, g, bc, phi, grad)
    grad = lsq(phi, pb)
    gg = GreenGaussGradient(m, g, 2)(phi, pb)
    gf = face_diffusivity(m, g, 1.0 + x * x, "harmonic")
    dif = diffusion_coefficients(m, g, gf, bc, grad)
    A, b = CsrAssembler(m).assemble(dif)
    action = A @ phi - b
    flux = g.face_area_vector @ np.array([1.0, 0.4]) + 0.3 * g.face_centre[:, 0] * g.face_area_vector[:, 1]
    lim, _ = limit_gradient(m, g, phi, pb, grad, "venkatakrishnan")
    conv = convection_coefficients(m, g, flux, pb, "linear_upwind", lim)
    return {"lsq": grad, "gg": gg, "diffusion": action, "convection": conv.residual(m, phi)}


@pytest.mark.parametrize("kind", ["perturbed_mixed", "tri"])
def test_results_independent_of_cell_order(kind):
    m, g = mesh_and_geometry(kind, 7)
    order = np.random.default_rng(42).permutation(m.n_cells)
    mp = m.permuted(order)
    gp = compute_geometry(mp)
    # the permuted mesh really is renumbered
    assert not np.array_equal(mp.face_owner, m.face_owner)
    ref = operators(m, g)
    new = operators(mp, gp)
    for key, val in ref.items():
        scale = np.abs(val).max()
        assert np.abs(new[key] - val[order]).max() <= 1e-12 * scale, key
