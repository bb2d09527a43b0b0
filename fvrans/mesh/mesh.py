"""The plain unstructured 2D mesh object and its construction from points, cells and patches.

Faces are the edges of the polygons. Internal faces come first, ordered by (owner, neighbour);
boundary faces follow, grouped patch by patch. Each face is stored with its two end points in
the order they are met walking counter-clockwise around the owner cell, so the outward unit
normal of the owner is ``(dy, -dx) / length``.
"""

from __future__ import annotations

import functools
import logging
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from fvrans.errors import MeshError

log = logging.getLogger(__name__)

#: largest coordinate magnitude of a point used by a cell (beyond it areas overflow floats)
MAX_COORDINATE = 1e30


@dataclass(frozen=True)
class Patch:
    """A named group of boundary faces: ``faces = range(start, stop)`` in the face arrays."""

    name: str
    start: int
    stop: int

    @property
    def size(self) -> int:
        return self.stop - self.start

    @property
    def faces(self) -> np.ndarray:
        return np.arange(self.start, self.stop)


@dataclass(frozen=True)
class PeriodicPair:
    """Two boundary patches joined into internal faces: patch ``second`` is patch ``first`` moved
    by ``translation``. Internal faces ``start .. stop-1`` are the joined faces, stored as seen from
    the cell on the ``first`` side (owner) with the neighbour on the ``second`` side, whose image
    beside the owner lies at x_N - translation."""

    first: str
    second: str
    translation: tuple[float, float]
    start: int
    stop: int

    @property
    def size(self) -> int:
        return self.stop - self.start


@dataclass(frozen=True)
class Mesh:
    """Unstructured 2D polygon mesh with face topology and named boundary patches.

    Attributes
    ----------
    points : (n_points, 2) float
    cell_offsets : (n_cells + 1,) int; cell ``c`` has points ``cell_points[cell_offsets[c]:cell_offsets[c+1]]``
        in counter-clockwise order.
    cell_points : int array of polygon vertex indices.
    face_points : (n_faces, 2) int, end points ordered counter-clockwise around the owner.
    face_owner : (n_faces,) int.
    face_neighbour : (n_faces,) int, ``-1`` on boundary faces.
    n_internal_faces : internal faces are ``0 .. n_internal_faces - 1``.
    patches : named boundary patches, in face order.
    source : where the mesh came from (a file name or a description), used in messages.
    notes : what was repaired while building (re-oriented cells, merged points).
    periodic : translational periodic pairs joined into internal faces
        (:func:`fvrans.mesh.periodic.join_periodic`); empty for an ordinary mesh.
    """

    points: np.ndarray
    cell_offsets: np.ndarray
    cell_points: np.ndarray
    face_points: np.ndarray
    face_owner: np.ndarray
    face_neighbour: np.ndarray
    n_internal_faces: int
    patches: tuple[Patch, ...]
    source: str = "<in memory>"
    notes: tuple[str, ...] = field(default_factory=tuple)
    periodic: tuple[PeriodicPair, ...] = field(default_factory=tuple)

    def __repr__(self) -> str:
        joined = f", periodic {[(p.first, p.second) for p in self.periodic]}" if self.periodic else ""
        return (
            f"Mesh({self.source!r}: {self.n_cells} cells, {self.n_faces} faces "
            f"({self.n_internal_faces} internal), {self.n_points} points, "
            f"patches {[(p.name, p.size) for p in self.patches]}{joined})"
        )

    def face_shift(self) -> np.ndarray:
        """(n_faces, 2): the vector that moves each face's neighbour beside its owner (minus the
        translation of its periodic pair on joined faces, zero elsewhere)."""
        shift = np.zeros((self.n_faces, 2))
        for p in self.periodic:
            shift[p.start : p.stop] = -np.asarray(p.translation, dtype=float)
        return shift

    # -- sizes ---------------------------------------------------------------------------
    @property
    def n_cells(self) -> int:
        return len(self.cell_offsets) - 1

    @property
    def n_faces(self) -> int:
        return len(self.face_owner)

    @property
    def n_points(self) -> int:
        return len(self.points)

    @property
    def n_boundary_faces(self) -> int:
        return self.n_faces - self.n_internal_faces

    @property
    def patch_names(self) -> list[str]:
        return [p.name for p in self.patches]

    def patch(self, name: str) -> Patch:
        """The patch called ``name``; the error lists the names the mesh has."""
        for p in self.patches:
            if p.name == name:
                return p
        raise MeshError(
            f"{self.source}: no boundary patch named {name!r}; the mesh has "
            f"{', '.join(repr(n) for n in self.patch_names) or 'no patches'}"
        )

    def cell(self, c: int) -> np.ndarray:
        """Point indices of cell ``c`` (counter-clockwise)."""
        return self.cell_points[self.cell_offsets[c] : self.cell_offsets[c + 1]]

    def cell_sizes(self) -> np.ndarray:
        """Number of vertices of each cell."""
        return np.diff(self.cell_offsets)

    @functools.cached_property
    def cell_faces(self) -> tuple[np.ndarray, np.ndarray]:
        """(ptr, code): the faces of cell ``c`` are ``code[ptr[c]:ptr[c + 1]]``, ``f`` where ``c`` owns
        face f, ``-1 - f`` where it is f's neighbour, in the order of a loop over the faces (internal
        faces, then boundary faces; on a face that joins a cell to itself the owner side first). A
        sum over a cell's faces in this order equals the one a face loop adds up, to the last bit,
        and cells can be summed on separate threads (the parallel kernels' gather form)."""
        nc, ni = self.n_cells, self.n_internal_faces
        faces = np.arange(self.n_faces, dtype=np.int64)
        cells = np.concatenate([self.face_owner, self.face_neighbour[:ni]]).astype(np.int64)
        code = np.concatenate([faces, -1 - faces[:ni]])
        side = np.concatenate([np.zeros(self.n_faces, dtype=np.int64), np.ones(ni, dtype=np.int64)])
        order = np.lexsort((side, np.concatenate([faces, faces[:ni]]), cells))
        ptr = np.zeros(nc + 1, dtype=np.int64)
        np.cumsum(np.bincount(cells, minlength=nc), out=ptr[1:])
        return ptr, np.ascontiguousarray(code[order])

    def boundary_face_patch(self) -> np.ndarray:
        """For each boundary face (in order), the index of its patch in ``patches``."""
        out = np.empty(self.n_boundary_faces, dtype=np.int64)
        for i, p in enumerate(self.patches):
            out[p.start - self.n_internal_faces : p.stop - self.n_internal_faces] = i
        return out

    # -- construction --------------------------------------------------------------------
    @classmethod
    def from_arrays(
        cls,
        points: np.ndarray,
        cells: Sequence[Sequence[int]] | np.ndarray,
        boundary: Mapping[str, np.ndarray | Sequence[Sequence[int]]],
        source: str = "<in memory>",
    ) -> Mesh:
        """Build a mesh from points (n, 2), polygon cells and named boundary edges.

        ``cells`` is a list of point-index sequences (any mix of triangles, quads and polygons)
        or a 2D int array of equal-sized cells. ``boundary`` maps a patch name to an (m, 2)
        array of point-index pairs, one per boundary edge. Clockwise cells are re-oriented;
        duplicate and unused points are removed with a warning.

        >>> import numpy as np
        >>> pts = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)
        >>> m = Mesh.from_arrays(pts, [[0, 1, 2], [0, 2, 3]],
        ...                      {"wall": [[0, 1], [1, 2]], "open": [[2, 3], [3, 0]]})
        >>> m.n_cells, m.n_faces, m.n_internal_faces, m.patch_names
        (2, 5, 1, ['wall', 'open'])
        """
        return build_mesh(points, cells, boundary, source=source)

    def permuted(self, order: np.ndarray) -> Mesh:
        """A copy whose new cell ``i`` is old cell ``order[i]`` (topology rebuilt)."""
        order = np.asarray(order, dtype=np.int64)
        if sorted(order.tolist()) != list(range(self.n_cells)):
            raise MeshError(f"{self.source}: a cell permutation must contain each cell index once")
        if self.periodic:
            raise MeshError(f"{self.source}: renumber the cells before joining periodic patches")
        cells = [self.cell(c) for c in order]
        boundary = {p.name: self.face_points[p.start : p.stop] for p in self.patches}
        return build_mesh(self.points, cells, boundary, source=self.source, quiet=True, check_overlaps=False)


# ----------------------------------------------------------------------------------------
def _as_polygons(cells, source: str) -> tuple[np.ndarray, np.ndarray]:
    """Cells to (offsets, flat indices)."""
    if isinstance(cells, np.ndarray) and cells.ndim == 2:
        n, k = cells.shape
        offsets = np.arange(n + 1, dtype=np.int64) * k
        return offsets, cells.astype(np.int64).ravel()
    sizes = np.fromiter((len(c) for c in cells), dtype=np.int64, count=len(cells))
    offsets = np.zeros(len(sizes) + 1, dtype=np.int64)
    np.cumsum(sizes, out=offsets[1:])
    flat = (
        np.concatenate([np.asarray(c, dtype=np.int64) for c in cells])
        if len(cells)
        else np.zeros(0, dtype=np.int64)
    )
    return offsets, flat


def _signed_areas(points: np.ndarray, offsets: np.ndarray, flat: np.ndarray) -> np.ndarray:
    """Shoelace signed area of each polygon (positive when counter-clockwise)."""
    n = len(offsets) - 1
    sizes = np.diff(offsets)
    cell_of = np.repeat(np.arange(n), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt = offsets[cell_of] + (pos + 1) % sizes[cell_of]
    # relative to the cell's first vertex for round-off
    base = points[flat[offsets[cell_of]]]
    a = points[flat] - base
    b = points[flat[nxt]] - base
    cross = a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0]
    return 0.5 * np.bincount(cell_of, weights=cross, minlength=n)


def _edge_key(a: np.ndarray, b: np.ndarray, n_points: int) -> np.ndarray:
    lo = np.minimum(a, b)
    hi = np.maximum(a, b)
    return lo * np.int64(n_points) + hi


def _fmt_pt(points: np.ndarray, i: int) -> str:
    return f"({points[i, 0]:.6g}, {points[i, 1]:.6g})"


def build_mesh(
    points,
    cells,
    boundary: Mapping[str, object],
    source: str = "<in memory>",
    quiet: bool = False,
    unnamed: Callable[[np.ndarray, np.ndarray], Mapping[str, np.ndarray]] | None = None,
    check_overlaps: bool = True,
) -> Mesh:
    """Build faces, owners, neighbours and patches; check and repair the input (see Mesh).

    ``unnamed(points, edges)``, if given, is asked for the boundary edges (point-index pairs) that
    no patch of ``boundary`` names: it returns new patch names with boolean masks over those edges
    (see :func:`fvrans.mesh.io.unnamed_edge_rule`); edges left over are an error as without it.
    ``check_overlaps``: also refuse self-intersecting and overlapping cells
    (:func:`fvrans.mesh.folds.check_folds`; skipped when the points are those of a checked mesh)."""
    notes: list[str] = []
    pts = np.asarray(points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] not in (2, 3):
        raise MeshError(f"{source}: points must be an (n, 2) array, got shape {pts.shape}")
    pts = np.ascontiguousarray(pts[:, :2])
    if not np.all(np.isfinite(pts)):
        bad = int(np.nonzero(~np.isfinite(pts).all(axis=1))[0][0])
        raise MeshError(f"{source}: point {bad} has a non-finite coordinate; fix the mesh file")
    offsets, flat = _as_polygons(cells, source)
    n_cells = len(offsets) - 1
    if n_cells == 0:
        raise MeshError(
            f"{source}: the mesh has no 2D cells (triangles, quads or polygons); "
            "export the surface elements, not only the boundary lines"
        )
    sizes = np.diff(offsets)
    if np.any(sizes < 3):
        c = int(np.nonzero(sizes < 3)[0][0])
        raise MeshError(f"{source}: cell {c} has {sizes[c]} points; a 2D cell needs at least 3")
    if flat.min() < 0 or flat.max() >= len(pts):
        c = int(np.searchsorted(offsets, np.nonzero((flat < 0) | (flat >= len(pts)))[0][0], "right") - 1)
        raise MeshError(f"{source}: cell {c} refers to a point index outside 0..{len(pts) - 1}")

    bnd_in: dict[str, np.ndarray] = {}
    for name, edges in boundary.items():
        if not str(name).strip():
            raise MeshError(f"{source}: a boundary patch has the empty name {str(name)!r}; patch names become "
                            "case keys and file names — give the physical line group a name")
        e = np.asarray(edges, dtype=np.int64).reshape(-1, 2)
        if e.size and (e.min() < 0 or e.max() >= len(pts)):
            raise MeshError(f"{source}: patch {name!r} refers to a point index outside 0..{len(pts) - 1}")
        bnd_in[str(name)] = e

    # -- merge duplicate points (exact, after rounding to a tolerance of the bounding box of the
    # points the cells use: an unused far-away point neither sets the tolerance nor merges) --
    in_cells = np.zeros(len(pts), dtype=bool)
    in_cells[flat] = True
    upts = pts[in_cells]
    if np.abs(upts).max() > MAX_COORDINATE:
        i = int(np.flatnonzero(in_cells & (np.abs(pts) > MAX_COORDINATE).any(axis=1))[0])
        raise MeshError(f"{source}: point {i} at {_fmt_pt(pts, i)} lies beyond {MAX_COORDINATE:g}; give the "
                        "coordinates in units that keep them within that range")
    span = float(np.ptp(upts, axis=0).max()) or 1.0
    tol = 1e-12 * span
    # relative to the lower-left corner, so far-from-origin coordinates cannot overflow int64
    keys = np.empty((len(pts), 2), dtype=np.int64)
    keys[in_cells] = np.round((upts - upts.min(axis=0)) / tol).astype(np.int64)
    keys[~in_cells, 0] = -1 - np.arange(int((~in_cells).sum()))  # unused points: never merged
    keys[~in_cells, 1] = 0
    _, first, inverse = np.unique(keys, axis=0, return_index=True, return_inverse=True)
    inverse = inverse.ravel()
    if len(first) < len(pts):
        ndup = len(pts) - len(first)
        msg = f"{source}: merged {ndup} duplicate point(s)"
        notes.append(msg)
        if not quiet:
            log.warning(msg)
    # representative = the smallest original index among equals, keep original order
    rep = np.full(len(first), np.iinfo(np.int64).max, dtype=np.int64)
    np.minimum.at(rep, inverse, np.arange(len(pts)))
    remap = rep[inverse]
    flat = remap[flat]
    bnd_in = {k: remap[v] for k, v in bnd_in.items()}
    # -- drop unused points --
    used = np.zeros(len(pts), dtype=bool)
    used[flat] = True
    n_unused = int(len(pts) - used.sum()) - (len(pts) - len(first))
    if n_unused > 0:
        msg = f"{source}: removed {n_unused} point(s) used by no cell"
        notes.append(msg)
        if not quiet:
            log.warning(msg)
    new_index = np.cumsum(used) - 1
    for k, v in bnd_in.items():
        if v.size and not used[v].all():
            row = v[~used[v].all(axis=1)][0]
            i = int(row[0] if not used[row[0]] else row[1])
            raise MeshError(
                f"{source}: patch {k!r} has an edge at point {_fmt_pt(pts, i)} that touches no cell; "
                "tagged lines must lie on the boundary of the 2D cells"
            )
    pts = np.ascontiguousarray(pts[used])
    flat = new_index[flat]
    bnd_in = {k: new_index[v] for k, v in bnd_in.items()}

    # -- degenerate polygons: repeated consecutive points after merging --
    cell_of = np.repeat(np.arange(n_cells), sizes)
    pos = np.arange(len(flat)) - offsets[cell_of]
    nxt_idx = offsets[cell_of] + (pos + 1) % sizes[cell_of]
    rep_pt = flat == flat[nxt_idx]
    if rep_pt.any():
        k = int(np.nonzero(rep_pt)[0][0])
        c = int(cell_of[k])
        raise MeshError(
            f"{source}: cell {c} has a repeated (or coincident) vertex {_fmt_pt(pts, int(flat[k]))}; "
            "it has zero-length edges — remove or repair the cell"
        )

    # -- orientation --
    area = _signed_areas(pts, offsets, flat)
    scale = span * span
    tiny = np.abs(area) <= 1e-14 * scale
    if tiny.any():
        c = int(np.nonzero(tiny)[0][0])
        raise MeshError(
            f"{source}: cell {c} (points {flat[offsets[c]:offsets[c+1]].tolist()}, near "
            f"{_fmt_pt(pts, int(flat[offsets[c]]))}) has zero area; remove or repair it"
        )
    cw = area < 0
    if cw.any():
        for c in np.nonzero(cw)[0]:
            flat[offsets[c] : offsets[c + 1]] = flat[offsets[c] : offsets[c + 1]][::-1].copy()
        msg = f"{source}: re-oriented {int(cw.sum())} clockwise cell(s) to counter-clockwise"
        notes.append(msg)
        if not quiet:
            log.info(msg)
        area = _signed_areas(pts, offsets, flat)
        if np.any(area <= 0):
            c = int(np.nonzero(area <= 0)[0][0])
            raise MeshError(
                f"{source}: cell {c} has non-positive area after orientation fixing; it is self-intersecting"
            )

    # -- edges --
    a = flat
    b = flat[nxt_idx]
    npts = len(pts)
    key = _edge_key(a, b, npts)
    order = np.argsort(key, kind="stable")
    ks = key[order]
    start = np.r_[0, np.nonzero(np.diff(ks))[0] + 1]
    counts = np.diff(np.r_[start, len(ks)])
    if np.any(counts > 2):
        g = int(np.nonzero(counts > 2)[0][0])
        occ = order[start[g] : start[g] + counts[g]]
        cs = sorted(int(cell_of[o]) for o in occ)
        p0, p1 = int(a[occ[0]]), int(b[occ[0]])
        raise MeshError(
            f"{source}: the edge {_fmt_pt(pts, p0)}-{_fmt_pt(pts, p1)} is shared by {counts[g]} cells "
            f"({cs}); a valid 2D mesh has at most two cells per edge — remove the overlapping cells"
        )
    # internal: pairs; owner is the lower cell index, points as met in the owner
    g2 = start[counts == 2]
    o1, o2 = order[g2], order[g2 + 1]
    c1, c2 = cell_of[o1], cell_of[o2]
    if np.any(c1 == c2):
        c = int(c1[c1 == c2][0])
        raise MeshError(f"{source}: cell {c} uses the same edge twice; it is not a simple polygon")
    same_dir = a[o1] == a[o2]
    if same_dir.any():
        i = int(np.nonzero(same_dir)[0][0])
        raise MeshError(
            f"{source}: cells {int(c1[i])} and {int(c2[i])} overlap (they run along their shared edge "
            f"{_fmt_pt(pts, int(a[o1[i]]))}-{_fmt_pt(pts, int(b[o1[i]]))} in the same direction)"
        )
    swap = c2 < c1
    own_occ = np.where(swap, o2, o1)
    owner_i = cell_of[own_occ]
    neigh_i = np.where(swap, c1, c2)
    fp_i = np.stack([a[own_occ], b[own_occ]], axis=1)
    srt = np.lexsort((neigh_i, owner_i))
    owner_i, neigh_i, fp_i = owner_i[srt], neigh_i[srt], fp_i[srt]

    # boundary edges of the cells
    g1 = start[counts == 1]
    ob = order[g1]
    bkey = ks[g1]
    b_owner = cell_of[ob]
    b_fp = np.stack([a[ob], b[ob]], axis=1)

    # -- patches --
    internal_keys = ks[g2]
    face_pts_list = [fp_i]
    owners = [owner_i]
    assigned = np.full(len(bkey), -1, dtype=np.int64)
    patches: list[Patch] = []
    n_int = len(owner_i)
    pos_f = n_int
    for pi, (name, edges) in enumerate(bnd_in.items()):
        if edges.size == 0:
            raise MeshError(f"{source}: patch {name!r} has no edges; remove it or tag its boundary lines")
        ek = _edge_key(edges[:, 0], edges[:, 1], npts)
        ek_u = np.unique(ek)
        loc = np.searchsorted(bkey, ek_u)
        loc = np.minimum(loc, max(len(bkey) - 1, 0))
        found = (len(bkey) > 0) & (bkey[loc] == ek_u) if len(bkey) else np.zeros(len(ek_u), bool)
        if not np.all(found):
            k0 = int(ek_u[~found][0])
            p0, p1 = k0 // npts, k0 % npts
            where = "between two cells (an internal edge)" if np.isin(k0, internal_keys) else "not an edge of any cell"
            raise MeshError(
                f"{source}: patch {name!r} tags the edge {_fmt_pt(pts, p0)}-{_fmt_pt(pts, p1)}, which is {where}; "
                "boundary tags must lie on the outer boundary — fix the physical group"
            )
        loc = loc[found]
        clash = assigned[loc] >= 0
        if clash.any():
            other = patches[int(assigned[loc][clash][0])].name if int(assigned[loc][clash][0]) < len(patches) else "?"
            k0 = int(bkey[loc[clash][0]])
            raise MeshError(
                f"{source}: the boundary edge {_fmt_pt(pts, k0 // npts)}-{_fmt_pt(pts, k0 % npts)} is in both "
                f"patches {other!r} and {name!r}; give each boundary edge one patch"
            )
        assigned[loc] = pi
        # keep faces of the patch in owner order for locality
        loc = loc[np.argsort(b_owner[loc], kind="stable")]
        face_pts_list.append(b_fp[loc])
        owners.append(b_owner[loc])
        patches.append(Patch(name, pos_f, pos_f + len(loc)))
        pos_f += len(loc)
    miss = np.nonzero(assigned < 0)[0]
    if len(miss) and unnamed is not None:
        for name, mask in unnamed(pts, b_fp[miss]).items():
            loc = miss[np.asarray(mask, dtype=bool)]
            loc = loc[assigned[loc] < 0]
            if not len(loc):
                continue
            if not str(name).strip():
                raise MeshError(f"{source}: the unnamed boundary edges would go into a patch with the empty name "
                                f"{str(name)!r}; patch names become case keys and file names — name the patch")
            if name in bnd_in:
                raise MeshError(f"{source}: the unnamed boundary edges would go into patch {name!r}, which the "
                                "mesh file already names; choose another patch name for them")
            assigned[loc] = len(patches)
            loc = loc[np.argsort(b_owner[loc], kind="stable")]
            face_pts_list.append(b_fp[loc])
            owners.append(b_owner[loc])
            patches.append(Patch(name, pos_f, pos_f + len(loc)))
            pos_f += len(loc)
        miss = np.nonzero(assigned < 0)[0]
    if len(miss):
        k0 = int(bkey[miss[0]])
        raise MeshError(
            f"{source}: {len(miss)} boundary edge(s) belong to no named patch, e.g. the edge "
            f"{_fmt_pt(pts, k0 // npts)}-{_fmt_pt(pts, k0 % npts)} of cell {int(b_owner[miss[0]])}; "
            "tag every boundary line with a physical group (or name it in the boundary mapping), or in a "
            'case file give them patches with [mesh] unnamed_edges = "<patch>" and edge_boxes = '
            "{ <patch> = [xmin, xmax, ymin, ymax] } (README, [mesh])"
        )

    face_points = np.ascontiguousarray(np.concatenate(face_pts_list).astype(np.int64))
    face_owner = np.ascontiguousarray(np.concatenate(owners).astype(np.int64))
    face_neighbour = np.full(len(face_owner), -1, dtype=np.int64)
    face_neighbour[:n_int] = neigh_i
    mesh = Mesh(
        points=pts,
        cell_offsets=np.ascontiguousarray(offsets.astype(np.int64)),
        cell_points=np.ascontiguousarray(flat.astype(np.int64)),
        face_points=face_points,
        face_owner=face_owner,
        face_neighbour=face_neighbour,
        n_internal_faces=int(n_int),
        patches=tuple(patches),
        source=source,
        notes=tuple(notes),
    )
    if check_overlaps:
        from fvrans.mesh.folds import check_folds

        check_folds(mesh)
    return mesh
