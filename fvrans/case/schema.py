"""The resolved case settings: frozen dataclasses with every default filled in.

Build them with :func:`fvrans.case.load_case` or :func:`fvrans.case.case_from_dict`, which
validate the input; constructing the dataclasses directly skips validation. Change a setting
with :meth:`Case.set` / :meth:`Case.replace`, which return a new, validated case.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

# -- allowed values ------------------------------------------------------------------------
TURBULENCE_MODELS = ("none", "spalart-allmaras", "k-omega-sst", "reference-stress")
#: how the reference-stress model hands the reference Reynolds stress to the momentum equation
STRESS_FORMS = ("implicit", "explicit")
#: models whose eddy viscosity the reference-stress model may blend in (``[model] blend_model``)
BLEND_MODELS = ("none", "spalart-allmaras", "k-omega-sst")
#: default cap of the optimal eddy viscosity of the implicit form, as nu_t / nu
DEFAULT_EDDY_VISCOSITY_CAP = 1e5
#: rules for cells outside the reference data (``[reference] outside``)
REFERENCE_OUTSIDE = ("nearest", "refuse", "zero-stress")
SA_VARIANTS = ("standard", "no-ft2")
NONLINEAR_STRESSES = ("none", "qcr2000")
#: defaults of the k-omega SST inflow and start values: turbulence intensity sqrt(2k/3)/|u| and nu_t / nu
DEFAULT_TURBULENCE_INTENSITY = 0.001
DEFAULT_EDDY_VISCOSITY_RATIO = 0.1
BOUNDARY_KINDS = ("wall", "inflow-velocity", "outflow-pressure", "symmetry", "outer-flow")
COUPLINGS = ("simple", "simplec", "simultaneous")
CONVECTION_SCHEMES = ("upwind", "linear-upwind")
GRADIENT_METHODS = ("least-squares", "green-gauss")
LIMITERS = ("none", "venkatakrishnan", "barth-jespersen")

#: keys each boundary kind takes (besides none else)
BOUNDARY_KEYS: dict[str, tuple[str, ...]] = {
    "wall": ("kind", "velocity"),
    "inflow-velocity": ("kind", "velocity", "profile", "profile_columns", "nu_tilde_ratio", "turbulence_intensity",
                        "eddy_viscosity_ratio"),
    "outflow-pressure": ("kind", "pressure"),
    "symmetry": ("kind",),
    "outer-flow": ("kind", "velocity", "pressure", "nu_tilde_ratio", "turbulence_intensity", "eddy_viscosity_ratio"),
}
PROFILE_COLUMN_KEYS = ("coordinate", "u", "v", "nu_tilde_ratio", "k", "omega")
#: column names used when ``profile_columns`` does not name them
DEFAULT_PROFILE_COLUMNS = {"coordinate": "y", "u": "u", "v": "v", "nu_tilde_ratio": "nu_tilde_ratio", "k": "k",
                           "omega": "omega"}
#: default under-relaxation of the pressure correction for each coupling
DEFAULT_RELAX_PRESSURE = {"simple": 0.3, "simplec": 1.0, "simultaneous": 1.0}
DEFAULT_RELAX_VELOCITY = {"simple": 0.7, "simplec": 0.95, "simultaneous": 1.0}
#: default CFL number of the turbulence pseudo-time steps per coupling (0: none); the simultaneous path
#: takes none: a step of CFL x (cell volume / flow through it) shrinks with the cells, and its slow
#: corner modes then took more outer iterations on finer grids (DEVELOPERS.md, "Simultaneous solution")
DEFAULT_TURBULENCE_CFL = {"simple": 20.0, "simplec": 20.0, "simultaneous": 0.0}
#: default relative tolerance of each turbulence solve, by model (others: 0.01): omega spans about
#: ten decades between a wall and the free stream, and a looser solve leaves the free stream unsolved
DEFAULT_TURBULENCE_TOLERANCE = {"k-omega-sst": 1e-6}
MOMENTUM_SOLVERS = ("amg", "gauss-seidel")
#: linear solvers of the simultaneous u-v-p system (``fvrans.solve.coupled``)
SYSTEM_SOLVERS = ("by-size", "direct", "iterative")
TURBULENCE_SOLVERS = ("amg", "gauss-seidel")
#: text standing for a Python function in :meth:`Case.to_dict`
CALLABLE_TEXT = "<python callable>"
#: ``output.reference_velocity`` value meaning "the inflow's speed" (the default)
INFLOW = "inflow"

VelocityFunction = Callable[[np.ndarray, np.ndarray], Any]
#: a constant vector, a Python function f(x, y) -> (u, v), or a
#: :class:`fvrans.case.formula.VectorFormula` (components as formulas in x, y)
Velocity = tuple[float, float] | VelocityFunction
#: a number or a :class:`fvrans.case.formula.Formula` in x, y (a per-face boundary value)
Scalar = Any


@dataclass(frozen=True)
class MeshSettings:
    """Where the mesh comes from: a file (absolute path) or a generator in ``fvrans.mesh.generate``.

    For a file whose boundary lines carry no names (:func:`fvrans.mesh.io.read_mesh`):
    ``edge_tags`` (tag -> patch) with ``edge_tag_array``, ``edge_boxes`` (patch -> xmin, xmax,
    ymin, ymax) and ``unnamed_edges`` (the patch of the boundary edges left).
    """

    file: Path | None = None
    generator: str | None = None
    parameters: dict[str, Any] = field(default_factory=dict)
    renumber: bool = False
    #: pairs of patches (first, second = first moved by a translation) joined as periodic
    periodic_pairs: tuple[tuple[str, str], ...] = ()
    edge_tags: dict[int, str] = field(default_factory=dict)
    edge_tag_array: str | None = None
    edge_boxes: dict[str, tuple[float, float, float, float]] = field(default_factory=dict)
    unnamed_edges: str | None = None


@dataclass(frozen=True)
class Fluid:
    """Constant fluid properties: density rho and dynamic viscosity mu."""

    density: float
    viscosity: float

    @property
    def kinematic_viscosity(self) -> float:
        """nu = mu / rho."""
        return self.viscosity / self.density


@dataclass(frozen=True)
class StressInjection:
    """How ``[model] turbulence = "reference-stress"`` injects the reference Reynolds stress
    (:mod:`fvrans.models.injected`): ``stress_form`` "implicit" (the optimal eddy viscosity,
    clipped to [0, ``eddy_viscosity_cap`` nu], implicit; the remainder explicit) or "explicit" (all
    of it as a source); ``blend_model`` (a model run alongside) and ``blend_share`` (its share of the
    implicit eddy viscosity)."""

    stress_form: str = "implicit"
    eddy_viscosity_cap: float = DEFAULT_EDDY_VISCOSITY_CAP
    blend_model: str = "none"
    blend_share: float = 0.0


@dataclass(frozen=True)
class ModelSettings:
    """The turbulence model and its options (``sa_*`` only with Spalart-Allmaras;
    ``nonlinear_stress`` with any eddy-viscosity model)."""

    turbulence: str = "none"
    sa_variant: str = "standard"
    sa_rotation_curvature: bool = False
    nonlinear_stress: str = "none"
    #: settings of ``turbulence = "reference-stress"`` (the Reynolds stress of ``[reference] data``)
    injection: StressInjection = field(default_factory=StressInjection)


@dataclass(frozen=True)
class Region:
    """A region of the comparison with the reference data ``[reference.regions.<name>]``: the cells
    inside ``box`` (xmin, xmax, ymin, ymax) and with a wall distance in ``wall_distance`` (dmin, dmax);
    either may be None (no limit)."""

    box: tuple[float, float, float, float] | None = None
    wall_distance: tuple[float, float] | None = None


@dataclass(frozen=True)
class ReferenceSettings:
    """A reference mean flow ``[reference]`` (:mod:`fvrans.reference`): ``data`` (a CSV point cloud, a
    mesh file with data or a result folder; absolute path), ``names`` (quantity -> column or field),
    ``outside`` (cells outside the data: "nearest" value, "refuse" the run, or "zero-stress": the
    nearest velocity but no reference stress there), ``regions`` of the comparison,
    ``freeze_velocity`` (an a-priori test: only the model's equations, on the reference velocity)
    and ``write_features`` (the per-cell feature table of :mod:`fvrans.reference.features`)."""

    data: Path | None = None
    names: dict[str, str] = field(default_factory=dict)
    outside: str = "nearest"
    regions: dict[str, Region] = field(default_factory=dict)
    freeze_velocity: bool = False
    write_features: bool = False

    @property
    def active(self) -> bool:
        return self.data is not None


@dataclass(frozen=True)
class InitialState:
    """The start: uniform values, or the velocity and nu_tilde of a result folder (absolute path)
    interpolated onto the cells (``pressure`` still sets the uniform start pressure; ``nu_tilde_ratio``
    applies only when that result carries no nu_tilde)."""

    velocity: tuple[float, float] = (0.0, 0.0)
    pressure: float = 0.0
    nu_tilde_ratio: float = 3.0
    turbulence_intensity: float = DEFAULT_TURBULENCE_INTENSITY
    eddy_viscosity_ratio: float = DEFAULT_EDDY_VISCOSITY_RATIO
    from_result: Path | None = None


@dataclass(frozen=True)
class MeanFlow:
    """What drives the flow through periodic pairs: a fixed mean pressure gradient (dp/dx, dp/dy),
    applied as the body force -grad p, or a fixed bulk (volume-mean) velocity, for which that
    gradient is found each iteration. At most one is set."""

    pressure_gradient: tuple[float, float] | None = None
    bulk_velocity: tuple[float, float] | None = None

    @property
    def active(self) -> bool:
        return self.pressure_gradient is not None or self.bulk_velocity is not None


@dataclass(frozen=True)
class BoundarySpec:
    """The condition on one patch. Keys a kind does not use are ``None``.

    ``velocity`` is ``(u, v)``, a :class:`~fvrans.case.formula.VectorFormula` (components given as
    formulas in x, y) or, built in Python, a function ``f(x, y) -> (u, v)`` of face-centre
    coordinates. ``pressure`` and ``nu_tilde_ratio`` are numbers or
    :class:`~fvrans.case.formula.Formula` objects. ``profile`` is the absolute path of a CSV
    inlet profile and ``profile_columns`` maps ``coordinate``, ``u``, ``v`` (and ``nu_tilde_ratio``
    when the file has that column) to column names. ``nu_tilde_ratio`` is None when the profile
    supplies it.
    """

    kind: str
    velocity: Velocity | None = None
    pressure: Scalar | None = None
    nu_tilde_ratio: Scalar | None = None
    profile: Path | None = None
    profile_columns: dict[str, str] | None = None
    turbulence_intensity: Scalar | None = None
    eddy_viscosity_ratio: Scalar | None = None

    def velocity_at(self, x, y, label: str = "<in memory>: boundary") -> tuple[np.ndarray, np.ndarray]:
        """Velocity components at points ``(x, y)`` (face centres), as float arrays of x's shape.

        Profiles are interpolated linearly along their coordinate; a point beyond the table by
        more than :data:`fvrans.case.profile.RANGE_TOLERANCE` of its span raises CaseError.
        """
        from fvrans.case.profile import evaluate_velocity

        return evaluate_velocity(self, np.asarray(x, float), np.asarray(y, float), label)

    def nu_tilde_ratio_at(self, x, y, label: str = "<in memory>: boundary") -> np.ndarray:
        """Inflow ratio nu_tilde / nu at points ``(x, y)`` (constant, or from the profile file)."""
        from fvrans.case.profile import evaluate_nu_tilde_ratio

        return evaluate_nu_tilde_ratio(self, np.asarray(x, float), np.asarray(y, float), label)

    def profile_column_at(self, column: str, x, y, label: str = "<in memory>: boundary") -> np.ndarray | None:
        """An optional profile column (``"k"``, ``"omega"``) at points ``(x, y)``; None without it."""
        if self.profile is None or self.profile_columns is None or column not in self.profile_columns:
            return None
        from fvrans.case.profile import evaluate_column

        return evaluate_column(self, np.asarray(x, float), np.asarray(y, float), column, label)


@dataclass(frozen=True)
class SolverSettings:
    """Pressure-velocity coupling, discretisation and linear-solver settings.

    ``relax_velocity=None`` / ``relax_pressure=None`` / ``turbulence_cfl=None`` take the default of
    the coupling (:data:`DEFAULT_RELAX_VELOCITY`, :data:`DEFAULT_RELAX_PRESSURE`,
    :data:`DEFAULT_TURBULENCE_CFL`).
    """

    coupling: str = "simplec"
    max_iterations: int = 5000
    tolerance: float = 1e-6
    relax_velocity: float | None = None
    relax_pressure: float | None = None
    relax_turbulence: float = 1.0
    convection: str = "linear-upwind"
    turbulence_convection: str = "upwind"
    gradient: str = "least-squares"
    limiter: str = "none"
    pressure_tolerance: float = 0.01
    momentum_tolerance: float = 0.1
    momentum_solver: str = "amg"
    momentum_max_iterations: int = 20
    momentum_sweeps: int = 5
    turbulence_solver: str = "amg"
    turbulence_tolerance: float = 0.01
    turbulence_max_iterations: int = 20
    amg_rebuild_every: int = 20
    divergence_factor: float = 1e5
    checkpoint_every: int = 0
    conservative_start: bool = True
    turbulence_cfl: float | None = None
    system_solver: str = "by-size"
    system_tolerance: float = 0.01
    momentum_start_shift: float = 0.0
    #: threads of the parallel kernels; 0: the FVRANS_THREADS variable, else every idle core (fvrans.jit)
    threads: int = 0

    def __post_init__(self) -> None:
        if self.relax_velocity is None:
            object.__setattr__(self, "relax_velocity", DEFAULT_RELAX_VELOCITY.get(self.coupling, 0.7))
        if self.relax_pressure is None:
            object.__setattr__(self, "relax_pressure", DEFAULT_RELAX_PRESSURE.get(self.coupling, 1.0))
        if self.turbulence_cfl is None:
            object.__setattr__(self, "turbulence_cfl", DEFAULT_TURBULENCE_CFL.get(self.coupling, 20.0))


@dataclass(frozen=True)
class OutputSettings:
    """Reference values for coefficients, the free-stream direction and moment centre of forces,
    groups of wall patches whose forces are summed, and which patches get wall quantities.

    ``reference_velocity`` None: the inflow's speed (see :func:`fvrans.post.forces.inflow_reference`);
    ``reference_density`` None: the fluid's; ``flow_direction`` / ``flow_angle`` (degrees from +x)
    None: the inflow's direction (at most one of the two is given).
    """

    wall_patches: tuple[str, ...] = ()
    reference_velocity: float | None = None
    reference_pressure: float = 0.0
    reference_length: float = 1.0
    write_fields: bool = True
    #: (xmin, xmax, ymin, ymax) of the zoomed field maps, or None
    map_window: tuple[float, float, float, float] | None = None
    reference_density: float | None = None
    flow_direction: tuple[float, float] | None = None
    flow_angle: float | None = None
    moment_centre: tuple[float, float] = (0.0, 0.0)
    force_groups: dict[str, tuple[str, ...]] = field(default_factory=dict)

    def direction(self) -> tuple[float, float] | None:
        """The free-stream unit vector the case gives (from flow_direction or flow_angle), or None."""
        import math

        if self.flow_angle is not None:
            a = math.radians(self.flow_angle)
            return (math.cos(a), math.sin(a))
        if self.flow_direction is not None:
            n = math.hypot(*self.flow_direction)
            return (self.flow_direction[0] / n, self.flow_direction[1] / n)
        return None


@dataclass(frozen=True)
class ProbeLine:
    """A line probe ``[probes.<name>]``: ``points`` samples evenly spaced from ``start`` to ``end``."""

    start: tuple[float, float]
    end: tuple[float, float]
    points: int = 101


@dataclass(frozen=True)
class ProbePoint:
    """A point probe ``[probes.<name>]`` with ``at = [x, y]``: values watched every iteration."""

    at: tuple[float, float]


Probe = ProbeLine | ProbePoint
#: kinds of derived scalars ``[derived.<name>]``
DERIVED_KINDS = ("difference", "recirculation-length")


@dataclass(frozen=True)
class DerivedScalar:
    """A scalar computed from probes, ``[derived.<name>]``.

    ``"difference"``: ``quantity`` at point probe ``probes[0]`` minus at ``probes[1]``;
    ``"recirculation-length"``: the distance along line probe ``probes[0]`` from its start to
    the first place where ``quantity`` turns from negative to positive.
    """

    kind: str
    probes: tuple[str, ...]
    quantity: str


@dataclass(frozen=True)
class MonitorSettings:
    """The stopping rule on monitored quantities (see :mod:`fvrans.monitor`)."""

    settle: bool = True
    iteration_error: float = 1e-5
    window: int = 20
    show: str = ""


@dataclass(frozen=True)
class Case:
    """A complete, validated case. ``source`` is the case file (None for one built in memory).

    Two cases are equal when their settings are equal, wherever they came from. ``raw`` keeps
    the settings as given (before defaults), so that :meth:`set` re-derives defaults that
    depend on the changed value (e.g. ``solver.relax_pressure`` on ``solver.coupling``).
    """

    source: Path | None = field(compare=False)
    title: str
    description: str
    mesh: MeshSettings
    fluid: Fluid
    model: ModelSettings
    initial: InitialState
    boundaries: dict[str, BoundarySpec]
    solver: SolverSettings
    output: OutputSettings
    probes: dict[str, Probe] = field(default_factory=dict)
    mean_flow: MeanFlow = field(default_factory=MeanFlow)
    raw: dict[str, Any] | None = field(default=None, compare=False, repr=False)
    derived: dict[str, DerivedScalar] = field(default_factory=dict)
    monitor: MonitorSettings = field(default_factory=MonitorSettings)
    #: the named constants of the case's formulas (``[formula_constants]``)
    constants: dict[str, float] = field(default_factory=dict)
    reference: ReferenceSettings = field(default_factory=ReferenceSettings)

    @property
    def label(self) -> str:
        """The case file name for messages, or ``"<in memory>"``."""
        return str(self.source) if self.source is not None else "<in memory>"

    @property
    def turbulent(self) -> bool:
        return self.model.turbulence != "none"

    @property
    def line_probes(self) -> dict[str, ProbeLine]:
        return {n: p for n, p in self.probes.items() if isinstance(p, ProbeLine)}

    @property
    def point_probes(self) -> dict[str, ProbePoint]:
        return {n: p for n, p in self.probes.items() if isinstance(p, ProbePoint)}

    # -- export ----------------------------------------------------------------------------
    def to_dict(self) -> dict[str, Any]:
        """All settings with defaults filled in, as plain TOML-serialisable data.

        Paths are absolute; a Python velocity function appears as ``"<python callable>"``.
        """
        return _case_data(self, keep_callables=False)

    def to_toml(self) -> str:
        """:meth:`to_dict` written as TOML text (a case file that loads back to this case)."""
        from fvrans.case.tomlwrite import dumps

        return dumps(self.to_dict())

    # -- changes ---------------------------------------------------------------------------
    def set(self, key: str, value: Any) -> Case:
        """A new validated case with the dotted ``key`` set to ``value`` (``None`` removes it).

        >>> from fvrans.case import case_from_dict
        >>> c = case_from_dict({"mesh": {"generator": "cavity"},
        ...                     "fluid": {"density": 1.0, "viscosity": 0.01},
        ...                     "boundary": {"walls": {"kind": "wall"}}})
        >>> c.set("solver.relax_velocity", 0.5).solver.relax_velocity
        0.5
        """
        return self.replace({key: value})

    def replace(self, changes: Mapping[str, Any]) -> Case:
        """A new validated case with several dotted keys changed at once (validated together).

        A value ``None`` removes the key (its default applies again); a table value replaces
        the whole table, e.g. ``{"boundary.inlet": {"kind": "outflow-pressure"}}``. Inlet
        velocities may be Python functions ``f(x, y) -> (u, v)``.
        """
        from fvrans.case.validate import apply_changes, case_from_dict

        data = copy_data(self.raw) if self.raw is not None else _case_data(self, keep_callables=True)
        apply_changes(data, changes, self.label)
        return case_from_dict(data, self.source)

    # -- boundary values -------------------------------------------------------------------
    def boundary_velocity(self, patch: str, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Velocity prescribed on ``patch`` at points ``(x, y)`` (see :meth:`BoundarySpec.velocity_at`)."""
        return self._boundary(patch).velocity_at(x, y, self._boundary_label(patch))

    def boundary_nu_tilde_ratio(self, patch: str, x, y) -> np.ndarray:
        """Inflow nu_tilde / nu on ``patch`` at points ``(x, y)``."""
        return self._boundary(patch).nu_tilde_ratio_at(x, y, self._boundary_label(patch))

    def _boundary(self, patch: str) -> BoundarySpec:
        from fvrans.case.validate import unknown_patch_error

        if patch not in self.boundaries:
            raise unknown_patch_error(self, patch)
        return self.boundaries[patch]

    def _boundary_label(self, patch: str) -> str:
        from fvrans.case.validate import format_key

        return f"{self.label}: {format_key(('boundary', patch))}"


# ------------------------------------------------------------------------------------------
def copy_data(x: Any) -> Any:
    """Copy nested tables and lists; leave other objects (numbers, functions, arrays) shared."""
    if isinstance(x, Mapping):
        return {k: copy_data(v) for k, v in x.items()}
    if isinstance(x, list):
        return [copy_data(v) for v in x]
    return x


def _vec(v) -> list[float]:
    return [float(v[0]), float(v[1])]


def boundary_data(b: BoundarySpec, keep_callables: bool = False) -> dict[str, Any]:
    """One boundary condition as plain data (None fields left out)."""
    from fvrans.case.formula import Formula, VectorFormula

    out: dict[str, Any] = {"kind": b.kind}
    if isinstance(b.velocity, VectorFormula):
        out["velocity"] = b.velocity.data()
    elif b.velocity is not None:
        if callable(b.velocity):
            out["velocity"] = b.velocity if keep_callables else CALLABLE_TEXT
        else:
            out["velocity"] = _vec(b.velocity)
    if b.profile is not None:
        out["profile"] = str(b.profile)
    if b.profile_columns is not None:
        out["profile_columns"] = dict(b.profile_columns)
    for key in ("pressure", "nu_tilde_ratio", "turbulence_intensity", "eddy_viscosity_ratio"):
        v = getattr(b, key)
        if v is not None:
            out[key] = v.text if isinstance(v, Formula) else float(v)
    return out


def _initial_data(i: InitialState) -> dict[str, Any]:
    turbulence = {"nu_tilde_ratio": i.nu_tilde_ratio, "turbulence_intensity": i.turbulence_intensity,
                  "eddy_viscosity_ratio": i.eddy_viscosity_ratio}
    if i.from_result is not None:
        return {"from_result": str(i.from_result), "pressure": i.pressure, **turbulence}
    return {"velocity": _vec(i.velocity), "pressure": i.pressure, **turbulence}


def _case_data(case: Case, keep_callables: bool) -> dict[str, Any]:
    m = case.mesh
    mesh: dict[str, Any] = {}
    if m.file is not None:
        mesh["file"] = str(m.file)
        if m.edge_tags:
            mesh["edge_tags"] = {str(k): v for k, v in m.edge_tags.items()}
        if m.edge_tag_array is not None:
            mesh["edge_tag_array"] = m.edge_tag_array
        if m.edge_boxes:
            mesh["edge_boxes"] = {k: [float(x) for x in v] for k, v in m.edge_boxes.items()}
        if m.unnamed_edges is not None:
            mesh["unnamed_edges"] = m.unnamed_edges
    if m.generator is not None:
        mesh["generator"] = m.generator
        mesh["parameters"] = copy_data(m.parameters)
    mesh["renumber"] = bool(m.renumber)
    if m.periodic_pairs:
        mesh["periodic_pairs"] = [list(p) for p in m.periodic_pairs]
    s = case.solver
    o = case.output
    output: dict[str, Any] = {
        "wall_patches": list(o.wall_patches),
        "reference_velocity": INFLOW if o.reference_velocity is None else o.reference_velocity,
        "reference_pressure": o.reference_pressure,
        "reference_length": o.reference_length,
        "write_fields": o.write_fields,
        "moment_centre": _vec(o.moment_centre),
    }
    if o.reference_density is not None:
        output["reference_density"] = o.reference_density
    if o.flow_angle is not None:
        output["flow_angle"] = o.flow_angle
    if o.flow_direction is not None:
        output["flow_direction"] = _vec(o.flow_direction)
    if o.force_groups:
        output["force_groups"] = {g: list(m) for g, m in o.force_groups.items()}
    if o.map_window is not None:
        output["map_window"] = [float(v) for v in o.map_window]
    data = {
        "title": case.title,
        "description": case.description,
        "mesh": mesh,
        "fluid": {"density": case.fluid.density, "viscosity": case.fluid.viscosity},
        "model": _model_data(case.model),
        "initial": _initial_data(case.initial),
        "boundary": {name: boundary_data(b, keep_callables) for name, b in case.boundaries.items()},
        "solver": {
            "coupling": s.coupling,
            "max_iterations": s.max_iterations,
            "tolerance": s.tolerance,
            "relax_velocity": s.relax_velocity,
            "momentum_solver": s.momentum_solver,
            "momentum_max_iterations": s.momentum_max_iterations,
            "relax_pressure": s.relax_pressure,
            "relax_turbulence": s.relax_turbulence,
            "convection": s.convection,
            "turbulence_convection": s.turbulence_convection,
            "gradient": s.gradient,
            "limiter": s.limiter,
            "pressure_tolerance": s.pressure_tolerance,
            "momentum_tolerance": s.momentum_tolerance,
            "momentum_sweeps": s.momentum_sweeps,
            "turbulence_solver": s.turbulence_solver,
            "turbulence_tolerance": s.turbulence_tolerance,
            "turbulence_max_iterations": s.turbulence_max_iterations,
            "amg_rebuild_every": s.amg_rebuild_every,
            "divergence_factor": s.divergence_factor,
            "checkpoint_every": s.checkpoint_every,
            "conservative_start": s.conservative_start,
            "turbulence_cfl": s.turbulence_cfl,
            "system_solver": s.system_solver,
            "system_tolerance": s.system_tolerance,
            "momentum_start_shift": s.momentum_start_shift,
            "threads": s.threads,
        },
        "output": output,
    }
    if case.constants:
        data["formula_constants"] = dict(case.constants)
    mf = case.mean_flow
    if mf.active:
        data["mean_flow"] = ({"pressure_gradient": _vec(mf.pressure_gradient)} if mf.pressure_gradient is not None
                             else {"bulk_velocity": _vec(mf.bulk_velocity)})
    if case.probes:
        data["probes"] = {name: {"at": _vec(pr.at)} if isinstance(pr, ProbePoint) else
                          {"start": _vec(pr.start), "end": _vec(pr.end), "points": pr.points}
                          for name, pr in case.probes.items()}
    if case.derived:
        data["derived"] = {name: _derived_data(d) for name, d in case.derived.items()}
    if case.reference != ReferenceSettings():
        data["reference"] = _reference_data(case.reference)
    m = case.monitor
    data["monitor"] = {"settle": m.settle, "iteration_error": m.iteration_error, "window": m.window}
    if m.show:
        data["monitor"]["show"] = m.show
    return data


def _model_data(m: ModelSettings) -> dict[str, Any]:
    out: dict[str, Any] = {"turbulence": m.turbulence, "sa_variant": m.sa_variant,
                           "sa_rotation_curvature": m.sa_rotation_curvature, "nonlinear_stress": m.nonlinear_stress}
    if m.turbulence == "reference-stress":
        i = m.injection
        out.update({"stress_form": i.stress_form, "eddy_viscosity_cap": i.eddy_viscosity_cap,
                    "blend_model": i.blend_model, "blend_share": i.blend_share})
    return out


def _reference_data(r: ReferenceSettings) -> dict[str, Any]:
    out: dict[str, Any] = {}
    if r.data is not None:
        out["data"] = str(r.data)
    if r.names:
        out["names"] = dict(r.names)
    out.update({"outside": r.outside, "freeze_velocity": r.freeze_velocity, "write_features": r.write_features})
    if r.regions:
        out["regions"] = {}
        for name, g in r.regions.items():
            out["regions"][name] = {}
            if g.box is not None:
                out["regions"][name]["box"] = [float(v) for v in g.box]
            if g.wall_distance is not None:
                out["regions"][name]["wall_distance"] = [float(v) for v in g.wall_distance]
    return out


def _derived_data(d: DerivedScalar) -> dict[str, Any]:
    if d.kind == "difference":
        return {"kind": d.kind, "probes": list(d.probes), "quantity": d.quantity}
    return {"kind": d.kind, "probe": d.probes[0], "quantity": d.quantity}
