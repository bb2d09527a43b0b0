"""numba kernels of the algebraic-multigrid V-cycle and the preconditioned Krylov methods.

The hierarchy is flattened: level ``l`` has ``n[l]`` unknowns stored at ``voff[l]`` in every
level-stacked vector; its operator and prolongation P are CSR blocks whose row pointers start at
``*_pofs[l]`` in the stacked pointer arrays and hold absolute positions in the stacked index/data
arrays (column indices are local to the level). The restriction is P^T, applied from P's rows
(``_restrict``; not stored). The coarsest level is solved
with a dense (pseudo-)inverse ``cinv`` (n_coarse x n_coarse, row-major).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN

#: sums over PAR_MIN terms or more are formed as this many partial sums over consecutive chunks,
#: added in order: the same bits whatever the number of threads
SUM_CHUNKS = 16
#: the CSR loops index with unsigned integers (``_U(k)``): numba checks every signed index for a
#: negative value to wrap around, and those checks made the loops 1.4-2.8x slower (residual of a
#: 65k-row 5-point matrix 0.49 -> 0.18 ms, a Gauss-Seidel sweep 0.54 -> 0.38 ms); the sums and
#: their order are unchanged, so are the bits
_U = np.uint64


@njit(cache=True, nogil=True, inline="always")
def _smooth_rows(ptr, po, idx, dat, dinv, x, b, vo, lo, hi, forward):
    """Gauss-Seidel over the level rows [lo, hi), forward or backward: each row uses the latest
    values of every unknown."""
    for ii in range(hi - lo):
        i = lo + ii if forward else hi - 1 - ii
        acc = b[_U(vo + i)]
        for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
            acc -= dat[k] * x[_U(vo + idx[k])]
        x[_U(vo + i)] += acc * dinv[_U(vo + i)]


@njit(cache=True, nogil=True, inline="always")
def _smooth_rows_from_zero(ptr, po, idx, dat, dinv, x, b, vo, lo, hi):
    """The forward Gauss-Seidel sweep over the level rows [lo, hi) when x was zero there before it:
    the row's entries in columns i..hi-1 multiply zeros still (rows not yet swept), so they are
    skipped; x is the same as the full sweep's (a skipped term subtracts a zero)."""
    for i in range(lo, hi):
        acc = b[_U(vo + i)]
        k = _U(ptr[po + i])
        end = _U(ptr[po + i + 1])
        # (the row's columns are sorted: those below i, then i..hi-1, then those from hi)
        while k < end and idx[k] < i:
            acc -= dat[k] * x[_U(vo + idx[k])]
            k += _U(1)
        while k < end and idx[k] < hi:
            k += _U(1)
        while k < end:
            acc -= dat[k] * x[_U(vo + idx[k])]
            k += _U(1)
        x[_U(vo + i)] += acc * dinv[_U(vo + i)]


@njit(cache=True, nogil=True, inline="always")
def _smooth_block(ptr, po, idx, dat, dinv, x, b, vo, n, nb, blk, forward, zero):
    """The sweep of block ``blk`` of ``_smooth`` (rows blk n / nb to (blk + 1) n / nb): from zero when
    ``zero`` and ``forward`` (``_smooth_rows_from_zero``), else ``_smooth_rows``."""
    lo, hi = blk * n // nb, (blk + 1) * n // nb
    if zero and forward:
        _smooth_rows_from_zero(ptr, po, idx, dat, dinv, x, b, vo, lo, hi)
    else:
        _smooth_rows(ptr, po, idx, dat, dinv, x, b, vo, lo, hi, forward)


@njit(cache=True, nogil=True, parallel=True)
def _smooth(ptr, po, idx, dat, dinv, x, b, vo, n, colour_ptr, order, forward, par, zero):
    """One Gauss-Seidel sweep on the level rows [vo, vo + n), forward or backward, block by block.

    The rows are cut into ``nb`` blocks of consecutive rows (block k: rows k n / nb to
    (k + 1) n / nb); the blocks are coloured so that no row of a block couples to a row of another
    block of its colour (``amg.block_colours``). ``colour_ptr[0]`` = number of colours C; the blocks of
    colour c are ``order[colour_ptr[1 + c] : colour_ptr[2 + c]]``, nb = ``colour_ptr[1 + C]``. The
    forward sweep takes the colours in turn and the blocks of one colour at once (on every thread
    when ``par``), each block forward; the backward sweep is the exact reverse. Blocks of one colour
    share no coupling, so this is Gauss-Seidel in one fixed row order, whatever the thread count;
    one block is the plain lexicographic sweep. ``zero`` (forward only): x is zero on the level
    before the sweep (``_smooth_rows_from_zero``: the same x, fewer terms).
    """
    ncol = colour_ptr[0]
    nb = colour_ptr[1 + ncol]
    for cc in range(ncol):
        c = cc if forward else ncol - 1 - cc
        first = colour_ptr[1 + c]
        count = colour_ptr[2 + c] - first
        if par and count > 1:
            for q in prange(count):
                _smooth_block(ptr, po, idx, dat, dinv, x, b, vo, n, nb, order[first + q], forward, zero)
        else:
            for q in range(count):
                _smooth_block(ptr, po, idx, dat, dinv, x, b, vo, n, nb, order[first + q], forward, zero)


@njit(cache=True, nogil=True, parallel=True)
def _fill(x, vo, n, value, par):
    """x[vo:vo+n] = value."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            x[vo + i] = value
    else:
        for i in range(n):
            x[vo + i] = value


@njit(cache=True, nogil=True, parallel=True)
def _residual(ptr, po, idx, dat, x, xo, b, bo, r, ro, n, par):
    """r[ro + i] = b[bo + i] - sum_k dat[k] x[xo + idx[k]] over the rows of the block at ``po``."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            acc = b[_U(bo + i)]
            for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
                acc -= dat[k] * x[_U(xo + idx[k])]
            r[_U(ro + i)] = acc
    else:
        for i in range(n):
            acc = b[_U(bo + i)]
            for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
                acc -= dat[k] * x[_U(xo + idx[k])]
            r[_U(ro + i)] = acc


@njit(cache=True, nogil=True, parallel=True)
def _apply_add(ptr, po, idx, dat, x, xo, y, yo, n, add, par):
    """y[yo + i] (+)= sum_k dat[k] x[xo + idx[k]] (prolongation, matrix products)."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            acc = 0.0
            for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
                acc += dat[k] * x[_U(xo + idx[k])]
            y[_U(yo + i)] = y[_U(yo + i)] + acc if add else acc
    else:
        for i in range(n):
            acc = 0.0
            for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
                acc += dat[k] * x[_U(xo + idx[k])]
            y[_U(yo + i)] = y[_U(yo + i)] + acc if add else acc


@njit(cache=True, nogil=True, inline="always")
def _restrict_rows(ptr, po, idx, dat, x, xo, y, yo, lo, hi, c0, c1):
    """y[yo + j] += P[i, j] x[xo + i] over the fine rows i in [lo, hi), for the coarse columns j in
    [c0, c1) only, in increasing i."""
    for i in range(lo, hi):
        xi = x[_U(xo + i)]
        for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
            j = idx[k]
            if j >= c0 and j < c1:
                y[_U(yo + j)] += dat[k] * xi


@njit(cache=True, nogil=True, parallel=True)
def _restrict(ptr, po, idx, dat, x, xo, nf, y, yo, nc, rows, par):
    """y[yo + j] = sum_i P[i, j] x[xo + i] (the restriction R = P^T applied from P's rows: R is not
    stored). Each coarse entry is summed from 0 in increasing fine row i, as the rows of the sorted
    CSR matrix P^T would sum it: the same bits. ``rows`` (SUM_CHUNKS x 2): the fine rows [lo, hi)
    that reach each of the ``SUM_CHUNKS`` chunks of coarse rows (``_chunk``), or rows[0, 0] < 0; with
    ``par`` and chunks the chunks are summed on every thread, each over its fine rows only."""
    if par and nc >= PAR_MIN and rows[0, 0] >= 0:
        for c in prange(SUM_CHUNKS):
            c0, c1 = _chunk(c, nc)
            for j in range(c0, c1):
                y[yo + j] = 0.0
            _restrict_rows(ptr, po, idx, dat, x, xo, y, yo, rows[c, 0], rows[c, 1], c0, c1)
    else:
        for j in range(nc):
            y[yo + j] = 0.0
        for i in range(nf):
            xi = x[_U(xo + i)]
            for k in range(_U(ptr[po + i]), _U(ptr[po + i + 1])):
                y[_U(yo + idx[k])] += dat[k] * xi


@njit(cache=True)
def restriction_rows(ptr, idx, nf, nc, rows):
    """rows[c] = the fine rows [lo, hi) of the CSR prolongation P (nf x nc) with an entry in the
    coarse columns of chunk c (``_chunk``); an empty chunk gets [0, 0). Returns the sum of the
    ranges' lengths (the fine rows the chunked restriction scans)."""
    for c in range(SUM_CHUNKS):
        rows[c, 0] = nf
        rows[c, 1] = 0
    for i in range(nf):
        for k in range(ptr[i], ptr[i + 1]):
            j = idx[k]
            c = j * SUM_CHUNKS // nc
            while c > 0 and j < _chunk(c, nc)[0]:
                c -= 1
            while c < SUM_CHUNKS - 1 and j >= _chunk(c, nc)[1]:
                c += 1
            if i < rows[c, 0]:
                rows[c, 0] = i
            if i + 1 > rows[c, 1]:
                rows[c, 1] = i + 1
    total = 0
    for c in range(SUM_CHUNKS):
        if rows[c, 1] <= rows[c, 0]:
            rows[c, 0] = 0
            rows[c, 1] = 0
        total += rows[c, 1] - rows[c, 0]
    return total


@njit(cache=True, nogil=True)
def vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
           t_rows, cinv, sweeps, s_ptr, s_order, x, b, r, par):
    """x = M^-1 b on level 0 (x, b level-stacked; b[:n0] holds the input, x[:n0] the output; r, of
    n0 values or more, holds each level's residual in turn).

    V(sweeps, sweeps) cycle: forward Gauss-Seidel before, backward (the exact reverse order)
    after the coarse-grid correction, so the cycle is a symmetric operator for a symmetric matrix
    (usable in CG). ``s_ptr[l]`` / ``s_order[l]``: the coloured blocks of level l's sweep
    (``_smooth``). ``t_rows[l]``: the fine rows reaching each chunk of level l + 1's rows
    (``restriction_rows``), or ``t_rows[l, 0, 0]`` < 0. ``par``: the sweeps, residuals, restriction
    (by chunks) and prolongation of the large levels on every thread; every row is computed as on
    one thread, so the cycle gives the same bits whatever the thread count.
    """
    # flags and offsets read from arrays, not written as constants: a literal argument (True, 0)
    # makes numba compile one more version of the helper it is passed to
    yes = n[0] >= 0
    zero = voff[0]
    no = n[0] < 0
    for lv in range(nlev - 1):
        vo = voff[lv]
        m = n[lv]
        _fill(x, vo, m, 0.0, par)
        for sw in range(sweeps):
            _smooth(a_ptr, a_pofs[lv], a_idx, a_dat, dinv, x, b, vo, m, s_ptr[lv], s_order[lv], yes, par, sw == 0)
        # (the residual is restricted at once: one level's at a time in r)
        _residual(a_ptr, a_pofs[lv], a_idx, a_dat, x, vo, b, vo, r, zero, m, par)
        _restrict(p_ptr, p_pofs[lv], p_idx, p_dat, r, zero, m, b, voff[lv + 1], n[lv + 1], t_rows[lv], par)
    # coarsest level
    lc = nlev - 1
    vc = voff[lc]
    mc = n[lc]
    for i in range(mc):
        acc = 0.0
        for j in range(mc):
            acc += cinv[i * mc + j] * b[vc + j]
        x[vc + i] = acc
    for lv in range(nlev - 2, -1, -1):
        vo = voff[lv]
        _apply_add(p_ptr, p_pofs[lv], p_idx, p_dat, x, voff[lv + 1], x, vo, n[lv], yes, par)
        for _ in range(sweeps):
            _smooth(a_ptr, a_pofs[lv], a_idx, a_dat, dinv, x, b, vo, n[lv], s_ptr[lv], s_order[lv], no, par, no)


@njit(cache=True, nogil=True, inline="always")
def _chunk(c, n):
    """Rows [lo, hi) of chunk c of the ``SUM_CHUNKS`` chunks of a sum over n terms."""
    return c * n // SUM_CHUNKS, (c + 1) * n // SUM_CHUNKS


@njit(cache=True, nogil=True, inline="always")
def _add_parts(part):
    s = 0.0
    for c in range(SUM_CHUNKS):
        s += part[c]
    return s


@njit(cache=True, nogil=True, inline="always")
def _matvec_rows(ptr, idx, dat, x, out, lo, hi):
    s = 0.0
    for i in range(lo, hi):
        acc = 0.0
        for k in range(_U(ptr[i]), _U(ptr[i + 1])):
            acc += dat[k] * x[_U(idx[k])]
        out[i] = acc
        s += x[i] * acc
    return s


@njit(cache=True, nogil=True, parallel=True)
def _matvec_dot(ptr, idx, dat, x, out, n, par):
    """out = A x on level 0 (ptr[0:n+1] are level-0 row pointers); returns x . out (summed as
    ``_dot`` does)."""
    if n < PAR_MIN:
        return _matvec_rows(ptr, idx, dat, x, out, 0, n)
    part = np.empty(SUM_CHUNKS)
    if par:
        for c in prange(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _matvec_rows(ptr, idx, dat, x, out, lo, hi)
    else:
        for c in range(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _matvec_rows(ptr, idx, dat, x, out, lo, hi)
    return _add_parts(part)


@njit(cache=True, nogil=True, inline="always")
def _dot_rows(a, b, lo, hi):
    s = 0.0
    for i in range(lo, hi):
        s += a[i] * b[i]
    return s


@njit(cache=True, nogil=True, parallel=True)
def _dot(a, b, n, par):
    """a[:n] . b[:n]: in order below ``PAR_MIN`` terms, else as the sum of ``SUM_CHUNKS`` partial
    sums in order (the chunks on every thread when ``par``): the same bits on any thread count."""
    if n < PAR_MIN:
        return _dot_rows(a, b, 0, n)
    part = np.empty(SUM_CHUNKS)
    if par:
        for c in prange(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _dot_rows(a, b, lo, hi)
    else:
        for c in range(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _dot_rows(a, b, lo, hi)
    return _add_parts(part)


@njit(cache=True, nogil=True, parallel=True)
def _axpy(y, a, x, n, par):
    """y += a x."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            y[i] += a * x[i]
    else:
        for i in range(n):
            y[i] += a * x[i]


@njit(cache=True, nogil=True, inline="always")
def _axpy_norm2_rows(y, a, x, lo, hi):
    s = 0.0
    for i in range(lo, hi):
        y[i] += a * x[i]
        s += y[i] * y[i]
    return s


@njit(cache=True, nogil=True, parallel=True)
def _axpy_norm2(y, a, x, n, par):
    """y += a x; returns y . y (summed as ``_dot`` does)."""
    if n < PAR_MIN:
        return _axpy_norm2_rows(y, a, x, 0, n)
    part = np.empty(SUM_CHUNKS)
    if par:
        for c in prange(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _axpy_norm2_rows(y, a, x, lo, hi)
    else:
        for c in range(SUM_CHUNKS):
            lo, hi = _chunk(c, n)
            part[c] = _axpy_norm2_rows(y, a, x, lo, hi)
    return _add_parts(part)


@njit(cache=True, nogil=True, parallel=True)
def _xpby(y, x, beta, n, par):
    """y = x + beta y."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            y[i] = x[i] + beta * y[i]
    else:
        for i in range(n):
            y[i] = x[i] + beta * y[i]


@njit(cache=True, nogil=True, parallel=True)
def _copy(dst, src, n, par):
    """dst[:n] = src[:n]."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            dst[i] = src[i]
    else:
        for i in range(n):
            dst[i] = src[i]


@njit(cache=True, nogil=True, parallel=True)
def _axpy2(y, a, x, b, z, n, par):
    """y += a x + b z."""
    if par and n >= PAR_MIN:
        for i in prange(n):
            y[i] += a * x[i] + b * z[i]
    else:
        for i in range(n):
            y[i] += a * x[i] + b * z[i]


@njit(cache=True, nogil=True, inline="always")
def _sum_rows(a, lo, hi):
    s = 0.0
    for i in range(lo, hi):
        s += a[i]
    return s


@njit(cache=True, nogil=True, parallel=True)
def _remove_mean(a, n, par):
    """a[:n] -= mean(a[:n]) (the sum as ``_dot`` forms it)."""
    if n < PAR_MIN:
        s = _sum_rows(a, 0, n)
    else:
        part = np.empty(SUM_CHUNKS)
        if par:
            for c in prange(SUM_CHUNKS):
                lo, hi = _chunk(c, n)
                part[c] = _sum_rows(a, lo, hi)
        else:
            for c in range(SUM_CHUNKS):
                lo, hi = _chunk(c, n)
                part[c] = _sum_rows(a, lo, hi)
        s = _add_parts(part)
    s /= n
    if par and n >= PAR_MIN:
        for i in prange(n):
            a[i] -= s
    else:
        for i in range(n):
            a[i] -= s


@njit(cache=True, nogil=True)
def pcg(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
        t_rows, cinv, sweeps, s_ptr, s_order, rhs, sol, rtol, maxiter, singular, xs, bs, rs, w,
        par):
    """Conjugate gradients preconditioned by one V-cycle (Saad 2003, Iterative Methods for Sparse
    Linear Systems, alg. 9.1) on A sol = rhs until ||r||_2 <= rtol ||rhs||_2.

    ``singular``: A has the constant null vector; rhs and iterates are kept mean-free.
    ``w`` is (3, n0) work. ``par``: the vector operations, products and the parallel parts of the
    cycle on every thread (sums in fixed chunks: the same bits on any thread count).
    Returns (iterations, final relative residual).
    """
    n0 = n[0]
    zero = voff[0]  # not a literal 0 (see vcycle)
    res = w[0]
    pdir = w[1]
    q = w[2]
    if singular:
        _remove_mean(rhs, n0, par)
    bnorm = np.sqrt(_dot(rhs, rhs, n0, par))
    if bnorm == 0.0:
        _fill(sol, zero, n0, 0.0, par)
        return 0, 0.0
    _residual(a_ptr, zero, a_idx, a_dat, sol, zero, rhs, zero, res, zero, n0, par)
    rnorm = np.sqrt(_dot(res, res, n0, par))
    if rnorm <= rtol * bnorm:
        return 0, rnorm / bnorm
    rz_old = 0.0
    it = 0
    while it < maxiter:
        _copy(bs, res, n0, par)
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               t_rows, cinv, sweeps, s_ptr, s_order, xs, bs, rs, par)
        if singular:
            _remove_mean(xs, n0, par)
        rz = _dot(res, xs, n0, par)
        if it == 0:
            _copy(pdir, xs, n0, par)
        else:
            _xpby(pdir, xs, rz / rz_old, n0, par)
        rz_old = rz
        pq = _matvec_dot(a_ptr, a_idx, a_dat, pdir, q, n0, par)
        if pq == 0.0 or not np.isfinite(pq):
            break
        alpha = rz / pq
        _axpy(sol, alpha, pdir, n0, par)
        rnorm = np.sqrt(_axpy_norm2(res, -alpha, q, n0, par))
        it += 1
        if rnorm <= rtol * bnorm:
            break
    if singular:
        _remove_mean(sol, n0, par)
    return it, rnorm / bnorm


@njit(cache=True, nogil=True)
def bicgstab(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
             t_rows, cinv, sweeps, s_ptr, s_order, rhs, sol, rtol, maxiter, xs, bs, rs, w, par):
    """Right-preconditioned BiCGStab (van der Vorst 1992, SIAM J. Sci. Stat. Comput. 13, 631-644)
    with one V-cycle as preconditioner, until ||b - A x||_2 <= rtol ||b - A x0||_2.

    ``w`` is (7, n0) work; ``par`` as in ``pcg``. Returns (iterations, final residual relative to
    the initial one).
    """
    n0 = n[0]
    zero = voff[0]  # not a literal 0 or False (see vcycle)
    no = n0 < 0
    res = w[0]
    rhat = w[1]
    pdir = w[2]
    v = w[3]
    phat = w[4]
    shat = w[5]
    t = w[6]
    _residual(a_ptr, zero, a_idx, a_dat, sol, zero, rhs, zero, res, zero, n0, par)
    _copy(rhat, res, n0, par)
    _fill(pdir, zero, n0, 0.0, par)
    _fill(v, zero, n0, 0.0, par)
    r0 = np.sqrt(_dot(res, res, n0, par))
    if r0 == 0.0:
        return 0, 0.0
    rho_old = 1.0
    alpha = 1.0
    omega = 1.0
    it = 0
    rnorm = r0
    while it < maxiter:
        rho = _dot(rhat, res, n0, par)
        if rho == 0.0 or omega == 0.0:
            break
        beta = (rho / rho_old) * (alpha / omega)
        # p = r + beta (p - omega v)
        _axpy(pdir, -omega, v, n0, par)
        _xpby(pdir, res, beta, n0, par)
        _copy(bs, pdir, n0, par)
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               t_rows, cinv, sweeps, s_ptr, s_order, xs, bs, rs, par)
        _copy(phat, xs, n0, par)
        _apply_add(a_ptr, zero, a_idx, a_dat, phat, zero, v, zero, n0, no, par)
        rv = _dot(rhat, v, n0, par)
        if rv == 0.0 or not np.isfinite(rv):
            break
        alpha = rho / rv
        snorm = np.sqrt(_axpy_norm2(res, -alpha, v, n0, par))  # res now holds s
        it += 1
        if snorm <= rtol * r0:
            _axpy(sol, alpha, phat, n0, par)
            rnorm = snorm
            break
        _copy(bs, res, n0, par)
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               t_rows, cinv, sweeps, s_ptr, s_order, xs, bs, rs, par)
        _copy(shat, xs, n0, par)
        _apply_add(a_ptr, zero, a_idx, a_dat, shat, zero, t, zero, n0, no, par)
        tt = _dot(t, t, n0, par)
        omega = _dot(t, res, n0, par) / tt if tt > 0.0 else 0.0
        _axpy2(sol, alpha, phat, omega, shat, n0, par)
        rho_old = rho
        rnorm = np.sqrt(_axpy_norm2(res, -omega, t, n0, par))
        if rnorm <= rtol * r0 or not np.isfinite(rnorm):
            break
    return it, rnorm / r0


@njit(cache=True, nogil=True)
def level_inverse_diagonal(a_ptr, po, a_idx, a_dat, m, dinv, vo):
    """dinv[vo + i] = 1 / A[i, i] (0 where the diagonal is zero) for the m rows of the level whose
    pointers start at ``po`` in a_ptr (the diagonal summed in double precision)."""
    for i in range(m):
        d = 0.0
        for k in range(_U(a_ptr[po + i]), _U(a_ptr[po + i + 1])):
            if a_idx[k] == i:
                d += a_dat[k]
        dinv[vo + i] = 1.0 / d if d != 0.0 else 0.0


@njit(cache=True, nogil=True)
def refresh_fine(src, a_dat, a_ptr, a_idx, n0, dinv):
    """Copy the current fine matrix values into level 0 and recompute its inverse diagonal."""
    for k in range(src.shape[0]):
        a_dat[k] = src[k]
    level_inverse_diagonal(a_ptr, 0, a_idx, a_dat, n0, dinv, 0)


@njit(cache=True, nogil=True)
def block_colouring(indptr, indices, n, nb, colour_ptr, order):
    """Greedy colouring of the ``nb`` blocks of consecutive rows of the n x n CSR pattern (block k: rows
    k n / nb to (k + 1) n / nb), in block order: each block takes the smallest colour none of the blocks
    it is joined to by a nonzero, in either direction, has taken. Fills ``colour_ptr`` (the number of
    colours C, then where each colour's blocks start in ``order``, then nb) and ``order`` (the blocks by
    colour, in block order within a colour); returns C (``amg.block_colours``)."""
    adj = np.zeros((nb, nb), dtype=np.bool_)
    blk = 0
    for i in range(n):
        while (blk + 1) * n // nb <= i:
            blk += 1
        for k in range(indptr[i], indptr[i + 1]):
            j = indices[k]
            # the block of row j: the b with b n / nb <= j < (b + 1) n / nb
            b = j * nb // n
            while b > 0 and b * n // nb > j:
                b -= 1
            while (b + 1) * n // nb <= j:
                b += 1
            adj[blk, b] = True
            adj[b, blk] = True
    colour = np.full(nb, -1, dtype=np.int64)
    taken = np.zeros(nb + 1, dtype=np.bool_)
    ncol = 0
    for k in range(nb):
        taken[:] = False
        for q in range(nb):
            if q != k and adj[k, q] and colour[q] >= 0:
                taken[colour[q]] = True
        c = 0
        while taken[c]:
            c += 1
        colour[k] = c
        ncol = max(ncol, c + 1)
    colour_ptr[0] = ncol
    pos = 0
    for c in range(ncol):
        colour_ptr[1 + c] = pos
        for k in range(nb):
            if colour[k] == c:
                order[pos] = k
                pos += 1
    colour_ptr[1 + ncol] = nb
    return ncol


@njit(cache=True)
def dense_inverse(a, out, singular):
    """out = generalised inverse of the square matrix ``a`` (overwritten) by Gauss-Jordan
    elimination without pivoting: the coarsest-level solver of the cycle.

    For the matrices met here (symmetric positive (semi-)definite, or diagonally dominant) no
    pivoting is needed. ``singular``: ``a`` has the constant vector as its null space (pressure
    correction without a fixed-pressure boundary; the Galerkin operators of such a matrix keep
    it); ``out`` is then the inverse of a + s 1 1^T (s the mean diagonal), a symmetric generalised
    inverse (a out a = a). No pivot is judged by its size relative to the diagonal otherwise: in
    cells of aspect ratio R the weak coupling, and so the smallest pivot, is ~R^-2 of the diagonal
    (8e-13 in a channel of 25 x 8 cells of aspect ratio 3e6), and dropping it pinned p' there (no
    flow through the channel). Only a pivot below 2e-15 of its diagonal, which double precision
    cannot tell from zero (aspect ratios above ~3e7), marks a null direction: that unknown is
    pinned to zero (``out`` is then the inverse of the remaining principal submatrix padded with
    zeros). Returns the number of null directions (1 for ``singular``).
    """
    m = a.shape[0]
    n_dropped = 0
    if singular and m > 0:
        s = 0.0
        for i in range(m):
            s += abs(a[i, i])
        s /= m
        for i in range(m):
            for j in range(m):
                a[i, j] += s
        n_dropped = 1
    scale = np.empty(m)
    for i in range(m):
        scale[i] = abs(a[i, i])
    for i in range(m):
        for j in range(m):
            out[i, j] = 1.0 if i == j else 0.0
    dropped = np.zeros(m, dtype=np.bool_)
    for k in range(m):
        piv = a[k, k]
        if abs(piv) <= 2e-15 * scale[k] or scale[k] == 0.0:
            dropped[k] = True
            n_dropped += 1
            continue
        inv = 1.0 / piv
        for j in range(m):
            a[k, j] *= inv
            out[k, j] *= inv
        # (a's columns up to k are not read again, and out's row k is zero beyond column k: the
        # loops skip them, the same values at half the work)
        for i in range(m):
            if i != k:
                fac = a[i, k]
                if fac != 0.0:
                    for j in range(k + 1, m):
                        a[i, j] -= fac * a[k, j]
                    for j in range(k + 1):
                        out[i, j] -= fac * out[k, j]
    for k in range(m):
        if dropped[k]:
            for j in range(m):
                out[k, j] = 0.0
                out[j, k] = 0.0
    return n_dropped
