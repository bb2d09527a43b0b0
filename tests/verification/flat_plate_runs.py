"""Runs of the bundled flat-plate cases shared by the verification tests (cached per process).

A run is driven to a tight tolerance while the skin friction at the station x = 0.97 is recorded
every iteration, so that a test can check what the looser, usual tolerance would have given.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from pathlib import Path

import numpy as np

import fvrans.api as fa
from fvrans.fields import Fields
from fvrans.models import model_for_case
from fvrans.post.wall import order_patch_faces
from fvrans.solve.coupled import solver_class
from fvrans.solve.simple import SolverControls

ROOT = Path(__file__).resolve().parents[2]
CASES = ROOT / "cases"
MESHES = ROOT / "meshes"
STATION = 0.97


@dataclass
class PlateRun:
    result: fa.Result
    cf_history: np.ndarray  # Cf(STATION) after each iteration
    residuals: np.ndarray  # (iterations, n_columns)


def station_cf(problem: fa.Problem, x: float):
    """A function velocity -> Cf(x) on the plate, linear between the two wall faces around x
    (tau_w = mu u_t / d as in fvrans.post.wall)."""
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
    d = np.einsum("ij,ij->i", geom.face_centre[f2] - geom.cell_centre[owner], geom.face_normal[f2])
    mu = problem.case.fluid.viscosity
    q = 0.5 * problem.case.fluid.density * fa.force_reference(problem).velocity**2

    def cf(velocity: np.ndarray) -> float:
        c = mu * velocity[owner, 0] / np.abs(d) / q
        return float((1 - w) * c[0] + w * c[1])

    return cf


def run_case(case: fa.Case, tolerance: float, max_iterations: int) -> PlateRun:
    problem = fa.prepare(case)
    c = problem.case
    model = model_for_case(c, problem.mesh, problem.geom, problem.boundary)
    fields = Fields.uniform(problem.mesh.n_cells, problem.mesh.n_faces, c.initial.velocity, c.initial.pressure)
    solver = solver_class(c.solver.coupling)(problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density,
                          mu=c.fluid.viscosity, controls=SolverControls.from_settings(c.solver), fields=fields,
                          model=model)
    cf = station_cf(problem, STATION)
    hist: list[float] = []
    converged = solver.run(max_iterations=max_iterations, tolerance=tolerance,
                           callback=lambda i, r: hist.append(cf(solver.fields.velocity)) and False)
    result = fa.Result(problem=problem, fields=solver.fields, history=solver.history, converged=converged,
                       iterations=solver.iteration, wall_seconds=float(np.sum(solver.history.seconds)),
                       grad_p=solver.grad_p, model=model)
    return PlateRun(result, np.asarray(hist), solver.history.as_array())


@cache
def turbulent(level: str) -> PlateRun:
    case = fa.load_case(CASES / "flat_plate_turbulent.toml").set("mesh.file", str(MESHES / f"flat_plate_{level}.msh"))
    return run_case(case, tolerance=1e-8, max_iterations=2000)


@cache
def laminar() -> PlateRun:
    case = fa.load_case(CASES / "flat_plate_laminar.toml")
    return run_case(case, tolerance=case.solver.tolerance, max_iterations=case.solver.max_iterations)


def first_converged(run: PlateRun, tolerance: float) -> int:
    """Index of the first iteration whose residuals are all below ``tolerance`` (-1 if none)."""
    ok = np.flatnonzero(np.all(run.residuals < tolerance, axis=1))
    return int(ok[0]) if len(ok) else -1


def converged_iteration(run: PlateRun, tolerance: float = 1e-6, cf_change: float = 1e-3) -> int:
    """First iteration from which on the residuals stay below ``tolerance`` and Cf(STATION) stays
    within ``cf_change`` (relative) of its final value (-1 if there is none)."""
    res_ok = np.all(run.residuals < tolerance, axis=1)
    cf_ok = np.abs(run.cf_history / run.cf_history[-1] - 1) < cf_change
    bad = np.flatnonzero(~(res_ok & cf_ok))
    n = 0 if len(bad) == 0 else int(bad[-1]) + 1
    return n if n < len(res_ok) else -1
