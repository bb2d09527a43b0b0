"""Laminar flows on the parametric shapes (fvrans.mesh.shapes).

- Creeping flow over a symmetric bump is fore-aft symmetric: Stokes flow is reversible (reversing
  the driving reverses the velocity), and a bump symmetric about x = 0 between developed inflow and
  outflow maps onto itself under x -> -x, so the wall shear stress satisfies tau(-x) = tau(x)
  (e.g. Happel & Brenner 1965, Low Reynolds Number Hydrodynamics, sec. 2-5, reversibility).
  At Re_h = 0.01 the inertial asymmetry is O(Re) (common practice: Re << 1).
- Far from the bump the flow is plane Poiseuille flow: dp/dx = -12 mu U / h^2 (exact; e.g. White,
  Viscous Fluid Flow, 3rd ed., sec. 3-3.2).
"""

from __future__ import annotations

import numpy as np

import fvrans.api as fa

H, U = 1.0, 1.0


def bump_case(mu: float, **params) -> fa.Case:
    return fa.case_from_dict({
        "mesh": {"generator": "bump_channel", "parameters": params},
        "fluid": {"density": 1.0, "viscosity": mu},
        "initial": {"velocity": [U, 0.0]},
        "boundary": {
            "inlet": {"kind": "velocity-inlet", "velocity": [U, 0.0]},
            "outlet": {"kind": "pressure-outlet"},
            "lower_wall": {"kind": "wall"},
            "upper_wall": {"kind": "wall"},
        },
        "solver": {"tolerance": 1e-8, "max_iterations": 3000},
    })


def test_creeping_flow_over_bump_is_fore_aft_symmetric_and_poiseuille_far_away():
    mu = 100.0  # Re_h = rho U h / mu = 0.01
    case = bump_case(mu, bump_height=0.4, bump_length=1.0, upstream_length=5.0, downstream_length=5.0,
                     nx_bump=24, nx_up=20, nx_down=20, ny=20, wall_spacing=0.02)
    r = fa.solve(case)
    assert r.converged, r.message
    w = r.wall("lower_wall")
    on_bump = np.abs(w.x) < 0.5
    tau_x = w.tau_w * w.tangent[:, 0]
    x, t = w.x[on_bump], tau_x[on_bump]
    order = np.argsort(x)
    x, t = x[order], t[order]
    assert np.allclose(x, -x[::-1], atol=1e-12)  # face centres mirror each other (uniform along the bump)
    asym = np.abs(t - t[::-1]).max() / np.abs(t).max()
    assert asym < 2e-3, f"fore-aft asymmetry of the wall shear {asym:.3g}"
    # developed channel flow 2 h and more from the bump and the ends (Stokes disturbances decay
    # like exp(-4.2 x / h), the slowest channel Stokes eigenmode; from memory). 20 cells across
    # carry a 0.7 % discretisation error of dp/dx here (the same with bump_height = 0).
    xc = r.cell_centres
    for lo, hi in ((-4.0, -2.5), (2.5, 4.0)):
        band = (xc[:, 0] > lo) & (xc[:, 0] < hi)
        slope = np.polyfit(xc[band, 0], r.pressure[band], 1)[0]
        exact = -12 * mu * U / H**2
        assert abs(slope / exact - 1) < 0.01, f"dp/dx {slope:.6g} on ({lo}, {hi}), exact {exact:.6g}"
