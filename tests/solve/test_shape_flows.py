"""Laminar flows on the parametric shapes (fvrans.mesh.shapes).

- Creeping flow over a symmetric bump is fore-aft symmetric: Stokes flow is reversible (reversing
  the driving reverses the velocity), and a bump symmetric about x = 0 between developed inflow and
  outflow maps onto itself under x -> -x, so the wall shear stress satisfies tau(-x) = tau(x)
  (e.g. Happel & Brenner 1965, Low Reynolds Number Hydrodynamics, sec. 2-5, reversibility).
  At Re_h = 0.01 the inertial asymmetry is O(Re) (common practice: Re << 1).
- Far from the bump the flow is plane Poiseuille flow: dp/dx = -12 mu U / h^2 (exact; e.g. White,
  Viscous Fluid Flow, 3rd ed., sec. 3-3.2).
- A symmetric planar diffuser at Re_h = 10 gives a mirror-symmetric flow (see the test).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial import cKDTree

import fvrans.api as fa

H, U = 1.0, 1.0


def bump_case(mu: float, **params) -> fa.Case:
    return fa.case_from_dict({
        "mesh": {"generator": "bump_channel", "parameters": params},
        "fluid": {"density": 1.0, "viscosity": mu},
        "initial": {"velocity": [U, 0.0]},
        "boundary": {
            "inlet": {"kind": "inflow-velocity", "velocity": [U, 0.0]},
            "outlet": {"kind": "outflow-pressure"},
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


def test_symmetric_diffuser_flow_is_mirror_symmetric_and_conserves_mass():
    """Both walls turn out by 10 degrees: geometry and boundary conditions are mirror-symmetric about
    y = h/2. At Re_h = 10 the steady solution is unique (uniqueness of steady Navier-Stokes
    solutions at small Reynolds numbers, Ladyzhenskaya 1969; from memory), hence mirror-symmetric;
    symmetry breaking in symmetric expansions needs far larger Re (Fearn, Mullin & Cliffe 1990;
    from memory). Measured asymmetry 2e-8 (solver tolerance 1e-8)."""
    case = fa.case_from_dict({
        "mesh": {"generator": "planar_diffuser", "parameters": {
            "angle_deg": 10.0, "symmetric": True, "nx_in": 8, "nx_div": 20, "nx_out": 20, "ny": 16,
            "wall_spacing": 0.02}},
        "fluid": {"density": 1.0, "viscosity": 0.1},
        "initial": {"velocity": [U, 0.0]},
        "boundary": {
            "inlet": {"kind": "inflow-velocity", "velocity": [U, 0.0]},
            "outlet": {"kind": "outflow-pressure"},
            "lower_wall": {"kind": "wall"},
            "upper_wall": {"kind": "wall"},
        },
        "solver": {"tolerance": 1e-8, "max_iterations": 3000},
    })
    r = fa.solve(case)
    assert r.converged, r.message
    c = r.cell_centres
    dist, j = cKDTree(c).query(np.column_stack([c[:, 0], H - c[:, 1]]))  # j: the mirror cell
    assert dist.max() < 1e-12
    u, v, p = r.velocity[:, 0], r.velocity[:, 1], r.pressure
    assert np.abs(u - u[j]).max() < 1e-6 * U
    assert np.abs(v + v[j]).max() < 1e-6 * U
    assert np.abs(p - p[j]).max() < 1e-6 * np.ptp(p)
    m, F = r.mesh, r.fields.face_flux
    assert abs(F[m.patch("inlet").faces].sum() + F[m.patch("outlet").faces].sum()) < 1e-8 * U * H
