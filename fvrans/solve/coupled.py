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
and leaves the fixed point alone. The turbulence model stays segregated: ``model.update`` once per outer
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

import logging
import time
from typing import Any

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from fvrans.errors import CaseError
from fvrans.linalg import _block_kernels as BK
from fvrans.linalg.block_preconditioner import (
    LeastSquaresCommutator,
    PressureConvectionDiffusion,
    SimpleSchur,
    neumann_convection_diffusion,
)
from fvrans.linalg.fgmres import fgmres
from fvrans.solve import _coupled_kernels as CK
from fvrans.solve import _kernels as K
from fvrans.solve.simple import SimpleSolver

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
#: cells whose longest face is more than this many times their shortest are "stretched" for the
#: least-squares commutator preconditioner (its momentum blocks relaxed there; see
#: ``LeastSquaresCommutator.RELAXATION``)
STRETCHED_ASPECT = 1.5
#: cells whose longest face is more than this many times their shortest take the least-squares
#: commutator's ``THIN_STABILISATION``
#: cells thin ALONG the flow for the least-squares commutator: longest face more than THIN_ASPECT times
#: the shortest, and the flow through the longest face (|u . n| > THIN_FLOW_COSINE |u|); their rows of
#: the stabilisation take ``LeastSquaresCommutator.THIN_STABILISATION`` (the columns of cells that the
#: step's x-clustering at the step lip carries through the whole height; the plate's leading edge has a
#: few). Cells thin across the flow (wall and shear layers) keep STABILISATION: lowered there as well,
#: the turbulent plate needed 50 / 55 outer iterations instead of 34 / 34 (coarse / medium)
THIN_ASPECT = 10.0
THIN_FLOW_COSINE = 0.7
#: FGMRES iterations preconditioned by an earlier factorisation before the system is factorised anew
REUSE_ITERATIONS = 10
#: a factorisation is also replaced once the FGMRES iterations it has preconditioned add up to
#: REFACTOR_AFTER (about one factorisation's worth of triangular solves: factorisation / solve time was
#: 23-45 on the bundled systems) while each solve still needs more than KEEP_ITERATIONS: the first
#: factorisation is of the start's matrix, and the later ones are cheaper to precondition with a newer one
REFACTOR_AFTER = 20
KEEP_ITERATIONS = 2
#: fill-reducing ordering and diagonal pivot threshold of the sparse LU (SuperLU's minimum degree on
#: A^T + A, preferring the diagonal pivot unless it is below 0.01 of its column's largest entry): against
#: column AMD with partial pivoting, the factors hold half the entries and factorisation and solves take
#: about half the time (2026-12-03, one system each, fill per row / factorisation s / solve ms: laminar
#: step 302 / 0.61 / 13.8 against 152 / 0.15 / 3.3; turbulent plate 399 / 0.91 / 21.3 against 205 / 0.45 /
#: 10.6; cavity 128^2 355 / 1.05 / 21.8 against 186 / 0.48 / 10.5). A threshold of 1 with this ordering
#: pivots off the diagonal so often that the factors fill (6 686 per row on the laminar step); 0.1
#: already doubled the fill on two of the systems
LU_ORDERING = "MMD_AT_PLUS_A"
LU_PIVOT_THRESHOLD = 0.01
#: at most this many Newton steps on the boundary extrapolation of the pressure gradient per outer iteration
GRADIENT_STEPS = 6
#: cells whose extrapolation matrix M^-1 has a larger entry keep the lagged extrapolation (M^-1 = I)
EXTRAPOLATION_LIMIT = 3.0
#: the start-up shift of the momentum diagonals (``_start_shift``) is multiplied by START_SHIFT_DECAY each
#: outer iteration and dropped below START_SHIFT_FLOOR of its first value (after 14 iterations)
START_SHIFT_DECAY = 0.5
START_SHIFT_FLOOR = 1e-4
#: attributes of :class:`SimpleSolver` that only its own iteration uses, dropped here
SEGREGATED_ONLY = ("psolver", "msolver", "us", "vs", "hbya", "rau", "beta", "dp", "pc", "pcb", "gpc")
#: its work arrays that only the assembly of the system uses (the momentum equations' face work,
#: sources, pseudo-time, the residual's pressure-correction rows, the convection gradient): made at
#: the start of ``_assemble`` and let go at its end, so that the linear solve, where memory peaks, does
#: not hold them (~0.15 KB per cell); each holds components per cell ("c") or per internal face ("f")
ASSEMBLY_ONLY = {"face_work": ("f", 2), "bu": ("c",), "bv": ("c",), "b_np": ("c", 2), "work2": ("c", 2),
                 "pt": ("c",), "p_diag": ("c",), "p_off": ("f",), "p_rhs": ("c",), "gc": ("c", 2, 2)}


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


class SimultaneousSolver(SimpleSolver):
    """:class:`SimpleSolver` whose outer iteration solves momentum and continuity as one system
    (see the module docstring). Same constructor, hooks and attributes; ``bulk_velocity`` is refused
    (its force is found from the segregated momentum matrix)."""

    COUPLINGS = ("simultaneous",)

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
        self._assembly_work(False)
        kind = self.bc.kind
        self.fixed = (kind == K.OUTLET) | (kind == K.FREESTREAM)
        self.singular = not self.bc.has_fixed_pressure
        # static parts, made once: the compact structure of the mesh (diagonal and face neighbours,
        # shared with the segregated assemblers), G = M^-1 G0 (2nc x nc) on it, the wall-flux
        # matrix's pattern and the pattern of the whole system; ``_assemble`` refills the values
        self._extrapolation_inverse = CK.extrapolation_inverse(self.owner, ni, self.S, g.face_delta, ~self.fixed,
                                                               self.vol, EXTRAPOLATION_LIMIT)
        compact = self.asm_u.matrix(np.zeros(nc), np.zeros(ni), np.zeros(ni))
        self._cind, self._cidx = compact.indptr, compact.indices
        self.G = self._gradient_matrix()
        self._wall, self._wall_stencil, wall_cells = self._wall_flux_pattern()
        self._A = self._system_pattern(*wall_cells)
        wrows = np.repeat(np.arange(2 * nc, dtype=np.int64), np.diff(self._wall.indptr))
        self._wall_in_system = np.empty(self._wall.nnz, dtype=np.int64)
        CK.positions(self._A.indptr, self._A.indices, wrows, self._wall.indices.astype(np.int64),
                     self._wall_in_system)
        self.lin_seconds = 0.0
        self.lin_iterations: list[int] = []
        self._lu = None
        self._lu_iterations = 0
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
        # zero inputs of the flux kernels (read only): one buffer
        zero = np.zeros(2 * nc)
        self._zero_c2 = zero.reshape(nc, 2)
        self._zero_c = self._zero_beta = zero[:nc]
        #: the start-up shift of this outer iteration, a fraction of a_P (``_start_shift``)
        self.shift = 0.0

    def _assembly_work(self, make: bool) -> None:
        """Make (zeros) or let go the work arrays of ``ASSEMBLY_ONLY``."""
        for name, (where, *comp) in ASSEMBLY_ONLY.items():
            setattr(self, name, np.zeros((self.nc if where == "c" else self.ni, *comp)) if make else None)

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
    def _gradient_matrix(self) -> sp.csr_matrix:
        """G = M^-1 G0 (2nc x nc, rows [x; y]): G0 p = sum_f p_f S_f (p_f linearly interpolated, the
        owner's value on boundary faces without a given pressure), M^-1 the extrapolation per cell;
        each block on the compact structure (``_coupled_kernels.gradient_values``)."""
        nc, cind, cidx = self.nc, self._cind, self._cidx
        nnz = len(cidx)
        data = np.empty(2 * nnz)
        CK.gradient_values(nc, cind, cidx, self.cf_ptr, self.cf_face, self.owner, self.neigh, self.ni, self.S,
                           self.geom.face_weight, ~self.fixed, self._extrapolation_inverse, data)
        itype = np.int32 if 2 * nnz < 2**31 - 1 else np.int64
        indptr = np.concatenate([cind, cind[1:].astype(itype) + itype(nnz)]).astype(itype)
        G = sp.csr_matrix((data, np.concatenate([cidx, cidx]).astype(itype), indptr), shape=(2 * nc, nc))
        G.has_sorted_indices = True
        return G

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
        self._assembly_work(True)
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
        mu_cell = self.mu_cell if mu_t is None else self.mu + mu_t
        gu, hu, ru, rv, mag, self.use_turbulence_cfl, _ = self._momentum_equations(mu_cell)
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
        imb, thr = K.assemble_pressure_correction(self.owner, self.neigh, ni, self.dcoef, rho, rbar, kind, Fe,
                                                  self.p_diag, self.p_off, self.p_rhs, self.cf_ptr, self.cf_face)
        res.append(imb / (thr + 1e-300))
        # the part of the fluxes independent of (u, p): inflow, given outlet pressures, the
        # skewness and quadratic terms of the face velocity
        Fc = np.empty(self.nf)
        K.rhie_chow_fluxes(self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
                           g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, self._zero_c2, rbar,
                           self._zero_c, self._zero_c2, self.pb, kind, self.bc.velocity, self._zero_beta, F_old, Fc)
        c0 = np.zeros(nc)
        CK.face_sums(self.owner, self.neigh, ni, Fc, c0)
        # the system, refilled in place on its pattern: momentum rows (A + W, G), then continuity rows
        # (D, A_pp = Lc + W V^-1 G with W the response to the cell pressure gradients), whose
        # product reads G's values
        p = fl.pressure
        Gp = self.G @ p
        E = np.concatenate([V * gp[:, 0], V * gp[:, 1]]) - Gp
        # the wall faces' flux mu (G + G^T) . S implicit in full (the segregated assembly keeps the
        # part beyond mu dcoef (u_wall - u_P) deferred): A + W, right-hand side + W u_old
        Wall = self._wall_flux_matrix()
        A = self._A
        if A.data.size != A.indices.size:  # released (``release_work``)
            A.data = np.zeros(A.indices.size)
        CK.momentum_rows(nc, self._cind, self.cf_ptr, self.cf_face, self.owner, self.neigh, ni, self.a_rel,
                         self.off_own, self.off_nei, self.G.data, Wall.data, self._wall_in_system, A.indptr,
                         A.indices, A.data)
        rhs = np.empty(3 * nc)
        # continuity: D u + D R grad p - K grad p + Lc p = -c0, grad p = V^-1 (G p + E)
        CK.continuity_rows(nc, self._cind, self._cidx, self.cf_ptr, self.cf_face, self.owner, self.neigh, ni,
                           self.S, g.face_weight, self.dcoef, self.kvec, rbar, r_u, r_v, V, self.fixed, rho,
                           self.implicit_gradient, self.G.data, E, gp, c0, A.indptr, A.indices, A.data,
                           rhs[2 * nc:])
        u_stack = np.concatenate([u_old[:, 0], u_old[:, 1]])
        rhs[:2 * nc] = np.concatenate([self.rhs_u, self.rhs_v]) + Gp + Wall @ u_stack
        # what the linear solve and the update read: the momentum blocks without the wall-flux
        # matrix (the segregated assemblers' matrices, refilled in place) for the preconditioner, ...
        Au = self.asm_u.matrix(self.a_rel[:, 0], self.off_own, self.off_nei)
        Av = self.asm_v.matrix(self.a_rel[:, 1], self.off_own, self.off_nei)
        self._parts = (Au, Av, E, r_u, r_v, rbar, gu, hu, Wall)
        self._assembly_work(False)
        return A, rhs, res

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
            g_cur += np.einsum("cij,cj->ci", self._extrapolation_inverse, r)
            scale = max(scale, float(np.abs(g_cur).max()))
            if float(np.abs(r).max()) <= 1e-13 * scale:
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

    def _solve_direct(self, A: sp.csr_matrix, rhs: np.ndarray) -> np.ndarray:
        """SuperLU of the system, reused for later outer iterations as the preconditioner of flexible
        GMRES while that reaches ``system_tolerance`` within ``REUSE_ITERATIONS`` iterations (the matrix
        changes little from one outer iteration to the next; a triangular solve costs about 1/30 of a
        factorisation at 13k cells); refactorised when it does not, or when the solves it has
        preconditioned have cost about one factorisation (``REFACTOR_AFTER``)."""
        if self.singular:
            self._pin_level(A, rhs)
        worn = self._lu_iterations >= REFACTOR_AFTER and self.lin_iterations[-1] > KEEP_ITERATIONS
        if self._lu is not None and not worn:
            x0 = np.concatenate([self.fields.velocity[:, 0], self.fields.velocity[:, 1], self.fields.pressure])
            # rows scaled by their diagonals, so that the residual norm GMRES reduces weighs every
            # equation alike (momentum rows of thin wall cells are many decades above the rest)
            d = np.abs(A.diagonal())
            d = 1.0 / np.where(d > 0.0, d, 1.0)
            lu = self._lu
            dx, its, rel = fgmres(lambda z: d * (A @ z), lambda v: lu.solve(v / d), d * (rhs - A @ x0),
                                  self.ctl.system_tolerance, REUSE_ITERATIONS, REUSE_ITERATIONS)
            self._lu_iterations += its
            del lu
            if rel <= self.ctl.system_tolerance:
                self.lin_iterations.append(its)
                return x0 + dx
        self._lu = None  # the old factors are freed before the new ones are made
        # the factorisation sees the nonzeros only (the system's pattern also holds the places
        # where a coefficient vanishes, e.g. the cross terms on Cartesian cells)
        Ac = A.tocsc()
        Ac.eliminate_zeros()
        self._lu = spla.splu(Ac, permc_spec=LU_ORDERING, diag_pivot_thresh=LU_PIVOT_THRESHOLD)
        del Ac
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
                self._prec = SimpleSchur(self.G, self.D, self.singular, every)
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
                self._prec = PressureConvectionDiffusion(lap, self.G, self.vol, float(self.rho), singular)
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
        x0 = np.concatenate([self.fields.velocity[:, 0], self.fields.velocity[:, 1], self.fields.pressure])
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
        tol = self._forcing_tolerance(float(np.linalg.norm(r0)))
        stale = self.preconditioner != "simple" and not rebuild
        # the block preconditioner is one linear operator during a solve (V-cycles from zero,
        # products): FGMRES need not keep the preconditioned vectors (-0.48 KB per cell at RESTART 20)
        def matvec(z: np.ndarray) -> np.ndarray:
            return d * (A @ z)

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
        return x0 + dx

    def _forcing_tolerance(self, norm: float) -> float:
        """The relative tolerance of this outer iteration's iterative solve (``FORCING_*``), given the
        norm of its initial (row-scaled) residual."""
        floor = self.ctl.system_tolerance
        previous, self._outer_norm = self._outer_norm, norm
        if not self.forcing or previous is None or not self.lin_tolerances or not previous > 0.0:
            return floor
        eta = FORCING_GAMMA * (norm / previous) ** FORCING_ALPHA
        guard = FORCING_GAMMA * self.lin_tolerances[-1] ** FORCING_ALPHA
        if guard > 0.1:
            eta = max(eta, guard)
        return float(min(max(eta, floor), max(FORCING_MAX, floor)))

    # -- one outer iteration ------------------------------------------------------------------
    def iterate(self) -> list[float]:
        """One outer iteration; returns the normalised imbalances [u, v, continuity, ...]."""
        fl = self.fields
        rho, ni, g, kind, nc = self.rho, self.ni, self.geom, self.bc.kind, self.nc
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
                x = self._solve_direct(A, rhs)
        self.lin_seconds += time.perf_counter() - t0
        _, _, E, r_u, r_v, rbar, gu, hu, _ = self._parts  # (Au, Av, ..., Wall): the blocks are not needed here
        V = self.vol
        un, vn, pn = x[:nc], x[nc:2 * nc], x[2 * nc:]
        if self.singular:
            pn = pn - pn.mean()
        gl = (self.G @ pn + E) / np.concatenate([V, V])
        glin = np.column_stack([gl[:nc], gl[nc:]])
        hb = np.column_stack([un + r_u * glin[:, 0], vn + r_v * glin[:, 1]])
        F = np.empty(self.nf)
        K.boundary_pressure(self.owner, ni, g.face_delta, kind, self.bc.pressure, pn, glin, self.pb)
        K.rhie_chow_fluxes(self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
                           g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, hb, rbar, pn, glin,
                           self.pb, kind, self.bc.velocity, self._zero_beta, fl.face_flux, F)
        u_new = np.column_stack([un, vn])
        fl.velocity = u_new
        fl.pressure = np.ascontiguousarray(pn)
        fl.face_flux = F
        self.grad_p = self._pressure_gradient(fl.pressure, self.grad_p)
        if self.model.names:
            ub2 = self._velocity_on_boundary(u_new, F[ni:])
            res += self.model.update(fl, self.grad(u_new, ub2),
                                     self.flow_rate / self.ctl.turbulence_cfl if self.use_turbulence_cfl else None)
        self._parts = None  # the blocks of this iteration's system: not held while the next is assembled
        self.iteration += 1
        return res


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
