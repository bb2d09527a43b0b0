"""Compare a result directory with reference data item by item (see :mod:`fvrans.verify.spec`).

Curves are compared at the reference abscissae that lie inside the common interval of the
requested range, the reference and the result; the result is interpolated linearly there and is
never extrapolated. The coverage is the length of that common interval over the length of the
requested range (the reference's extent when no range is given). Metrics of the difference
d = result - reference:

- ``max_abs`` = max |d|;
- ``rms`` = sqrt(mean d^2) over the compared points;
- ``l2`` = sqrt(int d^2 dx / int dx) (trapezoid rule; for fields sum A d^2 / sum A over cells);
- ``rel_error`` = |r - v| / |v| and ``abs_error`` = |r - v| for scalars.
"""

from __future__ import annotations

import json
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post.filenames import safe_file_name
from fvrans.post.outputs import recover
from fvrans.post.summary import summary_value
from fvrans.reference.meshfile import FieldFile, read_field
from fvrans.reference.tables import Table, read_csv, read_table
from fvrans.verify.spec import Item, Spec, Transform


@dataclass
class Curve:
    """Abscissa, ordinate, and where each point came from (for messages and field sampling)."""

    x: np.ndarray
    y: np.ndarray
    source: str
    lines: np.ndarray | None = None  # 1-based source line of each point
    xy: np.ndarray | None = None  # (n, 2) positions, when known


@dataclass
class ItemResult:
    """The outcome of one item. ``status`` is "pass", "fail" or "error" (bad input)."""

    name: str
    kind: str
    metric: str
    tolerance: float
    status: str
    value: float | None = None
    coverage: float | None = None
    n_points: int = 0
    compared_range: tuple[float, float] | None = None
    requested_range: tuple[float, float] | None = None
    message: str = ""
    label: str = ""
    plot: str | None = None
    x_label: str = "x"
    log_x: bool = False  # profiles in wall units are drawn against log y+
    # data for the overlay plot (not written to JSON)
    result_curve: Curve | None = field(default=None, repr=False)
    reference_curve: Curve | None = field(default=None, repr=False)
    compared: tuple[np.ndarray, np.ndarray, np.ndarray] | None = field(default=None, repr=False)

    @property
    def passed(self) -> bool:
        return self.status == "pass"

    def to_json(self) -> dict[str, Any]:
        return {
            "name": self.name, "kind": self.kind, "metric": self.metric, "tolerance": self.tolerance,
            "status": self.status, "passed": self.passed, "value": self.value, "coverage": self.coverage,
            "n_points": self.n_points,
            "compared_range": list(self.compared_range) if self.compared_range else None,
            "requested_range": list(self.requested_range) if self.requested_range else None,
            "message": self.message, "plot": self.plot,
        }


class ResultDir:
    """Lazy access to the files of a run: summary.json, wall/<patch>.csv, profiles/<name>.csv, fields.vtu."""

    def __init__(self, path: str | os.PathLike):
        self.path = Path(path)
        if not self.path.is_dir():
            raise CaseError(f"result directory {self.path} does not exist")
        recover(self.path)  # a set of outputs half put in place by a killed run is finished first
        self._summary: dict[str, Any] | None = None
        self._fields: FieldFile | None = None
        self._tables: dict[Path, Table] = {}

    def summary(self) -> dict[str, Any]:
        if self._summary is None:
            p = self.path / "summary.json"
            if not p.is_file():
                raise CaseError(f"{p} does not exist; is {self.path} the output directory of a run?")
            try:
                self._summary = json.loads(p.read_text(encoding="utf-8"))
            except json.JSONDecodeError as exc:
                raise CaseError(f"{p}:{exc.lineno}: not valid JSON ({exc.msg})") from None
        return self._summary

    def scalar(self, dotted: str) -> float:
        """A number from summary.json by dotted path (list entries by index: ``a.0.b``)."""
        return summary_value(self.summary(), dotted, str(self.path / "summary.json"))

    def table(self, rel: str) -> Table:
        p = self.path / rel
        if p not in self._tables:
            if not p.is_file():
                have = sorted(q.name for q in p.parent.glob("*.csv")) if p.parent.is_dir() else []
                raise CaseError(f"{p} does not exist" + (f"; there are: {', '.join(have)}" if have else ""))
            self._tables[p] = read_csv(p)
        return self._tables[p]

    def fields(self) -> FieldFile:
        if self._fields is None:
            self._fields = read_field(self.path / "fields.vtu")
        return self._fields


# ---------------------------------------------------------------------------------------------
def _keep_rows(table: Table, tr: Transform) -> np.ndarray:
    mask = np.ones(len(table.data), dtype=bool)
    for col, (lo, hi) in tr.keep.items():
        v = table.column(col)
        mask &= (v >= lo) & (v <= hi)
    return mask


def _monotonic(curve: Curve) -> Curve:
    """Sort a strictly monotonic curve ascending; refuse repeated or back-tracking abscissae."""
    x = curve.x
    if len(x) >= 2:
        dx = np.diff(x)
        if np.all(dx < 0):
            order = np.arange(len(x))[::-1]
            return Curve(x[order], curve.y[order], curve.source,
                         None if curve.lines is None else curve.lines[order],
                         None if curve.xy is None else curve.xy[order])
        if not np.all(dx > 0):
            k = int(np.nonzero(dx <= 0)[0][0]) if np.any(dx > 0) else int(np.nonzero(dx >= 0)[0][0])
            where = f"line {int(curve.lines[k + 1])}" if curve.lines is not None else f"point {k + 2}"
            raise CaseError(
                f"{curve.source}: {where}: the abscissa is not strictly monotonic ({x[k]!r} then {x[k + 1]!r}); "
                "restrict the rows with keep = {column = [low, high]} or compare along another abscissa"
            )
    return curve


def _apply(curve: Curve, tr: Transform) -> Curve:
    x = curve.x * tr.x_scale + tr.x_shift
    y = curve.y * tr.y_scale + tr.y_shift
    c = _monotonic(Curve(x, y, curve.source, curve.lines, curve.xy))
    if tr.y_zero_at is not None:
        if len(c.x) == 0 or not c.x[0] <= tr.y_zero_at <= c.x[-1]:
            raise CaseError(f"{curve.source}: y_zero_at = {tr.y_zero_at} lies outside the curve "
                            f"[{c.x[0] if len(c.x) else 'empty'}, {c.x[-1] if len(c.x) else ''}] (after scaling)")
        c.y = c.y - np.interp(tr.y_zero_at, c.x, c.y)
    return c


def _table_curve(table: Table, xcol: str | int, ycol: str | int, tr: Transform) -> Curve:
    ix, iy = table.index(xcol), table.index(ycol)
    mask = _keep_rows(table, tr)
    if not mask.any():
        raise CaseError(f"{table.path}: no rows left after keep = {tr.keep}")
    xy = None
    if "x" in table.names and "y" in table.names:
        xy = np.column_stack([table.column("x"), table.column("y")])[mask]
    return Curve(table.data[mask, ix], table.data[mask, iy], table.path, table.lines[mask], xy)


def _result_curve(rd: ResultDir, item: Item) -> Curve:
    r = item.result
    tr = item.result_transform
    if item.kind == "wall":
        raw = _table_curve(rd.table(f"wall/{safe_file_name(r['patch'], 'the wall patch')}.csv"), r["x"], r["y"], tr)
    elif item.kind == "profile":
        raw = _table_curve(rd.table(f"profiles/{safe_file_name(r['profile'], 'the profile')}.csv"), r["x"], r["y"], tr)
    else:  # line probe through fields.vtu
        a, b = np.array(r["start"]), np.array(r["end"])
        ff = rd.fields()
        length = float(np.hypot(*(b - a)))
        if r.get("sampling", "linear") == "cells":
            cells, s = ff.cells_along(a, b)
            vals = ff.cell_values(r["field"], cells, r.get("component"))
            xy = a[None, :] + s[:, None] * ((b - a) / length)[None, :]
        else:
            t = np.linspace(0.0, 1.0, r["points"])
            xy = a[None, :] + t[:, None] * (b - a)[None, :]
            vals = ff.sample(r["field"], xy, r.get("component"), "linear")
            s = t * length
        absc = {"s": s, "x": xy[:, 0], "y": xy[:, 1]}[r["x"]]
        ok = np.isfinite(vals)
        if ok.sum() < 2:
            raise CaseError(
                f"{ff.path}: the line from {tuple(a)} to {tuple(b)} lies (almost) entirely outside the mesh"
            )
        raw = Curve(absc[ok], vals[ok], f"{ff.path} along the line {tuple(a)}-{tuple(b)}", None, xy[ok])
    if "wall_units" in r:
        raw = _wall_units(rd, r["wall_units"], raw, np.array(r["start"]) if item.kind == "line" else None)
    return _apply(raw, tr)


def _wall_units(rd: ResultDir, patch: str, curve: Curve, start: np.ndarray | None) -> Curve:
    """Distance from the wall s and a velocity u -> y+ = s u_tau / nu, u+ = u / u_tau.

    u_tau at the start of the line: linear between the two consecutive wall-face centres (in the
    order of the wall's ``s`` column) whose segment passes nearest to it; nu = mu / rho of summary.json.
    """
    if start is None:  # a profile file: the start is where s = 0 on the line through its points
        if curve.xy is None or len(curve.x) < 2:
            raise CaseError(f"{curve.source}: wall units need the x and y columns of the profile")
        d = curve.xy[-1] - curve.xy[0]
        ds = float(curve.x[-1] - curve.x[0])
        if ds == 0.0:
            raise CaseError(f"{curve.source}: the distance column s does not change")
        start = curve.xy[0] - curve.x[0] * d / ds
    ref = rd.summary().get("reference")
    try:
        nu = float(ref["mu"]) / float(ref["rho"])
    except (TypeError, KeyError, ValueError, ZeroDivisionError):
        raise CaseError(f"{rd.path / 'summary.json'}: wall units need reference.mu and reference.rho "
                        "(written by runs with wall patches)") from None
    wall = rd.table(f"wall/{safe_file_name(patch, 'the wall patch')}.csv")
    o = np.argsort(wall.column("s"), kind="stable")
    pts = np.column_stack([wall.column("x"), wall.column("y")])[o]
    ut = wall.column("u_tau")[o]
    if len(pts) < 2:
        raise CaseError(f"{wall.path}: wall units need at least two wall faces")
    seg = pts[1:] - pts[:-1]
    ll = np.maximum(np.einsum("ij,ij->i", seg, seg), 1e-300)
    w = np.clip(np.einsum("ij,ij->i", start - pts[:-1], seg) / ll, 0.0, 1.0)
    foot = pts[:-1] + w[:, None] * seg
    dist = np.hypot(*(start - foot).T)
    k = int(np.argmin(dist))
    span = float(np.sum(np.sqrt(ll)))
    if dist[k] > 1e-3 * span:
        raise CaseError(f"{curve.source}: wall units: the line starts at {tuple(np.round(start, 9))}, "
                        f"{dist[k]:.3g} away from wall patch {patch!r}; start the line on that wall")
    u_tau = float((1.0 - w[k]) * ut[k] + w[k] * ut[k + 1])
    if not u_tau > 0.0:
        raise CaseError(f"{wall.path}: u_tau = {u_tau:g} at the line's start; wall units need a non-zero wall shear")
    return Curve(curve.x * u_tau / nu, curve.y / u_tau, f"{curve.source} in wall units (u_tau = {u_tau:.6g})",
                 curve.lines, curve.xy)


def _reference_curve(item: Item, result: Curve) -> Curve:
    ref = item.reference
    tr = item.reference_transform
    if ref["is_field"]:
        if result.xy is None:
            raise CaseError(f"item {item.name!r}: a field reference is sampled at the result's points, "
                            f"but {result.source} has no x and y columns")
        ff = read_field(ref["file"])
        vals = ff.sample(ref["field"], result.xy, ref.get("component"), ref.get("interpolation", "linear"))
        ok = np.isfinite(vals)
        if ok.sum() < 1:
            raise CaseError(f"{ff.path}: none of the compared points lies inside this mesh")
        y = vals[ok] * tr.y_scale + tr.y_shift
        c = Curve(result.x[ok].copy(), y, ff.path, None, result.xy[ok])
        if tr.y_zero_at is not None:
            if not c.x[0] <= tr.y_zero_at <= c.x[-1]:
                raise CaseError(f"{ff.path}: y_zero_at = {tr.y_zero_at} lies outside the sampled points")
            c.y = c.y - np.interp(tr.y_zero_at, c.x, c.y)
        return c
    table = read_table(ref["file"], ref.get("zone"))
    return _apply(_table_curve(table, ref["x"], ref["y"], tr), tr)


def curve_metric(metric: str, x: np.ndarray, d: np.ndarray) -> float:
    """The metric of a difference ``d`` sampled at ascending abscissae ``x`` (see module docstring)."""
    if metric == "max_abs":
        return float(np.max(np.abs(d)))
    if metric == "rms":
        return float(np.sqrt(np.mean(d * d)))
    if metric == "l2":
        length = float(x[-1] - x[0])
        if len(x) < 2 or length <= 0:
            return float("nan")
        d2 = d * d
        return float(np.sqrt(np.sum(0.5 * (d2[1:] + d2[:-1]) * np.diff(x)) / length))
    raise CaseError(f"unknown metric {metric!r}")


def _finish(res: ItemResult, value: float, coverage: float, n: int, need: int, item: Item) -> ItemResult:
    res.value, res.coverage, res.n_points = value, coverage, n
    problems = []
    if n < need:
        problems.append(f"only {n} point(s) compared (at least {need} needed)")
    elif not math.isfinite(value) or value > item.tolerance:
        problems.append(f"{item.metric} = {value:.6g} exceeds the tolerance {item.tolerance:.6g}")
    if coverage < item.min_coverage:
        problems.append(f"coverage {coverage:.1%} is below the required {item.min_coverage:.1%}")
    res.status = "fail" if problems else "pass"
    res.message = "; ".join(problems) or f"{item.metric} = {value:.6g} within the tolerance {item.tolerance:.6g}"
    return res


def _compare_curve(rd: ResultDir, item: Item, res: ItemResult) -> ItemResult:
    rc = _result_curve(rd, item)
    fc = _reference_curve(item, rc)
    if "wall_units" in item.result:
        res.x_label, res.log_x = "y+", True
    elif item.kind in ("wall", "profile", "line"):
        res.x_label = str(item.result.get("x", "x"))
    res.result_curve, res.reference_curve = rc, fc
    target = item.range if item.range is not None else (float(fc.x[0]), float(fc.x[-1]))
    res.requested_range = target
    lo = max(target[0], float(fc.x[0]), float(rc.x[0]))
    hi = min(target[1], float(fc.x[-1]), float(rc.x[-1]))
    need = 2 if item.metric == "l2" else 1
    if hi < lo:
        res.coverage = 0.0
        res.status = "fail"
        res.message = (f"no overlap: the range [{target[0]:.6g}, {target[1]:.6g}], the reference "
                       f"[{fc.x[0]:.6g}, {fc.x[-1]:.6g}] and the result [{rc.x[0]:.6g}, {rc.x[-1]:.6g}] "
                       "have no common part")
        return res
    span = target[1] - target[0]
    coverage = (hi - lo) / span if span > 0 else 1.0
    sel = (fc.x >= lo) & (fc.x <= hi)
    x = fc.x[sel]
    yr = np.interp(x, rc.x, rc.y)  # x lies inside [rc.x[0], rc.x[-1]]: interpolation only
    yf = fc.y[sel]
    res.compared = (x, yr, yf)
    res.compared_range = (lo, hi)
    value = curve_metric(item.metric, x, yr - yf) if len(x) >= need else float("nan")
    return _finish(res, value, coverage, int(len(x)), need, item)


def _compare_field(rd: ResultDir, item: Item, res: ItemResult) -> ItemResult:
    ours = rd.fields()
    r, ref = item.result, item.reference
    comp = r.get("component")
    if r["field"] not in ours.cell_data:
        raise CaseError(f"{ours.path}: no cell field {r['field']!r}; there are {', '.join(sorted(ours.cell_data))}")
    v = np.asarray(ours.cell_data[r["field"]], dtype=np.float64)
    if v.ndim == 2:
        if comp is None or not 0 <= comp < v.shape[1]:
            raise CaseError(f"{ours.path}: field {r['field']!r} has {v.shape[1]} components; "
                            f"give component = 0 .. {v.shape[1] - 1}")
        v = v[:, comp]
    v = v * item.result_transform.y_scale + item.result_transform.y_shift
    c, area = ours.cell_centre, ours.cell_area
    inside = np.ones(len(c), dtype=bool)
    if item.region is not None:
        x0, x1, y0, y1 = item.region
        inside = (c[:, 0] >= x0) & (c[:, 0] <= x1) & (c[:, 1] >= y0) & (c[:, 1] <= y1)
        if not inside.any():
            raise CaseError(f"item {item.name!r}: no cell centre of {ours.path} lies in region = {list(item.region)}")
    theirs = read_field(ref["file"])
    w = theirs.sample(ref["field"], c[inside], ref.get("component"), ref.get("interpolation", "linear"))
    w = w * item.reference_transform.y_scale + item.reference_transform.y_shift
    ok = np.isfinite(w)
    a = area[inside]
    coverage = float(a[ok].sum() / a.sum())
    d = v[inside][ok] - w[ok]
    n = int(ok.sum())
    if n == 0:
        value = float("nan")
    elif item.metric == "l2":
        value = float(np.sqrt(np.sum(a[ok] * d * d) / np.sum(a[ok])))
    else:
        value = curve_metric(item.metric, np.arange(n, dtype=float), d)
    res.compared = (np.arange(n, dtype=float), v[inside][ok], w[ok])
    return _finish(res, value, coverage, n, 1, item)


def _compare_scalar(rd: ResultDir, item: Item, res: ItemResult) -> ItemResult:
    r = rd.scalar(item.result["path"]) * item.result_transform.y_scale + item.result_transform.y_shift
    v = item.reference["value"]
    if item.metric == "rel_error":
        if v == 0.0:
            raise CaseError(f"item {item.name!r}: the reference value is 0, so a relative error is undefined; "
                            "use metric = \"abs_error\"")
        value = abs(r - v) / abs(v)
    else:
        value = abs(r - v)
    res.compared = (np.zeros(1), np.array([r]), np.array([v]))
    return _finish(res, value, 1.0, 1, 1, item)


def compare_item(rd: ResultDir, item: Item) -> ItemResult:
    """Evaluate one item; bad input (missing file, column, key) gives status "error" with the message."""
    res = ItemResult(item.name, item.kind, item.metric, item.tolerance, "error", label=item.label)
    try:
        if item.kind == "scalar":
            return _compare_scalar(rd, item, res)
        if item.kind == "field":
            return _compare_field(rd, item, res)
        return _compare_curve(rd, item, res)
    except CaseError as exc:
        res.status = "error"
        res.message = str(exc)
        return res


def compare(result_dir: str | os.PathLike, spec: Spec) -> list[ItemResult]:
    """Evaluate every item of ``spec`` against the run in ``result_dir``."""
    rd = ResultDir(result_dir)
    return [compare_item(rd, item) for item in spec.items]
