"""Backward-facing step (Driver & Seegmiller 1985, Re_H = 36 000, Spalart-Allmaras) on the grids of
the bundled family and the mixed quad/triangle grid: reattachment, incoming layer, cost.

Each grid runs cases/step_medium.toml from the uniform start to residuals 1e-6. Printed per grid:
cells, outer iterations, wall seconds (numba compilation excluded by a warm-up run), microseconds
per cell per iteration, the reattachment point x_r / H on the lower wall (last zero of the
streamwise wall shear, experiment 6.26 +/- 0.10, Driver & Seegmiller 1985 via the NASA Turbulence
Modeling Resource, from memory), the corner-eddy extent and, at x = -4 H, the incoming layer's
99% thickness (experiment about 1.5 H) and Re_theta (about 5 000); then the change of x_r from
medium to fine and between the mixed and the medium grid (acceptance: both below 3 %).

Run:  python benchmarks/bench_step.py [--levels coarse medium mixed fine] [--fine-start medium]
       [--tolerance 1e-6] [--out DIR] [--model k-omega-sst] [--coupling simplec]
``--coupling`` overrides the case's ``solver.coupling`` (the step cases name "simultaneous" since
2026-12-03; ``simplec`` gives the segregated figures below).
``--model k-omega-sst`` runs the k-omega SST model with its own inflow layer (cases/step_inflow_sst.csv,
k and omega of fvrans' SST flat plate, made by ``python cases/make_step_inflow.py --model k-omega-sst``).
``--out DIR`` writes each grid's result to DIR/<grid> (summary.json with the zero-shear points, wall
tables, fields, the plots; the zero-shear lines on the Cf and Cp plots carry their x) and a map of
the velocity near the step with streamlines, DIR/<grid>/plots/field_velocity_near_step.png.
The fine grid (110 592 cells) is generated in memory. ``--fine-start medium`` starts it from the
medium-grid result (each fine cell takes the value of the nearest medium cell centre; grid
sequencing, to save machine time; the converged answer does not depend on the start), ``uniform``
(default) from the case's uniform initial field. ``--tolerance`` overrides the case's 1e-6 (after
a warm start the residuals pass 1e-6 early while the reattachment point still moves by about 0.01 H).

Since the scale-free residuals, the conservative start and the turbulence pseudo-time steps (#13, #14)
the case's tolerance is 7e-7: coarse 632 iterations (x_r 6.136), medium 1 670 (x_r 6.172; it passes 1e-6
after 1 394), 2 cores shared. Former figures (residuals 1e-6 in the former definition):
Simultaneous coupling with the sparse LU, as the cases name it since 2026-12-03 (Newton's convection and
Anderson acceleration near convergence, UMFPACK): coarse / medium / fine 45 / 46 / 46 outer iterations,
x_r 6.1329 / 6.1716 / 6.1772; the fine grid from the uniform start 143 s (2 cores, quiet, 2.6 GB peak resident).
Since the settle estimate's short windows for fast decays (fvrans/monitor/estimate.py) and UMFPACK's solves without
refinement: 31 / 30 / 32 outer iterations, same x_r; fine 138.1 s wall, 108.0 s CPU (user + sys), 2.3 GB peak
resident, at load 2-3 with 75 % of a core's share (triad 1.087 ms; 2026-12-03 12:50). With FGMRES on the kept LU
stopping at the forcing rule's tolerance (up to 0.1): 30 / 32 / 31 outer iterations; fine 86.0 s, 12 factorisations,
2.4 GB peak resident (quiet machine, load 1.0; triad 1.09 ms; 2026-12-03 13:36); 80.0 s on main ab400d3 (the
morning's tree 90.7 s in the same quarter hour; 2026-12-03 16:13-16:18, idle machine).
SIMPLEC figures, measured 2026-12-02 (2 cores shared with other jobs, solver defaults), x_r / H, iterations, seconds,
us/cell/iteration: coarse 6.136, 712, 10.6, 2.15; medium 6.173, 2112, 148, 2.54; mixed 6.216, 178,
21.8, 4.88; fine from the uniform start 6.173, 4800, 1705, 3.21 (from the medium result: 6.172, 90,
24.8, 2.49). Medium -> fine: 0.0 %; mixed vs medium: +0.7 %.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
from scipy.spatial import cKDTree

import fvrans.api as fa
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.mesh.generate import step_family
from fvrans.post.plots import field_figure, make_plots, save_figure
from fvrans.post.separation import cell_column, layer_thickness, reattachment_x, streamwise_points

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "cases" / "step_medium.toml"
RE_H = 36_000.0
XR_EXP = 6.26  # Driver & Seegmiller (1985), from memory
NEAR_STEP = (-2.0, 10.0, -1.0, 2.0)  # plot window (x0, x1, y0, y1) in step heights


def write_result(r: fa.Result, out: Path) -> None:
    """The result files and plots, plus the velocity near the step with streamlines."""
    r.write(out)
    make_plots(out)
    ref = {"u_ref": r.force_reference().velocity, "rho": r.case.fluid.density, "l_ref": 1.0}
    fig = field_figure(out / "fields.vtu", "velocity", title=f"{r.case.title}: near the step", reference=ref,
                       streamlines=True, window=NEAR_STEP)
    save_figure(fig, out / "plots" / "field_velocity_near_step.png")


def problem_for(level: str, tolerance: float | None = None, model: str = "spalart-allmaras",
                coupling: str | None = None) -> fa.Problem:
    case = fa.load_case(CASE)
    if coupling is not None:
        case = case.set("solver.coupling", coupling)
    if model == "k-omega-sst":
        case = case.replace({"model.turbulence": model, "boundary.inlet.profile": "step_inflow_sst.csv",
                             "title": case.title.replace("Spalart-Allmaras", "k-omega SST")})
    case = case.set("title", case.title.replace("(medium grid)", f"({level} grid)"))
    if tolerance is not None:
        case = case.set("solver.tolerance", tolerance)
    if level == "fine":
        return fa.prepare(case, mesh=step_family("fine"))
    return fa.prepare(case.set("mesh.file", str(ROOT / "meshes" / f"step_{level}.msh")))


def injected(start: fa.Result, problem: fa.Problem) -> Fields:
    """Fields of ``start`` carried to another grid: each cell takes the nearest cell centre's values
    (the face fluxes are then interpolated from the velocity by the solver)."""
    idx = cKDTree(start.cell_centres).query(problem.geom.cell_centre)[1]
    f = start.fields
    variables = {k: v[idx].copy() for k, v in f.variables.items()}
    return Fields(f.velocity[idx].copy(), f.pressure[idx].copy(), np.zeros(problem.mesh.n_faces), variables)


def run_level(level: str, tolerance: float | None = None, start: fa.Result | None = None,
              model: str = "spalart-allmaras", coupling: str | None = None) -> tuple[dict, fa.Result]:
    problem = problem_for(level, tolerance, model, coupling)
    r = fa.solve(problem, initial=None if start is None else injected(start, problem))
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
                upper=len(streamwise_points(r.wall("upper_wall"))),
                start="uniform" if start is None else "medium"), r


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", nargs="+", default=["coarse", "medium", "mixed"])
    ap.add_argument("--fine-start", choices=["uniform", "medium"], default="uniform")
    ap.add_argument("--tolerance", type=float, default=None)
    ap.add_argument("--out", type=Path, default=None, help="write each grid's result and plots here")
    ap.add_argument("--model", default="spalart-allmaras", choices=["spalart-allmaras", "k-omega-sst"])
    ap.add_argument("--coupling", default=None, choices=["simple", "simplec", "simultaneous"],
                    help="override the case's solver.coupling")
    args = ap.parse_args(argv)
    levels = list(args.levels)
    if "fine" in levels and args.fine_start == "medium" and "medium" not in levels:
        levels.insert(levels.index("fine"), "medium")
    print("warm-up (numba compilation) ...", flush=True)
    warm = fa.load_case(CASE).replace(
        {"mesh.file": str(ROOT / "meshes" / "step_coarse.msh"), "solver.max_iterations": 3})
    fa.solve(warm if args.coupling is None else warm.set("solver.coupling", args.coupling))
    rows: dict[str, dict] = {}
    results: dict[str, fa.Result] = {}
    print("grid      cells  start    iters conv  wall[s]  us/cell/it   x_r/H  vs exp   corner  d99/H  Re_theta  "
          "upper zeros")
    for level in levels:
        start = results.get("medium") if level == "fine" and args.fine_start == "medium" else None
        q, results[level] = run_level(level, args.tolerance, start, args.model, args.coupling)
        rows[level] = q
        print(f"{level:7s} {q['cells']:7d}  {q['start']:7s} {q['iterations']:6d} {int(q['converged']):4d} "
              f"{q['wall']:8.1f} {q['us']:10.2f}   {q['xr']:6.3f} {100 * (q['xr'] / XR_EXP - 1):+6.2f}%  "
              f"{q['corner']:6.3f} {q['d99']:6.3f} {q['re_theta']:8.0f}  {q['upper']}", flush=True)
        if args.out is not None:
            write_result(results[level], args.out / level)
    if "medium" in rows and "fine" in rows:
        print(f"x_r change medium -> fine: {100 * (rows['fine']['xr'] / rows['medium']['xr'] - 1):+.2f}%")
    if "medium" in rows and "mixed" in rows:
        print(f"x_r mixed vs medium quads: {100 * (rows['mixed']['xr'] / rows['medium']['xr'] - 1):+.2f}%")
    return 0


if __name__ == "__main__":
    sys.exit(main())
