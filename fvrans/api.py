"""The Python API for driver scripts and design loops: case -> mesh -> solve -> Result.

>>> import fvrans.api as fa
>>> from fvrans.mesh.generate import cavity
>>> case = fa.case_from_dict({
...     "mesh": {"generator": "cavity", "parameters": {"n": 8}},
...     "fluid": {"density": 1.0, "viscosity": 0.01},
...     "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
...     "solver": {"tolerance": 1e-5, "max_iterations": 2000},
... })
>>> result = fa.solve(case)
>>> result.converged, result.velocity.shape
(True, (64, 2))
>>> warm = fa.solve(case.set("boundary.lid.velocity", [1.1, 0.0]), initial=result)
>>> warm.iterations < result.iterations
True
"""

from __future__ import annotations

import logging
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.case import Case, apply_overrides, case_from_dict, load_case
from fvrans.case.build import build_case_mesh
from fvrans.errors import CaseError, DivergenceError
from fvrans.mesh.geometry import Geometry, compute_geometry
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.morph import topology_difference
from fvrans.physics.boundary import FlowBoundary, build_flow_boundary
from fvrans.physics.spalart_allmaras import eddy_viscosity as sa_eddy_viscosity
from fvrans.physics.spalart_allmaras import model_for_case
from fvrans.post import (
    WallData,
    all_wall_data,
    build_summary,
    wall_columns,
    write_csv_atomic,
    write_json_atomic,
    write_residuals_csv,
    write_vtu_atomic,
)
from fvrans.solve.fields import Fields
from fvrans.solve.simple import History, SimpleSolver, SolverControls

log = logging.getLogger(__name__)

__all__ = ["Problem", "Result", "apply_overrides", "case_from_dict", "load_case", "prepare", "solve"]


@dataclass(frozen=True)
class Problem:
    """A case with its mesh, geometry and per-face boundary data, ready to solve."""

    case: Case
    mesh: Mesh
    geom: Geometry
    boundary: FlowBoundary


def prepare(case: Case, mesh: Mesh | None = None) -> Problem:
    """Build (or reuse) the mesh of ``case``, its geometry and boundary arrays."""
    mesh = build_case_mesh(case) if mesh is None else mesh
    geom = compute_geometry(mesh)
    boundary = build_flow_boundary(mesh, geom, case.boundaries)
    return Problem(case, mesh, geom, boundary)


@dataclass
class Result:
    """The outcome of a run: fields as numpy arrays, convergence history, wall data, writers."""

    problem: Problem
    fields: Fields
    history: History
    converged: bool
    iterations: int
    wall_seconds: float
    grad_p: np.ndarray
    message: str = ""
    diverged: bool = False
    extra: dict[str, Any] = field(default_factory=dict)

    # -- arrays -----------------------------------------------------------------------------
    @property
    def case(self) -> Case:
        return self.problem.case

    @property
    def mesh(self) -> Mesh:
        return self.problem.mesh

    @property
    def velocity(self) -> np.ndarray:
        """Cell velocities (n_cells, 2)."""
        return self.fields.velocity

    @property
    def pressure(self) -> np.ndarray:
        """Cell static pressure (n_cells,)."""
        return self.fields.pressure

    @property
    def cell_centres(self) -> np.ndarray:
        return self.problem.geom.cell_centre

    @property
    def residuals(self) -> np.ndarray:
        """Scaled residuals per iteration, columns named by ``history.names``."""
        return self.history.as_array()

    # -- derived ----------------------------------------------------------------------------
    def walls(self) -> dict[str, WallData]:
        """Wall data (shear stress, Cf, Cp, y+) of every wall patch the output asks for."""
        c = self.case
        out = all_wall_data(
            self.mesh, self.problem.geom, self.problem.boundary, self.velocity, self.pressure,
            self.grad_p, c.fluid.density, c.fluid.viscosity, c.output.reference_velocity,
            c.output.reference_pressure,
        )
        wanted = c.output.wall_patches
        return {k: v for k, v in out.items() if not wanted or k in wanted}

    def wall(self, patch: str) -> WallData:
        walls = self.walls()
        if patch not in walls:
            raise CaseError(f"{self.case.label}: {patch!r} is not a wall patch of this run; walls: {sorted(walls)}")
        return walls[patch]

    def summary(self) -> dict[str, Any]:
        """The content of summary.json."""
        extra = {"message": self.message} if self.message else {}
        extra["diverged"] = self.diverged
        return build_summary(
            self.case.title or self.case.label, self.converged, self.iterations, self.wall_seconds,
            self.mesh.n_cells, history=self.history, walls=self.walls(),
            l_ref=self.case.output.reference_length, extra=extra,
        )

    # -- writing ----------------------------------------------------------------------------
    def cell_data(self) -> dict[str, np.ndarray]:
        d = {"velocity": self.velocity, "pressure": self.pressure}
        d.update(self.extra.get("cell_data", {}))
        return d

    def write(self, out_dir: str | Path) -> Path:
        """Write summary.json, fields.vtu, wall/<patch>.csv and residuals.csv into ``out_dir``
        (each file atomically)."""
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        if self.case.output.write_fields:
            write_vtu_atomic(out / "fields.vtu", self.mesh, self.cell_data())
        walls = self.walls()
        if walls:
            (out / "wall").mkdir(exist_ok=True)
        for name, w in walls.items():
            header, cols = wall_columns(w)
            write_csv_atomic(out / "wall" / f"{name}.csv", header, cols)
        write_residuals_csv(out / "residuals.csv", self.history)
        write_json_atomic(out / "summary.json", self.summary())
        return out


def _initial_fields(problem: Problem, initial: Result | Fields | None) -> Fields | None:
    mesh = problem.mesh
    if initial is None:
        c = problem.case
        f = Fields.uniform(mesh.n_cells, mesh.n_faces, c.initial.velocity, c.initial.pressure)
        return f
    fields = initial.fields if isinstance(initial, Result) else initial
    if fields.velocity.shape[0] != mesh.n_cells or fields.face_flux.shape[0] != mesh.n_faces:
        raise CaseError(
            f"{problem.case.label}: the warm start has {fields.velocity.shape[0]} cells and "
            f"{fields.face_flux.shape[0]} faces but the mesh has {mesh.n_cells} and {mesh.n_faces}; "
            "warm starts need the same mesh (or a morphed mesh with the same topology)"
        )
    diff = topology_difference(initial.mesh, mesh) if isinstance(initial, Result) else None
    if diff is not None:
        raise CaseError(
            f"{problem.case.label}: the warm start's mesh has the same size but a different topology ({diff}); "
            "warm starts need the same cells and faces: keep the generator's resolution parameters, "
            "or morph the previous mesh (fvrans.mesh.morph)"
        )
    return fields.copy()


def solve(
    case: Case | Problem,
    initial: Result | Fields | None = None,
    callback: Callable[[int, list[float]], bool | None] | None = None,
) -> Result:
    """Solve a case (or a prepared Problem); ``initial`` warm-starts from a previous result on the
    same mesh or one of the same topology (a neighbouring design of a parametric generator with the
    same resolution, or a mesh morphed with :func:`fvrans.mesh.morph.morph`); a different cell or
    face count, or (for a Result) a different topology, raises CaseError. A diverging run returns
    a Result with ``diverged=True`` holding the last good state and the message; it does not raise."""
    problem = case if isinstance(case, Problem) else prepare(case)
    c = problem.case
    controls = SolverControls.from_settings(c.solver)
    fields = _initial_fields(problem, initial)
    model = model_for_case(c, problem.mesh, problem.geom, problem.boundary)
    solver = SimpleSolver(
        problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density, mu=c.fluid.viscosity,
        controls=controls, fields=fields, model=model,
    )
    t0 = time.perf_counter()
    message = ""
    diverged = False
    try:
        converged = solver.run(callback=callback)
    except DivergenceError as exc:
        converged = False
        diverged = True
        message = str(exc)
        log.error("%s: %s", c.label, message)
    seconds = time.perf_counter() - t0
    grad_p = solver.grad_p
    if diverged:  # the gradient of the last good pressure
        grad_p = solver.grad_pressure(solver.fields.pressure, solver._pressure_on_boundary(grad_p))
    if not converged and not diverged:
        message = (
            f"not converged after {solver.iteration} iterations (tolerance {controls.tolerance:g}); "
            "raise solver.max_iterations or restart from this result"
        )
    extra: dict[str, Any] = {}
    if model is not None and solver.fields.nu_tilde is not None:
        nt = solver.fields.nu_tilde
        nu = c.fluid.kinematic_viscosity
        extra["cell_data"] = {
            "nu_tilde": nt,
            "nut_ratio": sa_eddy_viscosity(nt, nu) / nu,
            "wall_distance": model.wall_distance,
        }
    return Result(
        problem=problem, fields=solver.fields, history=solver.history, converged=bool(converged),
        iterations=solver.iteration, wall_seconds=seconds, grad_p=grad_p, message=message,
        diverged=diverged, extra=extra,
    )
