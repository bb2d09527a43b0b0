"""Second-order gradients at boundary faces with a known value (no-slip walls).

For a boundary face f with the value phi_f (the wall velocity), the gradient at the face centre
comes from a weighted least-squares quadratic that passes through phi_f,

    phi = phi_f + g_s s + g_n eta + (H_ss s^2 + 2 H_sn s eta + H_nn eta^2) / 2,

in wall coordinates: s the arc length along the wall and eta the distance from it, both measured
on the wall as the mesh has it (the polyline of the face and two wall faces on each side). The
quadratic is fitted to the cell averages of the wall cell and of the cells sharing a vertex with it
(the average of the quadratic over a cell: its centroid value plus H : I / 2, I the cell's central
second moments per unit area, turned to the wall segment below it) and to the values at the centres
of the neighbouring wall faces. Corner cells with fewer than ``MIN_DATA`` data take the next ring of
cells; cells past an end of the wall (ahead of a leading edge, across a corner) are left out. On a
straight wall the coordinates are Cartesian and the fit is exact for quadratic fields on any cell
shape, so g is second-order accurate where the one-sided difference (u_P - u_f) / d is first order
(exact only for fields linear along the wall normal). Least-squares reconstruction with a
constraint in the spirit of Ollivier-Gooch & Van Altena (2002, J. Comput. Phys. 181, 729-752:
k-exact reconstruction with boundary constraints). Where the stencil cannot fix a quadratic a
linear fit through phi_f is taken and ``order`` says so.

Why wall coordinates: with Cartesian offsets, on cells stretched along a curved wall (the bump of
``tests/solve/test_bump_robustness.py``: aspect ratio 250, first cell 1e-4) the cells beside the wall
cell sit about 25 cell heights off the face line, and the fitted d/dn took the wall cell's value
with a negative weight; the run stalled. A smooth wall curve through the face centres fails there
too: the thin cells lie on the chords, up to 4 cell heights off the curve. Measured from the
polyline the weights are those of a straight wall (d/dn = (1.41 u_P - ...) / d there). The price: for
a smooth field sampled on a polygon the fit is first order in the wall curvature (exact cell averages
of circular Couette flow: 1.8e-2, 1.0e-2, 5.6e-3 on 32, 64, 128 faces); the solver's own solution follows the
polygon, and its wall shear converges at second order (tests/verification/test_circular_couette.py).

For the velocity at a no-slip wall (:meth:`WallGradient.velocity`) only the shear part comes from
the fit: along the wall the velocity is the wall's, so d u / d t is the derivative of the wall
velocity along the wall (a three-point difference of the neighbouring wall-face values, exact
for a quadratic wall velocity; zero on a wall at rest), and continuity fixes the normal
derivative of the normal component, n . d u / d n = -t . d u / d t. Then

    G = (d u / d t) t^T + (d u / d n) n^T,   d u / d n = (t . g_n) t - (t . d u / d t) n,

with g_n the fitted normal derivative. Besides being exact kinematics, this keeps the cell values
out of the normal viscous stress: taken from the fit, 2 mu d u_n / d n answered a change of the
wall cell's normal velocity with about 3.5 times the implicit wall coefficient, and the deferred
wall flux of the momentum equations ran away at the default relaxation (plane Poiseuille flow,
quads, relax_velocity 0.95).

The solver's momentum equation takes its wall flux mu (G + G^T) . S from this gradient G (see
``fvrans.solve._kernels.assemble_momentum``), and the wall shear stress, y+ and the viscous
forces of ``fvrans.post.wall`` are built on the same G: the wall friction is the one the
discrete momentum balance feels.
"""

from __future__ import annotations

import numpy as np

from fvrans.fv import _wall_kernels as _k
from fvrans.fv.gradient import vertex_stencils
from fvrans.mesh.geometry import Geometry, polygon_second_moments
from fvrans.mesh.mesh import Mesh

#: a stencil with fewer data (cells and boundary faces) than this takes the next ring of cells
MIN_DATA = 8


def _stencil(cidx: np.ndarray, cptr: np.ndarray, P: int, b0: int, known: np.ndarray, rings: int) -> np.ndarray:
    """The wall cell P, the cells sharing a vertex with it (and with those, for ``rings`` = 2) and
    the known boundary faces touching their vertices, boundary face b as -1 - b, b0 left out."""
    st = cidx[cptr[P] : cptr[P + 1]]
    cells = np.concatenate([[P], st[st >= 0]])
    bnd = st[st < 0]
    if rings > 1:
        more = np.concatenate([cidx[cptr[c] : cptr[c + 1]] for c in cells])
        cells = np.concatenate([cells, np.setdiff1d(more[more >= 0], cells)])
        bnd = np.union1d(bnd, more[more < 0])
    b = -1 - bnd
    return np.concatenate([cells, bnd[known[b] & (b != b0)]]).astype(np.int64)


class WallGradient:
    """Gradient at the centres of the boundary faces ``faces`` (global face indices) from the
    quadratic fit through the face value (module docstring).

    ``known``: (n_boundary_faces,) bool, the boundary faces whose values are exact point values at
    their centres (the solver and the wall data pass the no-slip walls; a velocity inlet's values
    are face averages, see ``fvrans.physics.boundary``); other boundary faces are left out of the
    stencils.
    Called as ``grad(phi, phi_b)`` with cell values (nc,) or (nc, m) and boundary face values
    (nb,) or (nb, m); returns (len(faces), 2) or (len(faces), m, 2) with d phi / dx, d phi / dy.
    """

    def __init__(self, mesh: Mesh, geom: Geometry, faces: np.ndarray, known: np.ndarray):
        nfi = mesh.n_internal_faces
        faces = np.ascontiguousarray(faces, dtype=np.int64)
        known = np.asarray(known, dtype=bool)
        if known.shape != (mesh.n_boundary_faces,):
            raise ValueError(f"known must have one entry per boundary face ({mesh.n_boundary_faces}), "
                             f"got shape {known.shape}")
        if len(faces) and (faces.min() < nfi or faces.max() >= mesh.n_faces):
            raise ValueError("WallGradient: faces must be boundary faces")
        self.faces = faces
        self.n_cells = mesh.n_cells
        self.n_boundary_faces = mesh.n_boundary_faces
        self._nfi = nfi
        n_in = -geom.face_normal[faces]
        self.normal = np.ascontiguousarray(n_in)
        self.tangent = np.ascontiguousarray(np.stack([-n_in[:, 1], n_in[:, 0]], axis=1))
        prev, nxt = _wall_neighbours(mesh, geom, known)
        self.along, self.along_coef = _along_wall_stencils(geom, faces, nfi, prev, nxt, self.tangent)
        chain_ptr, chain, s_face, open_ends = _wall_chains(mesh, geom, faces, prev, nxt)
        cptr, cidx = vertex_stencils(mesh)
        owner = mesh.face_owner[faces]
        rows: list[np.ndarray] = []
        crd: list[np.ndarray] = []
        for rings in (1, 2):
            todo = range(len(faces)) if rings == 1 else [k for k in range(len(faces)) if len(rows[k]) < MIN_DATA]
            if not todo:
                break
            sub = np.asarray(list(todo), dtype=np.int64)
            cand = [_stencil(cidx, cptr, int(owner[k]), int(faces[k]) - nfi, known, rings) for k in sub]
            ptr = np.zeros(len(sub) + 1, dtype=np.int64)
            ptr[1:] = np.cumsum([len(c) for c in cand])
            idx = np.concatenate(cand) if cand else np.zeros(0, dtype=np.int64)
            coords = np.zeros((len(idx), 4))
            beyond = np.zeros(len(idx), dtype=np.bool_)
            _k.wall_coordinates(faces[sub], nfi, ptr, idx, geom.cell_centre, geom.face_centre, chain_ptr[sub],
                                chain_ptr[sub + 1], chain, s_face[sub], open_ends[sub], coords, beyond)
            for i, k in enumerate(sub):
                keep = ~beyond[ptr[i] : ptr[i + 1]]
                row, c = idx[ptr[i] : ptr[i + 1]][keep], coords[ptr[i] : ptr[i + 1]][keep]
                if rings == 1:
                    rows.append(row)
                    crd.append(c)
                else:
                    rows[k], crd[k] = row, c
        ptr = np.zeros(len(faces) + 1, dtype=np.int64)
        ptr[1:] = np.cumsum([len(r) for r in rows])
        self.ptr = ptr
        self.idx = np.ascontiguousarray(np.concatenate(rows)) if rows else np.zeros(0, dtype=np.int64)
        coords = np.ascontiguousarray(np.concatenate(crd)) if crd else np.zeros((0, 4))
        moments = polygon_second_moments(mesh.points, mesh.cell_offsets, mesh.cell_points, geom.cell_centre)
        self.coef = np.zeros((len(self.idx), 5))
        #: 2: quadratic fit; 1: linear fit (stencil too small); 0: none (singular)
        self.order = np.zeros(len(faces), dtype=np.int64)
        _k.wall_fit_coefficients(ptr, self.idx, coords, np.ascontiguousarray(moments), self.tangent, self.normal,
                                 self.coef, self.order)
        self.coef = np.ascontiguousarray(self.coef[:, :2])

    def velocity(self, u: np.ndarray, u_b: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        """grad u (len(faces), 2, 2), G[k, i, j] = d u_i / d x_j, at no-slip wall faces: the
        fitted shear, the wall velocity's derivative along the wall and continuity (module
        docstring). ``u`` (nc, 2) cell velocities, ``u_b`` (nb, 2) boundary face velocities."""
        g = self(u, u_b)
        u_b = np.asarray(u_b, dtype=np.float64)
        b = self.faces - self._nfi
        nb_ = self.along
        c = self.along_coef
        uf = u_b[b]
        du_dt = (c[:, 0, None] * (u_b[np.maximum(nb_[:, 0], 0)] - uf)
                 + c[:, 1, None] * (u_b[np.maximum(nb_[:, 1], 0)] - uf))
        t, n = self.tangent, self.normal
        shear = np.einsum("ki,kij,kj->k", t, g, n)
        stretch = np.einsum("ki,ki->k", t, du_dt)
        du_dn = shear[:, None] * t - stretch[:, None] * n
        res = np.einsum("ki,kj->kij", du_dt, t) + np.einsum("ki,kj->kij", du_dn, n)
        if out is not None:
            out[...] = res
            return out
        return res


    def __call__(self, phi: np.ndarray, phi_b: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        phi = np.asarray(phi, dtype=np.float64)
        phi_b = np.asarray(phi_b, dtype=np.float64)
        if phi.shape[0] != self.n_cells or phi_b.shape[0] != self.n_boundary_faces or phi.shape[1:] != phi_b.shape[1:]:
            raise ValueError(
                f"wall gradient: phi must have {self.n_cells} cell values and phi_b {self.n_boundary_faces} "
                f"boundary face values (same trailing shape), got {phi.shape} and {phi_b.shape}"
            )
        m = np.ascontiguousarray(phi.reshape(self.n_cells, -1))
        mb = np.ascontiguousarray(phi_b.reshape(self.n_boundary_faces, -1))
        res = np.empty((len(self.faces), m.shape[1], 2)) if out is None else out
        _k.wall_gradient_apply(self.faces, self._nfi, self.ptr, self.idx, self.coef, m, mb, res)
        return res.reshape((len(self.faces),) + phi.shape[1:] + (2,))



def _wall_neighbours(mesh: Mesh, geom: Geometry, known: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """For every boundary face, the known boundary face before and after it along the wall (-1
    where there is none): the face sharing its back / front end point whose normal turns by less
    than 45 degrees. A face runs from its back point ``face_points[f, 1]`` to its front point
    ``face_points[f, 0]``, along its tangent t = (-n_y, n_x), n the normal into the fluid."""
    nfi = mesh.n_internal_faces
    nb = mesh.n_boundary_faces
    bpts = mesh.face_points[nfi:]
    front: dict[int, int] = {}
    back: dict[int, int] = {}
    for b in np.flatnonzero(known):
        back[int(bpts[b, 1])] = int(b)
        front[int(bpts[b, 0])] = int(b)
    prev = np.full(nb, -1, dtype=np.int64)
    nxt = np.full(nb, -1, dtype=np.int64)
    normal = geom.face_normal[nfi:]
    cos45 = np.sqrt(0.5)
    for b in range(nb):
        n = back.get(int(bpts[b, 0]), -1)  # the face starting where b ends
        if n >= 0 and n != b and normal[n] @ normal[b] > cos45:
            nxt[b] = n
        p = front.get(int(bpts[b, 1]), -1)  # the face ending where b starts
        if p >= 0 and p != b and normal[p] @ normal[b] > cos45:
            prev[b] = p
    return prev, nxt


def _wall_chains(
    mesh: Mesh, geom: Geometry, faces: np.ndarray, prev: np.ndarray, nxt: np.ndarray, reach: int = 2
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """For each face, the polyline of the wall around it (``reach`` faces before and after, where
    the wall goes on) in the direction of the face tangent: (chain_ptr, chain points, arc length
    of the face centre along its chain, (n, 2) flags: the wall ends at the start / end of the
    chain)."""
    nfi = mesh.n_internal_faces
    fp = mesh.face_points
    pts = mesh.points
    chain_ptr = np.zeros(len(faces) + 1, dtype=np.int64)
    chains: list[np.ndarray] = []
    s_face = np.zeros(len(faces))
    open_ends = np.zeros((len(faces), 2), dtype=np.bool_)
    for k, f in enumerate(faces):
        b = f - nfi
        ids = [int(fp[f, 1]), int(fp[f, 0])]
        cur = b
        for _ in range(reach):
            cur = nxt[cur]
            if cur < 0 or cur == b:
                break
            ids.append(int(fp[nfi + cur, 0]))
        open_ends[k, 1] = cur < 0
        cur = b
        for _ in range(reach):
            cur = prev[cur]
            if cur < 0 or cur == b:
                break
            ids.insert(0, int(fp[nfi + cur, 1]))
        open_ends[k, 0] = cur < 0
        xy = pts[ids]
        seg = np.hypot(*np.diff(xy, axis=0).T)
        i0 = ids.index(int(fp[f, 1]))
        s_face[k] = float(seg[:i0].sum()) + 0.5 * geom.face_length[f]
        chains.append(xy)
        chain_ptr[k + 1] = chain_ptr[k] + len(xy)
    chain = np.ascontiguousarray(np.concatenate(chains)) if chains else np.zeros((0, 2))
    return chain_ptr, chain, s_face, open_ends


def _along_wall_stencils(
    geom: Geometry, faces: np.ndarray, nfi: int, prev: np.ndarray, nxt: np.ndarray, tangent: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """For each face, the wall faces before and after it (-1 where there is none) and the weights
    of the derivative along ``tangent`` from their values: a quadratic through the three values
    at the positions s = (x_g - x_f) . t (exact for quadratic wall data), a difference with the
    one neighbour at a wall end, zero for a face without neighbours."""
    along = np.stack([prev[faces - nfi], nxt[faces - nfi]], axis=1)
    coef = np.zeros((len(faces), 2))
    for k, f in enumerate(faces):
        bm, bp = along[k]
        sm = float((geom.face_centre[nfi + bm] - geom.face_centre[f]) @ tangent[k]) if bm >= 0 else 0.0
        sp = float((geom.face_centre[nfi + bp] - geom.face_centre[f]) @ tangent[k]) if bp >= 0 else 0.0
        if bm >= 0 and bp >= 0 and sm < 0 < sp:
            coef[k] = (-sp / (sm * (sm - sp)), -sm / (sp * (sp - sm)))
        elif bm >= 0 and sm < 0:
            along[k, 1] = -1
            coef[k, 0] = 1.0 / sm
        elif bp >= 0 and sp > 0:
            along[k, 0] = -1
            coef[k, 1] = 1.0 / sp
        else:
            along[k] = -1
    return along, coef
