"""Anderson acceleration of the simultaneous path's outer iterations (``SolverControls.anderson_depth``,
``SimultaneousSolver._accelerate``): once the imbalances are small, the next state combines the last few
outer iterations' results. The combination has no effect at the fixed point, so the answer must be the
unaccelerated one, and it must need fewer outer iterations. Both measured here on the same flow."""

from __future__ import annotations

import numpy as np
from flows import STEP, simultaneous_solver
from test_convection_newton import _run, _step


def test_anderson_acceleration_keeps_the_answer_and_cuts_the_outer_iterations():
    """The laminar step of tests/solve/test_convection_newton.py with Picard's linearisation, converged
    to 1e-12 with and without Anderson acceleration of depth 3: the same velocity and pressure to 1e-9
    (measured 3.8e-10 and 6.3e-11) and at most half the outer iterations (measured 71 against 203). The
    first iterations are not accelerated (imbalances above ``ANDERSON_BELOW``), the last are. Checked by
    hand: with the sign of the mixing coefficients flipped the run does not converge in 400 iterations
    (with the face fluxes left unmixed this laminar flow still converges in as few; the turbulent step
    did not: 96 outer iterations, and with Newton's convection not in 120)."""
    mesh = _step()
    plain, _ = _run(mesh, 0.0, depth=0)
    mixed = []
    solver = simultaneous_solver(mesh, STEP, mu=0.005, tolerance=1e-12, max_iterations=400,
                                 newton_convection_below=0.0, system_solver="direct", anderson_depth=3)
    iterate = solver.iterate

    def recorded():
        out = iterate()
        mixed.append(len(solver.anderson_gamma))
        return out

    solver.iterate = recorded
    assert solver.run()
    assert mixed[0] == 0 and mixed[-1] == 3
    assert np.abs(solver.fields.velocity - plain.fields.velocity).max() <= 1e-9
    assert np.abs(solver.fields.pressure - plain.fields.pressure).max() <= 1e-9
    assert solver.iteration <= 0.5 * plain.iteration


def test_anderson_acceleration_by_default_only_with_the_sparse_lu():
    """Depth 3 with the sparse LU, off with the iterative solve (its history would add to that path's
    peak memory) unless asked for."""
    mesh = _step()
    assert simultaneous_solver(mesh, STEP, system_solver="direct").anderson_depth == 3
    assert simultaneous_solver(mesh, STEP, system_solver="iterative").anderson_depth == 0
    assert simultaneous_solver(mesh, STEP, system_solver="iterative", anderson_depth=2).anderson_depth == 2
