"""The y+ check of turbulent runs: it warns on a plate meshed with first-cell y+ ~ 30 (a model
integrated to the wall needs y+ ~ 1: viscous sublayer y+ < 5, Pope 2000, sec. 7.1.4, from
memory) and stays quiet on the bundled turbulent meshes."""

from __future__ import annotations

import logging
from pathlib import Path

import flat_plate_runs
import pytest
import step_runs

import fvrans.api as fa
from fvrans.post.wall_resolution import SHARE_LIMIT, Y_PLUS_LIMIT

CASES = Path(__file__).resolve().parents[2] / "cases"


def test_warning_fires_on_a_plate_with_first_cell_y_plus_30(caplog):
    # the bundled turbulent plate (Re = 5e6 per unit length) on the flat_plate generator with a first
    # cell of 3.6e-4: centre at 1.8e-4, u_tau ~ 0.033 (Cf ~ 0.0022 there) gives y+ ~ 30
    case = fa.load_case(CASES / "flat_plate_turbulent.toml").replace({
        "mesh.file": None, "mesh.generator": "flat_plate",
        "mesh.parameters": {"nx_plate": 30, "nx_ahead": 8, "ny": 24, "first_spacing": 3.6e-4},
    })
    with caplog.at_level(logging.WARNING, logger="fvrans"):
        r = fa.solve(case)
    res = r.wall_resolution()["plate"]
    assert 20 < res.y_plus_mean < 40 and res.share_above > 0.9 and res.too_coarse
    # the spacing that would serve: y+ = 1 at the centre, i.e. 1/30 of the present height or less
    assert res.first_cell_height_for_y_plus_1 < 3.6e-4 / 20
    assert len(r.warnings()) == 1 and "'plate'" in r.warnings()[0]
    assert any("first-cell y+" in rec.getMessage() and "first-cell height of about" in rec.getMessage()
               for rec in caplog.records)
    summary = r.summary()
    assert summary["wall_resolution"]["plate"]["too_coarse"] is True
    assert summary["warnings"] == r.warnings()


def _quiet(result: fa.Result) -> None:
    for name, res in result.wall_resolution().items():
        assert res.share_above <= SHARE_LIMIT and not res.too_coarse, (name, res)
        assert res.y_plus_max < Y_PLUS_LIMIT
    assert result.warnings() == []


@pytest.mark.parametrize("level", ["coarse", "medium"])
def test_quiet_on_the_bundled_plate_meshes(level):
    _quiet(flat_plate_runs.turbulent(level).result)


def test_quiet_on_the_bundled_step_and_bump():
    _quiet(step_runs.coarse())
    _quiet(fa.solve(fa.load_case(CASES / "bump_turbulent.toml")))


def test_laminar_runs_are_not_checked():
    r = flat_plate_runs.laminar().result
    assert r.wall_resolution() == {} and r.warnings() == []
