"""The Spalart-Allmaras one-equation eddy-viscosity model (segregated, one sweep per outer iteration).

Model: Spalart & Allmaras 1994, La Recherche Aerospatiale 1, 5-21, in the form without trip term
given by Allmaras, Johnson & Spalart 2012, ICCFD7-1902 (AJS 2012), for nu_tilde >= 0::

    div(u nt) = cb1 (1 - f_t2) S_tilde nt - (cw1 f_w - cb1 f_t2 / kappa^2) (nt / d)^2
                + (1/sigma) [div((nu + nt) grad nt) + cb2 |grad nt|^2]

    nu_t = nt f_v1,  f_v1 = chi^3 / (chi^3 + cv1^3),  chi = nt / nu,
    S_tilde = Omega + S_bar (S_bar = nt f_v2 / (kappa d)^2) with the AJS 2012 safeguard that keeps
    S_tilde >= 0.3 Omega, r = min(nt / (S_tilde kappa^2 d^2), 10).

Variant ``"no-ft2"`` sets f_t2 = 0. ``rotation_curvature``: the production becomes
cb1 (f_r1 - f_t2) S_tilde nt with f_r1 of Shur, Strelets, Travin & Spalart 2000 (AIAA J. 38,
784-792; ``_sa_kernels.rotation_function``), the material derivative of the strain-rate tensor
taken as its convective part u . grad S_ij (steady flow, frame at rest). ``nonlinear_stress``:
``"qcr2000"`` adds the quadratic constitutive relation (:mod:`fvrans.models.nonlinear`).
Negative nu_tilde (AJS 2012): production cb1 (1 - ct3) Omega nt,
destruction -cw1 (nt/d)^2 (so the source is +cw1 (nt/d)^2), diffusivity nu + nt f_n,
f_n = (cn1 + chi^3)/(cn1 - chi^3); nu_t = 0. Constants and scalar functions: ``_sa_kernels``.

Discretisation: first-order upwind convection (``"linear-upwind"`` by deferred correction
selectable) with the mass-imbalance term removed from the diagonal; diffusion with face diffusivity
rho (nu + nt f_n)_f / sigma (linear interpolation) and over-relaxed non-orthogonal correction; the
cb2 term explicit, with the upwind form of its Newton derivative implicit and subtracted again from
the source (``_sa_kernels.cb2_linearisation``; same fixed point) when the loop takes no pseudo-time
steps; the cell source P - D linearised by Newton's rule with its derivative on the diagonal where
negative (destruction implicit, production explicit where it dominates; see
``_sa_kernels.assemble_sources``); Patankar's implicit under-relaxation (``relax``, 1 = none by
default: the linearised system is diagonally dominant without it, and relaxation pins stacks of thin
cells to their old values); the linear system solved by BiCGStab with the reused AMG V-cycle of
``fvrans.linalg.amg`` to ``linear_tolerance`` (default), or by symmetric Gauss-Seidel sweeps
(``linear_solver = "gauss-seidel"``; at most ``linear_max_iterations`` either way).

Boundary values: nt = 0 on walls; nt = nu_tilde_ratio nu on velocity inlets and on freestream faces
where the mass flux enters; zero normal gradient elsewhere (outlets, symmetry, freestream outflow).

Normalised imbalance: sum_c |b - A nt|_c / sum_c (|A| |nt| + |b|)_c of the unrelaxed linearised system at
the current nt, the definition every equation of the loop uses (``fvrans.fv.residual``).
"""

from __future__ import annotations

import numpy as np

from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.fv.boundary import DIRICHLET, NEUMANN, BoundaryScalar
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.models import _sa_kernels as K
from fvrans.models import nonlinear
from fvrans.models.base import EDDY_VISCOSITY_RATIO, TurbulenceModel, case_wall_distance, checked_wall_distance
from fvrans.models.transport import CONVECTION, LINEAR_SOLVERS, TransportEquation
from fvrans.physics.boundary import FREESTREAM, INLET, WALL, FlowBoundary

#: the model constants (see ``_sa_kernels``; SA 1994 and AJS 2012)
CONSTANTS = {
    "cb1": K.CB1, "sigma": K.SIGMA, "cb2": K.CB2, "kappa": K.KAPPA, "cw1": K.CW1, "cw2": K.CW2,
    "cw3": K.CW3, "cv1": K.CV1, "ct3": K.CT3, "ct4": K.CT4, "cv2": K.CV2, "cv3": K.CV3, "cn1": K.CN1,
}
VARIANTS = ("standard", "no-ft2")


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
        rotation_curvature: bool = False,
        nonlinear_stress: str = "none",
    ):
        if variant not in VARIANTS:
            raise CaseError(f"model.sa_variant = {variant!r} is not known; use one of {VARIANTS}")
        self.mesh = mesh
        self.geom = geom
        self.bc_flow = boundary
        self.rho = float(rho)
        self.nu = float(mu) / float(rho)
        self.use_ft2 = variant == "standard"
        self.variant = variant
        self.rotation_curvature = bool(rotation_curvature)
        self.nonlinear_stress = nonlinear_stress
        nonlinear.extra_stress(nonlinear_stress, np.zeros(0), np.zeros((0, 2, 2)))  # checks the name
        self.initial_nu_tilde_ratio = float(initial_nu_tilde_ratio)
        nc = mesh.n_cells
        kind = boundary.kind
        self.inflow_value = self.nu * boundary.nu_tilde_ratio
        bkind = np.full(len(kind), NEUMANN, dtype=np.int8)
        bval = np.zeros(len(kind))
        bkind[kind == WALL] = DIRICHLET
        bkind[kind == INLET] = DIRICHLET
        bval[kind == INLET] = self.inflow_value[kind == INLET]
        self.equation = TransportEquation(
            mesh, geom, "nu_tilde", BoundaryScalar(bkind, bval), np.flatnonzero(kind == FREESTREAM),
            self.inflow_value, relax=relax, convection=convection, gradient=gradient, limiter=limiter,
            linear_solver=linear_solver, linear_tolerance=linear_tolerance,
            linear_max_iterations=linear_max_iterations, amg_rebuild_every=amg_rebuild_every,
        )
        if wall_distance is None:
            wall_distance = case_wall_distance(mesh, geom, boundary, "Spalart-Allmaras")
        self.wall_distance = checked_wall_distance(wall_distance, nc)
        self.mu_t = np.zeros(nc)
        #: f_r1 per cell with the rotation-curvature correction (else 1: made when the sources need it)
        self.fr1 = np.ones(nc) if self.rotation_curvature else None
        self.owner_b = mesh.face_owner[mesh.n_internal_faces :]

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
            rotation_curvature=case.model.sa_rotation_curvature, nonlinear_stress=case.model.nonlinear_stress,
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

    def extra_stress(self, fields: Fields, grad_u: np.ndarray) -> np.ndarray | None:
        """The non-linear part of the Reynolds stress (QCR2000 when asked for), else None."""
        return nonlinear.extra_stress(self.nonlinear_stress, self.mu_t, grad_u)

    def rotation_function(self, velocity: np.ndarray, grad_u: np.ndarray) -> np.ndarray:
        """f_r1 per cell (see ``_sa_kernels.rotation_function``); S_ij gradients with zero normal
        gradient on the boundary."""
        g = grad_u
        strain = np.ascontiguousarray(np.stack([g[:, 0, 0], 0.5 * (g[:, 0, 1] + g[:, 1, 0]), g[:, 1, 1]], axis=1))
        grad_strain = self.equation.grad(strain, strain[self.owner_b])
        K.rotation_function(g, np.ascontiguousarray(velocity, dtype=float), grad_strain, self.fr1)
        return self.fr1

    def update(self, fields: Fields, grad_u: np.ndarray, pseudo_time: np.ndarray | None = None) -> list[float]:
        """Assemble and solve the nu_tilde equation once with the new velocity gradient and the
        corrected face fluxes (``pseudo_time``: see ``TransportEquation.solve``); returns
        [normalised imbalance]."""
        nt = np.ascontiguousarray(self._ensure(fields), dtype=np.float64)
        F = np.ascontiguousarray(fields.face_flux, dtype=np.float64)
        eq = self.equation
        g, nt_b = eq.gradient(nt, F)
        # face diffusivity rho (nu + nt f_n) / sigma
        # (work arrays of this update only: not held between outer iterations)
        gamma_cell = np.empty(len(nt))
        gamma_b = np.empty(len(nt_b))
        K.cell_diffusivity(nt, self.nu, gamma_cell)
        K.cell_diffusivity(nt_b, self.nu, gamma_b)
        gf = eq.face_values(gamma_cell, gamma_b, np.empty(self.mesh.n_faces), self.rho / K.SIGMA)
        del gamma_cell, gamma_b
        co = eq.assemble(nt, F, gf, g, nt_b)
        gu = np.ascontiguousarray(grad_u, dtype=np.float64)
        if self.rotation_curvature:
            self.rotation_function(fields.velocity, gu)
        fr1 = self.fr1 if self.fr1 is not None else np.ones(len(nt))
        K.assemble_sources(nt, self.nu, self.rho, self.geom.cell_area, self.wall_distance, gu, g,
                           self.use_ft2, fr1, co.diag, co.source)
        del fr1
        # the implicit part of the cb2 term only without pseudo-time steps: with both, the
        # SIMPLEC bump at Re_h 1e6 (tests/solve/test_bump_robustness.py) fell into a period-2 cycle in
        # two wall cells, while either alone converges (289 / 326 iterations)
        lin = None if pseudo_time is not None else (lambda c: self._cb2_linearisation(nt, c))
        x, res = eq.solve(nt, co, pseudo_time=pseudo_time, linearisation=lin)
        fields.variables["nu_tilde"] = x
        return [res]

    def _cb2_linearisation(self, nt: np.ndarray, co) -> None:
        """The implicit part of the cb2 term with its deferred correction (``_sa_kernels.cb2_linearisation``)."""
        m, g = self.mesh, self.geom
        K.cb2_linearisation(m.face_owner, m.face_neighbour, m.n_internal_faces, g.face_area_vector, g.face_delta, nt,
                            2.0 * self.rho * K.CB2 / K.SIGMA, co.diag, co.off_owner, co.off_neighbour, co.source)

    # -- outputs --------------------------------------------------------------------------
    def nu_tilde_gradient(self, nu_tilde: np.ndarray) -> np.ndarray:
        """Cell gradient of nu_tilde with this model's boundary values."""
        return self.equation.cell_gradient(nu_tilde)

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


__all__ = ["CONSTANTS", "CONVECTION", "LINEAR_SOLVERS", "SpalartAllmaras", "eddy_viscosity", "source_terms"]

