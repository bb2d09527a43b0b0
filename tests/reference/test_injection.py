"""Reynolds-stress injection (#17 phase 2, model 'reference-stress'): the exactness of the split at the
reference velocity, and self-consistency: fvrans's own converged Spalart-Allmaras stresses
(-2 mu_t S, written to a result folder and read back from its fields.vtu) injected into the same
case recover that mean flow (the issue's acceptance: within 1e-5 of the free stream with the
implicit form). The explicit form on the same grids, and the bundled grids, are in
benchmarks/bench_injection.py (README: "Reference stresses")."""

from __future__ import annotations

import numpy as np
import pytest
from reference_runs import sa_run

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.models.injected import ReferenceStress
from fvrans.reference.stress import strain_rate


def _injected_total(model: ReferenceStress, grad: np.ndarray) -> np.ndarray:
    """2 mu_t S + T at the reference velocity, as (xx, xy, yy)."""
    f = Fields.uniform(len(grad), 1)
    mu_t = model.eddy_viscosity(f)
    mu_t = np.zeros(len(grad)) if mu_t is None else mu_t
    S = strain_rate(grad)
    T = model.extra_stress(f, grad)
    return np.column_stack([2 * mu_t * S[:, 0, 0], 2 * mu_t * S[:, 0, 1], 2 * mu_t * S[:, 1, 1]]) + T


@pytest.mark.parametrize("form", ["implicit", "explicit"])
def test_injected_stress_is_the_reference_at_the_reference_velocity(form):
    rng = np.random.default_rng(3)
    n = 200
    grad = rng.normal(size=(n, 2, 2))
    grad[:5] = 0.0  # no strain rate: nu* undefined
    stress = rng.normal(size=(n, 3))  # any sign of nu*, misaligned, some far above the cap
    rho, mu = 1.3, 2e-3
    model = ReferenceStress(rho, mu, stress, rng.normal(size=(n, 2)), form=form, cap=50.0)
    model.prepare(lambda u: grad)
    np.testing.assert_allclose(_injected_total(model, grad), -rho * stress, rtol=1e-12, atol=1e-12)
    mu_t = model.eddy_viscosity(Fields.uniform(n, 1))
    if form == "explicit":
        assert mu_t is None
    else:  # clipped to [0, cap nu], zero where the strain rate vanishes
        assert mu_t.min() >= 0.0 and mu_t.max() <= 50.0 * mu * (1 + 1e-12) and np.all(mu_t[:5] == 0.0)
        assert 0 < model.clipped.sum() < n


def test_prepare_is_required():
    model = ReferenceStress(1.0, 1.0, np.zeros((2, 3)), np.zeros((2, 2)))
    with pytest.raises(RuntimeError, match="prepare"):
        model.eddy_viscosity(Fields.uniform(2, 1))


# -- self-consistency through files -------------------------------------------------------------
@pytest.fixture(scope="module")
def runs():
    return {w: sa_run(w) for w in ("plate", "step")}


@pytest.mark.slow
@pytest.mark.parametrize("which", ["plate", "step"])
def test_own_sa_stresses_recover_the_sa_flow(runs, which):
    sa, folder = runs[which]
    case = sa.case.replace({"model.turbulence": "reference-stress", "model.stress_form": "implicit",
                            "reference.data": str(folder)})
    r = fa.solve(case)  # from the case's uniform start
    assert r.converged and r.stopped_by == "settled", r.message
    u_inf = 1.0  # the free stream (plate) and the bulk inflow speed (step) of both cases
    assert np.abs(r.velocity - sa.velocity).max() < 1e-5 * u_inf  # measured 6.9e-8 (plate), 3.9e-8 (step)
    comp = r.summary()["reference_comparison"]
    assert comp["velocity_error"]["regions"]["all"]["max"] < 1e-5
    assert comp["data"]["coverage"][0]["inside_share"] == 1.0 and not comp["data"]["error_estimate"]


@pytest.mark.slow
def test_blending_changes_the_split_not_the_answer(runs):
    sa, folder = runs["plate"]
    case = sa.case.replace({"model.turbulence": "reference-stress", "model.blend_model": "spalart-allmaras",
                            "model.blend_share": 0.5, "reference.data": str(folder)})
    r = fa.solve(case)
    assert r.converged, r.message
    assert r.history.names == ["u", "v", "continuity", "nu_tilde"]
    assert np.abs(r.velocity - sa.velocity).max() < 1e-5
    out = r.cell_data()
    assert "blend_eddy_viscosity_ratio" in out and "nu_tilde" in out


def test_injection_needs_stresses(tmp_path):
    case = fa.case_from_dict({
        "mesh": {"generator": "cavity", "parameters": {"n": 4}}, "fluid": {"density": 1.0, "viscosity": 0.01},
        "model": {"turbulence": "reference-stress"},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}}})
    with pytest.raises(CaseError, match=r"takes its Reynolds stress from reference data; add \[reference\] data"):
        fa.solve(case)
    p = tmp_path / "flow.csv"
    p.write_text("x,y,u,v\n0,0,1,0\n1,0,1,0\n0,1,1,0\n1,1,1,0\n")
    with pytest.raises(CaseError, match=r"flow.csv: model.turbulence = 'reference-stress' needs the Reynolds "
                       r"stresses R_xx, R_xy, R_yy, and this point cloud gives u, v"):
        fa.solve(case.set("reference.data", str(p)))
