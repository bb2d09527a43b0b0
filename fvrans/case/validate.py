"""Validation of case settings given as nested data (parsed TOML or Python dicts).

Every problem raises :class:`fvrans.errors.CaseError` whose message starts with the case file
(or ``<in memory>``) and the full dotted key, says what is wrong and what would fix it.
"""

from __future__ import annotations

import difflib
import json
import math
import numbers
import os
import re
import sys
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.case import schema as S
from fvrans.errors import CaseError
from fvrans.files import MAX_NESTING, check_path_text, input_file, nesting_depth

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

_REQUIRED = object()
_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")

#: keys of each table; ``None`` marks the table of boundary tables
TABLE_KEYS: dict[str, tuple[str, ...]] = {
    "mesh": ("file", "generator", "parameters", "renumber", "periodic_pairs", "edge_tags", "edge_tag_array",
             "edge_boxes", "unnamed_edges"),
    "fluid": ("density", "viscosity"),
    "model": ("turbulence", "sa_variant", "sa_rotation_curvature", "nonlinear_stress", "stress_form",
              "eddy_viscosity_cap", "blend_model", "blend_share"),
    "initial": ("velocity", "pressure", "nu_tilde_ratio", "turbulence_intensity", "eddy_viscosity_ratio",
                "from_result"),
    "mean_flow": ("pressure_gradient", "bulk_velocity"),
    "solver": (
        "coupling", "max_iterations", "tolerance", "relax_velocity", "relax_pressure",
        "relax_turbulence", "convection", "turbulence_convection", "gradient", "limiter",
        "pressure_tolerance", "momentum_solver", "momentum_tolerance", "momentum_max_iterations",
        "momentum_sweeps", "turbulence_solver", "turbulence_tolerance", "turbulence_max_iterations",
        "amg_rebuild_every",
        "divergence_factor", "checkpoint_every", "conservative_start", "turbulence_cfl",
        "system_solver", "system_tolerance", "momentum_start_shift",
        "threads",
    ),
    "output": (
        "wall_patches", "reference_velocity", "reference_pressure", "reference_length", "write_fields",
        "map_window", "reference_density", "flow_direction", "flow_angle", "moment_centre", "force_groups",
    ),
}
TOP_KEYS = ("title", "description", "mesh", "fluid", "model", "initial", "boundary", "solver", "output", "probes",
            "mean_flow", "derived", "monitor", "reference",
            "formula_constants")
#: keys of [reference] (reference data: injection, comparison, a-priori tests, features) and of a region
REFERENCE_KEYS = ("data", "names", "outside", "regions", "freeze_velocity", "write_features")
REGION_KEYS = ("box", "wall_distance")
#: the keys of [model] that only turbulence = "reference-stress" takes
INJECTION_KEYS = ("stress_form", "eddy_viscosity_cap", "blend_model", "blend_share")
#: keys of a probe [probes.<name>]: a line (start, end, points) or a point (at)
PROBE_KEYS = ("start", "end", "points", "at")
#: keys of a derived scalar [derived.<name>] and of the [monitor] table
DERIVED_KEYS = ("kind", "probes", "probe", "quantity")
MONITOR_KEYS = ("settle", "iteration_error", "window", "show")
#: what a probe samples besides the turbulence model's variables and eddy_viscosity_ratio
PROBE_QUANTITIES = ("u", "v", "p")
_PROBE_NAME = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.-]*$")

Rule = tuple[Callable[[float], bool], str]
POSITIVE: Rule = (lambda v: v > 0, "> 0")
NON_NEGATIVE: Rule = (lambda v: v >= 0, ">= 0")
UNIT: Rule = (lambda v: 0 < v <= 1, "in (0, 1]")
OPEN_UNIT: Rule = (lambda v: 0 < v < 1, "in (0, 1)")
ABOVE_ONE: Rule = (lambda v: v > 1, "> 1")
AT_LEAST_ONE: Rule = (lambda v: v >= 1, ">= 1")
#: largest magnitude of any number of a case: beyond it squares and products overflow floats
MAX_MAGNITUDE = 1e30
#: a positive physical property or reference value: between 1e-30 and 1e30 (so that products
#: such as 1/2 rho U^2 L stay normal floats)
PHYSICAL: Rule = (lambda v: 1e-30 <= v <= 1e30, "> 0 (between 1e-30 and 1e30)")
#: largest magnitude of an integer of a case (iteration counts and the like)
MAX_INTEGER = 10**15
#: most sample points of a line probe
MAX_PROBE_POINTS = 100_000


# ------------------------------------------------------------------------------------------
# message helpers
# ------------------------------------------------------------------------------------------
def format_key(path: Sequence[str]) -> str:
    """Dotted key as written in TOML, quoting parts that are not bare keys.

    >>> format_key(("boundary", "inlet", "velocity"))
    'boundary.inlet.velocity'
    >>> format_key(("boundary", "outer wall", "kind"))
    'boundary."outer wall".kind'
    """
    return ".".join(p if _BARE_KEY.match(p) else json.dumps(p, ensure_ascii=False) for p in path)


def _short(text: str, n: int = 60) -> str:
    return text if len(text) <= n else text[: n - 3] + "..."


def describe(value: Any) -> str:
    """Type and value for 'got ...' messages.

    >>> describe("abc"), describe(True), describe(3), describe([1, 2, 3])
    ("str 'abc'", 'bool true', 'int 3', 'list [1, 2, 3]')
    """
    if isinstance(value, bool) or isinstance(value, np.bool_):
        return f"bool {'true' if value else 'false'}"
    if isinstance(value, str):
        return f"str {_short(repr(value))}"
    if isinstance(value, numbers.Integral):
        return f"int {int(value)}"
    if isinstance(value, numbers.Real):
        return f"float {float(value)!r}"
    if isinstance(value, Mapping):
        return f"table {_short(repr(dict(value)))}"
    if isinstance(value, np.ndarray):
        return f"array {_short(repr(value.tolist()))}"
    if isinstance(value, (list, tuple)):
        return f"list {_short(repr(list(value)))}"
    if callable(value):
        return "a Python callable"
    return f"{type(value).__name__} {_short(repr(value))}"


def did_you_mean(word: str, choices: Sequence[str]) -> str:
    """`` (did you mean 'x'?)`` for the closest choice, or ``""``."""
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    if not close:
        close = difflib.get_close_matches(word.lower().replace("_", "-"), list(choices), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _quoted_list(items: Sequence[str]) -> str:
    return ", ".join(repr(i) for i in items)


class _Ctx:
    """Error factory for one case: the label of the file, the base directory of relative paths and
    the named constants of its formulas."""

    def __init__(self, label: str, base: Path):
        self.label = label
        self.base = base
        self.constants: dict[str, float] = {}

    def error(self, path: Sequence[str], msg: str) -> CaseError:
        where = f"{format_key(path)}: " if path else ""
        return CaseError(f"{self.label}: {where}{msg}")


# ------------------------------------------------------------------------------------------
# a table reader
# ------------------------------------------------------------------------------------------
class _Table:
    """Reads the keys of one table, checking names, types and ranges."""

    def __init__(self, ctx: _Ctx, path: tuple[str, ...], data: Any, allowed: Sequence[str], takes: str):
        self.ctx = ctx
        self.path = path
        if not isinstance(data, Mapping):
            what = f"[{format_key(path)}]" if path else "the case"
            raise ctx.error(path, f"must be a table ({what} with keys such as {', '.join(allowed[:3])}), "
                            f"got {describe(data)}")
        for k in data:
            if not isinstance(k, str):
                raise ctx.error(path, f"keys must be strings, got {describe(k)}")
        self.data = data
        for k in data:
            if k not in allowed:
                raise ctx.error(
                    path + (k,),
                    f"unknown key{did_you_mean(k, allowed)}; {takes} takes: {', '.join(allowed)}",
                )

    def has(self, key: str) -> bool:
        return key in self.data

    def fail(self, key: str, msg: str) -> CaseError:
        return self.ctx.error(self.path + (key,), msg)

    def _get(self, key: str, default: Any, hint: str, what: str = "key") -> Any:
        if key in self.data:
            return self.data[key]
        if default is _REQUIRED:
            raise self.fail(key, f"missing required {what}; {hint}")
        return default

    def number(self, key: str, default: Any = _REQUIRED, rule: Rule | None = None, meaning: str = "",
               hint: str = "") -> float:
        v = self._get(key, default, hint)
        return check_number(v, lambda m: self.fail(key, m), rule, meaning)

    def integer(self, key: str, default: Any = _REQUIRED, rule: Rule | None = None, meaning: str = "") -> int:
        v = self._get(key, default, "")
        return check_integer(v, lambda m: self.fail(key, m), rule, meaning)

    def boolean(self, key: str, default: Any = _REQUIRED) -> bool:
        v = self._get(key, default, "")
        if isinstance(v, (bool, np.bool_)):
            return bool(v)
        if isinstance(v, str) and v.lower() in ("true", "false"):
            raise self.fail(key, f"must be true or false without quotes, got {describe(v)}")
        raise self.fail(key, f"must be true or false, got {describe(v)}")

    def string(self, key: str, default: Any = _REQUIRED, hint: str = "") -> str:
        v = self._get(key, default, hint)
        if not isinstance(v, str):
            raise self.fail(key, f"must be a string (in quotes), got {describe(v)}")
        return v

    def choice(self, key: str, allowed: Sequence[str], default: Any = _REQUIRED) -> str:
        v = self._get(key, default, f"add {key} = one of {_quoted_list(allowed)}")
        fail = self.fail
        if not isinstance(v, str):
            raise fail(key, f"must be one of {_quoted_list(allowed)} (a quoted string), got {describe(v)}")
        if v not in allowed:
            raise fail(key, f"{v!r} is not allowed{did_you_mean(v, allowed)}; "
                       f"use one of {_quoted_list(allowed)}")
        return v

    def vector(self, key: str, default: Any = _REQUIRED, hint: str = "") -> tuple[float, float]:
        v = self._get(key, default, hint)
        return check_vector(v, lambda m: self.fail(key, m))

    def _formula(self, key: str, text: str, label: str = "") -> Any:
        from fvrans.case.formula import parse_formula

        where = f"{self.ctx.label}: {format_key(self.path + (key,))}{label}"
        return parse_formula(text, self.ctx.constants, where)

    def number_or_formula(self, key: str, default: Any = _REQUIRED, rule: Rule | None = None,
                          meaning: str = "") -> Any:
        """A number (checked against ``rule``) or a formula string in x, y and the case's
        ``[formula_constants]`` (a :class:`fvrans.case.formula.Formula`; ``rule`` is checked
        where it is evaluated): the general form of a per-face boundary value."""
        v = self._get(key, default, "")
        if isinstance(v, str):
            try:
                float(v)
            except ValueError:
                return self._formula(key, v)
        if callable(getattr(v, "values_at", None)):  # an already parsed formula (from Python)
            return self._formula(key, v.text)
        return check_number(v, lambda m: self.fail(key, m + " (or a formula in x and y, as a quoted string)"),
                            rule, meaning)

    def vector_or_formula(self, key: str, default: Any = _REQUIRED, hint: str = "") -> Any:
        """``[u, v]`` where each item is a number or a formula string; a pair of numbers gives a
        tuple, anything with a formula a :class:`fvrans.case.formula.VectorFormula`."""
        from fvrans.case.formula import VectorFormula

        v = self._get(key, default, hint)
        if hasattr(v, "data") and isinstance(v, VectorFormula):
            v = v.data()
        def formula_text(c: Any) -> bool:
            if not isinstance(c, str):
                return False
            try:
                float(c)  # a quoted number: refused below with "remove the quotes"
            except ValueError:
                return True
            return False

        if isinstance(v, (list, tuple)) and len(v) == 2 and any(formula_text(c) for c in v):
            comps = []
            for i, c in enumerate(v):
                if isinstance(c, str):
                    comps.append(self._formula(key, c, f" (item {i + 1})"))
                else:
                    comps.append(check_number(c, lambda m, i=i: self.fail(key, f"item {i + 1} {m}")))
            return VectorFormula((comps[0], comps[1]))
        return check_vector(v, lambda m: self.fail(key, m + "; items may be numbers or formulas in x and y "
                                                   "(quoted strings)"))

    def table(self, key: str, default: Any = _REQUIRED, hint: str = "") -> Any:
        v = self._get(key, default, hint, "table")
        if not isinstance(v, Mapping):
            raise self.fail(key, f"must be a table, got {describe(v)}")
        return v


def check_number(
    v: Any, fail: Callable[[str], CaseError], rule: Rule | None = None, meaning: str = ""
) -> float:
    """A finite float (int accepted, bool refused), optionally satisfying ``rule``."""
    need = f"a number {rule[1]}" if rule else "a number"
    if isinstance(v, (bool, np.bool_)):
        raise fail(f"must be {need}, got {describe(v)} (true/false is not a number)")
    if not isinstance(v, numbers.Real):
        extra = ""
        if isinstance(v, str):
            try:
                float(v)
                extra = " (remove the quotes)"
            except ValueError:
                pass
        raise fail(f"must be {need}, got {describe(v)}{extra}")
    try:
        x = float(v)
    except OverflowError:  # an integer beyond the float range
        x = math.inf
    if not math.isfinite(x):
        got = repr(float(v)) if isinstance(v, float) else f"an integer of {len(str(int(v)))} digits"
        raise fail(f"must be a finite number, got {got}")
    if abs(x) > MAX_MAGNITUDE:
        raise fail(f"must be at most {MAX_MAGNITUDE:g} in magnitude, got {x!r}; give the value in units that keep "
                   "it within that range")
    if rule and not rule[0](x):
        what = f" ({meaning})" if meaning else ""
        raise fail(f"must be {rule[1]}{what}, got {x!r}; give a value {rule[1]}")
    return x


def check_integer(
    v: Any, fail: Callable[[str], CaseError], rule: Rule | None = None, meaning: str = ""
) -> int:
    """An int (a float with an integral value accepted), optionally satisfying ``rule``."""
    need = f"an integer {rule[1]}" if rule else "an integer"
    if isinstance(v, (bool, np.bool_)):
        raise fail(f"must be {need}, got {describe(v)} (true/false is not a number)")
    if isinstance(v, numbers.Integral):
        n = int(v)
    elif isinstance(v, numbers.Real) and math.isfinite(float(v)) and float(v).is_integer():
        n = int(float(v))
    else:
        raise fail(f"must be {need}, got {describe(v)}")
    if abs(n) > MAX_INTEGER:
        raise fail(f"must be {need} of at most {MAX_INTEGER:.0e} in magnitude, got {describe(v)[:40]}")
    if rule and not rule[0](n):
        what = f" ({meaning})" if meaning else ""
        raise fail(f"must be {rule[1]}{what}, got {n}; give an integer {rule[1]}")
    return n


def check_vector(v: Any, fail: Callable[[str], CaseError]) -> tuple[float, float]:
    """Two finite numbers ``[u, v]``."""
    if isinstance(v, np.ndarray):
        v = v.tolist()
    need = "must be a list of 2 numbers [x component, y component]"
    if not isinstance(v, (list, tuple)):
        extra = (" (Python functions are accepted only for the velocity of an inflow-velocity patch)"
                 if callable(v) else "")
        raise fail(f"{need}, got {describe(v)}{extra}")
    if len(v) != 2:
        raise fail(f"{need}, got {len(v)} item(s): {describe(v)}")
    out = []
    for i, c in enumerate(v):
        out.append(check_number(c, lambda m, i=i: fail(f"item {i + 1} {m}")))
    return (out[0], out[1])


def _check_path(ctx: _Ctx, path: tuple[str, ...], v: Any, what: str, max_bytes: int | None = None) -> Path:
    """An existing regular file (not a pipe or device; no NUL, overlong name or link loop)."""
    if isinstance(v, os.PathLike):
        v = os.fspath(v)
    if not isinstance(v, str) or not v.strip():
        raise ctx.error(path, f"must be a file path (a quoted string), got {describe(v)}")

    def fail(msg: str) -> CaseError:
        return ctx.error(path, msg)

    p = check_path_text(v, fail, what).expanduser()
    full = p if p.is_absolute() else ctx.base / p
    try:
        full = full.resolve()
    except (OSError, RuntimeError):  # a symbolic-link loop: input_file names it
        pass
    if not full.exists() and not full.is_symlink():
        rel = "" if p.is_absolute() else f" (relative paths start from {ctx.base})"
        raise ctx.error(path, f"the {what} {full} does not exist{rel}; correct the path")
    return input_file(full, what, max_bytes=max_bytes, fail=fail)


# ------------------------------------------------------------------------------------------
# the case
# ------------------------------------------------------------------------------------------
def case_from_dict(data: Mapping[str, Any], source: str | Path | None = None) -> S.Case:
    """Validate nested settings (as parsed from a case file) and build a :class:`Case`.

    Relative paths start from the directory of ``source`` (the case file), or from the
    current directory when ``source`` is None. Inlet velocities may be Python functions
    ``f(x, y) -> (u, v)``. Raises CaseError naming the file, the dotted key and the fix.
    """
    src = Path(source) if source is not None else None
    ctx = _Ctx(str(src) if src is not None else "<in memory>",
               src.absolute().parent if src is not None else Path.cwd())
    if nesting_depth(data) > MAX_NESTING:
        raise ctx.error((), f"tables and lists are nested more than {MAX_NESTING} deep; a case nests a few levels "
                        "(e.g. [boundary.inlet] with profile_columns = { ... })")
    top = _Table(ctx, (), data, TOP_KEYS, "the top level of a case")
    title = top.string("title", "")
    description = top.string("description", "")
    from fvrans.case.formula import check_constants

    ctx.constants = check_constants(top.table("formula_constants", {}), f"{ctx.label}: formula_constants")

    mesh = _mesh(ctx, top.table("mesh", hint=(
        'add a [mesh] table with file = "path/to/mesh.msh" (relative to the case file) '
        'or generator = "<name>" and parameters = { ... }')))
    fluid_t = _Table(ctx, ("fluid",), top.table("fluid", hint=(
        "add a [fluid] table with density = ... and viscosity = ... (dynamic viscosity)")),
        TABLE_KEYS["fluid"], "[fluid]")
    fluid = S.Fluid(
        density=fluid_t.number("density", rule=PHYSICAL, meaning="the fluid density",
                               hint="add density = <rho>, e.g. density = 1.0"),
        viscosity=fluid_t.number("viscosity", rule=PHYSICAL, meaning="the dynamic viscosity mu = rho nu",
                                 hint="add viscosity = <dynamic viscosity mu>, e.g. viscosity = 0.01"),
    )
    model_t = _Table(ctx, ("model",), top.table("model", {}), TABLE_KEYS["model"], "[model]")
    turbulence = model_t.choice("turbulence", S.TURBULENCE_MODELS, "none")
    model = S.ModelSettings(
        turbulence=turbulence,
        sa_variant=model_t.choice("sa_variant", S.SA_VARIANTS, "standard"),
        sa_rotation_curvature=model_t.boolean("sa_rotation_curvature", False),
        nonlinear_stress=model_t.choice("nonlinear_stress", S.NONLINEAR_STRESSES, "none"),
        injection=_injection(model_t, turbulence),
    )
    if model.turbulence in ("none", "reference-stress") and model.nonlinear_stress != "none":
        raise model_t.fail("nonlinear_stress", "a non-linear Reynolds stress needs an eddy-viscosity model "
                           f"(model.turbulence = {model.turbulence!r} here); set model.turbulence or remove the key")
    initial = _initial(ctx, top.table("initial", {}))
    boundaries = _boundaries(ctx, top.table("boundary", hint=(
        'add one table per mesh patch, e.g. [boundary.walls] with kind = "wall"')))
    solver = _solver(ctx, top.table("solver", {}), model.injection.blend_model
                     if model.turbulence == "reference-stress" else model.turbulence)
    output = _output(ctx, top.table("output", {}), boundaries)
    probes = _probes(ctx, top.table("probes", {}))
    mean_flow = _mean_flow(ctx, top.table("mean_flow", {}), mesh)
    if solver.coupling == "simultaneous" and mean_flow.bulk_velocity is not None:
        raise ctx.error(("mean_flow", "bulk_velocity"), "solver.coupling = 'simultaneous' cannot hold a bulk "
                        "velocity (its driving force comes from the segregated momentum matrix); give "
                        "mean_flow.pressure_gradient instead, or use coupling = 'simplec'")
    derived = _derived(ctx, top.table("derived", {}), probes, model)
    monitor = _monitor(ctx, top.table("monitor", {}))
    reference = _reference(ctx, top.table("reference", {}), model)
    return S.Case(
        source=src,
        title=title,
        description=description,
        mesh=mesh,
        fluid=fluid,
        model=model,
        initial=initial,
        boundaries=boundaries,
        solver=solver,
        output=output,
        probes=probes,
        mean_flow=mean_flow,
        raw=S.copy_data(data),
        derived=derived,
        monitor=monitor,
        constants=dict(ctx.constants),
        reference=reference,
    )


def _injection(t: _Table, turbulence: str) -> S.StressInjection:
    """The [model] keys of turbulence = "reference-stress" (refused with any other model)."""
    if turbulence != "reference-stress":
        for k in INJECTION_KEYS:
            if t.has(k):
                raise t.fail(k, 'only used with turbulence = "reference-stress" (the Reynolds stress of '
                             f"[reference] data); remove it or set that model (turbulence = {turbulence!r} here)")
        return S.StressInjection()
    d = S.StressInjection()
    blend_model = t.choice("blend_model", S.BLEND_MODELS, d.blend_model)
    share = t.number("blend_share", 0.5 if blend_model != "none" else 0.0,
                     (lambda v: 0.0 <= v <= 1.0, "in [0, 1]"), "the share of the blend model's eddy viscosity")
    if blend_model == "none" and share > 0.0:
        raise t.fail("blend_share", "needs blend_model (the model whose eddy viscosity is blended in); add "
                     f"blend_model = one of {_quoted_list(S.BLEND_MODELS[1:])} or remove blend_share")
    return S.StressInjection(
        stress_form=t.choice("stress_form", S.STRESS_FORMS, d.stress_form),
        eddy_viscosity_cap=t.number("eddy_viscosity_cap", d.eddy_viscosity_cap, POSITIVE,
                                    "the largest optimal eddy viscosity taken, as nu_t / nu"),
        blend_model=blend_model,
        blend_share=share,
    )


def _reference(ctx: _Ctx, data: Any, model: S.ModelSettings) -> S.ReferenceSettings:
    """[reference]: the reference data and what a run does with them."""
    t = _Table(ctx, ("reference",), data, REFERENCE_KEYS, "[reference]")
    d = S.ReferenceSettings()
    path = _reference_path(ctx, t.data["data"]) if t.has("data") else None
    names_given = t.table("names", {})
    names: dict[str, str] = {}
    for q, col in names_given.items():
        if not isinstance(col, str) or not col:
            raise t.fail("names", f"{q!r} = {describe(col)}: give the column or field name as a quoted string, "
                         'e.g. names = { u = "U_mean", R_xy = "uv" }')
        names[str(q)] = col
    regions: dict[str, S.Region] = {}
    for name, spec in t.table("regions", {}).items():
        path_r = ("reference", "regions", str(name))
        if not isinstance(name, str) or not _PROBE_NAME.match(name):
            raise ctx.error(path_r, "use letters, digits, '_', '-' and '.' in a region name, e.g. "
                            "[reference.regions.wake]")
        if name == "all":
            raise ctx.error(path_r, "'all' is the whole mesh, always reported; give the region another name")
        rt = _Table(ctx, path_r, spec, REGION_KEYS, "a region")
        box = None
        if rt.has("box"):
            box = _four_numbers(rt, "box", "[xmin, xmax, ymin, ymax]")
            if not (box[0] < box[1] and box[2] < box[3]):
                raise rt.fail("box", f"needs xmin < xmax and ymin < ymax, got {list(box)}")
        band = None
        if rt.has("wall_distance"):
            v = rt.data["wall_distance"]
            if isinstance(v, np.ndarray):
                v = v.tolist()
            if not isinstance(v, (list, tuple)) or len(v) != 2:
                raise rt.fail("wall_distance", f"must be [dmin, dmax] (two numbers), got {describe(v)}")
            band = tuple(check_number(c, lambda m, t=rt: t.fail("wall_distance", m)) for c in v)
            if not (0.0 <= band[0] < band[1]):
                raise rt.fail("wall_distance", f"needs 0 <= dmin < dmax, got {list(band)}")
        if box is None and band is None:
            raise ctx.error(path_r, "give box = [xmin, xmax, ymin, ymax] and/or wall_distance = [dmin, dmax]")
        regions[name] = S.Region(box=box, wall_distance=band)
    out = S.ReferenceSettings(
        data=path, names=names, outside=t.choice("outside", S.REFERENCE_OUTSIDE, d.outside), regions=regions,
        freeze_velocity=t.boolean("freeze_velocity", d.freeze_velocity),
        write_features=t.boolean("write_features", d.write_features),
    )
    if out.freeze_velocity and model.turbulence in ("none", "reference-stress"):
        raise t.fail("freeze_velocity", "an a-priori run solves only a turbulence model's equations on the reference "
                     f"velocity; model.turbulence = {model.turbulence!r} has none: set it to 'spalart-allmaras' or "
                     "'k-omega-sst'")
    return out


def _reference_path(ctx: _Ctx, v: Any) -> Path:
    """An existing file (CSV point cloud or mesh file with data) or result folder."""
    if isinstance(v, os.PathLike):
        v = os.fspath(v)
    if not isinstance(v, str) or not v.strip():
        raise ctx.error(("reference", "data"), "must be the path of a CSV point cloud, a mesh file with data or a "
                        f"result folder (a quoted string), got {describe(v)}")
    def fail(msg: str) -> CaseError:
        return ctx.error(("reference", "data"), msg)

    p = check_path_text(v, fail, "reference data").expanduser()
    full = p if p.is_absolute() else ctx.base / p
    try:
        full = full.resolve()
    except (OSError, RuntimeError):  # a symbolic-link loop: input_file names it
        pass
    if not full.exists() and not full.is_symlink():
        rel = "" if p.is_absolute() else f" (relative paths start from {ctx.base})"
        raise fail(f"{full} does not exist{rel}; give a CSV point cloud, a mesh file with point or cell data, or "
                   "the output folder of a run")
    if full.is_dir():
        return full  # a result folder (its fields.vtu is checked when read)
    return input_file(full, "reference data", fail=fail)


def _four_numbers(t: _Table, key: str, form: str) -> tuple[float, float, float, float]:
    v = t.data[key]
    if isinstance(v, np.ndarray):
        v = v.tolist()
    if not isinstance(v, (list, tuple)) or len(v) != 4:
        raise t.fail(key, f"must be a list of 4 numbers {form}, got {describe(v)}")
    w = [check_number(c, lambda m, i=i: t.fail(key, f"item {i + 1} {m}")) for i, c in enumerate(v)]
    return (w[0], w[1], w[2], w[3])


def _initial(ctx: _Ctx, data: Any) -> S.InitialState:
    t = _Table(ctx, ("initial",), data, TABLE_KEYS["initial"], "[initial]")
    from_result = None
    if t.has("from_result"):
        if t.has("velocity"):
            raise t.fail("velocity", "the start velocity comes from from_result; remove initial.velocity")
        from_result = _check_result_folder(ctx, ("initial", "from_result"), t.data["from_result"])
    return S.InitialState(
        velocity=t.vector("velocity", (0.0, 0.0)),
        pressure=t.number("pressure", 0.0),
        nu_tilde_ratio=t.number("nu_tilde_ratio", 3.0, NON_NEGATIVE, "the initial ratio nu_tilde / nu"),
        turbulence_intensity=t.number("turbulence_intensity", S.DEFAULT_TURBULENCE_INTENSITY, POSITIVE,
                                      "the initial sqrt(2k/3) / |u| (k-omega SST)"),
        eddy_viscosity_ratio=t.number("eddy_viscosity_ratio", S.DEFAULT_EDDY_VISCOSITY_RATIO, POSITIVE,
                                      "the initial nu_t / nu (k-omega SST)"),
        from_result=from_result,
    )


def _check_result_folder(ctx: _Ctx, path: tuple[str, ...], v: Any) -> Path:
    """An existing folder holding fields.vtu (the output folder of a run)."""
    from fvrans.reference.source import RESULT_FIELDS

    if isinstance(v, os.PathLike):
        v = os.fspath(v)
    if not isinstance(v, str) or not v.strip():
        raise ctx.error(path, f"must be the path of a result folder (a quoted string), got {describe(v)}")
    p = Path(v).expanduser()
    full = (p if p.is_absolute() else ctx.base / p).resolve()
    rel = "" if p.is_absolute() else f" (relative paths start from {ctx.base})"
    if not full.is_dir():
        raise ctx.error(path, f"the result folder {full} does not exist{rel}; give the folder a run wrote "
                        "(fvrans run ... --out FOLDER)")
    if not (full / RESULT_FIELDS).is_file():
        raise ctx.error(path, f"{full} holds no {RESULT_FIELDS}; give the output folder of a run that wrote "
                        "its fields (output.write_fields = true)")
    return full


def _mesh(ctx: _Ctx, data: Any) -> S.MeshSettings:
    t = _Table(ctx, ("mesh",), data, TABLE_KEYS["mesh"], "[mesh]")
    if t.has("file") and t.has("generator"):
        raise ctx.error(("mesh",), "give either file or generator, not both; remove one of them")
    if not t.has("file") and not t.has("generator"):
        raise ctx.error(("mesh",), 'needs file = "path/to/mesh.msh" (relative to the case file) '
                        'or generator = "<name of a function in fvrans.mesh.generate>"')
    renumber = t.boolean("renumber", False)
    pairs = _periodic_pairs(t)
    if t.has("file"):
        if t.has("parameters"):
            raise t.fail("parameters", "only used with mesh.generator; remove it (or use a generator "
                         "instead of mesh.file)")
        return S.MeshSettings(file=_check_path(ctx, ("mesh", "file"), t.data["file"], "mesh file"),
                              renumber=renumber, periodic_pairs=pairs, **_edge_names(t))
    for k in ("edge_tags", "edge_tag_array", "edge_boxes", "unnamed_edges"):
        if t.has(k):
            raise t.fail(k, "only used with mesh.file (a generated mesh names its patches); remove it")
    gen = t.string("generator")
    if not gen.isidentifier():
        raise t.fail("generator", f"{gen!r} is not a generator name; give the name of a function in "
                     "fvrans.mesh.generate, e.g. generator = \"cavity\"")
    params = t.table("parameters", {})
    for k in params:
        if not isinstance(k, str):
            raise t.fail("parameters", f"keys must be strings, got {describe(k)}")
    return S.MeshSettings(generator=gen, parameters=S.copy_data(params), renumber=renumber, periodic_pairs=pairs)


def _periodic_pairs(t: _Table) -> tuple[tuple[str, str], ...]:
    v = t._get("periodic_pairs", [], "")
    if isinstance(v, np.ndarray):
        v = v.tolist()
    need = ('must be a list of patch-name pairs, e.g. periodic_pairs = [["left", "right"]] (the second patch '
            "is the first moved by a translation)")
    if not isinstance(v, (list, tuple)):
        raise t.fail("periodic_pairs", f"{need}, got {describe(v)}")
    out: list[tuple[str, str]] = []
    seen: list[str] = []
    for i, pair in enumerate(v):
        if (not isinstance(pair, (list, tuple)) or len(pair) != 2
                or not all(isinstance(n, str) and n for n in pair)):
            raise t.fail("periodic_pairs", f"{need}; item {i + 1} is {describe(pair)}")
        if pair[0] == pair[1] or pair[0] in seen or pair[1] in seen:
            raise t.fail("periodic_pairs", f"item {i + 1} {list(pair)}: each patch may appear in one pair only, "
                         "and a pair joins two different patches")
        seen += list(pair)
        out.append((pair[0], pair[1]))
    return tuple(out)


def _mean_flow(ctx: _Ctx, data: Any, mesh: S.MeshSettings) -> S.MeanFlow:
    t = _Table(ctx, ("mean_flow",), data, TABLE_KEYS["mean_flow"], "[mean_flow]")
    if not data:
        return S.MeanFlow()
    if not mesh.periodic_pairs:
        raise ctx.error(("mean_flow",), "drives the flow through periodic pairs; add mesh.periodic_pairs "
                        '(e.g. periodic_pairs = [["inlet", "outlet"]]) or remove [mean_flow]')
    if t.has("pressure_gradient") and t.has("bulk_velocity"):
        raise ctx.error(("mean_flow",), "give either pressure_gradient or bulk_velocity, not both; remove one")
    if t.has("pressure_gradient"):
        return S.MeanFlow(pressure_gradient=t.vector("pressure_gradient"))
    bulk = t.vector("bulk_velocity")
    if bulk == (0.0, 0.0):
        raise t.fail("bulk_velocity", "must not be zero (it sets the flow direction); give e.g. [1.0, 0.0]")
    return S.MeanFlow(bulk_velocity=bulk)


def _edge_names(t: _Table) -> dict[str, Any]:
    """The [mesh] keys that name the boundary edges of a file without names."""
    out: dict[str, Any] = {}
    tags = t.table("edge_tags", {})
    names: dict[int, str] = {}
    for k, v in tags.items():
        try:
            tag = int(str(k))
        except ValueError:
            raise t.fail("edge_tags", f"the key {k!r} is not an integer tag; write e.g. "
                         'edge_tags = { 1 = "inlet", 2 = "walls" }') from None
        if not isinstance(v, str) or not v.strip():
            raise t.fail("edge_tags", f"tag {tag} must name a patch (a quoted string), got {describe(v)}")
        names[tag] = v
    out["edge_tags"] = names
    if t.has("edge_tag_array"):
        out["edge_tag_array"] = t.string("edge_tag_array")
    boxes: dict[str, tuple[float, float, float, float]] = {}
    for name, box in t.table("edge_boxes", {}).items():
        if isinstance(box, np.ndarray):
            box = box.tolist()
        need = "must be [xmin, xmax, ymin, ymax], the box holding both ends of the patch's edges"
        if not isinstance(box, (list, tuple)) or len(box) != 4:
            raise t.fail("edge_boxes", f"{name!r} {need}, got {describe(box)}")
        b = [check_number(c, lambda m, i=i, n=name: t.fail("edge_boxes", f"{n!r} item {i + 1} {m}")) for i, c in
             enumerate(box)]
        if not (b[0] <= b[1] and b[2] <= b[3]):
            raise t.fail("edge_boxes", f"{name!r} {need} with xmin <= xmax and ymin <= ymax, got {b}")
        boxes[str(name)] = (b[0], b[1], b[2], b[3])
    out["edge_boxes"] = boxes
    if t.has("unnamed_edges"):
        v = t.string("unnamed_edges")
        if not v.strip():
            raise t.fail("unnamed_edges", "must name a patch, e.g. unnamed_edges = \"walls\"")
        out["unnamed_edges"] = v
    return out


def _boundaries(ctx: _Ctx, data: Mapping[str, Any]) -> dict[str, S.BoundarySpec]:
    if not data:
        raise ctx.error(("boundary",), 'is empty; add one table per mesh patch, e.g. [boundary.walls] '
                        'with kind = "wall"')
    out: dict[str, S.BoundarySpec] = {}
    for name, spec in data.items():
        if not isinstance(name, str):
            raise ctx.error(("boundary",), f"patch names must be strings, got {describe(name)}")
        out[name] = _boundary(ctx, name, spec)
    return out


def _boundary(ctx: _Ctx, name: str, data: Any) -> S.BoundarySpec:
    path = ("boundary", name)
    if not isinstance(data, Mapping):
        raise ctx.error(path, f"must be a table [{format_key(path)}] with kind = one of "
                        f"{_quoted_list(S.BOUNDARY_KINDS)}, got {describe(data)}; each patch gets its "
                        "own table [boundary.<patch name>]")
    if "kind" not in data:
        raise ctx.error(path + ("kind",),
                        f"missing required key; add kind = one of {_quoted_list(S.BOUNDARY_KINDS)}")
    kind_t = _Table(ctx, path, {"kind": data["kind"]}, ("kind",), "")
    kind = kind_t.choice("kind", S.BOUNDARY_KINDS)
    allowed = S.BOUNDARY_KEYS[kind]
    for k in data:
        if k not in allowed:
            users = [kd for kd, keys in S.BOUNDARY_KEYS.items() if k in keys]
            why = (f"; {k} is used by kind(s) {_quoted_list(users)} only" if users
                   else did_you_mean(str(k), allowed))
            raise ctx.error(path + (str(k),), f"not a key of kind {kind!r}{why}; a patch of kind {kind!r} takes: "
                            f"{', '.join(allowed)} — remove the key or change the kind")
    t = _Table(ctx, path, data, allowed, f"a patch of kind {kind!r}")
    if kind == "wall":
        v = t.data.get("velocity")
        if callable(v) and not isinstance(v, (list, tuple, np.ndarray)) and not hasattr(v, "data"):
            return S.BoundarySpec(kind, velocity=v)  # a Python function of the face centres
        return S.BoundarySpec(kind, velocity=t.vector_or_formula("velocity", (0.0, 0.0)))
    if kind == "outflow-pressure":
        return S.BoundarySpec(kind, pressure=t.number_or_formula("pressure", 0.0))
    if kind == "symmetry":
        return S.BoundarySpec(kind)
    if kind == "outer-flow":
        return S.BoundarySpec(
            kind,
            velocity=t.vector("velocity", hint="add velocity = [u, v], the free-stream velocity"),
            pressure=t.number_or_formula("pressure", 0.0),
            nu_tilde_ratio=t.number_or_formula("nu_tilde_ratio", 3.0, NON_NEGATIVE, "the free-stream nu_tilde / nu"),
            **_sst_inflow(t),
        )
    return _inlet(ctx, t)


def _sst_inflow(t: _Table) -> dict[str, Any]:
    """Inflow keys of the k-omega SST model (defaults when absent; numbers or formulas)."""
    return {
        "turbulence_intensity": t.number_or_formula("turbulence_intensity", S.DEFAULT_TURBULENCE_INTENSITY,
                                                    NON_NEGATIVE, "the inflow sqrt(2k/3) / |u| (k-omega SST)"),
        "eddy_viscosity_ratio": t.number_or_formula("eddy_viscosity_ratio", S.DEFAULT_EDDY_VISCOSITY_RATIO, POSITIVE,
                                                    "the inflow nu_t / nu (k-omega SST)"),
    }


def _inlet(ctx: _Ctx, t: _Table) -> S.BoundarySpec:
    from fvrans.case.profile import resolve_profile

    has_v, has_p = t.has("velocity"), t.has("profile")
    if has_v and has_p:
        raise ctx.error(t.path, "give either velocity or profile, not both; remove one of them")
    if not has_v and not has_p:
        raise ctx.error(t.path, 'needs velocity = [u, v] or profile = "file.csv" (a CSV table with '
                        "a header line; see profile_columns)")
    if t.has("profile_columns") and not has_p:
        raise t.fail("profile_columns", "only used with profile; remove it or give profile = \"file.csv\"")
    if has_v:
        v = t.data["velocity"]
        if isinstance(v, str) and v == S.CALLABLE_TEXT:
            raise t.fail("velocity", f"{S.CALLABLE_TEXT!r} stands for a Python function, which cannot be "
                         "restored from text; set the function again with case.set(...)")
        if callable(v) and not isinstance(v, (list, tuple, np.ndarray)) and not hasattr(v, "data"):
            velocity: S.Velocity = v
        else:
            velocity = t.vector_or_formula("velocity")
        ratio = t.number_or_formula("nu_tilde_ratio", 3.0, NON_NEGATIVE, "the inflow nu_tilde / nu")
        return S.BoundarySpec("inflow-velocity", velocity=velocity, nu_tilde_ratio=ratio, **_sst_inflow(t))
    from fvrans.case.profile import MAX_PROFILE_BYTES

    profile = _check_path(ctx, t.path + ("profile",), t.data["profile"], "inlet profile file", MAX_PROFILE_BYTES)
    given = t.table("profile_columns", {})
    _Table(ctx, t.path + ("profile_columns",), given, S.PROFILE_COLUMN_KEYS, "profile_columns")
    columns = resolve_profile(profile, given, lambda key, m: ctx.error(t.path + key, m),
                              constant_given=t.has("nu_tilde_ratio"))
    if "nu_tilde_ratio" in columns:
        if t.has("nu_tilde_ratio"):
            raise t.fail("nu_tilde_ratio", f"the profile {profile} already gives nu_tilde_ratio in column "
                         f"{columns['nu_tilde_ratio']!r}; remove this key (or the column)")
        nut = None
    else:
        nut = t.number_or_formula("nu_tilde_ratio", 3.0, NON_NEGATIVE, "the inflow nu_tilde / nu")
    return S.BoundarySpec("inflow-velocity", profile=profile, profile_columns=columns, nu_tilde_ratio=nut,
                          **_sst_inflow(t))


def _solver(ctx: _Ctx, data: Any, turbulence: str = "none") -> S.SolverSettings:
    t = _Table(ctx, ("solver",), data, TABLE_KEYS["solver"], "[solver]")
    coupling = t.choice("coupling", S.COUPLINGS, "simplec")
    return S.SolverSettings(
        coupling=coupling,
        max_iterations=t.integer("max_iterations", 5000, AT_LEAST_ONE, "the number of outer iterations"),
        tolerance=t.number("tolerance", 1e-6, POSITIVE, "the normalised-imbalance tolerance"),
        relax_velocity=t.number("relax_velocity", S.DEFAULT_RELAX_VELOCITY[coupling], UNIT,
                                "an under-relaxation factor"),
        relax_pressure=t.number("relax_pressure", S.DEFAULT_RELAX_PRESSURE[coupling], UNIT,
                                "an under-relaxation factor"),
        relax_turbulence=t.number("relax_turbulence", 1.0, UNIT, "an under-relaxation factor"),
        convection=t.choice("convection", S.CONVECTION_SCHEMES, "linear-upwind"),
        turbulence_convection=t.choice("turbulence_convection", S.CONVECTION_SCHEMES, "upwind"),
        gradient=t.choice("gradient", S.GRADIENT_METHODS, "least-squares"),
        limiter=t.choice("limiter", S.LIMITERS, "none"),
        pressure_tolerance=t.number("pressure_tolerance", 0.01, OPEN_UNIT, "a relative tolerance"),
        momentum_tolerance=t.number("momentum_tolerance", 0.1, OPEN_UNIT, "a relative tolerance"),
        momentum_solver=t.choice("momentum_solver", S.MOMENTUM_SOLVERS, "amg"),
        momentum_max_iterations=t.integer("momentum_max_iterations", 20, AT_LEAST_ONE,
                                          "Krylov iterations per momentum solve"),
        momentum_sweeps=t.integer("momentum_sweeps", 5, AT_LEAST_ONE, "sweeps per solve"),
        turbulence_solver=t.choice("turbulence_solver", S.TURBULENCE_SOLVERS, "amg"),
        turbulence_tolerance=t.number("turbulence_tolerance", S.DEFAULT_TURBULENCE_TOLERANCE.get(turbulence, 0.01),
                                      OPEN_UNIT, "a relative tolerance"),
        turbulence_max_iterations=t.integer("turbulence_max_iterations", 20, AT_LEAST_ONE,
                                            "Krylov iterations or sweeps per turbulence solve"),
        amg_rebuild_every=t.integer("amg_rebuild_every", 20, AT_LEAST_ONE, "outer iterations"),
        divergence_factor=t.number("divergence_factor", 1e5, ABOVE_ONE,
                                   "growth of a residual above its minimum"),
        checkpoint_every=t.integer("checkpoint_every", 0, NON_NEGATIVE,
                                   "outer iterations; 0 turns checkpoints off"),
        conservative_start=t.boolean("conservative_start", True),
        turbulence_cfl=t.number("turbulence_cfl", S.DEFAULT_TURBULENCE_CFL[coupling], NON_NEGATIVE,
                                "the CFL number of the turbulence pseudo-time steps; 0 turns them off"),
        system_solver=t.choice("system_solver", S.SYSTEM_SOLVERS, "by-size"),
        system_tolerance=t.number("system_tolerance", 0.01, OPEN_UNIT, "a relative tolerance"),
        momentum_start_shift=t.number("momentum_start_shift", 0.0, NON_NEGATIVE,
                                      "a fraction of the momentum diagonal; 0 turns the start-up shift off"),
        threads=t.integer("threads", 0, NON_NEGATIVE,
                          "threads of the numerical kernels; 0 takes FVRANS_THREADS or every idle core"),
    )


def _output(ctx: _Ctx, data: Any, boundaries: Mapping[str, S.BoundarySpec]) -> S.OutputSettings:
    t = _Table(ctx, ("output",), data, TABLE_KEYS["output"], "[output]")
    walls = [n for n, b in boundaries.items() if b.kind == "wall"]
    given = t._get("wall_patches", [], "")
    if isinstance(given, np.ndarray):
        given = given.tolist()
    if not isinstance(given, (list, tuple)) or not all(isinstance(n, str) for n in given):
        raise t.fail("wall_patches", f"must be a list of patch names (quoted strings), got {describe(given)}")
    names: list[str] = []
    for n in given:
        if n not in boundaries:
            raise t.fail("wall_patches", f"{n!r} has no [{format_key(('boundary', n))}] table"
                         f"{did_you_mean(n, list(boundaries))}; wall patches of this case: "
                         f"{_quoted_list(walls)}")
        if boundaries[n].kind != "wall":
            raise t.fail("wall_patches", f"{n!r} is of kind {boundaries[n].kind!r}; wall quantities "
                         f"(shear stress, forces) need kind = \"wall\" — wall patches: {_quoted_list(walls)}")
        if n not in names:
            names.append(n)
    u_ref = t._get("reference_velocity", S.INFLOW, "")
    if isinstance(u_ref, str) and u_ref != S.INFLOW:
        raise t.fail("reference_velocity", f'must be a number > 0 (the velocity U in 1/2 rho U^2) or "{S.INFLOW}" '
                     f"(the speed of the case's inflow), got {describe(u_ref)}")
    if u_ref != S.INFLOW:
        u_ref = t.number("reference_velocity", rule=PHYSICAL, meaning="the velocity U in 1/2 rho U^2")
    if t.has("flow_angle") and t.has("flow_direction"):
        raise t.fail("flow_angle", "give flow_angle (degrees from the x axis) or flow_direction = [x, y], not both")
    direction = None
    if t.has("flow_direction"):
        direction = t.vector("flow_direction")
        if direction == (0.0, 0.0):
            raise t.fail("flow_direction", "must be a non-zero vector [x, y] along the free stream")
    return S.OutputSettings(
        wall_patches=tuple(names or walls),
        reference_velocity=None if u_ref == S.INFLOW else u_ref,
        reference_pressure=t.number("reference_pressure", 0.0),
        reference_length=t.number("reference_length", 1.0, PHYSICAL, "the length of force coefficients"),
        write_fields=t.boolean("write_fields", True),
        map_window=_window(t),
        reference_density=t.number("reference_density", rule=PHYSICAL, meaning="the density in 1/2 rho U^2")
        if t.has("reference_density") else None,
        flow_direction=direction,
        flow_angle=t.number("flow_angle", meaning="degrees") if t.has("flow_angle") else None,
        moment_centre=t.vector("moment_centre", (0.0, 0.0)),
        force_groups=_force_groups(t, boundaries, names or walls),
    )


def _force_groups(t: _Table, boundaries: Mapping[str, S.BoundarySpec], reported: Sequence[str]) -> dict:
    """``output.force_groups = { name = ["patch", ...] }``: wall patches whose forces are summed."""
    data = t.table("force_groups", {})
    walls = [n for n, b in boundaries.items() if b.kind == "wall"]
    out: dict[str, tuple[str, ...]] = {}
    for g, members in data.items():
        key = ("force_groups", str(g))
        if not isinstance(g, str) or not g.strip():
            raise t.ctx.error(t.path + ("force_groups",), f"group names must be non-empty strings, got {g!r}")
        if isinstance(members, np.ndarray):
            members = members.tolist()
        if not isinstance(members, (list, tuple)) or not members or not all(isinstance(m, str) for m in members):
            raise t.ctx.error(t.path + key, f"must be a non-empty list of wall patch names, got {describe(members)}")
        for m in members:
            if m not in walls:
                why = (f"is of kind {boundaries[m].kind!r}" if m in boundaries else
                       f"has no [{format_key(('boundary', m))}] table{did_you_mean(m, walls)}")
                raise t.ctx.error(t.path + key, f"{m!r} {why}; forces are summed over wall patches: "
                                  f"{_quoted_list(walls)}")
            if m not in reported:
                raise t.ctx.error(t.path + key, f"{m!r} is not in output.wall_patches ({_quoted_list(reported)}); "
                                  "add it there")
        if len(set(members)) != len(members):
            raise t.ctx.error(t.path + key, f"names a patch twice: {members}")
        out[g] = tuple(members)
    return out


def _window(t: _Table) -> tuple[float, float, float, float] | None:
    if not t.has("map_window"):
        return None
    v = t.data["map_window"]
    if isinstance(v, np.ndarray):
        v = v.tolist()
    need = "must be a list of 4 numbers [xmin, xmax, ymin, ymax]"
    if not isinstance(v, (list, tuple)) or len(v) != 4:
        raise t.fail("map_window", f"{need}, got {describe(v)}")
    w = [check_number(c, lambda m, i=i: t.fail("map_window", f"item {i + 1} {m}")) for i, c in enumerate(v)]
    if not (w[0] < w[1] and w[2] < w[3]):
        raise t.fail("map_window", f"{need} with xmin < xmax and ymin < ymax, got {w}")
    return (w[0], w[1], w[2], w[3])


def _probes(ctx: _Ctx, data: Any) -> dict[str, S.Probe]:
    if not isinstance(data, Mapping):
        raise ctx.error(("probes",), f"must hold one table per probe, [probes.<name>] with at = [x, y] (a point) or "
                        f"start = [x, y] and end = [x, y] (a line), got {describe(data)}")
    out: dict[str, S.Probe] = {}
    for name, spec in data.items():
        path = ("probes", str(name))
        if not isinstance(name, str) or not _PROBE_NAME.match(name):
            raise ctx.error(path, "a probe name becomes a file name (profiles/<name>.csv): use letters, digits, "
                            "'_', '-' and '.', e.g. [probes.wake_x2]")
        if not isinstance(spec, Mapping):
            raise ctx.error(path, f"must be a table [{format_key(path)}] with at = [x, y] (a point probe) or "
                            f"start = [x, y], end = [x, y] and optionally points = 101 (a line probe), "
                            f"got {describe(spec)}")
        if "at" in spec:
            t = _Table(ctx, path, spec, ("at",), "a point probe (at = [x, y]; a line probe has start, end, points "
                       "instead)")
            out[name] = S.ProbePoint(at=t.vector("at"))
            continue
        t = _Table(ctx, path, spec, PROBE_KEYS, "a line probe")
        start = t.vector("start", hint="add start = [x, y], the first point of the line (or at = [x, y] for a "
                         "point probe)")
        end = t.vector("end", hint="add end = [x, y], the last point of the line")
        if start == end:
            raise t.fail("end", f"equals start {list(start)}; a line probe needs two different points "
                         "(a point probe takes at = [x, y])")
        points = t.integer("points", 101, (lambda v: 2 <= v <= MAX_PROBE_POINTS, f">= 2 and <= {MAX_PROBE_POINTS}"),
                           "the number of sample points")
        out[name] = S.ProbeLine(start=start, end=end, points=points)
    return out


def _derived(ctx: _Ctx, data: Any, probes: Mapping[str, S.Probe],
             model: S.ModelSettings) -> dict[str, S.DerivedScalar]:
    if not isinstance(data, Mapping):
        raise ctx.error(("derived",), f"must hold one table per scalar, [derived.<name>] with kind = one of "
                        f"{_quoted_list(S.DERIVED_KINDS)}, got {describe(data)}")
    quantities = _probe_quantities(model)
    points = [n for n, p in probes.items() if isinstance(p, S.ProbePoint)]
    lines = [n for n, p in probes.items() if isinstance(p, S.ProbeLine)]
    out: dict[str, S.DerivedScalar] = {}
    for name, spec in data.items():
        path = ("derived", str(name))
        if not isinstance(name, str) or not _PROBE_NAME.match(name):
            raise ctx.error(path, "use letters, digits, '_', '-' and '.' in the name, e.g. [derived.dp_front_back]")
        if name in probes:
            raise ctx.error(path, f"a probe is also called {name!r}; give the derived scalar another name")
        if not isinstance(spec, Mapping):
            raise ctx.error(path, f"must be a table [{format_key(path)}] with kind = one of "
                            f"{_quoted_list(S.DERIVED_KINDS)}, got {describe(spec)}")
        if "kind" not in spec:
            raise ctx.error(path + ("kind",),
                            f"missing required key; add kind = one of {_quoted_list(S.DERIVED_KINDS)}")
        kind = _Table(ctx, path, {"kind": spec["kind"]}, ("kind",), "").choice("kind", S.DERIVED_KINDS)
        if kind == "difference":
            t = _Table(ctx, path, spec, ("kind", "probes", "quantity"), "a difference")
            given = t._get("probes", _REQUIRED, 'add probes = ["a", "b"], two point probes: the value at a minus at b')
            if isinstance(given, np.ndarray):
                given = given.tolist()
            if not (isinstance(given, (list, tuple)) and len(given) == 2 and all(isinstance(g, str) for g in given)):
                raise t.fail("probes", f"must be a list of two point-probe names [\"a\", \"b\"], got {describe(given)}")
            for g in given:
                if g not in points:
                    raise t.fail("probes", f"{g!r} is not a point probe of this case{did_you_mean(g, points)}; "
                                 f"point probes ([probes.<name>] with at = [x, y]): {_quoted_list(points) or 'none'}")
            quantity = t.choice("quantity", quantities, "p")
            out[name] = S.DerivedScalar(kind, (given[0], given[1]), quantity)
        else:
            t = _Table(ctx, path, spec, ("kind", "probe", "quantity"), "a recirculation length")
            line = t.string("probe", hint='add probe = "<name of a line probe>" along which the flow reverses')
            if line not in lines:
                raise t.fail("probe", f"{line!r} is not a line probe of this case{did_you_mean(line, lines)}; "
                             f"line probes ([probes.<name>] with start and end): {_quoted_list(lines) or 'none'}")
            out[name] = S.DerivedScalar(kind, (line,), t.choice("quantity", quantities, "u"))
    return out


def _probe_quantities(model: S.ModelSettings) -> tuple[str, ...]:
    """u, v, p and, for a turbulence model, its transported variables and the eddy-viscosity ratio."""
    if model.turbulence == "none":
        return PROBE_QUANTITIES
    from fvrans.models import EDDY_VISCOSITY_RATIO, model_class

    key = model.injection.blend_model if model.turbulence == "reference-stress" else model.turbulence
    variables = model_class(key).variables if key != "none" else ()
    return (*PROBE_QUANTITIES, *variables, EDDY_VISCOSITY_RATIO)


def _monitor(ctx: _Ctx, data: Any) -> S.MonitorSettings:
    t = _Table(ctx, ("monitor",), data, MONITOR_KEYS, "[monitor]")
    d = S.MonitorSettings()
    return S.MonitorSettings(
        settle=t.boolean("settle", d.settle),
        iteration_error=t.number("iteration_error", d.iteration_error, OPEN_UNIT,
                                 "the estimated iteration error allowed, relative to each quantity's scale"),
        window=t.integer("window", d.window, (lambda v: v >= 3, ">= 3"), "iterations"),
        show=t.string("show", d.show),
    )


# ------------------------------------------------------------------------------------------
# dotted keys and changes
# ------------------------------------------------------------------------------------------
def parse_dotted_key(key: str, label: str = "<in memory>") -> tuple[str, ...]:
    """Split a dotted key with TOML rules (quote parts holding dots or spaces).

    >>> parse_dotted_key('boundary."outer wall".velocity')
    ('boundary', 'outer wall', 'velocity')
    """
    bad = CaseError(f"{label}: {key!r} is not a valid dotted key; write e.g. solver.relax_velocity "
                    'or boundary."patch name".velocity')
    if not isinstance(key, str) or not key.strip() or "\n" in key or "\r" in key:
        raise bad
    try:
        d: Any = tomllib.loads(f"{key} = 0")
    except tomllib.TOMLDecodeError:
        raise bad from None
    path: list[str] = []
    while isinstance(d, dict):
        if len(d) != 1:
            raise bad
        k = next(iter(d))
        path.append(k)
        d = d[k]
    if d != 0 or isinstance(d, bool):
        raise bad
    return tuple(path)


def apply_changes(data: dict[str, Any], changes: Mapping[str, Any], label: str) -> None:
    """Set dotted keys in nested ``data`` in place; a value None deletes the key."""
    for key, value in changes.items():
        path = parse_dotted_key(key, label)
        node = data
        for i, part in enumerate(path[:-1]):
            nxt = node.get(part)
            if nxt is None:
                if value is None:
                    break
                nxt = node[part] = {}
            elif not isinstance(nxt, dict):
                if isinstance(nxt, Mapping):
                    nxt = node[part] = dict(nxt)
                else:
                    raise CaseError(f"{label}: cannot set {key!r}: {format_key(path[: i + 1])} is "
                                    f"{describe(nxt)}, not a table")
            node = nxt
        else:
            if value is None:
                node.pop(path[-1], None)
            else:
                node[path[-1]] = S.copy_data(value)


def unknown_patch_error(case: S.Case, patch: str) -> CaseError:
    names = list(case.boundaries)
    return CaseError(f"{case.label}: no boundary condition for patch {patch!r}{did_you_mean(patch, names)}; "
                     f"the case has: {_quoted_list(names)}")
