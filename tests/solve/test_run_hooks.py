"""The hooks of ``SimpleSolver.run``: ``callback`` after every iteration, ``converged_when`` asked
only when every residual is below the tolerance (the contract other parts build on)."""

from __future__ import annotations

import numpy as np

from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import cavity
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.simple import SimpleSolver, SolverControls


def cavity_solver() -> SimpleSolver:
    mesh = cavity(12)
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}})
    return SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.01, controls=SolverControls(tolerance=1e-5, max_iterations=500))


def test_converged_when_is_asked_below_the_tolerance_and_can_hold_the_run():
    plain = cavity_solver()
    assert plain.run()
    asked: list[tuple[int, list[float]]] = []
    hold = plain.iteration + 7

    def settled(it: int, res: list[float]) -> bool:
        asked.append((it, list(res)))
        return it >= hold

    s = cavity_solver()
    assert s.run(converged_when=settled)
    assert s.iteration == hold
    assert asked[0][0] == plain.iteration and asked[-1][0] == hold
    assert all(max(res) < 1e-5 for _, res in asked)


def test_converged_when_that_never_agrees_ends_at_the_iteration_limit():
    s = cavity_solver()
    assert not s.run(max_iterations=150, converged_when=lambda it, res: False)
    assert s.iteration == 150 and np.all(np.asarray(s.history.rows[-1]) < 1e-5)


def test_callback_stop_returns_whether_the_state_converged():
    s = cavity_solver()
    assert not s.run(callback=lambda it, res: it == 3)
    assert s.iteration == 3
