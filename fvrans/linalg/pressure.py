"""Pressure-correction solver: conjugate gradients preconditioned by Ruge-Stuben AMG (pyamg).

The AMG hierarchy is built from the matrix of one outer iteration and reused as the
preconditioner of CG for the following ``rebuild_every`` iterations, while the matrix changes
little; it is rebuilt sooner when CG needs more than ``max_cg_iterations`` to converge.
Singular systems (no fixed-pressure boundary) are solved on the complement of the constant
vector: the right-hand side is made mean-free and the mean of the solution removed.
"""

from __future__ import annotations

import logging
from typing import Any

import numpy as np
import pyamg
from scipy.sparse.linalg import cg

log = logging.getLogger(__name__)


class PressureSolver:
    """Solves ``A p' = b`` for the symmetric face-stencil matrix filled from (diag, off) by a
    :class:`fvrans.fv.assembly.CsrAssembler`."""

    def __init__(
        self,
        assembler: Any,
        rtol: float = 0.01,
        rebuild_every: int = 20,
        singular: bool = False,
        max_cg_iterations: int = 60,
    ):
        self.assembler = assembler
        self.rtol = float(rtol)
        self.rebuild_every = int(rebuild_every)
        self.singular = bool(singular)
        self.max_cg_iterations = int(max_cg_iterations)
        self.matrix = None
        self._ml = None
        self._uses = 0
        self.last_iterations = 0
        self.total_iterations = 0
        self.rebuilds = 0

    def _rebuild(self) -> None:
        A = self.matrix.copy()
        self._ml = pyamg.ruge_stuben_solver(A, max_coarse=200)
        self._precond = self._ml.aspreconditioner(cycle="V")
        self._uses = 0
        self.rebuilds += 1

    def solve(self, diag: np.ndarray, off: np.ndarray, rhs: np.ndarray, x0: np.ndarray | None = None) -> np.ndarray:
        """Refill the matrix from ``diag`` and the symmetric face coefficients ``off``; solve."""
        self.matrix = self.assembler.matrix(diag, off, off)
        b = rhs.copy()
        if self.singular:
            b -= b.mean()
        bnorm = float(np.linalg.norm(b))
        if bnorm == 0.0:
            self.last_iterations = 0
            return np.zeros_like(b)
        if self._ml is None or self._uses >= self.rebuild_every:
            self._rebuild()
        self._uses += 1
        count = [0]

        def _cb(_xk: np.ndarray) -> None:
            count[0] += 1

        x, info = cg(
            self.matrix, b, x0=x0, rtol=self.rtol, atol=0.0, M=self._precond,
            maxiter=self.max_cg_iterations, callback=_cb,
        )
        if info != 0:
            # the reused hierarchy no longer fits: rebuild once and retry
            self._rebuild()
            count[0] = 0
            x, info = cg(
                self.matrix, b, x0=x, rtol=self.rtol, atol=0.0, M=self._precond,
                maxiter=4 * self.max_cg_iterations, callback=_cb,
            )
            if info != 0:
                log.warning("pressure correction: CG did not reach rtol=%g (%d iterations)", self.rtol, count[0])
        self.last_iterations = count[0]
        self.total_iterations += count[0]
        if self.singular:
            x -= x.mean()
        return x

