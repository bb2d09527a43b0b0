"""Driver-script example: the laminar flat plate at several Reynolds numbers, each run warm-started
from the previous one through ``fvrans.api``, with a table of results.

    python cases/reynolds_series.py                       # Re_L = 5e4, 1e5, 2e5
    python cases/reynolds_series.py --re 1e5 3e5 --tolerance 1e-6

The Reynolds number Re_L = rho U L / mu (U = 1, L = 2, the plate length) is set through the
dynamic viscosity. The check: Cf sqrt(Re_x) = 0.664 on a laminar flat plate (Blasius 1908; e.g.
Schlichting, Boundary-Layer Theory, ch. 7), averaged over 0.2 L <= x <= 0.9 L (away from the
leading-edge singularity and the outlet).
"""

from __future__ import annotations

import argparse
import time
from collections.abc import Sequence
from pathlib import Path

import numpy as np

import fvrans.api as fa

CASE = Path(__file__).resolve().parent / "flat_plate_laminar.toml"
BLASIUS = 0.664  # Cf sqrt(Re_x), Blasius 1908 (Schlichting, Boundary-Layer Theory, ch. 7)
PLATE_LENGTH = 2.0
U = 1.0


def blasius_check(result: fa.Result) -> float:
    """Mean of Cf sqrt(Re_x) over 0.2 L <= x <= 0.9 L on the plate."""
    nu = result.case.fluid.kinematic_viscosity
    w = result.wall("plate")
    m = (w.x >= 0.2 * PLATE_LENGTH) & (w.x <= 0.9 * PLATE_LENGTH)
    return float(np.mean(w.cf[m] * np.sqrt(U * w.x[m] / nu)))


def run_series(reynolds: Sequence[float], tolerance: float | None = None,
               max_iterations: int | None = None) -> list[dict[str, float]]:
    """Solve the case at each Re_L in turn, warm-starting from the previous result; one row each."""
    base = fa.load_case(CASE)
    if tolerance is not None:
        base = base.set("solver.tolerance", tolerance)
    if max_iterations is not None:
        base = base.set("solver.max_iterations", max_iterations)
    problem_mesh = None
    previous = None
    rows = []
    for re in reynolds:
        case = base.set("fluid.viscosity", base.fluid.density * U * PLATE_LENGTH / re)
        problem = fa.prepare(case, mesh=problem_mesh)  # the mesh is built once and reused
        problem_mesh = problem.mesh
        t0 = time.perf_counter()
        result = fa.solve(problem, initial=previous)
        seconds = time.perf_counter() - t0
        value = blasius_check(result)
        rows.append({"re": re, "iterations": result.iterations, "seconds": seconds, "converged": result.converged,
                     "cf_sqrt_rex": value, "error_percent": 100.0 * (value / BLASIUS - 1.0),
                     "warm": previous is not None})
        previous = result
    return rows


def format_table(rows: Sequence[dict[str, float]]) -> str:
    lines = [f"{'Re_L':>9}  {'start':>5}  {'iterations':>10}  {'seconds':>7}  {'Cf sqrt(Re_x)':>13}  "
             f"{'Blasius':>7}  {'error %':>7}"]
    for r in rows:
        it = f"{r['iterations']}" + ("" if r["converged"] else "*")
        lines.append(f"{r['re']:9.3g}  {'warm' if r['warm'] else 'cold':>5}  {it:>10}  {r['seconds']:7.2f}  "
                     f"{r['cf_sqrt_rex']:13.4f}  {BLASIUS:7.3f}  {r['error_percent']:+7.2f}")
    if not all(r["converged"] for r in rows):
        lines.append("* not converged within solver.max_iterations")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> list[dict[str, float]]:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--re", type=float, nargs="+", default=[5e4, 1e5, 2e5], help="Reynolds numbers Re_L")
    p.add_argument("--tolerance", type=float, default=None, help="solver tolerance (default: the case's)")
    p.add_argument("--max-iterations", type=int, default=None, help="iteration limit per run")
    args = p.parse_args(argv)
    rows = run_series(args.re, args.tolerance, args.max_iterations)
    print(f"laminar flat plate ({CASE.name}), warm starts along the series")
    print(format_table(rows))
    return rows


if __name__ == "__main__":
    main()
