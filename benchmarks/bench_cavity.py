"""Speed and convergence of the SIMPLEC loop: lid-driven cavity, Re = 100, uniform quads
(or, with ``--triangles``, the squares split into triangles).

For 64^2, 128^2 and 256^2 cells: outer iterations to reach the stated tolerance on every scaled
residual, seconds per outer iteration, microseconds per cell per outer iteration and that cost
divided by a numpy triad ``a = b + s*c`` over cell-count arrays timed in the same run, and the
fraction of the loop time spent in each phase. A short warm-up run excludes numba compilation.
Prints a plain table; no assertions. Run:

    python benchmarks/bench_cavity.py [--sizes 64 128 256] [--tolerance 1e-6] [--momentum-solver amg]
                                      [--triangles] [--quadratic-face-flux auto|on|off]
"""

from __future__ import annotations

import argparse
import time

from triad import triad_seconds

from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import cavity
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.simple import PHASES, SimpleSolver, SolverControls

SPECS = {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}}


def make_solver(n: int, controls: dict, triangles: bool = False) -> SimpleSolver:
    mesh = cavity(n, triangles=triangles)
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, SPECS)
    return SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.01, controls=SolverControls(**controls))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[64, 128, 256])
    ap.add_argument("--tolerance", type=float, default=1e-6)
    ap.add_argument("--max-iterations", type=int, default=5000)
    ap.add_argument("--momentum-solver", default=None, help="'amg' or 'gauss-seidel' (default: the solver's)")
    ap.add_argument("--relax-velocity", type=float, default=None)
    ap.add_argument("--triangles", action="store_true", help="split every square into two triangles")
    ap.add_argument("--quadratic-face-flux", choices=["auto", "on", "off"], default="auto",
                    help="second-derivative terms of the Rhie-Chow fluxes (auto: on for non-quad cells)")
    args = ap.parse_args()
    controls: dict = {"tolerance": args.tolerance, "max_iterations": args.max_iterations}
    if args.momentum_solver:
        controls["momentum_solver"] = args.momentum_solver
    if args.relax_velocity:
        controls["relax_velocity"] = args.relax_velocity
    if args.quadratic_face_flux != "auto":
        controls["quadratic_face_flux"] = args.quadratic_face_flux == "on"
    make_solver(16, controls, args.triangles).run(max_iterations=30)  # numba compilation / cache load

    cells = "squares split into triangles" if args.triangles else "uniform quads"
    print(f"lid-driven cavity Re=100, {cells}, SIMPLEC, controls {SolverControls(**controls)}")
    print(f"converged = every normalised imbalance < {args.tolerance:g}")
    head = f"{'mesh':>8} {'cells':>7} {'conv':>5} {'iters':>6} {'total s':>8} {'s/iter':>8} {'us/cell/it':>10} "
    head += f"{'triad us':>9} {'/triad':>7} {'p CG/it':>7} {'mom Kr/it':>9}"
    rows = []
    profiles = []
    for n in args.sizes:
        s = make_solver(n, controls, args.triangles)
        t0 = time.perf_counter()
        ok = s.run()
        total = time.perf_counter() - t0
        its = max(s.iteration, 1)
        per_it = total / its
        us_cell = per_it / s.nc * 1e6
        triad = triad_seconds(s.nc)
        mom = s.msolver.total_iterations / (2 * its) if s.ctl.momentum_solver == "amg" else float("nan")
        rows.append(
            f"{n:>4}^2   {s.nc:>7} {'yes' if ok else 'no':>5} {s.iteration:>6} {total:>8.2f} {per_it:>8.4f} "
            f"{us_cell:>10.3f} {triad * 1e6:>9.1f} {per_it / triad:>7.0f} "
            f"{s.psolver.total_iterations / its:>7.2f} {mom:>9.2f}"
        )
        profiles.append((n, s.timing / total))
        print(rows[-1] if len(rows) > 1 else head + "\n" + rows[-1], flush=True)
    print("\nfraction of loop time per phase (rest: residual checks, copies, Python overhead)")
    print(f"{'mesh':>8} " + " ".join(f"{p[:14]:>14}" for p in PHASES) + f" {'other':>8}")
    for n, frac in profiles:
        print(f"{n:>4}^2   " + " ".join(f"{f:>14.3f}" for f in frac) + f" {1.0 - frac.sum():>8.3f}")


if __name__ == "__main__":
    main()
