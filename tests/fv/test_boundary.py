"""Boundary conditions per patch and boundary face values; bad input gives a clear CaseError."""

from __future__ import annotations

import numpy as np
import pytest
from meshes_for_tests import mesh_and_geometry

from fvrans.errors import CaseError, MeshError
from fvrans.fv import DIRICHLET, NEUMANN, BoundaryScalar, boundary_face_values, boundary_scalar, set_patch


def _spec():
    return {
        "left": ("dirichlet", 2.0),
        "right": ("neumann", lambda x, y: y),
        "bottom": ("dirichlet", np.arange(4.0)),
        "top": ("neumann", 0.0),
    }


def test_values_per_patch():
    m, g = mesh_and_geometry("quad", 4)
    bc = boundary_scalar(m, g, _spec(), name="T")
    nfi = m.n_internal_faces
    for p in m.patches:
        s = slice(p.start - nfi, p.stop - nfi)
        kind, val = _spec()[p.name]
        assert np.all(bc.kind[s] == (DIRICHLET if kind == "dirichlet" else NEUMANN))
        if p.name == "right":
            assert np.array_equal(bc.value[s], g.face_centre[p.start : p.stop, 1])
        elif p.name == "bottom":
            assert np.array_equal(bc.value[s], np.arange(4.0))
        else:
            assert np.all(bc.value[s] == val)


def test_neumann_face_value_exact_for_linear_field_on_skewed_cells():
    """phi_b = phi_O + g (d . n) + grad_O . (d - (d . n) n) equals phi(x_f) for a linear phi."""
    m, g = mesh_and_geometry("perturbed_mixed", 6)

    def lin(x, y):
        return 1.0 + 2.0 * x + 3.0 * y

    grad = np.tile([2.0, 3.0], (m.n_cells, 1))
    normals = {"left": (-1, 0), "right": (1, 0), "bottom": (0, -1), "top": (0, 1)}
    bc = boundary_scalar(m, g, {p: ("neumann", 2.0 * n[0] + 3.0 * n[1]) for p, n in normals.items()})
    phi = lin(*g.cell_centre.T)
    pb = boundary_face_values(m, g, bc, phi, grad)
    assert np.abs(pb - lin(*g.face_centre[m.n_internal_faces :].T)).max() < 1e-13
    # without the tangential part the triangles' boundary values are off
    assert np.abs(boundary_face_values(m, g, bc, phi) - pb).max() > 1e-3


def test_set_patch_in_place():
    m, g = mesh_and_geometry("quad", 3)
    bc = BoundaryScalar.uniform(m, DIRICHLET, 1.0)
    set_patch(bc, m, g, "top", "neumann", 5.0)
    p = m.patch("top")
    s = slice(p.start - m.n_internal_faces, p.stop - m.n_internal_faces)
    assert np.all(bc.kind[s] == NEUMANN) and np.all(bc.value[s] == 5.0)
    assert np.sum(bc.kind == NEUMANN) == 3


@pytest.mark.parametrize(
    "change,match",
    [
        ({"inlet": ("dirichlet", 1.0)}, "'inlet', which is not a patch"),
        ({"left": ("fixed", 1.0)}, "unknown boundary kind 'fixed'"),
        ({"left": ("dirichlet", np.ones(3))}, "the patch has 4 faces"),
        ({"left": ("dirichlet", np.nan)}, "not finite"),
        ({"left": ("dirichlet", "abc")}, "not a number"),
        ({"left": 1.0}, r"expected \(kind, value\)"),
    ],
)
def test_bad_specifications(change, match):
    m, g = mesh_and_geometry("quad", 4)
    spec = _spec()
    spec.update(change)
    with pytest.raises(CaseError, match=match):
        boundary_scalar(m, g, spec, name="T")


def test_missing_patch_named():
    m, g = mesh_and_geometry("quad", 4)
    spec = _spec()
    del spec["top"]
    with pytest.raises(CaseError, match="no boundary condition for patch.*'top'"):
        boundary_scalar(m, g, spec)


def test_unknown_patch_in_set_patch():
    m, g = mesh_and_geometry("quad", 2)
    with pytest.raises(MeshError, match="no boundary patch named 'outlet'"):
        set_patch(BoundaryScalar.uniform(m, DIRICHLET), m, g, "outlet", "dirichlet", 0.0)


def test_bad_arrays():
    with pytest.raises(ValueError, match="equal length"):
        BoundaryScalar(np.zeros(3), np.zeros(4))
    with pytest.raises(ValueError, match="0 \\(Dirichlet\\) or 1"):
        BoundaryScalar(np.array([0, 2]), np.zeros(2))
