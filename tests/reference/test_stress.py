"""Stress diagnostics (fvrans.reference.stress) against cases derived by hand.

Notation: simple shear u = gamma y has grad u = [[0, gamma], [0, 0]], S = [[0, gamma/2], [gamma/2, 0]];
plane strain u = a x, v = -a y has S = diag(a, -a). Stress columns are (R_xx, R_xy, R_yy).
"""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.errors import CaseError
from fvrans.reference.stress import (
    eddy_viscosity_stress,
    misalignment,
    non_eddy_share,
    non_eddy_stress,
    optimal_eddy_viscosity,
    rotation_rate,
    strain_rate,
)

NU, GAMMA, K = 0.3, 2.0, 1.5
SHEAR = np.array([[[0.0, GAMMA], [0.0, 0.0]]])


def test_boussinesq_stress_in_simple_shear_is_carried_entirely():
    # R = 2/3 k I - 2 nu S: R_xx = R_yy = 2k/3, R_xy = -nu gamma
    R = eddy_viscosity_stress(SHEAR, NU, K)
    np.testing.assert_allclose(R, [[2 * K / 3, -NU * GAMMA, 2 * K / 3]])
    np.testing.assert_allclose(strain_rate(SHEAR), [[[0, GAMMA / 2], [GAMMA / 2, 0]]])
    np.testing.assert_allclose(rotation_rate(SHEAR), [[[0, GAMMA / 2], [-GAMMA / 2, 0]]])
    assert optimal_eddy_viscosity(SHEAR, R)[0] == pytest.approx(NU)
    assert misalignment(SHEAR, R)[0] == pytest.approx(0.0, abs=1e-12)
    np.testing.assert_allclose(non_eddy_stress(SHEAR, R), [[0, 0, 0]], atol=1e-15)
    assert non_eddy_share(SHEAR, R)[0] == pytest.approx(0.0, abs=1e-12)


def test_normal_stress_difference_in_simple_shear():
    """R_xx - R_yy = 2 nu gamma on top of R_xy = -nu gamma (a channel-like anisotropy).

    In-plane deviator D = [[nu gamma, -nu gamma], [-nu gamma, -nu gamma]]. D : S = -nu gamma^2 and
    2 S : S = gamma^2, so nu* = nu (the normal-stress difference is orthogonal to S). Remainder
    D + 2 nu S = [[nu gamma, 0], [0, -nu gamma]], share |rem| / |D| = 1 / sqrt(2). Principal axes:
    S at 45 deg; -D = [[-nu gamma, nu gamma], [nu gamma, nu gamma]] has tan 2 theta = 2 nu gamma /
    (-2 nu gamma) with cos 2 theta < 0, 2 theta = 135 deg, theta = 67.5 deg: misalignment 22.5 deg."""
    ng = NU * GAMMA
    R = np.array([[1.0 + 2 * ng, -ng, 1.0]])
    assert optimal_eddy_viscosity(SHEAR, R)[0] == pytest.approx(NU)
    np.testing.assert_allclose(non_eddy_stress(SHEAR, R), [[ng, 0.0, -ng]], atol=1e-15)
    assert non_eddy_share(SHEAR, R)[0] == pytest.approx(1 / np.sqrt(2))
    assert misalignment(SHEAR, R)[0] == pytest.approx(22.5)


def test_plane_strain_with_a_shear_stress():
    """S = diag(a, -a); R_xx - R_yy = -4 nu a (carried with nu* = nu) plus R_xy = c = 2 nu a, which is
    orthogonal to S: remainder (0, c, 0), share c / sqrt(c^2 + (2 nu a)^2) = 1/sqrt(2), and the
    principal axes of -D = [[2 nu a, -c], [-c, -2 nu a]] at -22.5 deg against 0 deg for S."""
    a = 0.7
    g = np.array([[[a, 0.0], [0.0, -a]]])
    c = 2 * NU * a
    R = np.array([[1.0 - 2 * NU * a, c, 1.0 + 2 * NU * a]])
    assert optimal_eddy_viscosity(g, R)[0] == pytest.approx(NU)
    np.testing.assert_allclose(non_eddy_stress(g, R), [[0.0, c, 0.0]], atol=1e-15)
    assert non_eddy_share(g, R)[0] == pytest.approx(1 / np.sqrt(2))
    assert misalignment(g, R)[0] == pytest.approx(22.5)


def test_counter_gradient_stress_gives_a_negative_eddy_viscosity():
    # R_xy = +nu gamma: the stress follows the strain rate with the opposite sign
    R = np.array([[1.0, NU * GAMMA, 1.0]])
    assert optimal_eddy_viscosity(SHEAR, R)[0] == pytest.approx(-NU)
    assert misalignment(SHEAR, R)[0] == pytest.approx(90.0)
    assert non_eddy_share(SHEAR, R)[0] == pytest.approx(0.0, abs=1e-12)


def test_no_strain_rate():
    # solid-body rotation: S = 0, so no eddy viscosity is defined and all of D is left over
    g = np.array([[[0.0, 1.0], [-1.0, 0.0]]])
    R = np.array([[2.0, 0.5, 1.0]])
    assert np.isnan(optimal_eddy_viscosity(g, R)[0]) and np.isnan(misalignment(g, R)[0])
    np.testing.assert_allclose(non_eddy_stress(g, R), [[0.5, 0.5, -0.5]])
    assert non_eddy_share(g, R)[0] == pytest.approx(1.0)


def test_independent_of_the_axes():
    """Turning the axes by an angle leaves nu*, the misalignment and the share unchanged
    (grad u -> Q G Q^T, R -> Q R Q^T)."""
    rng = np.random.default_rng(5)
    g = rng.normal(size=(50, 2, 2))
    g[:, 1, 1] = -g[:, 0, 0]
    Rm = rng.normal(size=(50, 2, 2))
    Rm = Rm @ Rm.transpose(0, 2, 1)
    R = np.column_stack([Rm[:, 0, 0], Rm[:, 0, 1], Rm[:, 1, 1]])
    t = 0.4
    Q = np.array([[np.cos(t), -np.sin(t)], [np.sin(t), np.cos(t)]])
    g2 = Q @ g @ Q.T
    Rm2 = Q @ Rm @ Q.T
    R2 = np.column_stack([Rm2[:, 0, 0], Rm2[:, 0, 1], Rm2[:, 1, 1]])
    for f in (optimal_eddy_viscosity, misalignment, non_eddy_share):
        np.testing.assert_allclose(f(g2, R2), f(g, R), rtol=1e-10, atol=1e-12)


def test_shapes_checked():
    with pytest.raises(CaseError, match=r"velocity gradient has shape \(n, 2, 2\)"):
        optimal_eddy_viscosity(np.zeros((3, 2)), np.zeros((3, 3)))
    with pytest.raises(CaseError, match=r"stress field has shape \(n, 3\)"):
        optimal_eddy_viscosity(np.zeros((3, 2, 2)), np.zeros((3, 2)))
    with pytest.raises(CaseError, match="2 rows but the velocity gradient 3"):
        misalignment(np.zeros((3, 2, 2)), np.zeros((2, 3)))
