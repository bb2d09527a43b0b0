"""The tolerance of the simultaneous path's iterative solves (``SimultaneousSolver._forcing_tolerance``):
the forcing rule of inexact Newton methods, Eisenstat & Walker 1996 (SIAM J. Sci. Comput. 17, 16-32),
their choice 2 (from memory): eta_k = gamma (f_k / f_(k-1))^alpha with the safeguard
eta_k >= gamma eta_(k-1)^alpha when that exceeds 0.1, here held within [system_tolerance, FORCING_MAX].
The expected values below are worked out by hand from that formula."""

from __future__ import annotations

import pytest
from flows import CAVITY, STEP, simultaneous_solver
from test_convection_newton import _step

import fvrans.solve.coupled as coupled
from fvrans.mesh.generate import cavity


def test_forcing_tolerance_follows_eisenstat_walker_choice_2(monkeypatch):
    monkeypatch.setattr(coupled, "FORCING_GAMMA", 0.9)
    monkeypatch.setattr(coupled, "FORCING_ALPHA", 2.0)
    monkeypatch.setattr(coupled, "FORCING_MAX", 0.5)
    solver = simultaneous_solver(cavity(8), CAVITY, system_solver="iterative", system_tolerance=0.001)
    rule = solver._forcing_tolerance

    def step(norm):
        eta = rule(norm)
        solver.lin_tolerances.append(eta)
        return eta

    assert step(1.0) == 0.001  # no earlier outer residual: the system tolerance
    assert step(0.5) == pytest.approx(0.9 * 0.5**2)  # 0.225
    # ratio 0.1: 0.9 * 0.01 = 0.009; safeguard 0.9 * 0.225^2 = 0.0456 < 0.1, not applied
    assert step(0.05) == pytest.approx(0.009)
    solver.lin_tolerances[-1] = 0.5
    # after eta = 0.5 the safeguard 0.9 * 0.25 = 0.225 > 0.1 holds eta up
    assert step(0.005) == pytest.approx(0.225)
    assert step(0.005) == 0.5  # ratio 1: 0.9, capped at FORCING_MAX
    assert step(1e-6) == pytest.approx(0.225)  # a fast fall, but the safeguard after eta = 0.5
    assert step(1e-9) == 0.001  # 0.9 * 0.225^2 < 0.1: down to the system tolerance, not below
    solver.forcing = False
    assert step(1e-3) == 0.001


def test_kept_lu_is_tried_to_the_forcing_tolerance_and_keeps_the_answer():
    """The sparse LU's kept factors precondition FGMRES to the same rule's tolerance, capped at
    ``KEPT_LU_FORCING_MAX`` (0.1) instead of FORCING_MAX: the laminar step of the Newton test (Picard's
    slow steps, ratios near 0.9, so eta reaches the cap) takes tolerances above the system tolerance and
    fewer factorisations than with forcing off (measured 8 against 18, 209 and 205 outer iterations), and
    converges to the same field to 1e-9. With the cap at the system tolerance this test fails."""
    runs = {}
    for forcing in (True, False):
        solver = simultaneous_solver(_step(), STEP, mu=0.005, tolerance=1e-12, max_iterations=400,
                                     system_solver="direct", newton_convection_below=0.0, anderson_depth=0)
        solver.forcing = forcing
        assert solver.run()
        runs[forcing] = solver
    loose, tight = runs[True], runs[False]
    assert max(tight.lin_tolerances) == min(tight.lin_tolerances) == tight.ctl.system_tolerance
    assert tight.ctl.system_tolerance < max(loose.lin_tolerances) <= coupled.KEPT_LU_FORCING_MAX
    assert loose.factorisations < tight.factorisations
    assert abs(loose.fields.velocity - tight.fields.velocity).max() <= 1e-9
    assert abs(loose.fields.pressure - tight.fields.pressure).max() <= 1e-9
