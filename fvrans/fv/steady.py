"""Steady linear scalar transport solved to the fixed point of its deferred corrections.

div(F phi) - div(Gamma grad phi) = q has explicit parts that depend on phi through the cell
gradient: the non-orthogonal diffusion correction, the linear-upwind correction and the Neumann
boundary values. :func:`solve_steady_scalar` repeats

    phi_b = boundary values(phi, g);  g = grad(phi, phi_b);  A phi_new = b(g)  (direct solve)

until max|phi_new - phi| <= tol * max|phi_new|, i.e. it solves the discrete fixed point, not one
sweep of it. Meant for verification and small problems.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.sparse.linalg as spla

from fvrans.fv.assembly import Coefficients, CsrAssembler
from fvrans.fv.boundary import BoundaryScalar, boundary_face_values
from fvrans.fv.convection import convection_coefficients
from fvrans.fv.diffusion import diffusion_coefficients
from fvrans.fv.gradient import LeastSquaresGradient, limit_gradient
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh


@dataclass
class SteadyScalarResult:
    phi: np.ndarray
    grad: np.ndarray
    iterations: int
    change: float  # last max|phi_new - phi| / max|phi_new|
    converged: bool


def solve_steady_scalar(
    mesh: Mesh,
    geom: Geometry,
    bc: BoundaryScalar,
    *,
    gamma_f: float | np.ndarray = 0.0,
    flux: np.ndarray | None = None,
    source: np.ndarray | None = None,
    scheme: str = "upwind",
    limiter: str | None = None,
    gradient: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None,
    nonorth_correction: bool = True,
    tol: float = 1e-11,
    max_iter: int = 200,
    phi0: np.ndarray | None = None,
    assembler: CsrAssembler | None = None,
) -> SteadyScalarResult:
    """Solve div(F phi) - div(Gamma grad phi) = q to the fixed point of the deferred corrections.

    ``source`` is q per unit volume at the cell centres (n_cells,), multiplied by the cell area
    (midpoint rule). ``gamma_f`` constant or (n_faces,), ``flux`` (n_faces,) or None (no
    convection), ``scheme`` 'upwind' or 'linear_upwind', ``limiter`` None or a name accepted by
    :func:`fvrans.fv.gradient.limit_gradient`, ``gradient`` the gradient operator (least squares
    by default). The matrix (implicit diffusion and upwind parts) does not depend on phi, so it
is factorised once; each iteration is one pair of triangular solves.
    """
    nc = mesh.n_cells
    grad_op = gradient or LeastSquaresGradient(mesh, geom)
    assembler = assembler or CsrAssembler(mesh)
    q = np.zeros(nc) if source is None else np.asarray(source, dtype=np.float64) * geom.cell_area
    phi = np.zeros(nc) if phi0 is None else np.array(phi0, dtype=np.float64)
    g = np.zeros((nc, 2))
    coeffs = Coefficients.zeros(mesh)
    diffusive = np.ndim(gamma_f) != 0 or float(gamma_f) != 0.0
    change = np.inf
    it = 0
    lu = None
    for it in range(1, max_iter + 1):
        phi_b = boundary_face_values(mesh, geom, bc, phi, g if it > 1 else None)
        g = grad_op(phi, phi_b)
        coeffs.clear()
        coeffs.source += q
        if diffusive:
            diffusion_coefficients(mesh, geom, gamma_f, bc, g if nonorth_correction else None, out=coeffs)
        if flux is not None:
            gc = g
            if scheme == "linear_upwind" and limiter is not None:
                gc, _ = limit_gradient(mesh, geom, phi, phi_b, g, limiter)
            convection_coefficients(mesh, geom, flux, phi_b, scheme, gc, out=coeffs)
        if lu is None:  # the matrix does not depend on phi: factorise once
            A, _ = assembler.assemble(coeffs)
            lu = spla.splu(A.tocsc())
        new = lu.solve(coeffs.source)
        change = float(np.max(np.abs(new - phi)) / max(np.max(np.abs(new)), 1e-300))
        phi = new
        if change <= tol:
            break
    phi_b = boundary_face_values(mesh, geom, bc, phi, g)
    g = grad_op(phi, phi_b)
    return SteadyScalarResult(phi=phi, grad=g, iterations=it, change=change, converged=change <= tol)
