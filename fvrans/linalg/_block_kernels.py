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
