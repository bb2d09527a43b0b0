"""Numba kernels of the simultaneous u-v-p solve (``fvrans.solve.coupled``): the blocks of the
coupled matrix as (row, column, value) triplets, and face sums.

Unknowns are ordered (u_0..u_{n-1}, v_0..v_{n-1}, p_0..p_{n-1}). Face conventions are those of
``fvrans.mesh.geometry`` (S_f points out of the owner P; ``w`` the owner's interpolation weight).
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def face_sum_triplets(owner, neigh, n_int, S, w, on_boundary, scale):
    """sum_f phi_f (scale S_f) per cell as two nc x nc blocks on one pattern (values[:, d] for the
    component d of S_f): phi_f = w phi_P + (1 - w) phi_N inside, phi_P on the boundary faces where
    ``on_boundary[b]``, nothing on the others. With phi = p (scale 1, faces without a given pressure)
    the blocks are the pressure gradient G p; with phi = u_d (scale rho, faces with a given pressure:
    walls, symmetry planes and inflow have given fluxes) the velocity part of continuity."""
    nf = owner.shape[0]
    m = 4 * n_int + (nf - n_int)
    rows = np.empty(m, dtype=np.int64)
    cols = np.empty(m, dtype=np.int64)
    vals = np.zeros((m, 2))
    k = 0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        rows[k] = P
        cols[k] = P
        rows[k + 1] = P
        cols[k + 1] = N
        rows[k + 2] = N
        cols[k + 2] = P
        rows[k + 3] = N
        cols[k + 3] = N
        for d in range(2):
            s = scale * S[f, d]
            vals[k, d] = w[f] * s
            vals[k + 1, d] = (1.0 - w[f]) * s
            vals[k + 2, d] = -w[f] * s
            vals[k + 3, d] = -(1.0 - w[f]) * s
        k += 4
    for f in range(n_int, nf):
        P = owner[f]
        rows[k] = P
        cols[k] = P
        if on_boundary[f - n_int]:
            for d in range(2):
                vals[k, d] = scale * S[f, d]
        k += 1
    return rows, cols, vals


@njit(cache=True)
def momentum_triplets(owner, neigh, n_int, a_u, a_v, off_own, off_nei):
    """The two momentum blocks (u rows/columns, then v): diagonals ``a_u``, ``a_v``; ``off_own[f]``
    multiplies the neighbour in the owner's row, ``off_nei[f]`` the owner in the neighbour's row."""
    nc = a_u.shape[0]
    m = 2 * (nc + 2 * n_int)
    rows = np.empty(m, dtype=np.int64)
    cols = np.empty(m, dtype=np.int64)
    vals = np.empty(m)
    k = 0
    for d in range(2):
        off = d * nc
        a = a_u if d == 0 else a_v
        for c in range(nc):
            rows[k] = off + c
            cols[k] = off + c
            vals[k] = a[c]
            k += 1
        for f in range(n_int):
            P = owner[f]
            N = neigh[f]
            rows[k] = off + P
            cols[k] = off + N
            vals[k] = off_own[f]
            rows[k + 1] = off + N
            cols[k + 1] = off + P
            vals[k + 1] = off_nei[f]
            k += 2
    return rows, cols, vals


@njit(cache=True)
def pressure_difference_triplets(owner, neigh, n_int, dcoef, kvec, w, rbar, fixed, rho):
    """The pressure parts of the Rhie-Chow fluxes summed per cell, as three matrices on one pattern
    (values[:, 0..2]): the compact difference Lc p = sum_f -rho r_f dcoef (p_N - p_P) (p_N = 0 on faces
    with a given pressure, which is in the constant part) and the non-orthogonal parts
    Kx gx + Ky gy = sum_f rho r_f k_f . grad p_f, grad p_f = w grad p_P + (1 - w) grad p_N inside,
    grad p_P on faces with a given pressure; r_f = w rbar_P + (1 - w) rbar_N."""
    nf = owner.shape[0]
    nb = nf - n_int
    m = 4 * n_int + nb
    rows = np.empty(m, dtype=np.int64)
    cols = np.empty(m, dtype=np.int64)
    vals = np.zeros((m, 3))
    k = 0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        r = rho * (wf * rbar[P] + (1.0 - wf) * rbar[N])
        a = r * dcoef[f]
        k0 = r * kvec[f, 0]
        k1 = r * kvec[f, 1]
        rows[k] = P
        cols[k] = P
        vals[k, 0] = a
        vals[k, 1] = wf * k0
        vals[k, 2] = wf * k1
        rows[k + 1] = P
        cols[k + 1] = N
        vals[k + 1, 0] = -a
        vals[k + 1, 1] = (1.0 - wf) * k0
        vals[k + 1, 2] = (1.0 - wf) * k1
        rows[k + 2] = N
        cols[k + 2] = N
        vals[k + 2, 0] = a
        vals[k + 2, 1] = -(1.0 - wf) * k0
        vals[k + 2, 2] = -(1.0 - wf) * k1
        rows[k + 3] = N
        cols[k + 3] = P
        vals[k + 3, 0] = -a
        vals[k + 3, 1] = -wf * k0
        vals[k + 3, 2] = -wf * k1
        k += 4
    for f in range(n_int, nf):
        P = owner[f]
        rows[k] = P
        cols[k] = P
        if fixed[f - n_int]:
            r = rho * rbar[P]
            vals[k, 0] = r * dcoef[f]
            vals[k, 1] = r * kvec[f, 0]
            vals[k, 2] = r * kvec[f, 1]
        k += 1
    return rows, cols, vals


@njit(cache=True)
def face_sums(owner, neigh, n_int, F, out):
    """out[c] += sum over the faces of c of F_f (out of the owner, into the neighbour)."""
    for f in range(n_int):
        out[owner[f]] += F[f]
        out[neigh[f]] -= F[f]
    for f in range(n_int, owner.shape[0]):
        out[owner[f]] += F[f]


@njit(cache=True)
def extrapolation_inverse(owner, n_int, S, delta, extrapolated, vol, limit):
    """M_c^-1 per cell (nc, 2, 2), M_c = I - sum_b S_b d_b^T / V_c over the cell's boundary faces whose
    value is extrapolated (p_b = p_P + grad p_P . d_b, d_b = x_f - x_P): the face-sum gradient with
    extrapolated boundary values, V g = sum_f p_f S_f, is g = M^-1 (G p) / V. Cells where M^-1 has an
    entry beyond ``limit`` (M near singular: on a quad wall cell M^-1 has 2, on some boundary triangles
    M is singular) get the identity."""
    nc = vol.shape[0]
    M = np.zeros((nc, 2, 2))
    for c in range(nc):
        M[c, 0, 0] = 1.0
        M[c, 1, 1] = 1.0
    for f in range(n_int, owner.shape[0]):
        if extrapolated[f - n_int]:
            P = owner[f]
            for i in range(2):
                for j in range(2):
                    M[P, i, j] -= S[f, i] * delta[f, j] / vol[P]
    out = np.zeros_like(M)
    for c in range(nc):
        det = M[c, 0, 0] * M[c, 1, 1] - M[c, 0, 1] * M[c, 1, 0]
        i00 = M[c, 1, 1] / det
        i11 = M[c, 0, 0] / det
        i01 = -M[c, 0, 1] / det
        i10 = -M[c, 1, 0] / det
        if det > 0.0 and max(abs(i00), abs(i11), abs(i01), abs(i10)) <= limit:
            out[c, 0, 0] = i00
            out[c, 1, 1] = i11
            out[c, 0, 1] = i01
            out[c, 1, 0] = i10
        else:  # the extrapolation nearly fixes itself (e.g. boundary triangles): left lagged, M^-1 = I
            out[c, 0, 0] = 1.0
            out[c, 1, 1] = 1.0
    return out
