"""A-priori model tests (#17 phase 2, [reference] freeze_velocity): only the model's equations on a
frozen reference velocity, through the model interface (the loop calls model.update alone).

* Acceptance: on the bundled plate (coarse grid), Spalart-Allmaras frozen on its own converged
  velocity (and face fluxes, a Result in memory) returns its own eddy viscosity to solver tolerance,
  from the uniform start nu_tilde = 3 nu.
* The same from the run's result folder (fields.vtu: the face fluxes are interpolated from the
  velocity there, so the answer differs at the level of that interpolation).
* k-omega SST frozen on the SA flow: another model through the same interface, and its departure
  from the reference's optimal eddy viscosity.
* The bundled demo on INVENTED data (cases/flat_plate_a_priori_demo.toml) from the command line:
  maps, the departure figure, per-region figures, the feature table.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from reference_runs import sa_run

import fvrans.api as fa
from fvrans.cli import main
from fvrans.models.spalart_allmaras import eddy_viscosity
from fvrans.post.outputs import listed_outputs

ROOT = Path(__file__).resolve().parents[2]


def _nu_t(r: fa.Result) -> np.ndarray:
    return eddy_viscosity(r.fields.variables["nu_tilde"], r.case.fluid.kinematic_viscosity)


@pytest.mark.slow
def test_sa_frozen_on_its_own_plate_returns_its_eddy_viscosity():
    sa, _ = sa_run("plate")
    r = fa.solve(sa.case.set("reference.freeze_velocity", True), reference=sa)
    assert r.converged and r.stopped_by == "settled", r.message
    assert r.history.names == ["nu_tilde"] and fa.residual_names(r.case) == ["nu_tilde"]
    assert r.monitor.names == ["nu_tilde_change"]
    np.testing.assert_array_equal(r.velocity, sa.velocity)  # frozen
    nut, ref = _nu_t(r), _nu_t(sa)
    # solver tolerance: both runs stop at normalised imbalances of 1e-8 (measured 8e-10 of max nu_t)
    assert np.abs(nut - ref).max() < 1e-6 * ref.max()
    comp = r.summary()["reference_comparison"]
    assert comp["a_priori"]["frozen_face_fluxes"] == "the reference's own"
    assert "velocity_error" not in comp  # nothing to compare: the velocity is the reference's
    assert comp["model"]["regions"]["all"]["eddy_viscosity"]["max"] < 1e-6
    assert abs(comp["model"]["regions"]["all"]["median_log10_ratio"]) < 1e-6


@pytest.mark.slow
def test_a_priori_from_a_result_folder_and_another_model():
    sa, folder = sa_run("plate")
    case = sa.case.replace({"reference.freeze_velocity": True, "reference.data": str(folder)})
    r = fa.solve(case)
    assert r.converged, r.message
    # face fluxes interpolated linearly from the cell velocities: measured 3.1e-4 of max nu_t
    assert np.abs(_nu_t(r) - _nu_t(sa)).max() < 3e-3 * _nu_t(sa).max()
    assert r.summary()["reference_comparison"]["a_priori"]["frozen_face_fluxes"].startswith("interpolated")
    sst = fa.solve(case.set("model.turbulence", "k-omega-sst"), reference=sa)
    assert sst.converged and sst.history.names == ["k", "omega"], sst.message
    assert sst.monitor.names == ["k_change", "omega_change"]
    dep = sst.summary()["reference_comparison"]["model"]["regions"]["all"]
    # another model on the same flow: its eddy viscosity departs from SA's, within a decade in the median
    assert dep["eddy_viscosity"]["max"] > 1e-3 and abs(dep["median_log10_ratio"]) < 1.0
    assert "eddy_viscosity_log_ratio" in sst.cell_data() and "stress_departure" in sst.cell_data()


@pytest.mark.slow
def test_bundled_demo_on_invented_data(tmp_path):
    out = tmp_path / "demo"
    assert main(["run", str(ROOT / "cases" / "flat_plate_a_priori_demo.toml"), "--out", str(out), "--quiet"]) == 0
    s = json.loads((out / "summary.json").read_text())
    assert s["stopped_by"] == "settled" and list(s["final_residuals"]) == ["nu_tilde"]
    comp = s["reference_comparison"]
    assert set(comp["regions"]) == {"all", "near_wall", "outer", "rear_half"}
    assert comp["model"]["regions"]["near_wall"]["stress"]["cells"] == comp["regions"]["near_wall"]["cells"]
    for name in ("field_eddy_viscosity_log_ratio.png", "field_stress_departure_zoom.png", "model_departure.png",
                 "field_stress_misalignment.png", "field_non_eddy_share.png", "field_optimal_eddy_viscosity_ratio.png"):
        assert (out / "plots" / name).is_file(), name
    table = np.load(out / "features.npz")
    stressed = table["k"] > 0  # the invented data have no stress outside the boundary layer: b undefined there
    assert len(table["x"]) == s["n_cells"] and stressed.sum() > 1000
    assert np.isfinite(table["b_xy"][stressed]).all() and np.isnan(table["b_xy"][~stressed]).all()
    files = listed_outputs(out)["files"]
    assert "features.csv" in files and "features.npz" in files


def test_demo_data_are_made_by_their_script(tmp_path):
    """The committed invented data are exactly what make_demo_reference.py writes (not hand-edited)."""
    import runpy

    script = runpy.run_path(str(ROOT / "cases" / "reference" / "make_demo_reference.py"))
    assert script["main"](["--out", str(tmp_path)]) == 0
    name = "demo_plate_invented.csv"
    assert (tmp_path / name).read_text() == (ROOT / "cases" / "reference" / name).read_text()
