"""numba kernels of the k-omega SST model; its constants live here, in one place.

Constants: Menter 1994, AIAA J. 32, 1598-1605 (sigma_k1 = 0.85, sigma_w1 = 0.5, beta_1 = 0.075,
sigma_k2 = 1.0, sigma_w2 = 0.856, beta_2 = 0.0828, beta* = 0.09, a_1 = 0.31, kappa = 0.41), with
alpha_1 = 5/9, alpha_2 = 0.44, the production limiter 10 beta* k omega and the floor 1e-10 of
CD_kw as given by Menter, Kuntz & Langtry 2003, "Ten years of industrial experience with the SST
turbulence model", Turbulence, Heat and Mass Transfer 4 (MKL 2003). The omega wall value
10 * 6 nu / (beta_1 d_1^2) is Menter 1994's (eq. 16 there), d_1 the distance of the first cell
centre from the wall.
"""

from __future__ import annotations

import math

from numba import njit

SIGMA_K1 = 0.85
SIGMA_W1 = 0.5
BETA_1 = 0.075
ALPHA_1 = 5.0 / 9.0
SIGMA_K2 = 1.0
SIGMA_W2 = 0.856
BETA_2 = 0.0828
ALPHA_2 = 0.44
BETA_STAR = 0.09
A_1 = 0.31
KAPPA = 0.41
#: production limiter P_k <= PRODUCTION_LIMIT beta* k omega (MKL 2003)
PRODUCTION_LIMIT = 10.0
#: floor of CD_kw (MKL 2003; per unit density here, the equations being divided by rho)
CD_FLOOR = 1e-10
#: the omega wall value is WALL_OMEGA_FACTOR * 6 nu / (beta_1 d_1^2) (Menter 1994)
WALL_OMEGA_FACTOR = 10.0


@njit(cache=True)
def strain_rate(g00, g01, g10, g11):
    """S = sqrt(2 S_ij S_ij), S_ij = (du_i/dx_j + du_j/dx_i) / 2, in 2D."""
    s01 = g01 + g10
    return math.sqrt(2.0 * (g00 * g00 + g11 * g11) + s01 * s01)


@njit(cache=True)
def blend(f1, a, b):
    """phi = F1 phi_1 + (1 - F1) phi_2."""
    return f1 * a + (1.0 - f1) * b


@njit(cache=True)
def f1_f2(k, w, d, nu, dot_kw):
    """Blending functions (F1, F2) of one cell (Menter 1994; CD floor of MKL 2003):

    arg1 = min(max(sqrt(k)/(beta* w d), 500 nu/(d^2 w)), 4 sigma_w2 k/(CD_kw d^2)),  F1 = tanh(arg1^4),
    CD_kw = max(2 sigma_w2 grad k . grad w / w, 1e-10),
    arg2 = max(2 sqrt(k)/(beta* w d), 500 nu/(d^2 w)),  F2 = tanh(arg2^2).
    """
    kk = k if k > 0.0 else 0.0
    sk = math.sqrt(kk)
    a = sk / (BETA_STAR * w * d)
    b = 500.0 * nu / (d * d * w)
    cd = 2.0 * SIGMA_W2 * dot_kw / w
    if cd < CD_FLOOR:
        cd = CD_FLOOR
    c = 4.0 * SIGMA_W2 * kk / (cd * d * d)
    arg1 = min(max(a, b), c)
    arg2 = max(2.0 * a, b)
    return math.tanh(arg1 ** 4), math.tanh(arg2 * arg2)


@njit(cache=True)
def kinematic_eddy_viscosity(k, w, s, f2):
    """nu_t = a_1 k / max(a_1 w, S F2) (MKL 2003), zero for k <= 0."""
    if k <= 0.0:
        return 0.0
    return A_1 * k / max(A_1 * w, s * f2)


@njit(cache=True)
def eddy_viscosity(k, w, d, nu, rho, strain, out):
    """mu_t = rho a_1 k / max(a_1 w, S F2) per cell (F2 needs no gradient)."""
    for c in range(k.shape[0]):
        _, f2 = f1_f2(k[c], w[c], d[c], nu, 0.0)
        out[c] = rho * kinematic_eddy_viscosity(k[c], w[c], strain[c], f2)


@njit(cache=True)
def cell_properties(k, w, d, nu, grad_k, grad_w, grad_u, f1, strain, nut):
    """Per cell: F1, the strain rate S and nu_t (from k, w and the velocity gradient)."""
    for c in range(k.shape[0]):
        dot = grad_k[c, 0] * grad_w[c, 0] + grad_k[c, 1] * grad_w[c, 1]
        a, f2 = f1_f2(k[c], w[c], d[c], nu, dot)
        f1[c] = a
        s = strain_rate(grad_u[c, 0, 0], grad_u[c, 0, 1], grad_u[c, 1, 0], grad_u[c, 1, 1])
        strain[c] = s
        nut[c] = kinematic_eddy_viscosity(k[c], w[c], s, f2)


@njit(cache=True)
def k_sources(k, w, nut, strain, rho, vol, diag, source):
    """rho V (P_k - beta* k w): P_k = min(nu_t S^2, 10 beta* k w) explicit, the destruction
    implicit (beta* w on the diagonal)."""
    for c in range(k.shape[0]):
        rv = rho * vol[c]
        kk = k[c] if k[c] > 0.0 else 0.0
        p = nut[c] * strain[c] * strain[c]
        lim = PRODUCTION_LIMIT * BETA_STAR * kk * w[c]
        if p > lim:
            p = lim
        source[c] += rv * p
        diag[c] += rv * BETA_STAR * w[c]


@njit(cache=True)
def omega_sources(w, f1, strain, grad_k, grad_w, rho, vol, diag, source):
    """rho V (alpha S^2 - beta w^2 + 2 (1 - F1) sigma_w2 grad k . grad w / w) (MKL 2003), alpha and
    beta blended by F1. Destruction by Newton's rule (2 beta w on the diagonal, beta w^2 in the
    source); the cross-diffusion term explicit where positive, on the diagonal where negative."""
    for c in range(w.shape[0]):
        rv = rho * vol[c]
        a = f1[c]
        alpha = blend(a, ALPHA_1, ALPHA_2)
        beta = blend(a, BETA_1, BETA_2)
        wc = w[c]
        s = strain[c]
        source[c] += rv * (alpha * s * s + beta * wc * wc)
        diag[c] += rv * 2.0 * beta * wc
        cd = 2.0 * (1.0 - a) * SIGMA_W2 * (grad_k[c, 0] * grad_w[c, 0] + grad_k[c, 1] * grad_w[c, 1]) / wc
        if cd >= 0.0:
            source[c] += rv * cd
        else:
            diag[c] -= rv * cd / wc


@njit(cache=True)
def diffusivities(nut, f1, nu, sigma_1, sigma_2, out):
    """nu + sigma nu_t per cell, sigma = F1 sigma_1 + (1 - F1) sigma_2."""
    for c in range(nut.shape[0]):
        out[c] = nu + blend(f1[c], sigma_1, sigma_2) * nut[c]
