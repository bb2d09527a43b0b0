"""The comparison spec: a TOML file listing what to compare with which reference, how, and how closely.

Layout (every key is checked; unknown keys are refused so that typing errors surface)::

    title = "Plane channel against the analytic solution"

    [[item]]
    name = "cf_lower"              # unique, used for the plot file and the test-case name
    kind = "wall"                  # wall | profile | line | field | scalar
    metric = "max_abs"             # max_abs | rms | l2 (curves, fields); rel_error | abs_error (scalars)
    tolerance = 0.01
    range = [2.0, 9.0]             # optional: compared abscissa interval (after scaling)
    min_coverage = 0.9             # optional: fraction of the range that must be covered (default 0)

    [item.result]                  # where our value comes from
    patch = "lower_wall"           # wall: wall/<patch>.csv       profile: profile = "<name>"
    x = "x"                        # abscissa column (line items: "s", "x" or "y")
    y = "cf"                       # compared column
    x_scale = 1.0                  # optional transforms: x' = x * x_scale + x_shift,
    x_shift = 0.0                  #   y' = y * y_scale + y_shift, then y' -= y'(x' = y_zero_at)
    keep = { y = [0.0, 1.0] }      # optional: rows whose raw column values lie in the interval

    [item.reference]
    file = "ref/cf.dat"            # relative to the spec file; .csv or a plain-text column file
    x = "x"                        # column names (or 1-based numbers)
    y = "cf"
    zone = 1                       # for files with several zones
    # or a field file read by meshio, sampled at our points / cell centres:
    # file = "ref.vtu"; field = "velocity"; component = 0

Line items take ``start``, ``end``, ``points``, ``field``, ``component`` in ``[item.result]`` and
``sampling = "linear"`` (``points`` equally spaced points, values interpolated between cell centres) or
``"cells"`` (the centres of the cells the line crosses, placed at their foot on the line). Line and
profile items take ``wall_units = "<wall patch>"`` for a line that starts on that wall: the abscissa
becomes y+ = s u_tau / nu and the value u+ = value / u_tau, u_tau from ``wall/<patch>.csv`` at the
line's start and nu = mu / rho from summary.json (give the velocity component along the wall); field
items take ``field``, ``component`` and optionally ``region = [xmin, xmax, ymin, ymax]`` on the
item; scalar items take ``path = "walls.lower_wall.forces.Cd"`` (dotted path into summary.json)
and ``[item.reference] value = ...``.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from fvrans.errors import CaseError

KINDS = ("wall", "profile", "line", "field", "scalar")
CURVE_METRICS = ("max_abs", "rms", "l2")
SCALAR_METRICS = ("rel_error", "abs_error")
TRANSFORM_KEYS = ("x_scale", "x_shift", "y_scale", "y_shift", "y_zero_at", "keep")

_ITEM_KEYS = {"name", "kind", "metric", "tolerance", "range", "min_coverage", "region", "label", "result", "reference"}
_RESULT_KEYS = {
    "wall": {"patch", "x", "y", *TRANSFORM_KEYS},
    "profile": {"profile", "x", "y", "wall_units", *TRANSFORM_KEYS},
    "line": {"start", "end", "points", "field", "component", "x", "sampling", "wall_units", *TRANSFORM_KEYS},
    "field": {"field", "component", "y_scale", "y_shift"},
    "scalar": {"path", "y_scale", "y_shift"},
}
_REF_TABLE_KEYS = {"file", "x", "y", "zone", *TRANSFORM_KEYS}
_REF_FIELD_KEYS = {"file", "field", "component", "interpolation", "y_scale", "y_shift", "y_zero_at"}


@dataclass(frozen=True)
class Transform:
    """x' = x * x_scale + x_shift; y' = y * y_scale + y_shift, then y' -= y'(x' = y_zero_at)."""

    x_scale: float = 1.0
    x_shift: float = 0.0
    y_scale: float = 1.0
    y_shift: float = 0.0
    y_zero_at: float | None = None
    keep: dict[str, tuple[float, float]] = field(default_factory=dict)


@dataclass(frozen=True)
class Item:
    """One comparison: the parsed ``[[item]]`` table."""

    name: str
    kind: str
    metric: str
    tolerance: float
    result: dict[str, Any]
    reference: dict[str, Any]
    result_transform: Transform
    reference_transform: Transform
    range: tuple[float, float] | None = None
    region: tuple[float, float, float, float] | None = None
    min_coverage: float = 0.0
    label: str = ""


@dataclass(frozen=True)
class Spec:
    """A whole comparison spec; reference paths are already resolved against the spec's folder."""

    path: str
    title: str
    items: tuple[Item, ...]


def _err(where: str, msg: str) -> CaseError:
    return CaseError(f"{where}: {msg}")


def _number(where: str, key: str, v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, (int, float)) or not math.isfinite(v):
        raise _err(where, f"{key} = {v!r} must be a finite number")
    return float(v)


def _pair(where: str, key: str, v: Any) -> tuple[float, float]:
    if not isinstance(v, list) or len(v) != 2:
        raise _err(where, f"{key} = {v!r} must be a list of two numbers [low, high]")
    a, b = (_number(where, key, t) for t in v)
    if not a < b:
        raise _err(where, f"{key} = {v!r}: the first number must be smaller than the second")
    return a, b


def _check_keys(where: str, table: dict[str, Any], allowed: set[str]) -> None:
    for k in table:
        if k not in allowed:
            raise _err(where, f"unknown key {k!r}; allowed here: {', '.join(sorted(allowed))}")


def _transform(where: str, t: dict[str, Any]) -> Transform:
    kw: dict[str, Any] = {}
    for k in ("x_scale", "x_shift", "y_scale", "y_shift", "y_zero_at"):
        if k in t:
            kw[k] = _number(where, k, t[k])
    for k in ("x_scale", "y_scale"):
        if kw.get(k, 1.0) == 0.0:
            raise _err(where, f"{k} = 0 would collapse every value onto one")
    if "keep" in t:
        if not isinstance(t["keep"], dict):
            raise _err(where, "keep must be a table {column = [low, high]}")
        kw["keep"] = {str(c): _pair(where, f"keep.{c}", v) for c, v in t["keep"].items()}
    return Transform(**kw)


def _column(where: str, key: str, v: Any) -> str | int:
    if isinstance(v, str) and v:
        return v
    if isinstance(v, int) and not isinstance(v, bool) and v >= 1:
        return v
    raise _err(where, f"{key} = {v!r} must be a column name or a 1-based column number")


def _parse_item(spath: str, base: Path, k: int, raw: Any, names: set[str]) -> Item:
    where = f"{spath}: item {k + 1}"
    if not isinstance(raw, dict):
        raise _err(where, "each [[item]] must be a table")
    _check_keys(where, raw, _ITEM_KEYS)
    name = raw.get("name")
    if not isinstance(name, str) or not name.strip():
        raise _err(where, "give the item a name = \"...\"")
    if any(c in name for c in '/\\:*?"<>|') or name.startswith("."):
        raise _err(where, f"name {name!r} is used as a file name; use letters, digits, '-', '_' or '.'")
    if name in names:
        raise _err(where, f"the name {name!r} is used by an earlier item; names must be unique")
    where = f"{spath}: item {name!r}"
    kind = raw.get("kind")
    if kind not in KINDS:
        raise _err(where, f"kind = {kind!r}; choose one of {', '.join(KINDS)}")
    metrics = SCALAR_METRICS if kind == "scalar" else CURVE_METRICS
    metric = raw.get("metric")
    if metric not in metrics:
        raise _err(where, f"metric = {metric!r}; for a {kind} item choose one of {', '.join(metrics)}")
    if "tolerance" not in raw:
        raise _err(where, "give the tolerance the metric must not exceed: tolerance = <number>")
    tol = _number(where, "tolerance", raw["tolerance"])
    if tol < 0:
        raise _err(where, f"tolerance = {tol} must not be negative")
    rng = _pair(where, "range", raw["range"]) if "range" in raw else None
    if rng is not None and kind in ("field", "scalar"):
        raise _err(where, f"range does not apply to a {kind} item" + (" (use region)" if kind == "field" else ""))
    region = None
    if "region" in raw:
        if kind != "field":
            raise _err(where, "region applies to field items only (curves use range)")
        r = raw["region"]
        if not isinstance(r, list) or len(r) != 4:
            raise _err(where, "region must be [xmin, xmax, ymin, ymax]")
        x0, x1 = _pair(where, "region x", r[:2])
        y0, y1 = _pair(where, "region y", r[2:])
        region = (x0, x1, y0, y1)
    cov = _number(where, "min_coverage", raw.get("min_coverage", 0.0))
    if not 0.0 <= cov <= 1.0:
        raise _err(where, f"min_coverage = {cov} must lie between 0 and 1")
    label = raw.get("label", "")
    if not isinstance(label, str):
        raise _err(where, "label must be a string")

    res = raw.get("result")
    if not isinstance(res, dict):
        raise _err(where, "missing [item.result] table (where our value comes from)")
    rw = f"{where} [result]"
    _check_keys(rw, res, _RESULT_KEYS[kind])
    need = {"wall": ("patch", "y"), "profile": ("profile", "y"), "line": ("start", "end", "field"),
            "field": ("field",), "scalar": ("path",)}[kind]
    for key in need:
        if key not in res:
            raise _err(rw, f"missing key {key!r}")
    result = dict(res)
    if kind in ("wall", "profile"):
        result["x"] = _column(rw, "x", res.get("x", "x" if kind == "wall" else "s"))
        result["y"] = _column(rw, "y", res["y"])
    if kind == "line":
        for key in ("start", "end"):
            p = res[key]
            if not isinstance(p, list) or len(p) != 2:
                raise _err(rw, f"{key} must be a point [x, y]")
            result[key] = tuple(_number(rw, key, t) for t in p)
        n = res.get("points", 200)
        if isinstance(n, bool) or not isinstance(n, int) or n < 2:
            raise _err(rw, f"points = {n!r} must be an integer of at least 2")
        result["points"] = n
        result["x"] = res.get("x", "s")
        if result["x"] not in ("s", "x", "y"):
            raise _err(rw, f"x = {result['x']!r}: along a line the abscissa is 's' (distance from start), 'x' or 'y'")
        sampling = res.get("sampling", "linear")
        if sampling not in ("linear", "cells"):
            raise _err(rw, f"sampling = {sampling!r}; choose 'linear' (equally spaced points) or 'cells' "
                           "(the centres of the cells the line crosses)")
        result["sampling"] = sampling
    if "wall_units" in res:
        if not isinstance(res["wall_units"], str) or not res["wall_units"]:
            raise _err(rw, "wall_units must name the wall patch the line starts on, e.g. wall_units = \"plate\"")
        if result["x"] != "s":
            raise _err(rw, f"with wall_units the abscissa is the distance from the wall: x = \"s\", "
                           f"not {result['x']!r}")
    if kind in ("line", "field") and "component" in res:
        c = res["component"]
        if isinstance(c, bool) or not isinstance(c, int) or c < 0:
            raise _err(rw, f"component = {c!r} must be 0, 1, ...")
    if kind == "scalar" and (not isinstance(res["path"], str) or not res["path"]):
        raise _err(rw, "path must be a dotted path into summary.json, e.g. \"walls.lower_wall.forces.Cd\"")

    ref = raw.get("reference")
    if not isinstance(ref, dict):
        raise _err(where, "missing [item.reference] table")
    fw = f"{where} [reference]"
    reference = dict(ref)
    if kind == "scalar":
        _check_keys(fw, ref, {"value"})
        if "value" not in ref:
            raise _err(fw, "give the reference value = <number>")
        reference["value"] = _number(fw, "value", ref["value"])
    else:
        if "file" not in ref or not isinstance(ref["file"], str):
            raise _err(fw, "give the reference file = \"...\" (relative to the spec file)")
        is_field = "field" in ref or kind == "field"
        _check_keys(fw, ref, _REF_FIELD_KEYS if is_field else _REF_TABLE_KEYS)
        reference["file"] = str((base / ref["file"]).resolve()) if not os.path.isabs(ref["file"]) else ref["file"]
        reference["is_field"] = is_field
        if is_field:
            if "field" not in ref:
                raise _err(fw, "give the field name in the reference file: field = \"...\"")
            if ref.get("interpolation", "linear") not in ("linear", "constant"):
                raise _err(fw, "interpolation must be 'linear' or 'constant'")
        else:
            if "x" not in ref or "y" not in ref:
                raise _err(fw, "give the reference columns x = ... and y = ...")
            reference["x"] = _column(fw, "x", ref["x"])
            reference["y"] = _column(fw, "y", ref["y"])
    rt = _transform(rw, res)
    ft = _transform(fw, ref)
    if kind in ("field", "scalar") and (ft.y_zero_at is not None):
        raise _err(fw, "y_zero_at applies to curves only")
    return Item(name, kind, metric, tol, result, reference, rt, ft, rng, region, cov, label)


def parse_spec(data: dict[str, Any], path: str | os.PathLike = "<spec>", base: str | os.PathLike | None = None) -> Spec:
    """Check a spec already read from TOML; reference paths are taken relative to ``base``."""
    spath = str(path)
    base_dir = Path(base) if base is not None else Path(spath).resolve().parent
    _check_keys(spath, data, {"title", "item"})
    items_raw = data.get("item")
    if not isinstance(items_raw, list) or not items_raw:
        raise _err(spath, "no comparison items; add at least one [[item]] table")
    title = data.get("title", "")
    if not isinstance(title, str):
        raise _err(spath, "title must be a string")
    items: list[Item] = []
    names: set[str] = set()
    for k, raw in enumerate(items_raw):
        it = _parse_item(spath, base_dir, k, raw, names)
        names.add(it.name)
        items.append(it)
    return Spec(spath, title, tuple(items))


def load_spec(path: str | os.PathLike) -> Spec:
    """Read and check a comparison spec (TOML)."""
    from fvrans.case.load import read_toml

    p = Path(path)
    if not p.exists() and not p.is_symlink():
        raise CaseError(f"comparison spec {p} does not exist")
    data = read_toml(p)  # a regular file of bounded size and nesting, valid TOML
    return parse_spec(data, p, p.resolve().parent)
