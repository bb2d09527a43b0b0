"""Readers of reference data, kept here for existing imports; they live in :mod:`fvrans.reference`."""

from fvrans.reference.meshfile import FieldFile, read_field
from fvrans.reference.tables import Table, ZonedTable, read_columns, read_csv, read_table

__all__ = ["FieldFile", "Table", "ZonedTable", "read_columns", "read_csv", "read_field", "read_table"]
