"""The SIMPLE / SIMPLEC pressure-velocity coupling loop on a collocated cell-centred mesh.

One outer iteration (Patankar 1980, Numerical Heat Transfer and Fluid Flow, ch. 6; SIMPLEC:
Van Doormaal & Raithby 1984, Numer. Heat Transfer 7, 147-163):

1. assemble the momentum equations with the current face fluxes, under-relax them
   (Patankar's implicit relaxation: a_P / alpha, source + (1 - alpha)/alpha a_P u_old) and
   solve for u*;
2. face fluxes by Rhie-Chow interpolation with the relaxation-independent correction
   (Majumdar 1988), see ``_kernels.rhie_chow_fluxes``;
3. solve the pressure-correction equation sum_f rho D_f dcoef (p'_P - p'_N) = -sum_f F*_f
   (D = V/A for SIMPLE, V/(A - sum|a_nb|) for SIMPLEC) with AMG-preconditioned CG;
4. correct fluxes (exactly conservative), pressure (p += alpha_p p') and cell velocities
   (u -= D grad p');
5. the turbulence model, if any, updates the eddy viscosity, its equation with local
   pseudo-time steps (``SolverControls.turbulence_cfl``).

Start-up (``SolverControls.conservative_start``): a start without face fluxes (a uniform initial
field) is first made mass-conserving by adding the potential flow that carries what the inflow
boundaries bring in to the fixed-pressure boundaries (``SimpleSolver._project_start``).

Each iteration reports the normalised imbalances of ``fvrans.fv.residual`` (summed imbalance over the
summed magnitudes of the equation's terms) of the state it started from.

The converged solution does not depend on the relaxation factors: every deferred term is
evaluated at the converged state, and the relaxation term enters the face flux only through
beta F_old (beta the relaxation share of the diagonal, 1 - alpha with Patankar's relaxation
alone), see ``_kernels.rhie_chow_fluxes``; the pseudo-time terms vanish at convergence.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fvrans.errors import DivergenceError
from fvrans.fields import Fields
from fvrans.fv import stress as stress_modes
from fvrans.fv.assembly import CsrAssembler
from fvrans.fv.gradient import GaussLeastSquaresGradient, QuadraticFit, gradient_operator
from fvrans.fv.stress import StressDivergence
from fvrans.fv.wall_gradient import WallGradient
from fvrans.jit import one_blas_thread, set_threads, threads_from_idle_cores
from fvrans.linalg.amg import AmgKrylovSolver
from fvrans.linalg.pressure import PressureSolver
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.models.base import EddyViscosityModel, TurbulenceModel  # noqa: F401 (the interface's old home)
from fvrans.physics.boundary import SYMMETRY, WALL, FlowBoundary
from fvrans.solve import _kernels as K
from fvrans.solve.mean_flow import BulkVelocityControl

log = logging.getLogger(__name__)

#: phases of an outer iteration timed in ``SimpleSolver.timing`` (seconds, accumulated)
PHASES = (
    "gradients", "momentum assembly", "momentum solve", "Rhie-Chow + p' assembly", "p' solve", "corrections",
)


#: default velocity under-relaxation per coupling: 0.7 for SIMPLE is common practice; 0.95 for
#: SIMPLEC was the fastest of 0.7-0.98 on the Re = 100 and 1000 cavity (benchmarks/bench_cavity.py)
DEFAULT_RELAX_VELOCITY = {"simplec": 0.95, "simple": 0.7, "simultaneous": 1.0}
#: default CFL of the turbulence pseudo-time steps per coupling (0: none; see SolverControls)
DEFAULT_TURBULENCE_CFL = {"simplec": 20.0, "simple": 20.0, "simultaneous": 0.0}
# A steady incompressible flow does not reach speeds of this many times the largest speed imposed
# on its boundaries or given as its initial field: a run that does is diverging, even while its
# values are still finite (common practice: an order-of-magnitude guard, not a physical limit).
RUNAWAY_SPEED = 1e3
#: a run on several threads goes on with one after ``SHARED_CORE_STRIKES`` iterations in a row (of at least
#: ``SHARED_CORE_SECONDS``) that kept fewer than this many cores busy (CPU s / wall s of the process): its
#: other threads found their cores taken by other processes, and each parallel loop waited for them (beside
#: a process busy on the other core: 0.98-0.99, cavity 256^2, 2 threads; on idle cores 1.3-1.8; 2026-12-03)
SHARED_CORE_USE = 1.15
SHARED_CORE_STRIKES = 2
SHARED_CORE_SECONDS = 0.02
DIVERGENCE_ADVICE = (
    "the last good state is kept — lower relax_velocity / relax_pressure, use convection = 'upwind' "
    "to start, or check the boundary conditions and mesh"
)


@dataclass
class SolverControls:
    """Numerical settings of the loop (the case file's [solver] table).

    ``relax_velocity`` / ``relax_pressure`` None take the coupling's default. ``momentum_solver``:
    'amg' (BiCGStab preconditioned by a reused AMG V-cycle, at most ``momentum_max_iterations``
    iterations, relative L2 tolerance ``momentum_tolerance``) or 'gauss-seidel' (at most
    ``momentum_sweeps`` symmetric sweeps, relative L1 tolerance ``momentum_tolerance``).
    ``amg_rebuild_every``: outer iterations between AMG set-ups (pressure and momentum).
    ``quadratic_face_flux``: add the second-derivative terms of the face velocity and of the
    face integral to the Rhie-Chow fluxes (see ``_kernels.rhie_chow_fluxes``); None turns them on
    when the mesh has a cell that is not a quadrilateral (on triangles the midpoint-rule errors
    of the three faces do not cancel, so without them the pressure is only first order).

    Start-up and pseudo-time steps (choice and figures in DEVELOPERS.md, "Start from rest"):
    ``conservative_start`` projects a uniform start onto mass-conserving fluxes (one Poisson
    solve): a start from rest conserves no mass (the inflow enters cells it cannot leave) and
    diverged at iteration 1 on the step, bumps and plates, or at iteration 3 on the Re_h 800
    channel, depending on round-off. ``turbulence_cfl``: the turbulence equation gets
    rho V / dt = q / CFL on its diagonal (q the mass flow through the cell, ``_kernels.flow_rates``),
    a relaxation that does not grow with the diagonal: it ends the limit cycle of the Re_h 1e6
    bump without Patankar relaxation, which ties stacks of thin cells (step); None takes the
    coupling's default (:data:`DEFAULT_TURBULENCE_CFL`: 20, none for the simultaneous path, whose
    outer iterations it made grow with the grid). ``momentum_cfl``
    (off; not a case key): the same for the momentum equations, beside Patankar's relaxation; it
    sped up some cases and slowed or stalled others (DEVELOPERS.md), kept for the study of
    pseudo-transient continuation. ``momentum_start_shift``: the simultaneous path's start-up shift of
    the momentum diagonals with its iterative solve (``coupled.SimultaneousSolver._start_shift``; off
    unless the case names it: the step's case does). ``newton_convection_below`` (not a case key; 0
    turns it off): the simultaneous path linearises the convection term by Newton's method instead of
    Picard's once every normalised imbalance is below it, when its systems are solved by the sparse LU
    (``coupled.SimultaneousSolver._newton``). ``anderson_depth`` (not a case key): the simultaneous
    path's Anderson acceleration of its outer iterations (``coupled.SimultaneousSolver._accelerate``),
    the number of earlier iterations it combines; None: 3 with the sparse LU, 0 (off) with the iterative
    solve (its history, about 0.35 KB per cell, would add to that path's peak memory).
    """

    coupling: str = "simplec"
    max_iterations: int = 5000
    tolerance: float = 1e-6
    relax_velocity: float | None = None
    relax_pressure: float | None = None
    convection: str = "linear-upwind"
    gradient: str = "least-squares"
    pressure_tolerance: float = 0.01
    momentum_solver: str = "amg"
    momentum_tolerance: float = 0.1
    momentum_sweeps: int = 5
    momentum_max_iterations: int = 20
    amg_rebuild_every: int = 20
    divergence_factor: float = 1e5
    quadratic_face_flux: bool | None = None
    conservative_start: bool = True
    turbulence_cfl: float | None = None
    momentum_cfl: float = 0.0
    momentum_start_shift: float = 0.0
    system_solver: str = "by-size"
    system_tolerance: float = 0.01
    eddy_viscosity_relaxation: float = 0.5
    newton_convection_below: float = 1e-4
    anderson_depth: int | None = None
    threads: int = 0

    def __post_init__(self) -> None:
        if self.turbulence_cfl is None:
            self.turbulence_cfl = DEFAULT_TURBULENCE_CFL.get(self.coupling, 20.0)

    @property
    def alpha_u(self) -> float:
        if self.relax_velocity is not None:
            return float(self.relax_velocity)
        return DEFAULT_RELAX_VELOCITY.get(self.coupling, 0.7)

    @property
    def alpha_p(self) -> float:
        if self.relax_pressure is not None:
            return float(self.relax_pressure)
        return 1.0 if self.coupling == "simplec" else 0.3

    @classmethod
    def from_settings(cls, s: Any) -> SolverControls:
        """Take the matching attributes of any settings object (e.g. the case's solver table)."""
        kw = {}
        for name in cls.__dataclass_fields__:
            if hasattr(s, name):
                kw[name] = getattr(s, name)
            elif isinstance(s, dict) and name in s:
                kw[name] = s[name]
        return cls(**kw)


def face_coefficients(geom: Geometry) -> tuple[np.ndarray, np.ndarray]:
    """(dcoef, kvec) per face: dcoef = |S|^2 / (S . d), the orthogonal part of the face-normal
    difference (dcoef d), and kvec = S - dcoef d, its non-orthogonal remainder (over-relaxed
    decomposition; S the area vector, d the owner-to-neighbour offset)."""
    S = np.ascontiguousarray(geom.face_area_vector, dtype=float)
    d = np.ascontiguousarray(geom.face_delta, dtype=float)
    dcoef = np.empty(S.shape[0])
    kvec = np.empty((S.shape[0], 2))
    K.face_coefficient_values(S, d, dcoef, kvec)  # (numba: made every outer iteration, ~13x numpy's time)
    return dcoef, kvec


@dataclass
class History:
    """Normalised imbalances per outer iteration (columns named in ``names``)."""

    names: list[str] = field(default_factory=lambda: ["u", "v", "continuity"])
    rows: list[list[float]] = field(default_factory=list)
    seconds: list[float] = field(default_factory=list)

    def as_array(self) -> np.ndarray:
        return np.asarray(self.rows, dtype=float).reshape(-1, len(self.names))


class SimpleSolver:
    """Steady incompressible solver (SIMPLE/SIMPLEC, Rhie-Chow) on a fixed mesh.

    ``mu`` is the dynamic viscosity, ``rho`` the density. ``model`` (a
    :class:`fvrans.models.base.TurbulenceModel`; laminar when None) supplies the eddy viscosity,
    an optional explicit extra stress and its own equations, advanced once per outer iteration.
    ``body_force`` (per unit volume; a periodic flow's -dp/dx) and ``bulk_velocity`` (the volume-mean
    velocity a periodic flow must carry; its uniform driving force is found each iteration, see
    :mod:`fvrans.solve.mean_flow`) drive the flow. ``controls.coupling`` must be one of
    :attr:`COUPLINGS` ('simultaneous' is :class:`fvrans.solve.coupled.SimultaneousSolver`'s;
    :func:`fvrans.solve.coupled.solver_class` picks the class for a coupling).
    """

    #: the ``SolverControls.coupling`` values this class solves
    COUPLINGS: tuple[str, ...] = ("simple", "simplec")

    def __init__(
        self,
        mesh: Mesh,
        geom: Geometry,
        boundary: FlowBoundary,
        rho: float,
        mu: float,
        controls: SolverControls | None = None,
        fields: Fields | None = None,
        model: TurbulenceModel | None = None,
        body_force: Callable[[np.ndarray], np.ndarray] | np.ndarray | None = None,
        bulk_velocity: Any = None,
    ):
        self.mesh = mesh
        self.geom = geom
        self.bc = boundary
        self.rho = float(rho)
        self.mu = float(mu)
        self.ctl = controls or SolverControls()
        if self.ctl.coupling not in self.COUPLINGS:
            raise ValueError(f"{type(self).__name__} solves coupling {' or '.join(map(repr, self.COUPLINGS))}, not "
                             f"{self.ctl.coupling!r}: build the class fvrans.solve.coupled.solver_class("
                             f"{self.ctl.coupling!r}) returns, or run the case through fvrans.api.solve")
        self.model = model if model is not None else TurbulenceModel()
        #: threads of the parallel kernels (``fvrans.jit.set_threads``: ``controls.threads``, else
        #: FVRANS_THREADS, else every idle core); with two, the velocity components are solved at once
        self.threads = set_threads(self.ctl.threads)
        #: whether the thread count came from the idle cores (then ``_watch_threads`` may lower it)
        self.threads_watched = threads_from_idle_cores(self.ctl.threads)
        self._shared_core_strikes = 0
        nc, nf, ni = mesh.n_cells, mesh.n_faces, mesh.n_internal_faces
        self.nc, self.nf, self.ni = nc, nf, ni
        # geometry for the kernels
        self.S = geom.face_area_vector
        self.dcoef, self.kvec = face_coefficients(geom)
        self.owner = mesh.face_owner
        self.neigh = np.ascontiguousarray(mesh.face_neighbour[:ni])
        # each cell's faces in face order: the race-free (parallel) form of the face loops
        self.cf_ptr, self.cf_face = mesh.cell_faces
        self.vol = geom.cell_area
        self.asm_u = CsrAssembler(mesh)
        self.asm_v = CsrAssembler(mesh)
        self.grad = gradient_operator(mesh, geom, method=self.ctl.gradient.replace("-", "_"))
        # The linear-upwind reconstruction u_P + grad u_P . (x_f - x_P) takes the face-sum gradient
        # (Green-Gauss, face values moved to the face centre with the least-squares gradient): in a
        # wall cell stretched along a curved wall, the least-squares fit resolves the along-wall
        # derivative from the two short offsets (wall face, next cell out) whenever they are not
        # collinear, so a change of u_P moves the extrapolated value on the long sides by up to
        # ~120 times that change (wall cells of aspect ratio 250 and 26 deg non-orthogonality on
        # the bump flank, tests/solve/test_bump_robustness.py) and the deferred correction runs
        # away; in the face-sum form those offsets act only through their face areas (response
        # below 2). Its skewness correction moves a face value at most to the face ends: over a
        # curved wall the line between two wall-cell centroids side by side meets their common face
        # line up to 13 face lengths outside the face, and the correction extrapolated across the
        # boundary layer from there (Re_h = 1e6 still ran away). The two gradients coincide on
        # Cartesian graded meshes; both are exact for linear fields wherever no face is bounded.
        self.grad_convection = (
            GaussLeastSquaresGradient(mesh, geom, bounded_skew=True)
            if self.ctl.gradient.replace("_", "-") == "least-squares" and self.ctl.convection == "linear-upwind"
            else None
        )
        # the pressure force in conservative face-sum form (second order on irregular meshes)
        self.grad_pressure = gradient_operator(mesh, geom, method="gauss_least_squares")
        quadratic = self.ctl.quadratic_face_flux
        if quadratic is None:
            quadratic = bool(np.any(mesh.cell_sizes() != 4))
        self.hess = QuadraticFit(mesh, geom) if quadratic else None
        # second-order velocity gradient at wall faces (the wall flux of the momentum equations and
        # the reported wall shear stress use the same one)
        wall_b = np.flatnonzero(boundary.kind == WALL)
        self.wall_faces = wall_b + ni
        self.wall_grad = WallGradient(mesh, geom, self.wall_faces, boundary.kind == WALL)
        self.gwall = np.zeros((nf - ni, 2, 2))
        self._gwall_k = np.zeros((len(wall_b), 2, 2))
        self.hu = np.zeros((nc if quadratic else 1, 2, 3))
        self.psolver = PressureSolver(
            CsrAssembler(mesh), rtol=self.ctl.pressure_tolerance, rebuild_every=self.ctl.amg_rebuild_every,
            singular=not boundary.has_fixed_pressure,
        )
        if self.ctl.momentum_solver not in ("amg", "gauss-seidel"):
            raise ValueError(
                f"unknown momentum_solver {self.ctl.momentum_solver!r}; use 'amg' or 'gauss-seidel'"
            )
        # one hierarchy serves both velocity components (same off-diagonals), so it is rebuilt
        # after 2 x amg_rebuild_every solves
        self.msolver = AmgKrylovSolver(
            "bicgstab", rtol=self.ctl.momentum_tolerance, rebuild_every=2 * self.ctl.amg_rebuild_every,
            max_iterations=self.ctl.momentum_max_iterations,
        )
        # work arrays, reused every iteration
        nb = nf - ni
        self.diag_u = np.zeros(nc)
        self.diag_v = np.zeros(nc)
        self.off_own = np.zeros(ni)
        self.off_nei = np.zeros(ni)
        self.face_work = np.zeros((ni, 2))
        self.bu = np.zeros(nc)
        self.bv = np.zeros(nc)
        self.b_np = np.zeros((nc, 2))
        self.a_rel = np.zeros((nc, 2))
        self.rhs_u = np.zeros(nc)
        self.rhs_v = np.zeros(nc)
        self.work2 = np.zeros((nc, 2))
        self.us = np.zeros(nc)
        self.vs = np.zeros(nc)
        self.hbya = np.zeros((nc, 2))
        self.rau = np.zeros(nc)
        self.beta = np.zeros(nc)
        self.pt = np.zeros(nc)
        self.flow_rate = np.zeros(nc)
        # narrow width of each cell, V / longest face (floor of the pseudo-time step's flow)
        longest = np.zeros(nc)
        np.maximum.at(longest, mesh.face_owner, geom.face_length)
        np.maximum.at(longest, mesh.face_neighbour[:ni], geom.face_length[:ni])
        self.width = geom.cell_area / longest
        self.dp = np.zeros(nc)
        self.pc = np.zeros(nc)
        self.pcb = np.zeros(nb)
        self.pb = np.zeros(nb)
        self.ub = np.zeros((nb, 2))
        self.muf = np.zeros(nf)
        self.mu_cell = np.full(nc, self.mu)
        self.gu = np.zeros((nc, 2, 2))
        self.gpc = np.zeros((nc, 2))
        self.gc = np.zeros((nc, 2, 2))
        self.grad_p_buf = (np.zeros((nc, 2)), np.zeros((nc, 2)))
        #: accumulated seconds per phase, see ``PHASES``
        self.timing = np.zeros(len(PHASES))
        self.p_diag = np.zeros(nc)
        self.p_off = np.zeros(ni)
        self.p_rhs = np.zeros(nc)
        if body_force is None:
            self.body = np.zeros((nc, 2))
        elif callable(body_force):
            self.body = np.asarray(body_force(geom.cell_centre), dtype=float).reshape(nc, 2)
        else:
            self.body = np.broadcast_to(np.asarray(body_force, dtype=float), (nc, 2)).copy()
        self.bulk = None if bulk_velocity is None else BulkVelocityControl(bulk_velocity, geom.cell_area)
        self.history = History(names=["u", "v", "continuity", *self.model.names])
        self.iteration = 0
        self.fields = fields.copy() if fields is not None else Fields.uniform(nc, nf)
        self.u_scale = self._velocity_scale()
        self.model.initialise(self.fields)
        # the explicit extra stress of the model (non-linear relations, injected stresses): its
        # divergence is a momentum source; zero on walls, normal part only on symmetry planes
        bmode = np.full(nf - ni, stress_modes.OWNER, dtype=np.int64)
        bmode[boundary.kind == WALL] = stress_modes.ZERO
        bmode[boundary.kind == SYMMETRY] = stress_modes.NORMAL
        self.stress_divergence = StressDivergence(mesh, geom, bmode)
        self.div_stress = np.zeros((nc, 2))
        #: a start without face fluxes (uniform or at rest), which ``conservative_start`` projects
        self.cold_start = fields is None or not np.any(fields.face_flux)
        if self.cold_start:
            self.fields.face_flux = self._interpolated_fluxes(self.fields.velocity)
            if self.ctl.conservative_start:
                self._project_start()
        self.grad_p = self.grad_pressure(self.fields.pressure, self._pressure_on_boundary(np.zeros((nc, 2))))
        # models that need the gradient of a field other than the current one (an injected stress)
        self.model.prepare(self.velocity_gradient)

    def _project_start(self) -> None:
        """Make the start's face fluxes conservative: F = F0 - rho dcoef (phi_N - phi_P) with
        sum_f rho dcoef (phi_P - phi_N) = -sum_f F0 (phi = 0 on fixed-pressure faces), and the cell
        velocities u = u0 - grad phi: the start plus the potential flow that carries what the
        inflow boundaries bring in to the outflow boundaries (the pressure-correction system with
        D = 1; a start that already conserves mass, or one without inflow, is left as it is).
        Started from rest, the first momentum predictor met inflow with no outflow and SIMPLEC's
        D = V / (A - sum|a_nb|) was largest where the fluid was still at rest; from the potential
        flow the cold starts of the bundled cases converge in as many iterations as their uniform
        starts (coarse step 633 from rest, 632 from the free-stream velocity)."""
        ni = self.ni
        kind = self.bc.kind
        ones = np.ones(self.nc)
        F = self.fields.face_flux
        K.assemble_pressure_correction(self.owner, self.neigh, ni, self.dcoef, self.rho, ones, kind, F,
                                       self.p_diag, self.p_off, self.p_rhs, self.cf_ptr, self.cf_face)
        if not np.any(self.p_rhs):
            return
        solver = PressureSolver(CsrAssembler(self.mesh), rtol=1e-6, singular=not self.bc.has_fixed_pressure,
                                max_cg_iterations=200)
        phi = solver.solve(self.p_diag, self.p_off, self.p_rhs)
        K.correct_fluxes(self.owner, self.neigh, ni, self.dcoef, self.rho, ones, kind, phi, F)
        fixed = (kind == K.OUTLET) | (kind == K.FREESTREAM)
        phib = np.where(fixed, 0.0, phi[self.owner[ni:]])
        self.fields.velocity = self.fields.velocity - self.grad(phi, phib)

    def velocity_gradient(self, velocity: np.ndarray, face_flux: np.ndarray | None = None) -> np.ndarray:
        """The loop's cell gradient grad u[c, i, j] = du_i/dx_j of a velocity field, with boundary
        values by the flow's conditions (``_velocity_on_boundary``; boundary fluxes ``face_flux`` or
        rho u_b . S). The boundary values depend on the gradient (tangential extrapolation), as in the
        loop, where they take the previous iteration's: here a few passes reach that fixed point."""
        u = np.ascontiguousarray(velocity, dtype=float)
        ni, nb = self.ni, self.nf - self.ni
        g = np.zeros((self.nc, 2, 2))
        F = np.zeros(self.nf)
        ub = np.empty((nb, 2))
        for it in range(4):
            if face_flux is not None:
                F[:] = face_flux
            elif it:
                F[ni:] = self.rho * np.einsum("ij,ij->i", ub, self.S[ni:])
            K.boundary_velocity(self.owner, ni, self.geom.face_normal, self.geom.face_delta, self.bc.kind,
                                self.bc.velocity, u, g, F, ub)
            g = self.grad(u, ub)
        return g

    # -- boundary values -----------------------------------------------------------------
    def _velocity_scale(self) -> float:
        s = float(np.abs(self.bc.velocity).max(initial=0.0))
        s = max(s, float(np.abs(self.fields.velocity).max(initial=0.0)))
        if self.bulk is not None:
            s = max(s, self.bulk.speed)
        return s if s > 0 else 1.0

    def _interpolated_fluxes(self, u: np.ndarray) -> np.ndarray:
        """rho u_f . S with linear interpolation; boundary faces by their condition."""
        ni = self.ni
        w = self.geom.face_weight
        F = np.empty(self.nf)
        uf = w[:ni, None] * u[self.owner[:ni]] + (1 - w[:ni, None]) * u[self.neigh]
        F[:ni] = self.rho * np.einsum("ij,ij->i", uf, self.S[:ni])
        ub = self._velocity_on_boundary(u, np.zeros(self.nf - ni))
        F[ni:] = self.rho * np.einsum("ij,ij->i", ub, self.S[ni:])
        kind = self.bc.kind
        F[ni:][(kind == WALL) | (kind == SYMMETRY)] = 0.0
        return F

    def _velocity_on_boundary(self, u: np.ndarray, Fb: np.ndarray) -> np.ndarray:
        """Boundary-face velocities for cell velocities ``u`` and boundary mass fluxes ``Fb``."""
        ni = self.ni
        F = np.zeros(self.nf)
        F[ni:] = Fb
        ub = np.empty((self.nf - ni, 2))
        K.boundary_velocity(self.owner, ni, self.geom.face_normal, self.geom.face_delta, self.bc.kind,
                            self.bc.velocity, np.ascontiguousarray(u, dtype=float), self.gu, F, ub)
        return ub

    def _pressure_on_boundary(self, gp: np.ndarray) -> np.ndarray:
        """Fixed p on outlets and freestream; elsewhere linear extrapolation from the owner,
        p_b = p_P + grad p_P . (x_f - x_P), with the latest gradient (at convergence the boundary
        faces add nothing to the least-squares fit: a one-sided, second-order gradient)."""
        pb = np.empty(self.nf - self.ni)
        K.boundary_pressure(self.owner, self.ni, self.geom.face_delta, self.bc.kind, self.bc.pressure,
                            self.fields.pressure, gp, pb)
        return pb

    def _momentum_equations(self, mu_cell: np.ndarray) -> tuple:
        """Assemble the relaxed momentum equations at the current state, shared by the segregated and
        the simultaneous loops: face viscosities (cell viscosity ``mu_cell``), boundary velocities,
        velocity gradients (and the wall gradient), convection-diffusion coefficients, the model's
        extra stress, pseudo-time terms, body force, pressure gradient and Patankar's relaxation.
        Returns (grad u, the Hessians buffer of u, u and v imbalances, their scale, whether the
        turbulence pseudo-time steps are on, seconds spent on the gradients)."""
        fl = self.fields
        ctl = self.ctl
        rho = self.rho
        ni = self.ni
        g = self.geom
        kind = self.bc.kind
        alpha = ctl.alpha_u
        u_old = fl.velocity
        F_old = fl.face_flux
        K.face_viscosity(self.owner, self.neigh, ni, g.face_weight, mu_cell, kind,
                         self.mu + self.model.wall_eddy_viscosity(), self.muf)
        K.boundary_velocity(self.owner, ni, g.face_normal, g.face_delta, kind, self.bc.velocity, u_old, self.gu,
                            F_old, self.ub)
        t1 = time.perf_counter()
        gu = self.grad(u_old, self.ub, out=self.gu)
        gc = gu if self.grad_convection is None else self.grad_convection.from_least_squares(
            u_old, self.ub, gu, out=self.gc)
        hu = self.hu if self.hess is None else self.hess(u_old, self.ub, out=self.hu)
        self.gwall[self.wall_faces - ni] = self.wall_grad.velocity(u_old, self.ub, out=self._gwall_k)
        t2 = time.perf_counter()
        K.assemble_momentum(
            self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
            g.face_centre, g.cell_centre, g.face_shift, F_old, self.muf, u_old, gu, gc, self.gwall, kind,
            self.bc.velocity, ctl.convection == "linear-upwind",
            self.diag_u, self.diag_v, self.off_own, self.off_nei, self.bu, self.bv, self.cf_ptr, self.cf_face,
            self.face_work,
        )
        # the model's explicit extra stress T (beside 2 mu_t S): + sum_f T_f . S_f on the right
        extra = self.model.extra_stress(fl, gu)
        if extra is not None:
            div = self.stress_divergence(extra, out=self.div_stress)
            self.bu += div[:, 0]
            self.bv += div[:, 1]
        # body force and pressure gradient (cell gradient, Rhie-Chow handles the coupling),
        # residuals of the current velocity, implicit under-relaxation (Patankar 1980, sec. 4.2-5)
        gp = self.grad_p
        use_turbulence_cfl = bool(self.model.names) and ctl.turbulence_cfl > 0.0
        if ctl.momentum_cfl > 0.0 or use_turbulence_cfl:
            # rho q per cell, q the volume flow through it (local pseudo-time steps dt = CFL V / q)
            K.flow_rates(self.owner, self.neigh, ni, F_old, self.width, rho * self.u_scale, self.flow_rate)
        if ctl.momentum_cfl > 0.0:
            np.multiply(self.flow_rate, 1.0 / ctl.momentum_cfl, out=self.pt)
        ru, rv, mag = K.momentum_sources(
            self.owner, self.neigh, self.vol, self.body, gp, u_old, alpha,
            self.pt, self.diag_u, self.diag_v,
            self.off_own, self.off_nei, self.bu, self.bv, self.b_np, self.a_rel, self.rhs_u, self.rhs_v,
            self.work2, self.cf_ptr, self.cf_face,
        )
        return gu, hu, ru, rv, mag, use_turbulence_cfl, t2 - t1

    # -- one outer iteration ---------------------------------------------------------------
    def iterate(self) -> list[float]:
        """One SIMPLE(C) outer iteration; returns the normalised imbalances [u, v, continuity, ...]."""
        fl = self.fields
        ctl = self.ctl
        rho = self.rho
        ni = self.ni
        g = self.geom
        kind = self.bc.kind
        u_old = fl.velocity
        F_old = fl.face_flux
        t = self.timing
        t0 = time.perf_counter()
        mu_t = self.model.eddy_viscosity(fl)
        if mu_t is None:
            mu_cell = self.mu_cell
        else:
            mu_cell = self.mu + mu_t
        gu, hu, ru, rv, mag, use_turbulence_cfl, t_grad = self._momentum_equations(mu_cell)
        gp = self.grad_p
        res_u = ru / (mag + 1e-300)
        res_v = rv / (mag + 1e-300)
        mu_ = self.asm_u.matrix(self.a_rel[:, 0], self.off_own, self.off_nei)
        mv_ = self.asm_v.matrix(self.a_rel[:, 1], self.off_own, self.off_nei)
        t3 = time.perf_counter()
        us, vs = self.us, self.vs
        us[:] = u_old[:, 0]
        vs[:] = u_old[:, 1]
        if ctl.momentum_solver == "amg":
            self.msolver.solve_pair(mu_, self.rhs_u, us, mv_, self.rhs_v, vs)
        else:
            K.gauss_seidel(mu_.indptr, mu_.indices, mu_.data, self.asm_u.diag_pos, self.rhs_u, us,
                           ctl.momentum_sweeps, ctl.momentum_tolerance)
            K.gauss_seidel(mv_.indptr, mv_.indices, mv_.data, self.asm_v.diag_pos, self.rhs_v, vs,
                           ctl.momentum_sweeps, ctl.momentum_tolerance)
        if self.bulk is not None:  # the uniform force that makes the predicted velocity carry the bulk
            df = self.bulk.adjust(mu_, mv_, us, vs)
            self.body += df
            self.b_np += self.vol[:, None] * df
        t4 = time.perf_counter()
        # H/a = (b - N u*) / a_P, V / a_P and the relaxation share beta of the diagonal; D for p'
        K.interpolation_coefficients(
            self.owner, self.neigh, self.vol, self.off_own, self.off_nei, self.diag_u, self.diag_v, self.a_rel,
            self.b_np, us, vs, ctl.coupling == "simplec", self.hbya, self.rau, self.beta, self.dp, self.work2,
            self.cf_ptr, self.cf_face,
        )
        dp = self.dp
        K.boundary_pressure(self.owner, ni, g.face_delta, kind, self.bc.pressure, fl.pressure, gp, self.pb)
        F = np.empty(self.nf)
        K.rhie_chow_fluxes(
            self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, g.face_weight,
            g.face_skew, g.face_delta, gu, hu, self.hess is not None, rho, self.hbya, self.rau, fl.pressure, gp,
            self.pb, kind, self.bc.velocity, self.beta, F_old, F,
        )
        imbalance, throughput = K.assemble_pressure_correction(
            self.owner, self.neigh, ni, self.dcoef, rho, dp, kind, F, self.p_diag, self.p_off, self.p_rhs,
            self.cf_ptr, self.cf_face,
        )
        res_c = imbalance / (throughput + 1e-300)
        t5 = time.perf_counter()
        pc = self.psolver.solve(self.p_diag, self.p_off, self.p_rhs, out=self.pc)
        t6 = time.perf_counter()
        K.correct_fluxes(self.owner, self.neigh, ni, self.dcoef, rho, dp, kind, pc, F)
        p = np.empty(self.nc)
        K.update_pressure(fl.pressure, pc, ctl.alpha_p, not self.bc.has_fixed_pressure, self.owner, ni, kind,
                          p, self.pcb)
        gpc = self.grad(pc, self.pcb, out=self.gpc)
        u_new = np.empty((self.nc, 2))
        K.correct_velocity(us, vs, dp, gpc, u_new)
        fl.velocity = u_new
        fl.pressure = p
        fl.face_flux = F
        t7 = time.perf_counter()
        K.boundary_pressure(self.owner, ni, g.face_delta, kind, self.bc.pressure, p, gp, self.pb)
        self.grad_p = self.grad_pressure(p, self.pb, out=self.grad_p_buf[self.iteration % 2])
        t8 = time.perf_counter()
        t[0] += t_grad + t8 - t7  # gradients of u and p
        t[1] += t3 - t0 - t_grad  # momentum assembly
        t[2] += t4 - t3  # momentum solve
        t[3] += t5 - t4  # Rhie-Chow fluxes and pressure-correction assembly
        t[4] += t6 - t5  # pressure-correction solve
        t[5] += t7 - t6  # corrections
        res = [res_u, res_v, res_c]
        if self.model.names:
            ub2 = self._velocity_on_boundary(u_new, F[ni:])
            res += self.model.update(fl, self.grad(u_new, ub2),
                                     self.flow_rate / ctl.turbulence_cfl if use_turbulence_cfl else None)
        self.iteration += 1
        return res

    def release_work(self) -> None:
        """Free the multigrid hierarchies of the velocity and pressure solves when the run is over
        (~0.8 KB per cell), before its outputs are evaluated; a further iteration rebuilds them."""
        self.msolver.release()
        self.psolver.krylov.release()

    def resume(self, iteration: int, rows: Any, seconds: Any, velocity_scale: float,
               pressure_gradient: np.ndarray | None = None) -> None:
        """Continue a saved run: its iteration count, residual history, velocity scale (of the
        divergence guard) and the pressure gradient of its last
        iteration (the boundary pressure extrapolation depends on it); see :mod:`fvrans.checkpoint`."""
        rows = np.asarray(rows, dtype=float).reshape(-1, len(self.history.names))
        self.iteration = int(iteration)
        self.history.rows = [list(map(float, r)) for r in rows]
        self.history.seconds = [float(t) for t in np.asarray(seconds, dtype=float)]
        self.u_scale = float(velocity_scale)
        if pressure_gradient is not None:
            self.grad_p = np.array(pressure_gradient, dtype=float).reshape(self.nc, 2)

    # -- the loop ---------------------------------------------------------------------------
    def run(
        self,
        max_iterations: int | None = None,
        tolerance: float | None = None,
        callback: Callable[[int, list[float]], bool | None] | None = None,
        converged_when: Callable[[int, list[float]], bool] | None = None,
    ) -> bool:
        """Iterate until every normalised imbalance is below ``tolerance`` (True) or the limit (False).

        NaN/Inf, a speed above ``RUNAWAY_SPEED`` times the velocity scale, a linear system that
        lost its diagonal, or growth of a residual by ``divergence_factor`` above its minimum
        raises DivergenceError carrying the last good fields. ``callback(iteration, residuals)`` may
        return True to stop early. ``converged_when(iteration, residuals)``, asked only when every
        residual is below the tolerance, must also return True for the run to stop as converged.
        """
        with one_blas_thread():
            return self._iterate_until(max_iterations, tolerance, callback, converged_when)

    def _watch_threads(self, wall: float, cpu: float) -> None:
        """Go on with one thread when the last ``SHARED_CORE_STRIKES`` iterations on several kept fewer than
        ``SHARED_CORE_USE`` cores busy (``cpu`` / ``wall`` seconds of this process): other processes hold the
        cores the threads were given. Only a count taken from the idle cores (``threads_watched``); the bits
        do not depend on the thread count."""
        if not self.threads_watched or self.threads <= 1 or wall < SHARED_CORE_SECONDS:
            return
        self._shared_core_strikes = self._shared_core_strikes + 1 if cpu < SHARED_CORE_USE * wall else 0
        if self._shared_core_strikes >= SHARED_CORE_STRIKES:
            log.info("iteration %d kept %.2f cores busy on %d threads: other processes hold the cores; going on "
                     "with one thread", self.iteration, cpu / wall, self.threads)
            self.threads = set_threads(1)
            self._shared_core_strikes = 0

    def _iterate_until(
        self,
        max_iterations: int | None,
        tolerance: float | None,
        callback: Callable[[int, list[float]], bool | None] | None,
        converged_when: Callable[[int, list[float]], bool] | None,
    ) -> bool:
        """The loop of :meth:`run`."""
        n_max = self.ctl.max_iterations if max_iterations is None else max_iterations
        tol = self.ctl.tolerance if tolerance is None else tolerance
        best = None
        last_good = self.fields.copy()
        for _ in range(n_max):
            t0 = time.perf_counter()
            c0 = time.process_time()
            done = self.iteration
            try:
                res = self.iterate()
            except (ZeroDivisionError, FloatingPointError, DivergenceError) as exc:
                # a linear system that lost its diagonal dominance: the fields were already
                # running away; stop as for any divergence, keeping the last good state
                self.fields = last_good
                self.iteration = done
                raise DivergenceError(
                    f"the run diverged at iteration {done + 1} ({exc}); {DIVERGENCE_ADVICE}",
                    fields=last_good,
                    iteration=done,
                ) from exc
            dt = time.perf_counter() - t0
            self._watch_threads(dt, time.process_time() - c0)
            self.history.rows.append(res)
            self.history.seconds.append(dt)
            arr = np.asarray(res)
            finite = bool(np.all(np.isfinite(arr))) and self.fields.is_finite()
            worst = float(np.max(arr)) if finite else np.inf
            best = worst if best is None else min(best, worst)
            runaway = finite and float(np.abs(self.fields.velocity).max(initial=0.0)) > RUNAWAY_SPEED * self.u_scale
            if not finite or runaway or (
                self.iteration > 10 and worst > self.ctl.divergence_factor * max(best, 1e-300)
            ):
                bad = ("non-finite values" if not finite else
                       f"a velocity above {RUNAWAY_SPEED:g} times the largest boundary or initial speed"
                       if runaway else "runaway residual growth")
                self.fields = last_good
                raise DivergenceError(
                    f"the run diverged at iteration {self.iteration} ({bad}; residuals "
                    f"{', '.join(f'{n}={r:.3g}' for n, r in zip(self.history.names, res))}); "
                    f"{DIVERGENCE_ADVICE}",
                    fields=last_good,
                    iteration=self.iteration - 1,
                )
            last_good = self.fields.copy()
            stop = callback is not None and bool(callback(self.iteration, res))
            if np.all(arr < tol) and (converged_when is None or converged_when(self.iteration, res)):
                return True
            if stop:
                return False
        return False
