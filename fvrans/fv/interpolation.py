"""Cell-to-face interpolation."""

from __future__ import annotations

import numpy as np

from fvrans.fv import _gradient_kernels as _k
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh


def interpolate_to_faces(
    mesh: Mesh,
    geom: Geometry,
    phi: np.ndarray,
    phi_b: np.ndarray,
    grad: np.ndarray | None = None,
    out: np.ndarray | None = None,
) -> np.ndarray:
    """Face values (n_faces,): phi_f = w phi_O + (1 - w) phi_N on internal faces (w =
    ``geom.face_weight``, linear interpolation at the point where the owner-neighbour line cuts
    the face), plus the skewness correction (x_f - x_ip) . (w g_O + (1 - w) g_N) if the cell
    gradient ``grad`` is given; ``phi_b`` on boundary faces. With the exact gradient, exact for
    linear fields at the face centre.
    """
    phi = np.ascontiguousarray(phi, dtype=np.float64)
    phi_b = np.ascontiguousarray(phi_b, dtype=np.float64)
    if phi.shape != (mesh.n_cells,) or phi_b.shape != (mesh.n_boundary_faces,):
        raise ValueError(
            f"interpolate_to_faces: phi must be ({mesh.n_cells},) and phi_b ({mesh.n_boundary_faces},), "
            f"got {phi.shape} and {phi_b.shape}"
        )
    if out is None:
        out = np.empty(mesh.n_faces)
    use = grad is not None
    g = np.ascontiguousarray(grad, dtype=np.float64) if use else np.zeros((1, 2))
    _k.face_interpolate(
        mesh.face_owner, mesh.face_neighbour, mesh.n_internal_faces, geom.face_weight, geom.face_skew,
        phi, phi_b, g, use, out,
    )
    return out
