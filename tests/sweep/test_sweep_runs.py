"""Sweeps that solve, in-process: the laminar-channel friction factor over Reynolds numbers,
failing runs recorded while the others complete, resuming."""

from __future__ import annotations

import csv
import json

import pytest

import fvrans.api
from fvrans.cli import main
from fvrans.sweep import load_sweep, run_sweep

H, U, RHO = 1.0, 1.0, 1.0
X1, X2 = 4.8, 6.4  # stations in the developed part of the 8 h long channel

RE_SPEC = f"""
title = "Friction factor of the laminar channel"
case = "channel.toml"

[[parameter]]
key = "fluid.viscosity"
name = "mu"
start = 0.02              # Re_Dh = rho U 2h / mu = 100 ...
stop = 0.1                # ... down to 20
count = 3
spacing = "log"

[[output]]
name = "p1"
wall = "lower_wall"
quantity = "p_wall"
x = {X1}

[[output]]
name = "p2"
wall = "lower_wall"
quantity = "p_wall"
x = {X2}

[[output]]
name = "cd_lower"
summary = "walls.lower_wall.forces.Cd"
"""


def test_channel_friction_factor_times_reynolds_is_96(tmp_path, channel_case):
    """Developed laminar flow between plates: Darcy f = -(dp/dx) D_h / (rho U^2 / 2) with D_h = 2h
    gives f Re_Dh = 96 (exact plane Poiseuille result; White, Fluid Mechanics, 7th ed., sec. 6.8).
    The pressure gradient is taken from the wall pressure at two stations of the downstream part.
    On 24 cells across the discrete value is 96 / (1 + 2 / 24^2) = 95.67 (measured), well within 1 %."""
    spec = tmp_path / "sweep.toml"
    spec.write_text(RE_SPEC, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    with open(out / "results.csv", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    assert len(rows) == 3
    reynolds = []
    for r in rows:
        assert r["status"] == "converged" and r["converged"] == "true" and r["error"] == ""
        mu = float(r["mu"])
        re = RHO * U * 2 * H / mu
        dpdx = (float(r["p2"]) - float(r["p1"])) / (X2 - X1)
        f = -dpdx * 2 * H / (0.5 * RHO * U**2)
        assert f * re == pytest.approx(96.0, rel=0.01), f"Re_Dh {re:.1f}: f Re = {f * re:.3f}"
        reynolds.append(re)
        assert (out / "runs" / r["key"] / "summary.json").is_file()
    assert reynolds == pytest.approx([100.0, 100.0 / 5**0.5, 20.0])
    data = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert [row["mu"] for row in data["runs"]] == [float(r["mu"]) for r in rows]


FAIL_SPEC = """
case = "channel.toml"

[[parameter]]
key = "mesh.parameters.length"
values = [4.0, -1.0, 5.0]

[[parameter]]
key = "fluid.viscosity"
values = [0.05, -0.05]

[[output]]
name = "iters"
summary = "iterations"
"""


def test_failing_runs_are_recorded_and_the_others_complete(tmp_path, channel_case, monkeypatch):
    """A negative channel length (MeshError in the run) and a negative viscosity (refused by the case
    checks) fail their runs; the error text is in their rows, the other runs complete, exit status 1.
    A rerun skips the finished runs and tries the failed ones again."""
    spec = tmp_path / "sweep.toml"
    spec.write_text(FAIL_SPEC, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 1
    rows = json.loads((out / "results.json").read_text(encoding="utf-8"))["runs"]
    assert len(rows) == 6
    by = {(r["mesh.parameters.length"], r["fluid.viscosity"]): r for r in rows}
    for length in (4.0, 5.0):
        good = by[(length, 0.05)]
        assert good["status"] == "converged" and good["error"] == "" and good["iters"] == good["iterations"] > 0
    for length in (4.0, -1.0, 5.0):
        bad = by[(length, -0.05)]
        assert bad["status"] == "failed" and "CaseError" in bad["error"] and "fluid.viscosity" in bad["error"]
        assert bad["iters"] is None
    bad = by[(-1.0, 0.05)]
    assert bad["status"] == "failed"
    assert bad["error"].startswith(f"MeshError: {channel_case}: mesh.parameters: channel: length and height must")

    calls = []
    real = fvrans.api.prepare
    monkeypatch.setattr(fvrans.api, "prepare", lambda *a, **k: calls.append(1) or real(*a, **k))
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 1
    assert len(calls) == 1  # only the run that failed in its mesh is tried again
    again = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert (again["runs_done"], again["runs_reused"], again["runs_refused"]) == (1, 2, 3)


def test_rerun_executes_only_missing_runs(tmp_path, channel_case, monkeypatch):
    """Resume: a second invocation runs nothing (also with an output added to the spec, read back
    from the run folders); after one run folder is removed (an interrupted sweep) only that run is
    solved again and the others' records are untouched."""
    spec = tmp_path / "sweep.toml"
    spec.write_text(RE_SPEC, encoding="utf-8")
    out = tmp_path / "out"
    first = run_sweep(load_sweep(spec), out, workers=1)
    keys = first.column("key")
    records = {k: (out / "runs" / k / "run.json").read_text(encoding="utf-8") for k in keys}
    calls = []
    real = fvrans.api.solve
    monkeypatch.setattr(fvrans.api, "solve", lambda *a, **k: calls.append(1) or real(*a, **k))

    second = run_sweep(load_sweep(spec), out, workers=1)
    assert calls == []
    assert second.rows == first.rows
    assert {k: (out / "runs" / k / "run.json").read_text(encoding="utf-8") for k in keys} == records

    spec.write_text(RE_SPEC + '[[output]]\nname = "cf_4"\nwall = "lower_wall"\nquantity = "cf"\nx = 4.0\n',
                    encoding="utf-8")
    more = run_sweep(load_sweep(spec), out, workers=1)  # a new output, read from the run folders
    assert calls == [] and more.meta["runs_done"] == 0
    assert all(cf > 0 for cf in more.column("cf_4")) and more.column("p1") == first.column("p1")
    spec.write_text(RE_SPEC, encoding="utf-8")

    victim = keys[1]
    for p in sorted((out / "runs" / victim).rglob("*"), reverse=True):
        p.rmdir() if p.is_dir() else p.unlink()
    third = run_sweep(load_sweep(spec), out, workers=1)
    assert len(calls) == 1
    assert third.meta["runs_done"] == 1 and third.meta["runs_reused"] == 2
    for k in (keys[0], keys[2]):
        assert (out / "runs" / k / "run.json").read_text(encoding="utf-8") == records[k]
    redone = json.loads((out / "runs" / victim / "run.json").read_text(encoding="utf-8"))
    assert redone["started"] > json.loads(records[victim])["finished"]
    for a, b in zip(third.rows, first.rows):
        assert a["p1"] == pytest.approx(b["p1"], rel=1e-12)


def test_warm_starts_agree_with_cold_starts_in_fewer_iterations(tmp_path, channel_case):
    """plan.warm_start: each run starts from its converged neighbour (same mesh); the outputs agree
    with cold starts to the solver tolerance (1e-7 normalised imbalances: 1e-5 relative asked) and the
    sweep takes fewer iterations (measured: 517 against 728 for 6 viscosities, ratio 0.71)."""
    spec = tmp_path / "sweep.toml"
    spec.write_text(RE_SPEC, encoding="utf-8")
    cold = run_sweep(load_sweep(spec), tmp_path / "cold", workers=1)
    spec.write_text(RE_SPEC.replace('spacing = "log"', 'spacing = "log"\n[plan]\nwarm_start = true'), encoding="utf-8")
    warm_sweep = load_sweep(spec)
    assert warm_sweep.warm_start
    warm = run_sweep(warm_sweep, tmp_path / "warm", workers=1)
    assert warm.all_ok and warm.column("key") == cold.column("key")
    for name in ("p1", "p2", "cd_lower"):
        assert warm.column(name) == pytest.approx(cold.column(name), rel=1e-5)
    assert warm.column("iterations")[0] == cold.column("iterations")[0]  # the first run starts cold
    assert sum(warm.column("iterations")) < sum(cold.column("iterations"))
    keys = warm.column("key")
    froms = [json.loads((tmp_path / "warm" / "runs" / k / "run.json").read_text())["warm_start_from"] for k in keys]
    assert froms == ["", keys[0], keys[1]]


SPEED_SPEC = """
title = "Creeping channel flow at three inflow speeds"
case = "channel.toml"

[[parameter]]
key = "boundary.inlet.velocity"
name = "inflow"
values = [[0.5, 0.0], [1.0, 0.0], [2.0, 0.0]]

[[parameter]]
key = "fluid.viscosity"
values = [10.0]

[[output]]
name = "cd_lower"
summary = "walls.lower_wall.forces.Cd"

[[output]]
name = "u_ref"
summary = "reference.u_ref"
"""


def test_coefficients_of_a_speed_sweep_use_each_runs_own_inflow(tmp_path, channel_case):
    """Creeping flow (Re_h = rho U h / mu <= 0.2): the wall friction grows in proportion to the speed
    (Stokes flow is linear in the driving; e.g. Happel & Brenner 1965, Low Reynolds Number
    Hydrodynamics, ch. 2), so with U_ref the run's own inflow speed Cd ~ 1 / U and Cd U is the same
    for the three runs, while a fixed U_ref would make Cd grow with U (a factor 16 from 0.5 to 2)."""
    spec = tmp_path / "speed.toml"
    spec.write_text(SPEED_SPEC, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["sweep", str(spec), "--out", str(out), "--workers", "1", "--quiet"]) == 0
    with open(out / "results.csv", encoding="utf-8") as f:
        rows = list(csv.DictReader(f))
    speeds = [float(r["u_ref"]) for r in rows]
    assert speeds == pytest.approx([0.5, 1.0, 2.0], rel=1e-12)
    cd_u = [float(r["cd_lower"]) * u for r, u in zip(rows, speeds)]
    assert cd_u == pytest.approx([cd_u[1]] * 3, rel=2e-3)
