"""Atomic JSON/CSV/VTU writing: round trips with independent readers, and failures leave no trace."""

from __future__ import annotations

import json
import os

import meshio
import numpy as np
import pytest
from post_meshes import mixed_cells

from fvrans.errors import CaseError
from fvrans.post import writers
from fvrans.post.writers import (
    atomic_write,
    to_jsonable,
    vtu_cell_blocks,
    write_csv_atomic,
    write_json_atomic,
    write_vtu_atomic,
)


def test_vtu_round_trip_of_mixed_cells(tmp_path):
    mesh = mixed_cells()
    sizes = sorted(mesh.cell_sizes().tolist())
    assert sizes == [3, 3, 4, 4, 4, 5, 6]
    rng = np.random.default_rng(0)
    nc = mesh.n_cells
    p = rng.normal(size=nc)
    u = rng.normal(size=(nc, 2))
    ids = np.arange(nc) * 10
    grad = rng.normal(size=(nc, 2, 2))
    path = tmp_path / "flow.vtu"
    write_vtu_atomic(path, mesh, {"pressure": p, "velocity": u, "tag": ids, "grad_u": grad})
    assert [f.name for f in tmp_path.iterdir()] == ["flow.vtu"]
    back = meshio.read(path)
    np.testing.assert_array_equal(back.points[:, :2], mesh.points)
    np.testing.assert_array_equal(back.points[:, 2], 0.0)
    types = [b.type for b in back.cells]
    assert types == ["triangle", "quad", "polygon", "polygon"]
    # match each read cell to the mesh cell with the same vertex sequence
    by_vertices = {tuple(mesh.cell(c).tolist()): c for c in range(nc)}
    seen = []
    for k, block in enumerate(back.cells):
        for row, conn in enumerate(block.data):
            c = by_vertices[tuple(int(v) for v in conn)]
            seen.append(c)
            assert back.cell_data["pressure"][k][row] == p[c]
            assert back.cell_data["tag"][k][row] == ids[c]
            np.testing.assert_array_equal(back.cell_data["velocity"][k][row], [u[c, 0], u[c, 1], 0.0])
            g = back.cell_data["grad_u"][k][row].reshape(3, 3)
            np.testing.assert_array_equal(g[:2, :2], grad[c])
            np.testing.assert_array_equal(g[2], 0.0)
    assert sorted(seen) == list(range(nc))
    # the order reported by vtu_cell_blocks is the order in the file
    assert seen == vtu_cell_blocks(mesh)[1].tolist()


def test_vtu_rejects_wrong_sizes(tmp_path):
    mesh = mixed_cells()
    with pytest.raises(CaseError, match="'pressure'.*first dimension of 7"):
        write_vtu_atomic(tmp_path / "a.vtu", mesh, {"pressure": np.zeros(6)})
    assert list(tmp_path.iterdir()) == []


def test_failure_while_writing_vtu_leaves_nothing(tmp_path, monkeypatch):
    mesh = mixed_cells()
    target = tmp_path / "flow.vtu"

    def broken(path, *args, **kwargs):
        with open(path, "w") as f:
            f.write("<VTKFile partial")
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(meshio, "write", broken)
    with pytest.raises(OSError, match="simulated"):
        write_vtu_atomic(target, mesh, {"p": np.zeros(mesh.n_cells)})
    assert list(tmp_path.iterdir()) == []


def test_failure_keeps_the_previous_file(tmp_path, monkeypatch):
    target = tmp_path / "summary.json"
    write_json_atomic(target, {"run": 1})
    before = target.read_bytes()

    def half(f):
        f.write('{"run": 2, "partial": ')
        raise RuntimeError("interrupted (simulated)")

    with pytest.raises(RuntimeError, match="simulated"):
        atomic_write(target, half)
    assert target.read_bytes() == before
    # a failure of the final rename itself
    monkeypatch.setattr(writers.os, "replace", lambda *a: (_ for _ in ()).throw(OSError("rename failed")))
    with pytest.raises(OSError, match="rename failed"):
        write_csv_atomic(target, ["a"], [np.arange(3)])
    assert target.read_bytes() == before
    assert [f.name for f in tmp_path.iterdir()] == ["summary.json"]


def test_json_refuses_nan_before_touching_the_file(tmp_path):
    target = tmp_path / "s.json"
    with pytest.raises(ValueError):
        write_json_atomic(target, {"x": float("nan")})
    assert list(tmp_path.iterdir()) == []
    obj = to_jsonable({"x": np.float64("nan"), "n": np.int32(4), "a": np.array([1.5, np.inf]),
                       "ok": np.bool_(True), "t": (1, 2)})
    write_json_atomic(target, obj)
    assert json.loads(target.read_text()) == {"x": None, "n": 4, "a": [1.5, None], "ok": True, "t": [1, 2]}


def test_csv_round_trip_exact(tmp_path):
    rng = np.random.default_rng(7)
    x = rng.normal(size=50) * 10.0 ** rng.integers(-300, 300, size=50)
    y = rng.uniform(size=50)
    y[3] = np.nan
    i = np.arange(50, dtype=np.int64) - 20
    path = tmp_path / "t.csv"
    write_csv_atomic(path, ["i", "x", "y"], [i, x, y])
    text = path.read_text().splitlines()
    assert text[0] == "i,x,y"
    back = np.loadtxt(path, delimiter=",", skiprows=1)
    np.testing.assert_array_equal(back[:, 0], i)
    np.testing.assert_array_equal(back[:, 1], x)  # bit for bit
    np.testing.assert_array_equal(back[:, 2], y)  # nan compares equal here


def test_csv_checks_columns(tmp_path):
    with pytest.raises(ValueError, match="column 'b' has 2 values"):
        write_csv_atomic(tmp_path / "a.csv", ["a", "b"], [np.zeros(3), np.zeros(2)])
    with pytest.raises(ValueError, match="2 column names for 1 columns"):
        write_csv_atomic(tmp_path / "a.csv", ["a", "b"], [np.zeros(3)])
    with pytest.raises(ValueError, match="contains a comma"):
        write_csv_atomic(tmp_path / "a.csv", ["a,b"], [np.zeros(3)])
    assert list(tmp_path.iterdir()) == []


def test_new_files_get_normal_permissions(tmp_path):
    plain = tmp_path / "plain.txt"
    plain.write_text("x")
    target = tmp_path / "atomic.json"
    write_json_atomic(target, {})
    assert (os.stat(target).st_mode & 0o777) == (os.stat(plain).st_mode & 0o777)


def test_missing_directory_is_reported(tmp_path):
    with pytest.raises(CaseError, match="does not exist"):
        write_json_atomic(tmp_path / "nope" / "a.json", {})
