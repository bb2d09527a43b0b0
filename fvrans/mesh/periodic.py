"""Translational periodic boundaries, joined at the mesh level.

Two patches whose faces coincide after one translation are joined: each matched face pair
becomes one internal face between the two cells, stored as seen from the cell on the first
patch (owner) and recorded in :attr:`Mesh.periodic` with the translation. The geometry places
the neighbour's image beside the owner (x_N - translation), so every operator (gradients,
fluxes, Rhie-Chow, pressure correction) treats the joined faces as interior faces without
knowing. The translation is the difference of the two patches' mean face centres; faces are
matched by their centres and checked by their end points.

>>> from fvrans.mesh.generate import channel
>>> m = join_periodic(channel(1.0, 1.0, 2, 3), [("inlet", "outlet")])
>>> m.patch_names, m.n_internal_faces, m.periodic[0].translation
(['lower_wall', 'upper_wall'], 10, (1.0, 0.0))
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
from scipy.spatial import cKDTree

from fvrans.errors import MeshError
from fvrans.mesh.mesh import Mesh, Patch, PeriodicPair

#: matched face centres and end points may differ by this fraction of the face length
MATCH_TOLERANCE = 1e-6


def _unmatched_message(mesh: Mesh, first: str, second: str, t: np.ndarray, where: np.ndarray, what: str) -> str:
    shown = ", ".join(f"({x:.6g}, {y:.6g})" for x, y in where[:5])
    more = f" and {len(where) - 5} more" if len(where) > 5 else ""
    return (f"{mesh.source}: periodic pair ({first!r}, {second!r}) with translation ({t[0]:.6g}, {t[1]:.6g}): "
            f"{len(where)} face(s) of {what} have no partner, centres {shown}{more}; the two patches must have "
            "the same faces, one set moved by a translation — mesh them alike (same points along both)")


def _match(mesh: Mesh, first: str, second: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Faces of ``first`` and their partners on ``second`` (same order), and the translation."""
    if first == second:
        raise MeshError(f"{mesh.source}: a periodic pair needs two different patches, got {first!r} twice")
    pa, pb = mesh.patch(first), mesh.patch(second)
    fa, fb = pa.faces, pb.faces
    pts = mesh.points
    ca = 0.5 * (pts[mesh.face_points[fa, 0]] + pts[mesh.face_points[fa, 1]])
    cb = 0.5 * (pts[mesh.face_points[fb, 0]] + pts[mesh.face_points[fb, 1]])
    t = cb.mean(axis=0) - ca.mean(axis=0)
    la = np.linalg.norm(pts[mesh.face_points[fa, 1]] - pts[mesh.face_points[fa, 0]], axis=1)
    dist, idx = cKDTree(cb).query(ca + t)
    ok = dist <= MATCH_TOLERANCE * la
    if len(fa) != len(fb) or not np.all(ok):
        if not np.all(ok):
            raise MeshError(_unmatched_message(mesh, first, second, t, ca[~ok], f"{first!r} ({len(fa)} faces)"))
        back = np.ones(len(fb), bool)
        back[idx] = False
        raise MeshError(_unmatched_message(mesh, first, second, t, cb[back], f"{second!r} ({len(fb)} faces)"))
    if len(np.unique(idx)) != len(idx):
        raise MeshError(f"{mesh.source}: periodic pair ({first!r}, {second!r}): two faces of {first!r} match the "
                        f"same face of {second!r}; the patches must have the same faces")
    # end points: the first face's points moved by t are the partner's points (in either order)
    a0, a1 = pts[mesh.face_points[fa, 0]] + t, pts[mesh.face_points[fa, 1]] + t
    b0, b1 = pts[mesh.face_points[fb[idx], 0]], pts[mesh.face_points[fb[idx], 1]]
    tol = (MATCH_TOLERANCE * la)[:, None]
    same = np.all(np.abs(a0 - b0) <= tol, axis=1) & np.all(np.abs(a1 - b1) <= tol, axis=1)
    swapped = np.all(np.abs(a0 - b1) <= tol, axis=1) & np.all(np.abs(a1 - b0) <= tol, axis=1)
    bad = ~(same | swapped)
    if np.any(bad):
        raise MeshError(_unmatched_message(mesh, first, second, t, ca[bad], f"{first!r} (end points differ)"))
    # outward normals must be opposite (the owner's side of each face faces away from the other)
    if np.any(same):  # both faces CCW around their owners run the same way only if they face alike
        raise MeshError(f"{mesh.source}: periodic pair ({first!r}, {second!r}): the patches face the same way; "
                        "a periodic pair joins two opposite sides of the domain")
    return fa, fb[idx], t


def join_periodic(mesh: Mesh, pairs: Sequence[Sequence[str]]) -> Mesh:
    """The mesh with each pair of patches ``(first, second)`` joined into internal faces
    (``second`` = ``first`` moved by a translation); MeshError naming the faces that do not match."""
    if not pairs:
        return mesh
    if mesh.periodic:
        raise MeshError(f"{mesh.source}: periodic patches are already joined; join all pairs in one call")
    used: list[str] = []
    matched = []
    for pair in pairs:
        if len(pair) != 2:
            raise MeshError(f"{mesh.source}: a periodic pair names two patches, got {list(pair)!r}")
        first, second = str(pair[0]), str(pair[1])
        for name in (first, second):
            if name in used:
                raise MeshError(f"{mesh.source}: patch {name!r} is in two periodic pairs; each patch joins once")
            used.append(name)
        matched.append((first, second, *_match(mesh, first, second)))
    ni = mesh.n_internal_faces
    owner = [mesh.face_owner[:ni]]
    neighbour = [mesh.face_neighbour[:ni]]
    points = [mesh.face_points[:ni]]
    periodic = []
    start = ni
    for first, second, fa, fb, t in matched:
        owner.append(mesh.face_owner[fa])
        neighbour.append(mesh.face_owner[fb])
        points.append(mesh.face_points[fa])
        periodic.append(PeriodicPair(first, second, (float(t[0]), float(t[1])), start, start + len(fa)))
        start += len(fa)
    n_int = start
    patches = []
    for p in mesh.patches:
        if p.name in used:
            continue
        owner.append(mesh.face_owner[p.start : p.stop])
        neighbour.append(np.full(p.size, -1, dtype=np.int64))
        points.append(mesh.face_points[p.start : p.stop])
        patches.append(Patch(p.name, start, start + p.size))
        start += p.size
    return Mesh(
        points=mesh.points,
        cell_offsets=mesh.cell_offsets,
        cell_points=mesh.cell_points,
        face_points=np.ascontiguousarray(np.concatenate(points).astype(np.int64)),
        face_owner=np.ascontiguousarray(np.concatenate(owner).astype(np.int64)),
        face_neighbour=np.ascontiguousarray(np.concatenate(neighbour).astype(np.int64)),
        n_internal_faces=int(n_int),
        patches=tuple(patches),
        source=mesh.source,
        notes=mesh.notes,
        periodic=tuple(periodic),
    )


__all__ = ["MATCH_TOLERANCE", "join_periodic"]
