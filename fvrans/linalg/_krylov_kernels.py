"""Numba kernels of flexible GMRES (``fvrans.linalg.fgmres``): the Gram-Schmidt step and the
update of the solution, as plain loops (no BLAS calls: BLAS threads stall against numba's
threads and other processes on a shared machine; a 49k-vector dot product took ~5 ms there)."""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def norm2(x):
    """The Euclidean norm of x."""
    acc = 0.0
    for j in range(x.shape[0]):
        acc += x[j] * x[j]
    return np.sqrt(acc)


@njit(cache=True)
def orthogonalise(V, k, w, h):
    """Classical Gram-Schmidt, twice: w <- w - sum_{i<=k} (V_i . w) V_i, the coefficients added to
    h[0..k]; then h[k+1] = ||w|| and, when nonzero, V_{k+1} = w / ||w||."""
    n = w.shape[0]
    c = np.empty(k + 1)
    for _ in range(2):
        for i in range(k + 1):
            acc = 0.0
            for j in range(n):
                acc += V[i, j] * w[j]
            c[i] = acc
            h[i] += acc
        for j in range(n):
            acc = w[j]
            for i in range(k + 1):
                acc -= c[i] * V[i, j]
            w[j] = acc
    nrm = norm2(w)
    h[k + 1] = nrm
    if nrm > 0.0:
        inv = 1.0 / nrm
        for j in range(n):
            V[k + 1, j] = w[j] * inv


@njit(cache=True)
def add_combination(Z, y, x):
    """x += sum_i y_i Z_i (i < y.size)."""
    m = y.shape[0]
    for j in range(x.shape[0]):
        acc = x[j]
        for i in range(m):
            acc += y[i] * Z[i, j]
        x[j] = acc
