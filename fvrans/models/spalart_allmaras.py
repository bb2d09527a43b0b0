"""The Spalart-Allmaras one-equation eddy-viscosity model (segregated, one sweep per outer iteration).

Model: Spalart & Allmaras 1994, La Recherche Aerospatiale 1, 5-21, in the form without trip term
given by Allmaras, Johnson & Spalart 2012, ICCFD7-1902 (AJS 2012), for nu_tilde >= 0::

    div(u nt) = cb1 (1 - f_t2) S_tilde nt - (cw1 f_w - cb1 f_t2 / kappa^2) (nt / d)^2
                + (1/sigma) [div((nu + nt) grad nt) + cb2 |grad nt|^2]

    nu_t = nt f_v1,  f_v1 = chi^3 / (chi^3 + cv1^3),  chi = nt / nu,
    S_tilde = Omega + S_bar (S_bar = nt f_v2 / (kappa d)^2) with the AJS 2012 safeguard that keeps
    S_tilde >= 0.3 Omega, r = min(nt / (S_tilde kappa^2 d^2), 10).

Variant ``"no-ft2"`` sets f_t2 = 0. Negative nu_tilde (AJS 2012): production cb1 (1 - ct3) Omega nt,
destruction -cw1 (nt/d)^2 (so the source is +cw1 (nt/d)^2), diffusivity nu + nt f_n,
f_n = (cn1 + chi^3)/(cn1 - chi^3); nu_t = 0. Constants and scalar functions: ``_sa_kernels``.

Discretisation: first-order upwind convection (``"linear-upwind"`` by deferred correction
selectable) with the mass-imbalance term removed from the diagonal; diffusion with face
diffusivity rho (nu + nt f_n)_f / sigma (linear interpolation) and over-relaxed non-orthogonal
correction; the cb2 term explicit; the cell source P - D linearised by Newton's rule with its
derivative on the diagonal where negative (destruction implicit, production explicit where it
dominates; see ``_sa_kernels.assemble_sources``); Patankar's implicit under-relaxation (``relax``,
1 = none by default: the linearised system is diagonally dominant without it, and relaxation pins
stacks of thin cells to their old values); the linear system solved by BiCGStab with the reused
AMG V-cycle of ``fvrans.linalg.amg`` to ``linear_tolerance`` (default), or by symmetric
Gauss-Seidel sweeps (``linear_solver = "gauss-seidel"``; at most ``linear_max_iterations`` either way).

Boundary values: nt = 0 on walls; nt = nu_tilde_ratio nu on velocity inlets and on freestream faces
where the mass flux enters; zero normal gradient elsewhere (outlets, symmetry, freestream outflow).

Normalised imbalance: sum_c |b - A nt|_c / sum_c (|A| |nt| + |b|)_c of the unrelaxed linearised system at
the current nt, the definition every equation of the loop uses (``fvrans.fv.residual``).
"""

from __future__ import annotations

import numpy as np

from fvrans.errors import CaseError, DivergenceError
from fvrans.fields import Fields
from fvrans.fv.assembly import Coefficients, CsrAssembler, under_relax
from fvrans.fv.boundary import DIRICHLET, NEUMANN, BoundaryScalar, boundary_face_values
from fvrans.fv.convection import convection_coefficients
from fvrans.fv.diffusion import diffusion_coefficients
from fvrans.fv.gradient import gradient_operator, limit_gradient
from fvrans.fv.residual import normalised_imbalance
from fvrans.linalg._smoother_kernels import gauss_seidel
from fvrans.linalg.amg import AmgKrylovSolver
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.models import _sa_kernels as K
from fvrans.models.base import EDDY_VISCOSITY_RATIO, TurbulenceModel, case_wall_distance, checked_wall_distance
from fvrans.physics.boundary import FREESTREAM, INLET, WALL, FlowBoundary

#: the model constants (see ``_sa_kernels``; SA 1994 and AJS 2012)
CONSTANTS = {
    "cb1": K.CB1, "sigma": K.SIGMA, "cb2": K.CB2, "kappa": K.KAPPA, "cw1": K.CW1, "cw2": K.CW2,
    "cw3": K.CW3, "cv1": K.CV1, "ct3": K.CT3, "ct4": K.CT4, "cv2": K.CV2, "cv3": K.CV3, "cn1": K.CN1,
}
VARIANTS = ("standard", "no-ft2")
LINEAR_SOLVERS = ("amg", "gauss-seidel")
CONVECTION = ("upwind", "linear-upwind")


def eddy_viscosity(nu_tilde: np.ndarray, nu: float, rho: float = 1.0) -> np.ndarray:
    """mu_t = rho nu_tilde f_v1(nu_tilde / nu) per cell, 0 where nu_tilde < 0."""
    nt = np.ascontiguousarray(nu_tilde, dtype=np.float64)
    out = np.empty_like(nt)
    K.eddy_viscosity(nt, float(nu), float(rho), out)
    return out


def source_terms(
    nu_tilde: np.ndarray, nu: float, omega: np.ndarray, d: np.ndarray, variant: str = "standard"
) -> tuple[np.ndarray, np.ndarray]:
    """Production P and destruction D per point (source = P - D), by the published formulas."""
    nt, om, dd = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (nu_tilde, omega, d)))
    P = np.empty(nt.shape)
    D = np.empty(nt.shape)
    use_ft2 = variant == "standard"
    for i in np.ndindex(nt.shape):
        p, dc = K.cell_source(float(nt[i]), float(nu), float(om[i]), float(dd[i]), use_ft2)
        P[i] = p
        D[i] = dc * nt[i]
    return P, D


class SpalartAllmaras(TurbulenceModel):
    """The SA model behind the interface :class:`fvrans.models.base.TurbulenceModel`.

    ``mu`` is the molecular dynamic viscosity (nu = mu / rho); ``wall_distance`` (n_cells,) is
    computed from the wall patches when not given. ``initial_nu_tilde_ratio`` sets nu_tilde = ratio nu
    in a start without nu_tilde.
    """

    key = "spalart-allmaras"
    names = ("nu_tilde",)
    variables = ("nu_tilde",)

    def __init__(
        self,
        mesh: Mesh,
        geom: Geometry,
        boundary: FlowBoundary,
        rho: float,
        mu: float,
        variant: str = "standard",
        relax: float = 1.0,
        convection: str = "upwind",
        initial_nu_tilde_ratio: float = 3.0,
        wall_distance: np.ndarray | None = None,
        gradient: str = "least-squares",
        limiter: str = "none",
        linear_solver: str = "amg",
        linear_tolerance: float = 0.01,
        linear_max_iterations: int = 20,
        amg_rebuild_every: int = 20,
    ):
        if variant not in VARIANTS:
            raise CaseError(f"model.sa_variant = {variant!r} is not known; use one of {VARIANTS}")
        if convection not in CONVECTION:
            raise CaseError(f"solver.turbulence_convection = {convection!r} is not known; use one of {CONVECTION}")
        if not 0.0 < relax <= 1.0:
            raise CaseError(f"solver.relax_turbulence = {relax!r} must be in (0, 1]")
        if linear_solver not in LINEAR_SOLVERS:
            raise CaseError(f"solver.turbulence_solver = {linear_solver!r} is not known; use one of {LINEAR_SOLVERS}")
        self.mesh = mesh
        self.geom = geom
        self.bc_flow = boundary
        self.rho = float(rho)
        self.nu = float(mu) / float(rho)
        self.use_ft2 = variant == "standard"
        self.variant = variant
        self.relax = float(relax)
        self.scheme = "linear_upwind" if convection == "linear-upwind" else "upwind"
        self.limiter = None if limiter in ("none", None) else limiter.replace("-", "_")
        self.initial_nu_tilde_ratio = float(initial_nu_tilde_ratio)
        self.linear_solver = linear_solver
        self.linear_tolerance = float(linear_tolerance)
        self.linear_max_iterations = int(linear_max_iterations)
        self.ksolver = AmgKrylovSolver("bicgstab", rtol=self.linear_tolerance, rebuild_every=int(amg_rebuild_every),
                                       max_iterations=self.linear_max_iterations)
        nc, ni = mesh.n_cells, mesh.n_internal_faces
        if wall_distance is None:
            wall_distance = case_wall_distance(mesh, geom, boundary, "Spalart-Allmaras")
        d = checked_wall_distance(wall_distance, nc)
        self.wall_distance = d
        kind = boundary.kind
        self.kind = kind
        self.inflow_value = self.nu * boundary.nu_tilde_ratio
        bkind = np.full(len(kind), NEUMANN, dtype=np.int8)
        bval = np.zeros(len(kind))
        bkind[kind == WALL] = DIRICHLET
        bkind[kind == INLET] = DIRICHLET
        bval[kind == INLET] = self.inflow_value[kind == INLET]
        self.bc = BoundaryScalar(bkind, bval)
        self.freestream = np.flatnonzero(kind == FREESTREAM)
        self.grad = gradient_operator(mesh, geom, method=gradient.replace("-", "_"))
        self.asm = CsrAssembler(mesh)
        self.coeffs = Coefficients.zeros(mesh)
        self.grad_nt = np.zeros((nc, 2))
        self.nt_b = np.zeros(mesh.n_boundary_faces)
        self.gamma_cell = np.zeros(nc)
        self.gamma_b = np.zeros(mesh.n_boundary_faces)
        self.gamma_f = np.zeros(mesh.n_faces)
        self.mu_t = np.zeros(nc)
        self.ni = ni
        self.own_i = mesh.face_owner[:ni]
        self.nei_i = mesh.face_neighbour[:ni]
        self.w_i = geom.face_weight[:ni]
        #: iterations (amg) or sweeps (gauss-seidel) of the last linear solve
        self.last_iterations = 0

    @classmethod
    def from_case(cls, case, mesh: Mesh, geom: Geometry, boundary: FlowBoundary,
                  wall_distance: np.ndarray | None = None) -> SpalartAllmaras:
        """The model with the case's ``[model]`` and ``[solver]`` turbulence settings."""
        s = case.solver
        return cls(
            mesh, geom, boundary, rho=case.fluid.density, mu=case.fluid.viscosity, variant=case.model.sa_variant,
            relax=s.relax_turbulence, convection=s.turbulence_convection,
            initial_nu_tilde_ratio=case.initial.nu_tilde_ratio,
            wall_distance=wall_distance, gradient=s.gradient, limiter=s.limiter,
            linear_solver=s.turbulence_solver, linear_tolerance=s.turbulence_tolerance,
            linear_max_iterations=s.turbulence_max_iterations, amg_rebuild_every=s.amg_rebuild_every,
        )

    # -- interface of the solver -----------------------------------------------------------
    def initial_values(self) -> dict[str, np.ndarray]:
        return {"nu_tilde": np.full(self.mesh.n_cells, self.initial_nu_tilde_ratio * self.nu)}

    def _ensure(self, fields: Fields) -> np.ndarray:
        if fields.variables.get("nu_tilde") is None or fields.variables["nu_tilde"].shape != (self.mesh.n_cells,):
            self.initialise(fields)
        return fields.variables["nu_tilde"]

    def eddy_viscosity(self, fields: Fields) -> np.ndarray:
        """mu_t = rho nu_tilde f_v1 per cell (0 where nu_tilde < 0)."""
        nt = np.ascontiguousarray(self._ensure(fields), dtype=np.float64)
        K.eddy_viscosity(nt, self.nu, self.rho, self.mu_t)
        return self.mu_t

    def wall_eddy_viscosity(self) -> float:
        return 0.0  # nu_tilde = 0 on the wall

    def update(self, fields: Fields, grad_u: np.ndarray) -> list[float]:
        """Assemble and solve the nu_tilde equation once with the new velocity gradient and the
        corrected face fluxes; returns [normalised imbalance]."""
        nt = np.ascontiguousarray(self._ensure(fields), dtype=np.float64)
        F = np.ascontiguousarray(fields.face_flux, dtype=np.float64)
        ni = self.ni
        bc = self.bc
        # freestream faces: inflow value where the flux enters, zero gradient where it leaves
        fs = self.freestream
        if len(fs):
            inflow = F[ni + fs] < 0.0
            bc.kind[fs] = np.where(inflow, DIRICHLET, NEUMANN)
            bc.value[fs] = np.where(inflow, self.inflow_value[fs], 0.0)
        nt_b = boundary_face_values(self.mesh, self.geom, bc, nt, self.grad_nt, out=self.nt_b)
        g = self.grad(nt, nt_b, out=self.grad_nt)
        # face diffusivity rho (nu + nt f_n) / sigma
        K.cell_diffusivity(nt, self.nu, self.gamma_cell)
        K.cell_diffusivity(nt_b, self.nu, self.gamma_b)
        s = self.rho / K.SIGMA
        gf = self.gamma_f
        gf[:ni] = s * (self.w_i * self.gamma_cell[self.own_i] + (1.0 - self.w_i) * self.gamma_cell[self.nei_i])
        gf[ni:] = s * self.gamma_b
        co = self.coeffs.clear()
        diffusion_coefficients(self.mesh, self.geom, gf, bc, g, out=co)
        if self.scheme == "linear_upwind" and self.limiter is not None:
            gc, _ = limit_gradient(self.mesh, self.geom, nt, nt_b, g, self.limiter)
        else:
            gc = g
        convection_coefficients(self.mesh, self.geom, F, nt_b, self.scheme, gc, out=co)
        K.continuity_correction(self.mesh.face_owner, self.mesh.face_neighbour, ni, F, co.diag)
        gu = np.ascontiguousarray(grad_u, dtype=np.float64)
        K.assemble_sources(nt, self.nu, self.rho, self.geom.cell_area, self.wall_distance, gu, g,
                           self.use_ft2, co.diag, co.source)
        A = self.asm.matrix(co.diag, co.off_owner, co.off_neighbour)
        res = normalised_imbalance(A, co.source, nt)
        under_relax(co, nt, self.relax)
        bad = np.flatnonzero(~(co.diag > 0.0))
        if len(bad):  # only a flow field that is already running away can do this
            c = int(bad[0])
            x, y = self.geom.cell_centre[c]
            raise DivergenceError(
                f"the nu_tilde equation lost its diagonal at cell {c} (x = {x:.4g}, y = {y:.4g}; "
                f"{len(bad)} cells): the velocity field is running away"
            )
        A = self.asm.matrix(co.diag, co.off_owner, co.off_neighbour)
        x = nt.copy()
        if self.linear_solver == "amg":
            self.last_iterations = self.ksolver.solve(A, co.source, x)
        else:
            self.last_iterations, _, _ = gauss_seidel(A.indptr, A.indices, A.data, self.asm.diag_pos, co.source, x,
                                                      self.linear_max_iterations, self.linear_tolerance)
        fields.variables["nu_tilde"] = x
        return [res]

    # -- outputs --------------------------------------------------------------------------
    def nu_tilde_gradient(self, nu_tilde: np.ndarray) -> np.ndarray:
        """Cell gradient of nu_tilde with this model's boundary values."""
        nt = np.ascontiguousarray(nu_tilde, dtype=float)
        nt_b = boundary_face_values(self.mesh, self.geom, self.bc, nt, self.grad_nt)
        return np.array(self.grad(nt, nt_b))

    def cell_outputs(self, fields: Fields) -> dict[str, np.ndarray]:
        """nu_tilde, nu_t / nu and the wall distance."""
        nt = self._ensure(fields)
        return {
            "nu_tilde": nt,
            EDDY_VISCOSITY_RATIO: eddy_viscosity(nt, self.nu) / self.nu,
            "wall_distance": self.wall_distance,
        }

    def probe_fields(self, fields: Fields) -> dict[str, tuple[np.ndarray, np.ndarray | None]]:
        """nu_tilde with its gradient."""
        nt = self._ensure(fields)
        return {"nu_tilde": (nt, self.nu_tilde_gradient(nt))}

    def probe_columns(self, sampled: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        """nu_t / nu from the sampled nu_tilde."""
        return {EDDY_VISCOSITY_RATIO: eddy_viscosity(sampled["nu_tilde"], self.nu) / self.nu}


__all__ = ["CONSTANTS", "SpalartAllmaras", "eddy_viscosity", "source_terms"]

