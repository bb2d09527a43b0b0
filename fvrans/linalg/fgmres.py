"""Flexible GMRES (Saad 1993, SIAM J. Sci. Comput. 14, 461-469) and a single AMG V-cycle as an
operator, for the block preconditioner of the simultaneous u-v-p solve (``fvrans.solve.coupled``).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import scipy.sparse as sp

from fvrans.jit import threads
from fvrans.linalg import _amg_kernels as _k
from fvrans.linalg import _krylov_kernels as _kk
from fvrans.linalg.amg import AmgKrylovSolver


def fgmres(
    matvec: Callable[[np.ndarray], np.ndarray], prec: Callable[[np.ndarray], np.ndarray], r0: np.ndarray,
    rtol: float, restart: int = 40, max_iterations: int = 400, flexible: bool = True, basis: type = np.float64,
) -> tuple[np.ndarray, int, float]:
    """Solve A dx = r0 from dx = 0 by right-preconditioned flexible GMRES(restart): the
    preconditioned vectors z_k = M_k^-1 v_k are kept, so M may change from one step to the next.
    Stops when ||r0 - A dx||_2 <= rtol ||r0||_2 or after ``max_iterations``; returns (dx, iterations,
    relative residual). ``flexible`` False, for an M that is one linear operator throughout: the z_k
    are not kept (half the basis memory) and each cycle ends with dx += M^-1 (V y), one more
    application of M (the same iterates to round-off). ``basis``: the number type the Krylov basis
    is stored in (its sums are formed in double precision). The Gram-Schmidt steps and updates run on
    every thread (``fvrans.jit.threads``; the same bits on any thread count: ``_krylov_kernels``).

    Memory: besides the basis, dx and the vectors ``matvec`` and ``prec`` return, nothing of size n is
    kept (``r0`` is read, not copied). A float64 array ``matvec`` returns that owns its memory is
    orthogonalised in place (overwritten): return a fresh array each call, as ``A @ z`` does."""
    n = r0.size
    par = threads() > 1
    dx = np.zeros(n)
    beta0 = _kk.norm2(r0, par)
    if beta0 == 0.0:
        return dx, 0, 0.0
    r = r0  # replaced (not changed in place) at each restart
    its = 0
    rel = 1.0
    m = restart
    V = np.empty((m + 1, n), dtype=basis)
    Z = np.empty((m, n)) if flexible else None
    while its < max_iterations:
        beta = _kk.norm2(r, par)
        H = np.zeros((m + 1, m))
        cs = np.zeros(m)
        sn = np.zeros(m)
        gvec = np.zeros(m + 1)
        gvec[0] = beta
        np.multiply(r, 1.0 / beta, out=V[0])
        r = None  # (a restart's residual: not held through the cycle)
        k = 0
        for k in range(m):
            if flexible:
                z = Z[k]
                z[:] = prec(V[k])
            else:
                z = prec(V[k])
            w = _own_float64(matvec(z))
            del z
            _kk.orthogonalise(V, k, w, H[:, k], par)
            del w  # (its normalised part is V[k + 1]): not held through the next preconditioning
            for i in range(k):
                t = cs[i] * H[i, k] + sn[i] * H[i + 1, k]
                H[i + 1, k] = -sn[i] * H[i, k] + cs[i] * H[i + 1, k]
                H[i, k] = t
            d = np.hypot(H[k, k], H[k + 1, k])
            cs[k] = H[k, k] / d
            sn[k] = H[k + 1, k] / d
            H[k, k] = d
            H[k + 1, k] = 0.0
            gvec[k + 1] = -sn[k] * gvec[k]
            gvec[k] = cs[k] * gvec[k]
            its += 1
            rel = abs(gvec[k + 1]) / beta0
            if rel <= rtol or its >= max_iterations:
                break
        y = _upper_solve(H[: k + 1, : k + 1], gvec[: k + 1])
        if flexible:
            _kk.add_combination(Z, y, dx, par)
        else:
            z = np.zeros(n)
            _kk.add_combination(V, y, z, par)
            dx += prec(z)
            del z
        if rel <= rtol or its >= max_iterations:
            break
        r = r0 - matvec(dx)
    return dx, its, rel


def _own_float64(w: np.ndarray) -> np.ndarray:
    """``w`` itself when it is a contiguous, writeable float64 array that owns its memory (a fresh
    product), else a float64 copy (the Gram-Schmidt step overwrites it)."""
    if (isinstance(w, np.ndarray) and w.dtype == np.float64 and w.flags.c_contiguous and w.flags.writeable
            and w.flags.owndata):
        return w
    return np.array(w, dtype=np.float64)


def _upper_solve(R: np.ndarray, g: np.ndarray) -> np.ndarray:
    """y with R y = g, R upper triangular (back substitution; no LAPACK call)."""
    m = g.size
    y = np.zeros(m)
    for i in range(m - 1, -1, -1):
        y[i] = (g[i] - R[i, i + 1:] @ y[i + 1:]) / R[i, i]
    return y


class VCycle:
    """One Ruge-Stuben AMG V-cycle x = M^-1 b of a matrix sequence with a fixed structure (the
    hierarchy of :class:`fvrans.linalg.amg.AmgKrylovSolver`, rebuilt every ``rebuild_every``
    updates, the finest level refreshed with the current matrix)."""

    def __init__(self, rebuild_every: int = 20, singular: bool = False, coarsening: str = "RS"):
        self.amg = AmgKrylovSolver("cg", singular=singular, coarsening=coarsening)
        self.rebuild_every = int(rebuild_every)
        self.singular = bool(singular)
        self._uses = 0

    def update(self, A: sp.csr_matrix, rebuild: bool = False) -> None:
        """Use ``A`` from now on: a new hierarchy when ``rebuild``, every ``rebuild_every`` updates
        or when the structure changed; else the finest level refreshed with A's values."""
        a = self.amg
        A = sp.csr_matrix(A)
        A.sort_indices()
        if rebuild or a._h is None or self._uses >= self.rebuild_every or A.nnz != a._fine_nnz:
            a.rebuild(A)
            self._uses = 0
        else:
            h = a._h
            _k.refresh_fine(A.data, h[6], h[3], h[5], h[1][0], h[7])
        self._uses += 1

    def __call__(self, b: np.ndarray, par: bool = False) -> np.ndarray:
        """x = M^-1 b; ``par``: the large levels' residuals and transfers on every thread."""
        h = self.amg._h
        xs, bs, rs = self.amg._vec
        n0 = int(h[1][0])
        bs[:n0] = b
        if self.singular:
            bs[:n0] -= bs[:n0].mean()
        _k.vcycle(*h, xs, bs, rs, par)
        x = xs[:n0].copy()
        if self.singular:
            x -= x.mean()
        return x
