"""Turbulent flat plate (Spalart-Allmaras, Re = 5e6 per unit length) on the coarse, medium and fine
grids of the bundled family: accuracy, iterations to converge and speed.

Converged means: every normalised imbalance below 1e-6 and Cf(x = 0.97) within 0.1 % of its final
value from that iteration on (the final value is taken from the same run carried on to
``--tight``). Printed per grid: cells, outer iterations to converge, wall seconds to that point
(numba compilation excluded by a warm-up run), microseconds per cell per iteration and its ratio
to a numpy triad ``a = b + s*c`` over arrays of n_cells timed in the same run, Cf(0.97) and the
plate drag coefficient against the grid-converged SA values of the NASA Turbulence Modeling
Resource flat-plate verification case (0.00271 and 0.00286, from memory), and where the time
of an outer iteration goes.

Run:  python benchmarks/bench_flat_plate.py [--levels coarse medium fine] [--tight 1e-8]
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

import fvrans.api as fa
from fvrans.fields import Fields
from fvrans.models import model_for_case
from fvrans.models.base import TurbulenceModel
from fvrans.post.forces import patch_forces
from fvrans.post.wall import order_patch_faces
from fvrans.solve.simple import SimpleSolver, SolverControls

ROOT = Path(__file__).resolve().parents[1]
CF_REF, CD_REF, STATION = 0.00271, 0.00286, 0.97


def station_cf(problem: fa.Problem, x: float):
    """velocity -> Cf(x) on the plate, linear between the two wall faces around x."""
    mesh, geom = problem.mesh, problem.geom
    order = order_patch_faces(mesh, geom, "plate")
    faces = mesh.patch("plate").start + order.faces
    xf = geom.face_centre[faces, 0]
    o = np.argsort(xf)
    faces, xf = faces[o], xf[o]
    k = int(np.searchsorted(xf, x)) - 1
    f2 = faces[k : k + 2]
    w = (x - xf[k]) / (xf[k + 1] - xf[k])
    owner = mesh.face_owner[f2]
    d = np.abs(np.einsum("ij,ij->i", geom.face_centre[f2] - geom.cell_centre[owner], geom.face_normal[f2]))
    mu = problem.case.fluid.viscosity

    def cf(u: np.ndarray) -> float:
        c = mu * u[owner, 0] / d / 0.5
        return float((1 - w) * c[0] + w * c[1])

    return cf


class TimedModel(TurbulenceModel):
    """Wraps the model to time its update."""

    def __init__(self, model):
        self.model = model
        self.names = model.names
        self.variables = model.variables
        self.seconds = 0.0

    def initialise(self, fields):
        self.model.initialise(fields)

    def eddy_viscosity(self, fields):
        return self.model.eddy_viscosity(fields)

    def wall_eddy_viscosity(self):
        return self.model.wall_eddy_viscosity()

    def extra_stress(self, fields, grad_u):
        return self.model.extra_stress(fields, grad_u)

    def update(self, fields, grad_u):
        t0 = time.perf_counter()
        out = self.model.update(fields, grad_u)
        self.seconds += time.perf_counter() - t0
        return out


def run_level(level: str, tight: float, max_iterations: int) -> dict:
    case = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").set(
        "mesh.file", str(ROOT / "meshes" / f"flat_plate_{level}.msh"))
    t_setup = time.perf_counter()
    problem = fa.prepare(case)
    c = problem.case
    model = TimedModel(model_for_case(c, problem.mesh, problem.geom, problem.boundary))
    fields = Fields.uniform(problem.mesh.n_cells, problem.mesh.n_faces, c.initial.velocity, c.initial.pressure)
    solver = SimpleSolver(problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density, mu=c.fluid.viscosity,
                          controls=SolverControls.from_settings(c.solver), fields=fields, model=model)
    t_setup = time.perf_counter() - t_setup
    cf = station_cf(problem, STATION)
    hist: list[float] = []
    solver.run(max_iterations=max_iterations, tolerance=tight,
               callback=lambda i, r: hist.append(cf(solver.fields.velocity)) and False)
    res = solver.history.as_array()
    secs = np.asarray(solver.history.seconds)
    cfh = np.asarray(hist)
    ok = np.all(res < 1e-6, axis=1) & (np.abs(cfh / cfh[-1] - 1) < 1e-3)
    bad = np.flatnonzero(~ok)
    n_conv = 0 if len(bad) == 0 else int(bad[-1]) + 1
    converged = n_conv < len(ok) and bool(np.all(res[-1] < tight))
    n_iter = n_conv + 1
    wall = float(secs[:n_iter].sum())
    nc = problem.mesh.n_cells
    result = fa.Result(problem=problem, fields=solver.fields, history=solver.history, converged=converged,
                       iterations=solver.iteration, wall_seconds=float(secs.sum()), grad_p=solver.grad_p)
    w = result.wall("plate")
    o = np.argsort(w.x)
    cf097 = float(np.interp(STATION, w.x[o], w.cf[o]))
    cd = patch_forces(w, l_ref=2.0).coefficients()["Cd"]
    us = float(secs.sum()) / solver.iteration / nc * 1e6
    triad = triad_seconds(nc, repeats=200) / nc * 1e6
    timing = dict(zip(("gradients", "momentum assembly", "momentum solve", "Rhie-Chow + p' assembly",
                       "p' solve", "corrections"), np.asarray(getattr(solver, "timing", np.zeros(6)))))
    phases = {k: float(v) for k, v in timing.items()}
    phases["turbulence model"] = model.seconds
    return dict(level=level, cells=nc, iterations=n_iter, total_iterations=solver.iteration, converged=converged,
                wall=wall, us=us, triad=us / triad, cf=cf097, cd=cd, setup=t_setup, phases=phases,
                total=float(secs.sum()), min_nt=float(solver.fields.variables["nu_tilde"].min()))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", nargs="+", default=["coarse", "medium", "fine"])
    ap.add_argument("--tight", type=float, default=1e-8, help="residual level of the final value")
    ap.add_argument("--max-iterations", type=int, default=4000)
    args = ap.parse_args(argv)
    print("warm-up (numba compilation) ...", flush=True)
    warm = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(ROOT / "meshes" / "flat_plate_coarse.msh"), "solver.max_iterations": 3})
    fa.solve(warm)
    rows = []
    for level in args.levels:
        r = run_level(level, args.tight, args.max_iterations)
        rows.append(r)
        print(f"\n{level}: {r['cells']} cells, converged={r['converged']} (setup {r['setup']:.2f} s, "
              f"{r['total_iterations']} iterations in {r['total']:.1f} s to residuals {args.tight:g}); "
              f"min nu_tilde {r['min_nt']:.3g}", flush=True)
        share = {k: v / r["total"] for k, v in r["phases"].items()}
        print("  time per phase: " + ", ".join(f"{k} {100 * v:.0f}%" for k, v in share.items()), flush=True)
    print("\nlevel    cells   iters  wall[s]  us/cell/it  x triad   Cf(0.97)  err     Cd        err")
    for r in rows:
        e_cf, e_cd = 100 * (r["cf"] / CF_REF - 1), 100 * (r["cd"] / CD_REF - 1)
        print(f"{r['level']:7s} {r['cells']:6d} {r['iterations']:6d} {r['wall']:8.1f} {r['us']:10.2f} {r['triad']:8.0f}"
              f"   {r['cf']:.6f} {e_cf:+5.2f}%  {r['cd']:.6f} {e_cd:+5.2f}%")
    return 0


if __name__ == "__main__":
    sys.exit(main())
