"""The coarse-grid step run shared by the verification tests (solved once per process)."""

from __future__ import annotations

from functools import cache
from pathlib import Path

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[2]


@cache
def coarse() -> fa.Result:
    """cases/step_medium.toml on meshes/step_coarse.msh (6 912 cells)."""
    case = fa.load_case(ROOT / "cases" / "step_medium.toml").set("mesh.file", str(ROOT / "meshes" / "step_coarse.msh"))
    return fa.solve(case)
