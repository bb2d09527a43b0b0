"""Face topology and cell geometry of small hand-made meshes against analytic results.

Analytic facts used (standard plane geometry):
* shoelace formula for polygon area and centroid;
* centroid of a triangle = mean of its three vertices (the medians meet there);
* centroid of a composite shape = area-weighted mean of the centroids of its parts
  (method of composite areas, any statics text, e.g. Beer & Johnston, Vector Mechanics for
  Engineers: Statics, ch. 5);
* area of a regular hexagon of side r = 3 sqrt(3) r^2 / 2, of an equilateral triangle sqrt(3) r^2 / 4;
* a closed polygon's edge vectors sum to zero, hence so do its outward edge normals times length.
"""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.mesh import Mesh, compute_geometry


def two_triangles() -> Mesh:
    pts = np.array([[0.0, 0.0], [2.0, 0.0], [2.0, 1.0], [0.0, 1.0]])
    return Mesh.from_arrays(pts, [[0, 1, 2], [0, 2, 3]], {"wall": [[0, 1], [1, 2]], "open": [[2, 3], [3, 0]]})


def quad_block_2x2(lx: float = 3.0, ly: float = 2.0) -> Mesh:
    x = np.linspace(0.0, lx, 3)
    y = np.linspace(0.0, ly, 3)
    pts = np.array([[xi, yj] for yj in y for xi in x])

    def pid(i: int, j: int) -> int:
        return j * 3 + i

    cells = [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(2) for i in range(2)]
    bottom = [[pid(i, 0), pid(i + 1, 0)] for i in range(2)]
    top = [[pid(i, 2), pid(i + 1, 2)] for i in range(2)]
    left = [[pid(0, j), pid(0, j + 1)] for j in range(2)]
    right = [[pid(2, j), pid(2, j + 1)] for j in range(2)]
    return Mesh.from_arrays(pts, cells, {"bottom": bottom, "right": right, "top": top, "left": left})


def hexagram(r: float = 1.0) -> Mesh:
    """A regular hexagon (side r) with an equilateral triangle on each edge: 1 polygon + 6 triangles."""
    ang = np.arange(6) * np.pi / 3
    hexpts = np.stack([r * np.cos(ang), r * np.sin(ang)], axis=1)
    # apex of the triangle on edge k: outward from the edge mid-point by the triangle height
    mid_ang = ang + np.pi / 6
    apex_dist = r * np.sqrt(3) / 2 + r * np.sqrt(3) / 2  # hexagon apothem + triangle height
    apex = np.stack([apex_dist * np.cos(mid_ang), apex_dist * np.sin(mid_ang)], axis=1)
    pts = np.vstack([hexpts, apex])
    cells = [list(range(6))] + [[k, (k + 1) % 6, 6 + k] for k in range(6)]
    outer = [[k, 6 + k] for k in range(6)] + [[6 + k, (k + 1) % 6] for k in range(6)]
    return Mesh.from_arrays(pts, cells, {"outer": outer})


def _closure(mesh: Mesh, geom) -> np.ndarray:
    """Per cell, the sum of outward face area vectors (owner +S, neighbour -S)."""
    s = np.zeros((mesh.n_cells, 2))
    ni = mesh.n_internal_faces
    np.add.at(s, mesh.face_owner, geom.face_area_vector)
    np.add.at(s, mesh.face_neighbour[:ni], -geom.face_area_vector[:ni])
    return s


def _check_common(mesh: Mesh, domain_area: float) -> None:
    g = compute_geometry(mesh)
    ni = mesh.n_internal_faces
    # closed cells: sum of outward S_f vanishes
    scale = np.abs(g.face_area_vector).max()
    assert np.abs(_closure(mesh, g)).max() < 1e-12 * scale
    # areas positive and summing to the domain
    assert np.all(g.cell_area > 0)
    assert g.cell_area.sum() == pytest.approx(domain_area, rel=1e-13)
    # internal faces: owner < neighbour, sorted by (owner, neighbour); normal points owner -> neighbour
    own, nb = mesh.face_owner, mesh.face_neighbour
    assert np.all(own[:ni] < nb[:ni])
    key = own[:ni] * mesh.n_cells + nb[:ni]
    assert np.all(np.diff(key) > 0)
    d = g.cell_centre[nb[:ni]] - g.cell_centre[own[:ni]]
    assert np.all(np.einsum("ij,ij->i", d, g.face_normal[:ni]) > 0)
    # boundary faces: neighbour -1, normal points away from the owner centre
    assert np.all(nb[ni:] == -1)
    out = g.face_centre[ni:] - g.cell_centre[own[ni:]]
    assert np.all(np.einsum("ij,ij->i", out, g.face_normal[ni:]) > 0)
    # every face's end points belong to its owner (and neighbour) cell
    for f in range(mesh.n_faces):
        assert set(mesh.face_points[f]) <= set(mesh.cell(own[f]).tolist())
        if f < ni:
            assert set(mesh.face_points[f]) <= set(mesh.cell(nb[f]).tolist())
    # unit normals, lengths = edge lengths
    assert np.allclose(np.hypot(*g.face_normal.T), 1.0, rtol=0, atol=1e-14)
    e = mesh.points[mesh.face_points[:, 1]] - mesh.points[mesh.face_points[:, 0]]
    assert np.allclose(g.face_length, np.hypot(*e.T), rtol=1e-15, atol=0)
    # patches tile the boundary faces in order
    assert mesh.patches[0].start == ni
    assert mesh.patches[-1].stop == mesh.n_faces
    for a, b in zip(mesh.patches[:-1], mesh.patches[1:]):
        assert a.stop == b.start


def test_two_triangles() -> None:
    m = two_triangles()
    assert (m.n_cells, m.n_faces, m.n_internal_faces, m.n_points) == (2, 5, 1, 4)
    assert m.face_owner[0] == 0 and m.face_neighbour[0] == 1
    assert set(m.face_points[0].tolist()) == {0, 2}  # the diagonal
    assert [(p.name, p.size) for p in m.patches] == [("wall", 2), ("open", 2)]
    _check_common(m, domain_area=2.0)
    g = compute_geometry(m)
    # triangle centroid = vertex mean
    for c, tri in enumerate([[0, 1, 2], [0, 2, 3]]):
        assert np.allclose(g.cell_centre[c], m.points[tri].mean(axis=0), rtol=0, atol=1e-15)
        e1 = m.points[tri[1]] - m.points[tri[0]]
        e2 = m.points[tri[2]] - m.points[tri[0]]
        assert g.cell_area[c] == pytest.approx(0.5 * abs(e1[0] * e2[1] - e1[1] * e2[0]), rel=1e-15)
    # the diagonal from (0,0) to (2,1): outward normal of cell 0 (below it) is (-1, 2)/sqrt(5)
    assert np.allclose(g.face_normal[0], np.array([-1.0, 2.0]) / np.sqrt(5.0), atol=1e-15)


def test_quad_block() -> None:
    lx, ly = 3.0, 2.0
    m = quad_block_2x2(lx, ly)
    # 2x2 block: 4 cells, 4 internal edges, 8 boundary edges, 9 points
    assert (m.n_cells, m.n_faces, m.n_internal_faces, m.n_points) == (4, 12, 4, 9)
    assert {p.name: p.size for p in m.patches} == {"bottom": 2, "right": 2, "top": 2, "left": 2}
    pairs = list(zip(m.face_owner[:4].tolist(), m.face_neighbour[:4].tolist()))
    assert pairs == [(0, 1), (0, 2), (1, 3), (2, 3)]
    _check_common(m, domain_area=lx * ly)
    g = compute_geometry(m)
    assert np.allclose(g.cell_area, lx * ly / 4, rtol=1e-15)
    expect = np.array(
        [[0.25 * lx, 0.25 * ly], [0.75 * lx, 0.25 * ly], [0.25 * lx, 0.75 * ly], [0.75 * lx, 0.75 * ly]]
    )
    assert np.allclose(g.cell_centre, expect, rtol=0, atol=1e-15)
    # orthogonal uniform block: weights 1/2, no non-orthogonality, no skewness
    assert np.allclose(g.face_weight[:4], 0.5, atol=1e-15)
    assert np.allclose(g.face_nonorth_deg[:4], 0.0, atol=1e-6)
    assert np.allclose(g.face_skewness[:4], 0.0, atol=1e-15)
    # aspect ratio of a (lx/2) x (ly/2) rectangle is the side ratio (definition in geometry.py)
    assert np.allclose(g.cell_aspect_ratio, lx / ly, rtol=1e-14)
    # boundary normals are the axis directions of the patch
    for name, n in {"bottom": (0, -1), "right": (1, 0), "top": (0, 1), "left": (-1, 0)}.items():
        p = m.patch(name)
        assert np.allclose(g.face_normal[p.start : p.stop], n, atol=1e-15)


def test_hexagon_with_triangles() -> None:
    r = 0.7
    m = hexagram(r)
    # 7 cells; 6 internal edges (hexagon sides) and 12 outer edges
    assert (m.n_cells, m.n_faces, m.n_internal_faces, m.n_points) == (7, 18, 6, 12)
    assert np.all(m.face_owner[:6] == 0)  # the hexagon owns all internal faces
    assert sorted(m.face_neighbour[:6].tolist()) == list(range(1, 7))
    area_hex = 3 * np.sqrt(3) / 2 * r**2
    area_tri = np.sqrt(3) / 4 * r**2
    _check_common(m, domain_area=area_hex + 6 * area_tri)
    g = compute_geometry(m)
    assert g.cell_area[0] == pytest.approx(area_hex, rel=1e-14)
    assert np.allclose(g.cell_area[1:], area_tri, rtol=1e-13)
    assert np.allclose(g.cell_centre[0], 0.0, atol=1e-15)  # symmetry
    for c in range(1, 7):
        assert np.allclose(g.cell_centre[c], m.points[m.cell(c)].mean(axis=0), atol=1e-15)
    # the face between hexagon and triangle k: normal points along the mid-edge direction
    for f in range(6):
        k = m.face_neighbour[f] - 1
        mid = (k + 0.5) * np.pi / 3
        assert np.allclose(g.face_normal[f], [np.cos(mid), np.sin(mid)], atol=1e-14)


def test_l_shaped_polygon_centroid() -> None:
    # L = [0,2]x[0,1] union [0,1]x[1,2], one non-convex hexagonal cell
    pts = np.array([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], dtype=float)
    edges = [[i, (i + 1) % 6] for i in range(6)]
    m = Mesh.from_arrays(pts, [list(range(6))], {"all": edges})
    assert (m.n_cells, m.n_faces, m.n_internal_faces) == (1, 6, 0)
    _check_common(m, domain_area=3.0)
    g = compute_geometry(m)
    # composite areas: A1 = 2 at (1, 0.5), A2 = 1 at (0.5, 1.5)
    a1, c1 = 2.0, np.array([1.0, 0.5])
    a2, c2 = 1.0, np.array([0.5, 1.5])
    expect = (a1 * c1 + a2 * c2) / (a1 + a2)
    assert np.allclose(g.cell_centre[0], expect, rtol=0, atol=1e-15)
    assert g.cell_area[0] == pytest.approx(a1 + a2, rel=1e-15)


def test_far_from_origin_mesh_keeps_geometry() -> None:
    # coordinates / (1e-12 span) exceed the int64 range here: duplicate-point detection must still
    # work (it used to merge every point), and the shoelace sums relative to each cell's first
    # vertex keep the areas (all coordinates are exact binary numbers, so the shift is exact)
    shift = np.array([1.0e8, -2.0e8])
    m0 = quad_block_2x2()
    m1 = Mesh.from_arrays(
        m0.points + shift,
        [m0.cell(c) for c in range(m0.n_cells)],
        {p.name: m0.face_points[p.start : p.stop] for p in m0.patches},
    )
    g0, g1 = compute_geometry(m0), compute_geometry(m1)
    assert m1.notes == ()  # nothing merged
    assert np.allclose(g1.cell_area, g0.cell_area, rtol=1e-9)
    assert np.allclose(g1.cell_centre - shift, g0.cell_centre, rtol=0, atol=1e-9)
