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
from fvrans.fields import Fields
from fvrans.jit import CompileWatch
from fvrans.mesh.geometry import Geometry, compute_geometry
from fvrans.mesh.locate import CellLocator
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.morph import topology_difference
from fvrans.models import model_class, model_for_case, residual_names
from fvrans.models.base import TurbulenceModel
from fvrans.physics.boundary import FlowBoundary, build_flow_boundary
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
from fvrans.post.filenames import output_file
from fvrans.post.probes import sample_line, write_probe_csv
from fvrans.post.wall import zero_shear_columns
from fvrans.reference import FieldSource, cell_source, read_result_folder
from fvrans.solve.simple import History, SimpleSolver, SolverControls

log = logging.getLogger(__name__)

#: sub-folder of a result folder holding the zero-shear points of each wall patch (one CSV each)
ZERO_SHEAR_FOLDER = "wall/zero_shear"

__all__ = [
    "Problem", "Reference", "Result", "apply_overrides", "case_from_dict", "load_case", "prepare",
    "reference_values", "residual_names", "result_source", "solve", "start_fields",
]


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
    #: velocity scale of the divergence guard (kept in checkpoints)
    velocity_scale: float = 1.0
    #: outer iteration the fields belong to (one less than ``iterations`` after a divergence)
    fields_iteration: int | None = None
    #: the turbulence model of the run (its outputs and probe columns); None: none recorded
    model: TurbulenceModel | None = None
    #: seconds of ``wall_seconds`` spent compiling kernels (0 with a warm numba cache)
    compile_seconds: float = 0.0

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
        """Normalised imbalances per iteration, columns named by ``history.names``."""
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
        extra["compile_seconds"] = self.compile_seconds
        extra["solve_seconds"] = max(self.wall_seconds - self.compile_seconds, 0.0)
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
        walls = self.walls()
        # names from the mesh and the case become file names only through output_file
        wall_files = {n: output_file(out, n, ".csv", subfolder="wall", what=f"wall patch {n!r}") for n in walls}
        zero_shear_files = {n: output_file(out, n, ".csv", subfolder=ZERO_SHEAR_FOLDER, what=f"wall patch {n!r}")
                            for n in walls}
        probe_files = {n: output_file(out, n, ".csv", subfolder="profiles", what=f"probe {n!r}")
                       for n in self.case.probes}
        if self.case.output.write_fields:
            write_vtu_atomic(out / "fields.vtu", self.mesh, self.cell_data(), within=out)
        if walls:
            (out / "wall").mkdir(exist_ok=True)
        for name, w in walls.items():
            header, cols = wall_columns(w)
            write_csv_atomic(wall_files[name], header, cols, within=out)
            header, cols = zero_shear_columns(w)
            zero_shear_files[name].parent.mkdir(exist_ok=True)
            write_csv_atomic(zero_shear_files[name], header, cols, within=out)
        write_residuals_csv(out / "residuals.csv", self.history, within=out)
        if self.case.probes:
            (out / "profiles").mkdir(exist_ok=True)
        for name, path in probe_files.items():
            write_probe_csv(path, self.probe(name), within=out)
        write_json_atomic(out / "summary.json", self.summary(), within=out)
        return out

    # -- line probes ------------------------------------------------------------------------
    def sample_line(self, start: Any, end: Any, points: int = 101, name: str = "line") -> dict[str, np.ndarray]:
        """Fields along a segment: columns ``s`` (distance from start), ``x``, ``y``, ``u``, ``v``,
        ``p`` and the turbulence model's probe columns (Spalart-Allmaras: ``nu_tilde`` and
        ``eddy_viscosity_ratio``, the latter from the sampled nu_tilde). Each value is the containing cell's
        value plus its gradient times the offset from the cell centroid
        (:func:`fvrans.post.probes.sample_line`)."""
        values = {"u": self.velocity[:, 0], "v": self.velocity[:, 1], "p": self.pressure}
        gradients = dict(self.extra.get("gradients", {}))
        if "probe_fields" not in self.extra and self.model is not None:
            self.extra["probe_fields"] = self.model.probe_fields(self.fields)
        for key, (v, g) in self.extra.get("probe_fields", {}).items():
            values[key] = v
            if g is not None:
                gradients[key] = g
        if "locator" not in self.extra:
            self.extra["locator"] = CellLocator(self.mesh, centroids=self.problem.geom.cell_centre)
        cols = sample_line(self.extra["locator"], self.problem.geom.cell_centre, start, end, points, values,
                           gradients, name=name)
        if self.model is not None:
            cols.update(self.model.probe_columns(cols))
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
    (unit vector) and where the velocity and direction came from (``"case"``, ``"outer-flow"``,
    ``"inflow-velocity"`` or ``"default"``)."""

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


def result_source(result: Result) -> FieldSource:
    """The cell fields of a result (u, v, p and the turbulence model's variables, e.g. nu_tilde) as a
    :class:`~fvrans.reference.FieldSource`, to interpolate onto another mesh."""
    f = result.fields
    values = {"u": f.velocity[:, 0], "v": f.velocity[:, 1], "p": f.pressure, **f.variables}
    return cell_source(result.mesh, result.cell_centres, values, f"the result of {result.case.label}")


def _interpolated_start(problem: Problem, source: FieldSource) -> tuple[Fields, dict[str, Any]]:
    """The velocity and the case's model variables (those the source has, e.g. nu_tilde) of
    ``source`` at the cell centres: linear, the nearest value outside its data. The pressure starts
    uniform at initial.pressure and the face fluxes at zero, so the solver rebuilds them from the
    velocity; a variable the source lacks starts as the model starts it (initial.nu_tilde_ratio).

    The pressure is not carried over: with SIMPLEC the first pressure correction rebuilds it from the
    velocity, consistent with the new grid, and an interpolated one slowed the convergence on the
    laminar cases (coarse-to-fine laminar bump, Re_h 100, to 1e-7: 180 iterations with it, 137
    without, 143 from the uniform start; DEVELOPERS.md has the table)."""
    c, mesh = problem.case, problem.mesh
    variables = [v for v in model_class(c.model.turbulence).variables if v in source]
    wanted = ["u", "v", *variables]
    got = source.interpolate(problem.geom.cell_centre, wanted, outside="nearest", estimate_error=False,
                             target_label="cell")
    fields = Fields(np.column_stack([got["u"], got["v"]]), np.full(mesh.n_cells, float(c.initial.pressure)),
                    np.zeros(mesh.n_faces), {v: got[v].copy() for v in variables})
    cov = got.coverage[0]
    log.info("%s: start interpolated from %s: %s", c.label, source.label, cov)
    report = {"from": source.label, "kind": source.kind, "quantities": wanted,
              "cells_inside_data": cov.inside_share, "cells_nearest_value": cov.nearest,
              "distance_max": cov.distance_max_outside}
    return fields, report


def start_fields(problem: Problem, initial: Result | Fields | FieldSource | str | Path | None
                    ) -> tuple[Fields, dict[str, Any] | None]:
    """The fields a run of ``problem`` starts from (see :func:`solve` for ``initial``) and, for a start
    interpolated from elsewhere, what summary.json records about it under ``start`` (else None)."""
    mesh = problem.mesh
    c = problem.case
    if initial is None and c.initial.from_result is not None:
        initial = c.initial.from_result
    if initial is None:
        return Fields.uniform(mesh.n_cells, mesh.n_faces, c.initial.velocity, c.initial.pressure), None
    if isinstance(initial, (str, Path)):
        initial = read_result_folder(initial)
    if isinstance(initial, FieldSource):
        return _interpolated_start(problem, initial)
    fields = initial.fields if isinstance(initial, Result) else initial
    same_size = fields.velocity.shape[0] == mesh.n_cells and fields.face_flux.shape[0] == mesh.n_faces
    if isinstance(initial, Result) and (not same_size or topology_difference(initial.mesh, mesh) is not None):
        return _interpolated_start(problem, result_source(initial))
    if not same_size:
        raise CaseError(
            f"{problem.case.label}: the warm start has {fields.velocity.shape[0]} cells and "
            f"{fields.face_flux.shape[0]} faces but the mesh has {mesh.n_cells} and {mesh.n_faces}; "
            "bare Fields need the same mesh: pass the Result (its mesh tells where the values are) to "
            "interpolate them onto this one"
        )
    return fields.copy(), None


def _gradients(solver: SimpleSolver, grad_p: np.ndarray) -> dict[str, np.ndarray]:
    """Cell gradients of u, v, p of the final state, for probes."""
    f = solver.fields
    ub = solver._velocity_on_boundary(f.velocity, f.face_flux[solver.ni:])
    gu = solver.grad(np.ascontiguousarray(f.velocity, dtype=float), ub)
    return {"u": gu[:, 0, :].copy(), "v": gu[:, 1, :].copy(), "p": np.array(grad_p)}


def solve(
    case: Case | Problem,
    initial: Result | Fields | FieldSource | str | Path | None = None,
    callback: Callable[[int, list[float]], bool | None] | None = None,
    *,
    restart: Checkpoint | str | Path | None = None,
    checkpoint: str | Path | None = None,
) -> Result:
    """Solve a case (or a prepared Problem). A diverging run returns a Result with ``diverged=True``
    holding the last good state and the message; it does not raise.

    ``initial``: where the iterations start (default: the case's ``[initial]``, uniform values or
    ``from_result``). A Result on the same mesh or one of the same topology (a neighbouring design
    of a parametric generator with the same resolution, or a mesh morphed with
    :func:`fvrans.mesh.morph.morph`) is copied as it is (fields and face fluxes). A Result on
    another mesh, a result folder (path) or a :class:`~fvrans.reference.FieldSource` is
    interpolated onto the cells (:mod:`fvrans.reference`: linear, the nearest value outside its
    data): the velocity and the model's variables (nu_tilde) the source has; the pressure starts uniform at
    ``initial.pressure`` and the face fluxes are rebuilt from the velocity;
    summary.json then records the source and its coverage under ``start``. Bare Fields must
    match the mesh in size.

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
    fields, start = start_fields(problem, initial)
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
    watch = CompileWatch()
    try:
        with watch:
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
    extra: dict[str, Any] = {
        "gradients": _gradients(solver, grad_p),
        "cell_data": model.cell_outputs(solver.fields),
    }
    if start is not None:
        extra["summary"] = {"start": start}
    return Result(
        problem=problem, fields=solver.fields, history=solver.history, converged=bool(converged),
        iterations=solver.iteration, wall_seconds=seconds, grad_p=grad_p, message=message,
        diverged=diverged, extra=extra, interrupted=interrupted, velocity_scale=solver.u_scale,
        fields_iteration=fields_iteration, model=model, compile_seconds=watch.seconds,
    )
