"""Backward-facing step (Driver & Seegmiller 1985, Re_H = 36 000, Spalart-Allmaras) on the grids of
the bundled family and the mixed quad/triangle grid: reattachment, incoming layer, cost.

Each grid runs cases/step_medium.toml from the uniform start to residuals 1e-6. Printed per grid:
cells, outer iterations, wall seconds (numba compilation excluded by a warm-up run), microseconds
per cell per iteration, the reattachment point x_r / H on the lower wall (last zero of the
streamwise wall shear, experiment 6.26 +/- 0.10, Driver & Seegmiller 1985 via the NASA Turbulence
Modeling Resource, from memory), the corner-eddy extent and, at x = -4 H, the incoming layer's
99% thickness (experiment about 1.5 H) and Re_theta (about 5 000); then the change of x_r from
medium to fine and between the mixed and the medium grid (acceptance: both below 3 %).

Run:  python benchmarks/bench_step.py [--levels coarse medium mixed fine]
(the fine grid, 110 592 cells, is generated in memory; expect tens of minutes for it).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.mesh.generate import step_family
from fvrans.post.separation import cell_column, layer_thickness, reattachment_x, streamwise_points

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "cases" / "step_medium.toml"
RE_H = 36_000.0
XR_EXP = 6.26  # Driver & Seegmiller (1985), from memory


def problem_for(level: str) -> fa.Problem:
    case = fa.load_case(CASE)
    if level == "fine":
        return fa.prepare(case, mesh=step_family("fine"))
    return fa.prepare(case.set("mesh.file", str(ROOT / "meshes" / f"step_{level}.msh")))


def run_level(level: str) -> dict:
    r = fa.solve(problem_for(level))
    lower = r.wall("lower_wall")
    try:
        xr = reattachment_x(lower, 0.0, 49.0)
    except CaseError:  # no reattachment before the outlet
        xr = float("nan")
    pts = streamwise_points(lower, 0.0, 49.0)
    corner = [p.x for p in pts if p.kind == "separation" and p.x < 0.5 * xr]
    cells = cell_column(r.mesh, r.cell_centres, -4.0 + 1e-9, 0.0, 4.0)
    y = np.r_[0.0, r.cell_centres[cells, 1]]
    u = np.r_[0.0, r.velocity[cells, 0]]
    t = layer_thickness(y, u, float(u[-1]))
    nc = r.mesh.n_cells
    return dict(level=level, cells=nc, iterations=r.iterations, converged=r.converged, wall=r.wall_seconds,
                us=r.wall_seconds / max(r.iterations, 1) / nc * 1e6, xr=xr,
                corner=max(corner) if corner else float("nan"), d99=t.delta99, re_theta=t.theta * u[-1] * RE_H,
                upper=len(streamwise_points(r.wall("upper_wall"))))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", nargs="+", default=["coarse", "medium", "mixed"])
    args = ap.parse_args(argv)
    print("warm-up (numba compilation) ...", flush=True)
    warm = fa.load_case(CASE).replace(
        {"mesh.file": str(ROOT / "meshes" / "step_coarse.msh"), "solver.max_iterations": 3})
    fa.solve(warm)
    rows = {}
    print("grid      cells  iters conv  wall[s]  us/cell/it   x_r/H  vs exp   corner  d99/H  Re_theta  upper zeros")
    for level in args.levels:
        q = run_level(level)
        rows[level] = q
        print(f"{level:7s} {q['cells']:7d} {q['iterations']:6d} {int(q['converged']):4d} {q['wall']:8.1f} "
              f"{q['us']:10.2f}   {q['xr']:6.3f} {100 * (q['xr'] / XR_EXP - 1):+6.2f}%  {q['corner']:6.3f} "
              f"{q['d99']:6.3f} {q['re_theta']:8.0f}  {q['upper']}", flush=True)
    if "medium" in rows and "fine" in rows:
        print(f"x_r change medium -> fine: {100 * (rows['fine']['xr'] / rows['medium']['xr'] - 1):+.2f}%")
    if "medium" in rows and "mixed" in rows:
        print(f"x_r mixed vs medium quads: {100 * (rows['mixed']['xr'] / rows['medium']['xr'] - 1):+.2f}%")
    return 0


if __name__ == "__main__":
    sys.exit(main())
