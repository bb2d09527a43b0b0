"""Cell gradients (weighted least squares, Green-Gauss) and slope limiters.

Both gradient operators are built once per mesh and called as ``grad(phi, phi_b)`` with the
cell values (n_cells,) and the boundary face values (n_boundary_faces,) (see
:func:`fvrans.fv.boundary.boundary_face_values`); they return (n_cells, 2). A field of several
components (n_cells, m) gives (n_cells, m, 2).
"""

from __future__ import annotations

import weakref

import numpy as np

from fvrans.errors import MeshError
from fvrans.fv import _gradient_kernels as _k
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh


def _check_phi(phi: np.ndarray, phi_b: np.ndarray, nc: int, nb: int) -> tuple[np.ndarray, np.ndarray]:
    phi = np.ascontiguousarray(phi, dtype=np.float64)
    phi_b = np.ascontiguousarray(phi_b, dtype=np.float64)
    if phi.shape[0] != nc or phi_b.shape[0] != nb or phi.shape[1:] != phi_b.shape[1:]:
        raise ValueError(
            f"gradient: phi must have {nc} cell values and phi_b {nb} boundary face values "
            f"(same trailing shape), got {phi.shape} and {phi_b.shape}"
        )
    return phi, phi_b


class _CellGradient:
    """Common calling convention: scalar or multi-component fields."""

    def __init__(self, mesh: Mesh, geom: Geometry):
        self.n_cells = mesh.n_cells
        self.n_boundary_faces = mesh.n_boundary_faces
        self._owner = mesh.face_owner
        self._neighbour = mesh.face_neighbour
        self._nfi = mesh.n_internal_faces
        self._cf_ptr, self._cf_face = mesh.cell_faces

    def _scalar(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray) -> None:
        raise NotImplementedError

    def __call__(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        phi, phi_b = _check_phi(phi, phi_b, self.n_cells, self.n_boundary_faces)
        if phi.ndim == 1:
            if out is None:
                out = np.empty((self.n_cells, 2))
            self._scalar(phi, phi_b, out)
            return out
        m = phi.reshape(self.n_cells, -1)
        mb = phi_b.reshape(self.n_boundary_faces, -1)
        res = np.empty((self.n_cells, m.shape[1], 2)) if out is None else out.reshape(self.n_cells, -1, 2)
        tmp = np.empty((self.n_cells, 2))
        for j in range(m.shape[1]):
            self._scalar(np.ascontiguousarray(m[:, j]), np.ascontiguousarray(mb[:, j]), tmp)
            res[:, j, :] = tmp
        return res.reshape(phi.shape + (2,))


class LeastSquaresGradient(_CellGradient):
    """Weighted least-squares gradient with inverse-distance-squared weights.

    g_c minimises sum_j |d_j|^-2 (phi_j - phi_c - g_c . d_j)^2 over the face neighbours j of c,
    boundary faces included as neighbours at x_f with the boundary value phi_b. Exact for linear
    fields on any mesh. The 2x2 inverse matrices are computed once here.
    """

    def __init__(self, mesh: Mesh, geom: Geometry):
        super().__init__(mesh, geom)
        self.weighted_delta = np.empty((mesh.n_faces, 2))
        self.inverse_matrix = np.empty((mesh.n_cells, 3))
        bad = _k.lsq_matrices(
            self._owner, self._neighbour, self._nfi, geom.face_delta, mesh.n_cells,
            self.inverse_matrix, self.weighted_delta,
        )
        if bad >= 0:
            x = geom.cell_centre[bad]
            raise MeshError(
                f"{mesh.source}: cell {bad} near ({x[0]:.6g}, {x[1]:.6g}) has neighbour directions that "
                "do not span the plane (degenerate cell), so its least-squares gradient is undefined; "
                "repair the cell"
            )

    def _scalar(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray) -> None:
        _k.lsq_gradient(
            self._owner, self._neighbour, self._nfi, self._cf_ptr, self._cf_face, self.weighted_delta,
            self.inverse_matrix, phi, phi_b, out,
        )


_SHARED: dict[tuple[int, int], tuple[weakref.ref, weakref.ref, LeastSquaresGradient]] = {}


def least_squares_gradient(mesh: Mesh, geom: Geometry) -> LeastSquaresGradient:
    """The :class:`LeastSquaresGradient` of ``mesh`` and ``geom``, made once and shared (its arrays are
    read only: the loop's velocity gradient, the face-sum gradients' skewness part and the models'
    equations take the same one; 56 bytes per cell of quads each otherwise)."""
    key = (id(mesh), id(geom))
    hit = _SHARED.get(key)
    if hit is not None and hit[0]() is mesh and hit[1]() is geom:
        return hit[2]
    op = LeastSquaresGradient(mesh, geom)

    def forget(_: weakref.ref, key: tuple[int, int] = key) -> None:
        _SHARED.pop(key, None)

    _SHARED[key] = (weakref.ref(mesh, forget), weakref.ref(geom, forget), op)
    return op


class GreenGaussGradient(_CellGradient):
    """Green-Gauss gradient g_c = (1/V_c) sum_f phi_f S_f.

    phi_f is linear interpolation at the intersection point of the owner-neighbour line with the
    face, plus ``skew_corrections`` passes of the skewness correction (x_f - x_ip) . g_f with the
    gradient of the previous pass. Exact for linear fields where the skewness vanishes; on
    skewed meshes only in the limit of many passes.
    """

    def __init__(self, mesh: Mesh, geom: Geometry, skew_corrections: int = 1):
        super().__init__(mesh, geom)
        if skew_corrections < 0:
            raise ValueError("GreenGaussGradient: skew_corrections must be >= 0")
        self.skew_corrections = int(skew_corrections)
        self._sf = geom.face_area_vector
        self._w = geom.face_weight
        self._skew = geom.face_skew
        self._area = geom.cell_area
        self._work = np.empty((mesh.n_cells, 2))

    def _scalar(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray) -> None:
        # 1 + skew_corrections passes alternating between two buffers; the last writes ``out``
        cur, other = (out, self._work) if self.skew_corrections % 2 == 0 else (self._work, out)
        args = (self._owner, self._neighbour, self._nfi, self._cf_ptr, self._cf_face, self._sf, self._w, self._skew,
                self._area)
        args = args + (phi, phi_b)
        _k.green_gauss_pass(*args, other, False, cur)
        for _ in range(self.skew_corrections):
            _k.green_gauss_pass(*args, cur, True, other)
            cur, other = other, cur


class GaussLeastSquaresGradient(_CellGradient):
    """Green-Gauss gradient in conservative face-sum form, g_c = (1/V_c) sum_f phi_f S_f, with the
    face values moved from the intersection point to the face centre by the least-squares
    gradient: phi_f = w phi_O + (1-w) phi_N + (x_f - x_ip) . g_LSQ,f.

    Exact for linear fields on any mesh (the face values are exact and the midpoint rule is exact
    for linear integrands); used for the pressure force, where the face-sum form keeps the
    discretisation second-order on irregular meshes. ``bounded_skew``: |x_f - x_ip| is cut to half
    the face length where the owner-neighbour line meets the face line beyond the face (exactness
    kept wherever it does not); the momentum equations' linear-upwind reconstruction uses that form.
    """

    def __init__(self, mesh: Mesh, geom: Geometry, bounded_skew: bool = False):
        super().__init__(mesh, geom)
        self._lsq = least_squares_gradient(mesh, geom)
        self._sf = geom.face_area_vector
        self._w = geom.face_weight
        self._skew = geom.face_skew
        if bounded_skew:
            # where the owner-neighbour line meets the face line beyond the face, move the value
            # only to the face end: |x_f - x_ip| <= L_f / 2 (a copy only when some face is cut)
            length = np.linalg.norm(self._skew, axis=1)
            half = 0.5 * geom.face_length
            if np.any(length > half):
                scale = np.where(length > half, half / np.maximum(length, 1e-300), 1.0)
                self._skew = np.ascontiguousarray(self._skew * scale[:, None])
        self._area = geom.cell_area

    def _scalar(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray) -> None:
        work = np.empty((self.n_cells, 2))  # the least-squares gradient (made per call: not held between)
        self._lsq._scalar(phi, phi_b, work)
        _k.green_gauss_pass(
            self._owner, self._neighbour, self._nfi, self._cf_ptr, self._cf_face, self._sf, self._w, self._skew,
            self._area, phi, phi_b, work, True, out,
        )

    def from_least_squares(
        self, phi: np.ndarray, phi_b: np.ndarray, g_lsq: np.ndarray, out: np.ndarray | None = None
    ) -> np.ndarray:
        """The same gradient when the least-squares gradient ``g_lsq`` of ``phi`` (shape
        phi.shape + (2,)) is already at hand: only the face-sum pass is done."""
        phi, phi_b = _check_phi(phi, phi_b, self.n_cells, self.n_boundary_faces)
        nc, nb = self.n_cells, self.n_boundary_faces
        m = phi.reshape(nc, -1)
        mb = phi_b.reshape(nb, -1)
        gl = np.asarray(g_lsq, dtype=np.float64).reshape(nc, -1, 2)
        res = np.empty((nc, m.shape[1], 2)) if out is None else out.reshape(nc, -1, 2)
        tmp = np.empty((nc, 2))
        for j in range(m.shape[1]):
            _k.green_gauss_pass(
                self._owner, self._neighbour, self._nfi, self._cf_ptr, self._cf_face, self._sf, self._w,
                self._skew, self._area, np.ascontiguousarray(m[:, j]), np.ascontiguousarray(mb[:, j]),
                np.ascontiguousarray(gl[:, j, :]), True, tmp,
            )
            res[:, j, :] = tmp
        return res.reshape(phi.shape + (2,))


def gradient_operator(mesh: Mesh, geom: Geometry, method: str = "least_squares", **options) -> _CellGradient:
    """A gradient operator by name: 'least_squares' (default; one shared per mesh, see
    :func:`least_squares_gradient`), 'green_gauss' (option ``skew_corrections``) or
    'gauss_least_squares' (face-sum form with least-squares skew correction)."""
    if method == "gauss_least_squares":
        return GaussLeastSquaresGradient(mesh, geom)
    if method == "least_squares":
        return least_squares_gradient(mesh, geom) if not options else LeastSquaresGradient(mesh, geom, **options)
    if method == "green_gauss":
        return GreenGaussGradient(mesh, geom, **options)
    raise ValueError(
        f"unknown gradient method {method!r}; use 'least_squares', 'green_gauss' or 'gauss_least_squares'"
    )


LIMITERS = {"barth_jespersen": 0, "venkatakrishnan": 1}


def limit_gradient(
    mesh: Mesh,
    geom: Geometry,
    phi: np.ndarray,
    phi_b: np.ndarray,
    grad: np.ndarray,
    limiter: str = "venkatakrishnan",
    k: float = 5.0,
) -> tuple[np.ndarray, np.ndarray]:
    """Limited gradient psi_c g_c and psi (n_cells,).

    psi keeps the reconstructed face values phi_c + psi g_c . (x_f - x_c) within the min/max of
    phi over the cell, its face neighbours and its boundary values. 'barth_jespersen':
    psi = min(1, d1/d2) (Barth & Jespersen 1989, AIAA 89-0366); 'venkatakrishnan': the smooth
    function of Venkatakrishnan (1995, J. Comput. Phys. 118:120-130) with eps^2 = (k h)^3,
    h = sqrt(V_c) (k = 5 is common practice).
    """
    if limiter not in LIMITERS:
        raise ValueError(f"unknown limiter {limiter!r}; use one of {', '.join(LIMITERS)}")
    phi = np.ascontiguousarray(phi, dtype=np.float64)
    phi_b = np.ascontiguousarray(phi_b, dtype=np.float64)
    grad = np.ascontiguousarray(grad, dtype=np.float64)
    eps2 = (k * np.sqrt(geom.cell_area)) ** 3
    psi = np.empty(mesh.n_cells)
    _k.slope_limiter(
        mesh.face_owner, mesh.face_neighbour, mesh.n_internal_faces, geom.face_centre, geom.cell_centre,
        geom.face_shift, phi, phi_b, grad, LIMITERS[limiter], eps2, psi,
    )
    return grad * psi[:, None], psi


def vertex_stencils(mesh: Mesh) -> tuple[np.ndarray, np.ndarray]:
    """Vertex-neighbour stencil of every cell in CSR form (ptr, idx): the other cells sharing a
    vertex with it, then the boundary faces touching one of its vertices (entry ``-1 - b`` for
    boundary face ``n_internal_faces + b``)."""
    nc, nfi = mesh.n_cells, mesh.n_internal_faces
    cp = mesh.cell_points.astype(np.int64)
    cell_of = np.repeat(np.arange(nc, dtype=np.int64), np.diff(mesh.cell_offsets))
    order = np.argsort(cp, kind="stable")
    pc_ptr = np.zeros(mesh.n_points + 1, dtype=np.int64)
    np.add.at(pc_ptr, cp + 1, 1)
    bpts = mesh.face_points[nfi:].astype(np.int64)
    bface = np.repeat(np.arange(nfi, mesh.n_faces, dtype=np.int64), 2)
    border = np.argsort(bpts.ravel(), kind="stable")
    pb_ptr = np.zeros(mesh.n_points + 1, dtype=np.int64)
    np.add.at(pb_ptr, bpts.ravel() + 1, 1)
    return _k.vertex_stencils(
        mesh.cell_offsets.astype(np.int64), cp, np.cumsum(pc_ptr), cell_of[order],
        np.cumsum(pb_ptr), bface[border], nfi,
    )


class QuadraticFit:
    """Second derivatives from a weighted least-squares quadratic fit over the vertex neighbours.

    For cell c, (g, H) minimise sum_j |d_j|^-2 (phi_j - phi_c - g . d_j - d_j^T H d_j / 2)^2 over
    the cells sharing a vertex with c and the boundary faces touching its vertices (their centre
    values), d_j = x_j - x_c: a 2-exact reconstruction (Barth & Frederickson 1990, AIAA 90-0013;
    Ollivier-Gooch & Van Altena 2002, J. Comput. Phys. 181, 729-752), the Hessian exact for
    quadratic fields, first-order accurate otherwise. Cells whose stencil cannot determine a
    quadratic get H = 0. Called as ``hess(phi, phi_b, out)`` with phi (n_cells, m); returns
    (n_cells, m, 3) = (H_xx, H_xy, H_yy) per component.
    """

    def __init__(self, mesh: Mesh, geom: Geometry):
        nc, nfi = mesh.n_cells, mesh.n_internal_faces
        self.ptr, self.idx = vertex_stencils(mesh)
        self.coef = np.zeros((self.idx.shape[0], 5))
        self.n_singular = _k.quadratic_fit_matrices(
            self.ptr, self.idx, geom.cell_centre, geom.face_centre, geom.cell_area, nfi, self.coef
        )
        self.n_cells = nc
        self.n_boundary_faces = mesh.n_boundary_faces

    def __call__(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        phi, phi_b = _check_phi(phi, phi_b, self.n_cells, self.n_boundary_faces)
        m = phi.reshape(self.n_cells, -1)
        mb = phi_b.reshape(self.n_boundary_faces, -1)
        if out is None:
            out = np.empty((self.n_cells, m.shape[1], 3))
        _k.quadratic_fit_hessian(self.ptr, self.idx, self.coef, m, mb, out)
        return out
