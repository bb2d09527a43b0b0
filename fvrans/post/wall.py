"""Wall quantities: shear stress, skin friction, wall pressure, y+, zero-shear points and forces.

Conventions for a wall face f with owner (fluid) cell P:

* ``face_normal`` n_out points out of the fluid into the wall; the wall normal into the fluid is
  n = -n_out.
* the tangent t is the unit vector along the face with t_x > 0 (t = (0, 1) on vertical faces);
* first-cell wall distance d = (x_f - x_P) . n_out;
* velocity gradient at the face centre G = grad u from the second-order wall reconstruction
  (a least-squares quadratic through the wall velocity, :mod:`fvrans.fv.wall_gradient`), the same
  gradient the solver's momentum equation takes for its wall flux;
* viscous traction of the fluid on the wall tau = mu (G + G^T) . n (the eddy viscosity vanishes
  at a wall, so mu is the molecular viscosity); wall shear stress along t: tau_w = tau . t;
* wall pressure extrapolated with the cell gradient: p_w = p_P + grad p_P . (x_f - x_P);
* Cf = tau_w / q, Cp = (p_w - p_ref) / q with q = rho U_ref^2 / 2;
* u_tau = sqrt(|tau_w| / rho), y+ = d u_tau / nu, nu = mu / rho.

Faces are ordered along the wall: each connected piece of the patch is a chain of faces linked by
shared points (see :func:`order_patch_faces`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from fvrans.errors import CaseError, MeshError
from fvrans.fv.wall_gradient import WallGradient
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.physics.boundary import KIND_CODES, WALL, FlowBoundary

_KIND_NAMES = {v: k for k, v in KIND_CODES.items()}


# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class PatchOrder:
    """Faces of a patch ordered along the wall.

    ``faces``: patch-local face indices (0 .. size-1) in wall order; ``s``: arc length of each
    face centre along its piece, counted on from the end of the previous piece; ``direction``: +1
    where the face's x-positive tangent points along the walk, -1 where it points back;
    ``segment``: index of the connected piece; ``closed``: per piece, whether it is a loop;
    ``chained``: per piece, False where the piece is not a simple chain and was sorted by x.
    """

    faces: np.ndarray
    s: np.ndarray
    direction: np.ndarray
    segment: np.ndarray
    closed: tuple[bool, ...]
    chained: tuple[bool, ...]
    lengths: tuple[float, ...]


def unit_tangent(face_normal: np.ndarray) -> np.ndarray:
    """Unit face tangents with t_x > 0, or t = (0, 1) on vertical faces (|t_x| < 1e-12).

    >>> unit_tangent(np.array([[0.0, -1.0], [1.0, 0.0], [0.0, 1.0]]))
    array([[1., 0.],
           [0., 1.],
           [1., 0.]])
    """
    n = np.asarray(face_normal, dtype=float)
    t = np.stack([-n[:, 1], n[:, 0]], axis=1)
    vertical = np.abs(t[:, 0]) < 1e-12
    flip = np.where(vertical, t[:, 1] < 0.0, t[:, 0] < 0.0)
    t[flip] *= -1.0
    t[vertical, 0] = 0.0
    return t + 0.0  # no negative zeros


def order_patch_faces(mesh: Mesh, geom: Geometry, patch_name: str) -> PatchOrder:
    """Order the faces of a patch along the wall by walking the chain of shared points.

    Each connected piece of the patch is walked separately. An open chain starts at its end with
    the smaller x (then smaller y); a closed loop starts at its point of largest x (then smallest
    y) and follows the face orientation, i.e. with the fluid on the left. A piece in which some
    point joins more than two faces is not a chain; its faces are sorted by the x of their
    centres. Pieces follow each other by increasing smallest face-centre x.
    """
    patch = mesh.patch(patch_name)
    fp = mesh.face_points[patch.start : patch.stop]
    m = len(fp)
    pts = mesh.points
    length = geom.face_length[patch.start : patch.stop]
    centre = geom.face_centre[patch.start : patch.stop]
    tangent = unit_tangent(geom.face_normal[patch.start : patch.stop])
    # point -> incident faces
    point_faces: dict[int, list[int]] = {}
    for f in range(m):
        for p in (int(fp[f, 0]), int(fp[f, 1])):
            point_faces.setdefault(p, []).append(f)
    # connected pieces (breadth-first over shared points)
    comp = np.full(m, -1, dtype=np.int64)
    pieces: list[list[int]] = []
    for f0 in range(m):
        if comp[f0] >= 0:
            continue
        cid = len(pieces)
        comp[f0] = cid
        stack, members = [f0], []
        while stack:
            f = stack.pop()
            members.append(f)
            for p in fp[f]:
                for g in point_faces[int(p)]:
                    if comp[g] < 0:
                        comp[g] = cid
                        stack.append(g)
        pieces.append(members)
    pieces.sort(key=lambda mem: float(centre[mem, 0].min()))

    faces_out: list[int] = []
    dir_out: list[float] = []
    s_out: list[float] = []
    seg_out: list[int] = []
    closed: list[bool] = []
    chained: list[bool] = []
    lengths: list[float] = []
    s0 = 0.0
    for k, members in enumerate(pieces):
        ppts = {int(p) for f in members for p in fp[f]}
        degree = {p: len(point_faces[p]) for p in ppts}
        if max(degree.values()) <= 2:
            ends = [p for p in ppts if degree[p] == 1]
            if ends:
                start = min(ends, key=lambda p: (pts[p, 0], pts[p, 1]))
                first = point_faces[start][0]
                is_closed = False
            else:
                start = min(ppts, key=lambda p: (-pts[p, 0], pts[p, 1]))
                first = next(f for f in point_faces[start] if int(fp[f, 0]) == start)
                is_closed = True
            seq, dirs = [], []
            cur, f = start, first
            visited: set[int] = set()
            while f is not None and f not in visited:
                visited.add(f)
                a, b = int(fp[f, 0]), int(fp[f, 1])
                nxt = b if a == cur else a
                walk = pts[nxt] - pts[cur]
                dirs.append(1.0 if float(walk @ tangent[f]) >= 0.0 else -1.0)
                seq.append(f)
                cur = nxt
                f = next((g for g in point_faces[cur] if g not in visited), None)
            chained.append(True)
        else:
            seq = sorted(members, key=lambda f: (centre[f, 0], centre[f, 1]))
            dirs = [1.0] * len(seq)
            is_closed = False
            chained.append(False)
        L = length[seq]
        s_centre = s0 + np.cumsum(L) - 0.5 * L
        faces_out.extend(seq)
        dir_out.extend(dirs)
        s_out.extend(s_centre.tolist())
        seg_out.extend([k] * len(seq))
        closed.append(is_closed)
        lengths.append(float(L.sum()))
        s0 += float(L.sum())
    return PatchOrder(
        faces=np.asarray(faces_out, dtype=np.int64),
        s=np.asarray(s_out),
        direction=np.asarray(dir_out),
        segment=np.asarray(seg_out, dtype=np.int64),
        closed=tuple(closed),
        chained=tuple(chained),
        lengths=tuple(lengths),
    )


# ---------------------------------------------------------------------------------------------
@dataclass(frozen=True)
class WallData:
    """Wall quantities on the faces of one wall patch, ordered along the wall.

    All arrays have one entry per face of the patch, in the order of :class:`PatchOrder`.
    ``faces`` are global face indices; ``normal`` points into the fluid; ``tau_w`` is the
    signed shear stress the fluid exerts on the wall along ``tangent``; ``p_wall`` the
    extrapolated wall pressure. ``direction`` = +1 where ``tangent`` points along the walk
    (see :func:`order_patch_faces`), so ``tau_w * direction`` is the shear along the walk.
    ``traction`` (n, 2) is the whole viscous traction mu (G + G^T) . n on the wall (``tau_w`` its
    component along ``tangent``; the normal part vanishes on a wall at rest). ``fit_order``: 2 where
    the wall gradient came from the quadratic fit, 1 where the stencil allowed only a linear one.
    """

    patch: str
    faces: np.ndarray
    x: np.ndarray
    y: np.ndarray
    s: np.ndarray
    length: np.ndarray
    tangent: np.ndarray
    normal: np.ndarray
    direction: np.ndarray
    segment: np.ndarray
    closed: tuple[bool, ...]
    d_perp: np.ndarray
    tau_w: np.ndarray
    cf: np.ndarray
    p_wall: np.ndarray
    cp: np.ndarray
    u_tau: np.ndarray
    y_plus: np.ndarray
    traction: np.ndarray
    fit_order: np.ndarray
    rho: float
    mu: float
    u_ref: float
    p_ref: float
    #: density of the coefficients (None: the fluid's)
    rho_ref: float | None = None

    @property
    def q_ref(self) -> float:
        """Reference dynamic pressure rho_ref U_ref^2 / 2."""
        return 0.5 * (self.rho if self.rho_ref is None else self.rho_ref) * self.u_ref**2

    @property
    def tau_vector(self) -> np.ndarray:
        """(n, 2) shear traction on the wall, tau_w t."""
        return self.tau_w[:, None] * self.tangent

    @property
    def face_length(self) -> np.ndarray:
        """Length of each face (the same as ``length``)."""
        return self.length

    def __len__(self) -> int:
        return len(self.faces)


def _check_reference(rho: float, mu: float, u_ref: float) -> None:
    for name, v in (("density", rho), ("viscosity", mu), ("reference velocity", u_ref)):
        if not np.isfinite(v) or v <= 0.0:
            raise CaseError(f"the {name} must be a positive number to form wall coefficients, got {v!r}")


def wall_data(
    mesh: Mesh,
    geom: Geometry,
    boundary: FlowBoundary,
    patch_name: str,
    velocity: np.ndarray,
    pressure: np.ndarray,
    grad_p: np.ndarray,
    rho: float,
    mu: float,
    u_ref: float,
    p_ref: float = 0.0,
    rho_ref: float | None = None,
    order: PatchOrder | None = None,
    gradient: WallGradient | None = None,
) -> WallData:
    """Shear stress, skin friction, wall pressure and y+ on the wall patch ``patch_name``.

    ``velocity`` (nc, 2), ``pressure`` (nc,) and ``grad_p`` (nc, 2) are cell values; ``mu`` is
    the molecular dynamic viscosity; ``rho_ref`` the density of Cf and Cp (default ``rho``).
    Formulas in the module docstring. ``order``: the patch's :func:`order_patch_faces` and
    ``gradient``: its :func:`wall_gradient_operator` (on the ordered faces), when already known
    (evaluations every iteration reuse them).
    """
    _check_reference(rho, mu, u_ref)
    if rho_ref is not None:
        _check_reference(rho_ref, mu, u_ref)
    patch = mesh.patch(patch_name)
    ni = mesh.n_internal_faces
    kinds = boundary.kind[patch.start - ni : patch.stop - ni]
    if np.any(kinds != WALL):
        other = _KIND_NAMES.get(int(kinds[kinds != WALL][0]), str(int(kinds[kinds != WALL][0])))
        raise CaseError(
            f"patch {patch_name!r} is of kind {other!r}, not a wall; wall shear stress and "
            "forces are evaluated on wall patches only"
        )
    nc = mesh.n_cells
    velocity = np.asarray(velocity, dtype=float)
    pressure = np.asarray(pressure, dtype=float)
    grad_p = np.asarray(grad_p, dtype=float)
    for name, a, shape in (("velocity", velocity, (nc, 2)), ("pressure", pressure, (nc,)),
                           ("grad_p", grad_p, (nc, 2))):
        if a.shape != shape:
            raise ValueError(f"{name} has shape {a.shape}, expected {shape} (one per cell)")

    if order is None:
        order = order_patch_faces(mesh, geom, patch_name)
    f = patch.start + order.faces
    P = mesh.face_owner[f]
    xf = geom.face_centre[f]
    r = xf - geom.cell_centre[P]
    n_out = geom.face_normal[f]
    t = unit_tangent(n_out)
    d = np.einsum("ij,ij->i", r, n_out)
    if np.any(d <= 0.0):
        k = int(np.argmin(d))
        raise MeshError(
            f"{mesh.source}: cell {int(P[k])} lies on the wrong side of its wall face at "
            f"({xf[k, 0]:.6g}, {xf[k, 1]:.6g}) of patch {patch_name!r}; the mesh is inverted there"
        )
    op = gradient if gradient is not None else wall_gradient_operator(mesh, geom, boundary, f)
    if not np.array_equal(op.faces, f):
        raise ValueError(f"the wall gradient given for patch {patch_name!r} is not on its ordered faces")
    G = op.velocity(velocity, boundary.velocity)
    n_in = -n_out
    traction = mu * (np.einsum("kij,kj->ki", G, n_in) + np.einsum("kji,kj->ki", G, n_in))
    tau = np.einsum("ij,ij->i", traction, t)
    p_w = pressure[P] + np.einsum("ij,ij->i", grad_p[P], r)
    q = 0.5 * (rho if rho_ref is None else rho_ref) * u_ref**2
    u_tau = np.sqrt(np.abs(tau) / rho)
    return WallData(
        patch=patch_name,
        faces=f,
        x=xf[:, 0].copy(),
        y=xf[:, 1].copy(),
        s=order.s,
        length=geom.face_length[f].copy(),
        tangent=t,
        normal=-n_out,
        direction=order.direction,
        segment=order.segment,
        closed=order.closed,
        d_perp=d,
        tau_w=tau,
        cf=tau / q,
        p_wall=p_w,
        cp=(p_w - p_ref) / q,
        u_tau=u_tau,
        y_plus=d * u_tau * rho / mu,
        traction=traction,
        fit_order=op.order.copy(),
        rho=float(rho),
        mu=float(mu),
        u_ref=float(u_ref),
        p_ref=float(p_ref),
        rho_ref=None if rho_ref is None else float(rho_ref),
    )


def wall_gradient_operator(mesh: Mesh, geom: Geometry, boundary: FlowBoundary, faces: np.ndarray) -> WallGradient:
    """The second-order wall-gradient reconstruction at the boundary faces ``faces``, with the
    wall velocities as known boundary data (as in the solver)."""
    known = boundary.kind == WALL
    return WallGradient(mesh, geom, faces, known)


def wall_velocity_gradient(
    mesh: Mesh, geom: Geometry, boundary: FlowBoundary, faces: np.ndarray, velocity: np.ndarray
) -> np.ndarray:
    """grad u (len(faces), 2, 2), G[k, i, j] = d u_i / d x_j, at the centres of the wall faces
    ``faces`` (global indices) from the cell velocities (see :func:`wall_gradient_operator`)."""
    op = wall_gradient_operator(mesh, geom, boundary, faces)
    return op.velocity(velocity, boundary.velocity)


def wall_patches(boundary: FlowBoundary) -> list[str]:
    """Names of the patches whose kind is ``wall``, in the boundary's patch order."""
    return [name for name, kind in boundary.patch_kind.items() if kind == "wall"]


def all_wall_data(
    mesh: Mesh,
    geom: Geometry,
    boundary: FlowBoundary,
    velocity: np.ndarray,
    pressure: np.ndarray,
    grad_p: np.ndarray,
    rho: float,
    mu: float,
    u_ref: float,
    p_ref: float = 0.0,
    rho_ref: float | None = None,
    patches: list[str] | None = None,
) -> dict[str, WallData]:
    """:func:`wall_data` for every wall patch (or the wall patches ``patches``), keyed by name."""
    names = wall_patches(boundary) if not patches else [n for n in wall_patches(boundary) if n in patches]
    return {
        name: wall_data(mesh, geom, boundary, name, velocity, pressure, grad_p, rho, mu, u_ref, p_ref, rho_ref)
        for name in names
    }


# ---------------------------------------------------------------------------------------------
def _crossings(tau: np.ndarray, closed: bool = False) -> list[tuple[int, int, float]]:
    """Sign changes of a sequence: (i, j, frac) meaning the zero lies at i + frac (j - i).

    Exact zeros are skipped over: a change from + to - across a run of zeros is placed at the
    middle of the run; a touch (+ 0 +) is no change.
    """
    tau = np.asarray(tau, dtype=float)
    n = len(tau)
    nz = np.nonzero(tau != 0.0)[0]
    nz = nz[np.isfinite(tau[nz])]
    out: list[tuple[int, int, float]] = []
    pairs = list(zip(nz[:-1], nz[1:]))
    if closed and len(nz) >= 2:
        pairs.append((nz[-1], nz[0] + n))
    for i, j in pairs:
        a, b = tau[i % n], tau[j % n]
        if np.sign(a) == np.sign(b):
            continue
        if j == i + 1:
            out.append((int(i), int(j), float(a / (a - b))))
        else:  # zeros between: the middle of the zero run
            out.append((int(i), int(j), 0.5))
    return out


def sign_changes(s: np.ndarray, tau: np.ndarray, period: float | None = None) -> list[float]:
    """Positions s where ``tau`` changes sign, by linear interpolation between neighbours in s.

    Points are sorted by s first. With ``period`` (a closed wall of that length) the step from
    the last point to the first one (at s + period) is checked too; results are then in
    [0, period).

    >>> x = np.linspace(0.0, 7.0, 71)
    >>> [round(v, 3) for v in sign_changes(x, np.sin(x))]
    [3.142, 6.283]
    """
    s = np.asarray(s, dtype=float)
    tau = np.asarray(tau, dtype=float)
    if s.shape != tau.shape or s.ndim != 1:
        raise ValueError(f"s and tau need the same 1D shape, got {s.shape} and {tau.shape}")
    k = np.argsort(s, kind="stable")
    s, tau = s[k], tau[k]
    n = len(s)
    out = []
    for i, j, frac in _crossings(tau, closed=period is not None):
        si = s[i % n]
        sj = s[j % n] + (period if j >= n else 0.0)
        if j > i + 1:  # skipped zeros: middle of the zero run
            zs = s[i + 1 : j] if j < n else np.r_[s[i + 1 :], s[: j - n] + period]
            pos = 0.5 * (zs[0] + zs[-1])
        else:
            pos = si + frac * (sj - si)
        if period is not None:
            pos = pos % period
        out.append(float(pos))
    return out


@dataclass(frozen=True)
class ZeroShearPoint:
    """A point where the wall shear stress changes sign (separation, reattachment, stagnation)."""

    x: float
    y: float
    s: float
    kind: str  # "+to-" or "-to+" for the shear along the walk of the wall


def zero_shear_points(wall: WallData) -> list[ZeroShearPoint]:
    """Where the shear along the wall changes sign, piece by piece of the patch.

    Uses tau_w times ``direction`` (the shear along the walk), so a change of the tangent
    convention at a corner or at the leading edge of a closed body is not reported as a change
    of the flow direction. Position by linear interpolation between neighbouring face centres.
    """
    pts: list[ZeroShearPoint] = []
    along = wall.tau_w * wall.direction
    for seg in np.unique(wall.segment):
        idx = np.nonzero(wall.segment == seg)[0]
        closed = bool(wall.closed[int(seg)])
        n = len(idx)
        x, y, s, tau = wall.x[idx], wall.y[idx], wall.s[idx], along[idx]
        period = float(np.sum(wall.length[idx]))
        s_start = float(s[0] - 0.5 * wall.length[idx[0]])
        for i, j, frac in _crossings(tau, closed=closed):
            if j > i + 1:  # zeros between the two signs: middle of the zero run
                mid = [(k % n) for k in range(i + 1, j)]
                a, c = mid[0], mid[-1]
                px, py = 0.5 * (x[a] + x[c]), 0.5 * (y[a] + y[c])
                ps = 0.5 * (s[a] + s[c] + (period if c < a else 0.0))
            else:
                a, c = i % n, j % n
                px = x[a] + frac * (x[c] - x[a])
                py = y[a] + frac * (y[c] - y[a])
                sc = s[c] + (period if j >= n else 0.0)
                ps = s[a] + frac * (sc - s[a])
            if closed:
                ps = s_start + (ps - s_start) % period
            kind = "+to-" if tau[i % n] > 0 else "-to+"
            pts.append(ZeroShearPoint(float(px), float(py), float(ps), kind))
    return pts


def wall_columns(wall: WallData) -> tuple[list[str], list[np.ndarray]]:
    """Column names and arrays of a per-face wall table (for :func:`write_csv_atomic`): face index,
    piece of the wall, arc length s and centre x, y of the face, its length, unit tangent (t_x > 0)
    and unit normal into the fluid, first-cell wall distance, wall shear stress, Cf, wall pressure,
    Cp, u_tau, y+, and the viscous traction vector on the wall. The force per unit depth of a face
    is ((p_wall - p_ref) (-nx, -ny) + (traction_x, traction_y)) length."""
    header = ["face", "segment", "s", "x", "y", "length", "tx", "ty", "nx", "ny", "d_perp", "tau_w", "cf", "p_wall",
              "cp", "u_tau", "y_plus", "traction_x", "traction_y"]
    cols = [wall.faces, wall.segment, wall.s, wall.x, wall.y, wall.length, wall.tangent[:, 0], wall.tangent[:, 1],
            wall.normal[:, 0], wall.normal[:, 1], wall.d_perp, wall.tau_w, wall.cf, wall.p_wall, wall.cp, wall.u_tau,
            wall.y_plus, wall.traction[:, 0], wall.traction[:, 1]]
    return header, cols


def zero_shear_columns(wall: WallData) -> tuple[list[str], list[np.ndarray]]:
    """Column names and arrays of the table of the zero-shear points of a wall: x, y, arc length
    s and ``change`` = +1 where the shear along the walk of the wall turns from positive to
    negative (``"+to-"``), -1 where it turns from negative to positive."""
    pts = zero_shear_points(wall)
    return ["x", "y", "s", "change"], [
        np.array([p.x for p in pts]), np.array([p.y for p in pts]), np.array([p.s for p in pts]),
        np.array([1 if p.kind == "+to-" else -1 for p in pts], dtype=np.int64),
    ]
