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
from fvrans.checkpoint import Checkpoint, read_checkpoint, write_checkpoint
from fvrans.errors import CaseError, DivergenceError
from fvrans.fv.boundary import boundary_face_values
from fvrans.mesh.geometry import Geometry, compute_geometry
from fvrans.mesh.locate import CellLocator
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.morph import topology_difference
from fvrans.physics.boundary import FlowBoundary, build_flow_boundary
from fvrans.physics.spalart_allmaras import eddy_viscosity as sa_eddy_viscosity
from fvrans.physics.spalart_allmaras import model_for_case
from fvrans.post import (
    PatchForces,
    WallData,
    all_wall_data,
    build_summary,
    forces_summary,
    inflow_reference,
    wall_columns,
    write_csv_atomic,
    write_json_atomic,
    write_residuals_csv,
    write_vtu_atomic,
)
from fvrans.post.probes import sample_line, write_probe_csv
from fvrans.post.wall import zero_shear_columns
from fvrans.solve.fields import Fields
from fvrans.solve.simple import History, SimpleSolver, SolverControls

log = logging.getLogger(__name__)

__all__ = ["Problem", "Reference", "Result", "apply_overrides", "case_from_dict", "load_case", "prepare",
           "reference_values", "solve"]


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
    #: stopped on request (a callback returning True, Ctrl-C, SIGTERM) before converging
    interrupted: bool = False
    #: velocity scale of the scaled residuals (kept in checkpoints)
    velocity_scale: float = 1.0
    #: outer iteration the fields belong to (one less than ``iterations`` after a divergence)
    fields_iteration: int | None = None

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
    def reference(self) -> Reference:
        """The reference values of the coefficients and forces of this run (:func:`reference_values`)."""
        return reference_values(self.problem)

    def walls(self) -> dict[str, WallData]:
        """Wall data (shear stress, Cf, Cp, y+) of every wall patch the output asks for."""
        if "walls" not in self.extra:
            c = self.case
            ref = self.reference()
            self.extra["walls"] = all_wall_data(
                self.mesh, self.problem.geom, self.problem.boundary, self.velocity, self.pressure,
                self.grad_p, c.fluid.density, c.fluid.viscosity, ref.velocity, c.output.reference_pressure,
                rho_ref=ref.density, patches=list(c.output.wall_patches),
            )
        return dict(self.extra["walls"])

    def forces(self) -> tuple[dict[str, PatchForces], dict[str, PatchForces]]:
        """Forces and moments of every reported wall patch and of every force group of the case
        (``output.force_groups``), in the frame of the free stream (:mod:`fvrans.post.forces`)."""
        ref = self.reference()
        o = self.case.output
        return forces_summary(self.walls(), o.reference_length, ref.direction, o.moment_centre, o.force_groups)

    def wall(self, patch: str) -> WallData:
        walls = self.walls()
        if patch not in walls:
            raise CaseError(f"{self.case.label}: {patch!r} is not a wall patch of this run; walls: {sorted(walls)}")
        return walls[patch]

    def summary(self) -> dict[str, Any]:
        """The content of summary.json."""
        extra = {"message": self.message} if self.message else {}
        extra["diverged"] = self.diverged
        extra["interrupted"] = self.interrupted
        extra.update(self.extra.get("summary", {}))
        if self.case.output.map_window is not None:
            extra["map_window"] = list(self.case.output.map_window)
        ref = self.reference()
        o = self.case.output
        return build_summary(
            self.case.title or self.case.label, self.converged, self.iterations, self.wall_seconds,
            self.mesh.n_cells, history=self.history, walls=self.walls(),
            l_ref=o.reference_length, flow_direction=ref.direction, extra=extra, moment_centre=o.moment_centre,
            groups=o.force_groups, reference_notes={"u_ref_from": ref.velocity_from, "flow_direction_from":
                                                    ref.direction_from},
        )

    # -- writing ----------------------------------------------------------------------------
    def cell_data(self) -> dict[str, np.ndarray]:
        d = {"velocity": self.velocity, "pressure": self.pressure}
        d.update(self.extra.get("cell_data", {}))
        return d

    def write(self, out_dir: str | Path) -> Path:
        """Write summary.json, fields.vtu, wall/<patch>.csv, wall/zero_shear/<patch>.csv,
        residuals.csv and profiles/<probe>.csv into ``out_dir`` (each file atomically)."""
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
            header, cols = zero_shear_columns(w)
            (out / "wall" / "zero_shear").mkdir(exist_ok=True)
            write_csv_atomic(out / "wall" / "zero_shear" / f"{name}.csv", header, cols)
        write_residuals_csv(out / "residuals.csv", self.history)
        if self.case.probes:
            (out / "profiles").mkdir(exist_ok=True)
        for name in self.case.probes:
            write_probe_csv(out / "profiles" / f"{name}.csv", self.probe(name))
        write_json_atomic(out / "summary.json", self.summary())
        return out

    # -- line probes ------------------------------------------------------------------------
    def sample_line(self, start: Any, end: Any, points: int = 101, name: str = "line") -> dict[str, np.ndarray]:
        """Fields along a segment: columns ``s`` (distance from start), ``x``, ``y``, ``u``, ``v``,
        ``p`` and, with Spalart-Allmaras, ``nu_tilde`` and ``nut_ratio`` (from the sampled nu_tilde).
        Each value is the containing cell's value plus its gradient times the offset from the
        cell centroid (:func:`fvrans.post.probes.sample_line`)."""
        values = {"u": self.velocity[:, 0], "v": self.velocity[:, 1], "p": self.pressure}
        if self.fields.nu_tilde is not None:
            values["nu_tilde"] = self.fields.nu_tilde
        if "locator" not in self.extra:
            self.extra["locator"] = CellLocator(self.mesh, centroids=self.problem.geom.cell_centre)
        cols = sample_line(self.extra["locator"], self.problem.geom.cell_centre, start, end, points, values,
                           self.extra.get("gradients", {}), name=name)
        if "nu_tilde" in cols:
            nu = self.case.fluid.kinematic_viscosity
            cols["nut_ratio"] = sa_eddy_viscosity(cols["nu_tilde"], nu) / nu
        return cols

    def probe(self, name: str) -> dict[str, np.ndarray]:
        """The columns of the case's line probe ``[probes.<name>]`` (see :meth:`sample_line`)."""
        if name not in self.case.probes:
            raise CaseError(f"{self.case.label}: no probe {name!r}; the case has "
                            f"{', '.join(repr(n) for n in self.case.probes) or 'none'} ([probes.<name>] tables)")
        pr = self.case.probes[name]
        return self.sample_line(pr.start, pr.end, pr.points, name=name)

    def write_checkpoint(self, path: str | Path) -> Path:
        """Save the state of this run to ``path`` (a ``.npz`` file, written atomically) so that
        ``solve(..., restart=path)`` or ``fvrans run --restart`` continues it."""
        n = self.iterations if self.fields_iteration is None else self.fields_iteration
        return write_checkpoint(
            path, self.fields, n, list(self.history.names), self.history.as_array()[:n],
            np.asarray(self.history.seconds[:n]), self.velocity_scale, self.case, self.mesh, self.grad_p,
        )


@dataclass(frozen=True)
class Reference:
    """Reference values of a run's coefficients: velocity U_ref, density, free-stream direction
    (unit vector) and where the velocity and direction came from (``"case"``, ``"freestream"``,
    ``"velocity-inlet"`` or ``"default"``)."""

    velocity: float
    density: float
    direction: tuple[float, float]
    velocity_from: str
    direction_from: str


def reference_values(problem: Problem) -> Reference:
    """The case's reference values, the missing ones taken from its inflow
    (:func:`fvrans.post.forces.inflow_reference`): U_ref the inflow's speed, the free-stream
    direction the inflow's; without an inflow U_ref = 1 and the direction +x."""
    o = problem.case.output
    inflow = inflow_reference(problem.geom, problem.boundary, problem.mesh.n_internal_faces)
    if o.reference_velocity is not None:
        u, u_from = float(o.reference_velocity), "case"
    elif inflow is not None:
        u, u_from = inflow.speed, inflow.source
    else:
        u, u_from = 1.0, "default"
    given = o.direction()
    if given is not None:
        e, e_from = given, "case"
    elif inflow is not None:
        e, e_from = inflow.direction, inflow.source
    else:
        e, e_from = (1.0, 0.0), "default"
    rho = problem.case.fluid.density if o.reference_density is None else float(o.reference_density)
    return Reference(u, rho, e, u_from, e_from)


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


def _gradients(solver: SimpleSolver, model: Any, grad_p: np.ndarray) -> dict[str, np.ndarray]:
    """Cell gradients of u, v, p (and nu_tilde) of the final state, for probes."""
    f = solver.fields
    ub = solver._velocity_on_boundary(f.velocity, f.face_flux[solver.ni:])
    gu = solver.grad(np.ascontiguousarray(f.velocity, dtype=float), ub)
    out = {"u": gu[:, 0, :].copy(), "v": gu[:, 1, :].copy(), "p": np.array(grad_p)}
    if model is not None and f.nu_tilde is not None:
        nt = np.ascontiguousarray(f.nu_tilde, dtype=float)
        nt_b = boundary_face_values(model.mesh, model.geom, model.bc, nt, model.grad_nt)
        out["nu_tilde"] = np.array(model.grad(nt, nt_b))
    return out


def solve(
    case: Case | Problem,
    initial: Result | Fields | None = None,
    callback: Callable[[int, list[float]], bool | None] | None = None,
    *,
    restart: Checkpoint | str | Path | None = None,
    checkpoint: str | Path | None = None,
) -> Result:
    """Solve a case (or a prepared Problem); ``initial`` warm-starts from a previous result on the
    same mesh or one of the same topology (a neighbouring design of a parametric generator with the
    same resolution, or a mesh morphed with :func:`fvrans.mesh.morph.morph`); a different cell or
    face count, or (for a Result) a different topology, raises CaseError. A diverging run returns
    a Result with ``diverged=True`` holding the last good state and the message; it does not raise.

    ``callback(iteration, residuals)`` is called after every outer iteration; returning True
    stops the run there (``interrupted=True`` unless it converged). ``restart``: a checkpoint
    (or its file, or a result folder holding ``checkpoint.npz``) to continue: fields, iteration
    count and residual history carry on; ``solver.max_iterations`` counts the new iterations.
    ``checkpoint``: a file to save the state to every ``solver.checkpoint_every`` iterations.
    """
    problem = case if isinstance(case, Problem) else prepare(case)
    c = problem.case
    controls = SolverControls.from_settings(c.solver)
    ckpt: Checkpoint | None = None
    if restart is not None:
        if initial is not None:
            raise CaseError(f"{c.label}: give a warm start (initial) or a checkpoint (restart), not both")
        ckpt = restart if isinstance(restart, Checkpoint) else read_checkpoint(restart)
        ckpt.check_matches(c, problem.mesh)
        initial = ckpt.fields
    fields = _initial_fields(problem, initial)
    model = model_for_case(c, problem.mesh, problem.geom, problem.boundary)
    solver = SimpleSolver(
        problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density, mu=c.fluid.viscosity,
        controls=controls, fields=fields, model=model,
    )
    if ckpt is not None:
        if list(ckpt.history_names) != list(solver.history.names):
            raise CaseError(f"{ckpt.source}: the checkpoint's residuals {ckpt.history_names} do not match this "
                            f"case's {solver.history.names}; restart with the settings of that run")
        solver.resume(ckpt.iteration, ckpt.history_rows, ckpt.history_seconds, ckpt.velocity_scale,
                      ckpt.pressure_gradient)
        log.info("%s: resuming at iteration %d from %s", c.label, ckpt.iteration, ckpt.source)
    every = c.solver.checkpoint_every
    stopped = False

    def step(it: int, res: list[float]) -> bool:
        nonlocal stopped
        if checkpoint is not None and every > 0 and it % every == 0:
            write_checkpoint(checkpoint, solver.fields, it, list(solver.history.names), solver.history.as_array(),
                             np.asarray(solver.history.seconds), solver.u_scale, c, problem.mesh, solver.grad_p)
            log.debug("checkpoint at iteration %d written to %s", it, checkpoint)
        if callback is not None and callback(it, res):
            stopped = True
        return stopped

    t0 = time.perf_counter()
    message = ""
    diverged = False
    fields_iteration = None
    try:
        converged = solver.run(callback=step)
    except DivergenceError as exc:
        converged = False
        diverged = True
        message = str(exc)
        fields_iteration = exc.iteration
        log.error("%s: %s", c.label, message)
    seconds = time.perf_counter() - t0
    grad_p = solver.grad_p
    if diverged:  # the gradient of the last good pressure
        grad_p = solver.grad_pressure(solver.fields.pressure, solver._pressure_on_boundary(grad_p))
    interrupted = stopped and not converged
    if interrupted:
        message = (f"interrupted at iteration {solver.iteration} before converging; continue with "
                   "restart= (fvrans run ... --restart DIR)")
    elif not converged and not diverged:
        message = (
            f"not converged after {solver.iteration} iterations (tolerance {controls.tolerance:g}); "
            "raise solver.max_iterations or restart from this result"
        )
    extra: dict[str, Any] = {"gradients": _gradients(solver, model, grad_p)}
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
        diverged=diverged, extra=extra, interrupted=interrupted, velocity_scale=solver.u_scale,
        fields_iteration=fields_iteration,
    )
