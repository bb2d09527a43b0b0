"""numba kernels for the fixed-sparsity CSR refill and the residual of a coefficient set."""

from __future__ import annotations

from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN


@njit(cache=True, nogil=True, inline="always")
def _refill_row(c, indptr, cf_ptr, cf_face, diag_pos, owner_pos, neigh_pos, diag, off_owner, off_neighbour, data):
    for k in range(indptr[c], indptr[c + 1]):
        data[k] = 0.0
    data[diag_pos[c]] += diag[c]
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        if f >= 0:
            if f < owner_pos.shape[0]:
                data[owner_pos[f]] += off_owner[f]
        else:
            f = -1 - f
            data[neigh_pos[f]] += off_neighbour[f]


@njit(cache=True, nogil=True, parallel=True)
def csr_refill(indptr, cf_ptr, cf_face, diag_pos, owner_pos, neigh_pos, diag, off_owner, off_neighbour, data):
    """Row by row (rows on every thread for large meshes): data = 0, then add the diagonal and
    the face off-diagonals of the row's cell at their positions, in face order (``Mesh.cell_faces``;
    adding, not assigning, so two faces between the same pair of cells share one entry)."""
    nc = diag_pos.shape[0]
    if nc >= PAR_MIN:
        for c in prange(nc):
            _refill_row(c, indptr, cf_ptr, cf_face, diag_pos, owner_pos, neigh_pos, diag, off_owner, off_neighbour,
                        data)
    else:
        for c in range(nc):
            _refill_row(c, indptr, cf_ptr, cf_face, diag_pos, owner_pos, neigh_pos, diag, off_owner, off_neighbour,
                        data)


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
