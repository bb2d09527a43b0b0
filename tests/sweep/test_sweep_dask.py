"""Sweeps on a local dask.distributed cluster (2 worker processes on 127.0.0.1): the same numbers
as solving the design points one by one in this process; failing runs isolated on the workers."""

from __future__ import annotations

import json
import os

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.case import load_case
from fvrans.cli import main
from fvrans.sweep import Output, Parameter, Sweep, run_sweep
from fvrans.sweep.collect import summary_value

TIMEOUT = 300.0  # seconds; a hung cluster fails the test instead of the CI job
SPEEDS = [0.6, 0.7, 0.8, 0.9, 1.0, 1.1, 1.2, 1.3]
X_STATION = 2.0


def test_cluster_sweep_equals_in_process_runs(tmp_path, channel_case, dask_client):
    """8 inlet speeds on 2 workers give, run for run, the outputs, iteration counts and convergence
    of solving each case in this process (to solver tolerance: 1e-9 relative)."""
    base = load_case(channel_case).set("mesh.parameters.length", 4.0)
    sweep = Sweep(
        case=base,
        parameters=[Parameter("boundary.inlet.velocity", values=[[u, 0.0] for u in SPEEDS], name="u_in")],
        outputs=[Output("cd", summary="walls.lower_wall.forces.Cd"),
                 Output("cf_2", wall="lower_wall", quantity="cf", x=X_STATION)],
    )
    table = run_sweep(sweep, tmp_path / "out", scheduler=dask_client, timeout=TIMEOUT)
    assert len(table) == len(SPEEDS) and table.all_ok
    pids = {json.loads((tmp_path / "out" / "runs" / k / "run.json").read_text())["pid"] for k in table.column("key")}
    assert os.getpid() not in pids  # solved in the worker processes
    for row, u in zip(table.rows, SPEEDS):
        assert row["u_in"] == [u, 0.0]
        result = fa.solve(base.set("boundary.inlet.velocity", [u, 0.0]))
        assert result.converged and row["converged"]
        assert row["iterations"] == result.iterations
        cd = summary_value(result.summary(), "walls.lower_wall.forces.Cd", "in-process")
        wall = result.wall("lower_wall")
        cf = float(np.interp(X_STATION, wall.x, wall.cf))
        assert row["cd"] == pytest.approx(cd, rel=1e-9)
        assert row["cf_2"] == pytest.approx(cf, rel=1e-9)


def test_failures_on_workers_are_recorded(tmp_path, channel_case, dask_client):
    """`fvrans sweep --scheduler ADDRESS`: a mesh that cannot be built fails its run on a worker, the
    error comes back in its row, the other run completes, exit status 1."""
    spec = tmp_path / "sweep.toml"
    spec.write_text(
        'case = "channel.toml"\n[[parameter]]\nkey = "mesh.parameters.length"\nvalues = [-2.0, 3.0]\n'
        '[[output]]\nname = "iters"\nsummary = "iterations"\n', encoding="utf-8")
    address = dask_client.scheduler.address
    assert address.startswith("tcp://127.0.0.1:")
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "--out", str(out), "--scheduler", address, "--quiet"]) == 1
    bad, good = json.loads((out / "results.json").read_text(encoding="utf-8"))["runs"]
    assert bad["status"] == "failed" and bad["error"].startswith(f"MeshError: {tmp_path / 'channel.toml'}: ")
    assert "mesh.parameters: channel: length and height must be positive" in bad["error"]
    assert bad["iters"] is None
    assert good["status"] == "converged" and good["iters"] == good["iterations"] > 0 and good["error"] == ""


def test_warm_start_chains_on_workers(tmp_path, channel_case, dask_client):
    """plan.warm_start on the cluster: chains of neighbouring runs per task; outputs agree with cold
    in-process solves to the solver tolerance (1e-7 scaled residuals: 1e-5 relative asked)."""
    base = load_case(channel_case).set("mesh.parameters.length", 4.0)
    speeds = SPEEDS[:4]
    sweep = Sweep(case=base, warm_start=True,
                  parameters=[Parameter("boundary.inlet.velocity", values=[[u, 0.0] for u in speeds])],
                  outputs=[Output("cd", summary="walls.lower_wall.forces.Cd")])
    table = run_sweep(sweep, tmp_path / "out", scheduler=dask_client, timeout=TIMEOUT)
    assert table.all_ok
    froms = [json.loads((tmp_path / "out" / "runs" / k / "run.json").read_text())["warm_start_from"]
             for k in table.column("key")]
    assert any(froms)  # some runs were warm-started on the workers
    for row, u in zip(table.rows, speeds):
        cold = fa.solve(base.set("boundary.inlet.velocity", [u, 0.0]))
        cd = summary_value(cold.summary(), "walls.lower_wall.forces.Cd", "in-process")
        assert row["cd"] == pytest.approx(cd, rel=1e-5)


def test_worker_killed_mid_sweep(tmp_path, channel_case, dask_client):
    """A worker process killed (SIGKILL) once the first run has finished: the nanny restarts it,
    dask reruns its task elsewhere, and the table has every row exactly once, all converged."""
    import signal
    import threading

    sweep = Sweep(case=channel_case, parameters=[Parameter("fluid.viscosity", start=0.02, stop=0.1, count=8)],
                  outputs=[Output("cd", summary="walls.lower_wall.forces.Cd")])
    out = tmp_path / "out"
    pids = dask_client.run(os.getpid)  # worker address -> pid of the worker processes we started
    victim = max(pids.values())
    state = {"finished_before_kill": None}

    def kill_after_first_run() -> None:
        for _ in range(30000):  # polls for at most ~300 s
            records = list(out.glob("runs/*/run.json")) if out.is_dir() else []
            if records:
                state["finished_before_kill"] = len(records)
                os.kill(victim, signal.SIGKILL)
                return
            threading.Event().wait(0.01)

    killer = threading.Thread(target=kill_after_first_run, daemon=True)
    killer.start()
    table = run_sweep(sweep, out, scheduler=dask_client, timeout=TIMEOUT)
    killer.join(timeout=10)
    assert state["finished_before_kill"] is not None and state["finished_before_kill"] < len(table)
    assert table.column("run") == list(range(8))
    assert len(set(table.column("key"))) == 8
    assert table.all_ok, [r["error"] for r in table.failed()]
