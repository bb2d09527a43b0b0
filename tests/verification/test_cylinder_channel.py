"""Laminar flow round a circular cylinder in a channel at Re = 20 against the benchmark of
Schaefer & Turek (1996, "Benchmark computations of laminar flow around a cylinder", Notes on
Numerical Fluid Mechanics 52, Vieweg; steady case 2D-1), on three nested triangle grids of
cases/cylinder_channel_re20.toml.

Published ranges (the spread of the benchmark's participants; from memory):
drag coefficient 5.57 .. 5.59, lift coefficient 0.0104 .. 0.0110, pressure difference between the
front (0.15, 0.2) and the back (0.25, 0.2) point of the cylinder 0.1172 .. 0.1176. (Later
high-accuracy computations give 5.5795, 0.01062, 0.11752; from memory.)

The pressure difference comes from the case's point probes at the two points (the average of the
reconstructions, cell value plus gradient times offset, of the cells holding each point; both lie
just outside the polygon of the circle, in wall cells) and its derived scalar ``dp``; the wall
pressure of the faces next to each point, interpolated along the wall, gives the same to 3.4e-4,
6.4e-5, 1.1e-5 on the three grids.

Measured (cylinder_channel_grid, n points round the cylinder; tolerance 1e-8):
  n =  48,  1 728 cells: Cd 5.59379, Cl 0.013949, dp 0.11830
  n =  96,  6 912 cells: Cd 5.57943, Cl 0.011816, dp 0.11770
  n = 192, 27 648 cells: Cd 5.57883, Cl 0.010952, dp 0.11757
All three fall monotonically and the finest grid lies inside the three ranges. One level finer the
drag turns (64 / 128 / 256 points: 5.58548, 5.57874, 5.57903, lift 0.012904, 0.011328, 0.010818,
dp from the wall pressures 0.11819, 0.11764, 0.11756): its error at 1e-4 is within a wobble of the
drag's last digits.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from test_bundled_specs import _run_spec

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[2]
CASE = ROOT / "cases" / "cylinder_channel_re20.toml"
RANGES = {"Cd": (5.57, 5.59), "Cl": (0.0104, 0.0110), "dp": (0.1172, 0.1176)}  # Schaefer & Turek (1996)
LEVELS = (48, 96, 192)


def wall_point_value(wall, values: np.ndarray, point: tuple[float, float]) -> float:
    """``values`` (per face) at a point of the wall: linear in arc length between the two faces
    whose centres are nearest to the point (both sides of a polygon vertex)."""
    d = np.hypot(wall.x - point[0], wall.y - point[1])
    i, j = np.argsort(d)[:2]
    return float((values[i] * d[j] + values[j] * d[i]) / (d[i] + d[j]))


def coefficients(result: fa.Result) -> dict[str, float]:
    s = result.summary()
    forces = s["walls"]["cylinder"]["forces"]
    w = result.wall("cylinder")
    dp_wall = wall_point_value(w, w.p_wall, (0.15, 0.2)) - wall_point_value(w, w.p_wall, (0.25, 0.2))
    assert s["derived"]["dp"] == pytest.approx(dp_wall, abs=5e-4)  # two reconstructions of the same points
    return {"Cd": forces["Cd"], "Cl": forces["Cl"], "dp": s["derived"]["dp"]}


@pytest.fixture(scope="module")
def runs():
    out = {}
    case = fa.load_case(CASE)
    for n in LEVELS:
        r = fa.solve(case.set("mesh.parameters", {"n_cylinder": n}))
        assert r.converged, r.message
        out[n] = r
    return out


@pytest.mark.slow
def test_drag_lift_and_pressure_difference_converge_into_the_published_ranges(runs):
    values = {n: coefficients(r) for n, r in runs.items()}
    for key, (lo, hi) in RANGES.items():
        v = [values[n][key] for n in LEVELS]
        steps = np.diff(v)
        assert np.all(steps < 0) or np.all(steps > 0), f"{key}: {v} does not converge monotonically"
        assert abs(steps[1]) < abs(steps[0]), f"{key}: {v}"
        assert lo <= v[-1] <= hi, f"{key} = {v[-1]:.6g} on the finest grid, published range {lo} .. {hi}"
    # the reference values follow the inflow: U_ref as the case gives it, the free stream along +x
    ref = runs[LEVELS[-1]].summary()["reference"]
    assert ref["u_ref"] == 0.2 and ref["u_ref_from"] == "case" and ref["flow_direction"] == [1.0, 0.0]


@pytest.mark.slow
def test_bundled_checks_pass_on_the_bundled_grid(runs, tmp_path):
    assert fa.load_case(CASE).mesh.parameters == {"n_cylinder": LEVELS[-1]}
    items = _run_spec(runs[LEVELS[-1]], "cylinder_channel_checks.toml", tmp_path)
    assert set(items) == {"drag", "lift", "pressure_difference"}
