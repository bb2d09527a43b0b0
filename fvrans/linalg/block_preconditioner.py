"""Block preconditioners of the simultaneous u-v-p system of ``fvrans.solve.coupled``.

The system (unknowns u, v, p of every cell) is

  [ A   G ] [u]   [f]        A = diag(A_u, A_v)  momentum (convection-diffusion) matrix
  [ D   C ] [p] = [g]        G  pressure face sums (~ V grad),  D  velocity part of continuity
                             (~ rho V div),  C  the Rhie-Chow pressure terms

and its Schur complement S = C - D A^-1 G. Both preconditioners here are right preconditioners of
flexible GMRES (``fvrans.linalg.fgmres``) made of algebraic-multigrid V-cycles
(``fgmres.VCycle``), so memory stays in proportion to the cells.

``PressureConvectionDiffusion`` (upper block-triangular, P = [[A, G], [0, S~]]):

  z_p = S~^-1 r_p,   z_u = A^-1 (r_u - G z_p)   (one V-cycle per velocity component)

with the pressure convection-diffusion approximation of the Schur complement (Kay, Loghin &
Wathen 2002, SIAM J. Sci. Comput. 24, 237-256; Elman, Silvester & Wathen, Finite Elements and Fast
Iterative Solvers, 2nd ed. 2014, ch. 9; both from memory). With A ~ V L (L the convection-diffusion
operator per unit volume), G ~ V grad, D ~ rho V div and the commutator L grad ~ grad L_p,

  D A^-1 G ~ rho V div grad L_p^-1 ~ -rho Lap A_p^-1 V,   so   S^-1 ~ V^-1 A_p Lap^-1 / rho,

Lap the compact Laplacian sum_f |S_f|^2 / (d_f . S_f) (p_P - p_N) (Dirichlet on faces with a given
pressure, Neumann elsewhere), A_p the momentum matrix of u on the pressure cells. The collocated
grid carries both on the same cells, so A_p is the assembled A_u with its boundary conditions
changed: no-slip walls, symmetry planes and outflow become Neumann (each row's sum taken off its
diagonal, apart from relaxation and pseudo-time), inflow stays Dirichlet (Elman & Tuminaro 2009,
Electron. Trans. Numer. Anal. 35, 257-280, from memory). The Rhie-Chow terms C are left out: they
vanish on smooth pressures and only add to S on the checkerboard modes, where L_p and Lap already
make S~ of the right size. The Laplacian's hierarchy uses CLJP coarsening: with Ruge-Stuben's, a
V-cycle barely contracted (factor 0.99) a smooth error in the thin cells of the plate's wall layer;
with CLJP 0.29-0.40 on the plate and step grids.

Measured (FGMRES to 1e-6 of one coupled system, cavity Re 100 after two outer iterations; one V-cycle
per block): 28 / 29 / 29 iterations on 32^2 / 64^2 / 128^2; with A_p = A_u as assembled (Dirichlet at
the walls) 27 / 35 / 44, growing; the SIMPLE-type sweep below 78 / 165 / more than 200. Whole runs
(system tolerance 0.01): cavity 64^2 / 128^2 / 256^2 9.9 / 10.3 / 10.4 FGMRES iterations per outer
iteration.

``LeastSquaresCommutator`` (the default of ``fvrans.solve.coupled``; same upper block-triangular
form) approximates the Schur complement by the least-squares commutator (Elman, Howle, Shadid,
Shuttleworth & Tuminaro 2006, SIAM J. Sci. Comput. 27, 1651-1668; stabilised form: Elman, Howle,
Shadid, Silvester & Tuminaro 2008, SIAM J. Sci. Comput. 30, 290-311; boundary weights: Elman &
Tuminaro 2009; all from memory). With H = diag(A)^-1 the commutator A H G ~ G F_p taken in the least
squares sense gives D A^-1 G ~ (D H G) (D H A H G)^-1 (D H G). On the collocated grid -D H G is a
wide-stencil Laplacian that does not see checkerboard pressures; its compact counterpart Lq (the
Rhie-Chow pressure-difference operator with weights V / q) does, and C = Lq + D H G is the Rhie-Chow
stabilisation (small on smooth pressures, ~ Lq on checkerboard ones), so

  S~^-1 = Lq^-1 (c C - D H A H G) Lq^-1,

with c = 0.5 (0.15 in the rows of cells thin along the flow: ``THIN_STABILISATION``), the cells at
no-slip walls weighted down (W = 0.2) in H and Lq, and the momentum blocks relaxed in stretched cells
(``RELAXATION``). PCD's commutator
holds poorly where the eddy viscosity varies by 100s and the flow recirculates: on the
backward-facing step (FGMRES(20) to 0.01, exact block solves, outer iterations 2 / 10 / 30 of the
coarse step) PCD needs >300 / 118 / >300 iterations, this preconditioner 35 / 39 / 26; one V-cycle
per block 35 / 39 / - (medium step 40 / 75 / 52); the cavity 128^2 16 against PCD's 24, the plate
(medium) 4 against 34. What it still misses: pressure modes smooth across the thin cells of the step's
lip shear layer (large outlying eigenvalues, one per column of cells); relaxing the momentum blocks
there halves the count (whole runs, coarse / medium step: 37 / 63 -> 20 / 24 per outer iteration).
The fine step's early systems, whose momentum matrix is nearly singular, defeat it (and every other
approximation tried, even with exact block solves). On the fine step (110 592 cells) after the start-up
it is the Schur approximation, not the V-cycles, that sets the count (outer iteration 10: 154 FGMRES
iterations with V-cycles, 118 with exact block solves, 2 with the exact Schur complement); the
spectrum of S~^-1 S there spans 0.48-7.5 (exact blocks; the largest in the step-lip columns, the
reattachment and the wall rows), and the stabilisation's weight in cells thin along the flow halves
the large end's effect (``THIN_STABILISATION``).

``SimpleSchur`` (block lower-upper sweep with S~ = C - D diag(A)^-1 G, the SIMPLE approximation;
Elman et al. 2008, J. Comput. Phys. 227, 1790-1808, from memory): kept as the baseline the tests
compare against. Its iterations grow with the grid (about 2x per 4x cells).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from fvrans.jit import PARALLEL_MIN_CELLS, threads
from fvrans.linalg import _amg_kernels as _amg
from fvrans.linalg import _block_kernels as _k
from fvrans.linalg.amg import _second_thread
from fvrans.linalg.fgmres import VCycle

MOMENTUM_COARSENING = "RS"
LAPLACIAN_COARSENING = "CLJP"
#: coarsening of the least-squares commutator's three hierarchies (momentum u, v and Lq): Ruge-Stuben
#: with its second pass. FGMRES(20) to 0.01, one V-cycle per block, at saved states (cavity 128^2 after
#: 5 outer iterations; plate medium after 10; step coarse after 10; step medium after 2 / 10 / 30):
#: CLJP everywhere 16, 9, 20, 18 / 32 / 18 iterations, hierarchies 420-475 bytes per cell each
#: (operator complexity ~3.9, coarse rows 2.1x the fine ones); Ruge-Stuben with the second pass
#: 15, 9, 24, 17 / 31 / 17 at 300-385 bytes (complexity ~2.2); one-pass Ruge-Stuben momentum
#: hierarchies 24 iterations at step medium it. 2 (PMIS, smoothed aggregation: >300 on the step)
LSC_MOMENTUM_COARSENING = "RS-second-pass"
LSC_LAPLACIAN_COARSENING = "RS-second-pass"
#: the number type of their stored values (level matrices, transfers); single precision: the same
#: FGMRES counts at those states, 230-295 bytes per hierarchy and cell instead of 300-385
HIERARCHY_DTYPE = np.float32
#: one momentum hierarchy for both velocity components (True), set up from the mean of A_u and A_v, whose
#: finest level takes the values of the component it cycles on; the two V-cycles then run one after the
#: other. It saves ~0.22 KB per cell, and FGMRES counts at the saved states above are the same (from A_u
#: alone the plate medium state needed 17 instead of 9: its symmetry plane holds v, not u), but whole runs
#: of the turbulent plate needed more: coarse / medium 7.3 / 14.0 FGMRES iterations per outer iteration
#: against 5.0 / 7.9 with a hierarchy each (cavity 64^2-256^2 and the coarse step: the same). Off
SHARED_MOMENTUM = False


def _vcycle(singular: bool, coarsening: str) -> VCycle:
    """A V-cycle of the least-squares commutator: hierarchy values stored as ``HIERARCHY_DTYPE``."""
    v = VCycle(1 << 30, singular=singular, coarsening=coarsening)
    v.amg.dtype = HIERARCHY_DTYPE
    return v


def neumann_convection_diffusion(A: sp.csr_matrix, keep: np.ndarray, extra_diagonal: np.ndarray) -> sp.csr_matrix:
    """A with its boundary conditions made Neumann: the row sum of A less ``extra_diagonal``
    (relaxation and pseudo-time parts of the diagonal) is taken off the diagonal of every row where
    ``keep`` is False. In rows away from boundaries that sum is the cell's net outflow times its
    convection weight (zero for a conservative flux field), so they barely change."""
    rowsum = np.asarray(A.sum(axis=1)).ravel() - extra_diagonal
    return (A - sp.diags(np.where(keep, 0.0, rowsum))).tocsr()


class PressureConvectionDiffusion:
    """Upper block-triangular preconditioner with the pressure convection-diffusion Schur complement
    (module docstring). ``lap``: the compact unit Laplacian (fixed structure, set up once);
    ``G``: the 2n x n pressure face sums; ``vol``: cell volumes; ``singular``: no given pressure
    anywhere (Lap has the constants as null space)."""

    def __init__(self, lap: sp.csr_matrix, G: sp.csr_matrix, vol: np.ndarray, rho: float, singular: bool):
        self.n = lap.shape[0]
        self.G = sp.csr_matrix(G)
        self.scale = 1.0 / (rho * np.asarray(vol, dtype=float))
        self.lap = VCycle(1 << 30, singular=singular, coarsening=LAPLACIAN_COARSENING)
        self.lap.update(lap)
        self.mu = VCycle(1 << 30, coarsening=MOMENTUM_COARSENING)
        self.mv = VCycle(1 << 30, coarsening=MOMENTUM_COARSENING)
        self.Ap: sp.csr_matrix | None = None

    def update(self, Au: sp.csr_matrix, Av: sp.csr_matrix, Ap: sp.csr_matrix, rebuild: bool = False) -> None:
        """The momentum blocks and the pressure convection-diffusion matrix of this outer iteration;
        ``rebuild``: set up the momentum hierarchies anew (else only their finest levels follow)."""
        fresh = rebuild or self.mu.amg._h is None
        self.mu.update(Au, rebuild=fresh)
        # A_v keeps a hierarchy of its own: with A_u's coarse levels (the two differ at symmetry
        # planes) FGMRES missed its tolerance on the turbulent plate
        self.mv.update(Av, rebuild=fresh)
        self.Ap = Ap

    def __call__(self, r: np.ndarray) -> np.ndarray:
        n = self.n
        par = threads() > 1
        zp = (self.Ap @ self.lap(r[2 * n:], par)) * self.scale
        w = r[:2 * n] - self.G @ zp
        return np.concatenate([*_momentum_pair(self.mu, self.mv, w, n, par), zp])


class LeastSquaresCommutator:
    """Upper block-triangular preconditioner (z_p = S~^-1 r_p, z_u = A^-1 (r_u - G z_p)) with the
    stabilised least-squares commutator approximation of the Schur complement (module docstring):

      S~^-1 = Lq^-1 (c C - D H A H G) Lq^-1,   H = diag(A)^-1,   C = Lq + D H G,

    ``lq`` (``update``) the compact Laplacian rho sum_f r_f |S_f|^2 / (d_f . S_f) (p_P - p_N) with
    r = V / q, q the mean of the two momentum diagonals (Dirichlet on faces with a given pressure):
    the compact counterpart of -D H G, so C is the Rhie-Chow-type stabilisation (small on smooth
    pressures, ~ Lq on checkerboard ones). ``G``: the 2n x n pressure face sums, ``D`` the n x 2n
    velocity part of continuity, ``singular``: no given pressure anywhere."""

    #: weight c of the stabilisation in the middle factor (FGMRES to 0.01 with exact block solves,
    #: step medium after 10 outer iterations: c = 0 / 0.15 / 0.3 / 0.5 / 1 / 2 -> 167 / 74 / 66 / 67 /
    #: 98 / 269 iterations; step coarse 70 / 40 / 40 / 39 / 56 / >300; cavity 128^2 42 / 25 / 20 / 20 / 20)
    STABILISATION = 0.5

    #: weight of the cells at no-slip walls in H and Lq (FGMRES to 1e-6, exact block solves, cavity
    #: 64^2 / 128^2 after 5 outer iterations: 36 / 52 iterations with 1, 27 / 36 with 0.5, 24 / 32 with
    #: 0.2, 25 / 32 with 0.1; step medium after 2 / 10 / 30 outer iterations, one V-cycle per block:
    #: 54 / 90 / 56 with 1, 40 / 75 / 52 with 0.2)
    WALL_WEIGHT = 0.2

    #: in stretched cells (``stretched``) the preconditioner stands for A + s diag(A) in place of A
    #: (``relaxed``), s = RELAXATION: on the step's thin high-eddy-viscosity cells A has modes far below
    #: diag(A) that H = diag(A)^-1 cannot see. FGMRES(20) to 0.01, one V-cycle per block, states step
    #: coarse it. 10, medium it. 2 / 10 / 30, cavity 64^2 / 128^2, plate medium it. 10: s = 0 -> 39,
    #: 40 / 75 / 52, 11 / 16, 4; s = 0.005 in every cell -> 20, 17 / 31 / 16, 12 / 18, 9 (but cavity
    #: 256^2, whole run: 34 instead of 22 per outer iteration); s = 0.02 -> 18, 14 / 37 / 17, 17 / 36, 17;
    #: s = 0.005 in cells of aspect ratio > 4 only -> 21, 17 / 35 / 21, 11 / 16, 9; > 1.5 only (adopted;
    #: uniform quads and right triangles are below) -> 20, 18 / 32 / 18, 11 / 16, 9
    RELAXATION = 0.005

    #: c in the rows of cells thin along the flow (set per outer iteration by the solver:
    #: ``fvrans.solve.coupled.THIN_ASPECT``): on the fine step, whose x-clustering at the step lip makes
    #: columns of such cells through the whole height, FGMRES(20) to 0.01 at saved states (outer
    #: iterations 10 / 25 of a run from the uniform start) needs 154 / 79 iterations with c = 0.5 there,
    #: 94 / 52 with 0.15; c = 0.1 / 0.2 / 0.3 in EVERY cell: 64 / 74 / 108 and 38 / 39 / 53, but whole runs
    #: of the turbulent plate then need more outer iterations (c = 0.2: 50 / 55 instead of 34 / 34 on
    #: the coarse / medium plate) and the cavity more FGMRES iterations (64^2 / 128^2 14.3 / 17.9 per
    #: outer iteration instead of 11.8 / 15.1): a low c leaves more of the residual in the checkerboard
    #: pressure modes, which C alone damps
    THIN_STABILISATION = 0.15

    def __init__(self, G: sp.csr_matrix, D: sp.csr_matrix | None, singular: bool, wall_cells: np.ndarray | None = None,
                 stretched: np.ndarray | None = None):
        n = G.shape[1]
        self.n = n
        #: c of the middle factor per cell (rows of c C): THIN_STABILISATION in ``thin`` cells
        self.stabilisation = np.full(n, float(self.STABILISATION))
        #: w of H = w / diag(A) and of Lq's weights w V / q: WALL_WEIGHT at ``wall_cells``, else 1
        self.weight = np.ones(n)
        if wall_cells is not None:
            self.weight[wall_cells] = self.WALL_WEIGHT
        self.shift = np.zeros(n)
        if stretched is not None:
            self.shift[stretched] = self.RELAXATION
        # (an operator with ``halves()``, e.g. the solver's G held in the system, is used as it is)
        self.G = G if hasattr(G, "halves") else sp.csr_matrix(G)
        self.Gx, self.Gy = G.halves() if hasattr(G, "halves") else _row_halves(self.G)
        #: D's halves, or None: the products taken from the continuity rows of the system (``update``)
        self.Du, self.Dv = _column_halves(D) if D is not None else (None, None)
        self.continuity: sp.csr_matrix | None = None
        self.lap = _vcycle(singular, LSC_LAPLACIAN_COARSENING)
        self.mu = _vcycle(False, LSC_MOMENTUM_COARSENING)
        #: v's own hierarchy, or None: v's V-cycle on u's coarse levels (``SHARED_MOMENTUM``)
        self.mv = None if SHARED_MOMENTUM else _vcycle(False, LSC_MOMENTUM_COARSENING)
        self._fine = "u"  # whose values the shared hierarchy's finest level holds

    def relaxed(self, A: sp.csr_matrix) -> sp.csr_matrix:
        """A + s diag(A), s = ``RELAXATION`` in stretched cells, else 0: the momentum block the
        preconditioner stands for. In place: A's values change (no copy is held; the solver's
        assemblers refill them every outer iteration); returns A."""
        _k.add_to_diagonal(A.indptr, A.indices, A.data, self.shift * A.diagonal())
        return A

    def update(self, Au: sp.csr_matrix, Av: sp.csr_matrix, lq: sp.csr_matrix, rebuild: bool = False,
               system: sp.csr_matrix | None = None) -> None:
        """The (relaxed) momentum blocks and Lq of this outer iteration; ``rebuild``: set up the hierarchies
        anew (else only their finest levels follow the new values); ``system``: the 3n x 3n system, whose
        continuity rows (D and the pressure columns) give the products with D when it was not given (a
        view of its rows: no copy of D is held)."""
        if system is not None:
            if not system.has_sorted_indices:
                system.sort_indices()  # (``_block_kernels.commutator_middle`` reads D's columns in order)
            n, ptr = self.n, system.indptr
            lo, hi = ptr[2 * n], ptr[3 * n]
            self.continuity = _csr_on(system.data[lo:hi], system.indices[lo:hi], ptr[2 * n:] - lo, (n, 3 * n))
        fresh = rebuild or self.mu.amg._h is None
        if self.mv is None:
            # coarse levels of the mean of the two blocks (they differ where a boundary holds one
            # component and not the other, e.g. a symmetry plane), finest level A_u's values
            if fresh:
                self.mu.update(_csr_on(0.5 * (Au.data + Av.data), Au.indices, Au.indptr, Au.shape), rebuild=True)
            h = self.mu.amg._h
            _amg.refresh_fine(Au.data, h[6], h[3], h[5], h[1][0], h[7])
            self._fine = "u"
        else:
            self.mu.update(Au, rebuild=fresh)
            self.mv.update(Av, rebuild=fresh)
        self.lap.update(lq, rebuild=fresh)
        if fresh:
            # Lq's V-cycles are done before u's starts (v's runs beside u's on the second thread): one
            # set of scratch vectors for Lq's and u's hierarchies
            self.mu.amg.share_vectors(self.lap.amg)
        self.Au, self.Av, self.lq = Au, Av, lq
        self.hu = self.weight / Au.diagonal()
        self.hv = self.weight / Av.diagonal()

    def schur_inverse(self, r: np.ndarray, par: bool = False) -> np.ndarray:
        """S~^-1 r (the pressure part of the preconditioner)."""
        y = self.lap(r, par)
        if self.continuity is not None:
            # the middle factor in three passes over the rows (numba; on every thread with ``par``),
            # the same sums as the products below
            Au, Av, lq, D = self.Au, self.Av, self.lq, self.continuity
            m = np.empty(self.n)
            _k.commutator_middle(*self._gradient_rows(), Au.indptr, Au.indices, Au.data, Av.indptr, Av.indices,
                                 Av.data, lq.indptr, lq.indices, lq.data, D.indptr, D.indices, D.data, y, self.hu,
                                 self.hv, self.stabilisation, m, np.empty((4, self.n)), par)
            return self.lap(m, par)
        gx = self.hu * (self.Gx @ y)
        gy = self.hv * (self.Gy @ y)
        m = self.stabilisation * ((self.lq @ y) + self.times_d(gx, gy))
        m -= self.times_d(self.hu * (self.Au @ gx), self.hv * (self.Av @ gy))
        return self.lap(m, par)

    def _gradient_rows(self) -> tuple:
        """G's rows for the ``_block_kernels`` products: (indptr, indices, data, cind, shift) as
        ``_block_kernels._g_row_dot`` reads them (a matrix of its own: cind of one entry, shift 0)."""
        if hasattr(self.G, "csr_rows"):
            return self.G.csr_rows()
        G = self.G
        return G.indptr, G.indices, G.data, _NO_CIND, 0

    def times_d(self, a: np.ndarray, b: np.ndarray) -> np.ndarray:
        """D [a; b]: with D's halves, or from the system's continuity rows with zero pressures."""
        if self.Du is not None:
            return self.Du @ a + self.Dv @ b
        n = self.n
        z = np.zeros(3 * n)
        z[:n] = a
        z[n:2 * n] = b
        return self.continuity @ z

    def __call__(self, r: np.ndarray) -> np.ndarray:
        n = self.n
        par = threads() > 1
        zp = self.schur_inverse(r[2 * n:], par)
        w = np.empty(2 * n)
        _k.minus_product(*self._gradient_rows(), zp, r[:2 * n], w, par)  # r_u - G z_p
        if self.mv is not None:
            return np.concatenate([*_momentum_pair(self.mu, self.mv, w, n, par), zp])
        # one hierarchy: the component whose values its finest level holds first, then the other's
        # values in and its V-cycle (one exchange per application)
        z = np.empty(3 * n)
        z[2 * n:] = zp
        h = self.mu.amg._h
        order = (0, 1) if self._fine == "u" else (1, 0)
        for k, c in enumerate(order):
            if k == 1:
                other = self.Av if c == 1 else self.Au
                _amg.refresh_fine(other.data, h[6], h[3], h[5], h[1][0], h[7])
                self._fine = "v" if c == 1 else "u"
            z[c * n:(c + 1) * n] = self.mu(w[c * n:(c + 1) * n], par)
        return z


_NO_CIND = np.zeros(1, dtype=np.int64)


def _row_halves(G: sp.csr_matrix) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """The upper and lower halves of the rows of ``G`` (2n x m), on G's own arrays (no copy of the
    values or column indices)."""
    n = G.shape[0] // 2
    ptr = G.indptr
    lo, mid, hi = ptr[0], ptr[n], ptr[2 * n]
    return (_csr_on(G.data[lo:mid], G.indices[lo:mid], ptr[: n + 1] - lo, (n, G.shape[1])),
            _csr_on(G.data[mid:hi], G.indices[mid:hi], ptr[n:] - mid, (n, G.shape[1])))


def _csr_on(data: np.ndarray, indices: np.ndarray, indptr: np.ndarray, shape: tuple[int, int]) -> sp.csr_matrix:
    """A CSR matrix on the given arrays, views included (scipy's constructor copies a view of less
    than half its base)."""
    m = sp.csr_matrix(shape, dtype=data.dtype)
    m.data, m.indices, m.indptr = data, indices, indptr
    m.has_sorted_indices = True
    return m


def _column_halves(D: sp.csr_matrix) -> tuple[sp.csr_matrix, sp.csr_matrix]:
    """The left and right column halves of ``D`` (m x 2n); the right one on the left one's column
    indices and row pointers when the two have the same structure."""
    n = D.shape[1] // 2
    left, right = sp.csr_matrix(D[:, :n]), sp.csr_matrix(D[:, n:])
    left.sort_indices()
    right.sort_indices()
    if np.array_equal(left.indptr, right.indptr) and np.array_equal(left.indices, right.indices):
        right = _csr_on(right.data, left.indices, left.indptr, right.shape)
    return left, right


def _momentum_pair(mu: VCycle, mv: VCycle, w: np.ndarray, n: int, par: bool) -> tuple[np.ndarray, np.ndarray]:
    """One V-cycle for each velocity component of ``w``. With ``par``: below ``PARALLEL_MIN_CELLS`` rows, where
    a V-cycle's loops run on one thread, the two at once on two Python threads; from there on one after the
    other, each on every thread. (At once above that size, cavity 256^2 on two idle cores took 5.1-5.3 s
    against 4.5-4.7 s, with a spin of 300 000: the second Python thread and the OpenMP thread spinning between
    loops, ``jit.THREAD_SPIN``, wanted the same core; one after the other below it, the coarse step took 6.5 s
    against 5.7 s, and 5.9 s on one thread.)"""
    if par and n < PARALLEL_MIN_CELLS:
        second = _second_thread().submit(mv, w[n:])
        zu = mu(w[:n])
        return zu, second.result()
    return mu(w[:n], par), mv(w[n:], par)


class SimpleSchur:
    """Block lower-upper sweep with S~ = C - D diag(A)^-1 G (one V-cycle per block; module docstring)."""

    def __init__(self, G: sp.csr_matrix, D: sp.csr_matrix, singular: bool, rebuild_every: int = 20):
        self.n = G.shape[1]
        n = self.n
        self.Gx, self.Gy = sp.csr_matrix(G[:n]), sp.csr_matrix(G[n:])
        self.Du, self.Dv = sp.csr_matrix(D[:, :n]), sp.csr_matrix(D[:, n:])
        self.mu = VCycle(rebuild_every)
        self.mv = VCycle(rebuild_every)
        self.mp = VCycle(rebuild_every, singular=singular)

    def update(self, Au: sp.csr_matrix, Av: sp.csr_matrix, C: sp.csr_matrix) -> None:
        self.du = Au.diagonal()
        self.dv = Av.diagonal()
        S = C - self.Du @ sp.diags(1.0 / self.du) @ self.Gx - self.Dv @ sp.diags(1.0 / self.dv) @ self.Gy
        self.mu.update(Au)
        self.mv.update(Av)
        self.mp.update(S.tocsr())

    def __call__(self, r: np.ndarray) -> np.ndarray:
        n = self.n
        zu = self.mu(r[:n])
        zv = self.mv(r[n:2 * n])
        zp = self.mp(r[2 * n:] - self.Du @ zu - self.Dv @ zv)
        zu -= (self.Gx @ zp) / self.du
        zv -= (self.Gy @ zp) / self.dv
        return np.concatenate([zu, zv, zp])
