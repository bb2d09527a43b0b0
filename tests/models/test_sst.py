"""k-omega SST: constants against the published values, the log-layer balance they are built on,
the blending functions and the eddy-viscosity limiter, and the decay of free-stream turbulence
against its exact solution.

References: Menter 1994, AIAA J. 32, 1598-1605 (constants, F1, F2, the omega wall value);
Menter, Kuntz & Langtry 2003, Turbulence, Heat and Mass Transfer 4 (alpha_1 = 5/9, alpha_2 = 0.44,
the production limiter 10, nu_t = a_1 k / max(a_1 omega, S F2), CD floor 1e-10). Values typed in
here independently of the code.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fvrans.fields import Fields
from fvrans.mesh.generate import channel
from fvrans.mesh.geometry import compute_geometry
from fvrans.models import _sst_kernels as K
from fvrans.models.sst import CONSTANTS, KOmegaSST, turbulence_from_intensity, wall_omega
from fvrans.physics.boundary import build_flow_boundary

PUBLISHED = {
    "sigma_k1": 0.85, "sigma_w1": 0.5, "beta_1": 0.075, "alpha_1": 5 / 9,
    "sigma_k2": 1.0, "sigma_w2": 0.856, "beta_2": 0.0828, "alpha_2": 0.44,
    "beta_star": 0.09, "a_1": 0.31, "kappa": 0.41, "production_limit": 10.0,
}


def test_constants_are_the_published_ones():
    assert CONSTANTS == pytest.approx(PUBLISHED, rel=1e-12)
    assert K.CD_FLOOR == 1e-10 and K.WALL_OMEGA_FACTOR == 10.0


@pytest.mark.parametrize("i", [1, 2])
def test_alpha_gives_the_log_layer(i):
    """In the log layer (k = u^2/sqrt(beta*), omega = u/(sqrt(beta*) kappa y)) the omega equation
    balances only if alpha = beta/beta* - sigma_w kappa^2 / sqrt(beta*) (Menter 1994, eq. 4 and 13)."""
    c = PUBLISHED
    alpha = c[f"beta_{i}"] / c["beta_star"] - c[f"sigma_w{i}"] * c["kappa"] ** 2 / math.sqrt(c["beta_star"])
    assert alpha == pytest.approx(c[f"alpha_{i}"], rel=0.006)


def test_k_production_balances_destruction_in_the_log_layer():
    u_tau, y = 0.05, np.array([0.01, 0.02, 0.05])
    k = np.full(3, u_tau**2 / math.sqrt(K.BETA_STAR))
    w = u_tau / (math.sqrt(K.BETA_STAR) * K.KAPPA * y)
    strain = u_tau / (K.KAPPA * y)  # du/dy
    nut = k / w
    diag, src = np.zeros(3), np.zeros(3)
    K.k_sources(k, w, nut, strain, 1.0, np.ones(3), diag, src)
    np.testing.assert_allclose(src, diag * k, rtol=1e-12)  # P_k = beta* k omega


def test_blending_functions_and_the_limiter():
    nu = 1e-5
    # at the wall (small d, omega near its wall value) both are 1; far out (large d) both 0
    f1, f2 = K.f1_f2(1e-4, 6 * nu / (K.BETA_1 * 1e-6), 1e-3, nu, 0.0)
    assert f1 == pytest.approx(1.0) and f2 == pytest.approx(1.0)
    f1, f2 = K.f1_f2(1e-6, 1.0, 100.0, nu, 0.0)
    assert f1 < 1e-6 and f2 < 1e-6
    # nu_t = a_1 k / max(a_1 omega, S F2): the strain limits where S F2 > a_1 omega
    assert K.kinematic_eddy_viscosity(0.01, 1.0, 0.1, 1.0) == pytest.approx(0.01 / 1.0)
    assert K.kinematic_eddy_viscosity(0.01, 1.0, 10.0, 1.0) == pytest.approx(0.31 * 0.01 / 10.0)
    assert K.strain_rate(0.0, 2.0, 0.0, 0.0) == pytest.approx(2.0)  # simple shear du/dy = 2
    # the production limiter: P_k <= 10 beta* k omega
    diag, src = np.zeros(1), np.zeros(1)
    K.k_sources(np.array([1.0]), np.array([1.0]), np.array([100.0]), np.array([10.0]), 1.0, np.ones(1), diag, src)
    assert src[0] == pytest.approx(10 * K.BETA_STAR)


def test_wall_omega_and_inflow_values():
    m = channel(1.0, 1.0, 2, 4)
    g = compute_geometry(m)
    w = wall_omega(m, g, 1e-5)
    lower = m.patch("lower_wall")
    b = slice(lower.start - m.n_internal_faces, lower.stop - m.n_internal_faces)
    np.testing.assert_allclose(w[b], 10 * 6 * 1e-5 / (0.075 * 0.125**2))  # d_1 = half of the 0.25 cell
    k, om = turbulence_from_intensity(10.0, 0.01, 5.0, 1e-5)
    assert k == pytest.approx(1.5 * 0.1**2) and om == pytest.approx(k / 5e-5)


def _decay(n: int, scheme: str) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Uniform flow U = 1 through a duct of length 1 with symmetry sides, far from any wall
    (F1 = 0): U dk/dx = -beta* k w, U dw/dx = -beta_2 w^2 (diffusion and cross-diffusion, relative
    size ~ k / U^2 = 4e-7 here, left out)."""
    mesh = channel(1.0, 0.05, n, 1)
    geom = compute_geometry(mesh)
    specs = {"inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0], "turbulence_intensity": 0.0005,
                       "eddy_viscosity_ratio": 10.0},
             "outlet": {"kind": "outflow-pressure"},
             "lower_wall": {"kind": "symmetry"}, "upper_wall": {"kind": "symmetry"}}
    fb = build_flow_boundary(mesh, geom, specs)
    nu = 1e-8
    model = KOmegaSST(mesh, geom, fb, rho=1.0, mu=nu, wall_distance=np.full(mesh.n_cells, 1e3),
                      convection=scheme, linear_tolerance=1e-10, linear_max_iterations=200)
    fields = Fields.uniform(mesh.n_cells, mesh.n_faces, (1.0, 0.0))
    fields.face_flux = geom.face_area_vector[:, 0].copy()  # rho u . S
    fields.face_flux[mesh.patch("lower_wall").start :] = 0.0
    model.initialise(fields)
    for _ in range(200):
        res = model.update(fields, np.zeros((mesh.n_cells, 2, 2)))
        if max(res) < 1e-12:
            break
    assert max(res) < 1e-10
    x = geom.cell_centre[:, 0]
    inner = x < 0.9  # the outlet cells: zero-gradient face values make their gradient first order
    k0, w0 = turbulence_from_intensity(1.0, 0.0005, 10.0, nu)
    s = 1.0 + K.BETA_2 * w0 * x
    k, w = fields.variables["k"], fields.variables["omega"]
    return k[inner], w[inner], (k0 * s ** (-K.BETA_STAR / K.BETA_2))[inner], (w0 / s)[inner]


def test_free_stream_decay_against_the_exact_solution():
    errs = []
    for n in (20, 40):
        k, w, k_exact, w_exact = _decay(n, "linear-upwind")
        errs.append((np.max(np.abs(k / k_exact - 1)), np.max(np.abs(w / w_exact - 1))))
    assert errs[1][0] < 3e-5 and errs[1][1] < 3e-5  # 1.6e-5 and 1.4e-5 at 40 cells
    assert errs[0][0] / errs[1][0] > 3.0 and errs[0][1] / errs[1][1] > 3.0  # second order
