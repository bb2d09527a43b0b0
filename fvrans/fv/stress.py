"""Divergence of an explicit stress tensor field in conservative face form.

The momentum equation takes the part of the Reynolds stress that is not 2 mu_t S (a non-linear
constitutive relation, the remainder of an injected stress) as the explicit source
integral_V div T dV = sum_f T_f . S_f (``_operator_kernels.stress_divergence``): face values by
linear interpolation at the owner-neighbour intersection point, boundary faces by a mode per
face (zero stress on no-slip walls, where every Reynolds stress vanishes; the normal-normal part
on symmetry planes; the owner value elsewhere).
"""

from __future__ import annotations

import numpy as np

from fvrans.fv import _operator_kernels as _k
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

#: boundary modes of :class:`StressDivergence`
ZERO, OWNER, NORMAL = 0, 1, 2


class StressDivergence:
    """``div(T)`` integrated over each cell, (n_cells, 2), for T given per cell as
    (T_xx, T_xy, T_yy) (n_cells, 3); ``boundary_mode`` (n_boundary_faces,) holds ZERO, OWNER or
    NORMAL per boundary face.

    >>> from fvrans.mesh.generate import channel
    >>> from fvrans.mesh.geometry import compute_geometry
    >>> m = channel(2.0, 1.0, nx=4, ny=3); g = compute_geometry(m)
    >>> div = StressDivergence(m, g, np.full(m.n_boundary_faces, OWNER))
    >>> T = np.zeros((m.n_cells, 3)); T[:, 1] = g.cell_centre[:, 1]   # T_xy = y: div T = (1, 0)
    >>> inner = np.abs(g.cell_centre[:, 1] - 0.5) < 0.2    # the row of cells touching no wall
    >>> np.allclose(div(T)[inner] / g.cell_area[inner, None], [1.0, 0.0])
    True
    """

    def __init__(self, mesh: Mesh, geom: Geometry, boundary_mode: np.ndarray):
        self.owner = mesh.face_owner
        self.neighbour = mesh.face_neighbour
        self.nfi = mesh.n_internal_faces
        self.sf = geom.face_area_vector
        self.weight = geom.face_weight
        self.normal = geom.face_normal
        mode = np.ascontiguousarray(boundary_mode, dtype=np.int64)
        if mode.shape != (mesh.n_boundary_faces,) or np.any((mode < ZERO) | (mode > NORMAL)):
            raise ValueError(f"StressDivergence: boundary_mode must hold {mesh.n_boundary_faces} values in "
                             f"{{{ZERO}, {OWNER}, {NORMAL}}}")
        self.mode = mode
        self.n_cells = mesh.n_cells

    def __call__(self, stress: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        t = np.ascontiguousarray(stress, dtype=np.float64)
        if t.shape != (self.n_cells, 3):
            raise ValueError(f"StressDivergence: the stress must be ({self.n_cells}, 3) = (T_xx, T_xy, T_yy) per "
                             f"cell, got {t.shape}")
        if out is None:
            out = np.empty((self.n_cells, 2))
        _k.stress_divergence(self.owner, self.neighbour, self.nfi, self.sf, self.weight, self.normal, self.mode,
                             t, out)
        return out


__all__ = ["NORMAL", "OWNER", "ZERO", "StressDivergence"]
