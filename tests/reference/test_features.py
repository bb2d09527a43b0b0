"""Data export (fvrans.reference.features): the two-dimensional tensor basis of Pope (1975, J. Fluid
Mech. 72, 331-340) reconstructs a known anisotropy; invariants and coefficients of hand-derived cases;
the tidy table written as CSV and numpy archive; the whole chain from a point cloud onto a mesh."""

from __future__ import annotations

import numpy as np
import pytest
from reference_helpers import write_cloud

from fvrans.mesh.generate import channel
from fvrans.mesh.geometry import compute_geometry
from fvrans.reference import read_cloud
from fvrans.reference.features import (
    anisotropy,
    feature_table,
    reference_features,
    tensor_basis,
    write_feature_table,
)


def _random_gradients(n: int, seed: int = 2) -> np.ndarray:
    g = np.random.default_rng(seed).normal(size=(n, 2, 2))
    g[:, 1, 1] = -g[:, 0, 0]  # divergence-free
    return g


def test_basis_reconstructs_a_known_anisotropy():
    """b = g_1 T_1 + g_2 T_2 + g_3 T_3 with chosen coefficients, written as stresses
    R = 2k (b + I/3): the table gives the coefficients back and the residual vanishes."""
    n = 200
    rng = np.random.default_rng(7)
    g = _random_gradients(n)
    tau = rng.uniform(0.5, 2.0, n)
    coef = rng.uniform(-0.1, 0.1, (n, 3))
    _, _, T = tensor_basis(g, tau)
    b = np.einsum("in,inkl->ikl", coef, T)
    assert np.allclose(np.einsum("ikk->i", b), 0.0)  # traceless, as every anisotropy
    k = rng.uniform(0.5, 3.0, n)
    R = 2 * k[:, None, None] * (b + np.eye(3) / 3)
    stress = np.column_stack([R[:, 0, 0], R[:, 0, 1], R[:, 1, 1]])
    np.testing.assert_allclose(anisotropy(stress, k), b, atol=1e-14)  # R_zz = 2k - R_xx - R_yy
    t = feature_table(np.zeros((n, 2)), np.ones(n), g, stress, k, time_scale=tau)
    for m in range(3):
        np.testing.assert_allclose(t[f"g_{m + 1}"], coef[:, m], rtol=1e-9, atol=1e-12)
    assert np.nanmax(t["basis_residual"]) < 1e-10
    np.testing.assert_allclose(t["b_zz"], b[:, 2, 2], atol=1e-14)


def test_boussinesq_anisotropy_and_invariants_in_simple_shear():
    """u = gamma y, R = 2/3 k I - 2 nu S: b = -(nu / k) S, so g_1 = -nu / (k tau), g_2 = g_3 = 0.
    With tau = 1 / |grad u| = 1 / gamma: S^ = [[0, 1/2], [1/2, 0]], W^ = [[0, 1/2], [-1/2, 0]],
    lambda_1 = tr(S^ S^) = 1/2, lambda_2 = tr(W^ W^) = -1/2; T_2 = S^W^ - W^S^ = diag(-1/2, 1/2, 0),
    T_3 = diag(1/4, 1/4, 0) - (1/6) I = diag(1/12, 1/12, -1/6)."""
    gamma, nu, k = 4.0, 0.02, 0.3
    g = np.array([[[0.0, gamma], [0.0, 0.0]]])
    stress = np.array([[2 * k / 3, -nu * gamma, 2 * k / 3]])
    t = feature_table(np.zeros((1, 2)), np.ones(1), g, stress, np.array([k]))
    assert t["time_scale"][0] == pytest.approx(1 / gamma)
    assert t["lambda_1"][0] == pytest.approx(0.5) and t["lambda_2"][0] == pytest.approx(-0.5)
    assert (t["T2_xx"][0], t["T2_yy"][0], t["T2_xy"][0]) == pytest.approx((-0.5, 0.5, 0.0))
    assert (t["T3_xx"][0], t["T3_zz"][0]) == pytest.approx((1 / 12, -1 / 6))
    assert t["g_1"][0] == pytest.approx(-nu / (k / gamma))
    assert t["g_2"][0] == pytest.approx(0.0, abs=1e-15) and t["g_3"][0] == pytest.approx(0.0, abs=1e-15)
    assert t["nu_t_optimal"][0] == pytest.approx(nu)
    # with epsilon given the time scale is k / epsilon
    t2 = feature_table(np.zeros((1, 2)), np.ones(1), g, stress, np.array([k]), epsilon=np.array([0.6]))
    assert t2["time_scale"][0] == pytest.approx(0.5)
    assert t2["g_1"][0] == pytest.approx(-nu / (k * 0.5))


def test_table_written_as_csv_and_numpy_archive(tmp_path):
    n = 5
    g = _random_gradients(n)
    t = feature_table(np.arange(2 * n, dtype=float).reshape(n, 2), np.ones(n), g,
                      np.tile([1.0, -0.1, 0.8], (n, 1)), np.full(n, 1.2))
    csv, npz = write_feature_table(t, tmp_path / "out")
    header = csv.read_text().splitlines()[0].split(",")
    assert header == list(t) and header[:6] == ["x", "y", "wall_distance", "time_scale", "lambda_1", "lambda_2"]
    back = np.loadtxt(csv, delimiter=",", skiprows=1)
    np.testing.assert_array_equal(back, np.column_stack(list(t.values())))
    with np.load(npz) as z:
        assert list(z.files) == list(t)
        np.testing.assert_array_equal(z["g_1"], t["g_1"])


def test_reference_features_from_a_cloud_onto_a_channel(tmp_path):
    """A reference in simple shear u = gamma y with Boussinesq stresses of a known nu on a channel
    mesh: the velocity gradient (least squares, exact for a linear field) gives back nu everywhere,
    the wall distance is y (lower wall) or 1 - y (upper wall)."""
    gamma, nu, k = 3.0, 0.01, 0.2
    x, y = np.meshgrid(np.linspace(0, 4, 41), np.linspace(0, 1, 21), indexing="ij")
    x, y = x.ravel(), y.ravel()
    cols = {"x": x, "y": y, "u": gamma * y, "v": 0 * y, "R_xx": np.full_like(y, 2 * k / 3),
            "R_xy": np.full_like(y, -nu * gamma), "R_yy": np.full_like(y, 2 * k / 3), "k": np.full_like(y, k)}
    src = read_cloud(write_cloud(tmp_path / "shear.csv", cols))
    mesh = channel(length=4.0, height=1.0, nx=16, ny=8)
    table, interp = reference_features(src, mesh, ["lower_wall", "upper_wall"])
    geom = compute_geometry(mesh)
    assert interp.inside_share == 1.0
    np.testing.assert_allclose(table["nu_t_optimal"], nu, rtol=1e-9)
    np.testing.assert_allclose(table["g_1"], -nu * gamma / k, rtol=1e-9)
    yc = geom.cell_centre[:, 1]
    np.testing.assert_allclose(table["wall_distance"], np.minimum(yc, 1 - yc), rtol=1e-12)
