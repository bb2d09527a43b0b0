"""numba kernels of the block preconditioners (``fvrans.linalg.block_preconditioner``)."""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN

#: unsigned indices in the CSR loops (no wrap-around check per index: ``_amg_kernels._U``)
_U = np.uint64


@njit(cache=True)
def add_to_diagonal(indptr, indices, data, d):
    """data[i, i] += d[i] in every row i of the CSR matrix (indptr, indices, data) that holds its
    diagonal."""
    for i in range(indptr.size - 1):
        for k in range(indptr[i], indptr[i + 1]):
            if indices[k] == i:
                data[k] += d[i]
                break


@njit(cache=True, inline="always")
def _at(indptr, indices, i, j):
    """The position of (i, j) in the CSR pattern (present)."""
    for k in range(indptr[i], indptr[i + 1]):
        if indices[k] == j:
            return k
    return -1


@njit(cache=True)
def weighted_laplacian(indptr, indices, owner, neigh, n_int, dcoef, w, rbar, fixed, rho, data):
    """The values of the compact Laplacian sum_f rho r_f dcoef_f (p_P - p_N), r_f = w_f rbar_P +
    (1 - w_f) rbar_N (rho rbar_P dcoef_f on the diagonal for faces with a given pressure), on the CSR
    pattern (indptr, indices) of the cells and their face neighbours: ``data`` is overwritten. The
    first column of ``fvrans.solve._coupled_kernels.pressure_difference_triplets``, without the triplets."""
    data[:] = 0.0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        a = rho * (wf * rbar[P] + (1.0 - wf) * rbar[N]) * dcoef[f]
        data[_at(indptr, indices, P, P)] += a
        data[_at(indptr, indices, P, N)] -= a
        data[_at(indptr, indices, N, N)] += a
        data[_at(indptr, indices, N, P)] -= a
    for f in range(n_int, owner.shape[0]):
        if fixed[f - n_int]:
            P = owner[f]
            data[_at(indptr, indices, P, P)] += rho * rbar[P] * dcoef[f]


@njit(cache=True, nogil=True, inline="always")
def _row_dot(ptr, idx, dat, x, i):
    """sum_k dat[k] x[idx[k]] over row i, from 0 in the row's order (as scipy's CSR product sums it)."""
    s = 0.0
    for k in range(_U(ptr[i]), _U(ptr[i + 1])):
        s += dat[k] * x[_U(idx[k])]
    return s


@njit(cache=True, nogil=True, inline="always")
def _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, x, i, n):
    """(G x)_i, G (2n x n) given as CSR rows (``g_cind`` of one entry) or as the last cind[c + 1] - cind[c]
    entries of row i of a larger matrix (``g_cind`` the compact structure's pointers, c = i mod n), its
    columns ``g_idx - g_shift``: the simultaneous system's momentum rows, whose pressure columns hold G
    (``fvrans.solve.coupled.SystemGradient``); summed from 0 in the row's order."""
    i = np.int64(i)  # (a prange index is unsigned: with a signed n it would make floats)
    hi = g_ptr[i + 1]
    if g_cind.shape[0] > 1:
        c = i - n if i >= n else i
        lo = hi - (g_cind[c + 1] - g_cind[c])
    else:
        lo = g_ptr[i]
    s = 0.0
    for k in range(_U(lo), _U(hi)):
        s += g_dat[k] * x[_U(g_idx[k] - g_shift)]
    return s


@njit(cache=True, nogil=True, parallel=True)
def _gradient_step(g_ptr, g_idx, g_dat, g_cind, g_shift, y, hu, hv, gx, gy, n, par):
    """gx = hu (G_x y), gy = hv (G_y y) (G's rows [x; y], 2n of them: ``_g_row_dot``)."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            gx[i] = hu[i] * _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, y, i, n)
            gy[i] = hv[i] * _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, y, n + np.int64(i), n)
    else:
        for i in range(n):
            gx[i] = hu[i] * _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, y, i, n)
            gy[i] = hv[i] * _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, y, n + i, n)


@njit(cache=True, nogil=True, parallel=True)
def _momentum_step(u_ptr, u_idx, u_dat, v_ptr, v_idx, v_dat, gx, gy, hu, hv, tx, ty, n, par):
    """tx = hu (A_u gx), ty = hv (A_v gy)."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            tx[i] = hu[i] * _row_dot(u_ptr, u_idx, u_dat, gx, i)
            ty[i] = hv[i] * _row_dot(v_ptr, v_idx, v_dat, gy, i)
    else:
        for i in range(n):
            tx[i] = hu[i] * _row_dot(u_ptr, u_idx, u_dat, gx, i)
            ty[i] = hv[i] * _row_dot(v_ptr, v_idx, v_dat, gy, i)


@njit(cache=True, nogil=True, inline="always")
def _middle_row(l_ptr, l_idx, l_dat, c_ptr, c_idx, c_dat, y, gx, gy, tx, ty, c, out, n, i):
    # (the row's columns are sorted: u's, then v's, then the pressure's, which are not read)
    d1 = 0.0
    d2 = 0.0
    k = _U(c_ptr[i])
    end = _U(c_ptr[i + 1])
    while k < end and c_idx[k] < n:
        j = _U(c_idx[k])
        d1 += c_dat[k] * gx[j]
        d2 += c_dat[k] * tx[j]
        k += _U(1)
    while k < end and c_idx[k] < 2 * n:
        j = _U(c_idx[k] - n)
        d1 += c_dat[k] * gy[j]
        d2 += c_dat[k] * ty[j]
        k += _U(1)
    out[i] = c[i] * (_row_dot(l_ptr, l_idx, l_dat, y, i) + d1) - d2


@njit(cache=True, nogil=True, parallel=True)
def _middle_step(l_ptr, l_idx, l_dat, c_ptr, c_idx, c_dat, y, gx, gy, tx, ty, c, out, n, par):
    """out = c (Lq y + D [gx; gy]) - D [tx; ty], D the velocity columns (< 2n) of the rows (c_ptr, ...),
    whose column indices are sorted."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            _middle_row(l_ptr, l_idx, l_dat, c_ptr, c_idx, c_dat, y, gx, gy, tx, ty, c, out, n, i)
    else:
        for i in range(n):
            _middle_row(l_ptr, l_idx, l_dat, c_ptr, c_idx, c_dat, y, gx, gy, tx, ty, c, out, n, i)


def commutator_middle(g_ptr, g_idx, g_dat, g_cind, g_shift, u_ptr, u_idx, u_dat, v_ptr, v_idx, v_dat, l_ptr, l_idx,
                      l_dat, c_ptr, c_idx, c_dat, y, hu, hv, c, out, work, par):
    """out = c (Lq y + D H G y) - D H A H G y, the middle factor of the least-squares commutator
    (``block_preconditioner.LeastSquaresCommutator.schur_inverse``): G (2n x n, rows [x; y]; ``_g_row_dot``), A_u, A_v,
    Lq and the continuity rows (n x 3n; their velocity columns are D) as CSR arrays, H = diag(hu, hv).
    Each product is summed from 0 in its row's order, as scipy's CSR product sums it, and D's two
    products separately: the bits of the products taken one by one. ``work``: (4, n) scratch."""
    n = y.shape[0]
    gx, gy, tx, ty = work[0], work[1], work[2], work[3]
    _gradient_step(g_ptr, g_idx, g_dat, g_cind, g_shift, y, hu, hv, gx, gy, n, par)
    _momentum_step(u_ptr, u_idx, u_dat, v_ptr, v_idx, v_dat, gx, gy, hu, hv, tx, ty, n, par)
    _middle_step(l_ptr, l_idx, l_dat, c_ptr, c_idx, c_dat, y, gx, gy, tx, ty, c, out, n, par)


@njit(cache=True, nogil=True, parallel=True)
def scaled_product(ptr, idx, dat, x, d, out, par):
    """out = d * (A x) (A in CSR; each row summed from 0 in its order, as scipy's product sums it)."""
    n = out.shape[0]
    if par and n >= PAR_MIN:
        for i in prange(n):
            out[i] = _row_dot(ptr, idx, dat, x, i) * d[i]
    else:
        for i in range(n):
            out[i] = _row_dot(ptr, idx, dat, x, i) * d[i]


@njit(cache=True, nogil=True, parallel=True)
def minus_product(g_ptr, g_idx, g_dat, g_cind, g_shift, x, r, out, par):
    """out = r - G x (G's 2n rows as ``_g_row_dot`` reads them; each row of G x summed from 0 in its
    order, as scipy's product sums it)."""
    m = out.shape[0]
    n = m // 2
    if par and m >= PAR_MIN:
        for i in prange(m):
            out[i] = r[i] - _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, x, i, n)
    else:
        for i in range(m):
            out[i] = r[i] - _g_row_dot(g_ptr, g_idx, g_dat, g_cind, g_shift, x, i, n)
