"""Krylov solvers preconditioned by a reused algebraic-multigrid V-cycle.

The hierarchy (classical Ruge-Stuben coarsening and interpolation, Ruge & Stuben 1987, in
Multigrid Methods, SIAM, ch. 4; built by pyamg) is set up from the matrix of one outer iteration
and reused for the following ``rebuild_every`` solves: the finest level always uses the current
matrix, the coarse levels keep the Galerkin operators of the set-up matrix. A solve that misses
its tolerance within ``max_iterations`` triggers a rebuild and one retry. The cycle and the
Krylov loops run in numba (``_amg_kernels``); no BLAS calls, no per-solve allocation.

Threads (``fvrans.jit.threads``): the vector operations, matrix products, residuals, restrictions
and prolongations of large levels run on every thread, and so does the Gauss-Seidel smoothing of
the levels of 4 096 rows or more of the CG solves (pressure): their rows are cut into 4-16 blocks
of consecutive rows, the blocks coloured so that no two blocks of one colour couple, and the
blocks of a colour swept at once (``smoother_blocks``, ``_amg_kernels._smooth``: Gauss-Seidel in
one fixed row order). The blocks, and the 16 chunks of every long sum, depend on the sizes only:
a solve gives the same bits on any number of threads. ``solve_pair`` solves two systems with the
same structure (the two velocity components) at once, one per thread, each exactly as ``solve``
would one after the other.
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
#: the Gauss-Seidel sweep of a level of n rows runs in nb blocks of consecutive rows, nb the
#: largest power of two up to SMOOTHER_MAX_BLOCKS with n >= nb SMOOTHER_BLOCK_ROWS, or one block
#: (the plain sweep) below 4 (two blocks would always be two colours: no gain); see smoother_blocks
SMOOTHER_BLOCK_ROWS = 1024
SMOOTHER_MAX_BLOCKS = 16
_pool: ThreadPoolExecutor | None = None
#: C/F splittings (``AmgKrylovSolver(coarsening=)``): Ruge-Stuben (one pass, or with the second pass
#: that adds C points where two strongly coupled F points share no C point) and Cleary-Luby-Jones-Plassmann
COARSENINGS = ("RS", "RS-second-pass", "CLJP")
#: the restriction runs by chunks of coarse rows on every thread only on levels where the chunks'
#: fine-row ranges add up to at most this many times the fine rows (else in one pass)
RESTRICTION_OVERLAP = 1.5


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


def smoother_blocks(rows: int) -> int:
    """Blocks of the Gauss-Seidel sweep on a level of ``rows`` rows (``_amg_kernels._smooth``):
    it depends on the level's size only, so the cycle is the same operator on any number of
    threads."""
    nb = 1
    while nb < SMOOTHER_MAX_BLOCKS and rows >= 2 * nb * SMOOTHER_BLOCK_ROWS:
        nb *= 2
    return nb if nb >= 4 else 1


def block_colours(m: sp.csr_matrix, nb: int, colour_ptr: np.ndarray, order: np.ndarray) -> int:
    """Colour the ``nb`` blocks of consecutive rows of the square CSR matrix ``m`` (block k: rows
    k n / nb to (k + 1) n / nb) greedily in block order: two blocks joined by a nonzero, in either
    direction, get different colours. Fills ``colour_ptr`` (nb + 2: the number of colours C, then
    where each colour's blocks start in ``order``, then nb) and ``order`` (nb: the blocks by colour)
    as ``_amg_kernels._smooth`` reads them; returns C (``_amg_kernels.block_colouring``)."""
    if nb == 1:
        colour_ptr[:3] = (1, 0, 1)
        order[0] = 0
        return 1
    return int(_k.block_colouring(m.indptr, m.indices, m.shape[0], nb, colour_ptr, order))


class _Stack:
    """CSR blocks, one per level, in preallocated stacked arrays (filled level by level, so the
    source matrices can be dropped as they are copied): row pointers ``ptr`` absolute into the
    stacked ``idx`` / ``dat`` (int32 while the entries fit), ``pofs[l]`` where level l's pointers
    start, column indices local to the level (int32)."""

    def __init__(self, shapes: list[tuple[int, int]], dtype: type = np.float64):
        rows = sum(m for m, _ in shapes)
        nnz = sum(z for _, z in shapes)
        self.ptr = np.zeros(rows + len(shapes) if shapes else 1, dtype=np.int32 if nnz < 2**31 - 1 else np.int64)
        self.pofs = np.zeros(max(len(shapes), 1), dtype=np.int64)
        self.idx = np.zeros(nnz, dtype=np.int32)
        self.dat = np.zeros(nnz, dtype=dtype)
        self._level = 0
        self._row = 0
        self._nz = 0

    def add(self, m: sp.csr_matrix) -> None:
        m.sort_indices()
        r, z = m.shape[0], m.nnz
        self.pofs[self._level] = self._row
        self.ptr[self._row : self._row + r + 1] = m.indptr + self._nz
        self.idx[self._nz : self._nz + z] = m.indices
        self.dat[self._nz : self._nz + z] = m.data
        self._level += 1
        self._row += r + 1
        self._nz += z

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        return self.ptr, self.pofs, self.idx, self.dat


class AmgKrylovSolver:
    """Solve ``A x = b`` for a sequence of matrices with one fixed CSR structure.

    ``method``: 'cg' (symmetric positive (semi-)definite A) or 'bicgstab' (general, e.g. the
    momentum matrix). ``singular``: A has the constant vector as null space (pressure correction
    without a fixed-pressure boundary); the solution is returned mean-free. ``coarsening``: pyamg's
    C/F splitting, 'RS' (Ruge-Stuben), 'RS-second-pass' (with the second pass: more coarse points,
    a V-cycle that keeps contracting on the stretched cells of wall layers) or 'CLJP'
    (Cleary-Luby-Jones-Plassmann: the same, at about 1.4-1.8x the storage). ``dtype``: the number
    type the hierarchy's level matrices and transfers are stored in (the cycle's vectors and sums
    stay in double precision; float32 for a V-cycle used as a preconditioner).
    ``block_sweep``: smooth the levels of 4 096 rows or more in coloured blocks on every thread
    (``smoother_blocks``); default: for 'cg' only. On the bundled step and plate the block order
    cost the momentum BiCGStab 5-10 % more iterations (a block swept before the one upstream of it
    sees its old values), and the two velocity components are already solved at once on two threads.
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
        block_sweep: bool | None = None,
        dtype: type = np.float64,
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
        if coarsening not in COARSENINGS:
            raise ValueError(f"AmgKrylovSolver: unknown coarsening {coarsening!r}; use one of {COARSENINGS}")
        self.coarsening = coarsening
        self.dtype = dtype
        self.block_sweep = method == "cg" if block_sweep is None else bool(block_sweep)
        self._h = None
        self._uses = 0
        self.last_iterations = 0
        self.last_residual = 0.0
        self.total_iterations = 0
        self.solves = 0
        self.rebuilds = 0

    # -- hierarchy --------------------------------------------------------------------------
    def rebuild(self, A: sp.csr_matrix) -> None:
        """Set up the hierarchy from ``A`` (values copied; A's structure is the fine structure).

        Memory: the old hierarchy is dropped first, and pyamg's level matrices are copied into the
        stacked arrays one level at a time and let go, so the set-up holds one hierarchy beside
        pyamg's."""
        self.release()  # the old hierarchy goes first: the new one is built beside pyamg's, not beside both
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            cf = ("RS", {"second_pass": True}) if self.coarsening == "RS-second-pass" else self.coarsening
            # pyamg works in the stored number type (a single-precision set-up holds half the values)
            ml = pyamg.ruge_stuben_solver(sp.csr_matrix(A, dtype=self.dtype, copy=True), max_coarse=self.max_coarse,
                                          max_levels=25, CF=cf)
        levels = ml.levels
        del ml
        n = np.asarray([lv.A.shape[0] for lv in levels], dtype=np.int64)
        voff = np.zeros(len(n), dtype=np.int64)
        voff[1:] = np.cumsum(n)[:-1]
        total = int(n.sum())
        a = _Stack([(lv.A.shape[0], lv.A.nnz) for lv in levels], self.dtype)
        p = _Stack([(lv.P.shape[0], lv.P.nnz) for lv in levels[:-1]], self.dtype)
        t_rows = np.zeros((len(n), _k.SUM_CHUNKS, 2), dtype=np.int64)
        dinv = np.zeros(total)
        s_ptr = np.zeros((len(n), SMOOTHER_MAX_BLOCKS + 2), dtype=np.int64)
        s_order = np.zeros((len(n), SMOOTHER_MAX_BLOCKS), dtype=np.int64)
        self._fine_nnz = levels[0].A.nnz
        for lv, level in enumerate(levels):
            m = level.A
            a.add(m)
            _k.level_inverse_diagonal(a.ptr, a.pofs[lv], a.idx, a.dat, n[lv], dinv, voff[lv])
            block_colours(m, smoother_blocks(m.shape[0]) if self.block_sweep else 1, s_ptr[lv], s_order[lv])
            if lv < len(levels) - 1:
                p.add(level.P)
                # R = P^T is applied from P's rows (``_amg_kernels._restrict``), not kept; by chunks
                # of the coarse rows on every thread where the chunks' fine rows overlap little
                P = level.P
                if _k.restriction_rows(P.indptr, P.indices, P.shape[0], P.shape[1], t_rows[lv]) > \
                        RESTRICTION_OVERLAP * P.shape[0]:
                    t_rows[lv, 0, 0] = -1
                level.A = level.P = level.R = P = None  # copied: let them go before the next level
        # coarsest level: dense generalised inverse (numba; no LAPACK, whose threads can stall
        # badly on a busy machine)
        coarse = np.ascontiguousarray(levels[-1].A.toarray(), dtype=np.float64)
        del levels
        cinv2 = np.empty_like(coarse)
        _k.dense_inverse(coarse, cinv2, self.singular)
        cinv = cinv2.ravel()
        self._h = (
            len(n), n, voff, *a.arrays(), dinv, *p.arrays(), t_rows, cinv, self.sweeps, s_ptr, s_order,
        )
        self._vec = None
        self._scratch()
        self._work = None  # the Krylov loop's vectors, made by its first solve (a lone V-cycle needs none)
        self._twin = None  # the copy for the second system of a pair, made on demand
        self._uses = 0
        self.rebuilds += 1
        self.levels = [int(k) for k in n]

    def share_vectors(self, *others: AmgKrylovSolver) -> None:
        """Let this solver and ``others`` (hierarchies set up) use one set of scratch vectors (x, b, r
        of the cycle: ``_scratch``), sized for the largest: for V-cycles that never run at once."""
        solvers = (self, *others)
        total = max(s._scratch()[0].size for s in solvers)
        rows = max(s._vec[2].size for s in solvers)
        buf = np.zeros(2 * total + rows)
        for s in solvers:
            m, r = s._vec[0].size, s._vec[2].size
            s._vec = (buf[:m], buf[total:total + m], buf[2 * total:2 * total + r])
            s._twin = None

    def _work_vectors(self) -> np.ndarray:
        """The Krylov loop's work vectors (3 for CG, 7 for BiCGStab) of the finest level."""
        return np.zeros((3 if self.method == "cg" else 7, int(self._h[1][0])))

    def release(self) -> None:
        """Drop the hierarchy and its work arrays (the next solve builds a new one)."""
        self._h = self._vec = self._work = self._twin = None

    def release_scratch(self) -> None:
        """Drop the vectors of the cycle and of the Krylov loop, keep the hierarchy: the next solve makes
        them again (zeros; they carry nothing from one solve to the next). For a solver used once per
        outer iteration whose vectors should not stay idle between its solves."""
        self._vec = self._work = self._twin = None

    def _scratch(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The cycle's vectors, made when released: x and b level-stacked, r of the finest level's size
        (each level's residual in turn: ``_amg_kernels.vcycle``)."""
        if self._vec is None:
            total = int(np.sum(self._h[1]))
            self._vec = (np.zeros(total), np.zeros(total), np.zeros(int(self._h[1][0])))
        return self._vec

    def _run(self, A: sp.csr_matrix, b: np.ndarray, x: np.ndarray, state: tuple | None = None,
             par: bool | None = None) -> tuple[int, float]:
        if state is None and self._work is None:
            self._work = self._work_vectors()
        h, (xs, bs, rs), work = state if state is not None else (self._h, self._scratch(), self._work)
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
        self._note(it, rel)
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
            self._twin = (tuple(h), tuple(v.copy() for v in self._scratch()), self._work_vectors())
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
        """Record a finished solve (iterations, final relative residual); a miss is logged."""
        if not rel <= self.rtol:
            log.debug("%s: relative residual %.3g after %d iterations (rtol %g)", self.method, rel, it, self.rtol)
        self.last_iterations = int(it)
        self.last_residual = float(rel)
        self.total_iterations += int(it)
        self.solves += 1
