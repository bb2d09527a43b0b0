"""Folded meshes (issue 13, item 4): self-intersecting cells and cells overlapping each other are
refused naming the cells, by the mesh builder, `fvrans info` and `fvrans run`; valid meshes,
concave cells among them, pass."""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.cli import main
from fvrans.errors import MeshError
from fvrans.mesh import Mesh
from fvrans.mesh.folds import fold_problems
from fvrans.mesh.io import write_mesh


def grid(n: int = 6, move: tuple[tuple[int, int], tuple[float, float]] | None = None, build: bool = True):
    """The unit square in n x n quads, one node moved by (dx, dy) grid spacings; patch 'wall'."""
    x = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(x, x)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)

    def pid(i, j):
        return j * (n + 1) + i

    if move:
        (i, j), (dx, dy) = move
        pts[pid(i, j)] += [dx / n, dy / n]
    cells = [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(n) for i in range(n)]
    edges = ([[pid(i, 0), pid(i + 1, 0)] for i in range(n)] + [[pid(n, j), pid(n, j + 1)] for j in range(n)]
             + [[pid(i, n), pid(i + 1, n)] for i in range(n)] + [[pid(0, j), pid(0, j + 1)] for j in range(n)])
    args = (pts, cells, {"wall": edges})
    return Mesh.from_arrays(*args) if build else args


@pytest.mark.parametrize("move, cells", [
    (((3, 3), (1.5, 0.0)), ["cell(s): 15", "21 near"]),     # past the next grid line: two bow-ties
    (((3, 3), (1.2, 0.3)), ["cell(s): 21"]),
    (((1, 1), (-1.5, 0.0)), ["at most 360", "cell(s): 0"]),  # past the boundary: cells fold over it
])
def test_a_node_moved_past_a_grid_line_is_refused_naming_the_cells(move, cells):
    with pytest.raises(MeshError, match="folded") as info:
        grid(move=move)
    for text in cells:
        assert text in str(info.value)


def test_a_node_moved_within_its_cells_is_accepted():
    assert fold_problems(grid(move=((3, 3), (0.9, 0.4)))) == []


def test_overlapping_meshes_are_refused():
    # two squares crossing each other: the boundary crosses itself
    pts = np.array([[0, 0], [2, 0], [2, 2], [0, 2], [1, 1], [3, 1], [3, 3], [1, 3]], float)
    loops = {"a": [[0, 1], [1, 2], [2, 3], [3, 0]], "b": [[4, 5], [5, 6], [6, 7], [7, 4]]}
    with pytest.raises(MeshError, match="boundary crosses itself"):
        Mesh.from_arrays(pts, [[0, 1, 2, 3], [4, 5, 6, 7]], loops)
    # one square inside another, without touching: the inner one is covered twice
    pts = np.array([[0, 0], [3, 0], [3, 3], [0, 3], [1, 1], [2, 1], [2, 2], [1, 2]], float)
    with pytest.raises(MeshError, match="winds 2 times"):
        Mesh.from_arrays(pts, [[0, 1, 2, 3], [4, 5, 6, 7]], loops)


def test_self_intersecting_polygons_are_refused_and_concave_ones_accepted():
    # a pentagram (its 5 edges cross) and an L-shaped hexagon (concave, simple)
    ang = np.pi / 2 + 2 * np.pi * np.arange(5) / 5
    star = np.stack([np.cos(ang), np.sin(ang)], axis=1)[[0, 2, 4, 1, 3]]
    ring = [[i, (i + 1) % 5] for i in range(5)]
    with pytest.raises(MeshError, match="self-intersecting"):
        Mesh.from_arrays(star, [list(range(5))], {"w": ring})
    ell = np.array([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], float)
    m = Mesh.from_arrays(ell, [list(range(6))], {"w": [[i, (i + 1) % 6] for i in range(6)]})
    assert m.n_cells == 1


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh41", "vtu"])
def test_info_and_run_refuse_a_folded_mesh_file(tmp_path, capsys, fmt):
    from hostile_cases import box_case_data

    from fvrans.case.tomlwrite import dumps
    from fvrans.mesh.mesh import build_mesh

    pts, cells, b = grid(move=((3, 3), (1.5, 0.0)), build=False)
    folded = build_mesh(pts, cells, b, check_overlaps=False)  # as another program would write it
    path = tmp_path / ("m.vtu" if fmt == "vtu" else "m.msh")
    write_mesh(folded, path, file_format=fmt)
    assert main(["info", str(path)]) == 2
    err = capsys.readouterr().err
    assert "folded" in err and "15 near" in err and str(path) in err
    data = box_case_data(path.name, [])
    data["boundary"] = {"wall": {"kind": "wall", "velocity": [0.0, 0.0]}}
    (tmp_path / "c.toml").write_text(dumps(data))
    assert main(["run", str(tmp_path / "c.toml"), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    assert "folded" in capsys.readouterr().err and not (tmp_path / "out" / "summary.json").exists()


def test_generated_meshes_have_no_folds():
    from fvrans.mesh import generate

    for mesh in (generate.cavity(n=16), generate.bump_channel(), generate.backward_facing_step(),
                 grid(n=5)):
        assert fold_problems(mesh) == []
