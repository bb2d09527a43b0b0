"""Forces in the frame of the free stream: a case turned as a whole (mesh, walls and inflow) by an
angle a, with ``output.flow_angle = a``, must give the same drag, lift and moment coefficients as
the case itself (the equations and the discretisation do not depend on the orientation of the
axes: rotational invariance of the Navier-Stokes equations); the axis components Cx, Cy turn with
the case. Checked on the laminar cylinder in a channel (the geometry of Schaefer & Turek 1996) on a
coarse grid, turned by 5 and 30 degrees.

Measured (1 040 triangles, about 970 iterations to the solver tolerance 1e-10): Cd = 5.594628,
Cl = -0.014229, Cm = 0.003268 (about the cylinder centre) on every orientation, the largest
difference 7e-9 at 5 degrees and 2.2e-8 at 30 degrees. The lift is small here, which makes this a
demanding check of the frame: a lift taken along the mesh's y axis would be Cy = 0.47 at 5 degrees.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

import fvrans.api as fa

U_MAX, H, D = 0.3, 0.41, 0.1


def turned_case(angle_deg: float) -> fa.Problem:
    """The channel with the cylinder, everything turned by ``angle_deg`` about the origin; the
    parabolic inflow is written in the turned coordinates eta = -x sin a + y cos a."""
    case = fa.case_from_dict({
        "mesh": {"generator": "cylinder_channel", "parameters": {"n_cylinder": 24}},
        "fluid": {"density": 1.0, "viscosity": 1e-3},
        "formula_constants": {"U_max": U_MAX, "H": H, "a": np.radians(angle_deg)},
        "boundary": {
            "inlet": {"kind": "inflow-velocity", "velocity": [
                "4 * U_max * (-x * sin(a) + y * cos(a)) * (H + x * sin(a) - y * cos(a)) / H**2 * cos(a)",
                "4 * U_max * (-x * sin(a) + y * cos(a)) * (H + x * sin(a) - y * cos(a)) / H**2 * sin(a)"]},
            "outlet": {"kind": "outflow-pressure"},
            "walls": {"kind": "wall"},
            "cylinder": {"kind": "wall"},
        },
        "solver": {"tolerance": 1e-10, "max_iterations": 3000},
        "output": {"wall_patches": ["cylinder"], "reference_velocity": 0.2, "reference_length": D,
                   "flow_angle": angle_deg, "moment_centre": [0.2, 0.2]},
    })
    c, s = np.cos(np.radians(angle_deg)), np.sin(np.radians(angle_deg))
    base = fa.prepare(case).mesh
    turned = dataclasses.replace(base, points=base.points @ np.array([[c, -s], [s, c]]).T)
    # the moment centre (the cylinder centre) turns with the case
    centre = np.array([[c, -s], [s, c]]) @ np.array([0.2, 0.2])
    return fa.prepare(case.set("output.moment_centre", centre.tolist()), mesh=turned)


@pytest.fixture(scope="module")
def straight():
    r = fa.solve(turned_case(0.0))
    assert r.converged, r.message
    return r.summary()["walls"]["cylinder"]["forces"]


@pytest.mark.parametrize("angle", [5.0, 30.0])
def test_drag_lift_and_moment_do_not_depend_on_the_orientation(straight, angle):
    r = fa.solve(turned_case(angle))
    assert r.converged, r.message
    s = r.summary()
    f = s["walls"]["cylinder"]["forces"]
    assert s["reference"]["flow_angle"] == pytest.approx(angle, abs=1e-12)
    for key in ("Cd", "Cl", "Cm", "Cd_pressure", "Cd_viscous", "Cl_pressure", "Cl_viscous"):
        assert f[key] == pytest.approx(straight[key], abs=1e-7), key
    # the axis components turn with the case: (Cx, Cy) = Cd e + Cl e_perp
    a = np.radians(angle)
    assert f["Cx"] == pytest.approx(straight["Cd"] * np.cos(a) - straight["Cl"] * np.sin(a), abs=1e-7)
    assert f["Cy"] == pytest.approx(straight["Cd"] * np.sin(a) + straight["Cl"] * np.cos(a), abs=1e-7)
    assert abs(f["Cy"] - straight["Cy"]) > 0.1 * abs(straight["Cd"]) * np.sin(a)  # the test can tell
