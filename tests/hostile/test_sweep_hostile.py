"""Sweeps under faults (issue 13, item 9): a stop writes the table of the runs done; parse errors
quote no file contents into the table; the local cluster accepts only its own TLS clients."""

from __future__ import annotations

import json
import os
import signal
import time

import pytest
from hostile_cases import write_cavity

import fvrans.api as fa
from fvrans.cli import main
from fvrans.errors import CaseError
from fvrans.sweep import Output, run_sweep
from fvrans.sweep.collect import collect_outputs, read_wall_table

SPEC = """
case = "cavity.toml"
[[parameter]]
key = "fluid.viscosity"
values = [0.01, 0.02, 0.04]
[[output]]
name = "iters"
summary = "iterations"
[[output]]
name = "p_lid"
wall = "lid"
quantity = "p_wall"
x = 0.5
"""


@pytest.fixture
def spec(tmp_path):
    write_cavity(tmp_path / "cavity.toml", tolerance=1e-5, max_iterations=5000)
    p = tmp_path / "sweep.toml"
    p.write_text(SPEC)
    return p


@pytest.mark.parametrize("sig", [signal.SIGINT, signal.SIGTERM], ids=["SIGINT", "SIGTERM"])
def test_a_stopped_sweep_writes_the_table_of_the_runs_done(tmp_path, spec, monkeypatch, capsys, sig):
    real = fa.solve
    calls = []

    def solve(*a, **k):  # the stop arrives while the second run is solving
        calls.append(1)
        if len(calls) == 2:
            os.kill(os.getpid(), sig)
            time.sleep(0.01)
        return real(*a, **k)

    monkeypatch.setattr(fa, "solve", solve)
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 128 + sig
    assert "results table" in capsys.readouterr().err
    runs = json.loads((out / "results.json").read_text())["runs"]
    assert [r["status"] for r in runs] == ["converged", "not-run", "not-run"]
    assert sig.name in runs[1]["error"] and runs[0]["iters"] > 0
    assert (out / "results.csv").read_text().count("not-run") == 2
    monkeypatch.setattr(fa, "solve", real)  # rerunning the command continues where it stopped
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    again = json.loads((out / "results.json").read_text())
    assert [r["status"] for r in again["runs"]] == ["converged"] * 3 and again["runs_reused"] == 1


def test_parse_errors_name_file_and_line_without_contents(tmp_path):
    secret = "s3cret-token-do-not-leak"
    bad = {
        "x,cf\n1.0,2.0\n3.0," + secret + "\n": "line 3",
        secret + "\n": "line 2",  # header only: no column named as asked
        "x,cf\n1.0\n": "line 2",
    }
    for k, (text, where) in enumerate(bad.items()):
        run = tmp_path / f"run{k}"
        (run / "wall").mkdir(parents=True)
        (run / "wall" / "lid.csv").write_text(text)
        values, errors = collect_outputs(run, [Output("v", wall="lid", quantity="cf", x=2.0)])
        assert values["v"] is None and len(errors) == 1
        assert str(run / "wall" / "lid.csv") in errors[0] and secret not in errors[0]
        if k != 1:
            assert where in errors[0]
    (tmp_path / "fifo.csv").unlink(missing_ok=True)
    os.mkfifo(tmp_path / "fifo.csv")  # not a regular file: refused without blocking
    with pytest.raises(CaseError, match="regular file"):
        read_wall_table(tmp_path / "fifo.csv")


def test_a_profile_parse_error_quotes_no_content(tmp_path):
    from fvrans.case.profile import ProfileFileError, read_profile_table

    p = tmp_path / "p.csv"
    p.write_text("y,u,v\n0,0,0\n1,s3cret,0\n")
    with pytest.raises(ProfileFileError) as info:
        read_profile_table(p)
    assert "line 3" in str(info.value) and "column 2" in str(info.value) and "s3cret" not in str(info.value)


@pytest.mark.slow
def test_the_local_cluster_takes_only_its_own_tls_clients(tmp_path, spec):
    from distributed import Client
    from distributed.security import Security

    from fvrans.sweep.runner import _local_cluster
    from fvrans.sweep.spec import load_sweep

    cluster, client = _local_cluster(2)
    try:
        address = cluster.scheduler_address
        assert address.startswith("tls://127.0.0.1:")
        for attempt in (address.replace("tls://", "tcp://"), address):  # no credentials, other credentials
            with pytest.raises(Exception):  # noqa: B017 - distributed raises comm errors of several kinds
                Client(attempt, timeout=3, security=Security.temporary() if attempt == address else None)
        table = run_sweep(load_sweep(spec), tmp_path / "out", scheduler=client, timeout=120)
        assert table.all_ok and len(table) == 3
    finally:
        client.close()
        cluster.close()
