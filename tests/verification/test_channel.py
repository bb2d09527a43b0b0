"""Fully developed turbulent channel (periodic column, bulk velocity fixed), each turbulence model
at four Reynolds numbers: cases/channel_turbulent.toml with the viscosities of its header.

References
----------
* Dean, R. B. (1978), Reynolds number dependence of skin friction and other bulk flow variables
  in two-dimensional rectangular duct flow, J. Fluids Eng. 100, 215-223: Cf = tau_w / (rho U_b^2/2)
  = 0.073 Re_b^(-1/4), Re_b = 2 h U_b / nu (as quoted in Pope 2000, Turbulent Flows, sec. 7.1; from
  memory). Acceptance: within 6 % (the issue's band).
* Log law u+ = ln(y+) / kappa + B, kappa = 0.41, B between 5.0 and 5.5 (common practice), checked
  in 30 < y+ < 0.3 Re_tau within 5 % (the issue's band) of the nearer end of that range.
* Re_tau of DNS at the same Re_b (from memory): 178 at Re_b 5 600 (Moser, Kim & Mansour 1999,
  Phys. Fluids 11, 943); 544, 1 000 and 5 186 at Re_b 20 000, 40 000 and 250 000 (Lee & Moser
  2015, J. Fluid Mech. 774, 395). Band 4 % (common practice for RANS skin friction: a few percent).
* At Re_tau 5200 both models sit 7.3-7.6 % above Dean's correlation; the DNS there (Re_tau 5186 at
  Re_b 250 000, from memory) is itself 5.5 % above it (Cf = 2 (Re_tau / (Re_b / 2))^2 = 0.00344
  against 0.00326), so the comparison with Dean is kept as a strict expected failure.
"""

from __future__ import annotations

from functools import cache
from pathlib import Path

import numpy as np
import pytest

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[2]
MODELS = ("spalart-allmaras", "k-omega-sst")
#: Re_b = 2 h U_b / nu -> Re_tau of the DNS at that Re_b (from memory, see the module docstring)
DNS_RE_TAU = {5_600: 178.0, 20_000: 544.0, 40_000: 1000.0, 250_000: 5186.0}


@cache
def channel(model: str, re_b: int) -> fa.Result:
    case = fa.load_case(ROOT / "cases" / "channel_turbulent.toml").replace(
        {"model.turbulence": model, "fluid.viscosity": 2.0 / re_b})
    r = fa.solve(case)
    assert r.converged, r.message
    return r


def wall_units(r: fa.Result) -> tuple[float, np.ndarray, np.ndarray]:
    """(Re_tau, y+, u+) of the lower half from the cell values, u_tau from the driving gradient
    (tau_w = -h dp/dx, h = 1)."""
    nu = r.case.fluid.kinematic_viscosity
    u_tau = np.sqrt(-r.summary()["mean_flow"]["pressure_gradient"][0])
    y = r.cell_centres[:, 1]
    low = y < 1.0
    o = np.argsort(y[low])
    return u_tau / nu, y[low][o] * u_tau / nu, r.velocity[low, 0][o] / u_tau


def _dean_param(model, re_b):
    marks = [pytest.mark.xfail(strict=True, reason="Dean's correlation lies 5.5 % below the DNS at Re_tau 5200")] \
        if re_b == 250_000 else []
    return pytest.param(model, re_b, marks=marks, id=f"{model}-{re_b}")


@pytest.mark.slow
@pytest.mark.parametrize("model,re_b", [_dean_param(m, re) for m in MODELS for re in DNS_RE_TAU])
def test_friction_against_dean(model, re_b):
    r = channel(model, re_b)
    cf = r.summary()["walls"]["lower_wall"]["forces"]["Cd"]  # reference velocity U_b, length the column's
    dean = 0.073 * re_b ** -0.25
    assert cf == pytest.approx(dean, rel=0.06)
    # both walls carry the driving gradient: 2 tau_w L = -dp/dx 2 h L (to the iteration tolerance:
    # residuals 1e-8 leave 8e-5 of imbalance at Re_tau 180)
    g = -r.summary()["mean_flow"]["pressure_gradient"][0]
    assert cf == pytest.approx(2 * g, rel=1e-3)
    assert r.summary()["mean_flow"]["bulk_velocity"][0] == pytest.approx(1.0, abs=1e-12)


@pytest.mark.slow
@pytest.mark.parametrize("re_b", list(DNS_RE_TAU))
@pytest.mark.parametrize("model", MODELS)
def test_log_law_and_re_tau(model, re_b):
    re_tau, yp, up = wall_units(channel(model, re_b))
    assert re_tau == pytest.approx(DNS_RE_TAU[re_b], rel=0.04)
    assert yp[0] < 1.0  # first cell centre in the viscous sublayer
    band = (yp > 30) & (yp < 0.3 * re_tau)
    assert band.sum() >= 4
    lo = np.log(yp[band]) / 0.41 + 5.0
    hi = lo + 0.5
    outside = np.maximum(np.maximum(lo - up[band], up[band] - hi), 0.0) / lo
    assert outside.max() < 0.05
    # viscous sublayer: u+ = y+ below y+ = 1
    sub = yp < 1.0
    np.testing.assert_allclose(up[sub], yp[sub], rtol=0.02)


def test_sweep_over_the_model_name(tmp_path):
    from fvrans.sweep import Output, Parameter, Sweep, run_sweep

    sweep = Sweep(
        case=str(ROOT / "cases" / "channel_turbulent.toml"),
        parameters=[Parameter("model.turbulence", values=list(MODELS), name="model"),
                    Parameter("fluid.viscosity", values=[2.0 / 5_600], name="nu"),
                    Parameter("mesh.parameters", values=[{"length": 0.1, "height": 2.0, "nx": 1, "ny": 80,
                                                          "grading_y": 5e-4}], name="grid")],
        outputs=[Output("cf", summary="walls.lower_wall.forces.Cd")],
    )
    table = run_sweep(sweep, tmp_path / "sweep", workers=1)
    assert table.all_ok
    cf = dict(zip(table.column("model"), table.column("cf")))
    assert set(cf) == set(MODELS)
    for model in MODELS:  # each run used its own model: the residual columns differ
        key = [row["key"] for row in table.rows if row["model"] == model][0]
        header = (tmp_path / "sweep" / "runs" / key / "residuals.csv").read_text().splitlines()[0]
        assert ("omega" in header) == (model == "k-omega-sst")
        assert cf[model] == pytest.approx(0.073 * 5_600 ** -0.25, rel=0.06)
