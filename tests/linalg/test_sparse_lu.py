"""The sparse LU backends of the simultaneous path's direct solve (fvrans.linalg.sparse_lu)."""

import numpy as np
import pytest
import scipy.sparse as sp

from fvrans.linalg import sparse_lu


def _convection_diffusion(n: int = 30, peclet: float = 20.0) -> sp.csc_matrix:
    """Upwind convection-diffusion on an n x n grid: unsymmetric, diagonally dominant."""
    one = sp.diags([-1.0 - peclet, 2.0 + peclet, -1.0], [-1, 0, 1], shape=(n, n))
    lap = sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(n, n))
    return sp.csc_matrix(sp.kron(sp.eye(n), one) + sp.kron(lap, sp.eye(n)))


@pytest.mark.parametrize("backend", ["umfpack", "superlu"])
def test_both_backends_solve_an_unsymmetric_system_to_round_off(backend):
    A = _convection_diffusion()
    x_true = np.sin(np.arange(A.shape[0]))
    lu = sparse_lu.factorize(A, backend)
    assert lu.backend == backend
    x = lu.solve(A @ x_true)
    assert np.linalg.norm(x - x_true) / np.linalg.norm(x_true) < 1e-10
    # the factors serve again (the direct solve reuses them as a preconditioner)
    y = lu.solve(2.0 * (A @ x_true))
    assert np.linalg.norm(y - 2.0 * x_true) / np.linalg.norm(x_true) < 1e-10


def test_auto_takes_umfpack_and_falls_back_to_superlu_on_a_singular_matrix():
    A = _convection_diffusion(8)
    assert sparse_lu.factorize(A).backend == "umfpack"
    S = sp.lil_matrix(A)
    S[3, :] = 0.0  # a zero row: exactly singular
    S = sp.csc_matrix(S)
    S.eliminate_zeros()
    with pytest.raises(ArithmeticError):
        sparse_lu.factorize(S, "umfpack")
    # "auto" hands a matrix UMFPACK finds singular to SuperLU, which fails on it as before UMFPACK
    # came in (the solver's handling of a failed factorisation is unchanged)
    with pytest.raises(RuntimeError, match="singular"):
        sparse_lu.factorize(S)


def test_umfpack_reuses_the_symbolic_analysis_only_for_the_same_pattern():
    A = _convection_diffusion(12)
    first = sparse_lu.factorize(A, "umfpack")
    x_true = np.cos(np.arange(A.shape[0]))
    # new values on the same pattern: the analysis is kept and the factors are of the new matrix
    B = A.copy()
    B.data = B.data * (1.0 + 0.1 * np.sin(np.arange(B.nnz)))
    second = sparse_lu.factorize(B, "umfpack", analysis=first.analysis)
    assert second.analysis[1] is first.analysis[1]
    assert np.linalg.norm(second.solve(B @ x_true) - x_true) < 1e-10 * np.linalg.norm(x_true)
    # another pattern: analysed anew
    C = sp.csc_matrix(A + sp.diags([0.5], [7], shape=A.shape))
    third = sparse_lu.factorize(C, "umfpack", analysis=first.analysis)
    assert third.analysis[1] is not first.analysis[1]
    assert np.linalg.norm(third.solve(C @ x_true) - x_true) < 1e-10 * np.linalg.norm(x_true)


def test_umfpack_is_reached_through_its_c_functions_and_a_kept_analysis_outlives_its_first_factors():
    # on the platforms CI runs on, the solve without iterative refinement is the one in use
    assert sparse_lu._LIBRARY is not None
    A = _convection_diffusion(16)
    x_true = np.sin(0.3 * np.arange(A.shape[0]))
    first = sparse_lu.factorize(A, "umfpack")
    kept = first.analysis
    del first  # the numeric factors go; the symbolic analysis stays with whoever holds it
    for k in range(3):
        B = A.copy()
        B.data = B.data * (1.0 + 0.05 * (k + 1) * np.cos(np.arange(B.nnz)))
        lu = sparse_lu.factorize(B, "umfpack", analysis=kept)
        assert lu.analysis[1] is kept[1]
        # no refinement: one forward and back substitution, still at round-off on this well-conditioned system
        assert np.linalg.norm(lu.solve(B @ x_true) - x_true) < 1e-12 * np.linalg.norm(x_true)
        kept = lu.analysis
        del lu
