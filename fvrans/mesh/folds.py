"""Folded meshes: self-intersecting cells and cells that overlap each other.

:func:`build_mesh <fvrans.mesh.mesh.build_mesh>` already makes every cell counter-clockwise with
a positive area and every shared edge run in opposite directions in its two cells. A node moved
past a grid line can still leave a mesh that covers part of the plane twice. Four tests, all
O(n) or O(n log n), rule that out:

1. each cell is a simple polygon: no two of its non-adjacent edges meet, and no corner turns
   back on itself (an interior angle of 0 or 360 degrees);
2. the interior angles of the cells around a point sum to 360 degrees for a point inside the
   mesh and to less for a point on its boundary (more means the cells fold over each other
   there);
3. no two boundary edges cross (a spatial hash of the boundary edges finds the candidate pairs);
4. just inside each boundary loop, the boundary winds once around the point.

With 1-3 the mesh is a local one-to-one map of the plane whose boundary curves do not cross; the
number of cells over a point is then the winding number of the boundary around it, constant
between the boundary curves, and 4 checks that it is one next to every curve: no point is
covered twice.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

import numpy as np

from fvrans.errors import MeshError

if TYPE_CHECKING:
    from fvrans.mesh.mesh import Mesh

TWO_PI = 2.0 * math.pi
#: tolerance of the angle sums (radians); folds change a sum by a large part of a full turn
ANGLE_TOLERANCE = 1e-6
#: cells named in a message at most
N_NAMED = 8


def _cross(ax, ay, bx, by):
    return ax * by - ay * bx


def _corner_angles(points: np.ndarray, offsets: np.ndarray, flat: np.ndarray) -> np.ndarray:
    """Interior angle at each corner (entry of ``flat``) of counter-clockwise polygons, in (0, 2 pi)."""
    sizes = np.diff(offsets)
    cell_of = np.repeat(np.arange(len(sizes)), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt = flat[offsets[cell_of] + (pos + 1) % sizes[cell_of]]
    prv = flat[offsets[cell_of] + (pos - 1) % sizes[cell_of]]
    v = points[flat]
    u = points[prv] - v
    w = points[nxt] - v
    ang = np.arctan2(_cross(w[:, 0], w[:, 1], u[:, 0], u[:, 1]), w[:, 0] * u[:, 0] + w[:, 1] * u[:, 1])
    return np.where(ang < 0, ang + TWO_PI, ang)


def _segments_cross(p1, p2, q1, q2, eps) -> np.ndarray:
    """Segments p1-p2 and q1-q2 (arrays (m, 2)) cross at a point inside both (proper crossing)."""
    d1 = _cross(*(p2 - p1).T, *(q1 - p1).T)
    d2 = _cross(*(p2 - p1).T, *(q2 - p1).T)
    d3 = _cross(*(q2 - q1).T, *(p1 - q1).T)
    d4 = _cross(*(q2 - q1).T, *(p2 - q1).T)
    return (((d1 > eps) & (d2 < -eps)) | ((d1 < -eps) & (d2 > eps))) & \
        (((d3 > eps) & (d4 < -eps)) | ((d3 < -eps) & (d4 > eps)))


def _self_intersecting(points, offsets, flat, eps) -> np.ndarray:
    """Cells (indices) two of whose non-adjacent edges cross."""
    sizes = np.diff(offsets)
    bad: list[np.ndarray] = []
    for k in np.unique(sizes):
        if k < 4:
            continue
        cells = np.flatnonzero(sizes == k)
        idx = flat[offsets[cells][:, None] + np.arange(k)[None, :]]
        hit = np.zeros(len(cells), dtype=bool)
        for i in range(k):
            for j in range(i + 2, k):
                if i == 0 and j == k - 1:
                    continue  # adjacent through the wrap-around
                a, b = points[idx[:, i]], points[idx[:, (i + 1) % k]]
                c, d = points[idx[:, j]], points[idx[:, (j + 1) % k]]
                hit |= _segments_cross(a, b, c, d, eps)
        bad.append(cells[hit])
    return np.concatenate(bad) if bad else np.zeros(0, dtype=np.int64)


def _candidate_pairs(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Pairs (i, j), i < j, of segments a-b that may cross: a hierarchy of uniform grids (cell
    sizes h0 2^L, h0 the shortest segment); a segment lives on the first level whose cell is
    at least its length (so it touches at most 2 x 2 cells there), and is paired with the
    segments of its level and of finer levels that touch the same cells. O(m log m) entries."""
    m = len(a)
    if m < 2:
        return np.zeros((0, 2), dtype=np.int64)
    lo, hi = np.minimum(a, b), np.maximum(a, b)
    length = np.hypot(*(b - a).T)
    h0 = float(length[length > 0].min()) if np.any(length > 0) else 1.0
    level = np.ceil(np.log2(np.maximum(length / h0, 1.0))).astype(np.int64)
    origin = lo.min(axis=0)
    pairs: list[np.ndarray] = []
    for lv in np.unique(level):
        h = h0 * 2.0 ** int(lv)
        segs = np.flatnonzero(level <= lv)
        c0 = np.floor((lo[segs] - origin) / h).astype(np.int64)
        c1 = np.floor((hi[segs] - origin) / h).astype(np.int64)
        c1 = np.minimum(c1, c0 + 1)  # at most 2 x 2 cells (rounding)
        ncol = int(c1[:, 0].max()) + 2
        keys, owners = [], []
        for dx in (0, 1):
            for dy in (0, 1):
                ok = (c0[:, 0] + dx <= c1[:, 0]) & (c0[:, 1] + dy <= c1[:, 1])
                keys.append((c0[ok, 1] + dy) * ncol + c0[ok, 0] + dx)
                owners.append(segs[ok])
        key, seg = np.concatenate(keys), np.concatenate(owners)
        order = np.argsort(key, kind="stable")
        key, seg = key[order], seg[order]
        starts = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
        counts = np.diff(np.r_[starts, len(key)])
        group = np.repeat(np.arange(len(starts)), counts)
        top = np.flatnonzero((level[seg] == lv) & (counts[group] > 1))
        n = counts[group[top]]
        rep = np.repeat(top, n)
        partner = starts[group[rep]] + np.arange(len(rep)) - np.repeat(np.cumsum(n) - n, n)
        pairs.append(np.stack([seg[rep], seg[partner]], axis=1))
    p = np.sort(np.concatenate(pairs), axis=1)
    return np.unique(p[p[:, 0] != p[:, 1]], axis=0)


def _winding(px: float, py: float, a: np.ndarray, b: np.ndarray) -> int:
    """Winding number of the oriented segments a -> b around the point (px, py)."""
    side = _cross(b[:, 0] - a[:, 0], b[:, 1] - a[:, 1], px - a[:, 0], py - a[:, 1])
    up = (a[:, 1] <= py) & (b[:, 1] > py) & (side > 0)
    down = (a[:, 1] > py) & (b[:, 1] <= py) & (side < 0)
    return int(up.sum()) - int(down.sum())


def fold_problems(mesh: Mesh) -> list[str]:
    """What makes ``mesh`` cover part of the plane twice (see the module docstring), one text per
    kind of problem naming the cells (at most :data:`N_NAMED` each) and where they are; empty for
    a mesh without folds."""
    pts, off, flat = mesh.points, mesh.cell_offsets, mesh.cell_points
    span = float(np.ptp(pts, axis=0).max()) or 1.0
    eps = 1e-14 * span * span
    sizes = np.diff(off)
    cell_of = np.repeat(np.arange(mesh.n_cells), sizes)
    problems: list[str] = []

    def where(cells: np.ndarray) -> str:
        cells = np.unique(cells)
        shown = []
        for c in cells[:N_NAMED]:
            x, y = pts[flat[off[c] : off[c + 1]]].mean(axis=0)
            shown.append(f"{int(c)} near ({x:.6g}, {y:.6g})")
        more = f" and {len(cells) - N_NAMED} more" if len(cells) > N_NAMED else ""
        return f"{len(cells)} cell(s): " + ", ".join(shown) + more

    # 1. simple polygons
    ang = _corner_angles(pts, off, flat)
    spike = (ang < 1e-12) | (ang > TWO_PI - 1e-12)
    crossing = _self_intersecting(pts, off, flat, eps)
    bad = np.union1d(cell_of[spike], crossing)
    if len(bad):
        problems.append(f"self-intersecting (non-simple) polygons, {where(bad)}; their edges cross or turn back "
                        "on themselves")
    # 2. angle sums around the points
    total = np.bincount(flat, weights=ang, minlength=len(pts))
    nb = mesh.n_internal_faces
    on_boundary = np.zeros(len(pts), dtype=bool)
    on_boundary[mesh.face_points[nb:].ravel()] = True
    fold = np.where(on_boundary, total > TWO_PI + ANGLE_TOLERANCE, np.abs(total - TWO_PI) > ANGLE_TOLERANCE)
    fold &= np.bincount(flat, minlength=len(pts)) > 0
    if fold.any():
        at = np.flatnonzero(fold)
        cells = cell_of[np.isin(flat, at)]
        p = at[0]
        problems.append(f"overlapping (folded) cells around {len(at)} point(s), the first at ({pts[p, 0]:.6g}, "
                        f"{pts[p, 1]:.6g}) where the cells' angles add up to {math.degrees(total[p]):.6g} "
                        f"degrees instead of {'at most ' if on_boundary[p] else ''}360: {where(cells)}")
    # 3. boundary edges that cross
    bfp = mesh.face_points[nb:]
    a, b = pts[bfp[:, 0]], pts[bfp[:, 1]]
    pairs = _candidate_pairs(a, b)
    if len(pairs):
        share = (bfp[pairs[:, 0]][:, :, None] == bfp[pairs[:, 1]][:, None, :]).any(axis=(1, 2))
        pairs = pairs[~share]
        hit = _segments_cross(a[pairs[:, 0]], b[pairs[:, 0]], a[pairs[:, 1]], b[pairs[:, 1]], eps)
        if hit.any():
            owners = mesh.face_owner[nb:][pairs[hit].ravel()]
            i, j = pairs[hit][0]
            problems.append(f"the boundary crosses itself ({int(hit.sum())} pair(s) of boundary faces, e.g. faces "
                            f"{nb + int(i)} and {nb + int(j)}): the cells fold over the boundary, {where(owners)}")
    # 4. once around the points next to each boundary loop (only when 1-3 hold)
    if not problems and len(bfp):
        from scipy.sparse import coo_matrix
        from scipy.sparse.csgraph import connected_components

        n = len(pts)
        graph = coo_matrix((np.ones(len(bfp)), (bfp[:, 0], bfp[:, 1])), shape=(n, n))
        _, label = connected_components(graph, directed=False)
        loops = np.unique(label[bfp[:, 0]], return_index=True)[1]
        for f in loops:
            mid = 0.5 * (a[f] + b[f])
            c = mesh.face_owner[nb + f]
            centre = pts[flat[off[c] : off[c + 1]]].mean(axis=0)
            x, y = mid + 1e-6 * (centre - mid)
            w = _winding(x, y, a, b)
            if w != 1:
                problems.append(f"the cells next to boundary face {nb + int(f)} at ({mid[0]:.6g}, {mid[1]:.6g}) lie "
                                f"where the boundary winds {w} times (once for cells that cover the plane once): "
                                f"the mesh overlaps itself there, {where(np.array([c]))}")
                break
    return problems


def check_folds(mesh: Mesh) -> None:
    """Raise MeshError naming the cells when ``mesh`` has self-intersecting or overlapping cells."""
    problems = fold_problems(mesh)
    if problems:
        raise MeshError(f"{mesh.source}: the mesh is folded: " + "; ".join(problems) +
                        "; move the points back so that no cell crosses itself or another cell (re-mesh or "
                        "smooth that region)")


__all__ = ["check_folds", "fold_problems"]
