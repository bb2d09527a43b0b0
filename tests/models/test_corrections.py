"""Spalart-Allmaras corrections as case options: the quadratic constitutive relation QCR2000
(Spalart 2000, Int. J. Heat Fluid Flow 21, 252-263) through the explicit extra-stress path, and
the rotation/curvature correction (Shur, Strelets, Travin & Spalart 2000, AIAA J. 38, 784-792)."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.models import _sa_kernels as K
from fvrans.models.nonlinear import C_CR1, qcr2000_stress

ROOT = Path(__file__).resolve().parents[2]


def _rotation(a: float) -> np.ndarray:
    return np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])


def test_qcr2000_is_a_tensor_and_gives_the_normal_stresses_of_simple_shear():
    assert C_CR1 == 0.3  # Spalart 2000
    g = np.array([[[0.3, 2.0], [-0.5, -0.3]]])  # du_i/dx_j, divergence-free
    t = qcr2000_stress(np.array([1.5]), g)[0]
    # the same flow seen in axes turned by 0.7 rad: grad u' = R g R^T, T' = R T R^T
    r = _rotation(0.7)
    t2 = qcr2000_stress(np.array([1.5]), (r @ g[0] @ r.T)[None])[0]
    tt = np.array([[t[0], t[1]], [t[1], t[2]]])
    np.testing.assert_allclose(r @ tt @ r.T, [[t2[0], t2[1]], [t2[1], t2[2]]], atol=1e-13)
    # simple shear du/dy = G: T_xx = -2 c mu_t |G|, T_yy = +2 c mu_t |G|, T_xy = 0 (worked by hand)
    for gam in (2.0, -2.0):
        s = np.zeros((1, 2, 2))
        s[0, 0, 1] = gam
        np.testing.assert_allclose(qcr2000_stress(np.array([0.5]), s)[0], [-0.6, 0.0, 0.6], atol=1e-15)


def _column(re_b: float, **model) -> fa.Result:
    case = fa.load_case(ROOT / "cases" / "channel_turbulent.toml").replace({
        "fluid.viscosity": 2.0 / re_b,
        "mesh.parameters": {"length": 0.1, "height": 2.0, "nx": 1, "ny": 80, "grading_y": 5e-4},
        **{f"model.{k}": v for k, v in model.items()}})
    r = fa.solve(case)
    assert r.converged
    return r


def test_qcr_in_the_channel_leaves_the_velocity_and_balances_its_normal_stress_by_the_pressure():
    """Fully developed channel: QCR adds no shear stress (T_xy = 0 in simple shear), so u(y) is that
    of the plain model; its wall-normal stress T_yy = 2 c_cr1 mu_t |du/dy| is balanced by the
    pressure, p(y) - p(wall) = T_yy(y) (y momentum: dp/dy = dT_yy/dy, T_yy = 0 at the wall)."""
    plain = _column(5_600)
    qcr = _column(5_600, nonlinear_stress="qcr2000")
    # the cell-centred balance of T_yy against p leaves a cell v of 6e-5 (face fluxes stay zero), which
    # reaches u through the transposed viscous stress: u equal to 2e-5
    assert np.max(np.abs(qcr.velocity[:, 1])) < 1e-4
    np.testing.assert_allclose(qcr.velocity[:, 0], plain.velocity[:, 0], rtol=1e-4)
    y = qcr.cell_centres[:, 1]
    o = np.argsort(y)
    gu = np.stack([qcr.extra["gradients"]["u"], qcr.extra["gradients"]["v"]], axis=1)
    tyy = qcr2000_stress(qcr.model.eddy_viscosity(qcr.fields), gu)[:, 2]
    first = o[0]  # the wall cell, where T_yy is 2e-5 of its peak
    p = qcr.pressure - qcr.pressure[first]
    assert tyy.max() > 0.0 and np.max(np.abs(p - (tyy - tyy[first]))) < 0.02 * tyy.max()
    assert np.ptp(plain.pressure) < 1e-9 * tyy.max()


def test_rotation_function_limits():
    """f_r1 = (1 + c_r1) 2 r*/(1 + r*) [1 - c_r3 atan(c_r2 r~)] - c_r1 (Shur et al. 2000): 1 in
    simple shear, -c_r1 = -1 in solid-body rotation (r* = 0), 1 + 2 c_r1 = 3 in pure strain
    (Omega = 0), with r~ = 0 in these steady, uniform-gradient flows."""
    assert (K.CR1, K.CR2, K.CR3) == (1.0, 12.0, 1.0)  # Shur et al. 2000
    cases = {1.0: [[0.0, 1.0], [0.0, 0.0]], -1.0: [[0.0, -1.0], [1.0, 0.0]], 3.0: [[1.0, 0.0], [0.0, -1.0]]}
    for expected, g in cases.items():
        out = np.empty(1)
        K.rotation_function(np.array([g], float), np.array([[1.0, 0.5]]), np.zeros((1, 3, 2)), out)
        assert out[0] == pytest.approx(expected)


def test_rotation_term_of_a_curved_shear_flow():
    """u_theta = U + G (r - R) around the origin, seen at (R, 0): a steady material point sees its
    strain-rate axes turn at the angular rate u/R; r~ there = 2 Omega_ik S_jk (D S_ij/Dt) / D^4 is
    worked by hand from u . grad S_ij with the gradient of S_ij from the exact field."""
    U, G, R = 1.0, 2.0, 5.0
    # at (x, y) = (R, 0): u = (0, U); du/dx... from u_theta(r) e_theta, e_theta = (-sin t, cos t)
    d = 1e-6

    def grad_u(x, y):
        def vel(x, y):
            r, t = math.hypot(x, y), math.atan2(y, x)
            ut = U + G * (r - R)
            return np.array([-ut * math.sin(t), ut * math.cos(t)])
        gx = (vel(x + d, y) - vel(x - d, y)) / (2 * d)
        gy = (vel(x, y + d) - vel(x, y - d)) / (2 * d)
        return np.stack([gx, gy], axis=1)  # g[i, j] = du_i/dx_j

    def strain(x, y):
        g = grad_u(x, y)
        return np.array([g[0, 0], 0.5 * (g[0, 1] + g[1, 0]), g[1, 1]])

    h = 1e-4
    gs = np.stack([(strain(R + h, 0) - strain(R - h, 0)) / (2 * h), (strain(R, h) - strain(R, -h)) / (2 * h)], axis=1)
    g = grad_u(R, 0.0)
    out = np.empty(1)
    K.rotation_function(g[None], np.array([[0.0, U]]), gs[None], out)
    # by hand: du_theta/dr = G, u_theta / r = U / R: S_12 = (G - U/R)/2, Omega_21 = (G + U/R)/2 ...
    s12, w21 = 0.5 * (G - U / R), 0.5 * (G + U / R)
    # ... the strain axes turn at the rate U / R: D S_11/Dt = -2 s12 U/R, D S_12/Dt = 0, D S_22/Dt = +2 s12 U/R
    d2 = 0.5 * (4 * s12**2 + 4 * w21**2)
    rt = 2 * (-w21) * s12 * (-2 * s12 * U / R - 2 * s12 * U / R) / d2**2  # Omega_12 = -w21
    rstar = abs(s12) / abs(w21)
    fr1 = (1 + 1.0) * 2 * rstar / (1 + rstar) * (1 - math.atan(12 * rt)) - 1.0
    assert out[0] == pytest.approx(fr1, rel=1e-5)
    assert rt > 0.0 and out[0] < 1.0  # angular momentum r u_theta growing outward (Rayleigh-stable): production cut


def test_rotation_correction_barely_changes_the_flat_plate():
    """On the zero-pressure-gradient plate the correction should act little. It is not exactly
    inactive: the convective derivative of S_ij in the growing layer gives f_r1 = 0.989 in the
    layer's outer part at x = 0.97 (coarse grid), so drag and Cf(0.97) move by 0.11 % and 0.10 %."""
    base = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(ROOT / "meshes" / "flat_plate_coarse.msh"), "solver.tolerance": 1e-7})
    runs = [fa.solve(base.set("model.sa_rotation_curvature", rc)) for rc in (False, True)]
    cd = [r.summary()["walls"]["plate"]["forces"]["Cd"] for r in runs]
    cf = []
    for r in runs:
        w = r.wall("plate")
        o = np.argsort(w.x)
        cf.append(float(np.interp(0.97, w.x[o], w.cf[o])))
    assert cd[1] == pytest.approx(cd[0], rel=3e-3) and cf[1] == pytest.approx(cf[0], rel=3e-3)
    assert cd[1] != cd[0]  # the option does act


def test_rotation_correction_leaves_a_parallel_shear_flow_unchanged():
    """In a parallel shear flow (the fully developed periodic channel, cases/channel_turbulent.toml
    at Re_tau ~ 180) S = Omega and D S_ij / Dt = 0, so r* = 1, r~ = 0 and f_r1 = 1 exactly (Spalart &
    Shur 1997, Aerosp. Sci. Technol. 1, 297-302; from memory): the friction and the velocity must
    be those of plain Spalart-Allmaras to 1e-6 (the flat plate above is not parallel: 0.11 %)."""
    base = fa.load_case(ROOT / "cases" / "channel_turbulent.toml").replace({"fluid.viscosity": 2.0 / 5600})
    runs = [fa.solve(base.set("model.sa_rotation_curvature", rc)) for rc in (False, True)]
    assert all(r.converged for r in runs)
    cd = [r.summary()["walls"]["lower_wall"]["forces"]["Cd"] for r in runs]
    assert cd[1] == pytest.approx(cd[0], rel=1e-6)
    assert np.max(np.abs(runs[1].velocity - runs[0].velocity)) < 1e-6 * np.max(np.abs(runs[0].velocity))


@pytest.mark.slow
def test_rotation_correction_raises_the_concave_wall_friction_in_a_bend():
    """cases/curved_channel.toml (180-degree bend, centreline radius 5 W): the concave (outer) wall
    carries more friction than the convex (inner) one (Ellis & Joubert 1974; Moser & Moin 1987; the
    trend from memory). Plain SA, following only the mean-flow acceleration on the inner wall, has
    it the other way round at 90 degrees (ratio 0.71); with the correction the ratio is 1.59."""
    base = fa.load_case(ROOT / "cases" / "curved_channel.toml")
    ratio = {}
    for rc in (False, True):
        r = fa.solve(base.set("model.sa_rotation_curvature", rc))
        assert r.converged
        cf = {}
        for wall in ("inner_wall", "outer_wall"):
            w = r.wall(wall)
            theta = np.degrees(np.arctan2(w.y, w.x))
            bend = w.y > 0
            o = np.argsort(theta[bend])
            cf[wall] = float(np.interp(90.0, theta[bend][o], np.abs(w.cf[bend][o])))
        ratio[rc] = cf["outer_wall"] / cf["inner_wall"]
    assert ratio[True] > 1.3 and ratio[False] < 1.0
