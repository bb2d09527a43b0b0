"""Threads, memory per cell and compile time of the numerical kernels.

1. Per bundled case (cavity on 256^2 quads, step coarse and medium, flat plate medium):
   ``--iterations`` outer iterations at the case's settings on 1 and on 2 threads (``[solver]
   threads``; numba compiled beforehand; the best of ``--repeats`` runs): seconds, microseconds per
   cell and iteration, CPU use of the run (process CPU time over wall time: 2.0 means both cores
   busy throughout), the ratio of the seconds per iteration to a numpy triad ``a = b + s*c`` over
   arrays of cell length timed in the same run, the Krylov iterations per outer iteration (pressure
   CG / each momentum BiCGStab), and the largest difference of the velocity between the two runs
   (relative to the largest speed; the kernels give the same bits on any thread count, so 0).
   Each line also shows the 1-minute load average of the machine when it started: on a shared
   machine, where other processes hold the cores, two threads can be much slower than one (each
   parallel loop waits for the scheduler to give its second thread a core). ``--plain-smoother``:
   the same with the plain one-block Gauss-Seidel sweep on every multigrid level (the comparison
   for the block sweep that runs on both threads).
2. Peak memory per cell of a run on a generated cavity and a generated flat plate (Spalart-Allmaras)
   of ~400k cells (``--cells``), above the interpreter's baseline (numpy, scipy, pyamg, numba and the
   compiled kernels loaded): the peak resident set size (``resource.getrusage``, ``ru_maxrss``)
   after ``--memory-iterations`` (25: past the first rebuild of the multigrid hierarchies)
   iterations less the one before the mesh is made; and the peak of the arrays numpy allocates
   (``tracemalloc``; numba's own allocations inside kernels are not traced), in a fresh process.
3. Compile time: a fresh process with an empty ``NUMBA_CACHE_DIR`` runs 3 iterations of the
   cavity and of the flat plate (the seconds numba spends compiling, from ``fvrans.jit.CompileWatch``,
   and the number of kernels compiled), then another fresh process with the same (now warm) cache.

Measured 2026-12-03 on the shared 2-core machine, 50 iterations; other engineers' benchmarks (and, for
the first block, this branch's test suite) were running: load 3.6-5.5, so one thread got 0.4-1.0 of a core
and each parallel loop waited for its second thread; compare CPU seconds (s x CPU use) and Krylov counts:

| case (cells) | smoother | threads | s | CPU use | triad ratio | load | Krylov p/u |
|---|---|---|---|---|---|---|---|
| cavity 256^2 (65536) | block (CG) | 1 / 2 | 7.71 / 33.34 | 0.50 / 0.48 | 7389 / 31714 | 3.7 | 2.5/1.0 |
| | plain | 1 / 2 | 3.78 / 19.44 | 0.97 / 0.99 | 3587 / 18658 | 4.6 | 2.5/1.0 |
| step coarse (6912) | block (CG) | 1 / 2 | 3.79 / 14.58 | 0.38 / 0.59 | 24988 / 112607 | 4.8 | 12.6/3.1 |
| | plain | 1 / 2 | 1.31 / 1.61 | 1.00 / 1.00 | 8733 / 12128 | 4.4 | 12.5/2.8 |
| step medium (27648) | block (CG) | 1 / 2 | 11.33 / 128.19 | 0.50 / 0.63 | 26851 / 300422 | 5.1 | 12.3/3.4 |
| | plain | 1 / 2 | 5.91 / 38.64 | 0.96 / 0.98 | 14043 / 91728 | 4.6 | 12.5/3.4 |
| plate medium (13056) | block (CG) | 1 / 2 | 2.84 / 32.34 | 0.53 / 0.52 | 11261 / 124965 | 4.9 | 7.0/1.5 |
| | plain | 1 / 2 | 1.44 / 3.42 | 1.00 / 0.69 | 5584 / 15706 | 4.7 | 7.0/1.5 |

Block sweep on every level of every solve (not the default; best of 2, load 4.2-5.5), Krylov p/u: cavity
2.5/1.0, step coarse 12.4/3.1, step medium 12.4/3.6, plate 7.1/1.6: the momentum BiCGStab took more iterations,
hence the default. Later (load 1.9-3.4, one core still held by others; default smoother, best of 2): cavity
256^2 3.44 / 26.67 s (CPU use 1.00 / 1.01), plate 1.40 / 18.20 s, step medium 5.51 / 7.24 s (CPU use 1.00 / 1.50).
1 vs 2 threads: the same bits on every case and smoother. On a quiet machine (load 0.5,
previous build, serial smoothing, 100 iterations) 1 -> 2 threads: cavity 128^2 2.23 -> 2.03 s (CPU use 1.70),
step coarse 1.97 -> 1.70 s, plate 2.27 -> 2.11 s. Counting bound for the block sweep (blocks per colour): the
pressure smoothing on 2 threads takes 0.52 (cavity 256^2), 0.70 (step medium), 0.64 (plate medium), 0.89 (step
coarse) of its one-thread time, idle cores assumed (not measured: no quiet window).
Memory at 400k cells (25 iterations): cavity 2.38 KB per cell (traced 2.34), SA plate 2.92 KB per cell
(traced 2.87). Compile (cold cache, load 4.6): cavity 36.1 s (81 kernels) + plate 8.9 s (68); warm 0 kernels, 1.0 s.

No assertions; the machine's load makes the timings noisy: compare the triad ratios.

Run:  python benchmarks/bench_parallel.py [--iterations 100] [--repeats 1] [--cases cavity256 step_coarse ...]
                                          [--plain-smoother] [--cells 400000] [--skip-memory] [--skip-compile]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

ROOT = Path(__file__).resolve().parents[1]
CASES = {
    "cavity": "cavity_re100.toml",
    "cavity256": "cavity_re100.toml",
    "step_coarse": "step_coarse.toml",
    "step_medium": "step_medium.toml",
    "plate": "flat_plate_turbulent.toml",
}
#: cases whose mesh is generated here instead of the case's own file
GENERATED = {"cavity256": lambda: __import__("fvrans.mesh.generate", fromlist=["cavity"]).cavity(256)}


def threads_table(names: list[str], iterations: int, repeats: int) -> None:
    import fvrans.api as fa

    print(f"\n1. {iterations} outer iterations per run, best of {repeats} (numba compiled beforehand); load = 1-minute "
          "load average before the runs; Krylov = pressure CG / momentum BiCGStab iterations per outer iteration")
    print(f"{'case':12s} {'cells':>7s} {'thr':>3s} {'seconds':>8s} {'us/cell/it':>10s} {'CPU use':>7s} "
          f"{'triad ratio':>11s} {'load':>5s} {'Krylov p/u':>10s} {'|du|/U (1 vs 2)':>15s}")
    for name in names:
        # the segregated loop's threads (cavity_re100.toml names the simultaneous path)
        case = fa.load_case(ROOT / "cases" / CASES[name]).set("solver.coupling", "simplec")
        problem = fa.prepare(case, GENERATED[name]()) if name in GENERATED else fa.prepare(case)
        nc = problem.mesh.n_cells
        velocity = {}
        for threads in (1, 2):
            run = case.replace({"solver.max_iterations": iterations, "solver.tolerance": 1e-14,
                                "monitor.settle": False, "solver.threads": threads})
            fa.solve(fa.Problem(run.replace({"solver.max_iterations": 2}), problem.mesh, problem.geom,
                                problem.boundary))  # compile / load the kernels
            load = os.getloadavg()[0]
            triad = triad_seconds(nc)
            best = None
            for _ in range(repeats):
                krylov = _count_krylov()
                w0, c0 = time.perf_counter(), time.process_time()
                r = fa.solve(fa.Problem(run, problem.mesh, problem.geom, problem.boundary))
                wall, cpu = time.perf_counter() - w0, time.process_time() - c0
                counted = krylov()
                if best is None or wall < best[0]:
                    best = (wall, cpu, r, counted)
            triad = min(triad, triad_seconds(nc))
            wall, cpu, r, (kp, ku) = best
            its = max(r.iterations, 1)
            velocity[threads] = r.velocity
            diff = ""
            if threads == 2:
                scale = np.abs(velocity[1]).max()
                diff = f"{np.abs(velocity[2] - velocity[1]).max() / scale:.1e}"
            print(f"{name:12s} {nc:7d} {threads:3d} {wall:8.2f} {wall / its / nc * 1e6:10.2f} {cpu / wall:7.2f} "
                  f"{wall / its / triad:11.0f} {load:5.1f} {f'{kp / its:.1f}/{ku / its / 2:.1f}':>10s} {diff:>15s}")


def _count_krylov():
    """Count the Krylov iterations of every multigrid solve from now on; returns a function that
    stops counting and gives (pressure CG, momentum BiCGStab) iterations: the momentum solver is
    the BiCGStab one with the most solves (two per iteration; the model's equation has one)."""
    from fvrans.linalg import amg

    counts: dict[int, list] = {}
    run = amg.AmgKrylovSolver._run

    def counted(self, *a, **k):
        it, rel = run(self, *a, **k)
        c = counts.setdefault(id(self), [self.method, 0, 0])
        c[1] += 1
        c[2] += it
        return it, rel

    amg.AmgKrylovSolver._run = counted

    def stop():
        amg.AmgKrylovSolver._run = run
        cg = sum(c[2] for c in counts.values() if c[0] == "cg")
        bi = max((c for c in counts.values() if c[0] == "bicgstab"), key=lambda c: c[1], default=[0, 0, 0])
        return cg, bi[2]

    return stop


def _memory_mesh(kind: str, cells: int):
    """A generated mesh of about ``cells`` cells: the cavity, or the flat plate (the fine plate's
    distributions, 68 + 204 x 192 cells, scaled up)."""
    from fvrans.mesh.generate import cavity, flat_plate

    if kind == "cavity":
        return cavity(int(round(cells**0.5)))
    k = (cells / (272 * 192)) ** 0.5
    return flat_plate(int(round(204 * k)), int(round(68 * k)), int(round(192 * k)), 1e-6)


def peak_memory_of_run(case, kind: str, cells: int, iterations: int, after_baseline=None) -> dict:
    """In this (fresh) process: the baseline (imports and kernels loaded by a 3-iteration run of ``case``
    on 4 000 cells), then ``after_baseline()`` if given, then the peak memory of ``iterations`` outer
    iterations of ``case`` on the ~``cells``-cell mesh of ``_memory_mesh(kind, ...)``."""
    import tracemalloc

    import fvrans.api as fa

    small = case.replace({"solver.max_iterations": 3, "output.write_fields": False})
    fa.solve(fa.prepare(small, _memory_mesh(kind, 4000)))  # imports and kernels loaded: the baseline
    base_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    if after_baseline is not None:
        after_baseline()
    tracemalloc.start()
    t0 = time.perf_counter()
    mesh = _memory_mesh(kind, cells)
    run = case.replace({"solver.max_iterations": iterations, "solver.tolerance": 1e-14, "monitor.settle": False})
    r = fa.solve(fa.prepare(run, mesh))
    seconds = time.perf_counter() - t0
    _, traced_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    peak_rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024
    return {"cells": mesh.n_cells, "iterations": r.iterations, "seconds": seconds, "base_rss": base_rss,
            "peak_rss": peak_rss, "traced_peak": traced_peak}


def _child_memory(kind: str, cells: int, iterations: int) -> dict:
    """In a fresh process: peak memory of a run of about ``cells`` cells (``kind``: cavity, plate)."""
    import fvrans.api as fa

    # the segregated loop's memory (bench_coupled.py --memory measures both couplings)
    case = fa.load_case(ROOT / "cases" / (CASES[kind])).set("solver.coupling", "simplec")
    return peak_memory_of_run(case, kind, cells, iterations)


def memory_table(kind: str, cells: int, iterations: int) -> None:
    out = subprocess.run([sys.executable, __file__, "--child-memory", kind, str(cells), str(iterations)],
                         capture_output=True, text=True, check=True)
    m = json.loads(out.stdout.strip().splitlines()[-1])
    nc = m["cells"]
    print(f"\n2. memory: {kind} of {nc} cells, {m['iterations']} iterations ({m['seconds']:.0f} s incl. mesh and "
          "geometry), in a fresh process")
    print(f"   baseline RSS (interpreter, libraries, kernels): {m['base_rss'] / 2**20:.0f} MB")
    print(f"   peak RSS {m['peak_rss'] / 2**20:.0f} MB: above the baseline "
          f"{(m['peak_rss'] - m['base_rss']) / 2**20:.0f} MB = {(m['peak_rss'] - m['base_rss']) / nc / 1024:.2f} KB "
          "per cell (issue #15 target: <= 3 KB)")
    print(f"   peak of numpy's traced allocations {m['traced_peak'] / 2**20:.0f} MB = "
          f"{m['traced_peak'] / nc / 1024:.2f} KB per cell")


def _child_compile() -> dict:
    import fvrans.api as fa
    from fvrans.jit import CompileWatch

    out = {}
    t0 = time.perf_counter()
    for name in ("cavity", "plate"):
        case = fa.load_case(ROOT / "cases" / CASES[name]).replace({"solver.max_iterations": 3,
                                                                  "solver.coupling": "simplec"})
        with CompileWatch() as watch:
            fa.solve(case)
        out[name] = (watch.seconds, watch.count)
    out["process"] = time.perf_counter() - t0
    return out


def compile_table() -> None:
    print("\n3. compile time: fresh processes, 3 iterations of the cavity then of the flat plate")
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        for label in ("cold cache", "warm cache"):
            w0 = time.perf_counter()
            out = subprocess.run([sys.executable, __file__, "--child-compile"], capture_output=True, text=True,
                                 check=True, env=env)
            wall = time.perf_counter() - w0
            c = json.loads(out.stdout.strip().splitlines()[-1])
            print(f"   {label}: cavity compiles {c['cavity'][0]:5.1f} s ({c['cavity'][1]} kernels), plate "
                  f"{c['plate'][0]:5.1f} s ({c['plate'][1]} more); both runs {c['process']:5.1f} s, process "
                  f"{wall:5.1f} s (load {os.getloadavg()[0]:.1f})")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--iterations", type=int, default=100)
    ap.add_argument("--plain-smoother", action="store_true",
                    help="smooth every level with the plain one-block Gauss-Seidel sweep (the comparison)")
    ap.add_argument("--repeats", type=int, default=1, help="runs per case and thread count (the best is shown)")
    ap.add_argument("--cases", nargs="*", default=["cavity256", "step_coarse", "step_medium", "plate"],
                    choices=list(CASES))
    ap.add_argument("--cells", type=int, default=400_000)
    ap.add_argument("--memory-iterations", type=int, default=25)
    ap.add_argument("--memory-cases", nargs="*", default=["cavity", "plate"], choices=["cavity", "plate"])
    ap.add_argument("--skip-threads", action="store_true")
    ap.add_argument("--skip-memory", action="store_true")
    ap.add_argument("--skip-compile", action="store_true")
    ap.add_argument("--child-memory", nargs=3, help=argparse.SUPPRESS)
    ap.add_argument("--child-compile", action="store_true", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child_memory:
        kind, cells, iterations = a.child_memory
        print(json.dumps(_child_memory(kind, int(cells), int(iterations))))
        return
    if a.child_compile:
        print(json.dumps(_child_compile()))
        return
    print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.1f} at the start (shared: the other "
          "users' processes run beside this benchmark)")
    if a.plain_smoother:
        from fvrans.linalg import amg

        amg.SMOOTHER_BLOCK_ROWS = 2**62
        print("smoother: the plain Gauss-Seidel sweep on every level (--plain-smoother)")
    if not a.skip_threads:
        threads_table(a.cases, a.iterations, a.repeats)
    if not a.skip_memory:
        for kind in a.memory_cases:
            memory_table(kind, a.cells, a.memory_iterations)
    if not a.skip_compile:
        compile_table()


if __name__ == "__main__":
    main()
