"""Lid-driven cavity at Re = 100 against Ghia, Ghia & Shin (1982) Tables I and II, and the
independence of the converged solution from the relaxation factors."""

from __future__ import annotations

import numpy as np
import pytest
from flows import sampler, solve
from ghia1982 import U, V, X, Y

from fvrans.mesh.generate import cavity

SPECS = {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}}


def centrelines(solver):
    f = sampler(solver)
    u = f(np.c_[np.full_like(Y, 0.5), Y])[:, 0]
    v = f(np.c_[X, np.full_like(X, 0.5)])[:, 1]
    return u, v


@pytest.mark.slow
@pytest.mark.parametrize("triangles, limit", [(False, 0.01), (True, 0.02)], ids=["quads", "triangles"])
def test_cavity_re100_against_ghia(triangles, limit):
    solver, converged = solve(cavity(128, triangles=triangles), SPECS, mu=0.01, tolerance=1e-6,
                              max_iterations=20000)
    assert converged
    u, v = centrelines(solver)
    assert np.max(np.abs(u - U)) < limit, np.max(np.abs(u - U))
    assert np.max(np.abs(v - V)) < limit, np.max(np.abs(v - V))


@pytest.mark.parametrize("triangles", [False, True], ids=["quads", "skewed_triangles"])
def test_converged_solution_independent_of_relaxation(triangles):
    """Converged to 1e-10 with SIMPLE at (alpha_u, alpha_p) = (0.7, 0.3) and (0.5, 0.5): the
    centreline velocities agree within 1e-6 (the triangles have skewed faces, where the
    Rhie-Chow interpolation carries a gradient correction)."""
    results = []
    mesh = cavity(24, triangles=True) if triangles else cavity(32)
    for alpha_u, alpha_p in [(0.7, 0.3), (0.5, 0.5)]:
        solver, converged = solve(mesh, SPECS, mu=0.01, tolerance=1e-10, max_iterations=20000,
                                  coupling="simple", relax_velocity=alpha_u, relax_pressure=alpha_p)
        assert converged
        results.append(np.concatenate(centrelines(solver)))
    assert np.max(np.abs(results[0] - results[1])) < 1e-6
