"""Verification against references: readers, comparison specs and reports, grid-convergence studies."""

from fvrans.reference.meshfile import FieldFile, read_field
from fvrans.reference.tables import Table, ZonedTable, read_columns, read_csv, read_table
from fvrans.verify.compare import Curve, ItemResult, ResultDir, compare, compare_item, curve_metric
from fvrans.verify.gci import (
    GciResult,
    GridConvergence,
    GridStudy,
    gci_three,
    grid_convergence,
    grid_study,
    grid_study_command,
    plot_grid_convergence,
    quantity_value,
    representative_size,
    result_dir_size,
    write_grid_study,
)
from fvrans.verify.grid_runs import grid_changes, run_grid_study, run_grid_study_command
from fvrans.verify.report import compare_command, junit_xml, markdown_table, write_report
from fvrans.verify.spec import Item, Spec, Transform, load_spec, parse_spec

__all__ = [
    "Curve",
    "FieldFile",
    "GciResult",
    "GridConvergence",
    "GridStudy",
    "Item",
    "ItemResult",
    "ResultDir",
    "Spec",
    "Table",
    "Transform",
    "ZonedTable",
    "compare",
    "compare_command",
    "compare_item",
    "curve_metric",
    "gci_three",
    "grid_convergence",
    "grid_study",
    "grid_changes",
    "grid_study_command",
    "junit_xml",
    "load_spec",
    "markdown_table",
    "parse_spec",
    "plot_grid_convergence",
    "quantity_value",
    "read_columns",
    "read_csv",
    "read_field",
    "read_table",
    "representative_size",
    "result_dir_size",
    "run_grid_study",
    "run_grid_study_command",
    "write_grid_study",
    "write_report",
]
