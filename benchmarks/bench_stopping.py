"""Stopping rule and monitors: what the defaults buy and what the monitors cost.

Part 1, ``--cases``: each bundled case (as bundled, default ``[monitor]`` settings) is run three
times: to residuals of 1e-11 without the monitors' rule (the converged field), at its own
settings with the rule (settled), and at its own settings on the residuals alone. Printed:
iterations, seconds, the stopping criterion, and the velocity error max over cells of
|u - u_converged| / U (U the speed scale), with the monitors' own estimate of it.

Part 2, ``--cost``: seconds of one monitor evaluation (velocity change, wall forces, point
probes, derived scalars) against one solver iteration on the same state, for cases with and
without probes, and the cost of an iteration as a multiple of a numpy triad over the cells timed
in the same run (the machine is shared: compare ratios, not seconds). Prints tables; no
assertions. Run:

    python benchmarks/bench_stopping.py [--cases channel_poiseuille bump_laminar ...] [--cost]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

import fvrans.api as fa

CASES = Path(__file__).resolve().parents[1] / "cases"
DEFAULT_CASES = ["channel_poiseuille", "bump_laminar", "bump_turbulent", "flat_plate_laminar",
                 "flat_plate_turbulent", "step_coarse", "cavity_re100"]
#: probes added for the cost measurement (points and a line with a derived scalar)
COST_PROBES = {
    "probes.a": {"at": [0.3, 0.3]}, "probes.b": {"at": [0.7, 0.7]},
    "probes.line": {"start": [0.05, 0.5], "end": [0.95, 0.5], "points": 101},
    "derived.dp": {"kind": "difference", "probes": ["a", "b"]},
    "derived.back": {"kind": "recirculation-length", "probe": "line", "quantity": "v"},
}


def triad_seconds(n: int, repeats: int = 50) -> float:
    """Best time of ``a = b + s*c`` over arrays of length n (numpy, in place)."""
    b = np.random.default_rng(0).random(n)
    c = np.random.default_rng(1).random(n)
    a = np.empty(n)
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        np.multiply(c, 1.0001, out=a)
        np.add(a, b, out=a)
        best = min(best, time.perf_counter() - t0)
    return best


def run_cases(names: list[str]) -> None:
    print(f"{'case':<22}{'cells':>7} | {'converged (1e-11)':>18} | {'settled: it':>11}{'s':>7}{'error':>9}"
          f"{'estimate':>9} | {'residuals: it':>13}{'s':>7}{'error':>9}")
    for name in names:
        case = fa.load_case(CASES / f"{name}.toml")
        problem = fa.prepare(case)
        t0 = time.perf_counter()
        ref = fa.solve(fa.prepare(case.replace({"solver.tolerance": 1e-11, "monitor.settle": False,
                                                "solver.max_iterations": 20000}), mesh=problem.mesh))
        t_ref = time.perf_counter() - t0
        U = ref.monitor.speed
        row = f"{name:<22}{problem.mesh.n_cells:>7} | {ref.iterations:>8} its {t_ref:>6.0f} s |"
        for settle in (True, False):
            t0 = time.perf_counter()
            r = fa.solve(fa.prepare(case.set("monitor.settle", settle), mesh=problem.mesh))
            t = time.perf_counter() - t0
            err = float(np.abs(r.velocity - ref.velocity).max() / U)
            est = r.monitor.summary()["velocity_change"]["iteration_error"]
            flag = "" if r.converged else "*"
            if settle:
                row += f" {r.iterations:>10}{flag:1}{t:>7.1f}{err:>9.1e}{est:>9.1e} |"
            else:
                row += f" {r.iterations:>12}{flag:1}{t:>7.1f}{err:>9.1e}"
        print(row, flush=True)
    print("error: max over cells |u - u_converged| / U; estimate: the monitors' iteration error of the velocity "
          "field; * not converged")


def run_cost(iterations: int = 40) -> None:
    print(f"{'case':<34}{'cells':>7}{'iteration ms':>14}{'triads':>9}{'monitor ms':>12}{'share':>8}")
    setups = [("cavity_re100", {}), ("cavity_re100 + 2 points, line", COST_PROBES),
              ("flat_plate_turbulent", {}), ("bump_laminar", {})]
    for label, extra in setups:
        name = label.split()[0]
        case = fa.load_case(CASES / f"{name}.toml").replace({"solver.max_iterations": iterations, **extra})
        problem = fa.prepare(case)
        monitor = fa.build_monitor(problem)
        record, spent = monitor.callback, []

        def timed(it, res, record=record, spent=spent):
            t0 = time.perf_counter()
            record(it, res)
            spent.append(time.perf_counter() - t0)

        monitor.callback = timed
        r = fa.solve(problem, monitor=monitor)
        t_it = float(np.median(r.history.seconds[5:]))
        t_mon = float(np.median(spent[5:]))
        triad = triad_seconds(problem.mesh.n_cells)
        print(f"{label:<34}{problem.mesh.n_cells:>7}{1e3 * t_it:>14.2f}{t_it / triad:>9.0f}{1e3 * t_mon:>12.3f}"
              f"{t_mon / t_it:>8.1%}", flush=True)
    print("monitor: one evaluation of every watched quantity after an iteration (with probes: a velocity "
          "gradient); share: of one solver iteration (medians)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", nargs="*", default=None, help=f"bundled cases (default: {' '.join(DEFAULT_CASES)})")
    ap.add_argument("--cost", action="store_true", help="only the cost of the monitors")
    args = ap.parse_args()
    if args.cost:
        run_cost()
        return
    run_cases(args.cases or DEFAULT_CASES)
    run_cost()


if __name__ == "__main__":
    main()
