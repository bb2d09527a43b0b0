"""Flat-plate verification: turbulent (Spalart-Allmaras, Re = 5e6 per unit length) on the coarse and
medium grids of the bundled family, and laminar (Blasius, Re_L = 1e5) on the coarse grid.

References
----------
* NASA Langley Turbulence Modeling Resource, 2D zero-pressure-gradient flat plate verification
  case (SA model, grid-converged values of the codes compared there): Cf(x = 0.97) = 0.00271,
  plate drag coefficient (one side, length 2) 0.00286 -- from memory. That case is run at Mach 0.2;
  here it is incompressible.
* Schlichting, Boundary-Layer Theory: turbulent flat-plate correlation Cf = 0.0592 Re_x^(-1/5)
  (the 1/7-power-law estimate, valid for about 5e5 < Re_x < 1e7); Blasius solution
  Cf sqrt(Re_x) = 0.664 and the profile f'(eta), eta = y sqrt(U/(nu x)):
  f'(1) = 0.32979, f'(2) = 0.62977, f'(3) = 0.84605, f'(4) = 0.95552 (Howarth's table, from memory).
* Law of the wall: u+ = y+ in the viscous sublayer, u+ = ln(y+)/0.41 + 5.0 in the log layer
  (Coles' constants; common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from flat_plate_runs import CASES, MESHES, STATION, converged_iteration, laminar, turbulent

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.post.forces import patch_forces
from fvrans.post.profiles import wall_profile

CF_097 = 0.00271  # NASA TMR, SA, grid-converged (from memory)
CD_PLATE = 0.00286  # NASA TMR, SA, grid-converged (from memory)
RE_UNIT = 5e6


def _cf_at(run, x: float) -> float:
    w = run.result.wall("plate")
    o = np.argsort(w.x)
    return float(np.interp(x, w.x[o], w.cf[o]))


def _drag(run) -> float:
    return patch_forces(run.result.wall("plate"), l_ref=2.0).coefficients()["Cd"]


@pytest.mark.slow
@pytest.mark.parametrize("level", ["coarse", "medium"])
def test_turbulent_converges_from_uniform_start(level):
    """Converged = residuals below 1e-6 and Cf(0.97) within 0.1 % of its final value from then on.
    The run goes on to 1e-8 to know the final value; it must not stall or cycle on the way."""
    run = turbulent(level)
    assert run.result.converged  # residuals below 1e-8
    n_conv = converged_iteration(run)
    assert 0 <= n_conv < len(run.cf_history) - 10
    nt = run.result.fields.variables["nu_tilde"]
    assert np.all(np.isfinite(nt)) and nt.min() >= 0.0  # no negative nu_tilde, so no negative nu_t


@pytest.mark.slow
@pytest.mark.parametrize("level", ["coarse", "medium"])
def test_turbulent_skin_friction_and_drag(level):
    run = turbulent(level)
    assert _cf_at(run, STATION) == pytest.approx(CF_097, rel=0.03)
    assert _drag(run) == pytest.approx(CD_PLATE, rel=0.03)
    # the pressure part of the drag of a flat plate is zero (normals along y)
    assert abs(patch_forces(run.result.wall("plate"), l_ref=2.0).coefficients()["Cd_pressure"]) < 1e-12


@pytest.mark.slow
def test_turbulent_refinement_moves_towards_the_reference():
    """The finer grid is closer to the grid-converged reference than the coarser one (coarse vs
    medium here; medium vs fine, run to 1e-10, in benchmarks/grid_study_flat_plate.py: Cf(0.97)
    +0.65 % -> +0.64 %, drag +0.81 % -> +0.78 %)."""
    coarse, medium = turbulent("coarse"), turbulent("medium")
    assert abs(_cf_at(medium, STATION) - CF_097) < abs(_cf_at(coarse, STATION) - CF_097)
    assert abs(_drag(medium) - CD_PLATE) < abs(_drag(coarse) - CD_PLATE)


@pytest.mark.slow
def test_turbulent_cf_follows_the_power_law_correlation():
    w = turbulent("medium").result.wall("plate")
    m = (w.x >= 0.5) & (w.x <= 2.0)
    ref = 0.0592 * (RE_UNIT * w.x[m]) ** -0.2
    assert np.max(np.abs(w.cf[m] / ref - 1)) < 0.08


@pytest.mark.slow
def test_law_of_the_wall_at_x_097():
    p = wall_profile(turbulent("medium").result, STATION)
    sub = p.y_plus < 3
    log = (p.y_plus >= 30) & (p.y_plus <= 300)
    assert sub.sum() >= 3 and log.sum() >= 5  # enough points in both layers on this grid
    assert np.max(np.abs(p.u_plus[sub] / p.y_plus[sub] - 1)) < 0.05
    law = np.log(p.y_plus[log]) / 0.41 + 5.0
    assert np.max(np.abs(p.u_plus[log] / law - 1)) < 0.04


@pytest.mark.slow
def test_eddy_viscosity_is_zero_at_the_wall_and_large_in_the_layer():
    run = turbulent("medium")
    r = run.result
    nt = r.fields.variables["nu_tilde"]
    nu = r.case.fluid.kinematic_viscosity
    # inflow value nu_tilde = 3 nu far from the plate (upstream, top corner)
    x = r.cell_centres
    up = (x[:, 0] < -0.2) & (x[:, 1] > 0.5)
    assert nt[up] == pytest.approx(3 * nu, rel=0.02)
    # Re_theta ~ 1e4 at x = 2: the peak nu_t / nu is of order 100 or more (common practice)
    assert nt.max() / nu > 100


def test_solve_returns_model_fields():
    case = fa.load_case(CASES / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(MESHES / "flat_plate_coarse.msh"), "solver.max_iterations": 3})
    r = fa.solve(case)
    d = r.cell_data()
    n = r.mesh.n_cells
    for key in ("velocity", "pressure", "nu_tilde", "eddy_viscosity_ratio", "wall_distance"):
        assert key in d and len(d[key]) == n
    assert np.all(d["eddy_viscosity_ratio"] >= 0) and np.all(d["wall_distance"] > 0)
    assert r.history.names[-1] == "nu_tilde"


def test_laminar_blasius_skin_friction():
    run = laminar()
    assert run.result.converged
    r = run.result
    nu = r.case.fluid.kinematic_viscosity
    w = r.wall("plate")
    L = 2.0
    m = (w.x >= 0.2 * L) & (w.x <= 0.9 * L)
    assert m.sum() > 10
    value = w.cf[m] * np.sqrt(w.x[m] / nu)
    assert np.max(np.abs(value / 0.664 - 1)) < 0.03


def test_laminar_profile_is_blasius():
    r = laminar().result
    nu = r.case.fluid.kinematic_viscosity
    blasius = {1.0: 0.32979, 2.0: 0.62977, 3.0: 0.84605, 4.0: 0.95552}
    for x in (0.6, 1.2):
        p = wall_profile(r, x)
        eta = p.y / np.sqrt(nu * x)
        for e, f in blasius.items():
            assert np.interp(e, eta, p.u) == pytest.approx(f, rel=0.02)
        # wall units are consistent with the wall shear: u+ / y+ -> 1 at the wall
        assert p.u_plus[0] / p.y_plus[0] == pytest.approx(1.0, rel=0.01)


def test_wall_profile_rejects_a_station_off_the_wall():
    r = laminar().result
    with pytest.raises(CaseError, match="not on wall patch"):
        wall_profile(r, -0.1)


@pytest.mark.parametrize("change", [{"solver.turbulence_convection": "linear-upwind"}, {"model.sa_variant": "no-ft2"}])
def test_turbulent_options_on_the_coarse_grid(change):
    """Second-order convection of nu_tilde and the variant without f_t2 converge to the same
    skin friction and drag within the 3 % acceptance band."""
    case = fa.load_case(CASES / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(MESHES / "flat_plate_coarse.msh"), "solver.tolerance": 1e-8, **change})
    r = fa.solve(case)
    assert r.converged
    w = r.wall("plate")
    o = np.argsort(w.x)
    assert float(np.interp(STATION, w.x[o], w.cf[o])) == pytest.approx(CF_097, rel=0.03)
    assert patch_forces(w, l_ref=2.0).coefficients()["Cd"] == pytest.approx(CD_PLATE, rel=0.03)
    assert r.fields.variables["nu_tilde"].min() >= 0.0
