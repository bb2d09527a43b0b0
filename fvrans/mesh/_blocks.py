"""Building blocks of the mesh generators.

* 1D point distributions on a segment: uniform, geometric (given first spacing or growth ratio),
  two-sided hyperbolic-tangent clustering with given end spacings (Vinokur 1983).
* Structured blocks: the tensor product of two distributions mapped onto a rectangle or a
  quadrilateral, glued to other blocks along shared edges by point index (never by a floating-point
  tolerance), written out as quads or as quads split into two triangles.
* A triangulator for a polygonal region whose boundary points are fixed: a size-graded point cloud,
  force-based smoothing and Delaunay triangulation (Persson & Strang 2004), with the boundary
  segments protected so that the triangles share exactly the given boundary points.
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq
from scipy.spatial import Delaunay, cKDTree

from fvrans.errors import MeshError
from fvrans.mesh.mesh import Mesh

# ------------------------------------------------------------------------------------------
# 1D point distributions
# ------------------------------------------------------------------------------------------


def _check_n(n: int, what: str) -> int:
    if int(n) != n or n < 1:
        raise MeshError(f"{what}: the number of cells must be a positive integer, got {n!r}")
    return int(n)


def _scale(s: np.ndarray, a: float, b: float) -> np.ndarray:
    """Map s in [0, 1] (s[0] = 0, s[-1] = 1) onto [a, b] keeping both ends exact."""
    x = a + (b - a) * s
    x[0] = a
    x[-1] = b
    return x


def uniform_points(n: int, a: float = 0.0, b: float = 1.0) -> np.ndarray:
    """n + 1 equally spaced points from a to b."""
    n = _check_n(n, "uniform_points")
    return _scale(np.linspace(0.0, 1.0, n + 1), a, b)


def geometric_points(
    n: int, a: float = 0.0, b: float = 1.0, first: float | None = None, ratio: float | None = None
) -> np.ndarray:
    """n + 1 points from a to b whose spacings grow by a constant ratio r away from a.

    Give either ``first`` (the spacing next to ``a``, in length units) or ``ratio``; with ``first``
    the ratio solves first * (r**n - 1) / (r - 1) = |b - a| (brentq). To cluster towards b, call
    ``geometric_points(n, b, a, first=...)[::-1]``.
    """
    n = _check_n(n, "geometric_points")
    length = abs(b - a)
    if length == 0:
        raise MeshError("geometric_points: the segment has zero length (a == b)")
    if (first is None) == (ratio is None):
        raise MeshError(
            "geometric_points: give exactly one of first= (first spacing) or ratio= (growth ratio)"
        )
    if ratio is not None:
        r = float(ratio)
        if not r > 0:
            raise MeshError(f"geometric_points: the growth ratio must be positive, got {ratio!r}")
    else:
        d = float(first) / length  # type: ignore[arg-type]
        if not 0 < d < 1:
            raise MeshError(
                f"geometric_points: the first spacing {first!r} must lie strictly between 0 and the "
                f"segment length {length:g}"
            )
        if n == 1:
            raise MeshError(
                "geometric_points: with one cell the first spacing is the whole segment; use n >= 2"
            )
        if abs(d * n - 1.0) < 1e-14:
            r = 1.0
        else:

            def f(r: float) -> float:
                if abs(r - 1.0) < 1e-12:
                    return d * n - 1.0
                return d * np.expm1(n * np.log(r)) / (r - 1.0) - 1.0

            if d * n < 1:  # growing spacings
                hi = d ** (-1.0 / (n - 1))  # d * hi**(n-1) = 1 >= f root
                r = brentq(f, 1.0 + 1e-15, hi, xtol=1e-15, rtol=1e-15, maxiter=500)
            else:  # shrinking spacings
                r = brentq(f, 1e-12, 1.0 - 1e-15, xtol=1e-15, rtol=1e-15, maxiter=500)
    steps = r ** np.arange(n, dtype=np.float64)
    s = np.concatenate([[0.0], np.cumsum(steps)])
    return _scale(s / s[-1], a, b)


def _vinokur_u(t: float, xi: np.ndarray) -> np.ndarray:
    """Symmetric two-sided stretching u(xi) on [0, 1] with parameter t.

    t > 0: u = sinh(t xi) / (2 sinh(t/2) cosh(t (xi - 1/2)))  (= 1/2 + tanh(t(xi-1/2)) / (2 tanh(t/2)),
    written without cancellation); t < 0: the same with sin/cos and t -> |t| < pi (end spacings larger
    than uniform); t = 0: u = xi.
    """
    if abs(t) < 1e-7:
        return xi.copy()
    if t > 0:
        return np.sinh(t * xi) / (2.0 * np.sinh(0.5 * t) * np.cosh(t * (xi - 0.5)))
    d = -t
    return np.sin(d * xi) / (2.0 * np.sin(0.5 * d) * np.cos(d * (xi - 0.5)))


def _vinokur_s(t: float, first: float, xi: np.ndarray) -> tuple[np.ndarray, float]:
    """s(xi) = u / (A + (1 - A) u) with A chosen so that s(xi_1) = first exactly; returns (s, A)."""
    u = _vinokur_u(t, xi)
    u1 = u[1]
    A = u1 * (1.0 / first - 1.0) / (1.0 - u1)
    s = u / (A + (1.0 - A) * u)
    return s, A


def tanh_points(n: int, a: float, b: float, first: float, last: float) -> np.ndarray:
    """n + 1 points from a to b clustered towards both ends, spacing ``first`` at a and ``last`` at b.

    Two-sided tanh stretching of Vinokur (1983, J. Comput. Phys. 50, 215-234):
    u = 1/2 (1 + tanh(t (xi - 1/2)) / tanh(t/2)), s = u / (A + (1 - A) u), xi = i / n.
    A is fixed by the first spacing and t is found with brentq so that both *discrete* end
    spacings equal the requested ones (to round-off), not only the continuous slopes.
    End spacings larger than the uniform spacing use the tan branch (t < 0).
    """
    n = _check_n(n, "tanh_points")
    length = abs(b - a)
    if length == 0:
        raise MeshError("tanh_points: the segment has zero length (a == b)")
    d0, d1 = float(first) / length, float(last) / length
    if not (d0 > 0 and d1 > 0 and d0 + d1 < 1):
        raise MeshError(
            f"tanh_points: end spacings first={first!r}, last={last!r} must be positive and add up to less "
            f"than the segment length {length:g}"
        )
    if n < 3:
        raise MeshError("tanh_points: two-sided clustering needs at least 3 cells")
    xi = np.arange(n + 1, dtype=np.float64) / n

    def g(t: float) -> float:
        s, _ = _vinokur_s(t, d0, xi)
        return np.log((1.0 - s[-2]) / d1)

    lo, hi = -np.pi * (1.0 - 1e-9), 1.0
    while g(hi) > 0:
        hi *= 2.0
        if hi > 700:
            raise MeshError(
                f"tanh_points: cannot reach end spacings {first!r} and {last!r} with {n} cells on a segment "
                f"of length {length:g}; use more cells or larger spacings"
            )
    if g(lo) < 0:
        raise MeshError(
            f"tanh_points: end spacings {first!r} and {last!r} are too large for {n} cells on a segment of "
            f"length {length:g}; use fewer cells or smaller end spacings"
        )
    t = brentq(g, lo, hi, xtol=1e-14, rtol=1e-15, maxiter=500)
    s, _ = _vinokur_s(t, d0, xi)
    s[0], s[-1] = 0.0, 1.0
    if np.any(np.diff(s) <= 0):
        raise MeshError(f"tanh_points: end spacings {first!r}, {last!r} give a non-monotone distribution")
    return _scale(s, a, b)


def symmetric_geometric_points(n: int, a: float, b: float, first: float) -> np.ndarray:
    """n + 1 points (n even) clustered equally towards both ends: two mirrored geometric halves.

    Each half has first spacing ``first`` at its end and a constant growth ratio towards the
    middle; for given end spacings this keeps the largest ratio of neighbouring spacings lower than
    the tanh clustering.
    """
    n = _check_n(n, "symmetric_geometric_points")
    if n % 2:
        raise MeshError(f"symmetric_geometric_points: the number of cells must be even, got {n}")
    mid = 0.5 * (a + b)
    half = geometric_points(n // 2, a, mid, first=first) if n > 2 else np.array([a, mid])
    x = np.concatenate([half, (a + b - half[::-1])[1:]])
    x[n // 2] = mid
    return _scale((x - a) / (b - a), a, b)


def spacing_ratios(x: np.ndarray) -> np.ndarray:
    """Ratios of neighbouring spacings, max(dx_i+1/dx_i, dx_i/dx_i+1) for each interior point."""
    dx = np.diff(np.asarray(x, dtype=np.float64))
    q = dx[1:] / dx[:-1]
    return np.maximum(q, 1.0 / q)


# ------------------------------------------------------------------------------------------
# structured blocks glued by index
# ------------------------------------------------------------------------------------------

_SIDES = ("left", "right", "bottom", "top")


def rectangle_points(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """(nx+1, ny+1, 2) grid points of the tensor product of two distributions (exact copies of x, y)."""
    X, Y = np.meshgrid(np.asarray(x, float), np.asarray(y, float), indexing="ij")
    return np.stack([X, Y], axis=-1)


def quadrilateral_points(s: np.ndarray, t: np.ndarray, corners: np.ndarray) -> np.ndarray:
    """(ns, nt, 2) grid points of the bilinear map of [0,1]^2 onto the quadrilateral ``corners``.

    corners = [P00, P10, P11, P01] (counter-clockwise); s, t are distributions on [0, 1].
    P(s, t) = (1-s)(1-t) P00 + s(1-t) P10 + s t P11 + (1-s) t P01.
    """
    c = np.asarray(corners, float).reshape(4, 2)
    S, T = np.meshgrid(np.asarray(s, float), np.asarray(t, float), indexing="ij")
    return (
        ((1 - S) * (1 - T))[..., None] * c[0]
        + (S * (1 - T))[..., None] * c[1]
        + (S * T)[..., None] * c[2]
        + ((1 - S) * T)[..., None] * c[3]
    )


def _side(idx: np.ndarray, side: str) -> np.ndarray:
    if side == "left":
        return idx[0, :]
    if side == "right":
        return idx[-1, :]
    if side == "bottom":
        return idx[:, 0]
    if side == "top":
        return idx[:, -1]
    raise MeshError(f"unknown block side {side!r}; use one of {_SIDES}")


def _side_view(a: np.ndarray, side: str) -> np.ndarray:
    return {"left": a[0, :], "right": a[-1, :], "bottom": a[:, 0], "top": a[:, -1]}[side]


class BlockAssembly:
    """Points, cells and named boundary edges of a multi-block (and optionally partly unstructured) mesh.

    Blocks are (ni+1, nj+1, 2) point grids. A block side listed in ``same`` reuses the point
    indices of another block's side (the two must have the same number of points and coincide to
    round-off; their coordinates are taken from the block added first). Cells of a block are the
    quads (i, j), (i+1, j), (i+1, j+1), (i, j+1); with ``triangles=True`` each quad is split along
    a diagonal that alternates in a checker pattern: (i + j) even -> diagonal (i, j)-(i+1, j+1),
    odd -> diagonal (i+1, j)-(i, j+1).
    """

    def __init__(self) -> None:
        self._points: list[np.ndarray] = []
        self.n_points = 0
        self.blocks: dict[str, np.ndarray] = {}
        self._cells: list[np.ndarray] = []
        self._edges: dict[str, list[np.ndarray]] = {}

    @property
    def points(self) -> np.ndarray:
        return np.concatenate(self._points) if self._points else np.zeros((0, 2))

    def add_points(self, xy: np.ndarray) -> np.ndarray:
        """Append free points; returns their global indices."""
        xy = np.asarray(xy, float).reshape(-1, 2)
        ids = np.arange(self.n_points, self.n_points + len(xy))
        self._points.append(xy)
        self.n_points += len(xy)
        return ids

    def add_block(
        self,
        name: str,
        xy: np.ndarray,
        same: tuple[tuple[str, str, str], ...] = (),
        same_point: tuple[tuple[tuple[int, int], str, tuple[int, int]], ...] = (),
        triangles: bool = False,
        cells: bool = True,
    ) -> np.ndarray:
        """Add a block of grid points ``xy`` (ni+1, nj+1, 2); returns its global index grid.

        same: (my_side, other_block, other_side) triples; same_point: ((i, j), other_block, (i2, j2)).
        ``cells=False`` adds the points only (used to reserve indices for boundary points).
        """
        if name in self.blocks:
            raise MeshError(f"block {name!r} added twice")
        xy = np.asarray(xy, float)
        if xy.ndim != 3 or xy.shape[2] != 2 or min(xy.shape[:2]) < 2:
            raise MeshError(f"block {name!r}: points must be an (ni+1, nj+1, 2) array with ni, nj >= 1")
        allp = self.points
        scale = float(np.abs(xy).max()) + float(np.abs(allp).max() if len(allp) else 0.0) + 1.0
        idx = np.full(xy.shape[:2], -1, dtype=np.int64)

        def link(mine: np.ndarray, theirs: np.ndarray, what: str) -> None:
            mine_xy = mine.reshape(-1, 2)
            th = theirs.ravel()
            if len(th) != len(mine_xy):
                raise MeshError(f"block {name!r}: {what} has {len(mine_xy)} points, the other side {len(th)}")
            err = np.abs(allp[th] - mine_xy).max()
            if err > 1e-12 * scale:
                raise MeshError(
                    f"block {name!r}: {what} does not coincide with the other block (off by {err:.3g})"
                )

        for my_side, other, other_side in same:
            theirs = _side(self.blocks[other], other_side)
            link(_side_view(xy, my_side), theirs, f"side {my_side!r} glued to {other!r}.{other_side}")
            _side_view(idx, my_side)[:] = theirs
        for (i, j), other, (i2, j2) in same_point:
            th = self.blocks[other][i2, j2]
            link(xy[i, j], np.array([th]), f"point ({i}, {j}) glued to {other!r} ({i2}, {j2})")
            idx[i, j] = th
        free = idx < 0
        idx[free] = self.add_points(xy[free])
        self.blocks[name] = idx
        if cells:
            self._cells.append(_block_cells(idx, self.points, triangles))
        return idx

    def add_cells(self, cells: np.ndarray) -> None:
        """Append cells given as global point indices (one row per cell)."""
        self._cells.append(np.asarray(cells, dtype=np.int64))

    def add_patch(self, patch: str, block: str, side: str) -> None:
        """Tag the edges of a block side as belonging to boundary patch ``patch``."""
        self.add_patch_polyline(patch, _side(self.blocks[block], side))

    def add_patch_polyline(self, patch: str, ids: np.ndarray) -> None:
        """Tag the edges between consecutive points ``ids`` as belonging to ``patch``."""
        ids = np.asarray(ids, dtype=np.int64)
        self._edges.setdefault(patch, []).append(np.stack([ids[:-1], ids[1:]], axis=1))

    def boundary(self) -> dict[str, np.ndarray]:
        return {k: np.concatenate(v) for k, v in self._edges.items()}

    def cells(self) -> list[np.ndarray]:
        return self._cells

    def to_mesh(self, source: str) -> Mesh:
        """Build the Mesh (no point may be duplicated or unused: gluing is by index)."""
        widths = {c.shape[1] for c in self._cells}
        if len(widths) == 1:
            cells: list | np.ndarray = np.concatenate(self._cells)
        else:
            cells = [row for c in self._cells for row in c]
        mesh = Mesh.from_arrays(self.points, cells, self.boundary(), source=source)
        if mesh.n_points != self.n_points or mesh.notes:
            raise MeshError(f"{source}: internal error in the generator: {'; '.join(mesh.notes)}")
        return mesh


def _block_cells(idx: np.ndarray, points: np.ndarray, triangles: bool) -> np.ndarray:
    """Counter-clockwise quads (or split triangles) of a block index grid."""
    p00 = idx[:-1, :-1]
    p10 = idx[1:, :-1]
    p11 = idx[1:, 1:]
    p01 = idx[:-1, 1:]
    # orientation of the block from its first cell
    a, b, d = points[p00[0, 0]], points[p10[0, 0]], points[p01[0, 0]]
    if (b[0] - a[0]) * (d[1] - a[1]) - (b[1] - a[1]) * (d[0] - a[0]) < 0:
        p00, p10, p11, p01 = p10, p00, p01, p11  # mirror i: keeps (i, j) parity of each cell
    if not triangles:
        return np.stack([p00, p10, p11, p01], axis=-1).reshape(-1, 4)
    ni, nj = p00.shape
    ii, jj = np.meshgrid(np.arange(ni), np.arange(nj), indexing="ij")
    even = ((ii + jj) % 2 == 0)[..., None]
    t1 = np.where(even, np.stack([p00, p10, p11], -1), np.stack([p00, p10, p01], -1))
    t2 = np.where(even, np.stack([p00, p11, p01], -1), np.stack([p10, p11, p01], -1))
    return np.stack([t1, t2], axis=2).reshape(-1, 3)


# ------------------------------------------------------------------------------------------
# triangulation of a polygonal region with fixed boundary points
# ------------------------------------------------------------------------------------------


def _corner_polygon(xy: np.ndarray) -> np.ndarray:
    """The vertices of a closed loop where it turns (collinear boundary points dropped)."""
    prev = np.roll(xy, 1, axis=0)
    nxt = np.roll(xy, -1, axis=0)
    a = xy - prev
    b = nxt - xy
    cross = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
    turn = np.abs(cross) > 1e-9 * np.hypot(*a.T) * np.hypot(*b.T)
    return xy[turn]


def _inside(poly: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Even-odd point-in-polygon test of points p (n, 2) against polygon vertices (m, 2)."""
    x, y = p[:, 0][:, None], p[:, 1][:, None]
    x0, y0 = poly[:, 0][None, :], poly[:, 1][None, :]
    x1, y1 = np.roll(poly[:, 0], -1)[None, :], np.roll(poly[:, 1], -1)[None, :]
    straddle = (y0 > y) != (y1 > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
    return (np.count_nonzero(straddle & (x < xc), axis=1) % 2) == 1


def _dist_to_polygon(poly: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Distance from points p to the edges of a polygon."""
    a = poly[None, :, :]
    b = np.roll(poly, -1, axis=0)[None, :, :]
    q = p[:, None, :]
    ab = b - a
    t = np.clip(np.einsum("ijk,ijk->ij", q - a, ab) / np.einsum("ijk,ijk->ij", ab, ab), 0.0, 1.0)
    d = q - (a + t[..., None] * ab)
    return np.sqrt(np.einsum("ijk,ijk->ij", d, d)).min(axis=1)


class _Sizer:
    """Target edge length h(p) = min(h_max, min_k (L_k + g |p - m_k|)) over boundary segments k
    (length L_k, mid-point m_k): the boundary spacing, growing linearly at rate g away from it."""

    def __init__(self, mids: np.ndarray, lengths: np.ndarray, grading: float, h_max: float):
        self.m, self.L, self.g, self.h_max = mids, lengths, grading, h_max

    def __call__(self, p: np.ndarray) -> np.ndarray:
        out = np.empty(len(p))
        step = max(1, int(4_000_000 // max(len(self.m), 1)))
        for s in range(0, len(p), step):
            q = p[s : s + step]
            d = np.sqrt(((q[:, None, :] - self.m[None, :, :]) ** 2).sum(-1))
            out[s : s + step] = (self.L[None, :] + self.g * d).min(axis=1)
        return np.minimum(out, self.h_max)


def triangulate_region(
    points: np.ndarray,
    loop: np.ndarray,
    h_max: float,
    grading: float = 0.2,
    n_smooth: int = 40,
) -> tuple[np.ndarray, np.ndarray]:
    """Triangles filling the polygon whose boundary is the closed loop of point indices ``loop``.

    The loop (counter-clockwise, first point not repeated) keeps all its points, so the triangles
    conform to whatever lies outside it. Interior points: a quadtree refined until each box is no
    larger than the target size h(p) (see _Sizer), then smoothed by the truss-force iteration of
    Persson & Strang (2004, SIAM Review 46, 329-345) with the boundary points fixed. No interior
    point may enter the circle on any boundary segment as diameter (enlarged by 20 %), so every
    boundary segment is an edge of the Delaunay triangulation (a Gabriel edge) and the triangles
    inside the polygon tile it exactly. Deterministic (no random numbers).

    Returns (new interior points (k, 2), triangles (t, 3)) with triangle indices in the numbering
    of ``points`` followed by the new points; triangles are counter-clockwise.
    """
    loop = np.asarray(loop, dtype=np.int64)
    B = np.asarray(points, float)[loop]
    nb = len(B)
    seg_a, seg_b = B, np.roll(B, -1, axis=0)
    L = np.hypot(*(seg_b - seg_a).T)
    mids = 0.5 * (seg_a + seg_b)
    poly = _corner_polygon(B)
    area_poly = 0.5 * np.sum(poly[:, 0] * np.roll(poly[:, 1], -1) - np.roll(poly[:, 0], -1) * poly[:, 1])
    if area_poly <= 0:
        raise MeshError("triangulate_region: the boundary loop must run counter-clockwise around the region")
    size = _Sizer(mids, L, grading, h_max)

    # protected discs: diametral circles of the segments (enlarged) and discs around boundary points
    Lprev = np.roll(L, 1)
    prot_c = np.concatenate([mids, B])
    prot_r = np.concatenate([0.6 * L, 0.5 * np.minimum(L, Lprev)])
    prot_tree = cKDTree(prot_c)
    r_prot_max = float(prot_r.max())

    def allowed(p: np.ndarray) -> np.ndarray:
        ok = _inside(poly, p)
        if not ok.any():
            return ok
        idx = np.nonzero(ok)[0]
        near = prot_tree.query_ball_point(p[idx], r_prot_max)
        for k, lst in zip(idx, near):
            if lst:
                lst = np.asarray(lst)
                if np.any(np.hypot(*(prot_c[lst] - p[k]).T) < prot_r[lst]):
                    ok[k] = False
        return ok

    # quadtree seeding
    lo, hi = poly.min(axis=0), poly.max(axis=0)
    side = float(min(hi - lo))
    nxy = np.maximum(1, np.ceil((hi - lo) / side).astype(int))
    gx, gy = np.meshgrid(lo[0] + side * (np.arange(nxy[0]) + 0.5), lo[1] + side * (np.arange(nxy[1]) + 0.5))
    boxes = np.stack([gx.ravel(), gy.ravel()], axis=1)
    bsize = side
    seeds = []
    while len(boxes):
        keep = _inside(poly, boxes) | (_dist_to_polygon(poly, boxes) < 0.75 * bsize)
        boxes = boxes[keep]
        h = size(boxes)
        split = bsize > 1.15 * h
        seeds.append(boxes[~split])
        q = 0.25 * bsize
        b = boxes[split]
        boxes = np.concatenate([b + [-q, -q], b + [q, -q], b + [-q, q], b + [q, q]])
        bsize *= 0.5
        if bsize < 1e-6 * side * 1e-6:
            raise MeshError(
                "triangulate_region: quadtree refinement did not stop; check the boundary spacing"
            )
    P = np.concatenate(seeds)
    P = P[allowed(P)]

    def delaunay(P: np.ndarray) -> np.ndarray:
        allp = np.concatenate([B, P])
        tri = Delaunay(allp).simplices
        c = allp[tri].mean(axis=1)
        tri = tri[_inside(poly, c)]
        return tri

    h_int = size(P)
    h_fix = 0.5 * (L + Lprev)
    for it in range(n_smooth):
        if it % 5 == 4:
            h_int = size(P)
        tri = delaunay(P)
        e = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
        e = np.unique(np.sort(e, axis=1), axis=0)
        allp = np.concatenate([B, P])
        hall = np.concatenate([h_fix, h_int])
        vec = allp[e[:, 0]] - allp[e[:, 1]]
        ln = np.hypot(*vec.T)
        hb = 0.5 * (hall[e[:, 0]] + hall[e[:, 1]])
        L0 = hb * 1.2 * np.sqrt(np.sum(ln**2) / np.sum(hb**2))
        F = np.maximum(L0 - ln, 0.0) / ln
        Fv = F[:, None] * vec
        tot = np.zeros_like(allp)
        np.add.at(tot, e[:, 0], Fv)
        np.add.at(tot, e[:, 1], -Fv)
        Pn = P + 0.2 * tot[nb:]
        ok = allowed(Pn)
        P = np.where(ok[:, None], Pn, P)

    tri = delaunay(P)
    allp = np.concatenate([B, P])
    v = allp[tri]
    ar = 0.5 * (
        (v[:, 1, 0] - v[:, 0, 0]) * (v[:, 2, 1] - v[:, 0, 1])
        - (v[:, 1, 1] - v[:, 0, 1]) * (v[:, 2, 0] - v[:, 0, 0])
    )
    tri[ar < 0] = tri[ar < 0][:, [0, 2, 1]]
    ar = np.abs(ar)
    if np.any(ar <= 1e-12 * area_poly):
        raise MeshError("triangulate_region: a degenerate triangle was produced; refine the boundary spacing")
    # every boundary segment must be a triangle edge exactly once, and the areas must add up
    e = np.concatenate([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]])
    seg = np.stack([np.arange(nb), np.roll(np.arange(nb), -1)], axis=1)
    n_all = len(allp)
    ekeys, counts = np.unique(np.sort(e, axis=1) @ np.array([n_all, 1]), return_counts=True)
    skeys = np.sort(seg, axis=1) @ np.array([n_all, 1])
    pos = np.searchsorted(ekeys, skeys)
    pos = np.minimum(pos, len(ekeys) - 1)
    if not np.all((ekeys[pos] == skeys) & (counts[pos] == 1)):
        k = int(np.nonzero(~((ekeys[pos] == skeys) & (counts[pos] == 1)))[0][0])
        raise MeshError(
            f"triangulate_region: boundary segment at {mids[k]} is not an edge of the triangulation"
        )
    if abs(ar.sum() - area_poly) > 1e-9 * area_poly:
        raise MeshError(f"triangulate_region: triangles cover {ar.sum():.12g}, the region {area_poly:.12g}")
    # renumber: loop points -> their global indices; new points appended after ``points``
    glob = np.concatenate([loop, len(points) + np.arange(len(P))])
    return P, glob[tri]
