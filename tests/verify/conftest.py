"""Fixtures: hand-written result directories in the layout a run writes (no solver involved)."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pytest

_here = str(Path(__file__).resolve().parent)
if _here not in sys.path:
    sys.path.insert(0, _here)

from verify_helpers import write_quad_field  # noqa: E402


@pytest.fixture
def make_result_dir(tmp_path):
    """Factory: make_result_dir(name, n_cells=..., walls={patch: {col: array}}, summary_extra={...},
    field=(nx, ny, lx, ly, cell_fn)) writes summary.json, wall/<patch>.csv and fields.vtu."""

    def make(name="run", n_cells=100, walls=None, summary_extra=None, field=None):
        d = tmp_path / name
        (d / "wall").mkdir(parents=True)
        summary = {"title": name, "converged": True, "iterations": 10, "n_cells": n_cells, "walls": {}}
        summary.update(summary_extra or {})
        (d / "summary.json").write_text(json.dumps(summary))
        for patch, cols in (walls or {}).items():
            names = list(cols)
            rows = [",".join(repr(float(v)) for v in row) for row in zip(*cols.values())]
            (d / "wall" / f"{patch}.csv").write_text(",".join(names) + "\n" + "\n".join(rows) + "\n")
        if field is not None:
            nx, ny, lx, ly, fn = field
            write_quad_field(d / "fields.vtu", nx, ny, lx, ly, cell_fn=fn)
        return d

    return make
