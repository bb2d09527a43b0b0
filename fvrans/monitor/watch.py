"""The quantities watched every iteration, each a few columns of the monitor history.

* :class:`VelocityChange`: the largest change of any cell velocity in the last iteration,
  max_c |u_c^n - u_c^{n-1}| / U (U the run's speed scale); its iteration error bounds the error
  of the whole velocity field (max norm), which no single probe or force does.
* :class:`WallForces`: drag and lift coefficients of each reported wall patch
  (:func:`force_coefficients`).
* :class:`PointProbes`: u, v, p at each point probe (:mod:`fvrans.post.probes`: the average of
  the reconstructions of every cell containing the point).
* :class:`DerivedScalars`: differences of point-probe values and recirculation lengths along
  line probes (:mod:`fvrans.post.derived`).

Each watch gives its column names, the values of a :class:`FlowState`, and the scale of each
column, against which the allowed iteration error is measured (see :mod:`fvrans.monitor.monitor`).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np

from fvrans.case.schema import Case, DerivedScalar
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.fv.wall_gradient import WallGradient
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.locate import CellLocator, line_points
from fvrans.mesh.mesh import Mesh
from fvrans.models.base import EDDY_VISCOSITY_RATIO, TurbulenceModel
from fvrans.physics.boundary import FlowBoundary
from fvrans.post.derived import first_rise_through_zero
from fvrans.post.filenames import safe_file_name
from fvrans.post.forces import case_reference, patch_forces
from fvrans.post.probes import Stencil, build_stencil
from fvrans.post.wall import PatchOrder, order_patch_faces, wall_data, wall_gradient_operator

#: the coefficients of each wall patch that are watched
FORCE_COLUMNS = ("Cd", "Cl")
#: the point-probe values that are watched (all of :data:`fvrans.case.validate.PROBE_QUANTITIES`
#: are reported at the end)
WATCHED_PROBE_VALUES = ("u", "v", "p")


@dataclass
class FlowState:
    """What the monitors read after an iteration: cell velocity (nc, 2), pressure (nc,) and its
    gradient (nc, 2); ``gradient_function()`` gives the cell gradients of ``u``, ``v``, ``p``;
    ``model`` and ``fields`` give the turbulence model's probe fields
    (:meth:`fvrans.models.base.TurbulenceModel.probe_fields`). Gradients and model fields are
    computed only when a probe asks for them, once per state."""

    velocity: np.ndarray
    pressure: np.ndarray
    grad_p: np.ndarray
    gradient_function: Callable[[], Mapping[str, np.ndarray]] | None = None
    model: TurbulenceModel | None = None
    fields: Fields | None = None
    _gradients: Mapping[str, np.ndarray] | None = field(default=None, repr=False)
    _model_fields: dict[str, tuple[np.ndarray, np.ndarray | None]] | None = field(default=None, repr=False)

    def cell_values(self) -> dict[str, np.ndarray]:
        return {"u": self.velocity[:, 0], "v": self.velocity[:, 1], "p": self.pressure}

    def gradients(self) -> Mapping[str, np.ndarray]:
        if self._gradients is None:
            self._gradients = self.gradient_function() if self.gradient_function is not None else {"p": self.grad_p}
        return self._gradients

    def model_fields(self) -> dict[str, tuple[np.ndarray, np.ndarray | None]]:
        """The model's probe fields with their gradients ({} for laminar flow)."""
        if self._model_fields is None:
            self._model_fields = {} if self.model is None or self.fields is None else \
                self.model.probe_fields(self.fields)
        return self._model_fields


FLOW_QUANTITIES = ("u", "v", "p")


def sample_flow(stencil: Stencil, state: FlowState, quantities: Sequence[str] | None = None) -> dict[str, np.ndarray]:
    """u, v, p and the turbulence model's probe columns (Spalart-Allmaras: nu_tilde and
    eddy_viscosity_ratio) at the stencil's points; ``quantities`` restricts the columns (the model's
    fields are sampled only when one of them is asked for)."""
    values = state.cell_values()
    grads = state.gradients()
    want = None if quantities is None else list(quantities)
    out = {q: stencil.sample(values[q], grads.get(q)) for q in FLOW_QUANTITIES if want is None or q in want}
    if state.model is not None and (want is None or any(q not in FLOW_QUANTITIES for q in want)):
        sampled = {k: stencil.sample(v, g) for k, (v, g) in state.model_fields().items()}
        out.update(sampled)
        out.update(state.model.probe_columns(sampled))
    if want is None:
        return out
    missing = [q for q in want if q not in out]
    if missing:
        raise CaseError(f"no probe quantity {missing[0]!r} in this run; it has {', '.join(out) or 'none'}")
    return {q: out[q] for q in want}


def force_coefficients(
    mesh: Mesh, geom: Geometry, boundary: FlowBoundary, case: Case, patches: Sequence[str],
    velocity: np.ndarray, pressure: np.ndarray, grad_p: np.ndarray,
    orders: Mapping[str, PatchOrder] | None = None,
    gradients: Mapping[str, WallGradient] | None = None,
) -> dict[str, dict[str, float]]:
    """Force coefficients (:meth:`fvrans.post.forces.PatchForces.coefficients`) of each wall patch,
    with the run's reference values and free-stream direction (as summary.json has them,
    :func:`fvrans.post.forces.case_reference`); ``orders`` and ``gradients``: the patches' face
    orders and wall-gradient operators, built once (they cost more than the forces)."""
    c = case
    ref = case_reference(c.output, c.fluid.density, geom, boundary, mesh.n_internal_faces)
    out = {}
    for name in patches:
        w = wall_data(mesh, geom, boundary, name, velocity, pressure, grad_p, c.fluid.density, c.fluid.viscosity,
                      ref.velocity, c.output.reference_pressure, rho_ref=ref.density,
                      order=None if orders is None else orders.get(name),
                      gradient=None if gradients is None else gradients.get(name))
        out[name] = patch_forces(w, c.output.reference_length, ref.direction, c.output.moment_centre).coefficients()
    return out


class Watch:
    """A group of watched columns."""

    columns: list[str]
    #: True when the column values are already changes per iteration (not to be differenced)
    is_change: bool = False

    def values(self, state: FlowState) -> list[float]:
        raise NotImplementedError

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        """Scale of each column: the allowed iteration error is the tolerance times this."""
        raise NotImplementedError


class VelocityChange(Watch):
    """max over cells of |u^n - u^{n-1}| / U."""

    is_change = True

    def __init__(self, speed: float):
        self.columns = ["velocity_change"]
        self.speed = float(speed)
        self.previous: np.ndarray | None = None

    def values(self, state: FlowState) -> list[float]:
        u = state.velocity
        prev, self.previous = self.previous, u.copy()
        if prev is None or prev.shape != u.shape:
            return [float("nan")]
        return [float(np.max(np.abs(u - prev), initial=0.0)) / self.speed]

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        return [1.0]


class VariableChange(Watch):
    """max over cells of |phi^n - phi^{n-1}| / max |phi^n| for each of a model's transported variables
    (the watched quantity of an a-priori run, where the velocity is frozen); ``floors``: a smallest
    scale per variable (e.g. nu for nu_tilde)."""

    is_change = True

    def __init__(self, variables: Sequence[str], floors: Mapping[str, float] | None = None):
        self.variables = list(variables)
        self.floors = dict(floors or {})
        self.columns = [f"{v}_change" for v in self.variables]
        self.previous: dict[str, np.ndarray] = {}

    def values(self, state: FlowState) -> list[float]:
        out = []
        have = state.fields.variables if state.fields is not None else {}
        for v in self.variables:
            phi = np.asarray(have.get(v, np.zeros(0)), dtype=float)
            prev = self.previous.get(v)
            self.previous[v] = phi.copy()
            if prev is None or prev.shape != phi.shape or not len(phi):
                out.append(float("nan"))
                continue
            scale = max(float(np.max(np.abs(phi))), self.floors.get(v, 0.0), 1e-300)
            out.append(float(np.max(np.abs(phi - prev))) / scale)
        return out

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        return [1.0] * len(self.variables)


class WallForces(Watch):
    """Drag and lift coefficients per wall patch; both scaled by the size of the patch's
    coefficient vector (so lift on a symmetric body, near zero, is judged against the drag)."""

    def __init__(self, mesh: Mesh, geom: Geometry, boundary: FlowBoundary, case: Case, patches: Sequence[str]):
        self.args = (mesh, geom, boundary, case, list(patches))
        self.orders = {p: order_patch_faces(mesh, geom, p) for p in patches}
        self.gradients = {p: wall_gradient_operator(mesh, geom, boundary, mesh.patch(p).start + o.faces)
                          for p, o in self.orders.items()}
        # patch names come from mesh files: in column names they take the form of their file names
        # (wall/<name>.csv), which holds no comma, quote or line break
        self.columns = [f"{safe_file_name(p, f'wall patch {p!r}')}.{k}" for p in patches for k in FORCE_COLUMNS]

    def values(self, state: FlowState) -> list[float]:
        co = force_coefficients(*self.args, state.velocity, state.pressure, state.grad_p, self.orders, self.gradients)
        return [co[p][k] for p in self.args[4] for k in FORCE_COLUMNS]

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        n = len(FORCE_COLUMNS)
        out = []
        for i in range(0, len(values), n):
            size = float(np.hypot(*values[i:i + 2])) if n >= 2 else abs(values[i])
            out += [size] * n
        return out


def _pressure_scale(case: Case, speed: float) -> float:
    return 0.5 * case.fluid.density * speed**2


def _quantity_scale(q: str, case: Case, speed: float, value: float) -> float:
    """U for u, v; 1/2 rho U^2 for p; for a turbulence quantity its own size, at least nu for a
    viscosity-like variable (nu_tilde) and 1 for a ratio."""
    if q == "p":
        return _pressure_scale(case, speed)
    if q in ("u", "v"):
        return speed
    if q == EDDY_VISCOSITY_RATIO:
        return max(abs(value), 1.0)
    return max(abs(value), case.fluid.kinematic_viscosity)


class PointProbes(Watch):
    """u, v, p at each point probe."""

    def __init__(self, case: Case, stencils: Mapping[str, Stencil]):
        self.case = case
        self.stencils = dict(stencils)
        self.columns = [f"{n}.{q}" for n in self.stencils for q in WATCHED_PROBE_VALUES]

    def values(self, state: FlowState) -> list[float]:
        out: list[float] = []
        for st in self.stencils.values():
            cols = sample_flow(st, state, WATCHED_PROBE_VALUES)
            out += [float(cols[q][0]) for q in WATCHED_PROBE_VALUES]
        return out

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        qs = [q for _ in self.stencils for q in WATCHED_PROBE_VALUES]
        return [_quantity_scale(q, self.case, speed, v) for q, v in zip(qs, values)]


def derived_value(d: DerivedScalar, stencils: Mapping[str, Stencil], lines: Mapping[str, np.ndarray],
                  state: FlowState) -> float:
    """The value of a derived scalar (``lines``: the arc length s of each line probe's points)."""
    if d.kind == "difference":
        a, b = (float(sample_flow(stencils[n], state, [d.quantity])[d.quantity][0]) for n in d.probes)
        return a - b
    line = d.probes[0]
    return first_rise_through_zero(lines[line], sample_flow(stencils[line], state, [d.quantity])[d.quantity])


class DerivedScalars(Watch):
    """The case's ``[derived.<name>]`` scalars."""

    def __init__(self, case: Case, stencils: Mapping[str, Stencil]):
        self.case = case
        self.stencils = dict(stencils)
        self.lines = {n: np.hypot(*(st.points - st.points[0]).T) for n, st in self.stencils.items()
                      if len(st.points) > 1}
        self.columns = list(case.derived)

    def values(self, state: FlowState) -> list[float]:
        return [derived_value(d, self.stencils, self.lines, state) for d in self.case.derived.values()]

    def scales(self, values: Sequence[float], speed: float) -> list[float]:
        out = []
        for d, v in zip(self.case.derived.values(), values):
            if d.kind == "difference":
                out.append(_quantity_scale(d.quantity, self.case, speed, v))
            else:
                out.append(float(self.lines[d.probes[0]][-1]))  # the length of the line
        return out


def probe_stencils(case: Case, mesh: Mesh, geom: Geometry, names: Sequence[str] | None = None,
                   locator: CellLocator | None = None) -> dict[str, Stencil]:
    """Stencils of the case's probes (``names``: a subset); a line probe's stencil holds its points."""
    locator = CellLocator(mesh, centroids=geom.cell_centre) if locator is None else locator
    out = {}
    for name in (case.probes if names is None else names):
        pr = case.probes[name]
        pts = np.array([pr.at]) if hasattr(pr, "at") else line_points(pr.start, pr.end, pr.points)
        out[name] = build_stencil(locator, geom.cell_centre, pts, name)
    return out


def case_watches(case: Case, mesh: Mesh, geom: Geometry, boundary: FlowBoundary, speed: float,
                 stencils: Mapping[str, Stencil] | None = None) -> list[Watch]:
    """The watches of a case: the velocity change, the forces of ``output.wall_patches``, the point
    probes and the derived scalars."""
    watches: list[Watch] = [VelocityChange(speed)]
    walls = [p for p in case.output.wall_patches if boundary.patch_kind.get(p) == "wall"]
    if walls:
        watches.append(WallForces(mesh, geom, boundary, case, walls))
    needed = set(case.point_probes) | {n for d in case.derived.values() for n in d.probes}
    if needed:
        stencils = probe_stencils(case, mesh, geom, [n for n in case.probes if n in needed]) if stencils is None \
            else stencils
        if case.point_probes:
            watches.append(PointProbes(case, {n: stencils[n] for n in case.point_probes}))
        if case.derived:
            watches.append(DerivedScalars(case, {n: stencils[n] for n in needed}))
    return watches


__all__ = ["FLOW_QUANTITIES", "FORCE_COLUMNS", "WATCHED_PROBE_VALUES", "DerivedScalars", "FlowState", "PointProbes",
           "VariableChange", "VelocityChange",
           "WallForces", "Watch", "case_watches", "derived_value", "force_coefficients",
           "probe_stencils", "sample_flow"]
