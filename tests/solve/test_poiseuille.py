"""Plane Poiseuille flow: the developed profile u(y) = 6 U y (h - y) / h^2 and the pressure
gradient dp/dx = -12 mu U / h^2 (exact solution of the Navier-Stokes equations; e.g. White,
Viscous Fluid Flow, 3rd ed., sec. 3-3.2)."""

from __future__ import annotations

import numpy as np
import pytest
from flows import solve, split_same_diagonal

from fvrans.mesh.generate import channel

H, L, U, MU = 1.0, 10.0, 1.0, 0.02  # Re_h = 50: entrance length ~ 0.05 Re h = 2.5 h (common practice)


@pytest.mark.parametrize("triangles", [False, True], ids=["quads", "triangles"])
def test_developed_channel_flow(triangles):
    mesh = channel(L, H, 100, 40)
    if triangles:
        mesh = split_same_diagonal(mesh)
    specs = {
        "inlet": {"kind": "inflow-velocity", "velocity": [U, 0.0]},
        "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
        "lower_wall": {"kind": "wall"},
        "upper_wall": {"kind": "wall"},
    }
    solver, converged = solve(mesh, specs, mu=MU, tolerance=1e-8, max_iterations=4000)
    assert converged
    xc = solver.geom.cell_centre
    u = solver.fields.velocity[:, 0]
    band = np.abs(xc[:, 0] - 8.0) < 0.1  # developed region, well before the outlet
    y = xc[band, 1]
    exact = 6 * U * y * (H - y) / H**2
    l2 = np.sqrt(np.mean((u[band] - exact) ** 2))
    assert l2 < 0.005 * 1.5 * U, f"L2 error {l2:.3g} of the profile"
    core = (xc[:, 0] > 5.0) & (xc[:, 0] < 9.0)
    slope = np.polyfit(xc[core, 0], solver.fields.pressure[core], 1)[0]
    exact_slope = -12 * MU * U / H**2
    assert abs(slope / exact_slope - 1) < 0.005, f"dp/dx {slope:.6g}, exact {exact_slope:.6g}"
