"""Pressure-correction solver: conjugate gradients preconditioned by a reused Ruge-Stuben AMG
V-cycle (see :mod:`fvrans.linalg.amg`).

The hierarchy is built from the matrix of one outer iteration and reused for the following
``rebuild_every`` iterations while the matrix changes little; it is rebuilt sooner when CG misses
its tolerance within ``max_cg_iterations``. Singular systems (no fixed-pressure boundary) are
solved on the complement of the constant vector: the right-hand side is made mean-free and the
mean of the solution removed.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from fvrans.linalg.amg import AmgKrylovSolver


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
        self.singular = bool(singular)
        self.matrix = None
        self.krylov = AmgKrylovSolver(
            "cg", rtol=rtol, rebuild_every=rebuild_every, singular=singular, max_iterations=max_cg_iterations
        )
        self._b = np.zeros(assembler.n_cells)

    @property
    def last_iterations(self) -> int:
        return self.krylov.last_iterations

    @property
    def total_iterations(self) -> int:
        return self.krylov.total_iterations

    @property
    def rebuilds(self) -> int:
        return self.krylov.rebuilds

    def solve(
        self, diag: np.ndarray, off: np.ndarray, rhs: np.ndarray, x0: np.ndarray | None = None,
        out: np.ndarray | None = None,
    ) -> np.ndarray:
        """Refill the matrix from ``diag`` and the symmetric face coefficients ``off``; solve
        (initial guess ``x0`` or zero; result in ``out`` if given)."""
        self.matrix = self.assembler.matrix(diag, off, off)
        self._b[:] = rhs
        x = out if out is not None else np.empty_like(self._b)
        if x0 is None:
            x[:] = 0.0
        else:
            x[:] = x0
        self.krylov.solve(self.matrix, self._b, x)
        return x
