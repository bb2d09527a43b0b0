"""Krylov solvers preconditioned by a reused algebraic-multigrid V-cycle.

The hierarchy (classical Ruge-Stuben coarsening and interpolation, Ruge & Stuben 1987, in
Multigrid Methods, SIAM, ch. 4; built by pyamg) is set up from the matrix of one outer iteration
and reused for the following ``rebuild_every`` solves: the finest level always uses the current
matrix, the coarse levels keep the Galerkin operators of the set-up matrix. A solve that misses
its tolerance within ``max_iterations`` triggers a rebuild and one retry. The cycle and the
Krylov loops run in numba (``_amg_kernels``); no BLAS calls, no per-solve allocation.

Threads (``fvrans.jit.threads``): the vector operations, matrix products, residuals, restrictions
and prolongations of large levels run on every thread; the Gauss-Seidel smoothing stays serial, so
the iterates differ from a one-thread solve only by the order of the sums (round-off).
``solve_pair`` solves two systems with the same structure (the two velocity components) at once,
one per thread, each exactly as ``solve`` would one after the other.
"""

from __future__ import annotations

import logging
import os
import warnings
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pyamg
import scipy.sparse as sp

from fvrans.jit import threads
from fvrans.linalg import _amg_kernels as _k

log = logging.getLogger(__name__)
_pool: ThreadPoolExecutor | None = None


def _second_thread() -> ThreadPoolExecutor:
    """One worker thread for the second system of ``AmgKrylovSolver.solve_pair`` (made once per
    process: a forked child, which has no copy of the thread, makes its own)."""
    global _pool
    if _pool is None:
        _pool = ThreadPoolExecutor(max_workers=1, thread_name_prefix="fvrans-amg")
    return _pool


def _forget_pool() -> None:
    global _pool
    _pool = None


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_forget_pool)


def _stack_csr(mats: list[sp.csr_matrix]) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Concatenate CSR blocks: (ptr, pofs, idx, dat) with absolute row pointers."""
    ptrs, idxs, dats, pofs = [], [], [], []
    nz = 0
    po = 0
    for m in mats:
        m = sp.csr_matrix(m)
        m.sort_indices()
        pofs.append(po)
        ptrs.append(m.indptr.astype(np.int64) + nz)
        idxs.append(m.indices.astype(np.int32))  # column within the level: 4 bytes (of 16 per entry)
        dats.append(m.data.astype(np.float64))
        nz += m.nnz
        po += m.shape[0] + 1
    if not mats:
        z = np.zeros(1, dtype=np.int64)
        return z, z.copy(), np.zeros(0, dtype=np.int32), np.zeros(0)
    return np.concatenate(ptrs), np.asarray(pofs, dtype=np.int64), np.concatenate(idxs), np.concatenate(dats)


class AmgKrylovSolver:
    """Solve ``A x = b`` for a sequence of matrices with one fixed CSR structure.

    ``method``: 'cg' (symmetric positive (semi-)definite A) or 'bicgstab' (general, e.g. the
    momentum matrix). ``singular``: A has the constant vector as null space (pressure correction
    without a fixed-pressure boundary); the solution is returned mean-free. ``coarsening``: pyamg's
    C/F splitting, 'RS' (Ruge-Stuben) or 'CLJP' (Cleary-Luby-Jones-Plassmann: about 1.4x the
    coarse-level storage, but a V-cycle that keeps contracting on the stretched cells of wall layers).
    """

    def __init__(
        self,
        method: str = "cg",
        rtol: float = 0.01,
        rebuild_every: int = 20,
        singular: bool = False,
        max_iterations: int = 60,
        sweeps: int = 1,
        max_coarse: int = 200,
        coarsening: str = "RS",
    ):
        if method not in ("cg", "bicgstab"):
            raise ValueError(f"AmgKrylovSolver: unknown method {method!r}; use 'cg' or 'bicgstab'")
        self.method = method
        self.rtol = float(rtol)
        self.rebuild_every = int(rebuild_every)
        self.singular = bool(singular)
        self.max_iterations = int(max_iterations)
        self.sweeps = int(sweeps)
        self.max_coarse = int(max_coarse)
        self.coarsening = coarsening
        self._h = None
        self._uses = 0
        self.last_iterations = 0
        self.last_residual = 0.0
        self.total_iterations = 0
        self.solves = 0
        self.rebuilds = 0

    # -- hierarchy --------------------------------------------------------------------------
    def rebuild(self, A: sp.csr_matrix) -> None:
        """Set up the hierarchy from ``A`` (values copied; A's structure is the fine structure)."""
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ml = pyamg.ruge_stuben_solver(sp.csr_matrix(A, copy=True), max_coarse=self.max_coarse, max_levels=25,
                                          CF=self.coarsening)
        levels = ml.levels
        As = [lv.A for lv in levels]
        a_ptr, a_pofs, a_idx, a_dat = _stack_csr(As)
        p_ptr, p_pofs, p_idx, p_dat = _stack_csr([lv.P for lv in levels[:-1]])
        r_ptr, r_pofs, r_idx, r_dat = _stack_csr([lv.R for lv in levels[:-1]])
        n = np.asarray([m.shape[0] for m in As], dtype=np.int64)
        voff = np.zeros(len(n), dtype=np.int64)
        voff[1:] = np.cumsum(n)[:-1]
        total = int(n.sum())
        dinv = np.zeros(total)
        for lv, m in enumerate(As):
            d = np.asarray(m.diagonal(), dtype=float)
            dinv[voff[lv] : voff[lv] + n[lv]] = np.where(d != 0.0, 1.0 / np.where(d != 0.0, d, 1.0), 0.0)
        # coarsest level: dense generalised inverse (numba; no LAPACK, whose threads can stall
        # badly on a busy machine)
        coarse = np.ascontiguousarray(As[-1].toarray(), dtype=np.float64)
        cinv2 = np.empty_like(coarse)
        _k.dense_inverse(coarse, cinv2, self.singular)
        cinv = cinv2.ravel()
        n0 = int(n[0])
        self._fine_nnz = As[0].nnz
        self._h = (
            len(n), n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
            r_ptr, r_pofs, r_idx, r_dat, cinv, self.sweeps,
        )
        self._vec = (np.zeros(total), np.zeros(total), np.zeros(total))
        self._work = np.zeros((3 if self.method == "cg" else 7, n0))
        self._twin = None  # the copy for the second system of a pair, made on demand
        self._uses = 0
        self.rebuilds += 1
        self.levels = [int(k) for k in n]

    def _run(self, A: sp.csr_matrix, b: np.ndarray, x: np.ndarray, state: tuple | None = None,
             par: bool | None = None) -> tuple[int, float]:
        h, (xs, bs, rs), work = state if state is not None else (self._h, self._vec, self._work)
        if par is None:
            par = threads() > 1
        _k.refresh_fine(A.data, h[6], h[3], h[5], h[1][0], h[7])
        if self.method == "cg":
            return _k.pcg(*h, b, x, self.rtol, self.max_iterations, self.singular, xs, bs, rs, work, par)
        return _k.bicgstab(*h, b, x, self.rtol, self.max_iterations, xs, bs, rs, work, par)

    def _needs_rebuild(self, A: sp.csr_matrix) -> bool:
        return self._h is None or self._uses >= self.rebuild_every or A.nnz != self._fine_nnz

    def solve(self, A: sp.csr_matrix, b: np.ndarray, x: np.ndarray) -> int:
        """Solve in place: ``x`` holds the initial guess and receives the solution; ``b`` may be
        modified (made mean-free when singular). Returns the Krylov iterations."""
        if self._needs_rebuild(A):
            if not (np.all(np.isfinite(A.data)) and np.all(np.isfinite(b))):
                # a diverging outer iteration: hand the non-finite values back to its checks
                x[:] = np.nan
                self.last_iterations = 0
                self.last_residual = np.nan
                return 0
            self.rebuild(A)
        self._uses += 1
        it, rel = self._run(A, b, x)
        if not rel <= self.rtol and np.all(np.isfinite(x)):
            # the reused hierarchy no longer fits the matrix: rebuild once and continue
            self.rebuild(A)
            it2, rel = self._run(A, b, x)
            it += it2
            if not rel <= self.rtol:
                log.debug("%s: relative residual %.3g after %d iterations (rtol %g)", self.method, rel, it, self.rtol)
        self.last_iterations = int(it)
        self.last_residual = float(rel)
        self.total_iterations += int(it)
        self.solves += 1
        return int(it)

    def solve_pair(self, A1: sp.csr_matrix, b1: np.ndarray, x1: np.ndarray,
                   A2: sp.csr_matrix, b2: np.ndarray, x2: np.ndarray) -> tuple[int, int]:
        """``solve(A1, b1, x1)`` then ``solve(A2, b2, x2)`` (same structure), the two at once on two
        threads when there are two: both with the hierarchy the first would use; when the first
        misses its tolerance (the sequence would rebuild before the second) the second is solved
        again from its start after the rebuild, so the results are those of the sequence.
        Returns the Krylov iterations of each."""
        if (threads() < 2 or self._needs_rebuild(A1) or A2.nnz != A1.nnz
                or self._uses + 1 >= self.rebuild_every):
            return self.solve(A1, b1, x1), self.solve(A2, b2, x2)
        if self._twin is None:
            h = list(self._h)
            h[6] = h[6].copy()  # level-0 values and inverse diagonal are the second matrix's
            h[7] = h[7].copy()
            self._twin = (tuple(h), tuple(v.copy() for v in self._vec), self._work.copy())
        x2_start = x2.copy()
        b2_start = b2.copy()
        self._uses += 2
        second = _second_thread().submit(self._run, A2, b2, x2, self._twin, False)
        it1, rel1 = self._run(A1, b1, x1, par=False)
        it2, rel2 = second.result()
        if not (rel1 <= self.rtol) and np.all(np.isfinite(x1)):
            # the sequence: rebuild, finish the first, then the second with the new hierarchy
            self.rebuild(A1)
            more, rel1 = self._run(A1, b1, x1)
            it1 += more
            self._note(it1, rel1)
            x2[:] = x2_start
            b2[:] = b2_start
            return it1, self.solve(A2, b2, x2)
        self._note(it1, rel1)
        if not (rel2 <= self.rtol) and np.all(np.isfinite(x2)):
            self.rebuild(A2)
            more, rel2 = self._run(A2, b2, x2)
            it2 += more
        self._note(it2, rel2)
        return it1, it2

    def _note(self, it: int, rel: float) -> None:
        if not rel <= self.rtol:
            log.debug("%s: relative residual %.3g after %d iterations (rtol %g)", self.method, rel, it, self.rtol)
        self.last_iterations = int(it)
        self.last_residual = float(rel)
        self.total_iterations += int(it)
        self.solves += 1
