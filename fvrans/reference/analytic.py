"""A reference mean flow with a known answer: the fully developed channel whose mean velocity is a
published analytic wall law and whose Reynolds shear stress follows from the exact momentum balance.

Reichardt (1951), "Vollstandige Darstellung der turbulenten Geschwindigkeitsverteilung in glatten
Leitungen", Z. Angew. Math. Mech. 31, 208-219 (form and constants from memory):

    u+ = ln(1 + kappa y+) / kappa + C (1 - exp(-y+ / chi) - (y+ / chi) exp(-y+ / 3)),
    kappa = 0.4, C = 7.8, chi = 11,

smooth from the wall (du+/dy+ = 1 at y+ = 0) into the log region. In a fully developed channel of
half-height h driven by the mean pressure gradient dp/dx = -rho u_tau^2 / h, the total shear stress
is linear, tau / rho = u_tau^2 (1 - y/h) (y from the wall), so the Reynolds shear stress of the
profile U(y) = u_tau u+(y u_tau / nu) is exactly

    R_xy = <u'v'> = nu dU/dy - u_tau^2 (1 - y/h);

R_xx and R_yy do not act on U (only on the pressure across the channel) and are taken as zero.
The profile has a non-zero slope at the centre line, so it describes one half: y = h is a symmetry
plane where the viscous and the Reynolds shear stresses cancel.
"""

from __future__ import annotations

import numpy as np

#: Reichardt (1951) constants (from memory)
KAPPA, C, CHI = 0.4, 7.8, 11.0


def reichardt_u_plus(y_plus: np.ndarray) -> np.ndarray:
    """u+ of Reichardt's law at y+ (see the module docstring).

    >>> float(reichardt_u_plus(np.array([0.0]))[0]), round(float(reichardt_u_plus(np.array([1000.0]))[0]), 2)
    (0.0, 22.78)
    """
    yp = np.asarray(y_plus, dtype=np.float64)
    return np.log1p(KAPPA * yp) / KAPPA + C * (1.0 - np.exp(-yp / CHI) - yp / CHI * np.exp(-yp / 3.0))


def reichardt_slope(y_plus: np.ndarray) -> np.ndarray:
    """du+/dy+ of Reichardt's law (1 at the wall)."""
    yp = np.asarray(y_plus, dtype=np.float64)
    return 1.0 / (1.0 + KAPPA * yp) + C * (np.exp(-yp / CHI) / CHI - np.exp(-yp / 3.0) / CHI
                                          + yp / (3.0 * CHI) * np.exp(-yp / 3.0))


def channel_reference(y: np.ndarray, re_tau: float, h: float = 1.0, u_tau: float = 1.0) -> dict[str, np.ndarray]:
    """u, v, R_xx, R_xy, R_yy at wall distances ``y`` (0 <= y <= h) of the half channel at
    Re_tau = u_tau h / nu (see the module docstring)."""
    y = np.asarray(y, dtype=np.float64)
    nu = u_tau * h / re_tau
    yp = y * u_tau / nu
    u = u_tau * reichardt_u_plus(yp)
    dudy = u_tau**2 / nu * reichardt_slope(yp)
    zero = np.zeros_like(y)
    return {"u": u, "v": zero, "R_xx": zero, "R_xy": nu * dudy - u_tau**2 * (1.0 - y / h), "R_yy": zero.copy()}


__all__ = ["C", "CHI", "KAPPA", "channel_reference", "reichardt_slope", "reichardt_u_plus"]
