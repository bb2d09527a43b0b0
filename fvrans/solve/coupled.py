"""Simultaneous solution of u, v and p: one linear system per outer iteration.

Pressure-based coupled algorithm (Darwish, Sraj & Moukalled 2009, J. Comput. Phys. 228, 180-201):
each outer iteration (a Picard step: convection with the previous face fluxes, deferred terms at
the previous state) solves

  momentum    A u + G p = b_u - E          A: ``_kernels.assemble_momentum``, relaxed a_P / alpha;
                                           G p = sum_f p_f S_f, p_f linearly interpolated
                                           (owner value on boundaries with no given pressure);
                                           E = V grad p - G p of the previous state (so that at
                                           convergence the force is V grad p, the segregated
                                           loop's pressure gradient)
  continuity  sum_f F_f = 0                F_f the Rhie-Chow flux of ``_kernels.rhie_chow_fluxes``
                                           with the unrelaxed V / a_P, linear in (u, p): the face
                                           velocity, the compact pressure difference and the cell
                                           pressure gradients (V^-1 (G p + E)) implicit

for (u, v, p) at once, then rebuilds the face fluxes from the solution (conservative to the
linear tolerance).

Two terms the segregated loop defers are implicit here, because deferred they set the pace of the
outer iterations once convection and pressure are coupled (cavity 24^2: mean contraction per
iteration 0.61 -> 0.31; channel on triangles 0.76 -> 0.41; tests/solve/test_coupled_implicit_terms.py):
the wall faces' second-order viscous flux mu (G + G^T) . S (its derivative with respect to the
cells of the wall fit, ``_wall_flux_matrix``), and the boundary extrapolation of the pressure
gradient, p_b = p_P + grad p_P . d_b, whose per-iteration update contracts a wall cell's error by
only |S_b . d_b| / V = 1/2 on quads: G carries M^-1 = (I - sum_b S_b d_b^T / V)^-1 per cell and the
gradient after the solve is the extrapolation's fixed point (``_pressure_gradient``). Neither
changes the converged answer. From a uniform start with the iterative solve, the first outer
iterations shift the momentum diagonals by a fraction of a_P that halves every iteration
(``_start_shift``): a pseudo-time step that keeps the first systems of a recirculating flow solvable
and leaves the fixed point alone. Once every residual is below ``SolverControls.newton_convection_below``
and the sparse LU solves the systems, convection is linearised by Newton's method instead of Picard's
(``_newton``): the Picard steps' slow contraction in the step's separating shear layer set the outer
iteration count there. The turbulence model stays segregated: ``model.update`` once per outer
iteration, as in :class:`fvrans.solve.simple.SimpleSolver`, whose loop (``run``, the hooks, the
divergence guard, residuals, fields) this class inherits. The converged answer is the segregated
loop's: every equation is the same at convergence (residuals of ``fvrans.fv.residual``).

Linear solvers (``SolverControls.system_solver``; the default 'by-size' takes 'direct' below
``DIRECT_BELOW_CELLS`` cells (``DIRECT_BELOW_CELLS_LAMINAR`` without a turbulence model's equations),
where its factorisation is cheap, and 'iterative' above): 'iterative' (flexible GMRES
right-preconditioned by the upper block-triangular least-squares commutator preconditioner of
``fvrans.linalg.block_preconditioner``, AMG V-cycles for the momentum blocks and the weighted
pressure Laplacian, memory in proportion to the cells; should a solve miss its tolerance, the sparse
LU takes over for the rest of the run) or 'direct' (SuperLU, scipy, minimum-degree ordering of
A^T + A, reused as the preconditioner of FGMRES in later outer iterations).
"""

from __future__ import annotations

import ctypes
import logging
import time
from typing import Any

import numpy as np
import scipy.sparse as sp

from fvrans.errors import CaseError
from fvrans.jit import threads
from fvrans.linalg import _block_kernels as BK
from fvrans.linalg.block_preconditioner import (
    LeastSquaresCommutator,
    PressureConvectionDiffusion,
    SimpleSchur,
    neumann_convection_diffusion,
)
from fvrans.linalg.fgmres import fgmres
from fvrans.linalg.sparse_lu import factorize
from fvrans.solve import _coupled_kernels as CK
from fvrans.solve import _kernels as K
from fvrans.solve.simple import SimpleSolver, face_coefficients

log = logging.getLogger(__name__)
SYSTEM_SOLVERS = ("by-size", "direct", "iterative")
#: with system_solver = "by-size", systems of fewer cells take the sparse LU, larger ones the iterative
#: solve; flows without a turbulence model's equations up to DIRECT_BELOW_CELLS_LAMINAR, since their
#: factors are reused for many outer iterations (2 factorisations in a cavity run), while an eddy
#: viscosity that moves each iteration makes the LU refactorise often (9 times in the fine plate's 34
#: iterations). Single runs to the default stop, seconds direct / iterative (2026-12-03, shared machine,
#: numpy triad 1.08 ms): channel 4 000 cells 1.0 / 2.6, laminar bump 3 712 1.3 / 5.4, laminar plate 3 264
#: 0.6 / 2.0, laminar step 7 872 23.1 / 22.8, turbulent plate 13 056 16.6 / 13.2, cavity 16 384 2.2 / 3.6,
#: cylinder in a channel 27 648 16.2 / 60.4; after the LU refresh rule and the least-squares commutator:
#: cavity 65 536 12.3 / 20.7, turbulent plate 52 224 43.6 / 30.0, turbulent step 6 912 / 27 648 9.1 /
#: 14.7 and 52.5 / 96.8 (the iterative figures of the step from another run, load 3). The LU's factors
#: take 7-9 KB per cell (150-245 entries per row)
DIRECT_BELOW_CELLS = 30000
DIRECT_BELOW_CELLS_LAMINAR = 70000
#: FGMRES restart length and iteration limit of the iterative solve (the Krylov basis holds
#: RESTART + 1 vectors of 3 values per cell: the preconditioned ones are not kept)
RESTART = 20
#: the momentum blocks' multigrid hierarchies are set up anew when a solve needs this many times the
#: FGMRES iterations of the first solve after the last set-up (coarse levels kept from an earlier
#: matrix: the turbulent plate (medium) needed 100-200 iterations per outer iteration while its eddy
#: viscosity developed, 32 with a set-up every outer iteration)
REBUILD_GROWTH = 1.5
#: iterations allowed with kept coarse levels before the hierarchy is set up anew
STALE_KRYLOV = 60
#: the sparse LU takes over once an iterative solve ends above FALLBACK_FACTOR x system_tolerance
FALLBACK_FACTOR = 1.0
#: the number type of the Krylov basis (its sums in double precision): single precision halves the
#: basis (0.25 KB per cell at RESTART 20); the solve's tolerance is 0.01, far above its round-off
KRYLOV_BASIS = np.float32
#: FGMRES iterations allowed per solve (after a fresh hierarchy set-up)
MAX_KRYLOV = 200
#: inexact-Newton forcing of the iterative solve's tolerance (Eisenstat & Walker 1996, SIAM J. Sci.
#: Comput. 17, 16-32, their choice 2, from memory): eta_k = FORCING_GAMMA (f_k / f_(k-1))^FORCING_ALPHA,
#: f_k the norm of the system's (row-scaled) residual at the state of outer iteration k, kept from
#: falling fast by eta_k >= FORCING_GAMMA eta_(k-1)^FORCING_ALPHA when that exceeds 0.1, and held
#: within [system_tolerance, FORCING_MAX]: loose while the outer residual falls slowly (a Picard step
#: need not be solved to 1 % when the next one changes the matrix by more), the system tolerance as it
#: falls fast
FORCING_GAMMA = 0.9
FORCING_ALPHA = 2.0
FORCING_MAX = 0.02
#: the iterative solve's tolerance may exceed FORCING_MAX where the u, v and continuity blocks of the
#: row-scaled start residual r0 are of comparable norm: FGMRES reduces the norm of the whole, and a
#: tolerance eta on the whole bounds each block b by eta |r0| / |r0_b| of its own start, so eta =
#: BLOCK_DROP min_b |r0_b| / |r0| (at most BLOCK_DROP / sqrt(3), 0.29) still takes every block down by
#: BLOCK_DROP. Where one block is small the whole meets a loose tolerance without it: on the turbulent
#: plate (medium) the continuity block is 1/20 and the v block 1/200 of the u block, and at a fixed eta of
#: 0.1 every solve (2 FGMRES iterations) left the continuity block where it was (|r1_c| >= |r0_c|), the v
#: and p parts of the update were further from the exact solve's than the start (error / step 1.2-1.7),
#: and the outer iteration diverged slowly (u imbalance 2e-5 -> 4e-4 over 40 iterations; likewise with
#: the turbulence model frozen); weighting the continuity rows up to the u block's norm converged it (23
#: outer iterations). On the cavity the three blocks are alike and the rule loosens to ~0.29: 128^2,
#: iterative solve, FGMRES 197 -> 123 in all (13 -> 14 outer iterations); the plate's and the step's
#: blocks (1/20-1/200) keep EW's tolerance
BLOCK_DROP = 0.5
#: FORCING_MAX of FGMRES on a kept LU (the direct solve's reuse): a try that stops at a looser tolerance
#: keeps the factors for more outer iterations. Measured 2026-12-03, outer iterations / factorisations at
#: 0.02 -> 0.1: step coarse 31 / 16 -> 30 / 14, medium 30 / 13 -> 32 / 12, fine 32 / 15 -> 31 / 12 (105.4 s
#: at load 1.6 -> 87.2 s at load 1.0, x_r 6.1772390050 -> 6.1772388316). 0.3 saved no more on the fine step
#: (30 / 12) and the coarse step with k-omega SST diverged at its 13th outer iteration (0.02, 0.05, 0.1:
#: 298, 252, 292 outer iterations)
KEPT_LU_FORCING_MAX = 0.1
#: cells whose longest face is more than this many times their shortest are "stretched" for the
#: least-squares commutator preconditioner (its momentum blocks relaxed there; see
#: ``LeastSquaresCommutator.RELAXATION``)
STRETCHED_ASPECT = 1.5
#: cells thin ALONG the flow for the least-squares commutator: longest face more than THIN_ASPECT times
#: the shortest, and the flow through the longest face (|u . n| > THIN_FLOW_COSINE |u|); their rows of
#: the stabilisation take ``LeastSquaresCommutator.THIN_STABILISATION`` (the columns of cells that the
#: step's x-clustering at the step lip carries through the whole height; the plate's leading edge has a
#: few). Cells thin across the flow (wall and shear layers) keep STABILISATION: lowered there as well,
#: the turbulent plate needed 50 / 55 outer iterations instead of 34 / 34 (coarse / medium)
THIN_ASPECT = 10.0
THIN_FLOW_COSINE = 0.7
#: FGMRES iterations preconditioned by an earlier factorisation before the system is factorised anew,
#: by the LU's backend (``fvrans.linalg.sparse_lu``)
REUSE_ITERATIONS = {"superlu": 10, "umfpack": 4}
#: a factorisation is also replaced once the FGMRES iterations it has preconditioned add up to
#: REFACTOR_AFTER (about one factorisation's worth of solves: factorisation / solve time was 23-45 with
#: SuperLU on the bundled systems, 97 on the fine step's, about 20 with UMFPACK there (9 while its solve
#: refined iteratively; REUSE/REFACTOR kept from then: 10 / 20 / no skip gave 12 factorisations in
#: place of 15 but about 100 more solves in missed tries)) while each solve still needs more than
#: KEEP_ITERATIONS: the first factorisation is of the start's matrix, and the later ones are cheaper to
#: precondition with a newer one
REFACTOR_AFTER = {"superlu": 20, "umfpack": 8}
#: after an earlier factorisation failed to precondition a system within REUSE_ITERATIONS, the next
#: system is factorised without trying (the try costs 4 solves, a fifth of a factorisation with
#: UMFPACK, half while its solve refined; a tenth with SuperLU, where it is kept): fine step, Newton's
#: convection, 46 outer iterations: 173 s with a try every outer iteration (refining solves)
SKIP_AFTER_MISS = {"superlu": False, "umfpack": True}
KEEP_ITERATIONS = 2
#: at most this many Newton steps on the boundary extrapolation of the pressure gradient per outer iteration
GRADIENT_STEPS = 6
#: cells whose extrapolation matrix M^-1 has a larger entry keep the lagged extrapolation (M^-1 = I)
EXTRAPOLATION_LIMIT = 3.0
#: the start-up shift of the momentum diagonals (``_start_shift``) is multiplied by START_SHIFT_DECAY each
#: outer iteration and dropped below START_SHIFT_FLOOR of its first value (after 14 iterations)
START_SHIFT_DECAY = 0.5
START_SHIFT_FLOOR = 1e-4
#: Anderson acceleration of the outer iteration (``_accelerate``) acts once every normalised imbalance of
#: two successive iterations is below this
ANDERSON_BELOW = 1e-4
#: Newton's convection and Anderson's acceleration are taken once Picard's steps are seen to be slow
#: (``_picard_is_slow``): the largest imbalance falling by less than SLOW_PICARD per iteration over
#: SLOW_OVER iterations, while it is between SLOW_FLOOR and the thresholds above
SLOW_PICARD = 0.6
SLOW_OVER = 3
SLOW_FLOOR = 1e-10
#: hand the memory of freed arrays back to the system at the phases of an outer iteration (``_release_free``):
#: glibc keeps arrays up to 32 MB in its heap once one of that size was freed, and the freed blocks
#: between live ones stay resident, so the run's peak was the heap's high-water mark, not its arrays
#: (SA plate of 400k cells: 3.41 KB per cell resident against 3.04 traced; 3.08 with it, for ~4 % more
#: CPU time, all of it system time)
RELEASE_FREE_MEMORY = True
try:
    _malloc_trim = ctypes.CDLL(None).malloc_trim  # glibc
except (OSError, AttributeError, TypeError):
    _malloc_trim = None


def _release_free() -> None:
    """Return the freed, unused pages of the C heap to the system (glibc's malloc_trim; elsewhere nothing)."""
    if RELEASE_FREE_MEMORY and _malloc_trim is not None:
        _malloc_trim(0)


#: attributes of :class:`SimpleSolver` that only its own iteration uses, dropped here
SEGREGATED_ONLY = ("psolver", "msolver", "us", "vs", "hbya", "rau", "beta", "dp", "pc", "pcb", "gpc")
#: its work arrays that only the assembly of the system uses, by the part of ``_assemble`` that holds
#: them: "momentum" (face work, sources, pseudo-time, the extra stress's divergence, the convection
#: gradient: ``_momentum_equations`` only), "residual" (the pressure-correction rows of the continuity
#: imbalance), "system" (the momentum equations' coefficients and face viscosities, read until the
#: system is filled). Each is made where its part starts and let go where it ends, so that the linear
#: solve, where memory peaks, holds none of them (~0.36 KB per cell) and the assembly not all at once;
#: each holds components per cell ("c"), per internal face ("f") or per face ("a")
ASSEMBLY_ONLY = {
    "momentum": {"face_work": ("f", 2), "bu": ("c",), "bv": ("c",), "b_np": ("c", 2), "work2": ("c", 2),
                 "pt": ("c",), "gc": ("c", 2, 2), "div_stress": ("c", 2)},
    "residual": {"p_diag": ("c",), "p_off": ("f",), "p_rhs": ("c",)},
    "system": {"diag_u": ("c",), "diag_v": ("c",), "off_own": ("f",), "off_nei": ("f",), "a_rel": ("c", 2),
               "rhs_u": ("c",), "rhs_v": ("c",), "muf": ("a",)},
}
#: of those, the ones the convection-diffusion preconditioner also reads in the linear solve
PCD_READS = ("a_rel", "diag_u")


def _wall_flux_stencil(wall_grad: Any, owner: np.ndarray, S: np.ndarray, nc: int) -> tuple[np.ndarray, ...]:
    """Static parts of :meth:`SimultaneousSolver._wall_flux_matrix`: for every cell q of the wall
    fits (``wall_grad.idx``, ``coef``) and every pair of components (i, j) the row i nc + P (P the
    wall face's cell), the column j nc + q, (n . S) (coef_q . n), t_i, t_j and the wall face."""
    nq = np.diff(wall_grad.ptr)
    k = np.repeat(np.arange(len(wall_grad.faces)), nq)
    keep = wall_grad.idx >= 0
    k = k[keep]
    q = wall_grad.idx[keep]
    faces = wall_grad.faces[k]
    n = wall_grad.normal[k]
    t = wall_grad.tangent[k]
    geo = np.einsum("qd,qd->q", wall_grad.coef[keep], n) * np.einsum("qd,qd->q", n, S[faces])
    P = owner[faces]
    rows, cols, g4, ti, tj, f4 = [], [], [], [], [], []
    for i in range(2):
        for j in range(2):
            rows.append(i * nc + P)
            cols.append(j * nc + q)
            g4.append(geo)
            ti.append(t[:, i])
            tj.append(t[:, j])
            f4.append(faces)
    return (np.concatenate(rows), np.concatenate(cols), np.concatenate(g4), np.concatenate(ti), np.concatenate(tj),
            np.concatenate(f4))


class SystemGradient:
    """G = M^-1 G0 (2nc x nc, rows [x; y]; ``SimultaneousSolver._gradient_values``) read where the
    system holds it, the pressure columns of the momentum rows (the last entries of each row, in the
    order of the compact structure ``cind``/``cidx``): its only copy (~0.13 KB per cell less than a
    matrix of its own). ``make()`` gives its values again when the system's values were released
    (``SimultaneousSolver.release_work``). Products sum each row as a CSR product does: the same bits."""

    def __init__(self, system: sp.csr_matrix, cind: np.ndarray, cidx: np.ndarray, make: Any):
        self._A, self._cind, self._cidx, self._make = system, cind, cidx, make
        nc = len(cind) - 1
        self.shape = (2 * nc, nc)
        self.restore()

    def restore(self) -> None:
        """Put G's values in the system (values made anew when released)."""
        A = self._A
        if A.data.size != A.indices.size:
            A.data = np.zeros(A.indices.size)
        CK.gradient_slots(self.shape[1], self._cind, A.indptr, A.data, self._make(), True)

    def _held(self) -> sp.csr_matrix:
        """The system, with G's values put back first if its values were released."""
        if self._A.data.size != self._A.indices.size:
            self.restore()
        return self._A

    def values(self) -> np.ndarray:
        """G's values (x block, then y block, each on the compact structure; a new array), read from
        the system, which gets them back first when its values were released."""
        A = self._held()
        g = np.empty(2 * len(self._cidx))
        CK.gradient_slots(self.shape[1], self._cind, A.indptr, A.data, g, False)
        return g

    def product(self, p: np.ndarray, first: int, last: int) -> np.ndarray:
        """Rows [first, last) of G p."""
        out = np.empty(last - first)
        CK.gradient_product(self.shape[1], self._cind, self._cidx, self._A.indptr, self._A.data,
                            np.ascontiguousarray(p, dtype=np.float64), first, last, out)
        return out

    def __matmul__(self, p: np.ndarray) -> np.ndarray:
        return self.product(p, 0, self.shape[0])

    def csr_rows(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, int]:
        """(indptr, indices, data, cind, shift) of the system: row r of G is the last cind[c + 1] - cind[c]
        entries of the system's row r (c = r mod nc), at the columns indices - shift (the block
        preconditioner's numba products read G there: ``_block_kernels._g_row_dot``)."""
        A = self._held()
        return A.indptr, A.indices, A.data, self._cind, 2 * self.shape[1]

    def halves(self) -> tuple[_GradientRows, _GradientRows]:
        """The x and y rows of G as operators (products read the system, as G's do)."""
        nc = self.shape[1]
        return _GradientRows(self, 0, nc), _GradientRows(self, nc, 2 * nc)

    def tocsr(self) -> sp.csr_matrix:
        """G as a matrix of its own (a copy: for the SIMPLE-type and convection-diffusion preconditioners
        and for checks)."""
        nnz = len(self._cidx)
        cind = self._cind.astype(np.int64)
        indptr = np.concatenate([cind, cind[1:] + nnz])
        G = sp.csr_matrix((self.values(), np.concatenate([self._cidx, self._cidx]), indptr), shape=self.shape)
        G.has_sorted_indices = True
        return G


class _GradientRows:
    """Rows [first, last) of a :class:`SystemGradient` as an operator."""

    def __init__(self, G: SystemGradient, first: int, last: int):
        self._G, self._first, self._last = G, first, last
        self.shape = (last - first, G.shape[1])

    def __matmul__(self, p: np.ndarray) -> np.ndarray:
        return self._G.product(p, self._first, self._last)

    def tocsr(self) -> sp.csr_matrix:
        return self._G.tocsr()[self._first:self._last]


class SimultaneousSolver(SimpleSolver):
    """:class:`SimpleSolver` whose outer iteration solves momentum and continuity as one system
    (see the module docstring). Same constructor, hooks and attributes; ``bulk_velocity`` is refused
    (its force is found from the segregated momentum matrix)."""

    COUPLINGS = ("simultaneous",)
    #: keep the work arrays of ``ASSEMBLY_ONLY`` after ``_assemble`` (tests compare them)
    keep_assembly_work = False
    _dcoef = _kvec = _gu = _body = None

    # Arrays the assembly and the update after the solve read, but the linear solve (where memory
    # peaks) does not: held from the start of ``_assemble`` to its end, made again when read between
    # (the same values: from the geometry, or from the state the assembly saw).
    def _face_coefficients(self) -> tuple[np.ndarray, np.ndarray]:
        """(dcoef, kvec): the ones the assembly holds, else made (both at once) from the geometry."""
        if self._dcoef is not None and self._kvec is not None:
            return self._dcoef, self._kvec
        return face_coefficients(self.geom)

    @property
    def dcoef(self) -> np.ndarray:
        """|S|^2 / (S . d) per face (``simple.face_coefficients``)."""
        return self._face_coefficients()[0]

    @dcoef.setter
    def dcoef(self, value: np.ndarray) -> None:
        self._dcoef = value

    @property
    def kvec(self) -> np.ndarray:
        """S - dcoef d per face (``simple.face_coefficients``)."""
        return self._face_coefficients()[1]

    @kvec.setter
    def kvec(self, value: np.ndarray) -> None:
        self._kvec = value

    @property
    def body(self) -> np.ndarray:
        """The body force per unit volume (nc x 2): zeros, made when read, when there is none."""
        return self._body if self._body is not None else np.zeros((self.nc, 2))

    @body.setter
    def body(self, value: np.ndarray) -> None:
        self._body = value

    @property
    def _zero_c2(self) -> np.ndarray:
        """Zero inputs of the flux kernels (nc x 2, nc): made when read, not held."""
        return np.zeros((self.nc, 2))

    @property
    def _zero_c(self) -> np.ndarray:
        return np.zeros(self.nc)

    _zero_beta = _zero_c

    @property
    def gu(self) -> np.ndarray:
        """The cell velocity gradient of the current velocity with the boundary values of the last
        assembly (the boundary values' tangential extrapolation reads it at the next one): made again
        from those after the solve, and kept until the end of the next assembly."""
        if self._gu is None:
            self._gu = self.grad(self.fields.velocity, self.ub)
        return self._gu

    @gu.setter
    def gu(self, value: np.ndarray) -> None:
        self._gu = value

    def __init__(self, *args: Any, **kwargs: Any):
        if kwargs.get("bulk_velocity") is not None:
            raise CaseError(
                "mean_flow.bulk_velocity: solver.coupling = 'simultaneous' cannot hold a bulk velocity; "
                "give mean_flow.pressure_gradient instead, or use coupling = 'simplec'"
            )
        super().__init__(*args, **kwargs)
        if self.ctl.system_solver not in SYSTEM_SOLVERS:
            raise ValueError(f"unknown system_solver {self.ctl.system_solver!r}; use one of {SYSTEM_SOLVERS}")
        #: the linear solver this run uses ('direct' or 'iterative'; "by-size" chooses by the cell count)
        self.system_solver = self.ctl.system_solver
        if self.system_solver == "by-size":
            limit = DIRECT_BELOW_CELLS if self.model.names else DIRECT_BELOW_CELLS_LAMINAR
            self.system_solver = "direct" if self.nc < limit else "iterative"
        nc, ni, g = self.nc, self.ni, self.geom
        # the segregated loop's own solvers and work arrays (pressure correction, predicted velocity,
        # interpolation coefficients): not used on this path (~0.13 KB per cell)
        for name in SEGREGATED_ONLY:
            delattr(self, name)
        for part in ASSEMBLY_ONLY:
            self._assembly_work(part, False)
        # no body force: none held (``body`` gives zeros when read)
        if not np.any(self._body):
            self._body = None
        # the laminar viscosity per cell: made when needed (``_assemble``)
        del self.mu_cell
        # the flow rate per cell and its floor: for pseudo-time steps only
        if not (self.ctl.momentum_cfl > 0.0 or (self.model.names and self.ctl.turbulence_cfl > 0.0)):
            self.flow_rate = self.width = None
        # one buffer for the pressure gradient: ``_pressure_gradient`` works on a copy of the old one
        self.grad_p_buf = (np.zeros((nc, 2)),) * 2
        kind = self.bc.kind
        self.fixed = (kind == K.OUTLET) | (kind == K.FREESTREAM)
        self.singular = not self.bc.has_fixed_pressure
        # static parts, made once: the compact structure of the mesh (diagonal and face neighbours,
        # shared with the segregated assemblers), G = M^-1 G0 (2nc x nc) on it, the wall-flux
        # matrix's pattern and the pattern of the whole system; ``_assemble`` refills the values
        minv = CK.extrapolation_inverse(self.owner, ni, self.S, g.face_delta, ~self.fixed, self.vol,
                                        EXTRAPOLATION_LIMIT)
        compact = self.asm_u.matrix(np.zeros(nc), np.zeros(ni), np.zeros(ni))
        self._cind, self._cidx = compact.indptr, compact.indices
        # M^-1 differs from the identity only in cells with an extrapolated boundary face: those kept
        eye = (minv[:, 0, 0] == 1.0) & (minv[:, 1, 1] == 1.0) & (minv[:, 0, 1] == 0.0) & (minv[:, 1, 0] == 0.0)
        #: the cells whose M^-1 is not the identity, and their M^-1
        self._extrapolated = np.flatnonzero(~eye)
        self._extrapolation_inverse = np.ascontiguousarray(minv[self._extrapolated])
        self._wall, self._wall_stencil, wall_cells = self._wall_flux_pattern()
        #: Newton's linearisation of convection may be taken (``_newton``): with the sparse LU only
        self.newton_allowed = self.ctl.newton_convection_below > 0.0 and self.system_solver == "direct"
        if self.newton_allowed:
            # the Newton part of the convection term couples u and v on the compact structure
            wall_cells = _merged_rows(self._cind, self._cidx, *wall_cells)
        self._A = self._system_pattern(*wall_cells)
        #: G, held in the system's momentum rows (``SystemGradient``)
        self.G = SystemGradient(self._A, self._cind, self._cidx, self._gradient_values)
        del minv, eye
        wrows = np.repeat(np.arange(2 * nc, dtype=np.int64), np.diff(self._wall.indptr))
        self._wall_in_system = np.empty(self._wall.nnz, dtype=np.int64)
        CK.positions(self._A.indptr, self._A.indices, wrows, self._wall.indices.astype(np.int64),
                     self._wall_in_system)
        self.lin_seconds = 0.0
        self.lin_iterations: list[int] = []
        self._lu = None
        self._lu_iterations = 0
        #: the last try of the kept factorisation missed (``SKIP_AFTER_MISS``)
        self._lu_missed = False
        self.factorisations = 0
        self._mu_t = None
        #: cell pressure gradients of the continuity fluxes implicit (True) or from the previous state
        #: (cavity 64^2 / 128^2: 17 / 16 against 19 / 17 iterations, each about 10 % cheaper lagged)
        self.implicit_gradient = True
        self.eddy_viscosity_relaxation = float(self.ctl.eddy_viscosity_relaxation)
        self._prec = None
        self._lq = None  # the least-squares commutator's Lq, on the compact structure
        self._row_scale = None
        #: the iterative solve missed its tolerance once; the direct solve takes over
        self.fell_back = False
        self._fresh_its: float | None = None
        self._since_setup = 0
        self._missed = False
        self.lin_residuals: list[float] = []
        #: the relative tolerance each iterative solve was given (``FORCING_*``; ``system_tolerance``
        #: throughout when ``forcing`` is False)
        self.lin_tolerances: list[float] = []
        self.forcing = True
        self._outer_norm: float | None = None
        #: Schur complement approximation of the iterative solve: "least-squares-commutator" (the
        #: default), "convection-diffusion" (fails on the backward-facing step's recirculation) or
        #: "simple" (the SIMPLE-type baseline, whose iterations grow with the grid)
        self.preconditioner = "least-squares-commutator"
        #: the start-up shift of this outer iteration, a fraction of a_P (``_start_shift``)
        self.shift = 0.0
        #: the convection term of this outer iteration's system is linearised by Newton's method (``_newton``)
        self.newton = False
        #: boundary faces whose mass flux follows the cell velocity (given pressure, outer flow)
        self._flux_faces = (self.ni + np.flatnonzero(self.fixed)).astype(np.int64)
        #: history depth of the Anderson acceleration (``_accelerate``; ``SolverControls.anderson_depth``,
        #: None: 3 with the sparse LU, 0 (off) with the iterative solve)
        depth = self.ctl.anderson_depth
        self.anderson_depth = int(depth) if depth is not None else (3 if self.system_solver == "direct" else 0)
        self._anderson: dict[str, Any] = {}
        #: the mixing coefficients of the last accelerated iteration (empty when it was not accelerated)
        self.anderson_gamma = np.zeros(0)
        #: Picard's outer iterations were seen to contract slowly in this run (``_picard_is_slow``)
        self.slow_picard = False

    def _assembly_work(self, part: str, make: bool) -> None:
        """Make (zeros) or let go the work arrays of ``ASSEMBLY_ONLY[part]`` (those the preconditioner
        reads stay with the convection-diffusion preconditioner)."""
        keep = PCD_READS if getattr(self, "preconditioner", None) == "convection-diffusion" else ()
        rows = {"c": self.nc, "f": self.ni, "a": self.nf}
        for name, (where, *comp) in ASSEMBLY_ONLY[part].items():
            if make:
                setattr(self, name, np.zeros((rows[where], *comp)))
            elif name not in keep and not self.keep_assembly_work:
                setattr(self, name, None)

    def release_work(self) -> None:
        """Free the linear solve's memory when the run is over, before its outputs are evaluated
        (cavity of 400k cells: ~1.5 KB per cell): the block preconditioner's multigrid hierarchies,
        the sparse LU and the system's values (its pattern stays); a further iteration makes them
        again."""
        self._prec = None
        self._lq = None
        self._fresh_its = None
        self._lu = None
        self._A.data = np.empty(0)

    # -- static parts ---------------------------------------------------------------------------
    def _gradient_values(self) -> np.ndarray:
        """The values of G = M^-1 G0 (2nc x nc, rows [x; y]; x block then y block, each on the compact
        structure): G0 p = sum_f p_f S_f (p_f linearly interpolated, the owner's value on boundary faces
        without a given pressure), M^-1 the extrapolation per cell (the identity but in the cells of
        ``_extrapolated``; ``_coupled_kernels.gradient_values``)."""
        nc = self.nc
        minv = np.zeros((nc, 2, 2))
        minv[:, 0, 0] = minv[:, 1, 1] = 1.0
        minv[self._extrapolated] = self._extrapolation_inverse
        data = np.empty(2 * len(self._cidx))
        CK.gradient_values(nc, self._cind, self._cidx, self.cf_ptr, self.cf_face, self.owner, self.neigh, self.ni,
                           self.S, self.geom.face_weight, ~self.fixed, minv, data)
        return data

    @property
    def D(self) -> sp.csr_matrix:
        """The velocity part of continuity (nc x 2nc): rho times the face sums of u_f . S_f over the
        faces with no given flux (static; the system holds it, this copy is made on request)."""
        nc = self.nc
        rows, cols, vals = CK.face_sum_triplets(self.owner, self.neigh, self.ni, self.S, self.geom.face_weight,
                                                self.fixed, float(self.rho))
        return sp.csr_matrix((vals.T.ravel(), (np.tile(rows, 2), np.concatenate([cols, nc + cols]))),
                             shape=(nc, 2 * nc))

    def _wall_flux_pattern(self) -> tuple:
        """The wall-flux matrix on its pattern (values zero), the stencil with each entry's place in
        it (``_wall_flux_matrix`` refills the values), and the wall-fit cells of each cell (CSR:
        pointers, cells) for the system's pattern."""
        nc = self.nc
        rows, cols, geo, t_row, t_col, faces = _wall_flux_stencil(self.wall_grad, self.owner, self.S, nc)
        own = self.owner[self.wall_faces].astype(np.int64)
        r = np.concatenate([rows, own, nc + own]).astype(np.int64)
        c = np.concatenate([cols, own, nc + own]).astype(np.int64)
        W = sp.csr_matrix((np.ones(len(r)), (r, c)), shape=(2 * nc, 2 * nc))
        W.sum_duplicates()
        W.sort_indices()
        W.data[:] = 0.0
        pos = np.empty(len(r), dtype=np.int64)
        CK.positions(W.indptr, W.indices, r, c, pos)
        m = len(rows)
        # the u-u block of the stencil: rows P, columns q (the wall-fit cells of P's wall faces)
        P, q = rows[: m // 4], cols[: m // 4]
        order = np.argsort(P, kind="stable")
        wptr = np.zeros(nc + 1, dtype=np.int64)
        np.cumsum(np.bincount(P, minlength=nc), out=wptr[1:])
        return W, (pos[:m], geo, t_row, t_col, faces, pos[m:]), (wptr, q[order].astype(np.int64))

    def _system_pattern(self, wptr: np.ndarray, wcells: np.ndarray) -> sp.csr_matrix:
        """The system's matrix on its pattern (``_coupled_kernels.system_pattern``), values zero."""
        nc = self.nc
        n = 3 * nc
        indptr = np.zeros(n + 1, dtype=np.int64)
        itype = self._cidx.dtype
        CK.system_pattern(nc, self._cind, self._cidx, wptr, wcells, indptr, np.zeros(1, dtype=itype), False)
        np.cumsum(indptr, out=indptr)
        if indptr[-1] >= 2**31 - 1:
            itype = np.int64
        indices = np.empty(int(indptr[-1]), dtype=itype)
        CK.system_pattern(nc, self._cind, self._cidx, wptr, wcells, indptr, indices, True)
        A = sp.csr_matrix((np.zeros(len(indices)), indices, indptr.astype(itype)), shape=(n, n))
        A.has_sorted_indices = True
        return A

    # -- assembly ---------------------------------------------------------------------------
    def _assemble(self):
        """The coupled matrix and right-hand side at the current state; also the residuals of the
        state (the segregated loop's definitions)."""
        fl = self.fields
        rho, ni, g, kind, nc = self.rho, self.ni, self.geom, self.bc.kind, self.nc
        u_old = fl.velocity
        F_old = fl.face_flux
        _release_free()
        self._assembly_work("momentum", True)
        self._assembly_work("system", True)
        self._dcoef, self._kvec = face_coefficients(g)
        mu_t = self.model.eddy_viscosity(fl)
        if mu_t is not None:
            # the eddy viscosity the momentum equations see follows the model's with a lag,
            # mu_t <- mu_t + w (mu_t(model) - mu_t): a full response of the velocity to each new mu_t
            # met the model's next response in a period-2 cycle (step, coarse grid)
            w = self.eddy_viscosity_relaxation
            if self._mu_t is None or w >= 1.0:
                self._mu_t = np.array(mu_t, dtype=float)
            else:
                self._mu_t += w * (mu_t - self._mu_t)
            mu_t = self._mu_t
        mu_cell = np.full(nc, self.mu) if mu_t is None else self.mu + mu_t
        gu, hu, ru, rv, mag, self.use_turbulence_cfl, _ = self._momentum_equations(mu_cell)
        del mu_cell
        self._assembly_work("momentum", False)
        gp = self.grad_p
        res = [ru / (mag + 1e-300), rv / (mag + 1e-300)]
        self.shift = self._start_shift()
        if self.shift > 0.0:
            # the start-up shift s a_P on the momentum diagonals and s a_P u_old on the right-hand sides
            # (a pseudo-time step; Rhie-Chow keeps the unshifted V / a_P, so the fixed point is unchanged)
            self.a_rel[:, 0] += self.shift * self.diag_u
            self.a_rel[:, 1] += self.shift * self.diag_v
            self.rhs_u += self.shift * self.diag_u * u_old[:, 0]
            self.rhs_v += self.shift * self.diag_v * u_old[:, 1]
        V = self.vol
        r_u = V / self.diag_u
        r_v = V / self.diag_v
        rbar = V / (0.5 * (self.diag_u + self.diag_v))
        # the continuity residual of the current state: its Rhie-Chow fluxes
        K.boundary_pressure(self.owner, ni, g.face_delta, kind, self.bc.pressure, fl.pressure, gp, self.pb)
        hb = np.empty((nc, 2))
        hb[:, 0] = u_old[:, 0] + r_u * gp[:, 0]
        hb[:, 1] = u_old[:, 1] + r_v * gp[:, 1]
        Fe = np.empty(self.nf)
        K.rhie_chow_fluxes(self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
                           g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, hb, rbar, fl.pressure, gp,
                           self.pb, kind, self.bc.velocity, self._zero_beta, F_old, Fe)
        del hb
        self._assembly_work("residual", True)
        imb, thr = K.assemble_pressure_correction(self.owner, self.neigh, ni, self.dcoef, rho, rbar, kind, Fe,
                                                  self.p_diag, self.p_off, self.p_rhs, self.cf_ptr, self.cf_face)
        self._assembly_work("residual", False)
        del Fe
        res.append(imb / (thr + 1e-300))
        # the part of the fluxes independent of (u, p): inflow, given outlet pressures, the
        # skewness and quadratic terms of the face velocity
        Fc = np.empty(self.nf)
        K.rhie_chow_fluxes(self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
                           g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, self._zero_c2, rbar,
                           self._zero_c, self._zero_c2, self.pb, kind, self.bc.velocity, self._zero_beta, F_old, Fc)
        c0 = np.zeros(nc)
        CK.face_sums(self.owner, self.neigh, ni, Fc, c0)
        del Fc
        # the system, refilled in place on its pattern: momentum rows (A + W, G), then continuity rows
        # (D, A_pp = Lc + W V^-1 G with W the response to the cell pressure gradients), whose
        # product reads G's values
        p = fl.pressure
        A = self._A
        # G's values, taken out of the system's momentum rows while they are refilled (the system gets
        # them back first when its values were released: ``release_work``)
        g_data = self.G.values()
        Gp = self.G @ p
        E = self._gradient_defect(Gp)
        # the wall faces' flux mu (G + G^T) . S implicit in full (the segregated assembly keeps the
        # part beyond mu dcoef (u_wall - u_P) deferred): A + W, right-hand side + W u_old
        Wall = self._wall_flux_matrix()
        CK.momentum_rows(nc, self._cind, self.cf_ptr, self.cf_face, self.owner, self.neigh, ni, self.a_rel,
                         self.off_own, self.off_nei, g_data, Wall.data, self._wall_in_system, A.indptr,
                         A.indices, A.data)
        rhs = np.empty(3 * nc)
        # continuity: D u + D R grad p - K grad p + Lc p = -c0, grad p = V^-1 (G p + E)
        CK.continuity_rows(nc, self._cind, self._cidx, self.cf_ptr, self.cf_face, self.owner, self.neigh, ni,
                           self.S, g.face_weight, self.dcoef, self.kvec, rbar, r_u, r_v, V, self.fixed, rho,
                           self.implicit_gradient, g_data, E, gp, c0, A.indptr, A.indices, A.data,
                           rhs[2 * nc:], threads())
        del c0, g_data
        # (in place: (b + G p) + W u_old, the same sums as with temporaries)
        rhs[:nc] = self.rhs_u
        rhs[nc:2 * nc] = self.rhs_v
        rhs[:2 * nc] += Gp
        del Gp
        rhs[:2 * nc] += Wall @ np.concatenate([u_old[:, 0], u_old[:, 1]])
        self.newton = self._newton(res)
        if self.newton:
            CK.convection_newton(nc, self.owner, self.neigh, ni, self.S, g.face_weight, g.face_centre, g.cell_centre,
                                 g.face_shift, float(rho), u_old, gu, F_old, self._flux_faces, self.ub, A.indptr,
                                 A.indices, A.data, rhs)
        # what the linear solve and the update read: the momentum blocks without the wall-flux
        # matrix (the segregated assemblers' matrices, refilled in place) for the preconditioner, ...
        Au = self.asm_u.matrix(self.a_rel[:, 0], self.off_own, self.off_nei)
        Av = self.asm_v.matrix(self.a_rel[:, 1], self.off_own, self.off_nei)
        # (the velocity gradient is not held through the solve: ``gu`` makes it again after it)
        # (E is made again after the solve: ``_gradient_defect``, not held through it)
        self._parts = (Au, Av, None, r_u, r_v, rbar, None, hu, Wall)
        self._assembly_work("system", False)
        if not self.keep_assembly_work:
            self._dcoef = self._kvec = self._gu = None
        _release_free()
        return A, rhs, res

    def _gradient_defect(self, Gp: np.ndarray | None = None) -> np.ndarray:
        """E = V grad p - G p at the current state (x rows, then y rows; ``Gp``: G p when already
        made): the part of the loop's pressure force V grad p beyond G p."""
        V, gp = self.vol, self.grad_p
        if Gp is None:
            Gp = self.G @ self.fields.pressure
        return np.concatenate([V * gp[:, 0], V * gp[:, 1]]) - Gp

    def _newton(self, res: list[float]) -> bool:
        """Whether this outer iteration linearises convection by Newton's method: once every normalised imbalance
        of the last iteration (the model's too) and the flow's at the current state are below
        ``SolverControls.newton_convection_below``. Picard's linearisation, F_old u_new, contracts the error of
        a separating shear layer slowly: 0.77-0.8 per outer iteration in the cells behind the step's lip with
        the eddy viscosity frozen (coarse step; 0.72 with upwind convection), 0.45 with the Newton part
        (F(u_new) - F(u_old)) phi_old added (``_coupled_kernels.convection_newton``, which takes its convective
        form; the Newton-like linearisation of Ferziger & Peric 2002, Computational Methods for Fluid Dynamics,
        sec. 5.4, from memory). From a uniform start Newton's step diverges (step, iteration 2): Picard's steps
        come first (Elman, Silvester & Wathen 2005, Finite Elements and Fast Iterative Solvers, sec. 7.3, from
        memory, for the same hybrid). Gated on every residual rather than the flow's alone: while the
        turbulence model's equation is far from converged, Newton's steps slowed the plate (coarse: 28 -> 32
        outer iterations). Only with the sparse LU (``newton_allowed``): the iterative solve's block
        preconditioner keeps Picard's momentum blocks, and FGMRES then needed 3.4 times the iterations per
        outer iteration (medium step: 58 outer iterations, 68 FGMRES each, against 99 and 20 with Picard's: the
        linear solves took longer); its multigrid hierarchies of the blocks with the Newton part (not
        M-matrices) missed the tolerance and the LU took over."""
        below = self.ctl.newton_convection_below
        # also only once Picard's steps are seen to be slow (``_picard_is_slow``)
        if not self.newton_allowed or not self.history.rows:
            return False
        return max(res) <= below and max(self.history.rows[-1]) <= below and self._picard_is_slow(below)

    def _picard_is_slow(self, below: float) -> bool:
        """Whether Picard's steps have been seen to contract slowly in this run (then for good): the largest
        normalised imbalance fell by less than ``SLOW_PICARD`` per iteration over the last ``SLOW_OVER``,
        all of them between ``SLOW_FLOOR`` and ``below``. Where Picard's steps are fast, Newton's and
        Anderson's gain little and can cost: the laminar plate (Picard 0.37-0.45 per iteration) took 14
        against 18 to the settled stop, but its warm start from the next Reynolds number no longer saved
        any (14 and 14, cases/reynolds_series.py); the cavity 64^2 / 128^2 12 / 10 against 14 / 14. With
        the rule the step's Newton steps start a few iterations later (coarse 42 -> 45)."""
        if not self.slow_picard:
            rows = self.history.rows[-SLOW_OVER - 1:]
            peaks = [max(r) for r in rows]
            if len(rows) == SLOW_OVER + 1 and all(SLOW_FLOOR <= p <= below for p in peaks):
                self.slow_picard = (peaks[-1] / peaks[0]) ** (1.0 / SLOW_OVER) > SLOW_PICARD
        return self.slow_picard

    def _start_shift(self) -> float:
        """The fraction s of a_P added to the momentum diagonals in this outer iteration (and s a_P
        u_old to the right-hand sides: a pseudo-time step of rho V / dt = s a_P): s = s_0 q^n at
        outer iteration n = 0, 1, ... of a start without face fluxes (``SolverControls.
        momentum_start_shift`` s_0, q = ``START_SHIFT_DECAY``) solved by the iterative solve, zero once
        below ``START_SHIFT_FLOOR`` s_0. From a uniform start the momentum blocks are nearly singular:
        closed streamlines of the new recirculation with an eddy viscosity not yet grown (the fine step
        from outer iteration 2: no preconditioner reaches the tolerance in 200 iterations); the sparse
        LU solves them as they are, and a warm start has its eddy viscosity. A shift tied to the
        residual instead (switched evolution relaxation, Mulder & van Leer 1985, from memory) holds the
        recirculation's slow modes back for as long as it lasts (coarse step, sparse LU, s = 0.1 min(1,
        R / 1e-4), R the momentum imbalance: 136 outer iterations instead of 83)."""
        s0 = self.ctl.momentum_start_shift
        if s0 <= 0.0 or not self.cold_start or self.system_solver != "iterative" or self.fell_back:
            return 0.0
        s = s0 * START_SHIFT_DECAY ** self.iteration
        return s if s >= START_SHIFT_FLOOR * s0 else 0.0

    def _wall_flux_matrix(self) -> sp.csr_matrix:
        """W: the derivative of the wall faces' viscous flux mu (G + G^T) . S (``assemble_momentum``,
        G the wall gradient of ``fvrans.fv.wall_gradient``) with respect to the cell velocities, less
        the implicit part mu dcoef the assembly already holds. On a wall only the fitted shear
        t . g_n depends on the cells: flux = mu (n . S) (t . g_n) t + terms of the wall velocity."""
        pos, geo, t_row, t_col, faces, dpos = self._wall_stencil
        W = self._wall
        CK.wall_flux_values(pos, geo, t_row, t_col, faces, dpos, self.wall_faces, self.muf, self.dcoef, W.data)
        return W

    def _pressure_gradient(self, p: np.ndarray, gp: np.ndarray) -> np.ndarray:
        """The pressure gradient of the segregated loop (``grad_pressure`` with the boundary values
        extrapolated, p_b = p_P + grad p_P . (x_f - x_P)) at its fixed point in the extrapolation: the
        segregated loop updates p_b once per iteration, which contracts errors of the wall cells'
        gradients by only |S_b . d_b| / V ~ 1/2 per iteration. Newton steps on the fixed point
        g = T(g): g <- g + M^-1 (T(g) - g), M = I - sum_b S_b d_b^T / V (exact for the face-sum part;
        the least-squares skewness part converges in the few steps)."""
        g, ni = self.geom, self.ni
        g_cur = np.array(gp, dtype=float)
        scale = float(np.abs(g_cur).max()) + 1e-300
        for step in range(GRADIENT_STEPS):
            K.boundary_pressure(self.owner, ni, g.face_delta, self.bc.kind, self.bc.pressure, p, g_cur, self.pb)
            t = self.grad_pressure(p, self.pb, out=self.grad_p_buf[(self.iteration + step) % 2])
            r = t - g_cur
            change = float(np.abs(r).max())
            # g += M^-1 r, M^-1 the identity outside the cells of ``_extrapolated``
            c = self._extrapolated
            r[c] = np.einsum("cij,cj->ci", self._extrapolation_inverse, r[c])
            g_cur += r
            scale = max(scale, float(np.abs(g_cur).max()))
            if change <= 1e-13 * scale:
                break
        out = self.grad_p_buf[self.iteration % 2]
        out[...] = g_cur
        K.boundary_pressure(self.owner, ni, g.face_delta, self.bc.kind, self.bc.pressure, p, out, self.pb)
        return out

    # -- linear solves ------------------------------------------------------------------------
    def _pin_level(self, A: sp.csr_matrix, rhs: np.ndarray) -> None:
        """Without a given pressure the pressure level is free: the first cell's continuity row
        (the rows sum to zero) is replaced by p_0 = its current value (in place)."""
        r = 2 * self.nc
        lo, hi = A.indptr[r], A.indptr[r + 1]
        cols = A.indices[lo:hi]
        A.data[lo:hi] = np.where(cols == r, 1.0, 0.0)
        rhs[r] = self.fields.pressure[0]

    def _state_vector(self) -> np.ndarray:
        """The current state as the system's unknowns [u; v; p] (a new array)."""
        return np.concatenate([self.fields.velocity[:, 0], self.fields.velocity[:, 1], self.fields.pressure])

    def _solve_direct(self, A: sp.csr_matrix, rhs: np.ndarray) -> np.ndarray:
        """The sparse LU of the system (``fvrans.linalg.sparse_lu``: UMFPACK, or SuperLU), reused for later
        outer iterations as the preconditioner of flexible GMRES while that reaches the outer iteration's
        tolerance (``_forcing_tolerance``) within ``REUSE_ITERATIONS`` iterations (the matrix changes
        little from one outer iteration to the next; a solve costs 1/20-1/100 of a factorisation);
        refactorised when it does not, or when the solves it has preconditioned have cost about one
        factorisation (``REFACTOR_AFTER``)."""
        if self.singular:
            self._pin_level(A, rhs)
        backend = self._lu.backend if self._lu is not None else ""
        worn = self._lu is not None and (self._lu_iterations >= REFACTOR_AFTER[backend]
                                         and self.lin_iterations[-1] > KEEP_ITERATIONS)
        skip, self._lu_missed = self._lu_missed, False
        x0 = self._state_vector()
        # rows scaled by their diagonals, so that the residual norm GMRES reduces weighs every
        # equation alike (momentum rows of thin wall cells are many decades above the rest)
        d = np.abs(A.diagonal())
        d = 1.0 / np.where(d > 0.0, d, 1.0)
        r0 = d * (rhs - A @ x0)
        # a fresh factorisation solves to round-off; the kept one is taken while FGMRES reaches the
        # inexact-Newton tolerance (``_forcing_tolerance``, at most KEPT_LU_FORCING_MAX: figures there)
        tol = self._forcing_tolerance(float(np.linalg.norm(r0)), KEPT_LU_FORCING_MAX)
        self.lin_tolerances.append(tol)
        if self._lu is not None and not worn and not skip:
            lu = self._lu
            dx, its, rel = fgmres(_row_scaled_product(A, d), lambda v: lu.solve(v / d), r0,
                                  tol, REUSE_ITERATIONS[backend], REUSE_ITERATIONS[backend])
            self._lu_iterations += its
            del lu
            if rel <= tol:
                self.lin_iterations.append(its)
                return x0 + dx
            self._lu_missed = SKIP_AFTER_MISS[backend]
        del x0, r0
        # the old factors are freed before the new ones are made (UMFPACK's symbolic analysis is kept)
        analysis = getattr(self._lu, "analysis", None)
        self._lu = None
        # the factorisation sees the nonzeros only (the system's pattern also holds the places
        # where a coefficient vanishes, e.g. the cross terms on Cartesian cells)
        Ac = A.tocsc()
        Ac.eliminate_zeros()
        self._lu = factorize(Ac, analysis=analysis)
        del Ac, analysis
        self._lu_iterations = 0
        self.factorisations += 1
        self.lin_iterations.append(1)
        return self._lu.solve(rhs)

    def _block_preconditioner(self):
        """The block preconditioner of the iterative solve, made on first use (the compact unit
        Laplacian of the pressure convection-diffusion form depends on the mesh only)."""
        if self._prec is None:
            every = self.ctl.amg_rebuild_every
            if self.preconditioner == "simple":
                self._prec = SimpleSchur(self.G.tocsr(), self.D, self.singular, every)
            elif self.preconditioner == "least-squares-commutator":
                wall_cells = np.zeros(self.nc, dtype=bool)
                wall_cells[self.owner[self.ni:][self.bc.kind == K.WALL]] = True
                # stretched cells: longest face over shortest above STRETCHED_ASPECT
                smag = np.linalg.norm(self.S, axis=1)
                longest = np.zeros(self.nc)
                shortest = np.full(self.nc, np.inf)
                for cells, faces in ((self.owner, smag), (self.neigh, smag[:self.ni])):
                    np.maximum.at(longest, cells, faces)
                    np.minimum.at(shortest, cells, faces)
                # D: the continuity rows of the system (``update(system=)``), not a copy of it
                self._prec = LeastSquaresCommutator(self.G, None, self.singular, wall_cells,
                                                    longest > STRETCHED_ASPECT * shortest)
                # thin cells: the unit normal of their longest face (zero elsewhere)
                self._thin_normal = np.zeros((self.nc, 2), dtype=np.float32)
                thin = longest > THIN_ASPECT * shortest
                for cells, faces in ((self.owner, np.arange(len(smag))), (self.neigh, np.arange(self.ni))):
                    hit = thin[cells] & (smag[faces] >= longest[cells])
                    self._thin_normal[cells[hit]] = self.S[faces[hit]] / smag[faces[hit], None]
            else:
                # the unit Laplacian: Dirichlet on faces with a given pressure and at inflow (Elman &
                # Tuminaro 2009, from memory: step coarse 118 -> 79 FGMRES iterations at one state, fine
                # plate 75 -> 57), Neumann elsewhere
                kind = self.bc.kind
                inflow = (kind == K.INLET) | (kind == K.FREESTREAM)
                rows, cols, vals = CK.pressure_difference_triplets(
                    self.owner, self.neigh, self.ni, self.dcoef, self.kvec, self.geom.face_weight,
                    np.ones(self.nc), self.fixed | inflow, 1.0)
                lap = sp.csr_matrix((vals[:, 0], (rows, cols)), shape=(self.nc, self.nc))
                singular = self.singular and not inflow.any()
                self._prec = PressureConvectionDiffusion(lap, self.G.tocsr(), self.vol, float(self.rho), singular)
                # rows of A_p that keep the momentum matrix's boundary condition: cells at inflow
                self._ap_keep = np.zeros(self.nc, dtype=bool)
                self._ap_keep[self.owner[self.ni:][inflow]] = True
        return self._prec

    def _commutator_laplacian(self, Au: sp.csr_matrix, Av: sp.csr_matrix) -> sp.csr_matrix:
        """Lq of :class:`LeastSquaresCommutator`: the compact Laplacian with the face weights
        rho r_f, r = w V / q, q the mean of the momentum blocks' diagonals, w its boundary weights
        (Dirichlet on faces with a given pressure), on the compact structure of the mesh; its values
        are refilled in place every outer iteration (no triplets: ~0.5 KB per cell at the peak)."""
        q = 0.5 * (Au.diagonal() + Av.diagonal())
        if self._lq is None:
            self._lq = sp.csr_matrix((np.zeros(len(self._cidx)), self._cidx, self._cind), shape=(self.nc, self.nc))
            self._lq.has_sorted_indices = True
        lq = self._lq
        BK.weighted_laplacian(lq.indptr, lq.indices, self.owner, self.neigh, self.ni, self.dcoef,
                              self.geom.face_weight, self._prec.weight * self.vol / q, self.fixed, float(self.rho),
                              lq.data)
        return lq

    def _solve_gmres(self, A: sp.csr_matrix, rhs: np.ndarray) -> np.ndarray:
        """Flexible GMRES(``RESTART``) on the system, right-preconditioned by one block sweep of
        AMG V-cycles (``fvrans.linalg.block_preconditioner``), from the current state, to
        ``system_tolerance`` relative to the first residual."""
        nc = self.nc
        # the preconditioner's momentum blocks leave out the implicit correction of the wall
        # faces' viscous flux (``_wall_flux_matrix``): with it, the pressure convection-diffusion
        # approximation lost its grid independence (cavity 32^2 / 64^2 / 128^2, FGMRES to 1e-6
        # at one state: 39 / 55 / 103 iterations with it, 39 / 43 / 44 without)
        Au, Av = self._parts[0], self._parts[1]
        if self.preconditioner == "simple":
            # the SIMPLE-type baseline takes the system's own blocks
            Au, Av = A[:nc, :nc].tocsr(), A[nc:2 * nc, nc:2 * nc].tocsr()
            App = A[2 * nc:, 2 * nc:].tocsr()
        prec = self._block_preconditioner()
        rebuild = False
        if self.preconditioner == "simple":
            prec.update(Au, Av, App)
        else:
            # a new momentum hierarchy after amg_rebuild_every outer iterations, when the last solve
            # needed REBUILD_GROWTH times the iterations of the first after the last set-up, or when
            # a solve with the kept coarse levels misses the tolerance (below)
            its = self.lin_iterations
            self._since_setup += 1
            # (iterations per decade of residual reduction: the forcing rule varies the tolerance)
            rebuild = (self._fresh_its is None or self._since_setup > self.ctl.amg_rebuild_every
                       or self._missed or bool(its and self.lin_tolerances and its[-1] / _decades(
                           self.lin_tolerances[-1]) > REBUILD_GROWTH * max(self._fresh_its, 0.5)))
            if self.preconditioner == "least-squares-commutator":
                # the stabilisation weight per cell: lower where the cell is thin along the flow
                u = self.fields.velocity
                along = np.abs((u * self._thin_normal).sum(axis=1)) > THIN_FLOW_COSINE * np.linalg.norm(u, axis=1)
                prec.stabilisation[:] = np.where(along, prec.THIN_STABILISATION, prec.STABILISATION)
                Au, Av = prec.relaxed(Au), prec.relaxed(Av)
                Ap = self._commutator_laplacian(Au, Av)
                prec.update(Au, Av, Ap, rebuild=rebuild, system=A)
            else:
                Ap = neumann_convection_diffusion(Au, self._ap_keep, self.a_rel[:, 0] - self.diag_u)
                prec.update(Au, Av, Ap, rebuild=rebuild)
        x0 = self._state_vector()
        # rows in velocity units, so that the norm FGMRES reduces weighs momentum and continuity
        # alike: momentum rows over their diagonal, continuity rows over rho sum_f |S_f|
        if self._row_scale is None:
            area = np.zeros(self.nc)
            smag = np.linalg.norm(self.S, axis=1)
            np.add.at(area, self.owner, smag)
            np.add.at(area, self.neigh, smag[:self.ni])
            self._row_scale = np.concatenate([np.zeros(2 * nc), 1.0 / (self.rho * area)])
        d = self._row_scale
        d[:2 * nc] = 1.0 / A.diagonal()[:2 * nc]
        r0 = d * (rhs - A @ x0)
        del x0  # the current state: taken again after the solve
        blocks = [float(np.linalg.norm(r0[k * nc:(k + 1) * nc])) for k in range(3)]
        tol = self._forcing_tolerance(float(np.linalg.norm(r0)), smallest_block=min(blocks))
        stale = self.preconditioner != "simple" and not rebuild
        # the block preconditioner is one linear operator during a solve (V-cycles from zero,
        # products): FGMRES need not keep the preconditioned vectors (-0.48 KB per cell at RESTART 20)
        matvec = _row_scaled_product(A, d)
        _release_free()  # (the preconditioner set-up's and the start residual's work)
        dx, its, rel = fgmres(matvec, lambda v: prec(v / d), r0, tol, RESTART,
                              STALE_KRYLOV if stale else MAX_KRYLOV, flexible=False, basis=KRYLOV_BASIS)
        self._missed = stale and not rel <= tol
        if self._missed:
            # the kept coarse levels no longer fit: set up anew and go on from where FGMRES stopped
            prec.update(Au, Av, Ap, rebuild=True)
            rebuild = True
            r1 = r0 - matvec(dx)
            more, its2, rel1 = fgmres(matvec, lambda v: prec(v / d), r1,
                                      tol * np.linalg.norm(r0) / np.linalg.norm(r1), RESTART, MAX_KRYLOV,
                                      flexible=False, basis=KRYLOV_BASIS)
            dx += more
            its += its2
            rel = rel1 * np.linalg.norm(r1) / np.linalg.norm(r0)
        if rebuild:
            self._since_setup = 0
            self._fresh_its = its / _decades(tol)
        self.lin_iterations.append(its)
        self.lin_residuals.append(rel)
        self.lin_tolerances.append(tol)
        dx += self._state_vector()
        return dx

    def _forcing_tolerance(self, norm: float, ceiling: float | None = None,
                           smallest_block: float | None = None) -> float:
        """The relative tolerance of this outer iteration's linear solve (FGMRES, or FGMRES on a kept LU;
        ``FORCING_*``), given the norm of its initial (row-scaled) residual; ``smallest_block``, the
        smallest norm of its u, v and continuity blocks, lets it loosen up to where every block still
        falls by ``BLOCK_DROP``."""
        floor = self.ctl.system_tolerance
        previous, self._outer_norm = self._outer_norm, norm
        if not self.forcing or previous is None or not self.lin_tolerances or not previous > 0.0:
            return floor
        eta = FORCING_GAMMA * (norm / previous) ** FORCING_ALPHA
        guard = FORCING_GAMMA * self.lin_tolerances[-1] ** FORCING_ALPHA
        if guard > 0.1:
            eta = max(eta, guard)
        ceiling = FORCING_MAX if ceiling is None else ceiling
        eta = min(max(eta, floor), max(ceiling, floor))
        if smallest_block is not None and norm > 0.0:
            eta = max(eta, BLOCK_DROP * smallest_block / norm)
        return float(eta)

    # -- one outer iteration ------------------------------------------------------------------
    def iterate(self) -> list[float]:
        """One outer iteration; returns the normalised imbalances [u, v, continuity, ...]."""
        fl = self.fields
        rho, ni, g, kind, nc = self.rho, self.ni, self.geom, self.bc.kind, self.nc
        before = self._outer_state() if self.anderson_depth > 0 else None
        A, rhs, res = self._assemble()
        t0 = time.perf_counter()
        if self.system_solver == "direct" or self.fell_back:
            x = self._solve_direct(A, rhs)
        else:
            x = self._solve_gmres(A, rhs)
            if not self.lin_residuals[-1] <= FALLBACK_FACTOR * self.lin_tolerances[-1]:
                # the block preconditioner does not fit this flow (seen on turbulent wall layers while
                # the eddy viscosity develops): the sparse LU from here on
                log.info("simultaneous solve: FGMRES reached %.2g (tolerance %g) in %d iterations; "
                         "the sparse LU takes over", self.lin_residuals[-1], self.ctl.system_tolerance,
                         self.lin_iterations[-1])
                self.fell_back = True
                self._outer_norm = None  # the LU's residual norm is scaled otherwise: no forcing this time
                x = self._solve_direct(A, rhs)
        self.lin_seconds += time.perf_counter() - t0
        _, _, _, r_u, r_v, rbar, _, hu, _ = self._parts  # (Au, Av, ..., Wall): the blocks are not needed here
        E = self._gradient_defect()  # (the state the system was assembled at: p and grad p not yet updated)
        gu = self.gu  # the assembly's velocity gradient, made again (not held through the solve)
        V = self.vol
        un, vn, pn = x[:nc], x[nc:2 * nc], x[2 * nc:]
        if self.singular:
            pn = pn - pn.mean()
        gl = (self.G @ pn + E) / np.concatenate([V, V])
        glin = np.column_stack([gl[:nc], gl[nc:]])
        hb = np.column_stack([un + r_u * glin[:, 0], vn + r_v * glin[:, 1]])
        F = np.empty(self.nf)
        K.boundary_pressure(self.owner, ni, g.face_delta, kind, self.bc.pressure, pn, glin, self.pb)
        dcoef, kvec = self._face_coefficients()  # (once: each property would make both)
        K.rhie_chow_fluxes(self.owner, self.neigh, ni, self.S, dcoef, kvec, g.face_weight,
                           g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, hb, rbar, pn, glin,
                           self.pb, kind, self.bc.velocity, self._zero_beta, fl.face_flux, F)
        u_new = np.column_stack([un, vn])
        fl.velocity = u_new
        fl.pressure = np.array(pn)  # a copy: a view would keep the whole solution vector alive
        fl.face_flux = F
        del x, un, vn, pn, gl, glin, hb, E, r_u, r_v, rbar, rhs, dcoef, kvec  # (not held through the model's update)
        self._parts = None  # the blocks of this iteration's system: not held while the next is assembled
        self.grad_p = self._pressure_gradient(fl.pressure, self.grad_p)
        _release_free()
        if self.model.names:
            ub2 = self._velocity_on_boundary(u_new, F[ni:])
            res += self.model.update(fl, self.grad(u_new, ub2),
                                     self.flow_rate / self.ctl.turbulence_cfl if self.use_turbulence_cfl else None)
        if before is not None:
            self._accelerate(before, res)
        self.iteration += 1
        return res

    def _outer_state(self) -> list[np.ndarray]:
        """What one outer iteration maps to the next (copies): u, v, p, the model's variables (by name),
        the face fluxes and the eddy viscosity the momentum equations see (``_mu_t``, when there is one)."""
        fl = self.fields
        out = [fl.velocity[:, 0].copy(), fl.velocity[:, 1].copy(), np.array(fl.pressure, dtype=float)]
        out += [np.array(fl.variables[k], dtype=float) for k in sorted(fl.variables)]
        out.append(np.array(fl.face_flux, dtype=float))
        if self._mu_t is not None:
            out.append(self._mu_t.copy())
        return out

    def _accelerate(self, before: list[np.ndarray], res: list[float]) -> None:
        """Anderson acceleration of the outer fixed point x = G(x) (Anderson 1965, J. ACM 12, 547-560; the form of
        Walker & Ni 2011, SIAM J. Numer. Anal. 49, 1715-1735, from memory): with the residuals f_j = G(x_j) -
        x_j of the last ``anderson_depth`` + 1 iterations, gamma minimises |f_k - dF gamma| (dF the differences
        of successive f) and the next state is G(x_k) - dG gamma (dG those of G). The state is
        ``_outer_state``; f weighs u and v by 1/U, p by 1/(rho U^2) and each model variable by 1/max|value|
        (fluxes and the lagged eddy viscosity are mixed, not weighed: left unmixed they stalled the step). Only
        once every normalised imbalance of this iteration and the last is below ``ANDERSON_BELOW`` (from a
        uniform start the early steps are far from linear; the history starts anew whenever the condition
        fails). Every combination has coefficients summing to 1, so conservative fluxes stay conservative; at
        the fixed point f = 0 and the state is G's. Coarse step, sparse LU, with Newton's convection (its
        conservative form, before ``_picard_is_slow``): 46 -> 40 outer iterations (medium 50 -> 46); with
        Picard's and the iterative solve (medium) 99 -> 79, FGMRES per outer 20.3 -> 21.7."""
        h = self._anderson
        self.anderson_gamma = np.zeros(0)
        if not (self.history.rows and max(self.history.rows[-1]) <= ANDERSON_BELOW and max(res) <= ANDERSON_BELOW
                and self._picard_is_slow(ANDERSON_BELOW)):
            h.clear()
            return
        after = self._outer_state()
        nx = 3 + len(self.fields.variables)
        U = self.u_scale
        weights = [1.0 / U, 1.0 / U, 1.0 / (self.rho * U * U)]
        weights += [1.0 / max(float(np.abs(v).max()), 1e-300) for v in after[3:nx]]
        f = np.concatenate([w * (a - b) for w, a, b in zip(weights, after[:nx], before[:nx])])
        if "f" in h:
            h["dF"].append(f - h["f"])
            h["dG"].append([a - b for a, b in zip(after, h["g"])])
            if len(h["dF"]) > self.anderson_depth:
                del h["dF"][0], h["dG"][0]
        else:
            h["dF"], h["dG"] = [], []
        h["f"], h["g"] = f, after
        if not h["dF"]:
            return
        gamma = np.linalg.lstsq(np.column_stack(h["dF"]), f, rcond=None)[0]
        mixed = [a.copy() for a in after]
        for gj, dg in zip(gamma, h["dG"]):
            for m, d in zip(mixed, dg):
                m -= gj * d
        fl = self.fields
        fl.velocity = np.column_stack(mixed[:2])
        fl.pressure = mixed[2]
        for k, name in enumerate(sorted(fl.variables)):
            fl.variables[name] = mixed[3 + k]
        fl.face_flux = mixed[nx]
        if self._mu_t is not None:
            self._mu_t = mixed[nx + 1]
        self.grad_p = self._pressure_gradient(fl.pressure, self.grad_p)
        self.anderson_gamma = gamma


def _merged_rows(cind: np.ndarray, cidx: np.ndarray, wptr: np.ndarray, wcells: np.ndarray) -> tuple[np.ndarray, ...]:
    """Per cell, the cells of the compact structure followed by the wall-fit cells (CSR pointers, cells)."""
    nc = len(cind) - 1
    rows = np.concatenate([np.repeat(np.arange(nc), np.diff(cind)), np.repeat(np.arange(nc), np.diff(wptr))])
    order = np.argsort(rows, kind="stable")
    ptr = np.zeros(nc + 1, dtype=np.int64)
    np.cumsum(np.bincount(rows, minlength=nc), out=ptr[1:])
    return ptr, np.concatenate([cidx, wcells]).astype(np.int64)[order]


def _row_scaled_product(A: sp.csr_matrix, d: np.ndarray):
    """z -> d * (A z), the row-scaled system product FGMRES iterates on, in one pass (numba, on every
    thread when the run has several; each row summed as scipy's product sums it: the same bits)."""
    par = threads() > 1

    def product(z: np.ndarray) -> np.ndarray:
        w = np.empty(A.shape[0])
        BK.scaled_product(A.indptr, A.indices, A.data, z, d, w, par)
        return w

    return product


def _decades(tol: float) -> float:
    """Decades of residual reduction a relative tolerance asks for (at least 0.5)."""
    return max(float(-np.log10(tol)), 0.5)


def solver_class(coupling: str) -> type[SimpleSolver]:
    """The solver class of a ``solver.coupling``: :class:`SimultaneousSolver` for 'simultaneous',
    :class:`SimpleSolver` for 'simple' and 'simplec'.

    >>> solver_class("simultaneous").__name__, solver_class("simplec").__name__
    ('SimultaneousSolver', 'SimpleSolver')
    """
    return SimultaneousSolver if coupling in SimultaneousSolver.COUPLINGS else SimpleSolver
