"""Reading Gmsh 2.2 / 4.1 (ASCII, binary) and VTU meshes, and writing them back.

The hand-written files follow the MSH file format descriptions (versions 2.2 and 4.1) of the
Gmsh reference manual (C. Geuzaine, J.-F. Remacle, "Gmsh reference manual", section "MSH file
format"); element types used: 1 = 2-node line, 2 = 3-node triangle, 3 = 4-node quadrangle,
15 = 1-node point. Expected counts and areas are worked out by hand in the comments.
"""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import Mesh, compute_geometry, read_mesh, write_mesh
from fvrans.mesh.io import from_meshio

# Six points of the 2 x 1 rectangle: a unit quad on the left, two triangles on the right.
#   6 ---- 5 ---- 4
#   |      |    / |
#   |  Q   | T2/  |
#   |      | / T1 |
#   1 ---- 2 ---- 3
# Lines: bottom 1-2, 2-3 and top 4-5, 5-6 -> "wall"; 3-4 -> "outlet"; 6-1 -> "inlet".
# A point group "corner" (dimension 0) and the surface group "fluid" (dimension 2, with the
# same number 1 as "wall") must not become patches.
# Faces: internal 2-5 (quad|T2) and 2-4 (T1|T2); 6 boundary lines -> 8 faces, area 2.

GMSH22_ASCII = """$MeshFormat
2.2 0 8
$EndMeshFormat
$PhysicalNames
5
0 4 "corner"
1 1 "wall"
1 2 "outlet"
1 3 "inlet"
2 1 "fluid"
$EndPhysicalNames
$Nodes
6
1 0 0 0
2 1 0 0
3 2 0 0
4 2 1 0
5 1 1 0
6 0 1 0
$EndNodes
$Elements
10
1 15 2 4 1 1
2 1 2 1 1 1 2
3 1 2 1 1 2 3
4 1 2 2 2 3 4
5 1 2 1 3 4 5
6 1 2 1 3 5 6
7 1 2 3 4 6 1
8 3 2 1 1 1 2 5 6
9 2 2 1 1 2 3 4
10 2 2 1 1 2 4 5
$EndElements
"""

GMSH41_ASCII = """$MeshFormat
4.1 0 8
$EndMeshFormat
$PhysicalNames
5
0 4 "corner"
1 1 "wall"
1 2 "outlet"
1 3 "inlet"
2 1 "fluid"
$EndPhysicalNames
$Entities
1 4 1 0
1 0 0 0 1 4
1 0 0 0 2 0 0 1 1 0
2 2 0 0 2 1 0 1 2 0
3 0 1 0 2 1 0 1 1 0
4 0 0 0 0 1 0 1 3 0
1 0 0 0 2 1 0 1 1 4 1 2 3 4
$EndEntities
$Nodes
1 6 1 6
2 1 0 6
1
2
3
4
5
6
0 0 0
1 0 0
2 0 0
2 1 0
1 1 0
0 1 0
$EndNodes
$Elements
7 10 1 10
0 1 15 1
1 1
1 1 1 2
2 1 2
3 2 3
1 2 1 1
4 3 4
1 3 1 2
5 4 5
6 5 6
1 4 1 1
7 6 1
2 1 3 1
8 1 2 5 6
2 1 2 2
9 2 3 4
10 2 4 5
$EndElements
"""


def _check_rectangle(m: Mesh) -> None:
    assert m.n_cells == 3 and m.n_points == 6
    assert (m.n_faces, m.n_internal_faces) == (8, 2)
    assert {p.name: p.size for p in m.patches} == {"wall": 4, "outlet": 1, "inlet": 1}
    assert sorted(m.cell_sizes().tolist()) == [3, 3, 4]
    g = compute_geometry(m)
    assert g.cell_area.sum() == pytest.approx(2.0, rel=1e-14)
    assert sorted(g.cell_area.tolist()) == pytest.approx([0.5, 0.5, 1.0], rel=1e-14)
    for name, length in {"wall": 4.0, "outlet": 1.0, "inlet": 1.0}.items():
        p = m.patch(name)
        assert g.face_length[p.start : p.stop].sum() == pytest.approx(length, rel=1e-14)
    # the inlet is the line x = 0, its outward normal is -x
    p = m.patch("inlet")
    assert np.allclose(g.face_normal[p.start], [-1.0, 0.0], atol=1e-15)


@pytest.mark.parametrize("text", [GMSH22_ASCII, GMSH41_ASCII], ids=["msh2.2", "msh4.1"])
def test_read_hand_written_gmsh(tmp_path: Path, text: str) -> None:
    f = tmp_path / "rect.msh"
    f.write_text(text)
    m = read_mesh(f)
    assert m.source == str(f)
    _check_rectangle(m)


# ----------------------------------------------------------------------------------------
def _meshio_block(nx: int = 3, ny: int = 2) -> tuple[meshio.Mesh, dict]:
    """An nx x ny block of unit squares; the last column split into triangles; 4 named sides.

    Built by hand as a meshio.Mesh with Gmsh tags, so meshio's own writers make the files.
    """
    pts = np.array([[i, j, 0.0] for j in range(ny + 1) for i in range(nx + 1)], dtype=float)

    def pid(i: int, j: int) -> int:
        return j * (nx + 1) + i

    quads, tris = [], []
    for j in range(ny):
        for i in range(nx):
            a, b, c, d = pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)
            if i == nx - 1:
                tris += [[a, b, c], [a, c, d]]
            else:
                quads.append([a, b, c, d])
    sides = {
        "bottom": [[pid(i, 0), pid(i + 1, 0)] for i in range(nx)],
        "outlet": [[pid(nx, j), pid(nx, j + 1)] for j in range(ny)],
        "top": [[pid(i + 1, ny), pid(i, ny)] for i in range(nx)],
        "inlet": [[pid(0, j + 1), pid(0, j)] for j in range(ny)],
    }
    blocks = [meshio.CellBlock("quad", np.array(quads)), meshio.CellBlock("triangle", np.array(tris))]
    phys = [np.full(len(quads), 1), np.full(len(tris), 1)]
    geo = [np.full(len(quads), 1), np.full(len(tris), 2)]
    field = {"fluid": np.array([1, 2])}
    for k, (name, e) in enumerate(sides.items()):
        blocks.append(meshio.CellBlock("line", np.array(e)))
        phys.append(np.full(len(e), 10 + k))
        geo.append(np.full(len(e), 1 + k))
        field[name] = np.array([10 + k, 1])
    # node entities (needed by the 4.1 writer): side nodes on their curve, one interior node on
    # each surface entity, the rest on surface 1
    dim_tags = np.tile([2, 1], (len(pts), 1))
    for k, e in enumerate(sides.values()):
        dim_tags[np.asarray(e)[:, 0]] = (1, 1 + k)
    dim_tags[pid(nx - 1, 1)] = (2, 2)
    expect = {
        "n_cells": (nx - 1) * ny + 2 * ny,
        # grid edges inside: (nx-1)*ny vertical + nx*(ny-1) horizontal, plus ny diagonals
        "n_internal": (nx - 1) * ny + nx * (ny - 1) + ny,
        "patches": {"bottom": nx, "outlet": ny, "top": nx, "inlet": ny},
        "area": float(nx * ny),
        "tri_area": 0.5,
    }
    mm = meshio.Mesh(
        pts,
        blocks,
        cell_data={"gmsh:physical": phys, "gmsh:geometrical": geo},
        field_data=field,
        point_data={"gmsh:dim_tags": dim_tags},
    )
    return mm, expect


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh"])
@pytest.mark.parametrize("binary", [False, True], ids=["ascii", "binary"])
def test_read_meshio_written_gmsh(tmp_path: Path, fmt: str, binary: bool) -> None:
    mm, ex = _meshio_block()
    f = tmp_path / f"block_{fmt}.msh"
    meshio.write(f, mm, file_format=fmt, binary=binary)
    m = read_mesh(f)
    assert m.n_cells == ex["n_cells"]
    assert m.n_internal_faces == ex["n_internal"]
    assert m.n_boundary_faces == sum(ex["patches"].values())
    assert {p.name: p.size for p in m.patches} == ex["patches"]
    g = compute_geometry(m)
    assert g.cell_area.sum() == pytest.approx(ex["area"], rel=1e-14)
    tri = m.cell_sizes() == 3
    assert np.allclose(g.cell_area[tri], ex["tri_area"], rtol=1e-14)
    assert np.allclose(g.cell_area[~tri], 1.0, rtol=1e-14)


def test_read_vtu_written_by_meshio_with_patch_arrays(tmp_path: Path) -> None:
    mm, ex = _meshio_block()
    # same mesh as VTU: patch names as 0/1 indicator arrays "patch:<name>" on all blocks
    names = [n for n, v in mm.field_data.items() if v[1] == 1]
    cd = {}
    for k, name in enumerate(names):
        cd["patch:" + name] = [np.full(len(b.data), int(j == 2 + k)) for j, b in enumerate(mm.cells)]
    f = tmp_path / "block.vtu"
    meshio.write(f, meshio.Mesh(mm.points, mm.cells, cell_data=cd))
    m = read_mesh(f)
    assert {p.name: p.size for p in m.patches} == ex["patches"]
    assert m.n_internal_faces == ex["n_internal"]


def test_cell_sets_name_patches() -> None:
    # meshio cell_sets: one index array (or None) per block; only line blocks count
    pts = np.array([[0, 0, 0], [1, 0, 0], [1, 1, 0], [0, 1, 0]], float)
    cells = [
        meshio.CellBlock("triangle", np.array([[0, 1, 2], [0, 2, 3]])),
        meshio.CellBlock("line", np.array([[0, 1], [1, 2], [2, 3], [3, 0]])),
        meshio.CellBlock("vertex", np.array([[0]])),
    ]
    sets = {
        "low": [np.array([0]), np.array([0, 1]), None],  # the triangle index is ignored
        "high": [None, np.array([2, 3]), None],
        "pin": [None, None, np.array([0])],  # a point set: ignored
    }
    m = from_meshio(meshio.Mesh(pts, cells, cell_sets=sets), source="sets")
    assert {p.name: p.size for p in m.patches} == {"low": 2, "high": 2}


def test_constant_nonzero_z_is_planar(tmp_path: Path) -> None:
    mm, ex = _meshio_block()
    mm.points[:, 2] = 3.5
    f = tmp_path / "lifted.msh"
    meshio.write(f, mm, file_format="gmsh22", binary=False)
    m = read_mesh(f)
    assert m.n_cells == ex["n_cells"]


# ----------------------------------------------------------------------------------------
def _quad_mesh(nx: int, ny: int) -> Mesh:
    x = np.linspace(0.0, 2.0, nx + 1)
    y = np.linspace(0.0, 1.0, ny + 1) ** 1.5  # stretched rows: not a trivial geometry
    pts = np.array([[xi, yj] for yj in y for xi in x])

    def pid(i: int, j: int) -> int:
        return j * (nx + 1) + i

    cells = np.array(
        [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(ny) for i in range(nx)]
    )
    bnd = {
        "inlet": [[pid(0, j), pid(0, j + 1)] for j in range(ny)],
        "outlet": [[pid(nx, j), pid(nx, j + 1)] for j in range(ny)],
        "lower wall": [[pid(i, 0), pid(i + 1, 0)] for i in range(nx)],
        "upper": [[pid(i, ny), pid(i + 1, ny)] for i in range(nx)],
    }
    return Mesh.from_arrays(pts, cells, bnd, source="quad test mesh")


def _mixed_mesh() -> Mesh:
    """Quads, triangles and a pentagon and a hexagon, in an interleaved cell order."""
    pts = np.array(
        [[0, 0], [1, 0], [2, 0], [3, 0], [3, 1], [2, 1], [1, 1], [0, 1], [2.5, 1.6], [1.5, 1.8], [0.5, 1.6]],
        dtype=float,
    )
    cells = [[0, 1, 6, 7], [1, 2, 5, 6], [2, 3, 4], [2, 4, 5], [5, 4, 8, 9, 6], [7, 6, 9, 10]]
    bnd = {
        "bottom": [[0, 1], [1, 2], [2, 3]],
        "right": [[3, 4]],
        "top": [[4, 8], [8, 9], [9, 10]],
        "left": [[10, 7], [7, 0]],
    }
    return Mesh.from_arrays(pts, cells, bnd, source="mixed test mesh")


def _canonical(m: Mesh) -> set:
    """Cells as rotation-normalised point-coordinate tuples (independent of numbering)."""
    out = set()
    for c in range(m.n_cells):
        xy = [tuple(m.points[p]) for p in m.cell(c)]
        k = xy.index(min(xy))
        out.add(tuple(xy[k:] + xy[:k]))
    return out


def _patch_edges(m: Mesh) -> dict:
    return {
        p.name: {frozenset(map(tuple, m.points[e])) for e in m.face_points[p.start : p.stop]}
        for p in m.patches
    }


@pytest.mark.parametrize(
    "name,fmt,binary",
    [
        ("m.msh", None, False),  # Gmsh 4.1 by suffix
        ("m.msh", "gmsh22", False),
        ("m.msh", "gmsh22", True),
        ("m.msh", "gmsh41", True),
        ("m.vtu", None, False),
    ],
)
def test_round_trip_single_kind_is_exact(tmp_path: Path, name: str, fmt: str | None, binary: bool) -> None:
    m0 = _quad_mesh(5, 4)
    f = tmp_path / name
    write_mesh(m0, f, fmt, binary=binary)
    m1 = read_mesh(f)
    # one cell kind: the order of points, cells, faces and patches is kept exactly
    assert m1.patch_names == m0.patch_names
    for attr in ("points", "cell_offsets", "cell_points", "face_points", "face_owner", "face_neighbour"):
        assert np.array_equal(getattr(m1, attr), getattr(m0, attr)), attr
    assert [(p.start, p.stop) for p in m1.patches] == [(p.start, p.stop) for p in m0.patches]


@pytest.mark.parametrize("name,fmt", [("m.vtu", None)])
def test_round_trip_mixed_with_polygons(tmp_path: Path, name: str, fmt: str | None) -> None:
    m0 = _mixed_mesh()
    f = tmp_path / name
    write_mesh(m0, f, fmt)
    m1 = read_mesh(f)
    assert (m1.n_cells, m1.n_faces, m1.n_internal_faces) == (m0.n_cells, m0.n_faces, m0.n_internal_faces)
    assert _canonical(m1) == _canonical(m0)
    assert _patch_edges(m1) == _patch_edges(m0)
    g0, g1 = compute_geometry(m0), compute_geometry(m1)
    assert sorted(g1.cell_area.tolist()) == pytest.approx(sorted(g0.cell_area.tolist()), rel=1e-15)


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh41"])
def test_round_trip_mixed_tri_quad_gmsh(tmp_path: Path, fmt: str) -> None:
    # a mesh of triangles and quads only (split the pentagon and hexagon of _mixed_mesh)
    m0 = _mixed_mesh()
    cells = [m0.cell(c).tolist() for c in range(m0.n_cells) if len(m0.cell(c)) <= 4]
    cells += [[5, 4, 8], [5, 8, 9, 6]]
    m0 = Mesh.from_arrays(m0.points, cells, {p.name: m0.face_points[p.start : p.stop] for p in m0.patches})
    f = tmp_path / "mixed.msh"
    write_mesh(m0, f, fmt, binary=True)
    m1 = read_mesh(f)
    assert _canonical(m1) == _canonical(m0)
    assert _patch_edges(m1) == _patch_edges(m0)
    assert m1.patch_names == m0.patch_names


def test_write_gmsh41_with_few_points(tmp_path: Path) -> None:
    # a quad and a triangle with every point on the boundary: Gmsh 4.1 needs one node per entity
    # (2 cell kinds + 3 patches = 5 entities, 5 points: just enough)
    pts = np.array([[0, 0], [1, 0], [1, 1], [0, 1], [1.5, 0.5]], float)
    cells = [[0, 1, 2, 3], [1, 4, 2]]
    m0 = Mesh.from_arrays(pts, cells, {"a": [[0, 1]], "b": [[1, 4], [4, 2]], "c": [[2, 3], [3, 0]]})
    f = tmp_path / "tiny.msh"
    write_mesh(m0, f)
    m1 = read_mesh(f)
    assert np.array_equal(m1.points, m0.points)
    assert _patch_edges(m1) == _patch_edges(m0)
    # one patch more than points allow: a clear error pointing to the other formats
    m2 = Mesh.from_arrays(pts, cells, {"a": [[0, 1]], "b": [[1, 4], [4, 2]], "c": [[2, 3]], "d": [[3, 0]]})
    with pytest.raises(MeshError, match=r"5 points are too few for the 6 Gmsh 4\.1 entities.*gmsh22"):
        write_mesh(m2, tmp_path / "tiny2.msh")
    write_mesh(m2, tmp_path / "tiny2.msh", "gmsh22")
    assert _patch_edges(read_mesh(tmp_path / "tiny2.msh")) == _patch_edges(m2)


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh41"])
def test_patch_called_domain_survives(tmp_path: Path, fmt: str) -> None:
    # the writer names the surface group "domain" unless a patch already has that name
    pts = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)
    m0 = Mesh.from_arrays(pts, [[0, 1, 2], [0, 2, 3]], {"domain": [[0, 1], [1, 2]], "x": [[2, 3], [3, 0]]})
    f = tmp_path / "d.msh"
    write_mesh(m0, f, fmt)
    assert {p.name: p.size for p in read_mesh(f).patches} == {"domain": 2, "x": 2}


def test_explicit_file_format(tmp_path: Path) -> None:
    f = tmp_path / "rect.txt"
    f.write_text(GMSH22_ASCII)
    _check_rectangle(read_mesh(f, file_format="gmsh"))
