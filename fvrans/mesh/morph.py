"""Mesh morphing: move the points of a mesh to a changed boundary, keeping its topology.

A morphed mesh has the same cells, faces, face order and patches as the original (only
``points`` change), so a solution on the original is a valid warm start on the morphed mesh.

Two ways:

* ``morph(mesh, target_mesh)`` with a mesh of the same topology, for example the same parametric
  generator (``fvrans.mesh.shapes``) called with new shape parameters and the same resolution: the
  generator's own map at the new parameters, exact. A different topology is refused with the first
  difference found.
* ``morph(mesh, move)`` with new positions of the boundary points only (a function of the boundary
  point coordinates, or an (n_points, 2) array whose boundary rows are used): the displacement of
  the interior points solves the graph Laplace equation sum_j w_ij (d_i - d_j) = 0 over the mesh
  edges with the boundary displacement as Dirichlet data, with inverse-square edge-length weights
  w_ij = 1 / |x_i - x_j|^2 so that the small cells of a wall-clustered layer follow their wall
  almost rigidly (a spring analogy of the kind reviewed by Blom 2000, Comput. Methods Appl. Mech.
  Engrg. 190, 1493-1512, with springs stiffer the shorter the edge). Cells that fold are reported.

>>> from fvrans.mesh.shapes import bump_channel
>>> a = bump_channel(bump_height=0.05, nx_bump=8, nx_up=4, nx_down=8, ny=6)
>>> b = morph(a, bump_channel(bump_height=0.06, nx_bump=8, nx_up=4, nx_down=8, ny=6))
>>> same_topology(a, b), float(b.points[:, 1].min()), float(b.points[:, 1].max())
(True, 0.0, 1.0)
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable

import numpy as np
import scipy.sparse as sp
from scipy.sparse.linalg import spsolve

from fvrans.errors import MeshError
from fvrans.mesh.mesh import Mesh

__all__ = ["boundary_point_ids", "morph", "same_topology", "topology_difference"]


def topology_difference(a: Mesh, b: Mesh) -> str | None:
    """None when ``a`` and ``b`` have the same cells, faces (order, owners, neighbours, points) and
    patches; otherwise a sentence saying the first difference."""
    if a.n_points != b.n_points:
        return f"{a.n_points} points against {b.n_points}"
    if a.n_cells != b.n_cells:
        return f"{a.n_cells} cells against {b.n_cells}"
    if a.n_faces != b.n_faces or a.n_internal_faces != b.n_internal_faces:
        return f"{a.n_faces} faces ({a.n_internal_faces} internal) against {b.n_faces} ({b.n_internal_faces})"
    if [(p.name, p.start, p.stop) for p in a.patches] != [(p.name, p.start, p.stop) for p in b.patches]:
        return (f"patches {[(p.name, p.size) for p in a.patches]} against "
                f"{[(p.name, p.size) for p in b.patches]}")
    if not np.array_equal(a.cell_offsets, b.cell_offsets):
        c = int(np.nonzero(np.diff(a.cell_offsets) != np.diff(b.cell_offsets))[0][0])
        return f"cell {c} has {len(a.cell(c))} points against {len(b.cell(c))}"
    if not np.array_equal(a.cell_points, b.cell_points):
        k = int(np.nonzero(a.cell_points != b.cell_points)[0][0])
        c = int(np.searchsorted(a.cell_offsets, k, "right") - 1)
        return f"cell {c} has different points"
    if [(q.first, q.second, q.start, q.stop) for q in a.periodic] != [(q.first, q.second, q.start, q.stop)
                                                                       for q in b.periodic]:
        return (f"periodic pairs {[(q.first, q.second, q.size) for q in a.periodic]} against "
                f"{[(q.first, q.second, q.size) for q in b.periodic]}")
    for name in ("face_points", "face_owner", "face_neighbour"):
        x, y = getattr(a, name), getattr(b, name)
        if not np.array_equal(x, y):
            f = int(np.nonzero((x != y).reshape(len(x), -1).any(axis=1))[0][0])
            return f"face {f} has a different {name.replace('face_', '')}"
    return None


def same_topology(a: Mesh, b: Mesh) -> bool:
    """True when the two meshes differ at most in their point coordinates."""
    return topology_difference(a, b) is None


def boundary_point_ids(mesh: Mesh) -> np.ndarray:
    """Sorted indices of the points on boundary faces."""
    return np.unique(mesh.face_points[mesh.n_internal_faces :])


def _check_cells(mesh: Mesh, points: np.ndarray, what: str) -> None:
    """Every cell must keep a positive area and each corner a positive turn (no folded cell)."""
    off, cp = mesh.cell_offsets, mesh.cell_points
    sizes = np.diff(off)
    cell_of = np.repeat(np.arange(mesh.n_cells), sizes)
    pos = np.arange(len(cp)) - off[cell_of]
    nxt = cp[off[cell_of] + (pos + 1) % sizes[cell_of]]
    prv = cp[off[cell_of] + (pos - 1) % sizes[cell_of]]
    p, pn, pp = points[cp], points[nxt], points[prv]
    base = points[cp[off[cell_of]]]
    a, b = p - base, pn - base
    area = 0.5 * np.bincount(cell_of, a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0], minlength=mesh.n_cells)
    u, v = p - pp, pn - p
    turn = u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]
    ref = np.abs(area[cell_of]) * 1e-12
    bad_corner = np.zeros(mesh.n_cells, dtype=bool)
    np.logical_or.at(bad_corner, cell_of, turn <= -ref)
    bad = (area <= 0) | (bad_corner & (sizes <= 4))
    if bad.any():
        c = int(np.nonzero(bad)[0][0])
        cx, cy = points[mesh.cell(c)].mean(axis=0)
        raise MeshError(
            f"{what}: {int(bad.sum())} cell(s) fold, e.g. cell {c} near ({cx:.6g}, {cy:.6g}); the boundary "
            "moved too far for morphing — generate a new mesh for this shape (or morph in smaller steps)"
        )


def _laplace_displacement(mesh: Mesh, fixed: np.ndarray, d_fixed: np.ndarray) -> np.ndarray:
    """Displacements of all points: Dirichlet ``d_fixed`` on ``fixed``, graph Laplace elsewhere."""
    n = mesh.n_points
    e = mesh.face_points
    vec = mesh.points[e[:, 0]] - mesh.points[e[:, 1]]
    w = 1.0 / np.einsum("ij,ij->i", vec, vec)
    A = sp.coo_matrix((np.concatenate([-w, -w]), (np.concatenate([e[:, 0], e[:, 1]]),
                                                    np.concatenate([e[:, 1], e[:, 0]]))), shape=(n, n)).tocsr()
    A = A - sp.diags(np.asarray(A.sum(axis=1)).ravel())  # rows: sum_j w_ij (d_i - d_j)
    free = np.ones(n, dtype=bool)
    free[fixed] = False
    d = np.zeros((n, 2))
    d[fixed] = d_fixed
    if free.any():
        Aff = A[free][:, free].tocsc()
        rhs = -A[free][:, fixed] @ d_fixed
        d[free] = np.column_stack([spsolve(Aff, rhs[:, 0]), spsolve(Aff, rhs[:, 1])])
    return d


def morph(mesh: Mesh, target: Mesh | np.ndarray | Callable[[np.ndarray], np.ndarray]) -> Mesh:
    """``mesh`` with moved points and unchanged topology (see the module docstring).

    target: a Mesh of the same topology (its points are taken, exactly); or a function mapping the
    (k, 2) boundary point coordinates (in the order of :func:`boundary_point_ids`) to their new
    positions; or an (n_points, 2) array of new positions of which only the boundary rows are used.
    Raises MeshError for a different topology, a wrongly shaped target or folded cells.
    """
    if isinstance(target, Mesh):
        diff = topology_difference(mesh, target)
        if diff is not None:
            raise MeshError(
                f"cannot morph {mesh.source} into {target.source}: the topology differs ({diff}); "
                "use the same resolution parameters, or move the boundary points instead"
            )
        _check_cells(mesh, target.points, target.source)
        return dataclasses.replace(mesh, points=target.points.copy(), source=target.source, notes=(),
                                   periodic=target.periodic)
    if mesh.periodic:
        raise MeshError(f"morph {mesh.source}: the mesh has joined periodic patches, whose faces must stay "
                        "translated copies; morph the mesh before joining them (fvrans.mesh.periodic)")
    ids = boundary_point_ids(mesh)
    old = mesh.points[ids]
    if callable(target):
        new = np.asarray(target(old.copy()), dtype=np.float64)
        if new.shape != old.shape:
            raise MeshError(f"morph {mesh.source}: the boundary function returned shape {new.shape}, "
                            f"expected {old.shape} (one new position per boundary point)")
    else:
        allp = np.asarray(target, dtype=np.float64)
        if allp.shape != mesh.points.shape:
            raise MeshError(f"morph {mesh.source}: new positions have shape {allp.shape}, "
                            f"expected {mesh.points.shape} (one row per mesh point)")
        new = allp[ids]
    if not np.all(np.isfinite(new)):
        raise MeshError(f"morph {mesh.source}: the new boundary positions hold non-finite values")
    d = _laplace_displacement(mesh, ids, new - old)
    points = mesh.points + d
    points[ids] = new
    source = f"morphed:{mesh.source}"
    _check_cells(mesh, points, source)
    return dataclasses.replace(mesh, points=points, source=source, notes=())
