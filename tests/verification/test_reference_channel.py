"""Reynolds stresses injected into a fully developed channel with a known answer (#17 phase 2).

Reference: Reichardt's (1951) wall law (fvrans/reference/analytic.py; form and constants
kappa = 0.4, C = 7.8, chi = 11 from memory) as the mean velocity of the half channel at Re_tau,
the Reynolds shear stress from the exact momentum balance R_xy = nu dU/dy - u_tau^2 (1 - y/h).
One periodic column of cells, wall at y = 0, symmetry plane at y = h = 1, driven by the fixed mean
pressure gradient dp/dx = -rho u_tau^2 / h ([mean_flow] pressure_gradient), u_tau = 1.
The stresses are given per cell (exact at the centres, no interpolation error), the run starts
from rest.

* Order: both forms recover the profile to discretisation error, observed order >= 1.8 (the
  issue's acceptance) over three grids refined by two (one-sided tanh clustering, the same mapping).
* Conditioning (Wu, Xiao, Sun & Wang 2019, J. Fluid Mech. 869; from memory): with 1 % seeded noise
  on the stress the explicit form's velocity error grows with the Reynolds number (its gain is about
  the ratio of total to viscous stress, ~ nu_t / nu), the implicit form's does not.
"""

from __future__ import annotations

from functools import cache

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.reference.analytic import channel_reference

#: a linear problem (no convection in a fully developed channel): no relaxation, tight momentum solves
SOLVER = {"tolerance": 1e-10, "max_iterations": 500, "relax_velocity": 1.0, "momentum_tolerance": 1e-8,
          "momentum_max_iterations": 200}


def wall_points(n: int, gamma: float) -> list[float]:
    """n + 1 points on [0, 1], clustered at y = 0 by y = 1 - tanh(gamma (1 - eta)) / tanh(gamma)."""
    eta = np.linspace(0.0, 1.0, n + 1)
    return (1.0 - np.tanh(gamma * (1.0 - eta)) / np.tanh(gamma)).tolist()


def half_channel(n: int, re_tau: float, form: str, gamma: float = 2.5) -> fa.Problem:
    return fa.prepare(fa.case_from_dict({
        "mesh": {"generator": "channel", "parameters": {"length": 0.1, "height": 1.0, "nx": 1, "ny": n,
                                                        "grading_y": wall_points(n, gamma)},
                 "periodic_pairs": [["inlet", "outlet"]]},
        "fluid": {"density": 1.0, "viscosity": 1.0 / re_tau},
        "model": {"turbulence": "reference-stress", "stress_form": form},
        "mean_flow": {"pressure_gradient": [-1.0, 0.0]},
        "boundary": {"lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "symmetry"}},
        "solver": SOLVER,
    }))


@cache
def injected(n: int, re_tau: float, form: str, noise: float = 0.0, gamma: float = 2.5) -> tuple[np.ndarray, np.ndarray]:
    """(computed u, Reichardt's u) at the cell centres."""
    problem = half_channel(n, re_tau, form, gamma)
    ref = channel_reference(problem.geom.cell_centre[:, 1], re_tau)
    if noise:
        ref["R_xy"] = ref["R_xy"] * (1.0 + noise * np.random.default_rng(17).standard_normal(len(ref["R_xy"])))
    r = fa.solve(problem, reference=ref)
    assert r.converged and r.stopped_by == "settled", r.message
    return r.velocity[:, 0], ref["u"]


@pytest.mark.parametrize("form", ["implicit", "explicit"])
@pytest.mark.parametrize("re_tau,gamma", [(180.0, 2.5), (2000.0, 3.5)])
def test_reichardt_profile_recovered_at_second_order(form, re_tau, gamma):
    errors = []
    for n in (32, 64, 128):
        u, exact = injected(n, re_tau, form, gamma=gamma)
        errors.append(np.abs(u - exact).max() / exact.max())
    orders = np.log2(np.array(errors[:-1]) / np.array(errors[1:]))
    assert errors[-1] < 2e-3  # discretisation error only (measured 2.9e-4 to 1.1e-3)
    assert orders.min() >= 1.8, (errors, orders)


def test_explicit_form_is_ill_conditioned_implicit_is_not():
    """1 % seeded noise on R_xy (the same seed), 128 cells: the velocity's answer to the noise,
    max |u_noisy - u_clean| / U_centre, at Re_tau 180 and 2000."""
    response = {}
    for form in ("explicit", "implicit"):
        for re_tau, gamma in ((180.0, 2.5), (2000.0, 3.5)):
            clean, exact = injected(128, re_tau, form, 0.0, gamma)
            noisy, _ = injected(128, re_tau, form, 0.01, gamma)
            response[form, re_tau] = np.abs(noisy - clean).max() / exact.max()
    # explicit: the gain ~ nu_t / nu grows about tenfold from Re_tau 180 to 2000 (measured 3.1e-3 -> 3.0e-2)
    assert response["explicit", 2000.0] > 4.0 * response["explicit", 180.0]
    # implicit: the noise acts on nu_t, not on the velocity slope directly (measured 4.2e-4 -> 6.1e-4)
    assert response["implicit", 2000.0] < 2.0 * response["implicit", 180.0]
    assert response["implicit", 2000.0] < 0.1 * response["explicit", 2000.0]
