"""Flexible GMRES (fvrans/linalg/fgmres.py): the residual it reports is the true one, a changing
preconditioner is allowed, and restarts keep converging."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from fvrans.linalg.fgmres import VCycle, fgmres


def _convection_diffusion(n: int, peclet: float) -> sp.csr_matrix:
    """1D upwind convection-diffusion on n cells (Dirichlet ends): a nonsymmetric M-matrix."""
    main = np.full(n, 2.0 + peclet)
    return sp.diags([-(1.0 + peclet) * np.ones(n - 1), main, -np.ones(n - 1)], [-1, 0, 1], format="csr")


def test_reported_residual_is_the_true_residual_with_restarts():
    """GMRES(5) on a 200-unknown nonsymmetric system, no preconditioning: after restarts the
    relative residual it reports equals ||r0 - A dx|| / ||r0|| and is below the tolerance."""
    A = _convection_diffusion(200, 2.0)
    b = np.random.default_rng(0).random(200)
    dx, its, rel = fgmres(lambda z: A @ z, lambda v: v.copy(), b, 1e-8, restart=5, max_iterations=2000)
    true = np.linalg.norm(b - A @ dx) / np.linalg.norm(b)
    assert rel <= 1e-8 and its > 5
    assert abs(true - rel) < 1e-9


def test_changing_preconditioner():
    """A preconditioner that changes every call (one V-cycle, then the V-cycle applied twice):
    flexible GMRES still converges to the tolerance, in few iterations (a multigrid-preconditioned
    diffusion problem)."""
    n = 400
    A = _convection_diffusion(n, 0.5)
    vc = VCycle()
    vc.update(A)
    calls = [0]

    def prec(v):
        calls[0] += 1
        z = vc(v)
        if calls[0] % 2 == 0:
            z = z + vc(v - A @ z)
        return z

    b = np.ones(n)
    dx, its, rel = fgmres(lambda z: A @ z, prec, b, 1e-10, restart=20, max_iterations=100)
    assert rel <= 1e-10
    assert np.linalg.norm(b - A @ dx) / np.linalg.norm(b) < 1e-9
    assert its < 30, its


def test_keeping_no_preconditioned_vectors_gives_the_same_iterates():
    """With one fixed linear preconditioner (a V-cycle), GMRES that keeps only the Krylov basis
    (``flexible=False``: dx += M^-1 (V y) per cycle) takes the same iterations to the same answer
    as the flexible form, through restarts (to round-off)."""
    n = 400
    A = _convection_diffusion(n, 3.0)
    vc = VCycle()
    vc.update(A)
    b = np.random.default_rng(2).random(n)
    out = [fgmres(lambda z: A @ z, vc, b, 1e-10, restart=3, max_iterations=200, flexible=f) for f in (True, False)]
    (dx1, its1, rel1), (dx2, its2, rel2) = out
    assert its1 > 3 and its1 == its2
    assert rel1 <= 1e-10 and abs(rel2 - rel1) <= 1e-3 * rel1
    np.testing.assert_allclose(dx2, dx1, rtol=0, atol=1e-11 * np.abs(dx1).max())
    assert np.linalg.norm(b - A @ dx2) <= 1.01e-10 * np.linalg.norm(b)
