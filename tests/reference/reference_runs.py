"""Converged Spalart-Allmaras runs shared by the injection and a-priori tests (solved once per
process, written to a result folder): the bundled flat plate on its coarse grid and a small
generated step at Re_H = 5 000."""

from __future__ import annotations

import tempfile
from functools import cache
from pathlib import Path

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[2]
#: a small generated step at Re_H = 5 000 (1 728 cells; the bundled Re_H = 36 000 grids are in
#: benchmarks/bench_injection.py)
STEP_MESH = {"x_in": -4.0, "x_out": 30.0, "nx_up": 12, "nx_down": 36, "ny_upper": 24, "ny_lower": 16,
             "wall_spacing": 2e-3, "corner_spacing": 8e-3, "outlet_spacing": 1.0}


def plate_case() -> fa.Case:
    """cases/flat_plate_turbulent.toml on meshes/flat_plate_coarse.msh (3 264 cells)."""
    return fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(ROOT / "meshes" / "flat_plate_coarse.msh")})


def step_case() -> fa.Case:
    """cases/step_coarse.toml on the small generated step, nu = 2e-4 (Re_H = 5 000), to 1e-8."""
    return fa.load_case(ROOT / "cases" / "step_coarse.toml").replace({
        "mesh.file": None, "mesh.generator": "backward_facing_step", "mesh.parameters": STEP_MESH,
        "fluid.viscosity": 2e-4, "solver.tolerance": 1e-8})


@cache
def sa_run(which: str) -> tuple[fa.Result, Path]:
    """The converged run of ``which`` ("plate" or "step") and the result folder it was written to."""
    r = fa.solve(plate_case() if which == "plate" else step_case())
    assert r.converged and r.stopped_by == "settled", r.message
    folder = Path(tempfile.mkdtemp(prefix=f"fvrans_sa_{which}_"))
    r.write(folder)
    return r, folder
