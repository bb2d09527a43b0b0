"""Non-linear constitutive relations: Reynolds stresses beyond 2 mu_t S, handed to the momentum
equation as a model's explicit extra stress (:meth:`fvrans.models.base.TurbulenceModel.extra_stress`).

QCR2000 (Spalart 2000, "Strategies for turbulence modelling and simulations", Int. J. Heat Fluid
Flow 21, 252-263): tau_ij = tau_ij^B - c_cr1 (O_ik tau_jk^B + O_jk tau_ik^B), tau^B = 2 mu_t S,
O_ik = 2 W_ik / sqrt(du_m/dx_n du_m/dx_n), W_ik = (du_i/dx_k - du_k/dx_i) / 2, c_cr1 = 0.3; the
extra stress is the second term. In simple shear du/dy = g it gives T_xx = -2 c_cr1 mu_t |g|,
T_yy = +2 c_cr1 mu_t |g|, T_xy = 0: the normal stresses differ as measured.
"""

from __future__ import annotations

import numpy as np

#: Spalart 2000
C_CR1 = 0.3
#: the choices of ``[model] nonlinear_stress``
NONLINEAR_STRESSES = ("none", "qcr2000")


def qcr2000_stress(mu_t: np.ndarray, grad_u: np.ndarray) -> np.ndarray:
    """The QCR2000 extra stress (T_xx, T_xy, T_yy) per cell for eddy viscosity ``mu_t`` and the
    velocity gradient grad_u[c, i, j] = du_i/dx_j (zero where the gradient vanishes).

    >>> g = np.zeros((1, 2, 2)); g[0, 0, 1] = 2.0            # simple shear du/dy = 2
    >>> (qcr2000_stress(np.array([0.5]), g).round(12) + 0.0).tolist()  # -+ 2 c_cr1 mu_t |du/dy|
    [[-0.6, 0.0, 0.6]]
    """
    g = np.asarray(grad_u, dtype=float)
    mu = np.asarray(mu_t, dtype=float)
    txx = 2.0 * mu * g[:, 0, 0]
    tyy = 2.0 * mu * g[:, 1, 1]
    txy = mu * (g[:, 0, 1] + g[:, 1, 0])
    norm = np.sqrt(np.einsum("cij,cij->c", g, g))
    o = np.divide(g[:, 0, 1] - g[:, 1, 0], norm, out=np.zeros_like(norm), where=norm > 0.0)  # O_xy = -O_yx
    return np.stack([-2.0 * C_CR1 * o * txy, -C_CR1 * o * (tyy - txx), 2.0 * C_CR1 * o * txy], axis=1)


def extra_stress(kind: str, mu_t: np.ndarray, grad_u: np.ndarray) -> np.ndarray | None:
    """The extra stress of a ``[model] nonlinear_stress`` choice (None for ``"none"``)."""
    if kind == "none":
        return None
    if kind == "qcr2000":
        return qcr2000_stress(mu_t, grad_u)
    raise ValueError(f"unknown non-linear stress {kind!r}; use one of {NONLINEAR_STRESSES}")


__all__ = ["C_CR1", "NONLINEAR_STRESSES", "extra_stress", "qcr2000_stress"]
