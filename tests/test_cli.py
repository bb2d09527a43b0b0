"""The command line end to end on a small generated channel: outputs, exit codes, messages."""

from __future__ import annotations

import csv
import json
import shlex
from pathlib import Path

import meshio
import numpy as np
import pytest

from fvrans.cli import main
from fvrans.post.outputs import MANIFEST, STAGING, listed_outputs

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
    assert "not converged" in capsys.readouterr().out  # the result line goes to stdout


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


def test_continue_hint_reproduces_the_run_with_its_overrides(case_file, tmp_path, capsys):
    """Issue #12 item 5: the printed "continue with" command, run as printed, continues the run,
    --set overrides included (a physics override the checkpoint insists on, here the inflow)."""
    out = tmp_path / "short"
    assert main(["run", str(case_file), "--out", str(out), "--quiet", "--no-plots",
                 "--set", "solver.max_iterations=3", "--set", "boundary.inlet.velocity=[2.0, 0.0]"]) == 1
    err = capsys.readouterr().err
    hint = err.split("continue with: ", 1)[1].split(" (--set", 1)[0].strip()
    argv = shlex.split(hint)
    assert argv[:2] == ["fvrans", "run"]
    assert {"case.toml", "checkpoint.npz"} <= set(listed_outputs(out)["files"])  # both in the run's set
    # as printed: 3 more iterations of the same run (a restart with another inflow would be refused: exit 2)
    assert main(argv[1:] + ["--quiet"]) == 1
    summary = json.loads((out / "summary.json").read_text())
    assert summary["iterations"] == 6
    res = np.genfromtxt(out / "residuals.csv", delimiter=",", names=True)
    np.testing.assert_array_equal(res["iteration"], np.arange(1, 7))


CAVITY = """
title = "small cavity"
[mesh]
generator = "cavity"
parameters = { n = 8 }
[fluid]
density = 1.0
viscosity = 0.01
[boundary.lid]
kind = "wall"
velocity = [1.0, 0.0]
[boundary.walls]
kind = "wall"
[solver]
max_iterations = 5
"""


def test_a_reused_output_folder_loses_the_earlier_runs_files_and_keeps_the_users(case_file, tmp_path):
    """Issue #12 item 6 through the one output mechanism (issue #13 item 2): a second run into the
    same --out folder replaces the first run's set (listed in .fvrans-outputs.json), so the files
    only the first run wrote (its wall, probe and plot files) are gone, with the folders they
    leave empty, and every other file stays."""
    text = case_file.read_text() + '\n[probes.across]\nstart = [2.0, 0.0]\nend = [2.0, 1.0]\npoints = 5\n'
    case_file.write_text(text.replace("tolerance = 1e-6", "max_iterations = 5"))
    out = tmp_path / "out"
    main(["run", str(case_file), "--out", str(out), "--quiet"])
    first = listed_outputs(out)["files"]
    assert {"wall/lower_wall.csv", "profiles/across.csv", "plots/wall_lower_wall_cf.png", "case.toml",
            "summary.json", "monitored.csv", "checkpoint.npz"} <= set(first)
    assert all((out / f).is_file() for f in first)
    listing = listed_outputs(out)
    assert listing["iteration"] == 5 and listing["plots_iteration"] == 5  # the plots drawn from that result
    mine = [out / "notes.txt", out / "plots" / "mine.png", out / "wall" / "measured.csv"]
    for f in mine:
        f.write_text("the user's own file")
    cavity = tmp_path / "cavity.toml"
    cavity.write_text(CAVITY)
    main(["run", str(cavity), "--out", str(out), "--quiet", "--no-plots"])
    second = ["case.toml", "checkpoint.npz", "fields.vtu", "monitored.csv", "residuals.csv", "summary.json",
              "wall/lid.csv", "wall/walls.csv", "wall/zero_shear/lid.csv", "wall/zero_shear/walls.csv"]
    assert sorted(listed_outputs(out)["files"]) == second
    left = sorted(p.relative_to(out).as_posix() for p in out.rglob("*") if p.is_file())
    assert left == sorted(second + [MANIFEST, "notes.txt", "plots/mine.png", "wall/measured.csv"])
    assert not (out / "profiles").exists() and not (out / STAGING).exists()
    assert "wall/zero_shear/lower_wall.csv" in first and not (out / "wall" / "zero_shear" / "lower_wall.csv").exists()
    assert all(f.read_text() == "the user's own file" for f in mine)
    assert 'title = "small cavity"' in (out / "case.toml").read_text()  # the resolved case of the second run


ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.parametrize("spec, words", [
    ("flat_plate_checks.toml", ["a comparison spec, not a case file", "4 item(s)",
                                "fvrans compare RESULT_DIR", "--report OUT"]),
    ("sweeps/channel_speed_viscosity.toml", ["a sweep spec, not a case file", "8 run(s)",
                                             "varying inlet_velocity, mu", "fvrans sweep", "--out DIR"]),
])
def test_info_recognises_spec_files(spec, words, capsys):
    """Issue #12 item 10: info on a spec says what it is and which command takes it (it once
    answered 'item: unknown key')."""
    assert main(["info", str(ROOT / "cases" / spec)]) == 0
    out = capsys.readouterr().out
    for w in words:
        assert w in out, out
    assert "unknown key" not in out


def test_verbose_adds_visible_detail(case_file, tmp_path, capsys):
    """Issue #12 item 15: -v shows the conditions, the solver settings, the mesh figures and the
    files written; without it none of this appears."""
    main(["run", str(case_file), "--out", str(tmp_path / "a"), "--quiet", "--no-plots",
          "--set", "solver.max_iterations=2"])
    plain = capsys.readouterr().err
    main(["-v", "run", str(case_file), "--out", str(tmp_path / "b"), "--quiet", "--no-plots",
          "--set", "solver.max_iterations=2"])
    verbose = capsys.readouterr().err
    for words in ("boundary inlet: inflow-velocity", "solver: simplec", "largest non-orthogonality",
                  "wrote case.toml", "of which compiling kernels"):
        assert words in verbose and words not in plain, words
