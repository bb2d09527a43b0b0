"""Reading reference fields (fvrans.reference.source): one test per kind of input, and bad input
refused with the file and the column named. Exactness checks use fields linear in x and y, which
every linear interpolation reproduces to round-off (the check that fails on a wrong weight or index)."""

from __future__ import annotations

import numpy as np
import pytest
from reference_helpers import centres, linear, quad_grid, write_cloud, write_gmsh22, write_vtu

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.reference import (
    cell_source,
    read_cloud,
    read_mesh_data,
    read_result_folder,
    read_source,
)
from fvrans.reference.interpolate import CELL_VALUE, INTERPOLATED, NEAREST, stencil

RNG = np.random.default_rng(3)
TARGETS = np.column_stack([RNG.uniform(0.1, 1.9, 40), RNG.uniform(0.1, 0.9, 40)])


def _cloud_columns(n: int = 300) -> dict[str, np.ndarray]:
    x = np.concatenate([[0, 2, 0, 2], RNG.uniform(0, 2, n)])
    y = np.concatenate([[0, 0, 1, 1], RNG.uniform(0, 1, n)])
    return {"x": x, "y": y, "u": linear(x, y), "v": linear(x, y, 0, 1, 1), "p": linear(x, y, 5, 0, 1),
            "R_xx": linear(x, y, 1, 0.1, 0.2), "R_xy": linear(x, y, -1, 0.3, 0.0), "R_yy": linear(x, y, 2, 0, 0.5),
            "k": linear(x, y, 3, 0.1, 0.1), "omega": linear(x, y, 7, 1, 1)}


# ------------------------------------------------------------------------------------ input kinds
def test_csv_point_cloud_default_columns(tmp_path):
    cols = _cloud_columns()
    src = read_cloud(write_cloud(tmp_path / "cloud.csv", cols))
    assert src.kind == "point cloud"
    # the quantities by fvrans's names, other columns under their own
    assert src.quantities() == ["u", "v", "p", "R_xx", "R_xy", "R_yy", "k", "omega"]
    got = src.interpolate(TARGETS)
    x, y = TARGETS.T
    np.testing.assert_allclose(got["u"], linear(x, y), rtol=0, atol=1e-12)
    np.testing.assert_allclose(got["R_yy"], linear(x, y, 2, 0, 0.5), rtol=0, atol=1e-12)
    np.testing.assert_allclose(got["omega"], linear(x, y, 7, 1, 1), rtol=0, atol=1e-12)
    cov = got.coverage[0]
    assert cov.inside_share == 1.0 and cov.nearest == 0 and cov.targets == len(TARGETS)
    # hold-out estimate of a linear field: round-off
    assert got.errors["u"].held_out > 10 and got.errors["u"].max < 1e-12


def test_csv_point_cloud_other_column_names(tmp_path):
    cols = _cloud_columns()
    renamed = {"X": cols["x"], "Y": cols["y"], "U_mean": cols["u"], "V_mean": cols["v"], "uu": cols["R_xx"],
               "uv": cols["R_xy"], "vv": cols["R_yy"]}
    src = read_cloud(write_cloud(tmp_path / "c.csv", renamed),
                     names={"x": "X", "y": "Y", "u": "U_mean", "v": "V_mean", "R_xx": "uu", "R_xy": "uv",
                            "R_yy": "vv"})
    assert src.quantities() == ["u", "v", "R_xx", "R_xy", "R_yy"]
    got = src.interpolate(TARGETS, ["R_xy"], estimate_error=False)
    np.testing.assert_allclose(got["R_xy"], linear(*TARGETS.T, -1, 0.3, 0.0), atol=1e-12)


def test_vtu_point_data_interpolated_within_the_mesh(tmp_path):
    # an L-shaped mesh: a target in the notch lies inside the convex hull of the nodes but outside
    # the mesh, so it is outside the data (nearest value), unlike a hull-based interpolation
    pts, quads = quad_grid(8, 4, notch=True)
    x, y = pts.T
    vel = np.column_stack([linear(x, y), linear(x, y, 0, -1, 2), np.zeros(len(x))])
    f = write_vtu(tmp_path / "n.vtu", pts, quads, point_data={"velocity": vel, "pressure": linear(x, y, 1, 1, 1)})
    src = read_mesh_data(f)
    assert src.quantities() == ["u", "v", "p"] and src.sets[0].location == "nodes"
    inside = np.array([[0.3, 0.7], [1.7, 0.2], [0.95, 0.45]])
    notch = np.array([[1.5, 0.75]])
    got = src.interpolate(np.vstack([inside, notch]), estimate_error=False)
    np.testing.assert_allclose(got["v"][:3], linear(*inside.T, 0, -1, 2), atol=1e-12)
    cov = got.coverage[0]
    assert cov.nearest == 1 and cov.inside_share == pytest.approx(0.75)
    near = np.argmin(np.hypot(*(pts - notch[0]).T))
    assert got["u"][3] == pytest.approx(linear(*pts[near]))
    assert cov.distance_max_outside == pytest.approx(np.hypot(*(pts[near] - notch[0])))


def test_vtu_cell_data_between_centres_and_cell_values_near_the_boundary(tmp_path):
    pts, quads = quad_grid(8, 4)
    c = centres(pts, quads)
    f = write_vtu(tmp_path / "c.vtu", pts, quads, cell_data={"R_xx": linear(*c.T), "R_xy": linear(*c.T, 1, 1, 1),
                                                              "R_yy": linear(*c.T, 2, 0, 1), "k": linear(*c.T, 9)})
    src = read_mesh_data(f)
    assert src.sets[0].location == "cells" and "k" in src
    # inside the hull of the centres (x in [0.125, 1.875], y in [0.125, 0.875]): linear, exact
    got = src.interpolate(TARGETS, estimate_error=False)
    inner = (TARGETS[:, 0] > 0.125) & (TARGETS[:, 0] < 1.875) & (TARGETS[:, 1] > 0.125) & (TARGETS[:, 1] < 0.875)
    np.testing.assert_allclose(got["R_xy"][inner], linear(*TARGETS[inner].T, 1, 1, 1), atol=1e-12)
    # between the outermost centres and the boundary: the value of the cell holding the point
    st = stencil(src.sets[0], np.array([[0.05, 0.05], [1.0, 0.5]]))
    assert list(st.status) == [CELL_VALUE, INTERPOLATED]
    got = src.interpolate(np.array([[0.05, 0.05]]), ["R_xx"], estimate_error=False)
    assert got["R_xx"][0] == pytest.approx(linear(0.125, 0.125))
    assert got.coverage[0].cell_values == 1 and got.coverage[0].inside_share == 1.0


def test_gmsh_file_with_node_and_element_data(tmp_path):
    pts, quads = quad_grid(6, 3)
    c = centres(pts, quads)
    x, y = pts.T
    f = write_gmsh22(tmp_path / "d.msh", pts, quads,
                     node_data={"velocity": np.column_stack([linear(x, y), linear(x, y, 1, 0, 0), 0 * x])},
                     element_data={"k": linear(*c.T, 4, 1, 0), "nu_tilde": linear(*c.T, 1e-3, 0, 1e-3)})
    src = read_source(f)
    assert src.kind == "mesh file"
    assert [ds.location for ds in src.sets] == ["nodes", "cells"]
    assert set(src.dataset("u").values) == {"u", "v"} and set(src.dataset("k").values) == {"k", "nu_tilde"}
    got = src.interpolate(np.array([[0.7, 0.3], [1.2, 0.6]]), estimate_error=False)
    np.testing.assert_allclose(got["u"], linear(np.array([0.7, 1.2]), np.array([0.3, 0.6])), atol=1e-12)
    np.testing.assert_allclose(got["k"], linear(np.array([0.7, 1.2]), 0.0, 4, 1, 0), atol=1e-12)
    assert len(got.coverage) == 2


def test_result_folder_and_result_in_memory(tmp_path):
    case = fa.case_from_dict({
        "mesh": {"generator": "cavity", "parameters": {"n": 8}},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
        "solver": {"tolerance": 1e-5},
    })
    res = fa.solve(case)
    res.write(tmp_path / "run")
    for src in (read_result_folder(tmp_path / "run"), read_source(tmp_path / "run"), fa.result_source(res)):
        assert {"u", "v", "p"} <= set(src.quantities())
        # at the cell centres of the same mesh: the result's own values
        got = src.onto_cells(res.mesh)
        np.testing.assert_allclose(got["u"], res.velocity[:, 0], rtol=0, atol=1e-12)
        np.testing.assert_allclose(got["p"], res.pressure, rtol=0, atol=1e-12)
    assert read_source(tmp_path / "run").kind == "result folder"
    with pytest.raises(CaseError, match="no fields.vtu in this folder"):
        read_result_folder(tmp_path)


# ------------------------------------------------------------------------------------- outside rule
def test_outside_the_cloud_nearest_refuse_or_empty(tmp_path):
    cols = _cloud_columns(100)
    src = read_cloud(write_cloud(tmp_path / "c.csv", cols))
    pts = np.array([[0.5, 0.5], [2.5, 0.5], [3.0, 2.0]])  # the last two beyond x = 2
    got = src.interpolate(pts, ["u"], outside="nearest", estimate_error=False)
    cov = got.coverage[0]
    assert (cov.interpolated, cov.nearest) == (1, 2) and cov.inside_share == pytest.approx(1 / 3)
    sites = np.column_stack([cols["x"], cols["y"]])
    for k in (1, 2):
        near = np.argmin(np.hypot(*(sites - pts[k]).T))
        assert got["u"][k] == cols["u"][near]
    assert "2 outside take the nearest value" in str(cov)
    with pytest.raises(CaseError) as e:
        src.interpolate(pts, ["u"], outside="refuse")
    assert "c.csv" in str(e.value) and "2 of 3 target points lie outside" in str(e.value)
    assert "(2.5, 0.5)" in str(e.value) and 'outside = "nearest"' in str(e.value)
    empty = src.interpolate(pts, ["u"], outside="nan", estimate_error=False)
    assert np.isfinite(empty["u"][0]) and np.isnan(empty["u"][1:]).all()
    assert list(stencil(src.sets[0], pts).status) == [INTERPOLATED, NEAREST, NEAREST]


# -------------------------------------------------------------------------------------- bad input
def test_missing_column_named_with_the_file(tmp_path):
    f = write_cloud(tmp_path / "c.csv", {"x": [0, 1, 0], "y": [0, 0, 1], "U": [1, 2, 3], "V": [0, 0, 0]})
    with pytest.raises(CaseError) as e:
        read_cloud(f, names={"u": "U_mean", "v": "V"})
    assert "c.csv" in str(e.value) and "'U_mean'" in str(e.value) and "x, y, U, V" in str(e.value)
    g = write_cloud(tmp_path / "noxy.csv", {"X": [0, 1, 0], "Y": [0, 0, 1], "u": [1, 2, 3]})
    with pytest.raises(CaseError, match=r"noxy.csv: no column 'x'"):
        read_cloud(g)
    pts, quads = quad_grid(2, 2)
    h = write_vtu(tmp_path / "m.vtu", pts, quads, cell_data={"k": np.ones(4)})
    with pytest.raises(CaseError, match=r"m.vtu: no field 'velocity' for 'u'; the file has k"):
        read_mesh_data(h, names={"u": "velocity[0]", "v": "velocity[1]"})
    src = read_mesh_data(h)
    with pytest.raises(CaseError) as e:
        src.interpolate(np.zeros((1, 2)), ["R_xy"])
    assert "m.vtu" in str(e.value) and "no 'R_xy'" in str(e.value) and "names={'R_xy': ...}" in str(e.value)


def test_not_a_number_named_with_file_column_and_line(tmp_path):
    f = tmp_path / "nan.csv"
    f.write_text("x,y,u,v,k\n0,0,1,0,0\n1,0,1,0,0\n0,1,1,0,nan\n1,1,1,0,0\n")
    with pytest.raises(CaseError) as e:
        read_cloud(f)
    msg = str(e.value)
    assert "nan.csv" in msg and "column k" in msg and "line 4 (x = 0, y = 1)" in msg
    pts, quads = quad_grid(2, 2)
    k = np.ones(4)
    k[2] = np.inf
    g = write_vtu(tmp_path / "inf.vtu", pts, quads, cell_data={"k": k})
    with pytest.raises(CaseError, match=r"inf.vtu: cell data: field k holds inf at cell 2 at \(1.5, 0.25\)"):
        read_mesh_data(g)


def test_no_overlap_refused_whatever_the_outside_rule(tmp_path):
    cols = _cloud_columns(30)
    cols["x"] = cols["x"] + 10.0  # the data lie at x in [10, 12], the targets at x in [0, 2]
    src = read_cloud(write_cloud(tmp_path / "far.csv", cols))
    for rule in ("nearest", "nan", "refuse"):
        with pytest.raises(CaseError) as e:
            src.interpolate(TARGETS, ["u"], outside=rule)
        assert "far.csv" in str(e.value) and "no target point lies inside the data" in str(e.value)
        assert "x in [10" in str(e.value)


def test_wrong_shapes_and_incomplete_groups(tmp_path):
    pts, quads = quad_grid(2, 2)
    f = write_vtu(tmp_path / "s.vtu", pts, quads, cell_data={"velocity": np.ones((4, 3)), "p": np.ones(4)})
    with pytest.raises(CaseError, match=r"s.vtu: field 'p' is a scalar; remove component = 1"):
        read_mesh_data(f, names={"u": "velocity[0]", "v": "p[1]"})
    with pytest.raises(CaseError, match=r"s.vtu: field 'velocity' has no component 5"):
        read_mesh_data(f, names={"u": "velocity[5]", "v": "velocity[1]"})
    g = write_cloud(tmp_path / "half.csv", {"x": [0, 1, 0], "y": [0, 0, 1], "u": [1, 2, 3]})
    with pytest.raises(CaseError, match=r"half.csv: u given without v"):
        read_cloud(g)
    h = write_cloud(tmp_path / "two.csv", {"x": [0, 1, 0], "y": [0, 0, 1], "R_xx": [1, 2, 3], "R_xy": [0, 0, 0]})
    with pytest.raises(CaseError, match=r"two.csv: R_xx, R_xy given without R_yy"):
        read_cloud(h)
    line = write_cloud(tmp_path / "line.csv", {"x": [0, 1, 2, 3], "y": [0, 0, 0, 0], "k": [1, 2, 3, 4]})
    with pytest.raises(CaseError, match=r"line.csv: the data points lie on one line"):
        read_cloud(line).interpolate(TARGETS)
    mesh = fa.prepare(fa.case_from_dict({
        "mesh": {"generator": "cavity", "parameters": {"n": 2}}, "fluid": {"density": 1.0, "viscosity": 1.0},
        "boundary": {"lid": {"kind": "wall"}, "walls": {"kind": "wall"}}})).mesh
    with pytest.raises(CaseError, match=r"'k' has shape \(3,\) but there are 4 data sites"):
        cell_source(mesh, np.zeros((4, 2)), {"k": np.ones(3)}, "in memory")
