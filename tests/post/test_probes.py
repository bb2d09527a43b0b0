"""Line probes: the containing cell is found on any cell shape (edges, vertices and boundary
included), sampling with cell gradients is exact for linear fields, probe tables have the
documented columns, and bad probe settings are refused with the key named."""

from __future__ import annotations

import numpy as np
import pytest
from post_meshes import channel, mixed_cells, square_with_hole

from fvrans import api
from fvrans.case import case_from_dict
from fvrans.errors import CaseError
from fvrans.mesh import compute_geometry
from fvrans.mesh.locate import CellLocator, line_points
from fvrans.post.plots import probe_figure
from fvrans.post.probes import sample_line


def _linear(c: np.ndarray) -> np.ndarray:
    return 0.3 + 1.7 * c[:, 0] - 0.9 * c[:, 1]


@pytest.mark.parametrize("make", ["mixed", "hole", "triangles"])
def test_sampling_is_exact_for_a_linear_field(make):
    if make == "mixed":
        mesh = mixed_cells()
        geom = compute_geometry(mesh)
        start, end = (-0.9, 0.1), (1.7, 0.3)  # hexagon, then the quad on its first edge
    elif make == "hole":
        mesh, geom = square_with_hole(3)
        start, end = (0.0, 0.2), (4.0, 0.9)  # along the bottom band, from boundary to boundary
    else:
        mesh, geom = channel(7, 5, triangles=True)
        start, end = (0.0, 0.0), (2.0, 1.0)  # corner to corner: through vertices and along edges
    c = geom.cell_centre
    values = {"phi": _linear(c), "const": np.full(mesh.n_cells, 2.5)}
    grads = {"phi": np.tile([1.7, -0.9], (mesh.n_cells, 1))}
    cols = sample_line(CellLocator(mesh), c, start, end, 57, values, grads)
    pts = line_points(start, end, 57)
    np.testing.assert_allclose(cols["phi"], _linear(pts), rtol=0, atol=1e-12)
    np.testing.assert_allclose(cols["const"], 2.5)
    np.testing.assert_allclose(cols["s"], np.hypot(*(pts - pts[0]).T))
    assert list(cols)[:3] == ["s", "x", "y"]


def test_locator_finds_cells_and_reports_outside_points():
    mesh, geom = square_with_hole(2)
    loc = CellLocator(mesh)
    # the cell of each centroid is that cell; a hole point and far points are outside
    np.testing.assert_array_equal(loc.find(geom.cell_centre), np.arange(mesh.n_cells))
    found = loc.find(np.array([[2.0, 2.0], [5.0, 1.0], [-1e-3, 1.0], [0.0, 0.0], [1.0, 1.0], [4.0, 4.0]]))
    assert found[0] == -1 and found[1] == -1 and found[2] == -1
    assert np.all(found[3:] >= 0)  # corners of the domain and of the hole


def _channel_case(**probes) -> dict:
    return {
        "title": "probe channel",
        "mesh": {"generator": "channel", "parameters": {"length": 4.0, "height": 1.0, "nx": 24, "ny": 10}},
        "fluid": {"density": 1.0, "viscosity": 0.05},
        "boundary": {"inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
                     "outlet": {"kind": "outflow-pressure"}, "lower_wall": {"kind": "wall"},
                     "upper_wall": {"kind": "wall"}},
        "solver": {"tolerance": 1e-7},
        "probes": probes,
    }


def test_probe_tables_of_a_run_and_the_developed_channel_profile(tmp_path):
    case = case_from_dict(_channel_case(across={"start": [3.5, 0.0], "end": [3.5, 1.0], "points": 21},
                                        centre={"start": [0.0, 0.5], "end": [4.0, 0.5]}))
    result = api.solve(case)
    out = result.write(tmp_path)
    header = (out / "profiles" / "across.csv").read_text().splitlines()[0]
    assert header == "s,x,y,u,v,p"
    rows = np.loadtxt(out / "profiles" / "centre.csv", delimiter=",", skiprows=1)
    assert rows.shape == (101, 6)
    across = result.probe("across")
    y = across["y"]
    # developed plane Poiseuille flow u = 6 U y (1 - y) / h^2 (exact solution, e.g. White 2006,
    # Viscous Fluid Flow, sec. 3-3.2). A linear reconstruction of this parabola over cells of
    # height dy = 0.1 is off by at most |u''| (dy / 2)^2 / 2 = 12 * 0.05^2 / 2 = 0.015 (Taylor)
    inner = (y > 0.15) & (y < 0.85)
    exact = 6 * y * (1 - y)
    np.testing.assert_allclose(across["u"][inner], exact[inner], rtol=0, atol=0.015 + 2e-3)
    with pytest.raises(CaseError, match="no probe 'acros'"):
        result.probe("acros")
    fig = probe_figure(out / "profiles" / "across.csv", title="probe channel")
    ax = fig.axes[0]
    # a vertical probe: velocities across, s (distance from the start) upwards; u and v, the probe named
    lines = _labelled(ax)
    assert sorted(lines) == ["u, probe across", "v, probe across"] and "across" in ax.get_title()
    assert ax.get_legend() is not None
    assert ax.get_xlabel().startswith("velocity") and ax.get_ylabel().startswith("s, distance")
    np.testing.assert_allclose(lines["u, probe across"].get_xdata(), across["u"])
    np.testing.assert_allclose(lines["u, probe across"].get_ydata(), across["s"])
    fig = probe_figure(out / "profiles" / "centre.csv", "p")  # along x: s horizontal
    ax = fig.axes[0]
    assert ax.get_xlabel().startswith("s, distance") and ax.get_ylabel().startswith("p")
    assert list(_labelled(ax)) == ["p, probe centre"]


def _labelled(ax) -> dict:
    return {ln.get_label(): ln for ln in ax.get_lines() if not ln.get_label().startswith("_")}


def test_spalart_allmaras_probe_has_model_columns(tmp_path):
    data = _channel_case(mid={"start": [2.0, 0.0], "end": [2.0, 1.0], "points": 5})
    data["model"] = {"turbulence": "spalart-allmaras"}
    data["solver"] = {"max_iterations": 3}
    result = api.solve(case_from_dict(data))
    result.write(tmp_path)
    header = (tmp_path / "profiles" / "mid.csv").read_text().splitlines()[0]
    assert header == "s,x,y,u,v,p,nu_tilde,eddy_viscosity_ratio"


def test_probe_file_as_inlet_profile_is_not_read_as_the_wrong_ratio(tmp_path):
    """Regression (issue #12 item 4): a probe file's nu_t / nu column once passed for the inlet's
    nu_tilde / nu (14x too little turbulence near nu_tilde = 3 nu, where f_v1 = 27 / (27 + 7.1^3)).
    Now it is refused with the file, the column and the fix; following the fix gives the inflow
    nu_tilde / nu of the probe."""
    data = _channel_case(mid={"start": [2.0, 0.0], "end": [2.0, 1.0], "points": 5})
    data["model"] = {"turbulence": "spalart-allmaras"}
    data["solver"] = {"max_iterations": 3}
    api.solve(case_from_dict(data)).write(tmp_path / "run")
    probe = tmp_path / "run" / "profiles" / "mid.csv"
    second = _channel_case()
    second["model"] = {"turbulence": "spalart-allmaras"}
    second["boundary"]["inlet"] = {"kind": "inflow-velocity", "profile": str(probe)}
    with pytest.raises(CaseError) as exc:
        case_from_dict(second)
    msg = str(exc.value)
    assert "boundary.inlet.profile" in msg and str(probe) in msg and "'eddy_viscosity_ratio'" in msg
    assert "add a column nu_tilde_ratio" in msg
    # the fix the message names: a column nu_tilde_ratio = nu_tilde / nu
    nu = 0.05
    lines = probe.read_text().splitlines()
    cols = lines[0].split(",")
    rows = [[float(v) for v in ln.split(",")] for ln in lines[1:]]
    fixed = tmp_path / "inflow.csv"
    fixed.write_text(",".join(c for c in cols if c != "eddy_viscosity_ratio") + ",nu_tilde_ratio\n" + "".join(
        ",".join(repr(v) for c, v in zip(cols, r) if c != "eddy_viscosity_ratio")
        + f",{r[cols.index('nu_tilde')] / nu!r}\n" for r in rows))
    second["boundary"]["inlet"]["profile"] = str(fixed)
    case = case_from_dict(second)
    y = np.array([r[cols.index("y")] for r in rows])
    ratio = case.boundary_nu_tilde_ratio("inlet", np.zeros_like(y), y)
    np.testing.assert_allclose(ratio, [r[cols.index("nu_tilde")] / nu for r in rows], rtol=1e-12)
    eddy = np.array([r[cols.index("eddy_viscosity_ratio")] for r in rows])
    assert np.all(ratio[1:-1] > 5 * eddy[1:-1])  # the two ratios differ several-fold away from the walls


@pytest.mark.parametrize(
    "probe, words",
    [
        ({"start": [1.0, 0.5], "end": [2.0, 0.5], "npoints": 3}, ["probes.a.npoints", "did you mean 'points'"]),
        ({"start": [1.0, 0.5], "end": [2.0, 0.5], "points": 1}, ["probes.a.points", ">= 2"]),
        ({"start": [1.0, 0.5], "end": [1.0, 0.5]}, ["probes.a.end", "two different points"]),
        ({"start": [1.0, 0.5]}, ["probes.a.end", "missing"]),
        ({"start": 1.0, "end": [2.0, 0.5]}, ["probes.a.start", "list of 2 numbers"]),
        ([1.0, 2.0], ["probes.a", "must be a table"]),
    ],
)
def test_bad_probe_settings_name_the_key(probe, words):
    with pytest.raises(CaseError) as exc:
        case_from_dict(_channel_case(a=probe))
    for w in words:
        assert w in str(exc.value)


def test_bad_probe_name_and_points_outside_the_mesh():
    with pytest.raises(CaseError, match="file name"):
        case_from_dict(_channel_case(**{"a/b": {"start": [1.0, 0.5], "end": [2.0, 0.5]}}))
    case = case_from_dict(_channel_case(high={"start": [1.0, 0.5], "end": [1.0, 1.5], "points": 11}))
    with pytest.raises(CaseError, match=r"probes\.high: 5 of 11 sample points lie outside the mesh.*\(1, 1\.1\)"):
        api.prepare(case)
