"""Grid studies that run a case (``fvrans grid-study --case``), wall-station quantities, and the
command-line checks.

References (exact solutions of the Navier-Stokes equations; e.g. White 2006, Viscous Fluid Flow,
3rd ed., sec. 3-2, from memory):
- developed plane Poiseuille flow between walls h apart with mean velocity U: tau_w = 6 mu U / h,
  so Cf = 12 mu / (rho U h) = 0.6 for mu = 0.05, rho = U = h = 1;
- circular Couette flow, inner cylinder (R1) turning at Omega, outer one (R2) at rest: the torque
  per unit length on the inner cylinder is -4 pi mu Omega R1^2 R2^2 / (R2^2 - R1^2).
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from tests_root import ROOT

import fvrans.api as fa
from fvrans.case import load_case
from fvrans.cli import main
from fvrans.errors import CaseError
from fvrans.mesh.generate import annulus, channel
from fvrans.mesh.io import write_mesh
from fvrans.verify import grid_changes, quantity_value

CASE = """
title = "channel, Re_h = 20"
[mesh]
generator = "channel"
parameters = { length = 4.0, height = 1.0, nx = 12, ny = 4 }
[fluid]
density = 1.0
viscosity = 0.05
[boundary.inlet]
kind = "inflow-velocity"
velocity = [1.0, 0.0]
[boundary.outlet]
kind = "outflow-pressure"
[boundary.lower_wall]
kind = "wall"
[boundary.upper_wall]
kind = "wall"
[solver]
tolerance = 1e-9
max_iterations = 3000
"""
CF_POISEUILLE = 0.6  # 12 mu / (rho U h), exact
STATION = "wall.lower_wall.cf@x=3.5"  # developed: the entrance length is about 0.05 Re_h h = 1 (common practice)


def test_grid_study_runs_a_case_on_mesh_files(tmp_path):
    case = tmp_path / "channel.toml"
    case.write_text(CASE)
    meshes = []
    for ny in (6, 12, 24):  # ratio 2 in each direction
        p = tmp_path / f"channel_{ny}.msh"
        write_mesh(channel(length=4.0, height=1.0, nx=3 * ny, ny=ny), p)
        meshes.append(str(p))
    out = tmp_path / "study"
    code = main(["grid-study", "--case", str(case), "--meshes", *meshes, "--quantity", STATION,
                 "--quantity", "walls.lower_wall.forces.Cd", "--report", str(out)])
    data = json.loads((out / "grid_study.json").read_text())
    runs = data["runs"]
    assert [r["label"] for r in runs] == ["channel_24", "channel_12", "channel_6"]  # fine to coarse
    assert all(r["converged"] for r in runs) and [r["n_cells"] for r in runs] == [1728, 432, 108]
    for r in runs:  # the result folders are written and the values are read from them
        assert (out / "runs" / r["label"] / "summary.json").is_file()
    g = data["quantities"][STATION]["finest"]
    assert g["phi"][0] == pytest.approx(quantity_value(out / "runs" / "channel_24", STATION), rel=1e-14)
    # the developed parabola is reproduced exactly on quads (second-order wall gradient, exact for
    # quadratic profiles): every grid gives the exact wall shear up to the decay of the entrance
    # disturbance and the solver tolerance (measured 4.5e-6, 5.4e-7, 9.2e-7)
    assert g["phi"] == pytest.approx([CF_POISEUILLE] * 3, rel=1e-5)
    md = (out / "grid_study.md").read_text()
    assert f"| {STATION} |" in md and "| 1 (channel_24) | yes |" in md
    assert (out / "plots" / f"{STATION}.png").is_file()  # a plain name (no separator) keeps its form
    # the drag of the whole lower wall includes the inlet corner (singular shear): its order falls far
    # below the formal 2, which flags it, and the exit code is 1
    cd = data["quantities"]["walls.lower_wall.forces.Cd"]["finest"]
    assert cd["flagged"] and code == 1


COUETTE = """
title = "circular Couette flow, Re = 10"
[mesh]
file = "annulus_16.msh"
[fluid]
density = 1.0
viscosity = 0.1
[formula_constants]
omega = 1.0
[boundary.inner]
kind = "wall"
velocity = ["-omega * y", "omega * x"]
[boundary.outer]
kind = "wall"
[solver]
tolerance = 1e-9
[monitor]
settle = false   # no net force on either cylinder: the residuals decide
"""
TORQUE = -4 * np.pi * 0.1 * 1.0 * 4.0 / 3.0  # -4 pi mu Omega R1^2 R2^2 / (R2^2 - R1^2), R1 = 1, R2 = 2


def test_grid_study_of_the_torque_on_a_turning_cylinder(tmp_path):
    """Triangles on 16 x 4, 32 x 8, 64 x 16 points: the observed order of the torque is about 2
    (measured 1.85), and the Richardson-extrapolated torque lies far closer to the exact one than the
    fine grid's (measured 3.6e-4 against 3.4e-3 relative), inside the fine-grid GCI band."""
    case = tmp_path / "couette.toml"
    case.write_text(COUETTE)
    meshes = []
    for n in (16, 32, 64):
        p = tmp_path / f"annulus_{n}.msh"
        write_mesh(annulus(1.0, 2.0, n, n // 4, cells="triangles"), p)
        meshes.append(str(p))
    out = tmp_path / "study"
    quantity = "walls.inner.forces.moment"
    code = main(["grid-study", "--case", str(case), "--meshes", *meshes, "--quantity", quantity,
                 "--report", str(out)])
    g = json.loads((out / "grid_study.json").read_text())["quantities"][quantity]["finest"]
    assert code == 0
    assert g["behaviour"] == "monotone" and 1.5 < g["p"] < 2.5
    assert g["phi_ext21"] == pytest.approx(TORQUE, rel=1e-3)
    assert abs(g["phi"][0] - TORQUE) < g["gci_fine21"] * abs(g["phi"][0])
    assert abs(g["phi_ext21"] - TORQUE) < 0.2 * abs(g["phi"][0] - TORQUE)


def test_family_levels_give_the_bundled_meshes():
    ch = grid_changes(family="flat_plate_family")
    assert list(ch) == ["coarse", "medium", "fine"]
    case = load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(ch["coarse"])
    assert case.mesh.generator == "flat_plate_family" and case.mesh.file is None
    assert fa.prepare(case).mesh.n_cells == 3264  # the 68 x 48 cells of meshes/flat_plate_coarse.msh
    with pytest.raises(CaseError, match="at least 3 grids"):
        grid_changes(family="flat_plate_family", levels=["coarse", "medium"])
    with pytest.raises(CaseError, match="one way"):
        grid_changes(meshes=["a.msh"], family="flat_plate_family")


def test_wall_station_quantity(make_result_dir):
    d = make_result_dir(walls={"w": {"x": [0.5, 1.5, 2.5], "y": [0.0, 0.0, 0.0], "cf": [3.0, 2.0, 4.0]}})
    assert quantity_value(d, "wall.w.cf@x=2.0") == pytest.approx(3.0)  # between the face centres
    assert quantity_value(d, "wall.w.cf@x=0.5") == pytest.approx(3.0)
    with pytest.raises(CaseError, match="outside the wall faces"):
        quantity_value(d, "wall.w.cf@x=0.4")  # never extrapolated
    with pytest.raises(CaseError, match="no column 'cp'"):
        quantity_value(d, "wall.w.cp@x=1.0")
    with pytest.raises(CaseError, match="wall.<patch>.<column>@x=<number>"):
        quantity_value(d, "wall.w.cf@0.97")


@pytest.mark.parametrize(
    "args, match",
    [
        (["--meshes", "a.msh", "b.msh", "c.msh"], "need --case"),
        (["--case", "CASE"], "either as --meshes"),
        (["--case", "CASE", "--meshes", "a.msh", "--family", "flat_plate_family"], "either as --meshes"),
        (["--case", "CASE", "--meshes", "MESH", "MESH2"], "at least 3 grids"),
        (["--case", "CASE", "--meshes", "MESH", "MESH2", "absent.msh"], "absent.msh does not exist"),
    ],
)
def test_grid_study_command_line_errors(tmp_path, capsys, args, match):
    case = tmp_path / "c.toml"
    case.write_text(CASE)
    for name in ("m1", "m2"):
        write_mesh(channel(length=4.0, height=1.0, nx=6, ny=2), tmp_path / f"{name}.msh")
    args = [a.replace("CASE", str(case)).replace("MESH2", str(tmp_path / "m2.msh"))
            .replace("MESH", str(tmp_path / "m1.msh")) for a in args]
    assert main(["grid-study", *args, "--quantity", "walls.lower_wall.forces.Cd", "--report", str(tmp_path / "r")]) == 2
    assert match in capsys.readouterr().err


def test_cases_lists_the_bundled_specs(capsys):
    assert main(["cases", "--dir", str(ROOT / "cases")]) == 0
    out = capsys.readouterr().out
    assert "flat_plate_checks.toml" in out and "comparison spec: Turbulent flat plate" in out
    assert "step_checks.toml" in out and "cannot be loaded" not in out
