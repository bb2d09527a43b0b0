"""Bad meshes give a MeshError naming the file and the cell, edge, point or tag, and the fix.

Repairs (clockwise cells, duplicate and unused points) are made with a note and a warning.
Files are written by hand in the Gmsh MSH 2.2 ASCII layout (Gmsh reference manual, "MSH file
format version 2"); element types: 1 = line, 2 = triangle, 3 = quad, 9 = 6-node triangle.
"""

from __future__ import annotations

import logging
import re
from pathlib import Path

import meshio
import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import Mesh, compute_geometry, read_mesh, write_mesh

# The 2 x 1 rectangle of test_io: quad 1-2-5-6, triangles 2-3-4 and 2-4-5.
NODES = {1: (0, 0, 0), 2: (1, 0, 0), 3: (2, 0, 0), 4: (2, 1, 0), 5: (1, 1, 0), 6: (0, 1, 0)}
NAMES = [(1, 1, "wall"), (1, 2, "outlet"), (1, 3, "inlet"), (2, 1, "fluid")]
LINES = [(1, (1, 2)), (1, (2, 3)), (2, (3, 4)), (1, (4, 5)), (1, (5, 6)), (3, (6, 1))]
CELLS = [(3, (1, 2, 5, 6)), (2, (2, 3, 4)), (2, (2, 4, 5))]


def msh22(nodes=None, lines=None, cells=None, names=None) -> str:
    """Gmsh 2.2 ASCII text; lines are (physical tag, nodes), cells (element type, nodes)."""
    nodes = NODES if nodes is None else nodes
    lines = LINES if lines is None else lines
    cells = CELLS if cells is None else cells
    names = NAMES if names is None else names
    out = ["$MeshFormat", "2.2 0 8", "$EndMeshFormat", "$PhysicalNames", str(len(names))]
    out += [f'{d} {t} "{n}"' for d, t, n in names]
    out += ["$EndPhysicalNames", "$Nodes", str(len(nodes))]
    out += [f"{k} {x} {y} {z}" for k, (x, y, z) in nodes.items()]
    out += ["$EndNodes", "$Elements", str(len(lines) + len(cells))]
    k = 0
    for tag, nn in lines:
        k += 1
        out.append(f"{k} 1 2 {tag} {tag} " + " ".join(map(str, nn)))
    for etype, nn in cells:
        k += 1
        out.append(f"{k} {etype} 2 1 1 " + " ".join(map(str, nn)))
    out += ["$EndElements", ""]
    return "\n".join(out)


def write(tmp_path: Path, text: str, name: str = "bad.msh") -> Path:
    f = tmp_path / name
    f.write_text(text)
    return f


def raises(path: Path, *patterns: str) -> str:
    """read_mesh(path) must raise a MeshError whose message names the file and each pattern."""
    with pytest.raises(MeshError) as ei:
        read_mesh(path)
    msg = str(ei.value)
    assert str(path) in msg
    for p in patterns:
        assert re.search(p, msg), f"{p!r} not in: {msg}"
    return msg


def test_the_clean_file_reads(tmp_path: Path) -> None:
    m = read_mesh(write(tmp_path, msh22(), "good.msh"))
    assert (m.n_cells, m.n_faces) == (3, 8)
    assert m.notes == ()


# -- file level -----------------------------------------------------------------------------
def test_missing_file(tmp_path: Path) -> None:
    raises(tmp_path / "nowhere.msh", "not found")


def test_directory(tmp_path: Path) -> None:
    raises(tmp_path, "directory")


@pytest.mark.parametrize("name", ["junk.msh", "junk.vtu"])
def test_unreadable_file(tmp_path: Path, name: str) -> None:
    raises(write(tmp_path, "this is not a mesh\n", name), "could not read the mesh file", r"\.msh", r"\.vtu")


def test_unknown_suffix(tmp_path: Path) -> None:
    raises(write(tmp_path, "1 2 3\n", "mesh.xyz"), "could not read", "file_format=")


def test_not_planar(tmp_path: Path) -> None:
    nodes = dict(NODES)
    nodes[5] = (1, 1, 0.25)  # the fifth node, index 4
    raises(
        write(tmp_path, msh22(nodes=nodes)),
        "not planar",
        r"point 4 at \(1, 1\)",
        r"z = 0\.25",
        r"\[0, 0\.25\]",
    )


def test_no_2d_cells(tmp_path: Path) -> None:
    raises(write(tmp_path, msh22(cells=[])), "no 2D cells", "found: line")


def test_unnamed_physical_tag(tmp_path: Path) -> None:
    names = [n for n in NAMES if n[2] != "outlet"]  # tag 2 loses its name
    raises(write(tmp_path, msh22(names=names)), "physical tag 2", "no name", "'wall'", "edge_tags = { 2 =")


def test_dim2_name_does_not_name_lines(tmp_path: Path) -> None:
    # tag 1 is named only as a surface group: the wall lines carry an unnamed line tag
    names = [(1, 2, "outlet"), (1, 3, "inlet"), (2, 1, "fluid")]
    raises(write(tmp_path, msh22(names=names)), "physical tag 1", "no name")


def test_higher_order_cells(tmp_path: Path) -> None:
    # a 6-node triangle: corner nodes 1, 2, 3, mid-side nodes 4, 5, 6
    nodes = {1: (0, 0, 0), 2: (1, 0, 0), 3: (0, 1, 0), 4: (0.5, 0, 0), 5: (0.5, 0.5, 0), 6: (0, 0.5, 0)}
    lines = [(1, (1, 2)), (1, (2, 3)), (1, (3, 1))]
    text = msh22(nodes=nodes, lines=lines, cells=[(9, (1, 2, 3, 4, 5, 6))], names=[(1, 1, "wall")])
    raises(write(tmp_path, text), "'triangle6'", "higher-order", "first-order")


@pytest.mark.parametrize("ctype,n", [("quad8", 8), ("line3", 3)])
def test_higher_order_types_via_meshio(tmp_path: Path, ctype: str, n: int) -> None:
    pts = np.zeros((8, 3))
    pts[:, :2] = np.random.default_rng(0).random((8, 2))
    f = tmp_path / "ho.vtu"
    meshio.write(f, meshio.Mesh(pts, [meshio.CellBlock(ctype, np.arange(n)[None, :])]))
    raises(f, f"'{ctype}'", "linear")


def test_3d_cells(tmp_path: Path) -> None:
    pts = np.array([[0, 0, 0], [1, 0, 0], [0, 1, 0], [0, 0, 1]], float)
    f = tmp_path / "tet.vtu"
    meshio.write(f, meshio.Mesh(pts, [meshio.CellBlock("tetra", np.array([[0, 1, 2, 3]]))]))
    raises(f, "3D cells", "'tetra'")


# -- patches ---------------------------------------------------------------------------------
def test_boundary_edge_in_no_patch(tmp_path: Path) -> None:
    lines = [ln for ln in LINES if ln[0] != 3]  # drop the inlet line 6-1
    raises(write(tmp_path, msh22(lines=lines)), "no named patch", r"\(0, 0\)-\(0, 1\)", "cell 0")


def test_tagged_line_inside(tmp_path: Path) -> None:
    lines = [*LINES, (1, (2, 5))]  # the edge between the quad and a triangle
    raises(write(tmp_path, msh22(lines=lines)), "'wall'", r"\(1, 0\)-\(1, 1\)", "internal edge")


def test_tagged_line_on_no_cell(tmp_path: Path) -> None:
    nodes = {**NODES, 7: (3, 0, 0)}
    lines = [*LINES, (1, (3, 7))]  # a line sticking out of the mesh
    raises(write(tmp_path, msh22(nodes=nodes, lines=lines)), "'wall'", r"\(3, 0\)", "touches no cell")


def test_edge_in_two_patches(tmp_path: Path) -> None:
    lines = [*LINES, (2, (1, 2))]  # the wall edge 1-2 also tagged outlet
    raises(write(tmp_path, msh22(lines=lines)), r"\(0, 0\)-\(1, 0\)", "both patches", "'wall'", "'outlet'")


# -- cells -------------------------------------------------------------------------------------
def test_zero_area_cell_in_file(tmp_path: Path) -> None:
    cells = [*CELLS, (2, (1, 2, 3))]  # three collinear points on the bottom
    raises(write(tmp_path, msh22(cells=cells)), "cell 3", "zero area", r"\(0, 0\)")


def test_zero_area_cell_from_arrays() -> None:
    pts = np.array([[0, 0], [1, 0], [0, 1], [2, 0]], float)
    with pytest.raises(MeshError, match=r"mine: cell 1 \(points \[0, 1, 3\].*zero area"):
        Mesh.from_arrays(pts, [[0, 1, 2], [0, 1, 3]], {"b": [[0, 1], [1, 2], [2, 0]]}, source="mine")


def test_edge_shared_by_three_cells_in_file(tmp_path: Path) -> None:
    nodes = {**NODES, 7: (1.5, -1, 0), 8: (1.5, 0.5, 0)}
    cells = [*CELLS, (2, (2, 7, 3)), (2, (2, 3, 8))]  # a cell below edge 2-3 and one overlapping above
    text = msh22(nodes=nodes, cells=cells)
    raises(write(tmp_path, text), r"\(1, 0\)-\(2, 0\)", "shared by 3 cells", r"\[1, 3, 4\]")


def test_edge_shared_by_three_cells_from_arrays() -> None:
    pts = np.array([[0, 0], [1, 0], [0.5, 1], [0.5, -1], [0.5, 2]], float)
    cells = [[0, 1, 2], [1, 0, 3], [0, 1, 4]]
    with pytest.raises(MeshError, match=r"edge \(0, 0\)-\(1, 0\) is shared by 3 cells \(\[0, 1, 2\]\)"):
        Mesh.from_arrays(pts, cells, {"b": [[1, 2], [2, 0], [0, 3], [3, 1]]})


def test_overlapping_cells_from_arrays() -> None:
    # two counter-clockwise triangles on the same side of edge 0-1
    pts = np.array([[0, 0], [1, 0], [0.5, 1], [0.4, 0.5]], float)
    with pytest.raises(MeshError, match=r"cells 0 and 1 overlap.*\(0, 0\)-\(1, 0\)"):
        Mesh.from_arrays(pts, [[0, 1, 2], [0, 1, 3]], {"b": [[1, 2], [2, 0], [1, 3], [3, 0]]})


def test_clockwise_cells_are_reoriented(tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    cells = [(3, (1, 6, 5, 2)), (2, (2, 3, 4)), (2, (2, 5, 4))]  # quad and last triangle clockwise
    with caplog.at_level(logging.INFO, logger="fvrans.mesh.mesh"):
        m = read_mesh(write(tmp_path, msh22(cells=cells), "cw.msh"))
    assert any("re-oriented 2 clockwise cell(s)" in n for n in m.notes)
    assert "re-oriented 2" in caplog.text
    good = read_mesh(write(tmp_path, msh22(), "ccw.msh"))
    g, g0 = compute_geometry(m), compute_geometry(good)
    assert np.allclose(g.cell_area, g0.cell_area) and np.all(g.cell_area > 0)
    assert np.allclose(g.cell_centre, g0.cell_centre)
    assert (m.n_faces, m.n_internal_faces) == (good.n_faces, good.n_internal_faces)


def test_clockwise_from_arrays() -> None:
    pts = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)
    m = Mesh.from_arrays(pts, [[0, 3, 2, 1]], {"all": [[0, 1], [1, 2], [2, 3], [3, 0]]})
    assert m.cell(0).tolist() == [1, 2, 3, 0]
    assert "re-oriented 1" in m.notes[0]
    assert compute_geometry(m).cell_area[0] == pytest.approx(1.0)


def test_duplicate_and_unused_points(tmp_path: Path, caplog: pytest.LogCaptureFixture) -> None:
    # node 7 repeats node 2's coordinates and is used by a triangle; node 8 is used by nothing
    nodes = {**NODES, 7: (1, 0, 0), 8: (5, 5, 0)}
    cells = [(3, (1, 2, 5, 6)), (2, (7, 3, 4)), (2, (2, 4, 5))]
    f = write(tmp_path, msh22(nodes=nodes, cells=cells), "dup.msh")
    with caplog.at_level(logging.WARNING, logger="fvrans.mesh.mesh"):
        m = read_mesh(f)
    assert f"{f}: merged 1 duplicate point(s)" in m.notes
    assert f"{f}: removed 1 point(s) used by no cell" in m.notes
    assert "merged 1 duplicate" in caplog.text and "removed 1 point" in caplog.text
    # the same mesh as the clean file: 6 points, 2 internal faces
    assert (m.n_points, m.n_faces, m.n_internal_faces) == (6, 8, 2)


def test_duplicate_points_from_arrays(caplog: pytest.LogCaptureFixture) -> None:
    # two triangles given with separate copies of the shared diagonal's points
    pts = np.array([[0, 0], [1, 0], [1, 1], [0, 0], [1, 1], [0, 1]], float)
    with caplog.at_level(logging.WARNING, logger="fvrans.mesh.mesh"):
        m = Mesh.from_arrays(pts, [[0, 1, 2], [3, 4, 5]], {"b": [[0, 1], [1, 2], [4, 5], [5, 3]]})
    assert m.n_points == 4 and m.n_internal_faces == 1
    assert "merged 2 duplicate" in caplog.text


@pytest.mark.parametrize(
    "pts,cells,bnd,pattern",
    [
        ([[0, 0], [1, 0], [np.nan, 1]], [[0, 1, 2]], {"b": [[0, 1]]}, r"point 2 has a non-finite coordinate"),
        ([[0, 0], [1, 0], [0, 1]], [[0, 1]], {"b": [[0, 1]]}, r"cell 0 has 2 points"),
        (
            [[0, 0], [1, 0], [0, 1]],
            [[0, 1, 7]],
            {"b": [[0, 1]]},
            r"cell 0 refers to a point index outside 0\.\.2",
        ),
        (
            [[0, 0], [1, 0], [0, 1]],
            [[0, 1, 2]],
            {"b": [[0, 9]]},
            r"patch 'b' refers to a point index outside",
        ),
        (
            [[0, 0], [1, 0], [1, 0], [0, 1]],
            [[0, 1, 2, 3]],
            {"b": [[0, 1], [1, 3], [3, 0]]},
            r"cell 0 has a repeated \(or coincident\) vertex \(1, 0\)",
        ),
        ([[0, 0], [1, 0], [0, 1]], [[0, 1, 2]], {"b": []}, r"patch 'b' has no edges"),
    ],
)
def test_bad_arrays(pts, cells, bnd, pattern: str) -> None:
    with pytest.raises(MeshError, match="arrays: " + pattern):
        Mesh.from_arrays(np.array(pts, float), cells, bnd, source="arrays")


def test_unknown_patch_name_lists_the_patches(tmp_path: Path) -> None:
    m = read_mesh(write(tmp_path, msh22(), "good.msh"))
    with pytest.raises(
        MeshError, match=r"no boundary patch named 'wal'; the mesh has 'wall', 'outlet', 'inlet'"
    ):
        m.patch("wal")


# -- writing -----------------------------------------------------------------------------------
def test_write_polygons_to_gmsh_is_refused(tmp_path: Path) -> None:
    pts = np.array([[0, 0], [1, 0], [1.5, 0.8], [0.5, 1.3], [-0.5, 0.8]], float)
    m = Mesh.from_arrays(pts, [[0, 1, 2, 3, 4]], {"b": [[i, (i + 1) % 5] for i in range(5)]}, source="penta")
    with pytest.raises(MeshError, match=r"penta: 1 cell\(s\) have 5 sides \(e\.g\. cell 0\).*\.vtu"):
        write_mesh(m, tmp_path / "p.msh")
    write_mesh(m, tmp_path / "p.vtu")  # VTU holds polygons
    assert read_mesh(tmp_path / "p.vtu").cell_sizes().tolist() == [5]


def test_write_unknown_format(tmp_path: Path) -> None:
    m = read_mesh(write(tmp_path, msh22(), "good.msh"))
    with pytest.raises(MeshError, match=r"out\.stl: cannot write the suffix '\.stl'.*'gmsh22'"):
        write_mesh(m, tmp_path / "out.stl")
    with pytest.raises(MeshError, match=r"cannot write file_format 'abaqus'"):
        write_mesh(m, tmp_path / "out.msh", file_format="abaqus")


def test_write_to_missing_folder(tmp_path: Path) -> None:
    m = read_mesh(write(tmp_path, msh22(), "good.msh"))
    with pytest.raises(MeshError, match=r"could not write the mesh file"):
        write_mesh(m, tmp_path / "no" / "such" / "m.vtu")


def test_unused_point_off_the_plane_is_only_dropped(tmp_path: Path) -> None:
    nodes = {**NODES, 7: (5, 5, 3.0)}  # used by no element: removed, not a planarity error
    m = read_mesh(write(tmp_path, msh22(nodes=nodes), "stray.msh"))
    assert m.n_points == 6
    assert any("removed 1 point(s)" in n for n in m.notes)
