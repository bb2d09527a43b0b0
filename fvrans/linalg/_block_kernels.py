"""numba kernels of the block preconditioners (``fvrans.linalg.block_preconditioner``)."""

from __future__ import annotations

from numba import njit


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
