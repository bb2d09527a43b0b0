"""Sweep throughput: runs per minute in-process (cold and warm starts) and on a local dask cluster
with 1 and 2 worker processes on 127.0.0.1, and the dask overhead per run against in-process.

The sweep varies one parameter of a small case (default: the height of a coarse bump, 504 cells)
over ``--runs`` values (a fresh output folder per
mode, so nothing is reused). The cluster start-up is timed apart from the sweep; the overhead per
run is (time on a 1-worker cluster - time in-process, cold starts) / runs. Every mode is run once
first to load the numba kernels. Prints a plain table; no assertions. Run:

    python benchmarks/bench_sweep.py [--runs 16] [--case CASE.toml --parameter KEY --start A --stop B]

Measured with the defaults on the 2-core development machine (shared with other jobs):

    mode                        runs   seconds  runs/min  iterations
    in-process cold               16      3.87     247.9        3203
    in-process warm               16      3.52     272.7        2337
    dask 1 worker(s) cold         16      5.38     178.3        3203
    dask 1 worker(s) warm         16      4.60     208.9        2392
    dask 2 worker(s) cold         16      2.70     356.1        3203
    dask 2 worker(s) warm         16      2.09     459.2        2392
    cluster start-up: 0.83 s (1 worker), 2.07 s (2 workers)
    dask overhead per run (1 worker against in-process, cold starts): 0.095 s

Again on 2026-12-03 17:47 (main bb92264, idle machine): in-process cold / warm 283.1 / 330.3 runs per minute,
dask 1 worker 254.4 / 312.0, 2 workers 460.7 / 534.1; cluster start-up 0.70 / 0.75 s; overhead 0.024 s per run.

By coupling (2026-12-03, in-process, ``--in-process-only --set solver.coupling=...``, machine shared with a
test suite; seconds cold / warm, outer iterations cold / warm over the sweep):

    sweep                                        simplec              simultaneous, direct  simultaneous, iterative
    bump height, 16 runs (504 cells)             3.59 / 3.15 s        1.45 / 1.11 s         2.83 / 2.31 s
                                                 3412 / 2769 its      310 / 249 its         314 / 254 its
    channel viscosity, 8 runs (channel_poiseuille, 4 000 cells)
                                                 3.93 / 3.18 s        2.30 / 2.07 s         12.21 / 5.37 s
                                                 821 / 636 its        75 / 70 its           89 / 72 its

Again after the sparse LU's new ordering (later the same day, machine loaded by three other jobs, numpy
triad 1.08 ms; seconds cold / warm, outer iterations cold / warm):

    sweep                                        simplec              simultaneous (by-size: LU)
    bump height, 16 runs (504 cells)             9.28 / 8.26 s        4.30 / 3.85 s
                                                 3412 / 2769 its      310 / 249 its
    channel viscosity, 8 runs (channel_poiseuille, 4 000 cells)
                                                 7.68 / 5.92 s        5.15 / 4.80 s
                                                 821 / 636 its        75 / 70 its

The simultaneous path runs these laminar sweeps 1.2-2.2x faster, so the bundled laminar cases that sweeps
and design loops start from name it (``channel_poiseuille``, ``bump_laminar``, ``flat_plate_laminar``,
``cavity_re100``; README, ``[solver]``: "Which coupling the bundled cases take"); the others keep SIMPLEC
(faster on the laminar step and the cylinder channel; the turbulent cases: see the README).
"""

from __future__ import annotations

import argparse
import logging
import tempfile
import time
from pathlib import Path

from fvrans.case import load_case
from fvrans.case.load import apply_overrides
from fvrans.sweep import Output, Parameter, Sweep, run_sweep

#: a coarse laminar bump channel (42 x 12 = 504 cells, Re_h = 50) whose bump height is varied by default
BUMP = """
title = "benchmark bump"
[mesh]
generator = "bump_channel"
[mesh.parameters]
bump_height = 0.1
bump_length = 1.0
nx_bump = 16
nx_up = 6
nx_down = 20
ny = 12
wall_spacing = 0.03
[fluid]
density = 1.0
viscosity = 0.02
[initial]
velocity = [1.0, 0.0]
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
tolerance = 1e-7
[output]
wall_patches = ["lower_wall"]
write_fields = false
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=16)
    ap.add_argument("--case", default=None, help="base case (default: a coarse bump channel)")
    ap.add_argument("--parameter", default="mesh.parameters.bump_height")
    ap.add_argument("--start", type=float, default=0.05)
    ap.add_argument("--stop", type=float, default=0.4)
    ap.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                    help="change a key of the base case, e.g. solver.coupling=simultaneous")
    ap.add_argument("--in-process-only", action="store_true", help="skip the dask cluster modes")
    args = ap.parse_args()
    logging.getLogger("distributed").setLevel(logging.ERROR)
    from distributed import Client, LocalCluster

    with tempfile.TemporaryDirectory(prefix="bench_sweep_") as tmp:
        folder = Path(tmp)
        if args.case is None:
            (folder / "bump.toml").write_text(BUMP, encoding="utf-8")
            case_path = folder / "bump.toml"
        else:
            case_path = Path(args.case)
        base = apply_overrides(load_case(case_path), args.set)

        def sweep(warm: bool, n: int) -> Sweep:
            return Sweep(case=base, warm_start=warm, outputs=[Output("iters", summary="iterations")],
                         parameters=[Parameter(args.parameter, start=args.start, stop=args.stop, count=n)])

        rows = []

        def timed(mode: str, warm: bool, **kw) -> float:
            t0 = time.perf_counter()
            table = run_sweep(sweep(warm, args.runs), folder / mode.replace(" ", "_"), **kw)
            seconds = time.perf_counter() - t0
            iters = sum(i or 0 for i in table.column("iterations"))
            bad = len(table.failed())
            rows.append((mode, args.runs, seconds, 60.0 * args.runs / seconds, iters, bad))
            return seconds

        run_sweep(sweep(False, 2), folder / "warmup", workers=1)  # numba kernels loaded
        t_in = timed("in-process cold", False, workers=1)
        timed("in-process warm", True, workers=1)
        t1 = None
        startup = {}
        for n_workers in () if args.in_process_only else (1, 2):
            t0 = time.perf_counter()
            cluster = LocalCluster(n_workers=n_workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                                   dashboard_address=None, scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
                                   silence_logs=logging.ERROR)
            client = Client(cluster, timeout=60)
            startup[n_workers] = time.perf_counter() - t0
            try:
                run_sweep(sweep(False, 2 * n_workers), folder / f"warmup{n_workers}", scheduler=client, timeout=600)
                t = timed(f"dask {n_workers} worker(s) cold", False, scheduler=client, timeout=600)
                timed(f"dask {n_workers} worker(s) warm", True, scheduler=client, timeout=600)
                if n_workers == 1:
                    t1 = t
            finally:
                client.close()
                cluster.close()

    print(f"case: {case_path.name if args.case else 'coarse bump channel (504 cells)'}; "
          f"parameter {args.parameter} from {args.start:g} to {args.stop:g}"
          + (f"; set {', '.join(args.set)}" if args.set else ""))
    print(f"{'mode':<26} {'runs':>5} {'seconds':>9} {'runs/min':>9} {'iterations':>11} {'not ok':>7}")
    for mode, n, sec, rate, iters, bad in rows:
        print(f"{mode:<26} {n:5d} {sec:9.2f} {rate:9.1f} {iters:11d} {bad:7d}")
    if startup:
        print(f"cluster start-up: {startup[1]:.2f} s (1 worker), {startup[2]:.2f} s (2 workers)")
    if t1 is not None:
        print(f"dask overhead per run (1 worker against in-process, cold starts): {(t1 - t_in) / args.runs:.3f} s")


if __name__ == "__main__":
    main()
