"""Starts from another result (#14 item 5): [initial] from_result in a case file, a Result on another
mesh, a result folder. The coarse-to-fine flat plate is in tests/verification/test_flat_plate_start.py,
the fine grid in benchmarks/bench_start_from_result.py."""

from __future__ import annotations

import json

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.cli import main
from fvrans.errors import CaseError

CAVITY = """
title = "cavity"
[mesh]
generator = "cavity"
parameters = {{ n = {n} }}
[fluid]
density = 1.0
viscosity = 0.01
[boundary.lid]
kind = "wall"
velocity = [1.0, 0.0]
[boundary.walls]
kind = "wall"
[solver]
tolerance = 1e-8
{initial}
"""


def _case(tmp_path, n: int, initial: str = "", name: str = "c.toml"):
    p = tmp_path / name
    p.write_text(CAVITY.format(n=n, initial=initial))
    return p


def test_from_result_key_checked(tmp_path):
    _case(tmp_path, 8)
    with pytest.raises(CaseError) as e:
        fa.load_case(_case(tmp_path, 8, '[initial]\nfrom_result = "nowhere"'))
    assert "initial.from_result" in str(e.value) and "nowhere does not exist" in str(e.value)
    (tmp_path / "empty").mkdir()
    with pytest.raises(CaseError, match=r"initial.from_result: .*empty holds no fields.vtu"):
        fa.load_case(_case(tmp_path, 8, '[initial]\nfrom_result = "empty"'))
    (tmp_path / "empty" / "fields.vtu").write_text("")
    with pytest.raises(CaseError, match=r"initial.velocity: the start velocity comes from from_result"):
        fa.load_case(_case(tmp_path, 8, '[initial]\nfrom_result = "empty"\nvelocity = [1.0, 0.0]'))
    case = fa.load_case(_case(tmp_path, 8, '[initial]\nfrom_result = "empty"\npressure = 2.0'))
    assert case.initial.from_result == (tmp_path / "empty").resolve() and case.initial.pressure == 2.0
    assert fa.case_from_dict(case.to_dict()) == case


def test_coarse_result_folder_starts_a_finer_run(tmp_path):
    """fvrans run on the 16-cell cavity, then a 24-cell cavity whose case names that folder: the
    start carries the coarse velocity (linear between cell centres), and the run reaches the same
    answer as from rest, to the solver tolerance (residuals 1e-8; measured difference 1.3e-8 U)."""
    assert main(["run", str(_case(tmp_path, 16)), "--out", str(tmp_path / "coarse"), "--quiet", "--no-plots"]) == 0
    fine = _case(tmp_path, 24, '[initial]\nfrom_result = "coarse"', name="fine.toml")
    assert main(["run", str(fine), "--out", str(tmp_path / "fine"), "--quiet", "--no-plots"]) == 0
    start = json.loads((tmp_path / "fine" / "summary.json").read_text())["start"]
    assert start["from"] == str((tmp_path / "coarse").resolve()) and start["kind"] == "result folder"
    assert start["quantities"] == ["u", "v"] and start["cells_inside_data"] == 1.0
    case = fa.load_case(fine)
    problem = fa.prepare(case)
    fields, _ = fa.start_fields(problem, None)
    coarse = fa.load_case(_case(tmp_path, 16, name="again.toml"))
    # the same start from the Result in memory
    res16 = fa.solve(coarse)
    fields2, report = fa.start_fields(problem, res16)
    np.testing.assert_allclose(fields.velocity, fields2.velocity, atol=1e-12)
    assert not fields.face_flux.any() and np.all(fields.pressure == 0.0)
    warm = fa.solve(problem)
    cold = fa.solve(case.set("initial.from_result", None))
    assert warm.converged and cold.converged
    assert np.abs(warm.velocity - cold.velocity).max() < 1e-6


def test_same_mesh_result_stays_a_plain_warm_start():
    case = fa.case_from_dict({
        "mesh": {"generator": "cavity", "parameters": {"n": 8}},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
        "solver": {"tolerance": 1e-6},
    })
    res = fa.solve(case)
    problem = fa.prepare(case)
    fields, report = fa.start_fields(problem, res)
    assert report is None  # no interpolation: the fields and face fluxes as they are
    np.testing.assert_array_equal(fields.face_flux, res.fields.face_flux)
    np.testing.assert_array_equal(fields.pressure, res.pressure)
    assert "start" not in fa.solve(problem, initial=res).summary()
