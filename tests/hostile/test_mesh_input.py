"""Mesh files under faults (issue 13, item 8): an unused far-away node does not set the merge
tolerance; a Gmsh 4.1 file whose node count is overstated (or understated) is refused every time;
coordinates beyond 1e30 are refused."""

from __future__ import annotations

import struct

import meshio
import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import Mesh
from fvrans.mesh.generate import cavity
from fvrans.mesh.io import read_mesh, write_mesh


def _parts(m: Mesh):
    return [m.cell(c) for c in range(m.n_cells)], {p.name: m.face_points[p.start:p.stop] for p in m.patches}


@pytest.mark.parametrize("far", [1e6, 1e300])
def test_an_unused_far_node_leaves_a_valid_mesh_readable(tmp_path, far):
    m = cavity(n=4)
    cells, patches = _parts(m)
    pts = np.vstack([m.points, [[far, -far]]])
    back = Mesh.from_arrays(pts, cells, patches)
    assert back.n_cells == 16 and back.n_points == 25 and "removed 1 point" in back.notes[0]
    # through a file: meshio keeps the unused node
    mm = meshio.Mesh(np.column_stack([pts, np.zeros(len(pts))]),
                     [("quad", np.array(cells)), ("line", np.concatenate(list(patches.values())))],
                     cell_data={"patch:lid": [np.zeros(16), (np.arange(16) < 4).astype(int)],
                                "patch:walls": [np.zeros(16), (np.arange(16) >= 4).astype(int)]})
    meshio.write(tmp_path / "m.vtu", mm)
    assert read_mesh(tmp_path / "m.vtu").n_cells == 16


def test_coordinates_beyond_1e30_are_refused():
    m = cavity(n=2)
    cells, patches = _parts(m)
    with pytest.raises(MeshError, match="beyond 1e"):
        Mesh.from_arrays(m.points * 1e31, cells, patches)


@pytest.mark.parametrize("delta", [3, -2, 10**12])
def test_a_wrong_gmsh41_node_count_is_refused_ascii(tmp_path, delta):
    path = tmp_path / "m.msh"
    m = cavity(n=3)
    write_mesh(m, path, file_format="gmsh41")
    text = path.read_text()
    head = text.index("$Nodes\n") + len("$Nodes\n")
    line_end = text.index("\n", head)
    nb, nn, lo, hi = map(int, text[head:line_end].split())
    path.write_text(text[:head] + f"{nb} {nn + delta} {lo} {hi}" + text[line_end:])
    for _ in range(3):  # refused every time, not at random
        with pytest.raises(MeshError, match="declares"):
            read_mesh(path)


@pytest.mark.parametrize("delta", [3, 10**12])
def test_a_wrong_gmsh41_node_count_is_refused_binary(tmp_path, delta):
    path = tmp_path / "m.msh"
    write_mesh(cavity(n=3), path, file_format="gmsh41", binary=True)
    data = bytearray(path.read_bytes())
    i = data.index(b"$Nodes\n") + len(b"$Nodes\n")
    n = struct.unpack_from("<Q", data, i + 8)[0]
    struct.pack_into("<Q", data, i + 8, n + delta)
    path.write_bytes(bytes(data))
    with pytest.raises(MeshError, match="declares"):
        read_mesh(path)


@pytest.mark.parametrize("fmt, binary", [("gmsh41", False), ("gmsh41", True), ("gmsh22", False)])
def test_correct_gmsh_files_still_read(tmp_path, fmt, binary):
    path = tmp_path / "m.msh"
    m = cavity(n=5, triangles=True)
    write_mesh(m, path, file_format=fmt, binary=binary)
    assert read_mesh(path).n_cells == m.n_cells
