"""The tolerance of the simultaneous path's iterative solves (``SimultaneousSolver._forcing_tolerance``):
the forcing rule of inexact Newton methods, Eisenstat & Walker 1996 (SIAM J. Sci. Comput. 17, 16-32),
their choice 2 (from memory): eta_k = gamma (f_k / f_(k-1))^alpha with the safeguard
eta_k >= gamma eta_(k-1)^alpha when that exceeds 0.1, here held within [system_tolerance, FORCING_MAX].
The expected values below are worked out by hand from that formula."""

from __future__ import annotations

import numpy as np
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


def test_forcing_loosens_past_its_cap_only_as_far_as_every_block_still_falls_by_block_drop(monkeypatch):
    """A tolerance eta on the whole row-scaled residual bounds each block b (u, v, continuity) by
    eta |r0| / |r0_b| of its own start, so eta = BLOCK_DROP min_b |r0_b| / |r0| still takes every block down
    by BLOCK_DROP; the rule takes that where it is looser than Eisenstat & Walker's. Worked by hand."""
    monkeypatch.setattr(coupled, "FORCING_MAX", 0.02)
    monkeypatch.setattr(coupled, "BLOCK_DROP", 0.5)
    solver = simultaneous_solver(cavity(8), CAVITY, system_solver="iterative", system_tolerance=0.001)
    rule = solver._forcing_tolerance

    def step(norm, smallest):
        eta = rule(norm, smallest_block=smallest)
        solver.lin_tolerances.append(eta)
        return eta

    assert step(3.0**0.5, 1.0) == 0.001  # the first solve: the system tolerance, whatever the blocks
    # three equal blocks, |r0| = sqrt(3) |r0_b|: 0.5 / sqrt(3) = 0.2887, above EW's cap 0.02
    assert step(3.0**0.5, 1.0) == pytest.approx(0.5 / 3.0**0.5)
    # continuity 1/20 of the whole: 0.025, still above EW's 0.02
    assert step(1.0, 0.05) == pytest.approx(0.025)
    # continuity 1/200 of the whole (the turbulent plate's v block): EW's tolerance stays (ratio 1: 0.9 -> 0.02)
    assert step(1.0, 0.005) == 0.02
    # a fast fall (ratio 1e-3): EW's 0.9e-6 -> the system tolerance; the blocks alike loosen it again
    assert step(1e-3, 0.5e-3) == pytest.approx(0.25)
    solver.forcing = False
    assert step(1e-3, 0.5e-3) == 0.001


def test_loosened_iterative_solves_take_every_block_down_by_block_drop_and_keep_the_answer():
    """On the cavity (u, v and continuity blocks of like norm) most iterative solves are loosened past
    FORCING_MAX, each to at most BLOCK_DROP min_b |r0_b| / |r0|; in each of them every block of the
    row-scaled residual, measured at the returned solution (not FGMRES's own estimate), falls by
    BLOCK_DROP at least; they cost fewer FGMRES iterations in all, and the converged field is the one of
    solves to the system tolerance (forcing off) to 1e-7. Fails with the rule off (no loosened solve) and
    with a fixed loose tolerance of 0.29 (above the block bound)."""
    runs = {}
    for forcing in (True, False):
        solver = simultaneous_solver(cavity(24), CAVITY, mu=0.01, tolerance=1e-9, max_iterations=60,
                                     system_solver="iterative")
        solver.forcing = forcing
        seen = []
        gmres = solver._solve_gmres

        def recorded(A, rhs, solver=solver, gmres=gmres, seen=seen):
            x0 = solver._state_vector()
            x = gmres(A, rhs)
            d, nc = solver._row_scale, solver.nc
            r0, r1 = d * (rhs - A @ x0), d * (rhs - A @ x)
            b0 = [np.linalg.norm(r0[k * nc:(k + 1) * nc]) for k in range(3)]
            b1 = [np.linalg.norm(r1[k * nc:(k + 1) * nc]) for k in range(3)]
            seen.append((solver.lin_tolerances[-1], np.linalg.norm(r0), b0, b1))
            return x

        solver._solve_gmres = recorded
        assert solver.run()
        runs[forcing] = (solver, seen)
    (loose, seen), (tight, _) = runs[True], runs[False]
    loosened = [s for s in seen if s[0] > coupled.FORCING_MAX]
    assert len(loosened) >= len(seen) // 2
    for tol, norm, b0, b1 in loosened:
        assert tol <= coupled.BLOCK_DROP * min(b0) / norm * (1 + 1e-12)
        for before, after in zip(b0, b1):
            assert after <= coupled.BLOCK_DROP * before * 1.01
    assert sum(loose.lin_iterations) < sum(tight.lin_iterations)
    assert abs(loose.fields.velocity - tight.fields.velocity).max() <= 1e-7
