"""The sweep spec: a base case, the parameters to vary, the sampling plan and the outputs to collect.

A spec file (TOML, every key checked; unknown keys are refused)::

    title = "Channel at three Reynolds numbers"
    case = "channel.toml"              # the base case, relative to the spec file

    [plan]
    sampling = "factorial"             # factorial | latin-hypercube | sobol
    # count = 16                       # sampled plans: number of runs
    # seed = 1                         # sampled plans: seed of the generator (default 0)
    # warm_start = true                # start each run from a neighbour's converged result

    [[parameter]]
    key = "fluid.viscosity"            # a dotted case key, as for --set
    name = "mu"                        # optional column name (default: the key)
    start = 0.02                       # a range ...
    stop = 0.1
    count = 3                          # factorial plans only
    spacing = "log"                    # linear (default) | log

    [[parameter]]
    key = "boundary.inlet.velocity"
    values = [[1.0, 0.0], [2.0, 0.0]]  # ... or a list of values

    [[output]]
    name = "drag"
    summary = "walls.lower_wall.forces.Cd"   # a number of summary.json by dotted path

    [[output]]
    name = "p_4"
    wall = "lower_wall"                # a wall patch of the case
    quantity = "p_wall"                # a column of wall/<patch>.csv
    x = 4.0                            # the station (first crossing along the patch)

A factorial plan runs every combination of the parameters' values (the first parameter varies
slowest). A Latin-hypercube or Sobol plan (``scipy.stats.qmc``) draws ``count`` points in the unit
cube and maps each coordinate onto its parameter: onto [start, stop] (uniformly, or uniformly in
log for ``spacing = "log"``), or onto one of the listed ``values``.

With ``warm_start = true`` consecutive design points (plan order; sampled plans sorted by their
values) run in short chains, each run starting from the converged result of the one before when
their meshes have the same topology (same parameters of the mesh, or a generator that keeps its
topology); results then agree with cold starts to the solver tolerance, and iteration counts differ.

The same from Python:

>>> from fvrans.sweep import Output, Parameter, Sweep
>>> sweep = Sweep(
...     case="cases/channel_poiseuille.toml",
...     parameters=[Parameter("fluid.viscosity", start=0.01, stop=0.04, count=3, spacing="log")],
...     outputs=[Output("iters", summary="iterations")],
... )
>>> [p.name for p in sweep.parameters], sweep.sampling
(['fluid.viscosity'], 'factorial')
"""

from __future__ import annotations

import difflib
import inspect
import math
import numbers
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from fvrans.case import Case, load_case, read_toml
from fvrans.case.schema import CALLABLE_TEXT
from fvrans.case.validate import describe, parse_dotted_key
from fvrans.errors import CaseError

SAMPLINGS = ("factorial", "latin-hypercube", "sobol")
SPACINGS = ("linear", "log")
#: columns of wall/<patch>.csv that an output may sample at a station
WALL_QUANTITIES = ("tau_w", "cf", "p_wall", "cp", "u_tau", "y_plus", "d_perp", "y", "s", "traction_x", "traction_y")
#: column names the results table uses itself
RESERVED_COLUMNS = ("run", "key", "status", "converged", "iterations", "wall_seconds", "error")

_TOP_KEYS = ("title", "case", "plan", "parameter", "output")
_PLAN_KEYS = ("sampling", "count", "seed", "warm_start")
_PARAMETER_KEYS = ("key", "name", "values", "start", "stop", "count", "spacing")
_OUTPUT_KEYS = ("name", "summary", "wall", "quantity", "x")

Value = Any  # a number, a string, a bool or a list of numbers: whatever the case key takes


@dataclass(frozen=True)
class Parameter:
    """One varied case setting: ``values`` listed, or a range ``start``..``stop`` (``count``
    values for a factorial plan; ``spacing`` linear or log). ``name`` is its column name."""

    key: str
    values: tuple[Value, ...] | None = None
    start: float | None = None
    stop: float | None = None
    count: int | None = None
    spacing: str = "linear"
    name: str = ""

    def __post_init__(self) -> None:
        if not self.name:
            object.__setattr__(self, "name", str(self.key))
        if self.values is not None and not isinstance(self.values, tuple):
            object.__setattr__(self, "values", tuple(self.values) if _is_list(self.values) else self.values)

    @property
    def is_range(self) -> bool:
        return self.values is None


@dataclass(frozen=True)
class Output:
    """One collected quantity: a number of summary.json (``summary`` = dotted path), or a wall
    quantity (a column of ``wall/<patch>.csv``) interpolated linearly at the station ``x``."""

    name: str
    summary: str | None = None
    wall: str | None = None
    quantity: str | None = None
    x: float | None = None


@dataclass(frozen=True)
class Sweep:
    """A whole sweep. ``case`` is a case file or a loaded :class:`~fvrans.case.Case`;
    ``count`` and ``seed`` belong to the sampled plans (``"latin-hypercube"``, ``"sobol"``);
    ``warm_start`` chains neighbouring runs (see the module docstring)."""

    case: Case | str | Path
    parameters: Sequence[Parameter]
    outputs: Sequence[Output] = ()
    sampling: str = "factorial"
    count: int | None = None
    seed: int = 0
    warm_start: bool = False
    title: str = ""
    source: Path | None = field(default=None, compare=False)

    def __post_init__(self) -> None:
        object.__setattr__(self, "parameters", tuple(self.parameters))
        object.__setattr__(self, "outputs", tuple(self.outputs))

    @property
    def label(self) -> str:
        return str(self.source) if self.source is not None else "<in memory>"

    def base_case(self) -> Case:
        """The base case (loaded when given as a path)."""
        return self.case if isinstance(self.case, Case) else load_case(self.case)


# ------------------------------------------------------------------------------------------
# checks shared by spec files and Python objects
# ------------------------------------------------------------------------------------------
def _is_list(v: Any) -> bool:
    return isinstance(v, (list, tuple)) or (hasattr(v, "tolist") and getattr(v, "ndim", 0) > 0)


def _is_number(v: Any) -> bool:
    return isinstance(v, numbers.Real) and not isinstance(v, bool) and math.isfinite(float(v))


def _did_you_mean(word: str, choices: Sequence[str]) -> str:
    close = difflib.get_close_matches(str(word), list(choices), n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _choice(where: str, v: Any, allowed: Sequence[str]) -> str:
    if not isinstance(v, str) or v not in allowed:
        hint = _did_you_mean(v, allowed) if isinstance(v, str) else ""
        raise CaseError(f"{where}: {describe(v)} is not allowed{hint}; use one of "
                        f"{', '.join(repr(a) for a in allowed)}")
    return v


def _count(where: str, v: Any, minimum: int = 1) -> int:
    if isinstance(v, bool) or not isinstance(v, numbers.Integral) or int(v) < minimum:
        raise CaseError(f"{where}: must be an integer >= {minimum}, got {describe(v)}")
    return int(v)


def _check_parameter(label: str, i: int, p: Parameter, sampled: bool) -> None:
    where = f"{label}: parameter {i + 1}"
    if not isinstance(p.key, str):
        raise CaseError(f"{where}.key: must be a dotted case key in quotes, e.g. \"fluid.viscosity\", "
                        f"got {describe(p.key)}")
    parse_dotted_key(p.key, f"{where}.key")
    where = f"{label}: parameter {i + 1} ({p.key})"
    if not isinstance(p.name, str) or not p.name.strip() or any(c in p.name for c in ",\n\r\""):
        raise CaseError(f"{where}.name: give a column name without commas, quotes or line breaks, "
                        f"got {describe(p.name)}")
    _choice(f"{where}.spacing", p.spacing, SPACINGS)
    has_range = p.start is not None or p.stop is not None
    if p.values is not None and (has_range or p.count is not None):
        raise CaseError(f"{where}: give either values = [...] or start, stop (and count), not both")
    if p.values is not None:
        if not isinstance(p.values, tuple) or not p.values:
            raise CaseError(f"{where}.values: must be a non-empty list of values, got {describe(p.values)}")
        if p.spacing != "linear":
            raise CaseError(f"{where}.spacing: applies to ranges (start, stop) only; remove it")
        return
    if p.start is None or p.stop is None:
        raise CaseError(f"{where}: give values = [...] or a range start = ..., stop = ...")
    for k in ("start", "stop"):
        v = getattr(p, k)
        if not _is_number(v):
            raise CaseError(f"{where}.{k}: must be a finite number, got {describe(v)} "
                            "(list the values instead for vectors or words)")
    if p.spacing == "log" and not (p.start > 0 and p.stop > 0):
        raise CaseError(f"{where}: spacing = \"log\" needs start and stop > 0, got {p.start!r} and {p.stop!r}")
    if sampled:
        if p.count is not None:
            raise CaseError(f"{where}.count: a sampled plan draws from [start, stop]; the number of runs is "
                            "[plan] count; remove this count")
    else:
        if p.count is None:
            raise CaseError(f"{where}: a range in a factorial plan needs count = <number of values>")
        n = _count(f"{where}.count", p.count)
        if n == 1 and p.start != p.stop:
            raise CaseError(f"{where}.count: 1 value cannot span start = {p.start!r} .. stop = {p.stop!r}; "
                            "give count >= 2 or start = stop")


def _check_output(label: str, i: int, o: Output) -> None:
    if not isinstance(o.name, str) or not o.name.strip() or any(c in o.name for c in ",\n\r\""):
        raise CaseError(f"{label}: output {i + 1}.name: give a column name without commas, quotes or line "
                        f"breaks, got {describe(o.name)}")
    where = f"{label}: output {i + 1} ({o.name})"
    wall_keys = [k for k in ("wall", "quantity", "x") if getattr(o, k) is not None]
    if o.summary is not None:
        if wall_keys:
            raise CaseError(f"{where}: give either summary = \"dotted.path\" or wall, quantity and x, not both")
        if not isinstance(o.summary, str) or not o.summary.strip():
            raise CaseError(f"{where}.summary: must be a dotted path into summary.json in quotes, e.g. "
                            f"\"walls.lower_wall.forces.Cd\", got {describe(o.summary)}")
        return
    if len(wall_keys) != 3:
        missing = [k for k in ("wall", "quantity", "x") if getattr(o, k) is None]
        raise CaseError(f"{where}: give summary = \"dotted.path\", or a wall station with wall = \"<patch>\", "
                        f"quantity = \"<column>\" and x = <station>; missing: {', '.join(missing)}")
    if not isinstance(o.wall, str):
        raise CaseError(f"{where}.wall: must be the name of a wall patch in quotes, got {describe(o.wall)}")
    _choice(f"{where}.quantity", o.quantity, WALL_QUANTITIES)
    if not _is_number(o.x):
        raise CaseError(f"{where}.x: must be a finite number (the station), got {describe(o.x)}")


def check_sweep(sweep: Sweep) -> None:
    """Check a sweep's parameters, plan and outputs (not yet against its case); CaseError naming
    the spec file (or ``<in memory>``), the item and the fix."""
    label = sweep.label
    _choice(f"{label}: plan.sampling", sweep.sampling, SAMPLINGS)
    sampled = sweep.sampling != "factorial"
    if sampled:
        if sweep.count is None:
            raise CaseError(f"{label}: plan.count: a {sweep.sampling} plan needs count = <number of runs>")
        n = _count(f"{label}: plan.count", sweep.count)
        if sweep.sampling == "sobol" and n & (n - 1):
            lo = 1 << (n.bit_length() - 1)
            raise CaseError(f"{label}: plan.count: a Sobol plan keeps its balance only for a power of 2; "
                            f"give {lo} or {2 * lo} (or use sampling = \"latin-hypercube\")")
        if isinstance(sweep.seed, bool) or not isinstance(sweep.seed, numbers.Integral) or sweep.seed < 0:
            raise CaseError(f"{label}: plan.seed: must be an integer >= 0, got {describe(sweep.seed)}")
    if not isinstance(sweep.warm_start, bool):
        raise CaseError(f"{label}: plan.warm_start: must be true or false, got {describe(sweep.warm_start)}")
    if not sampled and sweep.count is not None:
        raise CaseError(f"{label}: plan.count: a factorial plan runs every combination; give the number of "
                        "values per parameter (count in each [[parameter]]) and remove plan.count")
    if not sweep.parameters:
        raise CaseError(f"{label}: no parameters; add a [[parameter]] table with key = \"dotted.case.key\"")
    names: dict[str, str] = {}
    for i, p in enumerate(sweep.parameters):
        if not isinstance(p, Parameter):
            raise CaseError(f"{label}: parameter {i + 1} must be a Parameter, got {describe(p)}")
        _check_parameter(label, i, p, sampled)
        _unique(label, names, p.name, f"parameter {i + 1}")
    keys = [p.key for p in sweep.parameters]
    for k in keys:
        if keys.count(k) > 1:
            raise CaseError(f"{label}: the key {k!r} is varied by two parameters; keep one")
    for i, o in enumerate(sweep.outputs):
        if not isinstance(o, Output):
            raise CaseError(f"{label}: output {i + 1} must be an Output, got {describe(o)}")
        _check_output(label, i, o)
        _unique(label, names, o.name, f"output {i + 1}")


def _unique(label: str, names: dict[str, str], name: str, what: str) -> None:
    if name in RESERVED_COLUMNS:
        raise CaseError(f"{label}: {what}: the name {name!r} is a column of the results table itself; "
                        "choose another name")
    if name in names:
        raise CaseError(f"{label}: {what}: the column name {name!r} is also used by {names[name]}; "
                        "give one of them another name")
    names[name] = what


def check_against_case(sweep: Sweep, case: Case) -> None:
    """Check what can be checked before running: a case that can be sent to workers, parameter
    keys the case accepts (at least one value of each), generator parameters the generator
    takes, and wall outputs on wall patches the case reports."""
    label = sweep.label
    if CALLABLE_TEXT in repr(case.to_dict()):
        raise CaseError(f"{label}: the base case {case.label} holds a Python function (an inlet velocity); "
                        "a sweep needs a case that can be written as TOML — give the velocity as numbers "
                        "or a profile file")
    for i, p in enumerate(sweep.parameters):
        where = f"{label}: parameter {i + 1} ({p.key})"
        path = parse_dotted_key(p.key, where)
        if path[:2] == ("mesh", "parameters") and len(path) == 3 and case.mesh.generator:
            _check_generator_argument(where, case.mesh.generator, path[2])
        tried = list(p.values) if p.values is not None else [p.start, p.stop]
        errors = []
        for v in tried:
            try:
                case.set(p.key, v)
            except CaseError as exc:
                errors.append(str(exc))
        if len(errors) == len(tried):
            raise CaseError(f"{where}: the base case {case.label} accepts none of its values; for "
                            f"{describe(tried[0])}:\n{errors[0]}")
    walls = case.output.wall_patches
    for i, o in enumerate(sweep.outputs):
        if o.wall is not None and o.wall not in walls:
            raise CaseError(f"{label}: output {i + 1} ({o.name}).wall: {o.wall!r} is not a wall patch the "
                            f"case {case.label} reports{_did_you_mean(o.wall, walls)}; its wall patches: "
                            f"{', '.join(repr(w) for w in walls) or 'none'}")


def _check_generator_argument(where: str, generator: str, name: str) -> None:
    from fvrans.case import generator_names
    from fvrans.case.build import GENERATOR_MODULE

    if generator not in generator_names():
        return  # reported by the case itself when the mesh is built
    import importlib

    func = getattr(importlib.import_module(GENERATOR_MODULE), generator)
    try:
        params = inspect.signature(func).parameters
    except (TypeError, ValueError):
        return
    if any(q.kind is q.VAR_KEYWORD for q in params.values()):
        return
    takes = [q.name for q in params.values() if q.kind in (q.POSITIONAL_OR_KEYWORD, q.KEYWORD_ONLY)]
    if name not in takes:
        raise CaseError(f"{where}.key: the mesh generator {generator!r} has no parameter {name!r}"
                        f"{_did_you_mean(name, takes)}; it takes: {', '.join(takes)}")


# ------------------------------------------------------------------------------------------
# spec files
# ------------------------------------------------------------------------------------------
def _table(label: str, where: str, data: Any, allowed: Sequence[str]) -> Mapping[str, Any]:
    if not isinstance(data, Mapping):
        raise CaseError(f"{label}: {where}: must be a table, got {describe(data)}")
    for k in data:
        if k not in allowed:
            raise CaseError(f"{label}: {where}.{k}: unknown key{_did_you_mean(k, allowed)}; "
                            f"{where} takes: {', '.join(allowed)}")
    return data


def _array_of_tables(label: str, data: Mapping[str, Any], key: str) -> list[Any]:
    items = data.get(key, [])
    if not isinstance(items, list):
        raise CaseError(f"{label}: {key}: write each one as a [[{key}]] table (double brackets), "
                        f"got {describe(items)}")
    return items


def sweep_from_dict(data: Mapping[str, Any], source: str | Path | None = None) -> Sweep:
    """Validate nested spec data (as parsed from TOML) into a :class:`Sweep`; the case path is
    relative to the spec file's folder (or the current folder when ``source`` is None)."""
    src = Path(source) if source is not None else None
    label = str(src) if src is not None else "<in memory>"
    top = _table(label, "the spec", data, _TOP_KEYS)
    if "case" not in top:
        raise CaseError(f"{label}: case: missing; give the base case file, e.g. case = \"channel.toml\" "
                        "(relative to the spec file)")
    case_path = top["case"]
    if not isinstance(case_path, str) or not case_path.strip():
        raise CaseError(f"{label}: case: must be a file path in quotes, got {describe(case_path)}")
    base = src.absolute().parent if src is not None else Path.cwd()
    full = Path(case_path).expanduser()
    full = (full if full.is_absolute() else base / full).resolve()
    if not full.is_file():
        raise CaseError(f"{label}: case: the case file {full} does not exist (relative paths start from "
                        f"{base}); correct the path")
    title = top.get("title", "")
    if not isinstance(title, str):
        raise CaseError(f"{label}: title: must be a string, got {describe(title)}")
    plan = _table(label, "plan", top.get("plan", {}), _PLAN_KEYS)
    if plan.get("sampling", "factorial") == "factorial" and "seed" in plan:
        raise CaseError(f"{label}: plan.seed: a factorial plan draws nothing at random; remove seed "
                        "(or choose sampling = \"latin-hypercube\" or \"sobol\")")
    params = []
    for i, raw in enumerate(_array_of_tables(label, top, "parameter")):
        t = _table(label, f"parameter {i + 1}", raw, _PARAMETER_KEYS)
        if "key" not in t:
            raise CaseError(f"{label}: parameter {i + 1}: missing key = \"dotted.case.key\", "
                            "e.g. key = \"fluid.viscosity\"")
        values = t.get("values")
        if values is not None and not isinstance(values, list):
            raise CaseError(f"{label}: parameter {i + 1} ({t['key']}).values: must be a list [...], "
                            f"got {describe(values)}")
        params.append(Parameter(
            key=t["key"], values=tuple(values) if values is not None else None, start=t.get("start"),
            stop=t.get("stop"), count=t.get("count"), spacing=t.get("spacing", "linear"),
            name=t.get("name", t["key"]),
        ))
    outputs = []
    for i, raw in enumerate(_array_of_tables(label, top, "output")):
        t = _table(label, f"output {i + 1}", raw, _OUTPUT_KEYS)
        if "name" not in t:
            raise CaseError(f"{label}: output {i + 1}: missing name = \"<column name>\"")
        outputs.append(Output(**{k: t.get(k) for k in _OUTPUT_KEYS}))
    sweep = Sweep(
        case=full, parameters=params, outputs=outputs, sampling=plan.get("sampling", "factorial"),
        count=plan.get("count"), seed=plan.get("seed", 0), warm_start=plan.get("warm_start", False),
        title=title, source=src,
    )
    check_sweep(sweep)
    return sweep


def load_sweep(path: str | Path) -> Sweep:
    """Read and check a sweep spec file (TOML) and its base case; CaseError naming the file,
    the item and the fix."""
    sweep = sweep_from_dict(read_toml(path), source=Path(path))
    check_against_case(sweep, sweep.base_case())
    return sweep
