"""The command line end to end on a small generated channel: outputs, exit codes, messages."""

from __future__ import annotations

import csv
import json

import meshio
import numpy as np
import pytest

from fvrans.cli import main

CASE = """
title = "small channel"
description = "a test channel"

[mesh]
generator = "channel"
parameters = { length = 4.0, height = 1.0, nx = 24, ny = 10 }

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
tolerance = 1e-6
"""


@pytest.fixture
def case_file(tmp_path):
    p = tmp_path / "channel.toml"
    p.write_text(CASE)
    return p


def test_run_writes_every_output(case_file, tmp_path, capsys):
    out = tmp_path / "out"
    assert main(["run", str(case_file), "--out", str(out), "--quiet"]) == 0
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] is True
    assert summary["n_cells"] == 240
    assert set(summary["walls"]) == {"lower_wall", "upper_wall"}
    # the walls carry the pressure drop: total wall friction = pressure force on the fluid
    fx = sum(w["forces"]["Fx_viscous"] for w in summary["walls"].values())
    assert fx > 0
    fields = meshio.read(out / "fields.vtu")
    vel = np.concatenate([np.asarray(b) for b in fields.cell_data["velocity"]])
    assert vel.shape == (240, 3)
    with open(out / "wall" / "lower_wall.csv") as fh:
        rows = list(csv.DictReader(fh))
    assert len(rows) == 24 and "cf" in rows[0] and "y_plus" in rows[0]
    res = np.genfromtxt(out / "residuals.csv", delimiter=",", names=True)
    assert len(res) == summary["iterations"]
    assert max(res["u"][-1], res["v"][-1], res["continuity"][-1]) < 1e-6


def test_override_and_not_converged_exit_status(case_file, tmp_path, capsys):
    out = tmp_path / "short"
    status = main(["run", str(case_file), "--out", str(out), "--quiet", "--set", "solver.max_iterations=3"])
    assert status == 1
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] is False and summary["iterations"] == 3
    assert "not converged" in capsys.readouterr().err


def test_bad_key_gives_status_2_and_names_the_key(case_file, tmp_path, capsys):
    status = main(["run", str(case_file), "--out", str(tmp_path / "x"), "--set", "solver.relax_velocty=0.5"])
    assert status == 2
    err = capsys.readouterr().err
    assert "relax_velocty" in err and "relax_velocity" in err


def test_missing_case_file(tmp_path, capsys):
    assert main(["run", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "x")]) == 2
    assert "nope.toml" in capsys.readouterr().err


def test_info_on_case_prints_settings_and_mesh_report(case_file, capsys):
    assert main(["info", str(case_file)]) == 0
    text = capsys.readouterr().out
    assert "relax_velocity" in text and "240" in text and "lower_wall" in text


def test_cases_lists_descriptions(case_file, capsys):
    assert main(["cases", "--dir", str(case_file.parent)]) == 0
    assert "a test channel" in capsys.readouterr().out
