"""k-omega SST on the bundled flat plate and backward-facing step (coarse grids; medium and fine in
benchmarks/grid_study_flat_plate.py --model k-omega-sst and benchmarks/bench_step.py --model ...).

References
----------
* Turbulent flat-plate skin friction Cf = 0.0592 Re_x^(-1/5) (Schlichting, Boundary-Layer Theory,
  7th ed., 1979, eq. 21.12, from memory; the correlation of cases/flat_plate_checks.toml): 0.002724
  at Re_x = 4.85e6. Band 6 % (the issue's band for friction against a correlation). On the coarse
  grid SST sits 4.4 % below it: Menter's wall omega 10 * 6 nu / (beta_1 d_1^2) makes its skin
  friction converge at first order with the wall cell (coarse / medium / fine 0.002605 / 0.002663 /
  0.002690; extrapolated 0.002717, benchmarks/grid_study_flat_plate.py).
* Law of the wall at x = 0.97: u+ = y+ below y+ = 1 and, in 30 < y+ < 300, u+ = ln(y+) / 0.41 + B
  with B between 5.0 and 5.5 (common practice) within 5 %, as for the channel (test_channel.py).
* Backward-facing step (Driver & Seegmiller 1985, from memory): reattachment x_r / H = 6.26 +/- 0.10.
  SST with its own inflow layer (cases/step_inflow_sst.csv): 6.56 on the coarse grid, 6.53 on the
  medium grid (README). Band on the coarse grid: 5.8 .. 6.8 (the experiment within 8 %; SA's band in
  test_step.py is 5.8 .. 6.5).
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.post.profiles import wall_profile
from fvrans.post.separation import reattachment_x

ROOT = Path(__file__).resolve().parents[2]
STATION = 0.97
SCHLICHTING = 0.0592 * (STATION * 5e6) ** -0.2  # Schlichting (1979), from memory
STEP_BAND = (5.8, 6.8)  # Driver & Seegmiller (1985) x_r = 6.26, from memory; see the module docstring


@cache
def plate() -> fa.Result:
    case = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(ROOT / "meshes" / "flat_plate_coarse.msh"), "model.turbulence": "k-omega-sst"})
    return fa.solve(case)


@pytest.mark.slow
def test_sst_flat_plate_friction_and_law_of_the_wall():
    r = plate()
    assert r.converged
    w = r.wall("plate")
    o = np.argsort(w.x)
    cf = float(np.interp(STATION, w.x[o], w.cf[o]))
    assert cf == pytest.approx(SCHLICHTING, rel=0.06)
    p = wall_profile(r, STATION, "plate")
    sub = p.y_plus < 1.0
    log = (p.y_plus > 30) & (p.y_plus < 300)
    assert sub.sum() >= 1 and log.sum() >= 5
    np.testing.assert_allclose(p.u_plus[sub], p.y_plus[sub], rtol=0.05)
    lo = np.log(p.y_plus[log]) / 0.41 + 5.0
    outside = np.maximum(np.maximum(lo - p.u_plus[log], p.u_plus[log] - lo - 0.5), 0.0) / lo
    assert outside.max() < 0.05
    k, w_ = r.fields.variables["k"], r.fields.variables["omega"]
    assert np.all(k > 0) and np.all(w_ > 0)
    assert {"k", "omega", "eddy_viscosity_ratio", "sst_blending"} <= set(r.cell_data())
    assert r.history.names[-2:] == ["k", "omega"]


@pytest.mark.slow
def test_sst_step_reattachment_on_the_coarse_grid():
    case = fa.load_case(ROOT / "cases" / "step_coarse.toml").replace(
        {"model.turbulence": "k-omega-sst", "boundary.inlet.profile": "step_inflow_sst.csv"})
    r = fa.solve(case)
    assert r.converged
    xr = reattachment_x(r.wall("lower_wall"), 0.0, 40.0)
    assert STEP_BAND[0] <= xr <= STEP_BAND[1]


def test_sst_inflow_from_profile_columns(tmp_path):
    """k and omega columns of an inlet profile reach the inflow faces; one without the other is refused."""
    from fvrans.errors import CaseError

    (tmp_path / "p.csv").write_text("y,u,v,k,omega\n0,1,0,0.01,5\n1,1,0,0.03,15\n")
    (tmp_path / "q.csv").write_text("y,u,v,k\n0,1,0,0.01\n1,1,0,0.03\n")
    data = {
        "mesh": {"generator": "channel", "parameters": {"length": 2.0, "height": 1.0, "nx": 4, "ny": 4}},
        "fluid": {"density": 1.0, "viscosity": 1e-3}, "model": {"turbulence": "k-omega-sst"},
        "boundary": {"inlet": {"kind": "inflow-velocity", "profile": str(tmp_path / "p.csv")},
                     "outlet": {"kind": "outflow-pressure"}, "lower_wall": {"kind": "wall"},
                     "upper_wall": {"kind": "wall"}},
    }
    problem = fa.prepare(fa.case_from_dict(data))
    from fvrans.models import model_for_case

    model = model_for_case(problem.case, problem.mesh, problem.geom, problem.boundary)
    inlet = problem.mesh.patch("inlet")
    b = slice(inlet.start - problem.mesh.n_internal_faces, inlet.stop - problem.mesh.n_internal_faces)
    y = problem.geom.face_centre[inlet.start : inlet.stop, 1]
    np.testing.assert_allclose(model.k_inflow[b], 0.01 + 0.02 * y)
    np.testing.assert_allclose(model.w_inflow[b], 5 + 10 * y)
    data["boundary"]["inlet"]["profile"] = str(tmp_path / "q.csv")
    with pytest.raises(CaseError, match="gives k .* but not omega"):
        fa.case_from_dict(data)
