"""Newton's linearisation of the convection term on the simultaneous path (``SolverControls.
newton_convection_below``, ``SimultaneousSolver._newton``, ``_coupled_kernels.convection_newton``): once
every normalised imbalance is below the threshold and the sparse LU solves the systems, each outer
iteration adds (F(u_new) - F(u_old)) phi_old to Picard's F_old u_new. That part vanishes at convergence,
so the answer must be Picard's; and Newton's steps must contract faster than Picard's (this flow's Picard
steps are slow, ~0.9 per iteration, so ``_picard_is_slow`` lets Newton's in). Both are measured
here on the same flow, not taken from elsewhere."""

from __future__ import annotations

import numpy as np
from flows import STEP, record_each_assembly, simultaneous_solver

from fvrans.mesh.generate import backward_facing_step


def _step():
    """A laminar backward-facing step of 512 cells (step height 1, Re 200 on it at mu 0.005), whose
    separating shear layer makes Picard's outer iterations slow (contraction ~0.9 per iteration)."""
    return backward_facing_step(x_in=-2.0, x_out=30.0, nx_up=4, nx_down=30, ny_upper=8, ny_lower=8,
                                wall_spacing=0.02, corner_spacing=0.05, outlet_spacing=2.0)


def _run(mesh, below, depth=0):
    """Converged to 1e-12 with the sparse LU; ``depth``: Anderson acceleration (off unless given). The
    kept factors' FGMRES solves to the system tolerance (no inexact-Newton forcing): the outer
    iterations then measure the linearisation alone."""
    solver = simultaneous_solver(mesh, STEP, mu=0.005, tolerance=1e-12, max_iterations=400,
                                 newton_convection_below=below, system_solver="direct", anderson_depth=depth)
    solver.forcing = False
    taken = record_each_assembly(solver, "newton")
    assert solver.run()
    return solver, taken


def test_newton_convection_keeps_the_answer_and_cuts_the_outer_iterations():
    """Picard alone (threshold 0) against Newton from imbalances below 1e-4 (both without Anderson
    acceleration), both converged to 1e-12:
    the same velocity and pressure to 1e-9 (measured 3.5e-10 and 5.5e-11), and at most 0.4 times Picard's
    outer iterations (measured 59 against 205; Newton's from the 28th, once Picard's were seen to be
    slow). The first iterations are Picard's (the gate), the last Newton's. Checked by hand: without the
    right-hand side part, or with the Newton part's sign flipped, the run does not converge in 400
    iterations."""
    mesh = _step()
    picard, taken_p = _run(mesh, 0.0)
    newton, taken_n = _run(mesh, 1e-4)
    assert not any(taken_p)
    assert not taken_n[0] and taken_n[-1]
    assert np.abs(newton.fields.velocity - picard.fields.velocity).max() <= 1e-9
    assert np.abs(newton.fields.pressure - picard.fields.pressure).max() <= 1e-9
    assert newton.iteration <= 0.4 * picard.iteration


def test_newton_convection_only_with_the_sparse_lu():
    """With the iterative solve (its block preconditioner keeps Picard's momentum blocks) Newton's
    linearisation is not taken and the system keeps its pattern without the u-v entries it needs."""
    mesh = _step()
    lu = simultaneous_solver(mesh, STEP, mu=0.005, system_solver="direct")
    krylov = simultaneous_solver(mesh, STEP, mu=0.005, system_solver="iterative")
    off = simultaneous_solver(mesh, STEP, mu=0.005, system_solver="direct", newton_convection_below=0.0)
    assert lu.newton_allowed and not krylov.newton_allowed and not off.newton_allowed
    assert krylov._A.nnz == off._A.nnz < lu._A.nnz


def test_newton_and_anderson_wait_until_picards_steps_are_seen_to_be_slow():
    """``_picard_is_slow``: the largest imbalance falling by 0.4 per iteration (the laminar plate's Picard
    steps) does not switch them on, 0.8 (the step's) does, for good; imbalances above the threshold or at
    round-off do not count. Rows made by hand, values of the rule's definition."""
    solver = simultaneous_solver(_step(), STEP, system_solver="direct")
    solver.history.rows = [[1e-5 * 0.4**k, 1e-7, 1e-8] for k in range(4)]
    assert not solver._picard_is_slow(1e-4)
    solver.history.rows = [[1e-3 * 0.8**k, 1e-7, 1e-8] for k in range(4)]  # above the threshold
    assert not solver._picard_is_slow(1e-4)
    solver.history.rows = [[1e-12 * 0.9**k, 1e-13, 1e-14] for k in range(4)]  # round-off
    assert not solver._picard_is_slow(1e-4)
    solver.history.rows = [[1e-5 * 0.8**k, 1e-7, 1e-8] for k in range(4)]
    assert solver._picard_is_slow(1e-4)
    solver.history.rows.append([1e-9, 1e-9, 1e-9])
    assert solver._picard_is_slow(1e-4) and solver.slow_picard
