"""The results table of a sweep: one row per design point, written atomically as CSV and JSON.

Columns: ``run`` (position in the plan), ``key`` (the run folder ``runs/<key>``; none for values the
case refuses), one column per parameter and per output (by name), ``status`` (``converged``,
``not-converged``, ``diverged`` or ``failed``; ``not-run`` for the runs a stopped sweep did not
reach), ``converged``, ``iterations``, ``wall_seconds`` (of the whole run: mesh, solve, writing)
and ``error`` (why a run failed, did not converge or an output could not be collected;
empty otherwise).
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from fvrans.post.writers import atomic_write, to_jsonable, write_json_atomic

TABLE_CSV = "results.csv"
TABLE_JSON = "results.json"
STATUSES = ("converged", "not-converged", "diverged", "failed", "not-run")


@dataclass
class ResultsTable:
    """The rows of a sweep (dicts keyed by column name) in plan order.

    >>> t = ResultsTable(["run", "mu", "status", "error"], [
    ...     {"run": 0, "mu": 0.1, "status": "converged", "error": ""},
    ...     {"run": 1, "mu": 0.2, "status": "failed", "error": "MeshError: ..."}])
    >>> t.column("mu"), t.all_ok, len(t.failed())
    ([0.1, 0.2], False, 1)
    """

    columns: list[str]
    rows: list[dict[str, Any]]
    meta: dict[str, Any] = field(default_factory=dict)

    def __len__(self) -> int:
        return len(self.rows)

    def column(self, name: str) -> list[Any]:
        """The values of one column, in plan order."""
        if name not in self.columns:
            raise KeyError(f"no column {name!r}; the table has {', '.join(self.columns)}")
        return [r.get(name) for r in self.rows]

    def failed(self) -> list[dict[str, Any]]:
        """Rows that failed, did not converge, diverged, or miss an output."""
        return [r for r in self.rows if r.get("status") != "converged" or r.get("error")]

    @property
    def all_ok(self) -> bool:
        return not self.failed()


def _cell(v: Any) -> str:
    if v is None:
        return ""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, (list, tuple, dict)):
        return json.dumps(to_jsonable(v))
    return " | ".join(str(v).splitlines())


def csv_text(table: ResultsTable) -> str:
    """The table as CSV text (a header line; floats at full precision; lists as JSON; quoted where
    needed; line breaks in error texts become ``" | "``)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(table.columns)
    for r in table.rows:
        w.writerow([_cell(r.get(c)) for c in table.columns])
    return buf.getvalue()


def write_table(out_dir: str | Path, table: ResultsTable) -> tuple[Path, Path]:
    """Write ``results.csv`` and ``results.json`` into ``out_dir`` (each atomically)."""
    out = Path(out_dir)
    text = csv_text(table)
    atomic_write(out / TABLE_CSV, lambda f: f.write(text))
    write_json_atomic(out / TABLE_JSON, to_jsonable({**table.meta, "columns": table.columns, "runs": table.rows}))
    return out / TABLE_CSV, out / TABLE_JSON


def table_columns(parameter_names: Sequence[str], output_names: Sequence[str]) -> list[str]:
    return ["run", "key", *parameter_names, *output_names, "status", "converged", "iterations",
            "wall_seconds", "error"]
