"""numba kernels for the fixed-sparsity CSR refill and the residual of a coefficient set."""

from __future__ import annotations

from numba import njit


@njit(cache=True)
def csr_refill(diag_pos, owner_pos, neigh_pos, diag, off_owner, off_neighbour, data):
    """data[:] = 0, then add diag, owner-row and neighbour-row off-diagonals at their positions
    (adding, not assigning, so two faces between the same pair of cells share one entry)."""
    for k in range(data.shape[0]):
        data[k] = 0.0
    for c in range(diag_pos.shape[0]):
        data[diag_pos[c]] += diag[c]
    for f in range(owner_pos.shape[0]):
        data[owner_pos[f]] += off_owner[f]
        data[neigh_pos[f]] += off_neighbour[f]


@njit(cache=True)
def residual(owner, neighbour, diag, off_owner, off_neighbour, source, phi, out):
    """out = b - A phi for the face-based coefficient set (internal faces only carry off-diagonals)."""
    for c in range(phi.shape[0]):
        out[c] = source[c] - diag[c] * phi[c]
    for f in range(off_owner.shape[0]):
        o = owner[f]
        n = neighbour[f]
        out[o] -= off_owner[f] * phi[n]
        out[n] -= off_neighbour[f] * phi[o]


@njit(cache=True)
def residual_and_terms(indptr, indices, data, b, x):
    """(sum_i |b_i - (A x)_i|, sum_i (sum_j |a_ij x_j| + |b_i|)) of a CSR system."""
    r = 0.0
    m = 0.0
    for i in range(b.shape[0]):
        acc = b[i]
        mag = abs(b[i])
        for k in range(indptr[i], indptr[i + 1]):
            t = data[k] * x[indices[k]]
            acc -= t
            mag += abs(t)
        r += abs(acc)
        m += mag
    return r, m
