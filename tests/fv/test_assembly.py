"""Fixed-sparsity CSR assembly: refill equals a fresh scipy COO build (duplicates summed),
without reallocating the matrix or its index arrays; residual and under-relaxation."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from meshes_for_tests import mesh_and_geometry

from fvrans.fv import Coefficients, CsrAssembler, under_relax
from fvrans.mesh import Mesh


def _coo(mesh, c):
    nc, nfi = mesh.n_cells, mesh.n_internal_faces
    o, n = mesh.face_owner[:nfi], mesh.face_neighbour[:nfi]
    rows = np.concatenate([np.arange(nc), o, n])
    cols = np.concatenate([np.arange(nc), n, o])
    data = np.concatenate([c.diag, c.off_owner, c.off_neighbour])
    return sp.coo_matrix((data, (rows, cols)), shape=(nc, nc)).tocsr()


def _random_coeffs(mesh, rng):
    c = Coefficients.zeros(mesh)
    c.diag[:] = rng.uniform(1, 2, mesh.n_cells)
    c.off_owner[:] = rng.uniform(-1, 0, mesh.n_internal_faces)
    c.off_neighbour[:] = rng.uniform(-1, 0, mesh.n_internal_faces)
    c.source[:] = rng.normal(size=mesh.n_cells)
    return c


@pytest.mark.parametrize("kind", ["tri", "perturbed_mixed"])
def test_refill_matches_coo_and_keeps_arrays(kind):
    m, _ = mesh_and_geometry(kind, 6)
    rng = np.random.default_rng(1)
    asm = CsrAssembler(m)
    A = asm.matrix(*_parts(_random_coeffs(m, rng)))
    data, indices, indptr = A.data, A.indices, A.indptr
    for _ in range(3):
        c = _random_coeffs(m, rng)
        A2 = asm.matrix(*_parts(c))
        assert A2 is A and A2.data is data and A2.indices is indices and A2.indptr is indptr
        ref = _coo(m, c)
        assert A2.nnz == ref.nnz == m.n_cells + 2 * m.n_internal_faces
        assert abs(A2 - ref).max() == 0.0
        assert np.array_equal(A2.toarray(), ref.toarray())
        assert A2.has_sorted_indices
        x = rng.normal(size=m.n_cells)
        assert np.allclose(c.residual(m, x), c.source - ref @ x, rtol=0, atol=1e-13)


def _parts(c):
    return c.diag, c.off_owner, c.off_neighbour


def test_two_faces_between_the_same_cells_share_an_entry():
    """Two polygons sharing two edges through a kinked point (1.2, 0.5) of degree 2: both
    faces map to one matrix entry holding their sum, as in a COO build with duplicates."""
    pts = np.array([[0, 0], [1, 0], [1.2, 0.5], [1, 1], [0, 1], [2, 0], [2, 1]], float)
    cells = [[0, 1, 2, 3, 4], [1, 5, 6, 3, 2]]
    bnd = {"outer": [[0, 1], [1, 5], [5, 6], [6, 3], [3, 4], [4, 0]]}
    m = Mesh.from_arrays(pts, cells, bnd)
    assert m.n_internal_faces == 2
    c = Coefficients.zeros(m)
    c.diag[:] = [3.0, 4.0]
    c.off_owner[:] = [-1.0, -0.5]
    c.off_neighbour[:] = [-2.0, -0.25]
    A = CsrAssembler(m).matrix(*_parts(c))
    assert A.nnz == 4
    assert np.array_equal(A.toarray(), _coo(m, c).toarray())
    assert A[0, 1] == -1.5 and A[1, 0] == -2.25


def test_nonsquare_shapes_are_rejected():
    m, _ = mesh_and_geometry("quad", 3)
    asm = CsrAssembler(m)
    with pytest.raises(ValueError, match="expected diag"):
        asm.matrix(np.zeros(m.n_cells + 1), np.zeros(m.n_internal_faces), np.zeros(m.n_internal_faces))


def test_structure_changed_outside_is_detected():
    m, _ = mesh_and_geometry("quad", 3)
    asm = CsrAssembler(m)
    c = Coefficients.zeros(m)
    A = asm.matrix(*_parts(c))
    A.eliminate_zeros()  # all zero: scipy drops the entries and reallocates
    with pytest.raises(RuntimeError, match="structure was changed"):
        asm.matrix(*_parts(c))


def test_under_relaxation_keeps_the_fixed_point():
    """a_P/alpha phi_P + sum a_nb phi_nb = b + (1-alpha)/alpha a_P phi_old has the solution
    phi_old when phi_old solves the original system (Patankar 1980, sec. 4.2-5)."""
    m, _ = mesh_and_geometry("mixed", 5)
    rng = np.random.default_rng(3)
    c = _random_coeffs(m, rng)
    c.diag += 4.0  # diagonally dominant
    asm = CsrAssembler(m)
    A, b = asm.assemble(c)
    phi = sp.linalg.spsolve(A.tocsc(), b)
    relaxed = under_relax(c.copy(), phi, 0.6)
    A, b = asm.assemble(relaxed)
    assert np.allclose(sp.linalg.spsolve(A.tocsc(), b), phi, rtol=0, atol=1e-12)
    # and a different starting field gives a different (relaxed) answer
    other = under_relax(c.copy(), np.zeros(m.n_cells), 0.6)
    A, b = asm.assemble(other)
    assert not np.allclose(sp.linalg.spsolve(A.tocsc(), b), phi, atol=1e-6)
    with pytest.raises(ValueError, match="alpha"):
        under_relax(c.copy(), phi, 0.0)


def test_coefficients_add():
    m, _ = mesh_and_geometry("quad", 3)
    rng = np.random.default_rng(0)
    a, b = _random_coeffs(m, rng), _random_coeffs(m, rng)
    s = a + b
    assert np.array_equal(s.diag, a.diag + b.diag) and np.array_equal(s.source, a.source + b.source)
    a += b
    assert np.array_equal(a.off_owner, s.off_owner)
