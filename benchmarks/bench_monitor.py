"""Cost of the monitors: one evaluation of every watched quantity after an iteration against
one solver iteration.

For bundled cases with and without point probes and derived scalars: milliseconds of a solver
iteration, that cost over a numpy triad ``a = b + s*c`` on cell-length arrays timed in the same
run (the machine is shared: compare ratios, not seconds), milliseconds of the monitor's
evaluation (velocity change, wall forces; with probes also a velocity gradient) and its share of
an iteration (medians over the run). What the stopping rule buys is measured by
``benchmarks/bench_bundled.py`` (distance from the converged field; add
``--set monitor.settle=false`` for the residuals alone). Prints a table; no assertions. Run:

    python benchmarks/bench_monitor.py [--iterations 40]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

import fvrans.api as fa

CASES = Path(__file__).resolve().parents[1] / "cases"
#: probes added for the cost measurement (points and a line with a derived scalar)
COST_PROBES = {
    "probes.a": {"at": [0.3, 0.3]}, "probes.b": {"at": [0.7, 0.7]},
    "probes.line": {"start": [0.05, 0.5], "end": [0.95, 0.5], "points": 101},
    "derived.dp": {"kind": "difference", "probes": ["a", "b"]},
    "derived.back": {"kind": "recirculation-length", "probe": "line", "quantity": "v"},
}


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
    ap.add_argument("--iterations", type=int, default=40, help="iterations per case")
    run_cost(ap.parse_args().iterations)


if __name__ == "__main__":
    main()
