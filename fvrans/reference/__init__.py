"""Fields from outside a run, read and interpolated onto the cells of a mesh.

One place for every input that is not the run itself: point clouds (CSV), mesh files with point or
cell data (anything meshio reads), fvrans result folders and results in memory. Used by warm
starts from another mesh (:func:`fvrans.api.solve`), comparisons (:mod:`fvrans.verify`) and the
diagnostics of reference Reynolds stresses.

- :mod:`~fvrans.reference.tables`: CSV and plain-text column files (tables of numbers);
- :mod:`~fvrans.reference.meshfile`: mesh files with data (meshio);
- :mod:`~fvrans.reference.interpolate`: linear interpolation from data sites to points, the rule
  outside the data, coverage report, hold-out error estimate;
- :mod:`~fvrans.reference.source`: the readers by kind of input, all giving a :class:`FieldSource`;
- :mod:`~fvrans.reference.stress`: strain rate, rotation, the optimal eddy viscosity of a stress
  field, its misalignment with the strain rate and the part an eddy viscosity cannot carry;
- :mod:`~fvrans.reference.features`: per-cell invariants and tensor-basis coefficients (Pope 1975)
  for data-driven models, written as CSV and numpy archive.
"""

from fvrans.reference.interpolate import OUTSIDE_RULES, Coverage, ErrorEstimate, Interpolated
from fvrans.reference.meshfile import FieldFile, read_field
from fvrans.reference.source import (
    DEFAULT_NAMES,
    FieldSource,
    cell_source,
    read_cloud,
    read_mesh_data,
    read_result_folder,
    read_source,
)
from fvrans.reference.tables import Table, ZonedTable, read_columns, read_csv, read_table

__all__ = [
    "DEFAULT_NAMES",
    "OUTSIDE_RULES",
    "Coverage",
    "ErrorEstimate",
    "FieldFile",
    "FieldSource",
    "Interpolated",
    "Table",
    "ZonedTable",
    "cell_source",
    "read_cloud",
    "read_columns",
    "read_csv",
    "read_field",
    "read_mesh_data",
    "read_result_folder",
    "read_source",
    "read_table",
]
