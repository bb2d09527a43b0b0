"""Numba kernels of flexible GMRES (``fvrans.linalg.fgmres``): the Gram-Schmidt step and the update
of the solution, as plain loops (no BLAS calls: BLAS threads stall
against numba's threads and other processes on a shared machine; a 49k-vector dot product took ~5 ms
there).

Threads: with ``par`` and at least ``PARALLEL_MIN_CELLS`` unknowns, the loops run on every thread.
Every sum over the unknowns is then formed as ``SUM_CHUNKS`` partial sums over consecutive chunks,
added in order (also on one thread, so the bits do not depend on the thread count); products and
updates are row by row (by blocks of rows). Below that size the sums run in order, as before. (The products with the
system's matrix are ``_block_kernels.scaled_product``.)
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN
from fvrans.linalg._amg_kernels import SUM_CHUNKS

_U = np.uint64
#: rows per block of the Gram-Schmidt subtraction (``_subtract_block``): a block of w (4 KB) stays in
#: the first-level cache while the k + 1 basis vectors are subtracted from it
BLOCK_ROWS = 512


@njit(cache=True, parallel=True)
def norm2(x, par):
    """The Euclidean norm of x."""
    n = x.shape[0]
    if n < PAR_MIN:
        acc = 0.0
        for j in range(n):
            acc += x[j] * x[j]
        return np.sqrt(acc)
    part = np.zeros(SUM_CHUNKS)
    if par:
        for c in prange(SUM_CHUNKS):
            s = 0.0
            for j in range(c * n // SUM_CHUNKS, (c + 1) * n // SUM_CHUNKS):
                s += x[j] * x[j]
            part[c] = s
    else:
        for c in range(SUM_CHUNKS):
            s = 0.0
            for j in range(c * n // SUM_CHUNKS, (c + 1) * n // SUM_CHUNKS):
                s += x[j] * x[j]
            part[c] = s
    acc = 0.0
    for c in range(SUM_CHUNKS):
        acc += part[c]
    return np.sqrt(acc)


@njit(cache=True, nogil=True, inline="always")
def _dots4(V, i0, k, w, lo, hi, out, row, add):
    """out[row, i] = sum_{lo <= j < hi} V[i, j] w[j] (``add``: added to out[row, i], continuing its
    sum) for the four rows i = i0..i0+3 at once, each summed in row order (four independent chains:
    one at a time waits for the latency of each addition); rows past k stand in as row k and are
    not stored."""
    r1 = min(i0 + 1, k)
    r2 = min(i0 + 2, k)
    r3 = min(i0 + 3, k)
    s0 = out[row, i0] if add else 0.0
    s1 = out[row, r1] if add else 0.0
    s2 = out[row, r2] if add else 0.0
    s3 = out[row, r3] if add else 0.0
    for j in range(_U(lo), _U(hi)):
        wj = w[j]
        s0 += V[i0, j] * wj
        s1 += V[r1, j] * wj
        s2 += V[r2, j] * wj
        s3 += V[r3, j] * wj
    out[row, i0] = s0
    if i0 + 1 <= k:
        out[row, r1] = s1
    if i0 + 2 <= k:
        out[row, r2] = s2
    if i0 + 3 <= k:
        out[row, r3] = s3


@njit(cache=True, nogil=True, inline="always")
def _dots_chunk(V, k, w, lo, hi, out, row):
    """out[row, i] = sum_{lo <= j < hi} V[i, j] w[j] for i <= k."""
    for i0 in range(0, k + 1, 4):
        _dots4(V, i0, k, w, lo, hi, out, row, False)


@njit(cache=True, parallel=True)
def _basis_dots(V, k, w, c, par):
    """c[i] = V_i . w for i <= k (chunked sums above ``PAR_MIN`` unknowns)."""
    n = w.shape[0]
    if n < PAR_MIN:
        part = np.zeros((1, k + 1))
        _dots_chunk(V, k, w, 0, n, part, 0)
        for i in range(k + 1):
            c[i] = part[0, i]
        return
    part = np.zeros((SUM_CHUNKS, k + 1))
    if par:
        for q in prange(SUM_CHUNKS):
            _dots_chunk(V, k, w, q * n // SUM_CHUNKS, (q + 1) * n // SUM_CHUNKS, part, q)
    else:
        for q in range(SUM_CHUNKS):
            _dots_chunk(V, k, w, q * n // SUM_CHUNKS, (q + 1) * n // SUM_CHUNKS, part, q)
    for i in range(k + 1):
        s = 0.0
        for q in range(SUM_CHUNKS):
            s += part[q, i]
        c[i] = s


@njit(cache=True, nogil=True, inline="always")
def _subtract_block(V, k, c, w, lo, hi):
    """w[j] -= c_i V[i, j] for i = 0..k in turn, rows [lo, hi): per row the same operations in the
    same order as one chain over i, with the loop over the rows innermost (vector instructions;
    w's rows stay in the first-level cache through the k + 1 passes)."""
    for i in range(k + 1):
        ci = c[i]
        for j in range(_U(lo), _U(hi)):
            w[j] -= ci * V[i, j]


@njit(cache=True, parallel=True)
def _subtract_combination(V, k, c, w, par):
    """w -= sum_{i <= k} c_i V_i (per row in the order of i; by blocks of ``BLOCK_ROWS`` rows)."""
    n = w.shape[0]
    nb = (n + BLOCK_ROWS - 1) // BLOCK_ROWS
    if par and n >= PAR_MIN:
        for b in prange(nb):
            _subtract_block(V, k, c, w, b * BLOCK_ROWS, min((b + 1) * BLOCK_ROWS, n))
    else:
        for b in range(nb):
            _subtract_block(V, k, c, w, b * BLOCK_ROWS, min((b + 1) * BLOCK_ROWS, n))


@njit(cache=True, parallel=True)
def _scaled_copy(w, a, out, par):
    """out = a w."""
    n = w.shape[0]
    if par and n >= PAR_MIN:
        for j in prange(n):
            out[j] = w[j] * a
    else:
        for j in range(n):
            out[j] = w[j] * a


@njit(cache=True, nogil=True, inline="always")
def _subtract_dots_rows(V, k, c, w, lo, hi, part, q):
    """Over rows [lo, hi): w -= sum_{i <= k} c_i V_i, then part[q, i] = V_i . w (i <= k) and
    part[q, k + 1] = w . w of the new w, each summed in row order (block by block of
    ``BLOCK_ROWS`` rows: the block's subtraction, then its terms of the sums, read from cache)."""
    for i in range(k + 2):
        part[q, i] = 0.0
    s = 0.0
    for b0 in range(lo, hi, BLOCK_ROWS):
        b1 = min(b0 + BLOCK_ROWS, hi)
        _subtract_block(V, k, c, w, b0, b1)
        for j in range(_U(b0), _U(b1)):
            s += w[j] * w[j]
        for i0 in range(0, k + 1, 4):
            _dots4(V, i0, k, w, b0, b1, part, q, True)
    part[q, k + 1] = s


@njit(cache=True, parallel=True)
def _subtract_dots(V, k, c, w, part, par):
    """w -= sum_{i <= k} c_i V_i, and the chunks' partial sums of V_i . w and w . w of the new w in
    ``part`` (one row per chunk: ``SUM_CHUNKS`` from ``PAR_MIN`` unknowns, else one)."""
    n = w.shape[0]
    nq = part.shape[0]
    if par and nq > 1:
        for q in prange(nq):
            _subtract_dots_rows(V, k, c, w, q * n // nq, (q + 1) * n // nq, part, q)
    else:
        for q in range(nq):
            _subtract_dots_rows(V, k, c, w, q * n // nq, (q + 1) * n // nq, part, q)


#: a second classical Gram-Schmidt pass is made when the first left less than this part of ||w||
#: (Daniel, Gragg, Kaufman & Stewart 1976, Math. Comp. 30, 772-795, from memory: 1/sqrt(2))
REORTHOGONALISE_BELOW = 0.7071067811865476


@njit(cache=True)
def orthogonalise(V, k, w, h, par):
    """Classical Gram-Schmidt: w <- w - sum_{i<=k} (V_i . w) V_i, the coefficients added to h[0..k],
    repeated once when the pass took ||w|| below ``REORTHOGONALISE_BELOW`` of its value before it
    (cancellation; otherwise the second pass changes w by round-off only and costs as much as the
    first); then h[k+1] = ||w|| and, when nonzero, V_{k+1} = w / ||w||.

    The first pass's subtraction also forms the second pass's products V_i . w and ||w|| (in the
    same chunks and order as ``_basis_dots`` and ``norm2``: the same bits), so the basis is read
    three times when the second pass is made, not four: preconditioned with the block preconditioner
    the new vector is mostly in the basis' span (|w| falls to 0.35-0.45 of its length in the first
    pass, cavity 256^2), so the second pass is the rule."""
    n = w.shape[0]
    nq = SUM_CHUNKS if n >= PAR_MIN else 1
    c = np.empty(k + 1)
    before = norm2(w, par)
    _basis_dots(V, k, w, c, par)
    for i in range(k + 1):
        h[i] += c[i]
    part = np.empty((nq, k + 2))
    _subtract_dots(V, k, c, w, part, par)
    s = 0.0
    for q in range(nq):
        s += part[q, k + 1]
    nrm = np.sqrt(s)
    if nrm < REORTHOGONALISE_BELOW * before:
        for i in range(k + 1):
            s = 0.0
            for q in range(nq):
                s += part[q, i]
            c[i] = s
            h[i] += s
        _subtract_combination(V, k, c, w, par)
        nrm = norm2(w, par)
    h[k + 1] = nrm
    if nrm > 0.0:
        _scaled_copy(w, 1.0 / nrm, V[k + 1], par)


@njit(cache=True, nogil=True, inline="always")
def _add_block(Z, y, x, lo, hi):
    """x[j] += y_i Z[i, j] for i in turn, rows [lo, hi) (the loop over the rows innermost)."""
    for i in range(y.shape[0]):
        yi = y[i]
        for j in range(_U(lo), _U(hi)):
            x[j] += yi * Z[i, j]


@njit(cache=True, parallel=True)
def add_combination(Z, y, x, par):
    """x += sum_i y_i Z_i (i < y.size; per row in the order of i, by blocks of ``BLOCK_ROWS`` rows)."""
    n = x.shape[0]
    nb = (n + BLOCK_ROWS - 1) // BLOCK_ROWS
    if par and n >= PAR_MIN:
        for b in prange(nb):
            _add_block(Z, y, x, b * BLOCK_ROWS, min((b + 1) * BLOCK_ROWS, n))
    else:
        for b in range(nb):
            _add_block(Z, y, x, b * BLOCK_ROWS, min((b + 1) * BLOCK_ROWS, n))
