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
5. the turbulence model, if any, updates the eddy viscosity.

The converged solution does not depend on the relaxation factors: every deferred term is
evaluated at the converged state, and the relaxation term enters the face flux only through
(1 - alpha) F_old, see ``_kernels.rhie_chow_fluxes``.
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fvrans.errors import DivergenceError
from fvrans.fv._assembly_kernels import csr_refill
from fvrans.fv.assembly import CsrAssembler
from fvrans.fv.gradient import gradient_operator
from fvrans.linalg.pressure import PressureSolver
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.physics.boundary import FREESTREAM, INLET, OUTLET, SYMMETRY, WALL, FlowBoundary
from fvrans.solve import _kernels as K
from fvrans.solve.fields import Fields

log = logging.getLogger(__name__)


@dataclass
class SolverControls:
    """Numerical settings of the loop (the case file's [solver] table)."""

    coupling: str = "simplec"
    max_iterations: int = 5000
    tolerance: float = 1e-6
    relax_velocity: float = 0.7
    relax_pressure: float | None = None
    convection: str = "linear-upwind"
    gradient: str = "least-squares"
    pressure_tolerance: float = 0.01
    momentum_tolerance: float = 0.1
    momentum_sweeps: int = 5
    amg_rebuild_every: int = 20
    divergence_factor: float = 1e5

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


@dataclass
class History:
    """Scaled residuals per outer iteration (columns named in ``names``)."""

    names: list[str] = field(default_factory=lambda: ["u", "v", "continuity"])
    rows: list[list[float]] = field(default_factory=list)
    seconds: list[float] = field(default_factory=list)

    def as_array(self) -> np.ndarray:
        return np.asarray(self.rows, dtype=float).reshape(-1, len(self.names))


class EddyViscosityModel:
    """Interface of a turbulence model seen by the loop (laminar flow: this class as is)."""

    names: tuple[str, ...] = ()

    def eddy_viscosity(self, fields: Fields) -> np.ndarray | None:
        """mu_t per cell, or None for laminar flow."""
        return None

    def wall_eddy_viscosity(self) -> float:
        return 0.0

    def update(self, fields: Fields, grad_u: np.ndarray) -> list[float]:
        """Advance the model equations one outer iteration; return their scaled residuals."""
        return []


class SimpleSolver:
    """Steady incompressible solver (SIMPLE/SIMPLEC, Rhie-Chow) on a fixed mesh.

    ``mu`` is the dynamic viscosity, ``rho`` the density. ``model`` supplies the eddy viscosity.
    """

    def __init__(
        self,
        mesh: Mesh,
        geom: Geometry,
        boundary: FlowBoundary,
        rho: float,
        mu: float,
        controls: SolverControls | None = None,
        fields: Fields | None = None,
        model: EddyViscosityModel | None = None,
        body_force: Callable[[np.ndarray], np.ndarray] | np.ndarray | None = None,
    ):
        self.mesh = mesh
        self.geom = geom
        self.bc = boundary
        self.rho = float(rho)
        self.mu = float(mu)
        self.ctl = controls or SolverControls()
        self.model = model or EddyViscosityModel()
        nc, nf, ni = mesh.n_cells, mesh.n_faces, mesh.n_internal_faces
        self.nc, self.nf, self.ni = nc, nf, ni
        # geometry for the kernels
        S = geom.face_area_vector
        d = geom.face_delta
        self.S = S
        self.dcoef = np.ascontiguousarray(np.einsum("ij,ij->i", S, S) / np.einsum("ij,ij->i", S, d))
        self.kvec = np.ascontiguousarray(S - self.dcoef[:, None] * d)
        self.owner = mesh.face_owner
        self.neigh = np.ascontiguousarray(mesh.face_neighbour[:ni])
        self.vol = geom.cell_area
        self.asm_u = CsrAssembler(mesh)
        self.asm_v = CsrAssembler(mesh)
        self.grad = gradient_operator(mesh, geom, method=self.ctl.gradient.replace("-", "_"))
        # the pressure force in conservative face-sum form (second order on irregular meshes)
        self.grad_pressure = gradient_operator(mesh, geom, method="gauss_least_squares")
        self.psolver = PressureSolver(
            CsrAssembler(mesh), rtol=self.ctl.pressure_tolerance, rebuild_every=self.ctl.amg_rebuild_every,
            singular=not boundary.has_fixed_pressure,
        )
        # work arrays
        self.diag_u = np.zeros(nc)
        self.diag_v = np.zeros(nc)
        self.off_own = np.zeros(ni)
        self.off_nei = np.zeros(ni)
        self.bu = np.zeros(nc)
        self.bv = np.zeros(nc)
        self.p_diag = np.zeros(nc)
        self.p_off = np.zeros(ni)
        self.p_rhs = np.zeros(nc)
        if body_force is None:
            self.body = np.zeros((nc, 2))
        elif callable(body_force):
            self.body = np.asarray(body_force(geom.cell_centre), dtype=float).reshape(nc, 2)
        else:
            self.body = np.broadcast_to(np.asarray(body_force, dtype=float), (nc, 2)).copy()
        self.history = History(names=["u", "v", "continuity", *self.model.names])
        self.iteration = 0
        self.fields = fields.copy() if fields is not None else Fields.uniform(nc, nf)
        if fields is None or not np.any(fields.face_flux):
            self.fields.face_flux = self._interpolated_fluxes(self.fields.velocity)
        self.grad_p = self.grad_pressure(self.fields.pressure, self._pressure_on_boundary(np.zeros((nc, 2))))
        self.u_scale = self._velocity_scale()
        # sum over cells of half their perimeter: the continuity residual's scale
        self.perimeter_sum = float(np.sum(geom.face_length[:ni]) + 0.5 * np.sum(geom.face_length[ni:]))

    # -- boundary values -----------------------------------------------------------------
    def _velocity_scale(self) -> float:
        s = float(np.abs(self.bc.velocity).max(initial=0.0))
        s = max(s, float(np.abs(self.fields.velocity).max(initial=0.0)))
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
        kind = self.bc.kind
        uP = u[self.owner[self.ni :]]
        n = self.geom.face_normal[self.ni :]
        ub = uP.copy()
        fixed = (kind == WALL) | (kind == INLET) | ((kind == FREESTREAM) & (Fb < 0))
        ub[fixed] = self.bc.velocity[fixed]
        sym = kind == SYMMETRY
        un = np.einsum("ij,ij->i", uP, n)
        ub[sym] = uP[sym] - un[sym, None] * n[sym]
        rev = (kind == OUTLET) & (Fb < 0)
        ub[rev] = un[rev, None] * n[rev]
        return ub

    def _pressure_on_boundary(self, gp: np.ndarray) -> np.ndarray:
        """Fixed p on outlets and freestream; elsewhere linear extrapolation from the owner,
        p_b = p_P + grad p_P . (x_f - x_P), with the latest gradient (at convergence the boundary
        faces add nothing to the least-squares fit: a one-sided, second-order gradient)."""
        ni = self.ni
        P = self.owner[ni:]
        d = self.geom.face_delta[ni:]
        pb = self.fields.pressure[P] + np.einsum("ij,ij->i", gp[P], d)
        fixed = (self.bc.kind == OUTLET) | (self.bc.kind == FREESTREAM)
        pb[fixed] = self.bc.pressure[fixed]
        return pb

    def _face_viscosity(self, mu_cell: np.ndarray) -> np.ndarray:
        ni = self.ni
        w = self.geom.face_weight
        muf = np.empty(self.nf)
        muf[:ni] = w[:ni] * mu_cell[self.owner[:ni]] + (1 - w[:ni]) * mu_cell[self.neigh]
        muf[ni:] = mu_cell[self.owner[ni:]]
        wall = self.bc.kind == WALL
        muf[ni:][wall] = self.mu + self.model.wall_eddy_viscosity()
        return muf

    # -- one outer iteration ---------------------------------------------------------------
    def iterate(self) -> list[float]:
        """One SIMPLE(C) outer iteration; returns the scaled residuals [u, v, continuity, ...]."""
        fl = self.fields
        ctl = self.ctl
        rho = self.rho
        ni = self.ni
        alpha = float(ctl.relax_velocity)
        u_old = fl.velocity.copy()
        F_old = fl.face_flux.copy()
        mu_t = self.model.eddy_viscosity(fl)
        mu_cell = np.full(self.nc, self.mu) if mu_t is None else self.mu + mu_t
        muf = self._face_viscosity(mu_cell)
        ub = self._velocity_on_boundary(u_old, F_old[ni:])
        gu = self.grad(u_old, ub)
        K.assemble_momentum(
            self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, self.geom.face_weight,
            self.geom.face_centre, self.geom.cell_centre, F_old, muf, u_old, gu, self.bc.kind,
            self.bc.velocity, ctl.convection == "linear-upwind",
            self.diag_u, self.diag_v, self.off_own, self.off_nei, self.bu, self.bv,
        )
        # body force and pressure gradient (cell gradient, Rhie-Chow handles the coupling)
        V = self.vol
        self.bu += V * self.body[:, 0]
        self.bv += V * self.body[:, 1]
        gp = self.grad_p
        bu_np = self.bu.copy()  # sources without the pressure gradient, for H/A
        bv_np = self.bv.copy()
        self.bu -= V * gp[:, 0]
        self.bv -= V * gp[:, 1]
        mu_ = self.asm_u.matrix(self.diag_u, self.off_own, self.off_nei)
        mv_ = self.asm_v.matrix(self.diag_v, self.off_own, self.off_nei)
        norm_u = self.u_scale * float(np.sum(self.diag_u)) + 1e-300
        norm_v = self.u_scale * float(np.sum(self.diag_v)) + 1e-300
        res_u = K.csr_residual_l1(mu_.indptr, mu_.indices, mu_.data, u_old[:, 0].copy(), self.bu) / norm_u
        res_v = K.csr_residual_l1(mv_.indptr, mv_.indices, mv_.data, u_old[:, 1].copy(), self.bv) / norm_v
        # implicit under-relaxation (Patankar 1980, sec. 4.2-5)
        Au = self.diag_u / alpha
        Av = self.diag_v / alpha
        relax_u = (1.0 - alpha) * Au * u_old[:, 0]
        relax_v = (1.0 - alpha) * Av * u_old[:, 1]
        csr_refill(self.asm_u.diag_pos, self.asm_u.owner_pos, self.asm_u.neigh_pos, Au, self.off_own,
                   self.off_nei, mu_.data)
        csr_refill(self.asm_v.diag_pos, self.asm_v.owner_pos, self.asm_v.neigh_pos, Av, self.off_own,
                   self.off_nei, mv_.data)
        us = u_old[:, 0].copy()
        vs = u_old[:, 1].copy()
        K.gauss_seidel(mu_.indptr, mu_.indices, mu_.data, self.asm_u.diag_pos, self.bu + relax_u, us,
                       ctl.momentum_sweeps, ctl.momentum_tolerance)
        K.gauss_seidel(mv_.indptr, mv_.indices, mv_.data, self.asm_v.diag_pos, self.bv + relax_v, vs,
                       ctl.momentum_sweeps, ctl.momentum_tolerance)
        ustar = np.stack([us, vs], axis=1)
        # H/A without the relaxation term: ((b - N u*) / A) , A the relaxed diagonal
        nu_star = np.empty((self.nc, 2))
        K.offdiag_product(self.owner, self.neigh, self.off_own, self.off_nei, ustar, nu_star)
        hbya = np.empty((self.nc, 2))
        hbya[:, 0] = (bu_np - nu_star[:, 0]) / Au
        hbya[:, 1] = (bv_np - nu_star[:, 1]) / Av
        A = 0.5 * (Au + Av)
        rau = V / A
        pb = self._pressure_on_boundary(gp)
        F = np.empty(self.nf)
        K.rhie_chow_fluxes(
            self.owner, self.neigh, ni, self.S, self.dcoef, self.kvec, self.geom.face_weight,
            self.geom.face_skew, gu, rho, hbya, rau, fl.pressure, gp, pb, self.bc.kind, self.bc.velocity,
            alpha, F_old, F,
        )
        # pressure correction
        if ctl.coupling == "simplec":
            sum_nb = np.zeros(self.nc)
            np.add.at(sum_nb, self.owner[:ni], np.abs(self.off_own))
            np.add.at(sum_nb, self.neigh, np.abs(self.off_nei))
            denom = np.maximum(A - sum_nb, 0.05 * A)
            dp = V / denom
        else:
            dp = rau
        imbalance = K.assemble_pressure_correction(
            self.owner, self.neigh, ni, self.dcoef, rho, dp, self.bc.kind, F, self.p_diag, self.p_off, self.p_rhs
        )
        res_c = imbalance / (rho * self.u_scale * self.perimeter_sum + 1e-300)
        pc = self.psolver.solve(self.p_diag, self.p_off, self.p_rhs)
        K.correct_fluxes(self.owner, self.neigh, ni, self.dcoef, rho, dp, self.bc.kind, pc, F)
        alpha_p = ctl.alpha_p
        p = fl.pressure + alpha_p * pc
        if not self.bc.has_fixed_pressure:
            p -= np.mean(p)
        pcb = np.where((self.bc.kind == OUTLET) | (self.bc.kind == FREESTREAM), 0.0, pc[self.owner[ni:]])
        gpc = self.grad(pc, pcb)
        u_new = ustar - dp[:, None] * gpc
        fl.velocity = u_new
        fl.pressure = p
        fl.face_flux = F
        self.grad_p = self.grad_pressure(p, self._pressure_on_boundary(gp))
        res = [res_u, res_v, res_c]
        if self.model.names:
            ub2 = self._velocity_on_boundary(u_new, F[ni:])
            res += self.model.update(fl, self.grad(u_new, ub2))
        self.iteration += 1
        return res

    # -- the loop ---------------------------------------------------------------------------
    def run(
        self,
        max_iterations: int | None = None,
        tolerance: float | None = None,
        callback: Callable[[int, list[float]], bool | None] | None = None,
    ) -> bool:
        """Iterate until every scaled residual is below ``tolerance`` (True) or the limit (False).

        NaN/Inf or growth of a residual by ``divergence_factor`` above its minimum raises
        DivergenceError carrying the last good fields. ``callback(iteration, residuals)`` may
        return True to stop early.
        """
        n_max = self.ctl.max_iterations if max_iterations is None else max_iterations
        tol = self.ctl.tolerance if tolerance is None else tolerance
        best = None
        last_good = self.fields.copy()
        for _ in range(n_max):
            t0 = time.perf_counter()
            res = self.iterate()
            dt = time.perf_counter() - t0
            self.history.rows.append(res)
            self.history.seconds.append(dt)
            arr = np.asarray(res)
            finite = bool(np.all(np.isfinite(arr))) and self.fields.is_finite()
            worst = float(np.max(arr)) if finite else np.inf
            best = worst if best is None else min(best, worst)
            if not finite or (self.iteration > 10 and worst > self.ctl.divergence_factor * max(best, 1e-300)):
                bad = "non-finite values" if not finite else "runaway residual growth"
                self.fields = last_good
                raise DivergenceError(
                    f"the run diverged at iteration {self.iteration} ({bad}; residuals "
                    f"{', '.join(f'{n}={r:.3g}' for n, r in zip(self.history.names, res))}); "
                    "the last good state is kept — lower relax_velocity / relax_pressure, use "
                    "convection = 'upwind' to start, or check the boundary conditions and mesh",
                    fields=last_good,
                    iteration=self.iteration - 1,
                )
            last_good = self.fields.copy()
            if callback is not None and callback(self.iteration, res):
                return bool(np.all(arr < tol))
            if np.all(arr < tol):
                return True
        return False
