"""Forces and moments of walls and groups of walls in the frame of the free stream, the reference
values taken from the inflow, the output keys that set them, and the wall tables they can be
checked against.

References: plane Couette flow u = U y / h has the wall shear mu U / h and plane Poiseuille flow
with p = p0 - G x the wall shear G h / 2 (White 2006, Viscous Fluid Flow, 3rd ed., sec. 3-2, from
memory); the moments below are integrals of these tractions worked out by hand.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest
from post_meshes import cell_averages, channel, channel_boundary

import fvrans.api as fa
from fvrans.case import case_from_dict
from fvrans.errors import CaseError
from fvrans.physics.boundary import build_flow_boundary
from fvrans.post import all_wall_data, group_forces, inflow_reference, patch_forces

RHO, MU = 1.2, 1.8e-3


def test_moment_and_its_sign_on_a_wall_with_shear_and_pressure():
    """Bottom wall y = 0, 0 <= x <= L of a Poiseuille channel: traction G h / 2 along +x, pressure
    p0 - G x pushing down (-y). About c = (cx, cy), counter-clockwise positive:
    M_viscous = cy G h L / 2 (a force along +x below the centre turns counter-clockwise),
    M_pressure = -int_0^L (x - cx) (p0 - p_ref - G x) dx."""
    G, h, L, p0, p_ref, cx, cy = 0.3, 1.0, 2.0, 5.0, 1.0, 0.7, 0.4

    def field(x, y):
        return np.outer(G / (2 * MU) * y * (h - y), [1.0, 0.0])

    mesh, geom = channel(8, 6, L, h)
    bc = channel_boundary(mesh, geom, inlet_velocity=lambda x, y: tuple(field(x, y).T))
    vel = cell_averages(mesh, geom, field)
    p = p0 - G * geom.cell_centre[:, 0]
    gp = np.tile([-G, 0.0], (mesh.n_cells, 1))
    walls = all_wall_data(mesh, geom, bc, vel, p, gp, RHO, MU, 2.0, p_ref)
    f = patch_forces(walls["bottom"], l_ref=0.5, moment_centre=(cx, cy))
    assert f.moment_viscous == pytest.approx(cy * G * h * L / 2, rel=1e-10)
    a = p0 - p_ref
    m_p = -(a * (L**2 / 2 - cx * L) - G * (L**3 / 3 - cx * L**2 / 2))
    # face by face (midpoint rule on the 8 faces of length dx): the integral less G L dx^2 / 12
    dx = L / 8
    assert f.moment_pressure == pytest.approx(m_p - G * L * dx**2 / 12, rel=1e-12)
    m_p -= G * L * dx**2 / 12
    q = 0.5 * RHO * 2.0**2
    c = f.coefficients()
    assert c["Cm"] == pytest.approx((m_p + cy * G * h * L / 2) / (q * 0.5**2), rel=1e-10)
    assert c["Cm_pressure"] + c["Cm_viscous"] == pytest.approx(c["Cm"], rel=1e-12)
    # two walls as a group: the sum of their forces and moments
    g = group_forces("channel", [f, patch_forces(walls["top"], l_ref=0.5, moment_centre=(cx, cy))])
    assert g.viscous[0] == pytest.approx(G * h * L, rel=1e-10)  # both walls hold the fluid back
    assert g.moment_viscous == pytest.approx(cy * G * h * L / 2 - (h - cy) * G * h * L / 2, rel=1e-10)


@pytest.mark.parametrize("angle", [0.0, 5.0, 30.0, 135.0])
def test_drag_and_lift_are_the_force_in_the_frame_of_the_free_stream(angle):
    mesh, geom = channel(4, 3)
    bc = channel_boundary(mesh, geom, top_velocity=(2.0, 0.0), inlet_velocity=lambda x, y: (2.0 * y, 0 * y))
    vel = np.zeros((mesh.n_cells, 2))
    vel[:, 0] = 2.0 * geom.cell_centre[:, 1]
    p = 1.0 + 0.5 * geom.cell_centre[:, 0]
    gp = np.tile([0.5, 0.0], (mesh.n_cells, 1))
    w = all_wall_data(mesh, geom, bc, vel, p, gp, RHO, MU, 1.0)["bottom"]
    a = np.radians(angle)
    f = patch_forces(w, flow_direction=(np.cos(a), np.sin(a)))
    d = f.as_dict()
    assert d["drag"] == pytest.approx(d["Fx"] * np.cos(a) + d["Fy"] * np.sin(a), abs=1e-13)
    assert d["lift"] == pytest.approx(-d["Fx"] * np.sin(a) + d["Fy"] * np.cos(a), abs=1e-13)
    assert d["Cd"] ** 2 + d["Cl"] ** 2 == pytest.approx(d["Cx"] ** 2 + d["Cy"] ** 2, rel=1e-12)
    with pytest.raises(CaseError, match="non-zero 2-vector"):
        patch_forces(w, flow_direction=(0.0, 0.0))


def test_the_inflow_gives_the_reference_speed_and_direction():
    mesh, geom = channel(6, 5, 2.0, 1.0)
    nfi = mesh.n_internal_faces
    # a parabola of mean 1 at 10 degrees: the flow rate over the inlet length is the mean normal speed
    a = np.radians(10.0)
    specs = {"bottom": {"kind": "wall"}, "top": {"kind": "wall"}, "outlet": {"kind": "outflow-pressure"},
             "inlet": {"kind": "inflow-velocity",
                       "velocity": lambda x, y: (6 * y * (1 - y) * np.cos(a), 6 * y * (1 - y) * np.sin(a))}}
    ref = inflow_reference(geom, build_flow_boundary(mesh, geom, specs), nfi)
    assert ref.source == "inflow-velocity" and ref.speed == pytest.approx(np.cos(a), rel=1e-12)
    assert ref.direction == pytest.approx((np.cos(a), np.sin(a)), abs=1e-12)
    specs["top"] = {"kind": "outer-flow", "velocity": (3.0, 4.0)}
    ref = inflow_reference(geom, build_flow_boundary(mesh, geom, specs), nfi)
    assert (ref.source, ref.speed, ref.direction) == ("outer-flow", pytest.approx(5.0), pytest.approx((0.6, 0.8)))
    closed = {n: {"kind": "wall"} for n in ("bottom", "top", "inlet", "outlet")}
    assert inflow_reference(geom, build_flow_boundary(mesh, geom, closed), nfi) is None


CASE = {
    "mesh": {"generator": "channel", "parameters": {"length": 2.0, "height": 1.0, "nx": 8, "ny": 6}},
    "fluid": {"density": 1.0, "viscosity": 0.5},
    "boundary": {"inlet": {"kind": "inflow-velocity", "velocity": [0.5, 0.0]}, "outlet": {"kind": "outflow-pressure"},
                 "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}},
    "solver": {"tolerance": 1e-9},
}


def with_output(**output):
    return case_from_dict({**CASE, "output": output})


@pytest.mark.parametrize("output, words", [
    ({"flow_angle": 5.0, "flow_direction": [1.0, 0.0]}, ["output.flow_angle", "not both"]),
    ({"flow_direction": [0.0, 0.0]}, ["output.flow_direction", "non-zero"]),
    ({"reference_velocity": "free"}, ["output.reference_velocity", '"inflow"']),
    ({"reference_density": -1.0}, ["output.reference_density", "> 0"]),
    ({"force_groups": {"g": ["inlet"]}}, ["output.force_groups.g", "'inlet' is of kind 'inflow-velocity'"]),
    ({"force_groups": {"g": ["lower_wal"]}}, ["output.force_groups.g", "did you mean 'lower_wall'"]),
    ({"wall_patches": ["lower_wall"], "force_groups": {"g": ["upper_wall"]}},
     ["output.force_groups.g", "not in output.wall_patches"]),
    ({"force_groups": {"g": []}}, ["output.force_groups.g", "non-empty list"]),
])
def test_output_keys_of_forces_are_checked(output, words):
    with pytest.raises(CaseError) as info:
        with_output(**output)
    assert all(w in str(info.value) for w in words), str(info.value)


def test_summary_forces_groups_and_the_wall_tables_agree(tmp_path):
    case = with_output(force_groups={"both": ["lower_wall", "upper_wall"]}, flow_angle=90.0,
                       reference_density=2.0, moment_centre=[1.0, 0.5])
    r = fa.solve(case)
    assert r.converged
    s = r.summary()
    ref = s["reference"]
    assert (ref["u_ref"], ref["u_ref_from"], ref["rho"], ref["flow_direction_from"]) == (0.5, "inflow-velocity", 2.0,
                                                                                        "case")
    assert ref["flow_direction"] == pytest.approx([0.0, 1.0], abs=1e-15) and ref["flow_angle"] == 90.0
    lower, upper = s["walls"]["lower_wall"]["forces"], s["walls"]["upper_wall"]["forces"]
    both = s["force_groups"]["both"]
    assert both["patches"] == ["lower_wall", "upper_wall"]
    for key in ("Fx", "Fy", "drag", "lift", "moment", "Cd", "Cl", "Cm", "Cd_viscous", "moment_pressure"):
        assert both["forces"][key] == pytest.approx(lower[key] + upper[key], rel=1e-12, abs=1e-12)
    # the free stream along +y: drag = Fy, lift = -Fx; q with the reference density
    assert lower["drag"] == pytest.approx(lower["Fy"]) and lower["lift"] == pytest.approx(-lower["Fx"])
    assert lower["Cl"] == pytest.approx(lower["lift"] / (0.5 * 2.0 * 0.5**2 * 1.0))
    # an independent integration of the wall table gives the summary's forces and moment
    r.write(tmp_path)
    with open(tmp_path / "wall" / "lower_wall.csv", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert {"x", "y", "s", "length", "nx", "ny", "traction_x", "traction_y"} <= set(rows[0])
    col = {k: np.array([float(row[k]) for row in rows]) for k in rows[0]}
    fx = np.sum((-col["p_wall"] * col["nx"] + col["traction_x"]) * col["length"])
    fy = np.sum((-col["p_wall"] * col["ny"] + col["traction_y"]) * col["length"])
    m = np.sum(((col["x"] - 1.0) * (-col["p_wall"] * col["ny"] + col["traction_y"])
                - (col["y"] - 0.5) * (-col["p_wall"] * col["nx"] + col["traction_x"])) * col["length"])
    assert (fx, fy, m) == pytest.approx((lower["Fx"], lower["Fy"], lower["moment"]), rel=1e-12)
    assert np.allclose(np.hypot(col["nx"], col["ny"]), 1.0)
    assert np.allclose(col["nx"] * col["tx"] + col["ny"] * col["ty"], 0.0)
    np.testing.assert_allclose(np.diff(col["s"]), 0.5 * (col["length"][1:] + col["length"][:-1]))


def test_zero_shear_table_lists_the_sign_changes(tmp_path):
    """Lid-driven cavity: the shear on the side and bottom walls changes sign where the corner
    eddies end; the table gives each point's x, y and arc length, as the summary does."""
    r = fa.solve(fa.case_from_dict({
        "mesh": {"generator": "cavity", "parameters": {"n": 16}}, "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
        "solver": {"tolerance": 1e-6}}))
    r.write(tmp_path)
    walls = r.summary()["walls"]["walls"]
    with open(tmp_path / "wall" / "zero_shear" / "walls.csv", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert rows and list(rows[0]) == ["x", "y", "s", "change"]
    assert [float(row["x"]) for row in rows] == pytest.approx(walls["shear_sign_change_x"], abs=1e-12)
    assert [float(row["y"]) for row in rows] == pytest.approx(walls["shear_sign_change_y"], abs=1e-12)
    assert [float(row["s"]) for row in rows] == pytest.approx(walls["shear_sign_change_s"], abs=1e-12)
    assert [int(row["change"]) for row in rows] == [1 if k == "+to-" else -1 for k in walls["shear_sign_change_kind"]]
    for row in rows:  # each point lies on the walls x = 0, x = 1 or y = 0
        x, y = float(row["x"]), float(row["y"])
        assert min(abs(x), abs(x - 1.0), abs(y)) < 1e-12
