"""residuals.csv and summary.json from synthetic histories and wall fields."""

from __future__ import annotations

import json
from dataclasses import dataclass, field

import numpy as np
import pytest
from post_meshes import channel, channel_boundary

from fvrans.post import all_wall_data, build_summary, write_json_atomic, write_residuals_csv


@dataclass
class FakeHistory:
    names: list[str] = field(default_factory=lambda: ["u", "v", "continuity"])
    rows: list[list[float]] = field(default_factory=list)
    seconds: list[float] = field(default_factory=list)


def test_residuals_csv(tmp_path):
    h = FakeHistory(rows=[[1.0, 0.5, 0.25], [0.1, 0.05, 0.025], [1e-7, 2e-7, 3e-9]],
                    seconds=[0.12, 0.11, 0.1])
    path = tmp_path / "residuals.csv"
    write_residuals_csv(path, h, first_iteration=41)
    data = np.genfromtxt(path, delimiter=",", names=True)
    assert data.dtype.names == ("iteration", "u", "v", "continuity", "seconds")
    np.testing.assert_array_equal(data["iteration"], [41, 42, 43])
    np.testing.assert_array_equal(data["continuity"], [0.25, 0.025, 3e-9])
    np.testing.assert_array_equal(data["seconds"], [0.12, 0.11, 0.1])
    # timings missing for the last row: nan, rows still all written
    h.seconds = h.seconds[:2]
    write_residuals_csv(path, h)
    data = np.genfromtxt(path, delimiter=",", names=True)
    assert data["iteration"].tolist() == [1, 2, 3] and np.isnan(data["seconds"][2])
    # an empty history gives the header only
    write_residuals_csv(path, FakeHistory(names=["u", "nu_tilde"]))
    assert path.read_text() == "iteration,u,nu_tilde,seconds\n"


def test_summary_of_a_couette_run(tmp_path):
    """Plane Couette flow u = U y / h: wall shear mu U / h (White 2006, Viscous Fluid Flow,
    section 3-2, from memory), so Cx of the bottom wall is mu U L / (h q l_ref)."""
    U, h, L, rho, mu = 1.5, 1.0, 2.0, 1.0, 0.01
    mesh, geom = channel(10, 4, L, h)
    bc = channel_boundary(mesh, geom, top_velocity=(U, 0.0), inlet_velocity=lambda x, y: (U * y / h, 0 * y))
    vel = np.zeros((mesh.n_cells, 2))
    vel[:, 0] = U * geom.cell_centre[:, 1] / h
    walls = all_wall_data(mesh, geom, bc, vel, np.zeros(mesh.n_cells), np.zeros((mesh.n_cells, 2)),
                          rho, mu, U)
    hist = FakeHistory(rows=[[1.0, 1.0, 1.0], [1e-7, float("nan"), 2e-8]], seconds=[0.1, 0.1])
    s = build_summary("Couette", True, 2, 0.25, mesh.n_cells, hist, walls, l_ref=L,
                      extra={"case_file": "couette.toml"})
    path = tmp_path / "summary.json"
    write_json_atomic(path, s)  # strict JSON: fails on NaN or numpy leftovers
    back = json.loads(path.read_text())
    assert back == s
    assert back["converged"] is True and back["iterations"] == 2 and back["n_cells"] == 40
    assert back["final_residuals"] == {"u": 1e-7, "v": None, "continuity": 2e-8}
    q = 0.5 * rho * U**2
    cx = mu * U / h * L / (q * L)
    assert back["walls"]["bottom"]["forces"]["Cx"] == pytest.approx(cx, rel=1e-12)
    assert back["walls"]["top"]["forces"]["Cx_viscous"] == pytest.approx(-cx, rel=1e-12)
    assert back["walls"]["bottom"]["forces"]["Cx_pressure"] == 0.0
    assert back["walls"]["bottom"]["shear_sign_change_x"] == []
    assert back["reference"]["l_ref"] == L and back["case_file"] == "couette.toml"
    with pytest.raises(ValueError, match="'title'"):
        build_summary("x", True, 1, 0.0, 1, extra={"title": "y"})


def test_summary_lists_zero_shear_points():
    """tau_w = mu sin(x) on the bottom wall: zeros at pi and 2 pi (to interpolation accuracy)."""
    mesh, geom = channel(70, 2, length=7.0)
    bc = channel_boundary(mesh, geom)
    xc = geom.cell_centre
    vel = np.zeros((mesh.n_cells, 2))
    vel[:, 0] = np.sin(xc[:, 0]) * xc[:, 1]
    walls = all_wall_data(mesh, geom, bc, vel, np.zeros(mesh.n_cells), np.zeros((mesh.n_cells, 2)),
                          1.0, 1.0, 1.0)
    s = build_summary("sine", False, 5, 1.0, mesh.n_cells, walls=walls)
    xs = s["walls"]["bottom"]["shear_sign_change_x"]
    assert xs == pytest.approx([np.pi, 2 * np.pi], abs=0.1**2 / 8)
    assert s["walls"]["bottom"]["shear_sign_change_kind"] == ["+to-", "-to+"]
    assert all(type(v) is float for v in xs)
