"""The k-omega SST two-equation eddy-viscosity model (Menter 1994, AIAA J. 32, 1598-1605, in the
2003 form of Menter, Kuntz & Langtry, "Ten years of industrial experience with the SST turbulence
model", Turbulence, Heat and Mass Transfer 4, 2003), segregated, one sweep of each equation per
outer iteration::

    div(rho u k) = P_k - beta* rho k w + div((mu + sigma_k mu_t) grad k)
    div(rho u w) = alpha rho S^2 - beta rho w^2 + div((mu + sigma_w mu_t) grad w)
                   + 2 (1 - F1) rho sigma_w2 grad k . grad w / w

    P_k = min(mu_t S^2, 10 beta* rho k w),  mu_t = rho a_1 k / max(a_1 w, S F2),
    S = sqrt(2 S_ij S_ij),  phi = F1 phi_1 + (1 - F1) phi_2 for sigma_k, sigma_w, alpha, beta,

with F1, F2 from the exact wall distance (``_sst_kernels.f1_f2``; constants there, with their
sources). The 2/3 rho k delta_ij part of the Reynolds stress is left in the pressure.

Boundary values: k = 0 and w = 10 * 6 nu / (beta_1 d_1^2) on walls (Menter 1994, d_1 the wall
distance of the wall cell's centre); on velocity inlets and where the mass flux enters through a
outer-flow face k = 3/2 (Tu |u|)^2 and w = k / (r nu) from the case's turbulence intensity Tu and
eddy-viscosity ratio r, or from the ``k`` and ``omega`` columns of an inlet profile; zero normal
gradient elsewhere. The start values take Tu and r of
``[initial]`` with the largest speed of the case.

Discretisation: :class:`fvrans.models.transport.TransportEquation` (upwind or linear-upwind
convection, over-relaxed non-orthogonal diffusion with face diffusivities interpolated linearly,
AMG-BiCGStab); production explicit, destruction implicit (k: beta* w on the diagonal; w: Newton,
2 beta w), the cross-diffusion term explicit where positive and implicit where negative. k and w
are kept above tiny floors (1e-12 of their inflow or start values).
"""

from __future__ import annotations

import numpy as np

from fvrans.fields import Fields
from fvrans.fv.boundary import DIRICHLET, NEUMANN, BoundaryScalar, boundary_face_values
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.models import _sst_kernels as K
from fvrans.models import nonlinear
from fvrans.models.base import EDDY_VISCOSITY_RATIO, TurbulenceModel, case_wall_distance, checked_wall_distance
from fvrans.models.transport import TransportEquation
from fvrans.physics.boundary import FREESTREAM, INLET, WALL, FlowBoundary

#: the model constants (see ``_sst_kernels``; Menter 1994, MKL 2003)
CONSTANTS = {
    "sigma_k1": K.SIGMA_K1, "sigma_w1": K.SIGMA_W1, "beta_1": K.BETA_1, "alpha_1": K.ALPHA_1,
    "sigma_k2": K.SIGMA_K2, "sigma_w2": K.SIGMA_W2, "beta_2": K.BETA_2, "alpha_2": K.ALPHA_2,
    "beta_star": K.BETA_STAR, "a_1": K.A_1, "kappa": K.KAPPA, "production_limit": K.PRODUCTION_LIMIT,
}
#: relative floor of k and omega (against their largest inflow or start value)
FLOOR = 1e-12


def turbulence_from_intensity(speed, intensity, ratio, nu: float) -> tuple[np.ndarray, np.ndarray]:
    """(k, omega) = (3/2 (Tu |u|)^2, k / (r nu)) from speed |u|, turbulence intensity Tu and
    eddy-viscosity ratio r = nu_t / nu."""
    k = 1.5 * (np.asarray(intensity, dtype=float) * np.asarray(speed, dtype=float)) ** 2
    return k, k / (np.asarray(ratio, dtype=float) * nu)


def wall_omega(mesh: Mesh, geom: Geometry, nu: float) -> np.ndarray:
    """10 * 6 nu / (beta_1 d_1^2) per boundary face, d_1 the normal distance of the owner centre."""
    ni = mesh.n_internal_faces
    d1 = np.abs(np.einsum("ij,ij->i", geom.face_delta[ni:], geom.face_normal[ni:]))
    return K.WALL_OMEGA_FACTOR * 6.0 * nu / (K.BETA_1 * d1 * d1)


class KOmegaSST(TurbulenceModel):
    """The k-omega SST model behind :class:`fvrans.models.base.TurbulenceModel`.

    ``mu`` is the molecular dynamic viscosity; ``speed`` the velocity scale of the start values
    k = 3/2 (``initial_intensity`` speed)^2, w = k / (``initial_ratio`` nu).
    """

    key = "k-omega-sst"
    names = ("k", "omega")
    variables = ("k", "omega")

    def __init__(
        self,
        mesh: Mesh,
        geom: Geometry,
        boundary: FlowBoundary,
        rho: float,
        mu: float,
        speed: float = 1.0,
        initial_intensity: float = 0.001,
        initial_ratio: float = 0.1,
        wall_distance: np.ndarray | None = None,
        relax: float = 1.0,
        convection: str = "upwind",
        gradient: str = "least-squares",
        limiter: str = "none",
        linear_solver: str = "amg",
        linear_tolerance: float = 0.01,
        linear_max_iterations: int = 20,
        amg_rebuild_every: int = 20,
        nonlinear_stress: str = "none",
    ):
        nonlinear.extra_stress(nonlinear_stress, np.zeros(0), np.zeros((0, 2, 2)))  # checks the name
        self.nonlinear_stress = nonlinear_stress
        self.mesh = mesh
        self.geom = geom
        self.rho = float(rho)
        self.nu = float(mu) / float(rho)
        nc, nb = mesh.n_cells, mesh.n_boundary_faces
        if wall_distance is None:
            wall_distance = case_wall_distance(mesh, geom, boundary, "k-omega SST")
        self.wall_distance = checked_wall_distance(wall_distance, nc)
        self.k0, self.w0 = (float(v) for v in turbulence_from_intensity(speed, initial_intensity, initial_ratio,
                                                                        self.nu))
        kind = boundary.kind
        tu = boundary.turbulence_intensity if boundary.turbulence_intensity is not None else np.full(nb, 0.001)
        ratio = boundary.eddy_viscosity_ratio if boundary.eddy_viscosity_ratio is not None else np.full(nb, 0.1)
        speed_b = np.hypot(boundary.velocity[:, 0], boundary.velocity[:, 1])
        speed_b = np.maximum(speed_b, 1e-6 * max(float(speed_b.max(initial=0.0)), float(speed)))
        k_in, w_in = turbulence_from_intensity(speed_b, tu, ratio, self.nu)
        if boundary.inflow_k is not None:  # an inlet profile with k and omega columns
            given = np.isfinite(boundary.inflow_k)
            k_in[given] = boundary.inflow_k[given]
            w_in[given] = boundary.inflow_omega[given]
        inflow = (kind == INLET) | (kind == FREESTREAM)
        self.k_inflow = np.where(inflow, k_in, 0.0)
        self.w_inflow = np.where(inflow, w_in, 0.0)
        wall = kind == WALL
        kk = np.full(nb, NEUMANN, dtype=np.int8)
        kk[wall | (kind == INLET)] = DIRICHLET
        k_val = np.where(kind == INLET, self.k_inflow, 0.0)
        w_val = np.where(kind == INLET, self.w_inflow, 0.0)
        w_val[wall] = wall_omega(mesh, geom, self.nu)[wall]
        fs = np.flatnonzero(kind == FREESTREAM)
        opts = dict(relax=relax, convection=convection, gradient=gradient, limiter=limiter,
                    linear_solver=linear_solver, linear_tolerance=linear_tolerance,
                    linear_max_iterations=linear_max_iterations, amg_rebuild_every=amg_rebuild_every,
                    scale_rows=True)
        self.eq_k = TransportEquation(mesh, geom, "k", BoundaryScalar(kk, k_val), fs, self.k_inflow, **opts)
        self.eq_w = TransportEquation(mesh, geom, "omega", BoundaryScalar(kk.copy(), w_val), fs, self.w_inflow,
                                      **opts)
        self.wall_face = wall
        #: free-stream (inflow or start) sizes: the row scaling's smallest value size, and the floors
        self.k_reference = max(float(self.k_inflow.max(initial=0.0)), self.k0)
        self.w_reference = max(float(self.w_inflow.max(initial=0.0)), self.w0)
        self.k_floor = FLOOR * self.k_reference
        self.w_floor = FLOOR * self.w_reference
        # work arrays
        self.f1 = np.ones(nc)
        self.strain = np.zeros(nc)
        self.nut = np.zeros(nc)
        self.mu_t = np.zeros(nc)
        self.gamma_cell = np.zeros(nc)
        self.gamma_b = np.zeros(nb)
        self.gamma_f = np.zeros(mesh.n_faces)
        self.owner_b = mesh.face_owner[mesh.n_internal_faces :]

    @classmethod
    def from_case(cls, case, mesh: Mesh, geom: Geometry, boundary: FlowBoundary,
                  wall_distance: np.ndarray | None = None) -> KOmegaSST:
        """The model with the case's ``[initial]`` and ``[solver]`` turbulence settings."""
        s = case.solver
        speeds = [float(np.hypot(*case.initial.velocity)), float(np.abs(boundary.velocity).max(initial=0.0))]
        if case.mean_flow.bulk_velocity is not None:
            speeds.append(float(np.hypot(*case.mean_flow.bulk_velocity)))
        speed = max(speeds) or case.output.reference_velocity
        return cls(
            mesh, geom, boundary, rho=case.fluid.density, mu=case.fluid.viscosity, speed=speed,
            initial_intensity=case.initial.turbulence_intensity, initial_ratio=case.initial.eddy_viscosity_ratio,
            wall_distance=wall_distance, relax=s.relax_turbulence, convection=s.turbulence_convection,
            gradient=s.gradient, limiter=s.limiter, linear_solver=s.turbulence_solver,
            linear_tolerance=s.turbulence_tolerance, linear_max_iterations=s.turbulence_max_iterations,
            amg_rebuild_every=s.amg_rebuild_every, nonlinear_stress=case.model.nonlinear_stress,
        )

    # -- interface of the solver -----------------------------------------------------------
    def initial_values(self) -> dict[str, np.ndarray]:
        n = self.mesh.n_cells
        return {"k": np.full(n, self.k0), "omega": np.full(n, self.w0)}

    def _state(self, fields: Fields) -> tuple[np.ndarray, np.ndarray]:
        if any(np.shape(fields.variables.get(v)) != (self.mesh.n_cells,) for v in self.variables):
            self.initialise(fields)
        v = fields.variables
        return np.ascontiguousarray(v["k"], dtype=float), np.ascontiguousarray(v["omega"], dtype=float)

    def eddy_viscosity(self, fields: Fields) -> np.ndarray:
        """mu_t = rho a_1 k / max(a_1 w, S F2) with the strain rate of the last update."""
        k, w = self._state(fields)
        K.eddy_viscosity(k, w, self.wall_distance, self.nu, self.rho, self.strain, self.mu_t)
        return self.mu_t

    def wall_eddy_viscosity(self) -> float:
        return 0.0  # k = 0 on the wall

    def extra_stress(self, fields: Fields, grad_u: np.ndarray) -> np.ndarray | None:
        """The non-linear part of the Reynolds stress (QCR2000 when asked for), else None."""
        return nonlinear.extra_stress(self.nonlinear_stress, self.mu_t, grad_u)

    def _face_diffusivity(self, sigma_1: float, sigma_2: float) -> np.ndarray:
        """rho (nu + sigma nu_t) on the faces (nu_t = 0 on walls, the owner's value on other boundaries)."""
        K.diffusivities(self.nut, self.f1, self.nu, sigma_1, sigma_2, self.gamma_cell)
        self.gamma_b[:] = self.gamma_cell[self.owner_b]
        self.gamma_b[self.wall_face] = self.nu
        return self.eq_k.face_values(self.gamma_cell, self.gamma_b, self.gamma_f, self.rho)

    def update(self, fields: Fields, grad_u: np.ndarray, pseudo_time: np.ndarray | None = None) -> list[float]:
        """Assemble and solve the k and omega equations once (both with the current k, omega in
        their coupling terms); returns [k residual, omega residual]."""
        k, w = self._state(fields)
        F = np.ascontiguousarray(fields.face_flux, dtype=np.float64)
        gu = np.ascontiguousarray(grad_u, dtype=np.float64)
        gk, k_b = self.eq_k.gradient(k, F)
        gw, w_b = self.eq_w.gradient(w, F)
        K.cell_properties(k, w, self.wall_distance, self.nu, gk, gw, gu, self.f1, self.strain, self.nut)
        vol = self.geom.cell_area
        co = self.eq_k.assemble(k, F, self._face_diffusivity(K.SIGMA_K1, K.SIGMA_K2), gk, k_b)
        K.k_sources(k, w, self.nut, self.strain, self.rho, vol, co.diag, co.source)
        k_new, res_k = self.eq_k.solve(k, co, self.k_reference, pseudo_time)
        co = self.eq_w.assemble(w, F, self._face_diffusivity(K.SIGMA_W1, K.SIGMA_W2), gw, w_b)
        K.omega_sources(w, self.f1, self.strain, gk, gw, self.rho, vol, co.diag, co.source)
        w_new, res_w = self.eq_w.solve(w, co, self.w_reference, pseudo_time)
        fields.variables["k"] = np.maximum(k_new, self.k_floor)
        fields.variables["omega"] = np.maximum(w_new, self.w_floor)
        return [res_k, res_w]

    # -- outputs --------------------------------------------------------------------------
    def cell_outputs(self, fields: Fields) -> dict[str, np.ndarray]:
        """k, omega, nu_t / nu, the blending function F1 and the wall distance."""
        k, w = self._state(fields)
        return {
            "k": k, "omega": w, EDDY_VISCOSITY_RATIO: self.eddy_viscosity(fields) / (self.rho * self.nu),
            "sst_blending": self.f1.copy(), "wall_distance": self.wall_distance,
        }

    def probe_fields(self, fields: Fields) -> dict[str, tuple[np.ndarray, np.ndarray | None]]:
        """k and omega with their gradients, nu_t / nu with the gradient of its cell values (zero on walls)."""
        k, w = self._state(fields)
        ratio = self.eddy_viscosity(fields) / (self.rho * self.nu)
        bc = BoundaryScalar(np.where(self.wall_face, DIRICHLET, NEUMANN), np.zeros(len(self.wall_face)))
        rb = boundary_face_values(self.mesh, self.geom, bc, ratio, np.zeros((len(ratio), 2)))
        return {"k": (k, self.eq_k.cell_gradient(k)), "omega": (w, self.eq_w.cell_gradient(w)),
                EDDY_VISCOSITY_RATIO: (ratio, np.array(self.eq_k.grad(ratio, rb)))}


__all__ = ["CONSTANTS", "KOmegaSST", "turbulence_from_intensity", "wall_omega"]
