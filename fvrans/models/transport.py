"""One segregated transport equation of a turbulence model, assembled and solved once per outer
iteration (shared by the models).

    div(F phi) - div(Gamma grad phi) = source,  F the face mass fluxes of the flow

Discretisation: first-order upwind convection (``"linear-upwind"`` by deferred correction, with an
optional limiter) with the mass-imbalance term removed from the diagonal (zero at convergence);
diffusion with the face diffusivity the model gives and over-relaxed non-orthogonal correction;
the model adds its linearised cell sources to the coefficient set between :meth:`assemble` and
:meth:`solve`. Patankar's implicit under-relaxation (``relax``, 1 = none) and the loop's local
pseudo-time term (``pseudo_time``); the linear system by
BiCGStab with a reused AMG V-cycle (``fvrans.linalg.amg``) or symmetric Gauss-Seidel sweeps.

Boundary values: a :class:`fvrans.fv.boundary.BoundaryScalar`; faces of kind ``outer-flow`` take
the inflow value where the mass flux enters and a zero gradient where it leaves.

Residual: the normalised imbalance sum_c |b - A phi|_c / sum_c (|A| |phi| + |b|)_c of the unrelaxed
linearised system at the current phi (``fvrans.fv.residual``), as for every equation of the loop.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from fvrans.errors import CaseError, DivergenceError
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
from fvrans.models import _transport_kernels as K

LINEAR_SOLVERS = ("amg", "gauss-seidel")
CONVECTION = ("upwind", "linear-upwind")


def check_turbulence_settings(relax: float, convection: str, linear_solver: str) -> None:
    """CaseError naming the [solver] key of a turbulence setting out of range."""
    if convection not in CONVECTION:
        raise CaseError(f"solver.turbulence_convection = {convection!r} is not known; use one of {CONVECTION}")
    if not 0.0 < relax <= 1.0:
        raise CaseError(f"solver.relax_turbulence = {relax!r} must be in (0, 1]")
    if linear_solver not in LINEAR_SOLVERS:
        raise CaseError(f"solver.turbulence_solver = {linear_solver!r} is not known; use one of {LINEAR_SOLVERS}")


class TransportEquation:
    """Assembly and solution of one model variable ``name`` (see the module docstring).

    ``bc``: the boundary kinds and values (freestream faces, ``freestream``, get theirs from
    ``inflow_value`` each iteration). ``scale_rows``: divide each row by its diagonal times the size of its
    unknown before the linear solve, so that the solve's relative tolerance weighs every cell by its
    relative change where the values span many decades (omega: 1e7 times larger at a wall than in
    the free stream; without it the free stream is left unsolved). Use: ``g, phi_b = eq.gradient(phi, F)``; ``co =
    eq.assemble(phi, F, gamma_f, g, phi_b)``; add the sources to ``co``; ``new, res =
    eq.solve(phi, co)``.
    """

    def __init__(
        self,
        mesh: Mesh,
        geom: Geometry,
        name: str,
        bc: BoundaryScalar,
        freestream: np.ndarray | None = None,
        inflow_value: np.ndarray | None = None,
        relax: float = 1.0,
        convection: str = "upwind",
        gradient: str = "least-squares",
        limiter: str = "none",
        linear_solver: str = "amg",
        linear_tolerance: float = 0.01,
        linear_max_iterations: int = 20,
        amg_rebuild_every: int = 20,
        scale_rows: bool = False,
    ):
        check_turbulence_settings(relax, convection, linear_solver)
        self.mesh = mesh
        self.geom = geom
        self.name = name
        self.bc = bc
        self.freestream = np.zeros(0, dtype=np.int64) if freestream is None else np.asarray(freestream)
        self.inflow_value = np.zeros(mesh.n_boundary_faces) if inflow_value is None else inflow_value
        self.relax = float(relax)
        self.scale_rows = bool(scale_rows)
        self.scheme = "linear_upwind" if convection == "linear-upwind" else "upwind"
        self.limiter = None if limiter in ("none", None) else limiter.replace("-", "_")
        self.linear_solver = linear_solver
        self.linear_tolerance = float(linear_tolerance)
        self.linear_max_iterations = int(linear_max_iterations)
        self.ksolver = AmgKrylovSolver("bicgstab", rtol=self.linear_tolerance, rebuild_every=int(amg_rebuild_every),
                                       max_iterations=self.linear_max_iterations)
        self.grad = gradient_operator(mesh, geom, method=gradient.replace("-", "_"))
        # the coefficient set and the matrix's values exist from ``assemble`` to the end of ``solve``
        # (with the linear solver's vectors: ~0.2 KB per cell not held between outer iterations)
        self.coeffs: Coefficients | None = None
        self.grad_phi = np.zeros((mesh.n_cells, 2))
        self.phi_b = np.zeros(mesh.n_boundary_faces)
        self.ni = mesh.n_internal_faces
        self.own_i = mesh.face_owner[: self.ni]
        self.nei_i = mesh.face_neighbour[: self.ni]
        self.w_i = geom.face_weight[: self.ni]
        #: iterations (amg) or sweeps (gauss-seidel) of the last linear solve
        self.last_iterations = 0

    def gradient(self, phi: np.ndarray, flux: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(cell gradient, boundary face values) of ``phi`` with the freestream faces set by ``flux``."""
        fs = self.freestream
        if len(fs):
            inflow = flux[self.ni + fs] < 0.0
            self.bc.kind[fs] = np.where(inflow, DIRICHLET, NEUMANN)
            self.bc.value[fs] = np.where(inflow, self.inflow_value[fs], 0.0)
        phi_b = boundary_face_values(self.mesh, self.geom, self.bc, phi, self.grad_phi, out=self.phi_b)
        return self.grad(phi, phi_b, out=self.grad_phi), phi_b

    def face_values(self, cell: np.ndarray, boundary: np.ndarray, out: np.ndarray, scale: float = 1.0) -> np.ndarray:
        """scale times the linear interpolation of a cell quantity to the internal faces, and scale
        times ``boundary`` on the boundary faces (a face diffusivity)."""
        ni = self.ni
        out[:ni] = scale * (self.w_i * cell[self.own_i] + (1.0 - self.w_i) * cell[self.nei_i])
        out[ni:] = scale * boundary
        return out

    def assemble(self, phi: np.ndarray, flux: np.ndarray, gamma_f: np.ndarray, g: np.ndarray,
                 phi_b: np.ndarray) -> Coefficients:
        """Convection and diffusion with face diffusivity ``gamma_f`` into the cleared coefficient set."""
        co = self.coeffs = Coefficients.zeros(self.mesh)
        diffusion_coefficients(self.mesh, self.geom, gamma_f, self.bc, g, out=co)
        if self.scheme == "linear_upwind" and self.limiter is not None:
            gc, _ = limit_gradient(self.mesh, self.geom, phi, phi_b, g, self.limiter)
        else:
            gc = g
        convection_coefficients(self.mesh, self.geom, flux, phi_b, self.scheme, gc, out=co)
        K.continuity_correction(self.mesh.face_owner, self.mesh.face_neighbour, self.ni, flux, co.diag)
        return co

    def solve(self, phi: np.ndarray, co: Coefficients, reference: float = 0.0,
              pseudo_time: np.ndarray | None = None,
              linearisation: Callable[[Coefficients], None] | None = None) -> tuple[np.ndarray, float]:
        """Normalised imbalance of the unrelaxed system at ``phi``, then relax and solve: (new phi,
        imbalance). ``reference``: the smallest value size the row scaling assumes (``scale_rows``).
        ``pseudo_time``: rho V / dt per cell, added to the diagonal with the source rho V / dt phi
        (local pseudo-time steps; a relaxation that does not grow with the diagonal).
        ``linearisation(co)``: adds an implicit operator B to the set with B phi in the source
        (the implicit part of a term the model keeps explicit); like the pseudo-time term it
        changes the path of the iterations, not their fixed point, and stays out of the imbalance."""
        asm = CsrAssembler(self.mesh)  # the mesh's shared structure, values of its own
        A = asm.matrix(co.diag, co.off_owner, co.off_neighbour)
        res = normalised_imbalance(A, co.source, phi)
        under_relax(co, phi, self.relax)
        if pseudo_time is not None:
            co.diag += pseudo_time
            co.source += pseudo_time * phi
        if linearisation is not None:
            linearisation(co)
        bad = np.flatnonzero(~(co.diag > 0.0))
        if len(bad):  # only a flow field that is already running away can do this
            c = int(bad[0])
            x, y = self.geom.cell_centre[c]
            raise DivergenceError(
                f"the {self.name} equation lost its diagonal at cell {c} (x = {x:.4g}, y = {y:.4g}; "
                f"{len(bad)} cells): the velocity field is running away"
            )
        if self.scale_rows:
            # each row divided by its diagonal times the size of its unknown (at least ``reference``):
            # the solve's relative tolerance then weighs every cell by its relative change, however
            # many decades the values span (row scaling leaves the multigrid hierarchy unchanged)
            w = 1.0 / (co.diag * np.maximum(np.abs(phi), reference))
            co.off_owner *= w[self.own_i]
            co.off_neighbour *= w[self.nei_i]
            co.source *= w
            co.diag *= w
        A = asm.matrix(co.diag, co.off_owner, co.off_neighbour)
        x = phi.copy()
        if self.linear_solver == "amg":
            self.last_iterations = self.ksolver.solve(A, co.source, x)
            self.ksolver.release_scratch()
        else:
            self.last_iterations, _, _ = gauss_seidel(A.indptr, A.indices, A.data, asm.diag_pos, co.source, x,
                                                      self.linear_max_iterations, self.linear_tolerance)
        self.coeffs = None
        return x, res

    def cell_gradient(self, phi: np.ndarray) -> np.ndarray:
        """A fresh cell gradient of ``phi`` with the current boundary values (for outputs)."""
        p = np.ascontiguousarray(phi, dtype=float)
        pb = boundary_face_values(self.mesh, self.geom, self.bc, p, self.grad_phi)
        return np.array(self.grad(p, pb))


__all__ = ["CONVECTION", "LINEAR_SOLVERS", "TransportEquation", "check_turbulence_settings"]
