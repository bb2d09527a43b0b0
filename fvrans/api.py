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
from types import SimpleNamespace
from typing import Any

import numpy as np

from fvrans.case import Case, apply_overrides, case_from_dict, load_case
from fvrans.case.build import build_case_mesh
from fvrans.checkpoint import CHECKPOINT_NAME, Checkpoint, read_checkpoint, write_checkpoint
from fvrans.errors import CaseError, DivergenceError
from fvrans.fields import Fields
from fvrans.jit import CompileWatch
from fvrans.mesh.geometry import Geometry, compute_geometry
from fvrans.mesh.locate import CellLocator
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.morph import topology_difference
from fvrans.models import model_class, model_for_case, residual_names
from fvrans.models.base import TurbulenceModel, reynolds_stress
from fvrans.monitor import (
    MONITOR_CSV,
    FlowState,
    Monitor,
    case_monitor,
    derived_value,
    frozen_monitor,
    probe_stencils,
    sample_flow,
    speed_scale,
    stop_reason,
)
from fvrans.physics.boundary import FlowBoundary, build_flow_boundary
from fvrans.post import (
    PatchForces,
    WallData,
    all_wall_data,
    atomic_write,
    build_summary,
    forces_summary,
    wall_columns,
    write_csv_atomic,
    write_json_atomic,
    write_residuals_csv,
    write_vtu_atomic,
)
from fvrans.post.filenames import output_file
from fvrans.post.forces import ForceReference, case_reference
from fvrans.post.outputs import output_set
from fvrans.post.overlay import overlay_plots
from fvrans.post.probes import build_stencil, line_points, write_probe_csv
from fvrans.post.wall import zero_shear_columns
from fvrans.post.wall_resolution import WallResolution, wall_resolution
from fvrans.reference import FieldSource, cell_source, read_result_folder, read_source
from fvrans.reference import diagnostics as ref_diag
from fvrans.reference.cells import CellReference, reference_from_cells, reference_from_source
from fvrans.reference.features import feature_table, write_feature_table
from fvrans.solve.coupled import solver_class
from fvrans.solve.frozen import FrozenVelocitySolver
from fvrans.solve.simple import History, SimpleSolver, SolverControls

log = logging.getLogger(__name__)

#: sub-folder of a result folder holding the zero-shear points of each wall patch (one CSV each)
ZERO_SHEAR_FOLDER = "wall/zero_shear"

__all__ = [
    "Problem", "ForceReference", "Result", "apply_overrides", "build_monitor", "case_from_dict", "load_case",
    "load_reference", "overlay_plots", "prepare", "force_reference", "residual_names", "result_source", "solve",
    "start_fields",
]

#: the per-cell feature table a run writes with ``[reference] write_features`` (CSV and numpy archive)
FEATURES = "features"


#: the resolved case (every override applied, every default filled in) that ``fvrans run``
#: writes into a result folder; the "continue with" hint runs it
RESOLVED_CASE = "case.toml"


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
    #: the monitored quantities of every iteration and their stopping rule (None: not monitored)
    monitor: Monitor | None = None
    #: what ended the run, a key of :data:`fvrans.monitor.STOP_REASONS`
    stopped_by: str = ""
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
    def force_reference(self) -> ForceReference:
        """The reference values of the coefficients and forces of this run (:func:`force_reference`)."""
        return force_reference(self.problem)

    def walls(self) -> dict[str, WallData]:
        """Wall data (shear stress, Cf, Cp, y+) of every wall patch the output asks for."""
        if "walls" not in self.extra:
            c = self.case
            ref = self.force_reference()
            self.extra["walls"] = all_wall_data(
                self.mesh, self.problem.geom, self.problem.boundary, self.velocity, self.pressure,
                self.grad_p, c.fluid.density, c.fluid.viscosity, ref.velocity, c.output.reference_pressure,
                rho_ref=ref.density, patches=list(c.output.wall_patches),
            )
        return dict(self.extra["walls"])

    def forces(self) -> tuple[dict[str, PatchForces], dict[str, PatchForces]]:
        """Forces and moments of every reported wall patch and of every force group of the case
        (``output.force_groups``), in the frame of the free stream (:mod:`fvrans.post.forces`)."""
        ref = self.force_reference()
        o = self.case.output
        return forces_summary(self.walls(), o.reference_length, ref.direction, o.moment_centre, o.force_groups)

    def wall(self, patch: str) -> WallData:
        walls = self.walls()
        if patch not in walls:
            raise CaseError(f"{self.case.label}: {patch!r} is not a wall patch of this run; walls: {sorted(walls)}")
        return walls[patch]

    def wall_resolution(self) -> dict[str, WallResolution]:
        """First-cell y+ figures of each reported wall patch of a turbulent run
        (:mod:`fvrans.post.wall_resolution`); empty for a laminar run."""
        if not self.case.turbulent:
            return {}
        return {name: wall_resolution(w) for name, w in self.walls().items()}

    def warnings(self) -> list[str]:
        """What the run's outputs should be read with: wall patches too coarse for the model."""
        model = f"the {self.case.model.turbulence} model"
        return [text for r in self.wall_resolution().values() if (text := r.warning(model))]

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
        extra.update(self._monitor_summary())
        ref = self.force_reference()
        o = self.case.output
        return build_summary(
            self.case.title or self.case.label, self.converged, self.iterations, self.wall_seconds,
            self.mesh.n_cells, history=self.history, walls=self.walls(),
            l_ref=o.reference_length, flow_direction=ref.direction, extra=extra, moment_centre=o.moment_centre,
            groups=o.force_groups, reference_notes={"u_ref_from": ref.velocity_from, "flow_direction_from":
                                                    ref.direction_from},
        )

    def _monitor_summary(self) -> dict[str, Any]:
        """stopped_by, the stopping settings, the monitored quantities' estimates, point probes and
        derived scalars."""
        c = self.case
        out: dict[str, Any] = {}
        if self.stopped_by:
            out["stopped_by"] = self.stopped_by
        if self.monitor is not None:
            out["stopping"] = {
                "residual_tolerance": c.solver.tolerance, "settle": c.monitor.settle,
                "iteration_error": c.monitor.iteration_error, "window": c.monitor.window,
                "speed_scale": self.monitor.speed,
                "unsettled": [st.name for st in self.monitor.unsettled()],
            }
            out["monitors"] = self.monitor.summary()
        if c.point_probes:
            out["probes"] = {n: {k: float(v[0]) for k, v in self.probe(n).items()} for n in c.point_probes}
        if c.derived:
            out["derived"] = self.derived()
        resolution = self.wall_resolution()
        if resolution:
            out["wall_resolution"] = {n: r.as_dict() for n, r in resolution.items()}
        out["warnings"] = self.warnings()
        return out

    # -- writing ----------------------------------------------------------------------------
    def cell_data(self) -> dict[str, np.ndarray]:
        d = {"velocity": self.velocity, "pressure": self.pressure}
        d.update(self.extra.get("cell_data", {}))
        return d

    def write(self, out_dir: str | Path, checkpoint: bool = False, resolved_case: bool = False) -> Path:
        """Write summary.json, fields.vtu, wall/<patch>.csv, wall/zero_shear/<patch>.csv,
        residuals.csv, profiles/<probe>.csv
        (and checkpoint.npz when ``checkpoint``, case.toml, the resolved case, when
        ``resolved_case``) into ``out_dir`` as one set: written aside and put in place together,
        replacing the previous set of fvrans outputs there (its files the new set lacks are
        removed; :func:`fvrans.post.outputs.output_set`), so a reader never sees files of two runs."""
        out = Path(out_dir)
        walls = self.walls()
        summary = self.summary()
        case_text = self.case.to_toml() if resolved_case else None
        features = self.features() if self.case.reference.write_features else None
        n = self.iterations if self.fields_iteration is None else self.fields_iteration
        with output_set(out, iteration=n) as stage:
            # names from the mesh and the case become file names only through output_file
            if self.case.output.write_fields:
                write_vtu_atomic(stage / "fields.vtu", self.mesh, self.cell_data(), within=stage)
            if walls:
                (stage / "wall").mkdir()
            for name, w in walls.items():
                header, cols = wall_columns(w)
                path = output_file(stage, name, ".csv", subfolder="wall", what=f"wall patch {name!r}")
                write_csv_atomic(path, header, cols, within=stage)
                header, cols = zero_shear_columns(w)
                path = output_file(stage, name, ".csv", subfolder=ZERO_SHEAR_FOLDER, what=f"wall patch {name!r}")
                path.parent.mkdir(exist_ok=True)
                write_csv_atomic(path, header, cols, within=stage)
            write_residuals_csv(stage / "residuals.csv", self._finite_history(), within=stage)
            if self.monitor is not None and self.monitor.rows:
                header, cols = self.monitor.columns()
                write_csv_atomic(stage / MONITOR_CSV, header, cols, within=stage)
            if self.case.line_probes:
                (stage / "profiles").mkdir()
            for name in self.case.line_probes:
                path = output_file(stage, name, ".csv", subfolder="profiles", what=f"probe {name!r}")
                write_probe_csv(path, self.probe(name), within=stage)
            if checkpoint:
                self.write_checkpoint(stage / CHECKPOINT_NAME)
            if case_text is not None:
                atomic_write(stage / RESOLVED_CASE, lambda f: f.write(case_text), within=stage)
            if features is not None:
                write_feature_table(features, stage, FEATURES)
            write_json_atomic(stage / "summary.json", summary, within=stage)
        return out

    def _finite_history(self) -> Any:
        """The residual history without a diverged last iteration whose residuals are not finite
        (the outputs hold the last good state; the message says how the run ended)."""
        h = self.history
        rows = h.rows
        if self.diverged and rows and not np.all(np.isfinite(np.asarray(rows[-1], dtype=float))):
            n = len(rows) - 1
            return SimpleNamespace(names=h.names, rows=rows[:n], seconds=h.seconds[:n])
        return h

    # -- reference data -----------------------------------------------------------------------
    @property
    def reference(self) -> CellReference | None:
        """The run's reference flow on the cells (``[reference] data`` or ``solve(reference=...)``)."""
        return self.extra.get("reference")

    def velocity_gradient(self) -> np.ndarray:
        """The cell gradient of the final velocity, grad_u[c, i, j] = du_i/dx_j (n_cells, 2, 2)."""
        g = self.extra.get("gradients")
        if g is None:
            raise CaseError(f"{self.case.label}: this result carries no velocity gradients")
        return np.stack([g["u"], g["v"]], axis=1)

    def reynolds_stress(self) -> np.ndarray | None:
        """The model's Reynolds stress per unit mass (R_xx, R_xy, R_yy) per cell, None for laminar flow."""
        if self.model is None or not self.case.turbulent:
            return None
        return reynolds_stress(self.model, self.fields, self.velocity_gradient(), self.case.fluid.density)

    def features(self) -> dict[str, np.ndarray]:
        """The per-cell feature table for data-driven models (:func:`fvrans.reference.features.feature_table`):
        inputs from this run's velocity (the invariants and tensor basis of its strain and rotation rates,
        the wall distance), targets from the reference (anisotropy of its stresses; k from the reference,
        else from the run's model, else NaN)."""
        ref = self.reference
        if ref is None:
            raise CaseError(f"{self.case.label}: the feature table needs reference data with Reynolds stresses; "
                            "add [reference] data = ... (or pass reference= to fvrans.api.solve)")
        stress = ref.require_stress("the feature table ([reference] write_features)")
        n = self.mesh.n_cells
        k = ref.quantities.get("k", self.fields.variables.get("k"))
        k = np.full(n, np.nan) if k is None else np.asarray(k, dtype=float)
        if ref.quantities.get("k") is None:
            log.info("%s: the reference gives no k; the feature table takes %s", self.case.label,
                     "the model's k" if "k" in self.fields.variables else "NaN (no anisotropy targets)")
        wd = _wall_distance(self.problem, self.model)
        return feature_table(self.cell_centres, np.full(n, np.nan) if wd is None else wd, self.velocity_gradient(),
                             stress, k, epsilon=ref.quantities.get("epsilon"))

    # -- probes -----------------------------------------------------------------------------
    def flow_state(self) -> FlowState:
        """The final fields and their gradients, as the monitors read them each iteration."""
        if "flow_state" not in self.extra:
            grads = self.extra.get("gradients", {"p": self.grad_p})
            self.extra["flow_state"] = FlowState(self.velocity, self.pressure, self.grad_p, lambda: grads,
                                                 self.model, self.fields)
        return self.extra["flow_state"]

    def _locator(self) -> CellLocator:
        if "locator" not in self.extra:
            self.extra["locator"] = CellLocator(self.mesh, centroids=self.problem.geom.cell_centre)
        return self.extra["locator"]

    def sample_line(self, start: Any, end: Any, points: int = 101, name: str = "line") -> dict[str, np.ndarray]:
        """Fields along a segment: columns ``s`` (distance from start), ``x``, ``y``, ``u``, ``v``,
        ``p`` and the turbulence model's probe columns (Spalart-Allmaras: ``nu_tilde`` and
        ``eddy_viscosity_ratio``, the latter from the sampled nu_tilde). Each value is the average over
        the cells containing the point of the cell value plus its gradient times the offset from the
        cell centroid (:mod:`fvrans.post.probes`)."""
        pts = line_points(start, end, points)
        stencil = build_stencil(self._locator(), self.problem.geom.cell_centre, pts, name)
        cols = {"s": np.hypot(*(pts - pts[0]).T), "x": pts[:, 0], "y": pts[:, 1]}
        cols.update(sample_flow(stencil, self.flow_state()))
        return cols

    def sample_point(self, at: Any, name: str = "point") -> dict[str, float]:
        """Fields at a point: ``x``, ``y``, ``u``, ``v``, ``p`` and the model's probe columns, the
        average of the reconstructions of every cell containing the point."""
        stencil = build_stencil(self._locator(), self.problem.geom.cell_centre, np.asarray(at, dtype=float), name)
        cols = {"x": float(stencil.points[0, 0]), "y": float(stencil.points[0, 1])}
        cols.update({k: float(v[0]) for k, v in sample_flow(stencil, self.flow_state()).items()})
        return cols

    def probe(self, name: str) -> dict[str, np.ndarray]:
        """The columns of the case's probe ``[probes.<name>]``: a line probe's table (see
        :meth:`sample_line`), or a point probe's ``x``, ``y``, ``u``, ... as arrays of one value."""
        if name not in self.case.probes:
            raise CaseError(f"{self.case.label}: no probe {name!r}; the case has "
                            f"{', '.join(repr(n) for n in self.case.probes) or 'none'} ([probes.<name>] tables)")
        pr = self.case.probes[name]
        if name in self.case.point_probes:
            return {k: np.array([v]) for k, v in self.sample_point(pr.at, name).items()}
        return self.sample_line(pr.start, pr.end, pr.points, name=name)

    def derived(self) -> dict[str, float]:
        """The values of the case's derived scalars ``[derived.<name>]`` (NaN: undefined, e.g. no
        reattachment along the line)."""
        c = self.case
        if not c.derived:
            return {}
        names = [n for n in c.probes if any(n in d.probes for d in c.derived.values())]
        stencils = probe_stencils(c, self.mesh, self.problem.geom, names, self._locator())
        lines = {n: np.hypot(*(st.points - st.points[0]).T) for n, st in stencils.items()}
        state = self.flow_state()
        return {n: derived_value(d, stencils, lines, state) for n, d in c.derived.items()}

    def write_checkpoint(self, path: str | Path) -> Path:
        """Save the state of this run to ``path`` (a ``.npz`` file, written atomically) so that
        ``solve(..., restart=path)`` or ``fvrans run --restart`` continues it."""
        n = self.iterations if self.fields_iteration is None else self.fields_iteration
        return write_checkpoint(
            path, self.fields, n, list(self.history.names), self.history.as_array()[:n],
            np.asarray(self.history.seconds[:n]), self.velocity_scale, self.case, self.mesh, self.grad_p,
        )


def force_reference(problem: Problem) -> ForceReference:
    """The case's reference values, the missing ones taken from its inflow
    (:func:`fvrans.post.forces.case_reference`)."""
    c = problem.case
    return case_reference(c.output, c.fluid.density, problem.geom, problem.boundary, problem.mesh.n_internal_faces)


def result_source(result: Result) -> FieldSource:
    """The cell fields of a result (u, v, p and the turbulence model's variables, e.g. nu_tilde) as a
    :class:`~fvrans.reference.FieldSource`, to interpolate onto another mesh."""
    return cell_source(result.mesh, result.cell_centres, _result_values(result), f"the result of {result.case.label}")


def _result_values(result: Result) -> dict[str, np.ndarray]:
    """u, v, p, the model's variables and, for a turbulent run, its Reynolds stresses R_xx, R_xy, R_yy."""
    f = result.fields
    values = {"u": f.velocity[:, 0], "v": f.velocity[:, 1], "p": f.pressure, **f.variables}
    r = result.reynolds_stress() if "gradients" in result.extra else None
    if r is not None:
        values.update({"R_xx": r[:, 0], "R_xy": r[:, 1], "R_yy": r[:, 2]})
    return values


def load_reference(problem: Problem, reference: Any = None) -> CellReference | None:
    """The reference flow of a run on its cells (:mod:`fvrans.reference.cells`), or None.

    ``reference``: None (the case's ``[reference] data``, read with its ``names`` and ``outside``
    rule), a path (a CSV point cloud, a mesh file with data or a result folder), a
    :class:`~fvrans.reference.FieldSource`, a :class:`Result` (on the same mesh: its values, Reynolds
    stresses and face fluxes as they are; else interpolated), a mapping of per-cell arrays (``u``,
    ``v``, ``R_xx``, ... on this mesh) or a :class:`~fvrans.reference.cells.CellReference`."""
    c, mesh = problem.case, problem.mesh
    if reference is None:
        if c.reference.data is None:
            return None
        reference = c.reference.data
    if isinstance(reference, CellReference):
        if reference.n_cells != mesh.n_cells:
            raise CaseError(f"{c.label}: the reference holds {reference.n_cells} cells but the mesh has {mesh.n_cells}")
        return reference
    if isinstance(reference, Result):
        same = reference.mesh.n_cells == mesh.n_cells and topology_difference(reference.mesh, mesh) is None
        if same:
            return reference_from_cells(_result_values(reference), mesh.n_cells,
                                        f"the result of {reference.case.label}", face_flux=reference.fields.face_flux)
        reference = result_source(reference)
    if isinstance(reference, dict):
        return reference_from_cells(reference, mesh.n_cells)
    if isinstance(reference, (str, Path)):
        reference = read_source(reference, names=c.reference.names or None)
    if not isinstance(reference, FieldSource):
        raise CaseError(f"{c.label}: reference= takes a path, a FieldSource, a Result, per-cell arrays or a "
                        f"CellReference, not {type(reference).__name__}")
    ref = reference_from_source(reference, problem.geom.cell_centre, c.reference.outside)
    log.info("%s: reference %s: %s", c.label, ref.label, ref.report.get("coverage"))
    return ref


def _wall_distance(problem: Problem, model: TurbulenceModel | None) -> np.ndarray | None:
    """The cell wall distance (the model's, else measured), None without a wall patch."""
    d = getattr(model, "wall_distance", None)
    if d is None and getattr(model, "blend", None) is not None:
        d = getattr(model.blend, "wall_distance", None)
    if d is not None:
        return np.asarray(d)
    walls = [n for n, k in problem.boundary.patch_kind.items() if k == "wall"]
    if not walls:
        return None
    from fvrans.physics.wall_distance import cell_wall_distance

    return cell_wall_distance(problem.mesh, problem.geom, walls)


def _frozen_fields(fields: Fields, ref: CellReference, problem: Problem) -> Fields:
    """The start of an a-priori run: the reference velocity (and pressure and face fluxes when it
    has them) with the model variables of ``fields``."""
    nf = problem.mesh.n_faces
    p = ref.quantities.get("p")
    flux = ref.face_flux if ref.face_flux is not None and len(ref.face_flux) == nf else np.zeros(nf)
    return Fields(ref.velocity.copy(), fields.pressure.copy() if p is None else np.array(p, dtype=float),
                  np.array(flux, dtype=float), {k: np.array(v) for k, v in fields.variables.items()})


def _reference_comparison(problem: Problem, solver: SimpleSolver, model: TurbulenceModel, ref: CellReference,
                          frozen: bool) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    """Cell maps and the ``reference_comparison`` section of summary.json (:mod:`fvrans.reference.diagnostics`)."""
    c, geom = problem.case, problem.geom
    nu = c.fluid.kinematic_viscosity
    regions = c.reference.regions
    wd = _wall_distance(problem, model) if any(g.wall_distance is not None for g in regions.values()) else None
    try:
        masks = ref_diag.region_masks(geom.cell_centre, ref.inside, regions, wd)
    except ValueError as exc:
        raise CaseError(f"{c.label}: [reference.regions]: {exc}; remove wall_distance from the region") from None
    vol = geom.cell_area
    cells: dict[str, np.ndarray] = {}
    summary: dict[str, Any] = {"source": ref.label, "kind": ref.kind, "data": ref.report,
                               "regions": {n: {"cells": int(m.sum())} for n, m in masks.items()}}
    if not frozen:
        err, figures = ref_diag.velocity_error(solver.fields.velocity, ref.velocity, vol, masks)
        cells[ref_diag.VELOCITY_ERROR] = err
        summary["velocity_error"] = figures
    if ref.stress is not None:
        g_ref = solver.velocity_gradient(ref.velocity, ref.face_flux)
        maps = ref_diag.stress_maps(g_ref, ref.stress, nu)
        cells.update(maps)
        if c.turbulent and not model.uses_reference:  # (a model of the reference itself is not compared)
            f = solver.fields
            gu = g_ref if frozen else solver.velocity_gradient(f.velocity, f.face_flux)
            mu_t = model.eddy_viscosity(f)
            nu_model = np.zeros(len(vol)) if mu_t is None else np.asarray(mu_t) / c.fluid.density
            dep_cells, dep = ref_diag.model_departure(nu_model, maps[ref_diag.OPTIMAL_RATIO] * nu,
                                                      reynolds_stress(model, f, gu, c.fluid.density), ref.stress,
                                                      vol, masks)
            cells.update(dep_cells)
            summary["model"] = {"name": c.model.turbulence, **dep}
    return cells, summary


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
    variables = [v for v in model_class(c.model.turbulence).variables_for(c) if v in source]
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


def _mean_flow_summary(solver: SimpleSolver) -> dict[str, Any]:
    """The mean pressure gradient that drives a periodic flow and its bulk (volume-mean) velocity."""
    vol = solver.geom.cell_area
    bulk = vol @ solver.fields.velocity / vol.sum()
    g = -(vol @ solver.body) / vol.sum()
    return {"mean_flow": {"pressure_gradient": [float(g[0]), float(g[1])],
                          "bulk_velocity": [float(bulk[0]), float(bulk[1])]}}


def _gradients(solver: SimpleSolver, grad_p: np.ndarray) -> dict[str, np.ndarray]:
    """Cell gradients of u, v, p of the final state, for probes."""
    f = solver.fields
    ub = solver._velocity_on_boundary(f.velocity, f.face_flux[solver.ni:])
    gu = solver.grad(np.ascontiguousarray(f.velocity, dtype=float), ub)
    return {"u": gu[:, 0, :].copy(), "v": gu[:, 1, :].copy(), "p": np.array(grad_p)}


def _last_good_gradient(solver: SimpleSolver, grad_p: np.ndarray) -> np.ndarray:
    """The pressure gradient of the last good state after a divergence. The boundary pressures it
    needs are extrapolated with a gradient: the diverged iteration's may be non-finite (a
    divergence at iteration 1 leaves the initial state), so start from zero where it is not
    finite and refine twice; a gradient that stays non-finite is zero (a uniform start)."""
    p = solver.fields.pressure
    g = np.where(np.isfinite(grad_p), grad_p, 0.0)
    for _ in range(2):
        g = np.array(solver.grad_pressure(p, solver._pressure_on_boundary(g)))
    return g if np.all(np.isfinite(g)) else np.zeros_like(g)


def build_monitor(problem: Problem, initial: Result | Fields | None = None) -> Monitor:
    """The monitor of a prepared case (its wall forces, point probes, derived scalars and the
    velocity change; :mod:`fvrans.monitor`); pass it to :func:`solve` to read it while the run goes."""
    c = problem.case
    start = (initial.fields if isinstance(initial, Result) else initial)
    u0 = start.velocity if start is not None else np.asarray(c.initial.velocity, dtype=float)
    speed = speed_scale(problem.boundary, u0)
    if c.reference.freeze_velocity:  # an a-priori run: only the model's variables move
        return frozen_monitor(c, model_class(c.model.turbulence).variables_for(c), speed)
    return case_monitor(c, problem.mesh, problem.geom, problem.boundary, speed)


def _flow_state(solver: SimpleSolver, model: TurbulenceModel) -> FlowState:
    f = solver.fields
    return FlowState(f.velocity, f.pressure, solver.grad_p, lambda: _gradients(solver, solver.grad_p), model, f)


def solve(
    case: Case | Problem,
    initial: Result | Fields | FieldSource | str | Path | None = None,
    callback: Callable[[int, list[float]], bool | None] | None = None,
    *,
    restart: Checkpoint | str | Path | None = None,
    checkpoint: str | Path | None = None,
    monitor: Monitor | None = None,
    reference: Any = None,
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
    ``monitor``: the run's :class:`fvrans.monitor.Monitor` (default: :func:`build_monitor`), which
    records the watched quantities after every iteration and, with ``monitor.settle``, holds the
    run until they have settled (``Result.stopped_by`` says what ended the run).

    ``reference``: the run's reference flow (default: the case's ``[reference] data``; see
    :func:`load_reference` for what it takes). With one, the run compares itself with it
    (fields.vtu maps and ``reference_comparison`` in summary.json, :mod:`fvrans.reference.diagnostics`);
    ``model.turbulence = "reference-stress"`` injects its Reynolds stresses (:mod:`fvrans.models.injected`);
    ``[reference] freeze_velocity`` makes the run an a-priori test of the model (only its equations,
    on the reference velocity: :mod:`fvrans.solve.frozen`); ``[reference] write_features`` writes the
    feature table (:meth:`Result.features`).
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
    ref = load_reference(problem, reference)
    frozen = c.reference.freeze_velocity
    if frozen:
        if ref is None:
            raise CaseError(f"{c.label}: reference.freeze_velocity: an a-priori run needs the reference velocity; add "
                            "[reference] data = ... (or pass reference= to fvrans.api.solve)")
        fields = _frozen_fields(fields, ref, problem)
    model = model_for_case(c, problem.mesh, problem.geom, problem.boundary, reference=ref)
    mf = c.mean_flow
    solver = (FrozenVelocitySolver if frozen else solver_class(c.solver.coupling))(
        problem.mesh, problem.geom, problem.boundary, rho=c.fluid.density, mu=c.fluid.viscosity,
        controls=controls, fields=fields, model=model,
        body_force=None if mf.pressure_gradient is None else -np.asarray(mf.pressure_gradient, dtype=float),
        bulk_velocity=mf.bulk_velocity,
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
    if monitor is None:
        monitor = build_monitor(problem, initial)
    monitor.state = lambda: _flow_state(solver, model)

    def step(it: int, res: list[float]) -> bool:
        nonlocal stopped
        monitor.callback(it, res)
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
            converged = solver.run(callback=step, converged_when=monitor.converged_when)
    except DivergenceError as exc:
        converged = False
        diverged = True
        message = str(exc)
        fields_iteration = exc.iteration
        log.error("%s: %s", c.label, message)
    seconds = time.perf_counter() - t0
    solver.release_work()  # the outputs below need none of the linear solvers' memory
    grad_p = solver.grad_p
    if diverged:
        grad_p = _last_good_gradient(solver, grad_p)
    interrupted = stopped and not converged
    if interrupted:
        message = (f"interrupted at iteration {solver.iteration} before converging; continue with "
                   "restart= (fvrans run ... --restart DIR)")
    elif not converged and not diverged:
        waiting = monitor.unsettled() if solver.history.rows and max(solver.history.rows[-1]) < controls.tolerance \
            else []
        why = (f"every residual is below {controls.tolerance:g} but " + ", ".join(
            f"{st.name} (estimated iteration error {st.error:.2g} > {st.allowed:.2g})" for st in waiting[:3])
            + (" has" if len(waiting) == 1 else " have") + " not settled" if waiting
            else f"tolerance {controls.tolerance:g}")
        message = (
            f"not converged after {solver.iteration} iterations ({why}); "
            "raise solver.max_iterations or restart from this result"
        )
    extra: dict[str, Any] = {
        "summary": _mean_flow_summary(solver) if mf.active else {},
        "gradients": _gradients(solver, grad_p),
        "cell_data": model.cell_outputs(solver.fields),
    }
    if start is not None:
        extra["summary"]["start"] = start
    if c.turbulent:
        gu = np.stack([extra["gradients"]["u"], extra["gradients"]["v"]], axis=1)
        r = reynolds_stress(model, solver.fields, gu, c.fluid.density)
        extra["cell_data"].update({"R_xx": r[:, 0], "R_xy": r[:, 1], "R_yy": r[:, 2]})
    if ref is not None:
        extra["reference"] = ref
        cells, comparison = _reference_comparison(problem, solver, model, ref, frozen)
        extra["cell_data"].update(cells)
        extra["summary"]["reference_comparison"] = comparison
        if frozen:
            comparison["a_priori"] = {"frozen_face_fluxes": "the reference's own" if ref.face_flux is not None
                                      else "interpolated from the reference velocity"}
    result = Result(
        problem=problem, fields=solver.fields, history=solver.history, converged=bool(converged),
        iterations=solver.iteration, wall_seconds=seconds, grad_p=grad_p, message=message,
        diverged=diverged, extra=extra, interrupted=interrupted, velocity_scale=solver.u_scale,
        fields_iteration=fields_iteration, model=model, compile_seconds=watch.seconds, monitor=monitor,
        stopped_by=stop_reason(bool(converged), diverged, interrupted, c.monitor.settle),
    )
    if not diverged:
        for text in result.warnings():
            log.warning("%s: %s", c.label, text)
    return result
