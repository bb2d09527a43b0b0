"""Sweep throughput: runs per minute in-process (cold and warm starts) and on a local dask cluster
with 1 and 2 worker processes on 127.0.0.1, and the dask overhead per run against in-process.

The sweep varies one parameter of a small case over ``--runs`` values (a fresh output folder per
mode, so nothing is reused). The cluster start-up is timed apart from the sweep; the overhead per
run is (time on a 1-worker cluster - time in-process, cold starts) / runs. Every mode is run once
first to load the numba kernels. Prints a plain table; no assertions. Run:

    python benchmarks/bench_sweep.py [--runs 16] [--case CASE.toml --parameter KEY --start A --stop B]
"""

from __future__ import annotations

import argparse
import logging
import tempfile
import time
from pathlib import Path

from fvrans.case import load_case
from fvrans.sweep import Output, Parameter, Sweep, run_sweep

#: a coarse channel (32 x 24 cells) whose viscosity is varied when no case is given
CHANNEL = """
title = "benchmark channel"
[mesh]
generator = "channel"
parameters = { length = 8.0, height = 1.0, nx = 32, ny = 24 }
[fluid]
density = 1.0
viscosity = 0.02
[boundary.inlet]
kind = "velocity-inlet"
velocity = [1.0, 0.0]
[boundary.outlet]
kind = "pressure-outlet"
[boundary.lower_wall]
kind = "wall"
[boundary.upper_wall]
kind = "wall"
[solver]
tolerance = 1e-7
[output]
write_fields = false
"""


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=16)
    ap.add_argument("--case", default=None, help="base case (default: a coarse channel)")
    ap.add_argument("--parameter", default="fluid.viscosity")
    ap.add_argument("--start", type=float, default=0.02)
    ap.add_argument("--stop", type=float, default=0.1)
    args = ap.parse_args()
    logging.getLogger("distributed").setLevel(logging.ERROR)
    from distributed import Client, LocalCluster

    with tempfile.TemporaryDirectory(prefix="bench_sweep_") as tmp:
        folder = Path(tmp)
        if args.case is None:
            (folder / "channel.toml").write_text(CHANNEL, encoding="utf-8")
            case_path = folder / "channel.toml"
        else:
            case_path = Path(args.case)
        base = load_case(case_path)

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
        for n_workers in (1, 2):
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

    print(f"case: {case_path.name if args.case else 'coarse channel (32 x 24 cells)'}; "
          f"parameter {args.parameter} from {args.start:g} to {args.stop:g}")
    print(f"{'mode':<26} {'runs':>5} {'seconds':>9} {'runs/min':>9} {'iterations':>11} {'not ok':>7}")
    for mode, n, sec, rate, iters, bad in rows:
        print(f"{mode:<26} {n:5d} {sec:9.2f} {rate:9.1f} {iters:11d} {bad:7d}")
    print(f"cluster start-up: {startup[1]:.2f} s (1 worker), {startup[2]:.2f} s (2 workers)")
    if t1 is not None:
        print(f"dask overhead per run (1 worker against in-process, cold starts): {(t1 - t_in) / args.runs:.3f} s")


if __name__ == "__main__":
    main()
