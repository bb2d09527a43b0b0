"""Fields from outside a run, by kind of input, all read into one :class:`FieldSource`.

Kinds: a point cloud (CSV with named columns), a mesh file with point or cell data (anything
meshio reads: VTU, Gmsh ``.msh`` with node or element data, ...), an fvrans result folder (its
``fields.vtu``), and the cells of a mesh in memory (a :class:`fvrans.api.Result`).

Quantities are scalars with fvrans's names: ``u``, ``v`` (velocity), ``p`` (static pressure),
``R_xx``, ``R_xy``, ``R_yy`` (Reynolds stresses <u_i' u_j'>, per unit mass, m^2/s^2), ``k``,
``nu_tilde`` (the Spalart-Allmaras variable); any other column or scalar field is kept under its
own name. Each is looked up under these names by default (:data:`DEFAULT_NAMES`: in mesh files
also the components of a vector ``velocity`` and a scalar ``pressure``, as fvrans writes them);
``names={"u": "U_mean", "R_xy": "uv"}`` reads them from other columns or fields, and
``"field[1]"`` picks a component of a vector field. Velocity components come in pairs and the
three stresses together; a value that is not a finite number is refused with the file, the
column and the row (or point/cell).
"""

from __future__ import annotations

import os
import re
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.reference.interpolate import (
    MISSING,
    NEAREST,
    Coverage,
    DataSet,
    Domain,
    ErrorEstimate,
    Interpolated,
    holdout_error,
    stencil,
)
from fvrans.reference.meshfile import FieldFile, read_field
from fvrans.reference.tables import read_csv

#: fvrans's quantities and the names looked for when none is given (first found wins)
DEFAULT_NAMES: dict[str, tuple[str, ...]] = {
    "u": ("u", "velocity[0]"),
    "v": ("v", "velocity[1]"),
    "p": ("p", "pressure"),
    "R_xx": ("R_xx",),
    "R_xy": ("R_xy",),
    "R_yy": ("R_yy",),
    "k": ("k",),
    "nu_tilde": ("nu_tilde",),
}
#: coordinate columns of a point cloud
DEFAULT_COORDINATES = {"x": "x", "y": "y"}
#: quantities that only make sense together
GROUPS = (("u", "v"), ("R_xx", "R_xy", "R_yy"))
#: the file an fvrans result folder holds its cell fields in
RESULT_FIELDS = "fields.vtu"

_COMPONENT = re.compile(r"^(.*)\[(\d+)\]$")


@dataclass
class FieldSource:
    """Quantities read from one input, in one or two data sets (a mesh file may hold point data and
    cell data). ``kind``: "point cloud", "mesh file", "result folder" or "result"."""

    label: str
    kind: str
    sets: tuple[DataSet, ...]

    def quantities(self) -> list[str]:
        return [q for ds in self.sets for q in ds.values]

    def __contains__(self, quantity: str) -> bool:
        return any(quantity in ds.values for ds in self.sets)

    def dataset(self, quantity: str) -> DataSet:
        for ds in self.sets:
            if quantity in ds.values:
                return ds
        raise CaseError(f"{self.label}: no {quantity!r} in this {self.kind}; it gives "
                        f"{', '.join(self.quantities()) or 'nothing'}" + _hint(quantity))

    def require(self, *quantities: str) -> None:
        """CaseError naming the source and what it has when a quantity is missing."""
        for q in quantities:
            self.dataset(q)

    def interpolate(self, xy: np.ndarray, quantities: list[str] | None = None, outside: str = "nearest",
                    estimate_error: bool = True, target_label: str = "target point") -> Interpolated:
        """The quantities at points ``xy`` (m, 2), with coverage and (optionally) error estimates.

        ``outside``: "nearest" (default), "refuse" or "nan" (:mod:`fvrans.reference.interpolate`).
        """
        wanted = self.quantities() if quantities is None else list(quantities)
        self.require(*wanted)
        out = Interpolated(self.label, {})
        out.outside = np.zeros(len(np.asarray(xy).reshape(-1, 2)), dtype=bool)
        for ds in self.sets:
            names = [q for q in wanted if q in ds.values]
            if not names:
                continue
            st = stencil(ds, xy, outside=outside, target_label=target_label)
            out.outside |= (st.status == NEAREST) | (st.status == MISSING)
            out.coverage.append(Coverage.of(ds, st, outside))
            for q in names:
                out.values[q] = st.apply(ds.values[q])
            if estimate_error and not np.all(st.distance == 0.0):  # (targets on the sites: nothing interpolated)
                out.errors.update(holdout_error(ds, names))
        out.values = {q: out.values[q] for q in wanted}
        return out

    def onto_cells(self, mesh: Any, geom: Any = None, quantities: list[str] | None = None,
                   outside: str = "nearest", estimate_error: bool = True) -> Interpolated:
        """The quantities at the cell centres of an fvrans mesh (``geom``: its Geometry, computed when
        not given)."""
        if geom is None:
            from fvrans.mesh.geometry import compute_geometry

            geom = compute_geometry(mesh)
        return self.interpolate(geom.cell_centre, quantities, outside, estimate_error, target_label="cell")


def _hint(quantity: str) -> str:
    cands = DEFAULT_NAMES.get(quantity)
    if cands is None:
        return ""
    return (f"; fvrans looks for {' or '.join(repr(c) for c in cands)}, name another column or field with "
            f"names={{{quantity!r}: ...}}")


def _check_groups(label: str, have: set[str]) -> None:
    for group in GROUPS:
        got = [q for q in group if q in have]
        if got and len(got) < len(group):
            missing = [q for q in group if q not in have]
            raise CaseError(f"{label}: {', '.join(got)} given without {', '.join(missing)}; "
                            f"{', '.join(group)} are read together (name their columns with names=...)")


def _check_finite(ds: DataSet, what: dict[str, str]) -> None:
    for q, v in ds.values.items():
        bad = np.flatnonzero(~np.isfinite(v))
        if len(bad):
            i = int(bad[0])
            raise CaseError(
                f"{ds.label}: {what.get(q, repr(q))} holds {float(v[i])} at {ds.site_name(i)}"
                + (f" and {len(bad) - 1} more" if len(bad) > 1 else "")
                + "; every value must be a finite number: remove those rows or fill them in"
            )


def _names(names: Mapping[str, str] | None, label: str) -> dict[str, str]:
    out = dict(names or {})
    for q, n in out.items():
        if not isinstance(n, str) or not n:
            raise CaseError(f"{label}: names[{q!r}] = {n!r}: give a column or field name (a string)")
    return out


# ---------------------------------------------------------------------------------------------
def read_cloud(path: str | os.PathLike, names: Mapping[str, str] | None = None) -> FieldSource:
    """A point cloud from a CSV file: columns ``x``, ``y`` and the quantities (see the module
    docstring); ``names`` maps quantities (and ``x``, ``y``) to other column names.

    >>> import tempfile, pathlib
    >>> p = pathlib.Path(tempfile.mkdtemp()) / "c.csv"
    >>> _ = p.write_text("x,y,U,V\\n0,0,1,0\\n1,0,2,0\\n0,1,3,0\\n")
    >>> src = read_cloud(p, names={"u": "U", "v": "V"})
    >>> src.interpolate([[0.25, 0.25]], estimate_error=False)["u"]
    array([1.75])
    """
    label = str(path)
    given = _names(names, label)
    t = read_csv(path)
    cx = t.column(given.get("x", "x"))
    cy = t.column(given.get("y", "y"))
    used = {given.get("x", "x"), given.get("y", "y")}
    columns: dict[str, str] = {}
    for q, col in given.items():
        if q not in ("x", "y"):
            t.index(col)  # a missing column: CaseError naming the file and its columns
            columns[q] = col
    for q, cands in DEFAULT_NAMES.items():
        if q not in columns:
            col = next((c for c in cands if c in t.names and c not in used), None)
            if col is not None:
                columns[q] = col
    taken = used | set(columns.values())
    for col in t.names:
        if col not in taken and col not in columns:
            columns[col] = col
    _check_groups(label, set(columns))
    ds = DataSet(label, "cloud", np.column_stack([cx, cy]), {q: t.column(c).copy() for q, c in columns.items()},
                 lines=t.lines)
    _check_finite(ds, {q: f"column {c}" for q, c in columns.items()}
                  | {"x": "x", "y": "y"})
    bad = np.flatnonzero(~np.isfinite(ds.sites).all(axis=1))
    if len(bad):
        raise CaseError(f"{label}: line {int(t.lines[bad[0]])}: the coordinates ({given.get('x', 'x')}, "
                        f"{given.get('y', 'y')}) are not finite numbers; remove the row")
    return FieldSource(label, "point cloud", (ds,))


def _resolve(ff: FieldFile, spec: str) -> tuple[str, np.ndarray] | None:
    """("nodes" | "cells", values) of ``"name"`` or ``"name[i]"`` in the file, None when absent."""
    m = _COMPONENT.match(spec)
    name, comp = (m.group(1), int(m.group(2))) if m else (spec, None)
    if name not in ff.point_data and name not in ff.cell_data:
        return None
    return ff.values(name, comp)


def read_mesh_data(path: str | os.PathLike, names: Mapping[str, str] | None = None,
                   kind: str = "mesh file", label: str | None = None) -> FieldSource:
    """Point and cell data of a mesh file meshio reads (VTU, Gmsh with node/element data, ...).

    ``names`` maps quantities to fields (``"field"`` or ``"field[i]"`` for a component). A quantity
    found both as point and as cell data is taken from the point data. Scalar fields not used for a
    quantity are kept under their own names (meshio's internal ``"gmsh:..."`` arrays are left out).
    """
    ff = read_field(path)
    label = label or ff.path
    given = _names(names, label)
    found: dict[str, tuple[str, np.ndarray, str]] = {}
    for q, spec in given.items():
        got = _resolve(ff, spec)
        if got is None:
            raise CaseError(f"{ff.path}: no field {spec.split('[')[0]!r} for {q!r}; the file has "
                            f"{', '.join(ff.names()) or 'no fields'}")
        found[q] = (*got, spec)
    used = {s.split("[")[0] for _, _, s in found.values()}
    for q, cands in DEFAULT_NAMES.items():
        if q in found:
            continue
        hits = [(spec, _resolve(ff, spec)) for spec in cands if spec.split("[")[0] not in used]
        hits = [(s, h) for s, h in hits if h is not None]
        hits.sort(key=lambda sh: sh[1][0] != "nodes")  # point data first
        if hits:
            spec, (where, v) = hits[0]
            found[q] = (where, v, spec)
    used = {s.split("[")[0] for _, _, s in found.values()}
    for name in ff.names():
        if name in used or ":" in name or name in found:
            continue
        arr = ff.point_data.get(name, ff.cell_data.get(name))
        if np.asarray(arr).ndim == 1 or (np.asarray(arr).ndim == 2 and np.asarray(arr).shape[1] == 1):
            found[name] = (*ff.values(name), name)
    _check_groups(label, set(found))
    sets = []
    for where, what in (("nodes", "point data"), ("cells", "cell data")):
        vals = {q: v for q, (w, v, _) in found.items() if w == where}
        if vals:
            sites = ff.points if where == "nodes" else ff.cell_centre
            ds = DataSet(f"{label}: {what}", where, sites, vals, ff.domain)
            _check_finite(ds, {q: f"field {s}" for q, (w, _, s) in found.items() if w == where})
            sets.append(ds)
    if not sets:
        raise CaseError(f"{ff.path}: the file holds no point or cell data to read")
    return FieldSource(label, kind, tuple(sets))


def read_result_folder(folder: str | os.PathLike) -> FieldSource:
    """The cell fields of an fvrans result folder (``fields.vtu``: velocity, pressure and, with
    Spalart-Allmaras, nu_tilde, eddy_viscosity_ratio, wall_distance)."""
    from fvrans.post.outputs import recover

    d = Path(folder)
    if not d.is_dir():
        raise CaseError(f"result folder {d} does not exist (a folder fvrans run --out wrote)")
    recover(d)  # a set of outputs half put in place by a killed run is finished first
    f = d / RESULT_FIELDS
    if not f.is_file():
        raise CaseError(f"{d}: no {RESULT_FIELDS} in this folder; is it the output folder of a run "
                        "(with output.write_fields = true)?")
    return read_mesh_data(f, kind="result folder", label=str(d))


def cell_source(mesh: Any, centres: np.ndarray, values: Mapping[str, np.ndarray], label: str,
                kind: str = "result") -> FieldSource:
    """Cell values on an fvrans :class:`~fvrans.mesh.mesh.Mesh` in memory (centres: the cell centroids)."""
    dom = Domain.from_csr(mesh.points, mesh.cell_offsets, mesh.cell_points)
    ds = DataSet(label, "cells", centres, {q: np.asarray(v, dtype=np.float64) for q, v in values.items()}, dom)
    _check_finite(ds, {})
    return FieldSource(label, kind, (ds,))


def read_source(path: str | os.PathLike, names: Mapping[str, str] | None = None) -> FieldSource:
    """Any input by its kind: a folder is a result folder, a ``.csv`` file a point cloud, any other
    file a mesh file with data."""
    p = Path(path)
    if p.is_dir():
        if names:
            raise CaseError(f"{p}: a result folder's fields have fvrans's names; remove names=")
        return read_result_folder(p)
    if not p.exists():
        raise CaseError(f"{p} does not exist; give a CSV point cloud, a mesh file with data or a result folder")
    if p.suffix.lower() == ".csv":
        return read_cloud(p, names)
    return read_mesh_data(p, names)


__all__ = [
    "DEFAULT_COORDINATES",
    "DEFAULT_NAMES",
    "ErrorEstimate",
    "FieldSource",
    "cell_source",
    "read_cloud",
    "read_mesh_data",
    "read_result_folder",
    "read_source",
]
