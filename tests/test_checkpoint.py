"""Checkpoints and restart: a stopped-and-resumed run reaches the uninterrupted result, SIGINT
ends a running `fvrans run` cleanly, an interrupted checkpoint write leaves the previous file
intact, and a restart on another problem is refused."""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import meshio
import numpy as np
import pytest

import fvrans.checkpoint as ck
from fvrans import api
from fvrans.cli import main
from fvrans.errors import CaseError

REPO = Path(__file__).resolve().parents[1]

CAVITY = """
title = "cavity for restarts"

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
tolerance = {tol}
max_iterations = {max_it}
checkpoint_every = {every}
"""


def _case(tmp_path: Path, n: int = 32, tol: float = 1e-10, max_it: int = 5000, every: int = 20) -> Path:
    p = tmp_path / f"cavity_{n}.toml"
    p.write_text(CAVITY.format(n=n, tol=tol, max_it=max_it, every=every))
    return p


def _cell_data(out: Path, name: str) -> np.ndarray:
    m = meshio.read(out / "fields.vtu")
    return np.concatenate([np.asarray(b) for b in m.cell_data[name]])


def test_stopped_and_restarted_run_equals_the_uninterrupted_run(tmp_path, capsys):
    case = _case(tmp_path)
    full, part, resumed = tmp_path / "full", tmp_path / "part", tmp_path / "resumed"
    assert main(["run", str(case), "--out", str(full), "--quiet", "--no-plots"]) == 0
    # stopped after 37 iterations: not converged, exit status 1, a checkpoint of iteration 37
    assert main(["run", str(case), "--out", str(part), "--quiet", "--no-plots",
                 "--set", "solver.max_iterations=37"]) == 1
    assert ck.read_checkpoint(part).iteration == 37
    assert main(["run", str(case), "--out", str(resumed), "--quiet", "--no-plots", "--restart", str(part)]) == 0
    assert json.loads((full / "summary.json").read_text())["converged"]
    s_res = json.loads((resumed / "summary.json").read_text())
    assert s_res["converged"] and s_res["iterations"] > 37
    # the residual history continues: iterations 1..N without a gap, the first 37 rows as saved
    res_part = np.genfromtxt(part / "residuals.csv", delimiter=",", names=True)
    res_res = np.genfromtxt(resumed / "residuals.csv", delimiter=",", names=True)
    np.testing.assert_array_equal(res_res["iteration"], np.arange(1, s_res["iterations"] + 1))
    np.testing.assert_array_equal(res_res["u"][:37], res_part["u"])
    # the first resumed iteration continues the trend (same state, same residual scale)
    full_res = np.genfromtxt(full / "residuals.csv", delimiter=",", names=True)
    assert res_res["u"][37] == pytest.approx(full_res["u"][37], rel=1e-3)
    # same converged fields: both runs are at normalised imbalances < 1e-10
    u_full, u_res = _cell_data(full, "velocity"), _cell_data(resumed, "velocity")
    p_full, p_res = _cell_data(full, "pressure"), _cell_data(resumed, "pressure")
    assert np.max(np.abs(u_res - u_full)) < 1e-8
    assert np.max(np.abs(p_res - p_full)) < 1e-8


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_signal_ends_a_running_command_with_a_checkpoint_and_summary(tmp_path, sig):
    case = _case(tmp_path, n=48, tol=1e-30, max_it=1_000_000, every=10)  # would run for hours
    out = tmp_path / "out"
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([str(REPO), env.get("PYTHONPATH", "")]).rstrip(os.pathsep)
    with open(tmp_path / "stderr.txt", "w") as err:
        proc = subprocess.Popen([sys.executable, "-m", "fvrans", "run", str(case), "--out", str(out), "--no-plots"],
                                stdout=subprocess.DEVNULL, stderr=err, env=env)
        try:
            deadline = time.monotonic() + 300  # the first numba compilation may take a while
            while not (out / "checkpoint.npz").exists():
                assert proc.poll() is None, (tmp_path / "stderr.txt").read_text()
                assert time.monotonic() < deadline, "no checkpoint after 300 s"
                time.sleep(0.1)
            proc.send_signal(sig)
            status = proc.wait(timeout=120)
        finally:
            if proc.poll() is None:
                proc.kill()
    text = (tmp_path / "stderr.txt").read_text()
    assert status == 1, text
    summary = json.loads((out / "summary.json").read_text())
    assert summary["converged"] is False and summary["interrupted"] is True
    assert summary["interrupted_by"] == sig.name
    assert sig.name in text and "--restart" in text
    state = ck.read_checkpoint(out)
    assert state.iteration == summary["iterations"] >= 10
    res = np.genfromtxt(out / "residuals.csv", delimiter=",", names=True)
    assert len(res) == state.iteration
    # the checkpoint holds the written fields (all quads: fields.vtu keeps the mesh's cell order)
    np.testing.assert_array_equal(_cell_data(out, "velocity")[:, :2], state.fields.velocity)


def test_an_interrupted_checkpoint_write_leaves_the_previous_file(tmp_path, monkeypatch):
    case = api.load_case(_case(tmp_path, n=8, max_it=5))
    result = api.solve(case)
    path = tmp_path / "checkpoint.npz"
    result.write_checkpoint(path)
    before = path.read_bytes()

    def half_then_fail(f, arrays):
        f.write(b"PK\x03\x04 half an archive")
        raise OSError("disk full (simulated)")

    monkeypatch.setattr(ck, "_serialise", half_then_fail)
    result.fields.velocity[:] += 1.0
    with pytest.raises(OSError, match="simulated"):
        result.write_checkpoint(path)
    assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []  # no temporary left
    assert ck.read_checkpoint(path).iteration == 5


def test_restart_on_another_problem_is_refused(tmp_path):
    case = api.load_case(_case(tmp_path, n=8, max_it=5))
    api.solve(case).write_checkpoint(tmp_path / "c.npz")
    with pytest.raises(CaseError, match="another mesh"):
        api.solve(case.set("mesh.parameters", {"n": 9}), restart=tmp_path / "c.npz")
    with pytest.raises(CaseError, match=r"fluid\.viscosity was 0\.01, now 0\.02"):
        api.solve(case.set("fluid.viscosity", 0.02), restart=tmp_path / "c.npz")
    with pytest.raises(CaseError, match="no checkpoint.npz"):
        api.solve(case, restart=tmp_path)
    # solver settings may change: a restart with another tolerance runs on
    more = api.solve(case.set("solver.max_iterations", 3), restart=tmp_path / "c.npz")
    assert more.iterations == 8 and len(more.history.rows) == 8


def test_an_inlet_profile_is_identified_by_its_content_not_its_folder(tmp_path):
    data = {
        "mesh": {"generator": "channel", "parameters": {"nx": 4, "ny": 3}},
        "fluid": {"density": 1.0, "viscosity": 0.1},
        "boundary": {"inlet": {"kind": "inflow-velocity", "profile": "in.csv"}, "outlet": {"kind": "outflow-pressure"},
                     "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}},
    }
    settings = []
    same, other = "y,u,v\n0,1,0\n1,1,0\n", "y,u,v\n0,1,0\n1,2,0\n"
    for folder, text in (("a", same), ("b", same), ("c", other)):
        (tmp_path / folder).mkdir()
        (tmp_path / folder / "in.csv").write_text(text)
        settings.append(ck.physics_settings(api.case_from_dict(data, tmp_path / folder / "case.toml")))
    assert settings[0] == settings[1] != settings[2]
