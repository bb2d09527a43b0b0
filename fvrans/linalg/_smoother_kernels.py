"""numba kernels of the Gauss-Seidel smoother on CSR matrices (momentum and turbulence equations)."""

from __future__ import annotations

from numba import njit


@njit(cache=True)
def csr_residual_l1(indptr, indices, data, x, b):
    """sum_i |b_i - (A x)_i|."""
    n = b.shape[0]
    total = 0.0
    for i in range(n):
        s = b[i]
        for k in range(indptr[i], indptr[i + 1]):
            s -= data[k] * x[indices[k]]
        total += abs(s)
    return total


@njit(cache=True)
def gauss_seidel(indptr, indices, data, diag_pos, b, x, max_sweeps, rtol):
    """Symmetric Gauss-Seidel sweeps on A x = b until the L1 residual falls by ``rtol``.

    Returns (sweeps, initial residual, final residual).
    """
    n = b.shape[0]
    r0 = csr_residual_l1(indptr, indices, data, x, b)
    r = r0
    sweeps = 0
    if r0 == 0.0:
        return 0, r0, r0
    for s in range(max_sweeps):
        for i in range(n):
            acc = b[i]
            for k in range(indptr[i], indptr[i + 1]):
                acc -= data[k] * x[indices[k]]
            x[i] += acc / data[diag_pos[i]]
        for i in range(n - 1, -1, -1):
            acc = b[i]
            for k in range(indptr[i], indptr[i + 1]):
                acc -= data[k] * x[indices[k]]
            x[i] += acc / data[diag_pos[i]]
        sweeps = s + 1
        r = csr_residual_l1(indptr, indices, data, x, b)
        if r <= rtol * r0:
            break
    return sweeps, r0, r
