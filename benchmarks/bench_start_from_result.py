"""Coarse-to-fine start of the turbulent flat plate (#14 item 5): the fine grid (meshes/flat_plate_fine.msh,
52 224 cells) with cases/flat_plate_turbulent.toml, started once from the uniform free stream of the
case and once from the coarse grid's result (velocity and nu_tilde interpolated by fvrans.reference,
pressure uniform, face fluxes rebuilt), each run on to ``--tolerance`` (default 1e-10) while Cf(0.97)
is recorded every iteration.

Printed per start: iterations and Cf(0.97) when the residuals first pass 1e-8 (the case's tolerance),
1e-9 and 1e-10, seconds per iteration and their ratio to a numpy triad a = b + s*c over arrays of
n_cells timed in the same run; then the relative difference of Cf(0.97) between the two starts at
each tolerance.

Measured (2 cores shared with other engineers' jobs and, during the uniform start, with the test
suite, so seconds are noisy; the coarse source run took 221 iterations to 1e-8):

    fine from uniform: 1520 iterations, 907 s (0.597 s/iteration = 3.2e+04 triads of 52224)
    fine from coarse: 1037 iterations, 321 s (0.309 s/iteration = 1.63e+04 triads of 52224)

    start         to 1e-08      Cf(0.97)    to 1e-09      Cf(0.97)    to 1e-10      Cf(0.97)
    uniform            998 2.7280672e-03        1266 2.7275210e-03        1520 2.7274883e-03
    coarse             446 2.7261411e-03         753 2.7273953e-03        1037 2.7274803e-03
    rel. diff                  -7.06e-04                 -4.61e-05                 -2.94e-06

At the case's tolerance 1e-8 the two starts still differ by 7e-4 in Cf(0.97): that is iteration
error (each run keeps moving); at 1e-10 they agree to 2.9e-6, the coarse start in 0.68 of the
iterations (1037 against 1520; 446 against 998 to 1e-8). The uniform start's Cf(0.97) at 1e-10,
0.0027274883, matches benchmarks/grid_study_flat_plate.py's fine-grid value 0.0027274878.

Run (the fine grid takes many minutes):  python benchmarks/bench_start_from_result.py
    [--source coarse] [--target fine] [--tolerance 1e-10] [--max-iterations 4000]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

import fvrans.api as fa
from fvrans.models import model_for_case
from fvrans.post.wall import order_patch_faces
from fvrans.solve.simple import SimpleSolver, SolverControls

ROOT = Path(__file__).resolve().parents[1]
STATION = 0.97
TOLERANCES = (1e-8, 1e-9, 1e-10)


def station_cf(problem: fa.Problem, x: float):
    """velocity -> Cf(x) on the plate, linear between the two wall faces around x (tau_w = mu u_t / d)."""
    mesh, geom = problem.mesh, problem.geom
    faces = mesh.patch("plate").start + order_patch_faces(mesh, geom, "plate").faces
    xf = geom.face_centre[faces, 0]
    o = np.argsort(xf)
    faces, xf = faces[o], xf[o]
    k = int(np.searchsorted(xf, x)) - 1
    f2 = faces[k : k + 2]
    w = (x - xf[k]) / (xf[k + 1] - xf[k])
    owner = mesh.face_owner[f2]
    d = np.abs(np.einsum("ij,ij->i", geom.face_centre[f2] - geom.cell_centre[owner], geom.face_normal[f2]))
    c = problem.case
    q = 0.5 * c.fluid.density * fa.force_reference(problem).velocity**2

    def cf(u: np.ndarray) -> float:
        v = c.fluid.viscosity * u[owner, 0] / d / q
        return float((1 - w) * v[0] + w * v[1])

    return cf


def case_on(level: str) -> fa.Case:
    return fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").set(
        "mesh.file", str(ROOT / "meshes" / f"flat_plate_{level}.msh"))


def run(problem: fa.Problem, initial, tolerance: float, max_iterations: int) -> dict:
    c = problem.case
    fields, _ = fa.start_fields(problem, initial)
    model = model_for_case(c, problem.mesh, problem.geom, problem.boundary)
    solver = SimpleSolver(problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density, mu=c.fluid.viscosity,
                          controls=SolverControls.from_settings(c.solver), fields=fields, model=model)
    cf = station_cf(problem, STATION)
    hist: list[tuple[float, float]] = []
    t0 = time.perf_counter()
    converged = solver.run(max_iterations=max_iterations, tolerance=tolerance,
                           callback=lambda i, r: hist.append((max(r), cf(solver.fields.velocity))) and False)
    seconds = time.perf_counter() - t0
    h = np.asarray(hist)
    out = {"converged": converged, "iterations": len(h), "seconds": seconds, "final_cf": h[-1, 1], "at": {}}
    for tol in TOLERANCES:
        k = np.flatnonzero(h[:, 0] < tol)
        out["at"][tol] = (int(k[0]) + 1, float(h[k[0], 1])) if len(k) else (None, float("nan"))
    return out


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--source", default="coarse", help="grid of the result to start from")
    ap.add_argument("--target", default="fine", help="grid to solve on")
    ap.add_argument("--tolerance", type=float, default=1e-10)
    ap.add_argument("--max-iterations", type=int, default=4000)
    args = ap.parse_args(argv)
    t0 = time.perf_counter()
    source = fa.solve(case_on(args.source))
    print(f"{args.source} result: {source.iterations} iterations to {source.case.solver.tolerance:g}, "
          f"{time.perf_counter() - t0:.1f} s", flush=True)
    problem = fa.prepare(case_on(args.target))
    nc = problem.mesh.n_cells
    rows = {}
    for name, initial in (("uniform", None), (args.source, source)):
        rows[name] = r = run(problem, initial, args.tolerance, args.max_iterations)
        triad = triad_seconds(nc, repeats=200)
        per_it = r["seconds"] / max(r["iterations"], 1)
        r["triad_ratio"] = per_it / triad
        print(f"{args.target} from {name}: {r['iterations']} iterations, {r['seconds']:.0f} s "
              f"({per_it:.3f} s/iteration = {r['triad_ratio']:.3g} triads of {nc}), converged {r['converged']}",
              flush=True)
    print()
    head = "".join(f"{'to ' + format(t, 'g'):>12}{'Cf(0.97)':>14}" for t in TOLERANCES)
    print(f"{'start':<10}{head}{'s/it/triad':>12}")
    for name, r in rows.items():
        cells = "".join(f"{r['at'][t][0] or '-':>12}{r['at'][t][1]:>14.7e}" for t in TOLERANCES)
        print(f"{name:<10}{cells}{r['triad_ratio']:>12.3g}")
    a, b = rows["uniform"], rows[args.source]
    diffs = "".join(f"{'':>12}{b['at'][t][1] / a['at'][t][1] - 1:>14.2e}" for t in TOLERANCES)
    print(f"{'rel. diff':<10}{diffs}")
    print(f"final values at {args.tolerance:g}: uniform {a['final_cf']:.9f}, from {args.source} "
          f"{b['final_cf']:.9f}, relative difference {b['final_cf'] / a['final_cf'] - 1:.2e}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
