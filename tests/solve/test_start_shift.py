"""The start-up shift of the simultaneous path's momentum diagonals (``SolverControls.momentum_start_shift``,
``SimultaneousSolver._start_shift``): a pseudo-time step s a_P that halves every outer iteration of a
start without face fluxes solved by the iterative solve. It must leave the converged answer alone (the
shifted equations have the same fixed point: Rhie-Chow keeps the unshifted V / a_P, the right-hand side
gets s a_P u_old), vanish after the start, stay off where it is not needed (sparse LU, warm starts), and
make the first systems of a recirculating flow with thin wall cells easier for the iterative solve. The
FGMRES counts are measured here, not taken from elsewhere: the test compares the solve with and without
the shift on the same flow."""

from __future__ import annotations

import numpy as np
import pytest
from flows import CAVITY, STEP, record_each_assembly, simultaneous_solver

import fvrans.solve.coupled as coupled
from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import backward_facing_step, cavity
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.simple import SolverControls


def _thin_step():
    """A laminar step (step height 8, as in tests/solve/test_coupled_preconditioner.py) with thin wall
    cells (first spacing 0.05, aspect ratios up to ~60); run at a low viscosity (Re 8e4 on the step
    height), the recirculation's momentum blocks are nearly singular from the first outer iterations."""
    return backward_facing_step(x_in=-4.0, x_out=480.0, nx_up=4, nx_down=40, ny_upper=8, ny_lower=8,
                                wall_spacing=0.05, corner_spacing=0.1, outlet_spacing=24.0, step_height=8.0)


def _shifts(solver, iterations):
    seen = record_each_assembly(solver, "shift")
    solver.ctl.max_iterations = iterations
    solver.run()
    return seen


def test_start_shift_leaves_the_converged_answer_alone(monkeypatch):
    """Cavity (Re 100, 16 x 16) from rest with the iterative solve, converged to 1e-11 without the shift
    and with a shift held at 0.1 and at 0.25 through convergence (no decay, so that the shifted equations
    themselves are converged): the same fields to 1e-9 of the lid speed (measured 2.5e-10, the stopping
    tolerance). Without s a_P u_old on the right-hand side of the u equation the shifted run stalls at a
    u imbalance of 3e-2, 0.23 of the lid speed away (checked by hand)."""
    monkeypatch.setattr(coupled, "START_SHIFT_DECAY", 1.0)
    monkeypatch.setattr(coupled, "FALLBACK_FACTOR", float("inf"))  # the shift stays on: no sparse LU
    runs = []
    for s0 in (0.0, 0.1, 0.25):
        solver = simultaneous_solver(cavity(16), CAVITY, system_solver="iterative", tolerance=1e-11,
                                     max_iterations=300, momentum_start_shift=s0)
        assert solver.run()
        assert solver.shift == s0
        runs.append(solver)
    ref = runs[0]
    for other in runs[1:]:
        assert np.max(np.abs(other.fields.velocity - ref.fields.velocity)) < 1e-9
        dp = (other.fields.pressure - other.fields.pressure.mean()) - (ref.fields.pressure - ref.fields.pressure.mean())
        assert np.max(np.abs(dp)) < 1e-9


def test_start_shift_halves_each_iteration_and_only_where_needed():
    """s = s_0 / 2^n at outer iteration n of a cold start with the iterative solve, zero from
    iteration 14 (below 1e-4 s_0); none with the sparse LU, none on a warm start."""
    solver = simultaneous_solver(cavity(8), CAVITY, system_solver="iterative", tolerance=1e-14,
                                 momentum_start_shift=0.2)
    seen = _shifts(solver, 16)
    assert seen[:14] == pytest.approx([0.2 * 0.5**n for n in range(14)], rel=1e-12)
    assert seen[14:] == [0.0, 0.0]
    direct = simultaneous_solver(cavity(8), CAVITY, system_solver="direct", tolerance=1e-14,
                                 momentum_start_shift=0.2)
    assert _shifts(direct, 3) == [0.0, 0.0, 0.0]
    mesh = cavity(8)
    geom = compute_geometry(mesh)
    warm = coupled.SimultaneousSolver(mesh, geom, build_flow_boundary(mesh, geom, CAVITY), rho=1.0, mu=0.01,
                                      controls=SolverControls(coupling="simultaneous", system_solver="iterative",
                                                              tolerance=1e-14, momentum_start_shift=0.2),
                                      fields=solver.fields)
    assert _shifts(warm, 3) == [0.0, 0.0, 0.0]


@pytest.mark.slow
def test_start_shift_eases_the_first_systems_of_a_recirculation(monkeypatch):
    """On the thin-celled step (672 cells) the first three FGMRES solves from the uniform start need
    less than half the iterations with the shift (measured 60 against 159 here; without it the fourth
    solve missed its tolerance in 260 iterations and the sparse LU took over)."""
    monkeypatch.setattr(coupled, "MAX_KRYLOV", 600)
    counts = {}
    for s0 in (0.0, 0.1):
        solver = simultaneous_solver(_thin_step(), STEP, mu=2e-4, system_solver="iterative", max_iterations=3,
                                     tolerance=1e-14, momentum_start_shift=s0)
        solver.run()
        assert not solver.fell_back
        counts[s0] = sum(solver.lin_iterations)
    assert counts[0.1] < 0.5 * counts[0.0], counts
