"""Sweeps on a local dask.distributed cluster (2 worker processes on 127.0.0.1): bump heights give
the same numbers as solving them one by one in this process; failing runs isolated on the workers;
warm-start chains; a worker killed mid-sweep."""

from __future__ import annotations

import json
import os

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.case import load_case
from fvrans.cli import main
from fvrans.post.summary import summary_value
from fvrans.sweep import Output, Parameter, Sweep, run_sweep

TIMEOUT = 300.0  # seconds; a hung cluster fails the test instead of the CI job
HEIGHTS = [0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.35, 0.4]
OUTPUTS = [Output("cd", summary="walls.lower_wall.forces.Cd"),
           Output("p_up", wall="lower_wall", quantity="p_wall", x=-1.5),
           Output("cf_behind", wall="lower_wall", quantity="cf", x=1.0)]


def _in_process(result) -> dict[str, float]:
    """The outputs of a Result solved here, computed from the Result (not from files)."""
    wall = result.wall("lower_wall")
    return {"cd": summary_value(result.summary(), "walls.lower_wall.forces.Cd", "in-process"),
            "p_up": float(np.interp(-1.5, wall.x, wall.p_wall)),
            "cf_behind": float(np.interp(1.0, wall.x, wall.cf))}


def test_cluster_sweep_of_bump_heights_equals_in_process_runs(tmp_path, bump_case, dask_client):
    """8 bump heights on 2 worker processes give, run for run, the outputs, iteration counts and
    convergence of solving each case one by one in this process (to solver tolerance: 1e-9 relative
    asked; cold starts on both sides run the same arithmetic)."""
    base = load_case(bump_case)
    sweep = Sweep(case=base, outputs=OUTPUTS,
                  parameters=[Parameter("mesh.parameters.bump_height", values=HEIGHTS, name="h")])
    table = run_sweep(sweep, tmp_path / "out", scheduler=dask_client, timeout=TIMEOUT)
    assert len(table) == len(HEIGHTS) and table.all_ok
    pids = {json.loads((tmp_path / "out" / "runs" / k / "run.json").read_text())["pid"] for k in table.column("key")}
    assert os.getpid() not in pids  # solved in the worker processes
    for row, h in zip(table.rows, HEIGHTS):
        assert row["h"] == h
        result = fa.solve(base.set("mesh.parameters.bump_height", h))
        assert result.converged and row["converged"]
        assert row["iterations"] == result.iterations
        for name, value in _in_process(result).items():
            assert row[name] == pytest.approx(value, rel=1e-9), name
    assert len(set(table.column("cd"))) == len(HEIGHTS)  # the heights did change the flow


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


def test_warm_start_chains_on_workers(tmp_path, bump_case, dask_client):
    """plan.warm_start on the cluster: chains of neighbouring bump heights per task (the generator
    keeps its topology); outputs agree with cold in-process solves to the solver tolerance (1e-7
    normalised imbalances: 1e-5 relative asked) in fewer iterations."""
    base = load_case(bump_case)
    heights = HEIGHTS[:4]
    sweep = Sweep(case=base, warm_start=True, outputs=OUTPUTS,
                  parameters=[Parameter("mesh.parameters.bump_height", values=heights)])
    table = run_sweep(sweep, tmp_path / "out", scheduler=dask_client, timeout=TIMEOUT)
    assert table.all_ok
    froms = [json.loads((tmp_path / "out" / "runs" / k / "run.json").read_text())["warm_start_from"]
             for k in table.column("key")]
    assert any(froms)  # some runs were warm-started on the workers
    cold_iterations = 0
    for row, h in zip(table.rows, heights):
        cold = fa.solve(base.set("mesh.parameters.bump_height", h))
        cold_iterations += cold.iterations
        for name, value in _in_process(cold).items():
            assert row[name] == pytest.approx(value, rel=1e-5), name
    assert sum(table.column("iterations")) < cold_iterations


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
