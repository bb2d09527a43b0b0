"""A divergence at the first iteration (issue 13, item 7): the last good state is the initial
state, and every output written from it is finite (wall tables, forces, fields, probes, residual
table, checkpoint with its pressure gradient)."""

from __future__ import annotations

import json

import meshio
import numpy as np
import pytest
from hostile_cases import cavity_data

from fvrans.case.tomlwrite import dumps
from fvrans.checkpoint import read_checkpoint
from fvrans.cli import main
from fvrans.solve.simple import SimpleSolver


def _numbers(obj, path=""):
    """Every number of a JSON document with its path (nulls as None)."""
    if isinstance(obj, dict):
        for k, v in obj.items():
            yield from _numbers(v, f"{path}.{k}")
    elif isinstance(obj, list):
        for i, v in enumerate(obj):
            yield from _numbers(v, f"{path}.{i}")
    elif obj is None or (isinstance(obj, (int, float)) and not isinstance(obj, bool)):
        yield path, obj


@pytest.mark.parametrize("model", ["none", "spalart-allmaras"])
def test_a_divergence_at_iteration_1_writes_the_finite_initial_state(tmp_path, monkeypatch, model):
    real = SimpleSolver.iterate

    def poisoned(self):  # the first iteration runs away: every field and the gradient non-finite
        res = real(self)
        self.fields.velocity[:] = np.nan
        self.fields.pressure[:] = np.inf
        self.grad_p = np.full_like(self.grad_p, np.nan)
        return [np.nan] * len(res)

    monkeypatch.setattr(SimpleSolver, "iterate", poisoned)
    case = tmp_path / "case.toml"
    probe = {"mid": {"start": [0.5, 0.1], "end": [0.5, 0.9], "points": 9}}
    # conservative_start off: the start stays the uniform field (in a closed cavity the conservative start
    # would first remove the flow into the walls)
    case.write_text(dumps(cavity_data(model={"turbulence": model}, initial={"velocity": [0.2, 0.1], "pressure": 3.0},
                                      probes=probe, solver={"conservative_start": False})))
    out = tmp_path / "out"
    assert main(["run", str(case), "--out", str(out), "--quiet", "--no-plots"]) == 1
    summary = json.loads((out / "summary.json").read_text())
    assert summary["diverged"] and summary["iterations"] == 1
    walls = [(p, v) for p, v in _numbers(summary["walls"])]
    assert walls and all(v is not None for p, v in walls), [p for p, v in walls if v is None]
    # the residual table ends at the last good iteration (0 here: its header only)
    assert (out / "residuals.csv").read_text().count("\n") == 1
    for csv in [*(out / "wall").glob("*.csv"), out / "profiles" / "mid.csv"]:
        data = np.genfromtxt(csv, delimiter=",", skip_header=1, ndmin=2)
        assert data.size and np.all(np.isfinite(data)), csv
    m = meshio.read(out / "fields.vtu")
    for name, blocks in m.cell_data.items():
        assert all(np.all(np.isfinite(b)) for b in blocks), name
    state = read_checkpoint(out)  # refuses non-finite fields and gradients
    assert state.iteration == 0
    np.testing.assert_array_equal(state.fields.velocity, np.tile([0.2, 0.1], (64, 1)))  # the initial state
    assert np.all(state.pressure_gradient == 0.0)  # of a uniform pressure
