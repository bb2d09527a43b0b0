"""A reference mean flow on the cells of a run's mesh: what Reynolds-stress injection
(:mod:`fvrans.models.injected`), a-priori model tests, the comparison with the reference and the
feature export read.

The reference comes from any input of :mod:`fvrans.reference.source` (interpolated onto the cell
centres: linear, with the ``outside`` rule for cells outside the data) or as values given per cell
of the run's own mesh (Python). It must give the velocity (u, v); Reynolds stresses R_xx, R_xy, R_yy
(per unit mass, m^2/s^2) where a run needs them; any other quantity (p, k, epsilon, nu_tilde, ...)
is carried along.

Outside rules: ``"nearest"`` (the nearest data value), ``"refuse"`` (CaseError naming the first
cell outside) and ``"zero-stress"`` (the nearest velocity, but no reference stress outside the data:
an injected run is laminar there). Cells outside the data are left out of the comparisons.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from fvrans.case.schema import REFERENCE_OUTSIDE
from fvrans.errors import CaseError
from fvrans.reference.source import FieldSource

#: the reference stress columns (per unit mass)
STRESS = ("R_xx", "R_xy", "R_yy")
#: rules for cells outside the reference data (the choices of ``[reference] outside``)
OUTSIDE = REFERENCE_OUTSIDE


@dataclass
class CellReference:
    """The reference flow on the cells: ``velocity`` (n, 2), ``stress`` (n, 3) as R_xx, R_xy, R_yy per
    unit mass (None when the reference has none), ``inside`` (n,) the cells inside the data, every
    other quantity in ``quantities``, ``face_flux`` (n_faces,) when the reference is a run on this
    mesh (its own face fluxes), and ``report`` (source, coverage, interpolation error estimates)."""

    label: str
    kind: str
    velocity: np.ndarray
    stress: np.ndarray | None
    inside: np.ndarray
    quantities: dict[str, np.ndarray] = field(default_factory=dict)
    face_flux: np.ndarray | None = None
    report: dict[str, Any] = field(default_factory=dict)

    @property
    def n_cells(self) -> int:
        return len(self.velocity)

    def require_stress(self, what: str) -> np.ndarray:
        """The stress, or CaseError saying that ``what`` needs R_xx, R_xy, R_yy."""
        if self.stress is None:
            raise CaseError(f"{self.label}: {what} needs the Reynolds stresses R_xx, R_xy, R_yy, and this "
                            f"{self.kind} gives {', '.join(['u', 'v', *self.quantities]) or 'nothing else'}; "
                            "name their columns or fields with [reference] names = { R_xx = ..., R_xy = ..., "
                            "R_yy = ... }")
        return self.stress


def reference_from_source(source: FieldSource, cell_centres: np.ndarray, outside: str = "nearest"
                          ) -> CellReference:
    """The quantities of ``source`` at the cell centres (:meth:`FieldSource.interpolate`)."""
    if outside not in OUTSIDE:
        raise CaseError(f"reference outside = {outside!r}: use one of {', '.join(OUTSIDE)}")
    source.require("u", "v")
    wanted = list(dict.fromkeys(["u", "v", *source.quantities()]))
    got = source.interpolate(cell_centres, wanted, outside="refuse" if outside == "refuse" else "nearest",
                             target_label="cell")
    values = dict(got.values)
    out_mask = got.outside if got.outside is not None else np.zeros(len(cell_centres), dtype=bool)
    velocity = np.column_stack([values.pop("u"), values.pop("v")])
    stress = None
    if all(q in values for q in STRESS):
        stress = np.column_stack([values.pop(q) for q in STRESS])
        if outside == "zero-stress":
            stress[out_mask] = 0.0
    report = got.report()
    report["kind"] = source.kind
    report["outside_rule"] = outside
    report["cells_outside"] = int(out_mask.sum())
    return CellReference(source.label, source.kind, velocity, stress, ~out_mask, values, None, report)


def reference_from_cells(values: Mapping[str, Any], n_cells: int, label: str = "reference values per cell",
                         face_flux: np.ndarray | None = None) -> CellReference:
    """Values given per cell of the run's mesh: ``u`` and ``v`` (or ``velocity`` (n, 2)), optionally
    ``R_xx``, ``R_xy``, ``R_yy`` (or ``stress`` (n, 3)) and any other scalar per cell."""
    vals = {str(k): np.asarray(v, dtype=np.float64) for k, v in values.items()}
    if "velocity" in vals:
        velocity = vals.pop("velocity")
    elif "u" in vals and "v" in vals:
        velocity = np.column_stack([vals.pop("u"), vals.pop("v")])
    else:
        raise CaseError(f"{label}: give the reference velocity as 'u' and 'v' (or 'velocity', shape (n_cells, 2)); "
                        f"got {', '.join(vals) or 'nothing'}")
    if velocity.shape != (n_cells, 2):
        raise CaseError(f"{label}: the velocity has shape {velocity.shape}; give one (u, v) per cell, ({n_cells}, 2)")
    stress = None
    if "stress" in vals:
        stress = vals.pop("stress")
    elif any(q in vals for q in STRESS):
        missing = [q for q in STRESS if q not in vals]
        if missing:
            raise CaseError(f"{label}: {', '.join(q for q in STRESS if q in vals)} given without "
                            f"{', '.join(missing)}; the three stresses are read together")
        stress = np.column_stack([vals.pop(q) for q in STRESS])
    if stress is not None and stress.shape != (n_cells, 3):
        raise CaseError(f"{label}: the stress has shape {stress.shape}; give (R_xx, R_xy, R_yy) per cell, "
                        f"({n_cells}, 3)")
    for q, v in list(vals.items()) + [("velocity", velocity)] + ([("stress", stress)] if stress is not None else []):
        if v.shape[0] != n_cells:
            raise CaseError(f"{label}: {q!r} has {v.shape[0]} values; give one per cell ({n_cells})")
        bad = np.flatnonzero(~np.isfinite(v.reshape(n_cells, -1)).all(axis=1))
        if len(bad):
            raise CaseError(f"{label}: {q!r} is not a finite number in cell {int(bad[0])}"
                            + (f" and {len(bad) - 1} more" if len(bad) > 1 else "") + "; give finite values")
    report = {"source": label, "kind": "values per cell", "outside_rule": "none", "cells_outside": 0}
    return CellReference(label, "values per cell", np.ascontiguousarray(velocity),
                         None if stress is None else np.ascontiguousarray(stress), np.ones(n_cells, dtype=bool),
                         vals, None if face_flux is None else np.asarray(face_flux, dtype=np.float64), report)


__all__ = ["OUTSIDE", "STRESS", "CellReference", "reference_from_cells", "reference_from_source"]
