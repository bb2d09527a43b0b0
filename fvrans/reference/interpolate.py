"""Linear interpolation of data given at sites (cloud points, mesh nodes, cell centres) to target points.

Where a target lies decides its value:

- **cloud** (points without connectivity): linear on the Delaunay triangles of the points (scipy);
  inside = inside their convex hull;
- **nodes** (point data of a mesh): linear within the mesh's own cells, split into triangles;
  inside = inside the mesh (a concave mesh keeps its shape, unlike a hull);
- **cells** (cell data of a mesh): linear on the Delaunay triangles of the cell centres; in the
  band between the outermost centres and the mesh boundary, the value of the cell holding the
  target; inside = inside the mesh.

A target outside follows the ``outside`` rule: ``"nearest"`` takes the value of the nearest data
site (scipy k-d tree) and counts it in the coverage report, ``"refuse"`` raises CaseError naming
the first such target, ``"nan"`` leaves NaN. No target inside at all is always refused.

Every interpolation is exact for a field linear in x and y (inside the data; the band of cell
values excepted). The error estimate :func:`holdout_error` is a hold-out test: a seeded random tenth
of the sites (at most 2000) is left out, the rest triangulated (Delaunay), the left-out sites
interpolated linearly from it and compared with their own values. The left-out sites lie about
one data spacing from the remaining ones, about twice the distance of a typical target, so for a
smooth field (error ~ spacing^2) the figure is an upper estimate of the error at the targets.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np
from scipy.spatial import cKDTree

from fvrans.errors import CaseError

#: what to do with a target outside the data
OUTSIDE_RULES = ("nearest", "refuse", "nan")
#: where data sites sit
LOCATIONS = ("cloud", "nodes", "cells")

#: status of a target: interpolated, the value of its cell (cells band), nearest site, NaN
INTERPOLATED, CELL_VALUE, NEAREST, MISSING = 0, 1, 2, 3


def _delaunay(sites: np.ndarray, label: str):
    from scipy.spatial import Delaunay, QhullError

    if len(sites) < 3:
        raise CaseError(f"{label}: {len(sites)} data point(s) cannot be triangulated; at least 3 not on one "
                        "line are needed")
    try:
        return Delaunay(sites)
    except QhullError:
        raise CaseError(f"{label}: the data points lie on one line (or coincide) and span no area; "
                        "2D interpolation needs points spread over the plane") from None


def _barycentric(a: np.ndarray, b: np.ndarray, c: np.ndarray, p: np.ndarray) -> np.ndarray:
    """Weights (m, 3) of the vertices a, b, c of triangles for points p (all (m, 2))."""
    ab, ac, ap = b - a, c - a, p - a
    det = ab[:, 0] * ac[:, 1] - ab[:, 1] * ac[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        wb = (ap[:, 0] * ac[:, 1] - ap[:, 1] * ac[:, 0]) / det
        wc = (ab[:, 0] * ap[:, 1] - ab[:, 1] * ap[:, 0]) / det
    return np.column_stack([1.0 - wb - wc, wb, wc])


class Domain:
    """A 2D mesh split into triangles: ``points`` (np, 2), ``triangles`` (nt, 3, counter-clockwise),
    ``triangle_cell`` (nt,) the cell each triangle belongs to."""

    def __init__(self, points: np.ndarray, triangles: np.ndarray, triangle_cell: np.ndarray):
        self.points = np.asarray(points, dtype=np.float64)
        self.triangles = np.asarray(triangles, dtype=np.int64)
        self.triangle_cell = np.asarray(triangle_cell, dtype=np.int64)

    @classmethod
    def from_blocks(cls, points: np.ndarray, blocks: list[np.ndarray]) -> Domain:
        """Fan triangles of cell blocks, each (n, k) point indices; cells numbered block after block."""
        tris, owner, base = [], [], 0
        for conn in blocks:
            n, k = conn.shape
            for j in range(1, k - 1):
                tris.append(conn[:, [0, j, j + 1]])
                owner.append(base + np.arange(n))
            base += n
        return cls._oriented(np.asarray(points, dtype=np.float64), np.concatenate(tris).astype(np.int64),
                             np.concatenate(owner))

    @classmethod
    def from_csr(cls, points: np.ndarray, offsets: np.ndarray, indices: np.ndarray) -> Domain:
        """Fan triangles of polygons in compressed rows (cell c: ``indices[offsets[c]:offsets[c+1]]``)."""
        offsets = np.asarray(offsets, dtype=np.int64)
        indices = np.asarray(indices, dtype=np.int64)
        sizes = np.diff(offsets)
        tris, owner = [], []
        for k in np.unique(sizes):
            ids = np.flatnonzero(sizes == k)
            conn = indices[offsets[ids][:, None] + np.arange(k)]
            for j in range(1, k - 1):
                tris.append(conn[:, [0, j, j + 1]])
                owner.append(ids)
        return cls._oriented(np.asarray(points, dtype=np.float64), np.concatenate(tris), np.concatenate(owner))

    @classmethod
    def _oriented(cls, pts: np.ndarray, tri: np.ndarray, owner: np.ndarray) -> Domain:
        v = pts[tri]
        e1, e2 = v[:, 1] - v[:, 0], v[:, 2] - v[:, 0]
        cw = e1[:, 0] * e2[:, 1] - e1[:, 1] * e2[:, 0] < 0
        tri[cw] = tri[cw][:, ::-1]
        return cls(pts, tri, owner)

    @cached_property
    def triangulation(self):
        from matplotlib.tri import Triangulation

        return Triangulation(self.points[:, 0], self.points[:, 1], self.triangles)

    @cached_property
    def _finder(self):
        try:
            return self.triangulation.get_trifinder()
        except (RuntimeError, ValueError) as exc:  # overlapping or repeated cells
            raise CaseError(f"the cells of the data's mesh overlap or repeat points ({exc}); the points "
                            "cannot be located in it: give a valid 2D mesh, or the data as a point cloud") from None

    def locate(self, xy: np.ndarray) -> np.ndarray:
        """The triangle holding each point (on an edge: one of its triangles), -1 outside."""
        xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
        return np.asarray(self._finder(xy[:, 0], xy[:, 1]), dtype=np.int64)

    def weights(self, t: np.ndarray, xy: np.ndarray) -> np.ndarray:
        """Barycentric weights (m, 3) of points ``xy`` in triangles ``t`` (all found)."""
        v = self.points[self.triangles[t]]
        return _barycentric(v[:, 0], v[:, 1], v[:, 2], xy)


@dataclass
class DataSet:
    """Scalar quantities given at ``sites`` (n, 2): a point cloud, the nodes or the cells of ``domain``.

    ``label`` names the file (and the part of it) in messages; ``lines`` (clouds read from text)
    the source line of each site.
    """

    label: str
    location: str
    sites: np.ndarray
    values: dict[str, np.ndarray]
    domain: Domain | None = None
    lines: np.ndarray | None = None

    def __post_init__(self) -> None:
        if self.location not in LOCATIONS:
            raise ValueError(f"location {self.location!r}: use one of {LOCATIONS}")
        self.sites = np.asarray(self.sites, dtype=np.float64).reshape(-1, 2)
        if self.location != "cloud" and self.domain is None:
            raise ValueError(f"{self.label}: {self.location} data need the mesh they live on (domain)")
        n = len(self.sites)
        for q, v in self.values.items():
            v = np.asarray(v, dtype=np.float64)
            if v.shape != (n,):
                raise CaseError(f"{self.label}: {q!r} has shape {v.shape} but there are {n} data sites; "
                                f"give one value per site")
            self.values[q] = v

    def site_name(self, i: int) -> str:
        """'line 12' (clouds from text), 'point 5' or 'cell 5', with its position."""
        x, y = self.sites[i]
        if self.lines is not None:
            return f"line {int(self.lines[i])} (x = {x:.6g}, y = {y:.6g})"
        what = "point" if self.location != "cells" else "cell"
        return f"{what} {i} at ({x:.6g}, {y:.6g})"

    @cached_property
    def tree(self) -> cKDTree:
        return cKDTree(self.sites)

    @cached_property
    def delaunay(self):
        return _delaunay(self.sites, self.label)

    @cached_property
    def spacing(self) -> float:
        """Median distance from a site to its nearest neighbour."""
        if len(self.sites) < 2:
            return float("nan")
        d, _ = self.tree.query(self.sites, k=2)
        return float(np.median(d[:, 1]))


@dataclass
class Stencil:
    """Each target's data sites ``index`` (m, 3) and ``weight`` (m, 3), its ``status`` (INTERPOLATED,
    CELL_VALUE, NEAREST, MISSING) and its ``distance`` to the nearest data site."""

    index: np.ndarray
    weight: np.ndarray
    status: np.ndarray
    distance: np.ndarray

    def apply(self, values: np.ndarray) -> np.ndarray:
        out = np.einsum("ij,ij->i", self.weight, np.asarray(values, dtype=np.float64)[self.index])
        out[self.status == MISSING] = np.nan
        return out


def _describe_extent(xy: np.ndarray) -> str:
    lo, hi = xy.min(axis=0), xy.max(axis=0)
    return f"x in [{lo[0]:.6g}, {hi[0]:.6g}], y in [{lo[1]:.6g}, {hi[1]:.6g}]"


#: a target within this share of the data's extent from a site is that site
SAME_SITE = 1e-10


def _at_sites(ds: DataSet, xy: np.ndarray) -> np.ndarray | None:
    """The site each target sits on when every target sits on one (else None): data given on the
    target points themselves are taken as they are, exactly, even where the sites span no area (a
    column of cells)."""
    if not len(xy) or not len(ds.sites):
        return None
    extent = float(np.ptp(ds.sites, axis=0).max()) if len(ds.sites) > 1 else 0.0
    d, near = ds.tree.query(xy)
    if np.all(d <= SAME_SITE * max(extent, 1e-300)):
        return np.asarray(near, dtype=np.int64)
    return None


def stencil(ds: DataSet, xy: np.ndarray, outside: str = "nearest", cell_values: str = "linear",
            target_label: str = "target point", refuse_no_overlap: bool = True) -> Stencil:
    """Where each target point takes its value from (see the module docstring).

    ``cell_values="constant"`` takes the value of the containing cell for cell data (no
    interpolation between centres). ``target_label`` names the targets in messages ("cell").
    """
    if outside not in OUTSIDE_RULES:
        raise CaseError(f"outside = {outside!r}: use one of {', '.join(OUTSIDE_RULES)}")
    if cell_values not in ("linear", "constant"):
        raise CaseError(f"cell interpolation {cell_values!r}: use 'linear' or 'constant'")
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    m = len(xy)
    index = np.zeros((m, 3), dtype=np.int64)
    weight = np.zeros((m, 3))
    status = np.full(m, MISSING, dtype=np.int8)
    same = _at_sites(ds, xy)
    if same is not None:  # every target is a data site (data on the target cells themselves): its value
        index[:, 0] = same
        weight[:, 0] = 1.0
        status[:] = INTERPOLATED
        return Stencil(index, weight, status, np.zeros(m))
    if ds.location == "cloud":
        tri = ds.delaunay
        s = np.asarray(tri.find_simplex(xy), dtype=np.int64)
        ok = s >= 0
        T = tri.transform[s[ok]]
        c = np.einsum("ijk,ik->ij", T[:, :2, :], xy[ok] - T[:, 2, :])
        index[ok] = tri.simplices[s[ok]]
        weight[ok] = np.column_stack([c, 1.0 - c.sum(axis=1)])
        status[ok] = INTERPOLATED
    else:
        dom = ds.domain
        assert dom is not None
        try:
            t = dom.locate(xy)
        except CaseError as exc:
            raise CaseError(f"{ds.label}: {exc}") from None
        ok = t >= 0
        if ds.location == "nodes":
            index[ok] = dom.triangles[t[ok]]
            weight[ok] = dom.weights(t[ok], xy[ok])
            status[ok] = INTERPOLATED
        else:
            s = np.full(m, -1, dtype=np.int64)
            if cell_values == "linear" and ok.any():
                tri = ds.delaunay
                s[ok] = tri.find_simplex(xy[ok])
            lin = ok & (s >= 0)
            T = ds.delaunay.transform[s[lin]] if lin.any() else None
            if T is not None:
                c = np.einsum("ijk,ik->ij", T[:, :2, :], xy[lin] - T[:, 2, :])
                index[lin] = ds.delaunay.simplices[s[lin]]
                weight[lin] = np.column_stack([c, 1.0 - c.sum(axis=1)])
                status[lin] = INTERPOLATED
            band = ok & ~lin
            index[band, 0] = dom.triangle_cell[t[band]]
            weight[band, 0] = 1.0
            status[band] = CELL_VALUE
        bad = ok & ~np.all(np.isfinite(weight), axis=1)  # a degenerate (zero-area) triangle
        if bad.any():
            _, near = ds.tree.query(xy[bad])
            index[bad] = 0
            index[bad, 0] = near
            weight[bad] = [1.0, 0.0, 0.0]
    distance, near = ds.tree.query(xy)
    out = status == MISSING
    if out.all() and m and refuse_no_overlap:
        raise CaseError(
            f"{ds.label}: no {target_label} lies inside the data ({_describe_extent(ds.sites)}; the "
            f"{target_label}s: {_describe_extent(xy)}); check that both use the same coordinates and units"
        )
    if out.any():
        if outside == "refuse":
            i = int(np.flatnonzero(out)[0])
            raise CaseError(
                f"{ds.label}: {int(out.sum())} of {m} {target_label}s lie outside the data, the first at "
                f"({xy[i, 0]:.6g}, {xy[i, 1]:.6g}), {distance[i]:.3g} from the nearest data point; the data "
                f"cover {_describe_extent(ds.sites)}. Extend the data, or take the nearest value there "
                "(outside = \"nearest\")"
            )
        if outside == "nearest":
            index[out] = 0
            index[out, 0] = near[out]
            weight[out] = [1.0, 0.0, 0.0]
            status[out] = NEAREST
    return Stencil(index, weight, status, np.asarray(distance, dtype=np.float64))


@dataclass(frozen=True)
class Coverage:
    """How the targets sit in one data set: counts by status, distances to the data."""

    label: str
    location: str
    targets: int
    interpolated: int
    cell_values: int
    nearest: int
    missing: int
    outside_rule: str
    distance_max: float
    distance_mean: float
    distance_max_outside: float
    spacing: float

    @property
    def inside_share(self) -> float:
        """Share of the targets inside the data (hull of a cloud, the mesh of mesh data)."""
        return (self.interpolated + self.cell_values) / self.targets if self.targets else float("nan")

    @classmethod
    def of(cls, ds: DataSet, st: Stencil, outside: str) -> Coverage:
        s, d = st.status, st.distance
        outside_d = d[(s == NEAREST) | (s == MISSING)]
        return cls(
            ds.label, ds.location, len(s), int((s == INTERPOLATED).sum()), int((s == CELL_VALUE).sum()),
            int((s == NEAREST).sum()), int((s == MISSING).sum()), outside,
            float(d.max(initial=0.0)), float(d.mean()) if len(d) else 0.0,
            float(outside_d.max(initial=0.0)), ds.spacing,
        )

    def as_dict(self) -> dict[str, Any]:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["inside_share"] = self.inside_share
        return d

    def __str__(self) -> str:
        parts = [f"{self.label}: {self.inside_share:.1%} of {self.targets} targets inside the data"]
        if self.cell_values:
            parts.append(f"{self.cell_values} take their cell's value (between the outermost centres and the "
                         "boundary)")
        if self.nearest:
            parts.append(f"{self.nearest} outside take the nearest value (up to {self.distance_max_outside:.3g} "
                         "away)")
        if self.missing:
            parts.append(f"{self.missing} outside left empty")
        parts.append(f"distance to the nearest data point: max {self.distance_max:.3g}, mean "
                     f"{self.distance_mean:.3g} (data spacing {self.spacing:.3g})")
        return "; ".join(parts)


@dataclass(frozen=True)
class ErrorEstimate:
    """Hold-out estimate of the linear-interpolation error of one quantity (see the module docstring)."""

    quantity: str
    held_out: int
    rms: float
    max: float
    range: float

    def as_dict(self) -> dict[str, Any]:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def holdout_error(ds: DataSet, quantities: list[str] | None = None, fraction: float = 0.1,
                  max_sites: int = 2000, seed: int = 0) -> dict[str, ErrorEstimate]:
    """Leave a random ``fraction`` of the sites out (at most ``max_sites``), interpolate them linearly
    from the Delaunay triangles of the rest, and report the RMS and max difference per quantity
    (with the quantity's range). Fewer than 30 sites, or none left out inside the rest: NaN."""
    names = list(ds.values) if quantities is None else list(quantities)
    n = len(ds.sites)
    k = min(max_sites, int(fraction * n))
    nan = {q: ErrorEstimate(q, 0, float("nan"), float("nan"), _span(ds.values[q])) for q in names}
    if n < 30 or k < 3:
        return nan
    rng = np.random.default_rng(seed)
    out_idx = rng.choice(n, size=k, replace=False)
    keep = np.ones(n, dtype=bool)
    keep[out_idx] = False
    try:
        rest = DataSet(ds.label, "cloud", ds.sites[keep], {q: ds.values[q][keep] for q in names})
        st = stencil(rest, ds.sites[out_idx], outside="nan", refuse_no_overlap=False)
    except CaseError:
        return nan
    ok = st.status == INTERPOLATED
    if not ok.any():
        return nan
    res = {}
    for q in names:
        d = st.apply(rest.values[q])[ok] - ds.values[q][out_idx][ok]
        res[q] = ErrorEstimate(q, int(ok.sum()), float(np.sqrt(np.mean(d * d))), float(np.abs(d).max()),
                               _span(ds.values[q]))
    return res


def _span(v: np.ndarray) -> float:
    return float(np.ptp(v)) if len(v) else float("nan")


@dataclass
class Interpolated:
    """Quantities at the targets, with the coverage of each data set used and the error estimates."""

    source: str
    values: dict[str, np.ndarray]
    coverage: list[Coverage] = field(default_factory=list)
    errors: dict[str, ErrorEstimate] = field(default_factory=dict)
    #: targets outside the data of any data set used (their values follow the outside rule)
    outside: np.ndarray | None = None

    def __getitem__(self, quantity: str) -> np.ndarray:
        if quantity not in self.values:
            raise CaseError(f"{self.source}: no quantity {quantity!r}; it gives "
                            f"{', '.join(self.values) or 'none'}")
        return self.values[quantity]

    def __contains__(self, quantity: str) -> bool:
        return quantity in self.values

    @property
    def inside_share(self) -> float:
        """The smallest share of targets inside the data over the data sets used."""
        return min((c.inside_share for c in self.coverage), default=float("nan"))

    def report(self) -> dict[str, Any]:
        """Coverage and error estimates as plain data (for JSON)."""
        return {
            "source": self.source,
            "coverage": [c.as_dict() for c in self.coverage],
            "error_estimate": {q: e.as_dict() for q, e in self.errors.items()},
        }

    def text(self) -> str:
        lines = [str(c) for c in self.coverage]
        for q, e in self.errors.items():
            if np.isfinite(e.rms):
                lines.append(f"{q}: hold-out interpolation error rms {e.rms:.3g}, max {e.max:.3g} "
                             f"(range {e.range:.3g}, {e.held_out} sites)")
        return "\n".join(lines)
