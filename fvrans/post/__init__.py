"""Post-processing and output: wall quantities, forces, and atomic JSON/CSV/VTU writers."""

from fvrans.post.forces import (
    ForceReference,
    InflowReference,
    PatchForces,
    case_reference,
    forces_summary,
    group_forces,
    inflow_reference,
    patch_forces,
)
from fvrans.post.residuals import residual_columns, write_residuals_csv
from fvrans.post.summary import build_summary, wall_summary
from fvrans.post.wall import (
    PatchOrder,
    WallData,
    ZeroShearPoint,
    all_wall_data,
    order_patch_faces,
    sign_changes,
    unit_tangent,
    wall_columns,
    wall_data,
    wall_patches,
    zero_shear_points,
)
from fvrans.post.writers import (
    atomic_path,
    atomic_write,
    to_jsonable,
    vtu_cell_blocks,
    write_csv_atomic,
    write_json_atomic,
    write_vtu_atomic,
)

__all__ = [
    "InflowReference",
    "PatchForces",
    "ForceReference",
    "PatchOrder",
    "WallData",
    "ZeroShearPoint",
    "all_wall_data",
    "atomic_path",
    "atomic_write",
    "build_summary",
    "case_reference",
    "forces_summary",
    "group_forces",
    "inflow_reference",
    "order_patch_faces",
    "patch_forces",
    "residual_columns",
    "sign_changes",
    "to_jsonable",
    "unit_tangent",
    "vtu_cell_blocks",
    "wall_columns",
    "wall_data",
    "wall_patches",
    "wall_summary",
    "write_csv_atomic",
    "write_json_atomic",
    "write_residuals_csv",
    "write_vtu_atomic",
    "zero_shear_points",
]
