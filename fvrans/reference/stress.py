"""A Reynolds-stress field against the strain rate: what an eddy viscosity can and cannot carry.

Conventions: ``grad_u`` (n, 2, 2) with ``grad_u[c, i, j] = d u_i / d x_j``; a stress field (n, 3)
holds the columns ``R_xx, R_xy, R_yy`` of R_ij = <u_i' u_j'> per unit mass (m^2/s^2). The
Boussinesq relation is R_ij = 2/3 k delta_ij - 2 nu_t S_ij with S = (grad u + grad u^T) / 2.

In a two-dimensional mean flow only the in-plane components R_xx, R_xy, R_yy act on the mean
momentum, and their isotropic part (R_xx + R_yy)/2 delta_ij acts as a pressure. What matters is the
in-plane deviator D = R - (R_xx + R_yy)/2 I; an eddy viscosity gives D = -2 nu_t S_d, with S_d the
in-plane deviator of S (S itself for a divergence-free velocity). Hence:

- the optimal eddy viscosity, the least-squares fit of -2 nu_t S_d to D (the projection of the
  stress anisotropy on the strain rate): nu_t* = -(D : S_d) / (2 S_d : S_d); the trace part and
  R_zz drop out of D : S_d because S_d is traceless, so k is not needed;
- the part an eddy viscosity cannot carry: D + 2 nu_t* S_d (orthogonal to S_d); its share
  |D + 2 nu_t* S_d| / |D| is the sine of the angle between D and S_d in the space of traceless
  symmetric 2x2 tensors;
- the misalignment: the angle between the principal axes of -D and of S_d, 0 to 90 degrees (half
  that angle); 0 means the stress follows the strain rate with nu_t* > 0, 90 that it follows it
  with nu_t* < 0 (counter-gradient).
"""

from __future__ import annotations

import numpy as np

from fvrans.errors import CaseError

#: strain rates with S_d : S_d below this share of the field's largest are taken as zero
STRAIN_FLOOR = 1e-12


def _grad(grad_u: np.ndarray) -> np.ndarray:
    g = np.asarray(grad_u, dtype=np.float64)
    if g.ndim != 3 or g.shape[1:] != (2, 2):
        raise CaseError(f"a velocity gradient has shape (n, 2, 2) (d u_i / d x_j), got {g.shape}")
    return g


def _stress(stress: np.ndarray, n: int | None = None) -> np.ndarray:
    r = np.asarray(stress, dtype=np.float64)
    if r.ndim != 2 or r.shape[1] != 3:
        raise CaseError(f"a stress field has shape (n, 3) (columns R_xx, R_xy, R_yy), got {r.shape}")
    if n is not None and len(r) != n:
        raise CaseError(f"the stress field has {len(r)} rows but the velocity gradient {n}; give one per cell")
    return r


def strain_rate(grad_u: np.ndarray) -> np.ndarray:
    """S = (grad u + grad u^T) / 2, shape (n, 2, 2)."""
    g = _grad(grad_u)
    return 0.5 * (g + g.transpose(0, 2, 1))


def rotation_rate(grad_u: np.ndarray) -> np.ndarray:
    """W = (grad u - grad u^T) / 2, shape (n, 2, 2); W_xy = (du/dy - dv/dx) / 2."""
    g = _grad(grad_u)
    return 0.5 * (g - g.transpose(0, 2, 1))


def _deviator_parts(grad_u: np.ndarray, stress: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(s, d): the in-plane deviators of S and R as vectors (xx part, xy part), each (n, 2), such that
    A : B = 2 (a . b) for traceless symmetric A, B."""
    g = _grad(grad_u)
    r = _stress(stress, len(g))
    s = np.column_stack([0.5 * (g[:, 0, 0] - g[:, 1, 1]), 0.5 * (g[:, 0, 1] + g[:, 1, 0])])
    d = np.column_stack([0.5 * (r[:, 0] - r[:, 2]), r[:, 1]])
    return s, d


def _floor(ss: np.ndarray) -> np.ndarray:
    return ss <= STRAIN_FLOOR * float(np.max(ss, initial=0.0)) if len(ss) else np.zeros(0, dtype=bool)


def optimal_eddy_viscosity(grad_u: np.ndarray, stress: np.ndarray) -> np.ndarray:
    """nu_t* = -(D : S_d) / (2 S_d : S_d) per cell (m^2/s); NaN where the strain rate vanishes
    (S_d : S_d at most 1e-12 of its largest value)."""
    s, d = _deviator_parts(grad_u, stress)
    ss = np.einsum("ij,ij->i", s, s)
    zero = _floor(ss)
    with np.errstate(divide="ignore", invalid="ignore"):
        nu = -np.einsum("ij,ij->i", d, s) / (2.0 * ss)
    nu[zero] = np.nan
    return nu


def eddy_viscosity_stress(grad_u: np.ndarray, nu_t: np.ndarray, k: np.ndarray | float = 0.0) -> np.ndarray:
    """The Boussinesq stress R = 2/3 k I - 2 nu_t S as columns (R_xx, R_xy, R_yy), shape (n, 3)."""
    S = strain_rate(grad_u)
    nu = np.broadcast_to(np.asarray(nu_t, dtype=np.float64), (len(S),))
    iso = np.broadcast_to(2.0 / 3.0 * np.asarray(k, dtype=np.float64), (len(S),))
    return np.column_stack([iso - 2 * nu * S[:, 0, 0], -2 * nu * S[:, 0, 1], iso - 2 * nu * S[:, 1, 1]])


def non_eddy_stress(grad_u: np.ndarray, stress: np.ndarray) -> np.ndarray:
    """The part of the in-plane stress deviator no eddy viscosity can carry, D + 2 nu_t* S_d, as
    columns (xx, xy, yy), shape (n, 3) (traceless: yy = -xx). Where the strain rate vanishes, all of D."""
    s, d = _deviator_parts(grad_u, stress)
    nu = optimal_eddy_viscosity(grad_u, stress)
    nu = np.where(np.isfinite(nu), nu, 0.0)
    rem = d + 2.0 * nu[:, None] * s
    return np.column_stack([rem[:, 0], rem[:, 1], -rem[:, 0]])


def non_eddy_share(grad_u: np.ndarray, stress: np.ndarray) -> np.ndarray:
    """|D + 2 nu_t* S_d| / |D| per cell, 0 (all carried) to 1 (none); NaN where D = 0."""
    s, d = _deviator_parts(grad_u, stress)
    rem = non_eddy_stress(grad_u, stress)[:, :2]
    dd = np.einsum("ij,ij->i", d, d)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.sqrt(np.einsum("ij,ij->i", rem, rem) / dd)
    share[dd <= 0.0] = np.nan
    return share


def misalignment(grad_u: np.ndarray, stress: np.ndarray) -> np.ndarray:
    """Angle in degrees (0 to 90) between the principal axes of -D and of S_d; NaN where either vanishes."""
    s, d = _deviator_parts(grad_u, stress)
    a = -d
    dot = np.einsum("ij,ij->i", a, s)
    cross = a[:, 0] * s[:, 1] - a[:, 1] * s[:, 0]
    ang = 0.5 * np.degrees(np.arctan2(np.abs(cross), dot))
    ss, dd = np.einsum("ij,ij->i", s, s), np.einsum("ij,ij->i", d, d)
    ang[_floor(ss) | (dd <= 0.0)] = np.nan
    return ang
