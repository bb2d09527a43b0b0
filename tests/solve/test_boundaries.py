"""Boundary conditions against exact solutions, reverse flow at an outlet, divergence guard."""

from __future__ import annotations

import numpy as np
import pytest
from flows import STEP, solve

from fvrans.errors import DivergenceError
from fvrans.mesh import Mesh
from fvrans.mesh.generate import backward_facing_step, cavity, channel

WALLS = {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}}


def test_symmetry_plane_half_channel_is_poiseuille():
    """Half of a plane channel (height h = 1, centreline at y = 0.5 as a symmetry plane): the
    developed profile is the exact parabola 6 U y (h - y) / h^2 and dp/dx = -12 mu U / h^2
    (White, Viscous Fluid Flow, 3rd ed., sec. 3-3.2)."""
    mu, U = 0.02, 1.0
    mesh = channel(10.0, 0.5, 100, 20)
    specs = {
        "inlet": {"kind": "inflow-velocity", "velocity": [U, 0.0]},
        "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
        "lower_wall": {"kind": "wall"},
        "upper_wall": {"kind": "symmetry"},
    }
    solver, converged = solve(mesh, specs, mu=mu, tolerance=1e-8, max_iterations=4000)
    assert converged
    xc = solver.geom.cell_centre
    band = np.abs(xc[:, 0] - 8.0) < 0.1
    y = xc[band, 1]
    exact = 6 * U * y * (1.0 - y)
    assert np.sqrt(np.mean((solver.fields.velocity[band, 0] - exact) ** 2)) < 0.005 * 1.5 * U
    core = (xc[:, 0] > 5.0) & (xc[:, 0] < 9.0)
    slope = np.polyfit(xc[core, 0], solver.fields.pressure[core], 1)[0]
    assert abs(slope / (-12 * mu * U) - 1) < 0.005
    # no flux through the symmetry plane
    assert np.all(solver.fields.face_flux[solver.mesh.patch("upper_wall").faces] == 0.0)


def test_moving_wall_and_callable_inlet_give_exact_couette_flow():
    """Plane Couette flow u = U y / h, p = const (exact; White, sec. 3-2.1): the upper wall moves
    with U, the inlet profile is a Python callable. Linear fields are reproduced to round-off by
    the second-order scheme."""
    U, h = 2.0, 1.0
    mesh = channel(4.0, h, 20, 10, triangles=True)
    specs = {
        "inlet": {"kind": "inflow-velocity", "velocity": lambda x, y: (U * y / h, 0.0 * y)},
        "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
        "lower_wall": {"kind": "wall"},
        "upper_wall": {"kind": "wall", "velocity": [U, 0.0]},
    }
    solver, converged = solve(mesh, specs, mu=0.1, tolerance=1e-11, max_iterations=4000)
    assert converged
    y = solver.geom.cell_centre[:, 1]
    assert np.max(np.abs(solver.fields.velocity[:, 0] - U * y / h)) < 1e-7
    assert np.max(np.abs(solver.fields.velocity[:, 1])) < 1e-7
    assert np.max(np.abs(solver.fields.pressure)) < 1e-7


def test_freestream_on_every_side_keeps_an_oblique_uniform_flow():
    """A uniform stream at 30 degrees through a box whose four sides are freestream boundaries
    (inflow or outflow decided by the flux sign) is an exact solution: u = U_inf, p = p_inf."""
    mesh = cavity(12, triangles=True)
    u_inf = [np.cos(np.pi / 6), np.sin(np.pi / 6)]
    specs = {name: {"kind": "outer-flow", "velocity": u_inf, "pressure": 0.5} for name in ("lid", "walls")}
    solver, converged = solve(mesh, specs, mu=0.01, tolerance=1e-10, max_iterations=2000)
    assert converged
    assert np.max(np.abs(solver.fields.velocity - u_inf)) < 1e-8
    assert np.max(np.abs(solver.fields.pressure - 0.5)) < 1e-8


def test_reverse_flow_through_an_outlet_converges():
    """A step flow whose recirculation is cut by the outlet (x_out = 2.5 H, Re_H = 200): part of
    the outlet takes fluid in, and the run still converges."""
    mesh = backward_facing_step(x_in=-2.0, x_out=2.5, nx_up=12, nx_down=24, ny_upper=24, ny_lower=12,
                                wall_spacing=0.01, outlet_spacing=0.1)
    solver, converged = solve(mesh, STEP, mu=0.005, tolerance=1e-6, max_iterations=3000)
    assert converged
    out = solver.fields.face_flux[solver.mesh.patch("outlet").faces]
    assert np.any(out < 0), "the outlet should see reverse flow in this set-up"
    assert np.isclose(out.sum(), 8.0, rtol=1e-5)  # what enters at the inlet (height 8, U = 1)


def test_divergence_stops_with_message_and_last_good_state():
    """SIMPLE without pressure under-relaxation (alpha_p = 1) diverges on the cavity (Patankar
    1980, sec. 6.7: SIMPLE needs alpha_p < 1); the run must stop with a clear message and keep
    finite fields."""
    with pytest.raises(DivergenceError) as info:
        solve(cavity(16), WALLS, mu=0.01, coupling="simple", relax_velocity=1.0, relax_pressure=1.0,
              max_iterations=500, tolerance=1e-8)
    err = info.value
    assert "diverged" in str(err) and "relax" in str(err)
    assert err.fields is not None and err.fields.is_finite()


def test_a_failing_linear_system_stops_like_a_divergence(monkeypatch):
    """A linear system that loses its diagonal inside an iteration (what a run-away velocity does to
    the nu_tilde matrix) ends the run with DivergenceError and the last good state, not with a
    ZeroDivisionError from inside a kernel."""
    from fvrans.solve.simple import SimpleSolver

    calls = {"n": 0}
    iterate = SimpleSolver.iterate

    def failing(self):
        calls["n"] += 1
        if calls["n"] == 4:
            raise ZeroDivisionError("division by zero")
        return iterate(self)

    monkeypatch.setattr(SimpleSolver, "iterate", failing)
    with pytest.raises(DivergenceError) as info:
        solve(cavity(8), WALLS, mu=0.01, max_iterations=50, tolerance=1e-12)
    err = info.value
    assert "diverged" in str(err) and "division by zero" in str(err)
    assert err.iteration == 3 and err.fields is not None and err.fields.is_finite()


def test_runaway_speed_stops_before_overflow(monkeypatch):
    """A velocity a thousand times the largest imposed speed stops the run even while every value
    is still finite and within the first iterations, where residual growth is not yet judged."""
    from fvrans.solve.simple import RUNAWAY_SPEED, SimpleSolver

    iterate = SimpleSolver.iterate

    def running_away(self):
        res = iterate(self)
        if self.iteration == 3:
            self.fields.velocity *= 10 * RUNAWAY_SPEED
        return res

    monkeypatch.setattr(SimpleSolver, "iterate", running_away)
    with pytest.raises(DivergenceError) as info:
        solve(cavity(8), WALLS, mu=0.01, max_iterations=50, tolerance=1e-12)
    err = info.value
    assert "diverged at iteration 3" in str(err) and "times the largest" in str(err)
    assert err.iteration == 2 and np.abs(err.fields.velocity).max() <= 1.0 + 1e-9


def test_mesh_patch_without_condition_is_reported():
    mesh: Mesh = cavity(4)
    with pytest.raises(Exception) as info:
        solve(mesh, {"lid": {"kind": "wall"}})
    assert "walls" in str(info.value)
