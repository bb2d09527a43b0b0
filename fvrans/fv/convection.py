"""Convection operator div(F phi) for given face mass fluxes."""

from __future__ import annotations

import numpy as np

from fvrans.fv import _operator_kernels as _k
from fvrans.fv.assembly import Coefficients
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

SCHEMES = ("upwind", "linear_upwind")


def convection_coefficients(
    mesh: Mesh,
    geom: Geometry,
    flux: np.ndarray,
    phi_b: np.ndarray,
    scheme: str = "upwind",
    grad: np.ndarray | None = None,
    out: Coefficients | None = None,
) -> Coefficients:
    """Add div(F phi) integrated over each cell, sum_f F_f phi_f, to ``out`` (a new set if None).

    ``flux`` (n_faces,): F_f > 0 leaves the owner. 'upwind': phi_f = phi_U, implicit.
    'linear_upwind': phi_f = phi_U + g_U . (x_f - x_U) (Barth & Jespersen 1989; second order),
    applied by deferred correction: implicit upwind plus the explicit difference in the source,
    with the (possibly limited, see :func:`fvrans.fv.gradient.limit_gradient`) cell gradient
    ``grad``. Boundary faces: inflow (F < 0) takes ``phi_b``; outflow the owner value,
    reconstructed to the face centre for 'linear_upwind'. No continuity term is subtracted.
    """
    if scheme not in SCHEMES:
        raise ValueError(f"convection_coefficients: unknown scheme {scheme!r}; use one of {SCHEMES}")
    high = scheme == "linear_upwind"
    if high and grad is None:
        raise ValueError("convection_coefficients: 'linear_upwind' needs the cell gradient grad")
    flux = np.ascontiguousarray(flux, dtype=np.float64)
    phi_b = np.ascontiguousarray(phi_b, dtype=np.float64)
    if flux.shape != (mesh.n_faces,) or phi_b.shape != (mesh.n_boundary_faces,):
        raise ValueError(
            f"convection_coefficients: flux must be ({mesh.n_faces},) and phi_b ({mesh.n_boundary_faces},), "
            f"got {flux.shape} and {phi_b.shape}"
        )
    if out is None:
        out = Coefficients.zeros(mesh)
    g = np.ascontiguousarray(grad, dtype=np.float64) if high else np.zeros((1, 2))
    _k.convection(
        mesh.face_owner, mesh.face_neighbour, mesh.n_internal_faces, flux, phi_b, geom.face_centre,
        geom.cell_centre, geom.face_shift, g, high, out.diag, out.off_owner, out.off_neighbour, out.source,
    )
    return out
