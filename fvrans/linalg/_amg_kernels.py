"""numba kernels of the algebraic-multigrid V-cycle and the preconditioned Krylov methods.

The hierarchy is flattened: level ``l`` has ``n[l]`` unknowns stored at ``voff[l]`` in every
level-stacked vector; its operator, prolongation and restriction are CSR blocks whose row
pointers start at ``*_pofs[l]`` in the stacked pointer arrays and hold absolute positions in the
stacked index/data arrays (column indices are local to the level). The coarsest level is solved
with a dense (pseudo-)inverse ``cinv`` (n_coarse x n_coarse, row-major).
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def _smooth(ptr, po, idx, dat, dinv, x, b, vo, n, forward):
    """One Gauss-Seidel sweep on level rows [vo, vo + n), forward or backward."""
    for ii in range(n):
        i = ii if forward else n - 1 - ii
        acc = b[vo + i]
        for k in range(ptr[po + i], ptr[po + i + 1]):
            acc -= dat[k] * x[vo + idx[k]]
        x[vo + i] += acc * dinv[vo + i]


@njit(cache=True)
def vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
           r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, x, b, r):
    """x = M^-1 b on level 0 (x, b, r level-stacked; b[:n0] holds the input, x[:n0] the output).

    V(sweeps, sweeps) cycle: forward Gauss-Seidel before, backward after the coarse-grid
    correction, so the cycle is a symmetric operator for a symmetric matrix (usable in CG).
    """
    for lv in range(nlev - 1):
        vo = voff[lv]
        m = n[lv]
        for i in range(m):
            x[vo + i] = 0.0
        for _ in range(sweeps):
            _smooth(a_ptr, a_pofs[lv], a_idx, a_dat, dinv, x, b, vo, m, True)
        po = a_pofs[lv]
        for i in range(m):
            acc = b[vo + i]
            for k in range(a_ptr[po + i], a_ptr[po + i + 1]):
                acc -= a_dat[k] * x[vo + a_idx[k]]
            r[vo + i] = acc
        vc = voff[lv + 1]
        po = r_pofs[lv]
        for i in range(n[lv + 1]):
            acc = 0.0
            for k in range(r_ptr[po + i], r_ptr[po + i + 1]):
                acc += r_dat[k] * r[vo + r_idx[k]]
            b[vc + i] = acc
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
        vc = voff[lv + 1]
        po = p_pofs[lv]
        for i in range(n[lv]):
            acc = 0.0
            for k in range(p_ptr[po + i], p_ptr[po + i + 1]):
                acc += p_dat[k] * x[vc + p_idx[k]]
            x[vo + i] += acc
        for _ in range(sweeps):
            _smooth(a_ptr, a_pofs[lv], a_idx, a_dat, dinv, x, b, vo, n[lv], False)


@njit(cache=True)
def _matvec(ptr, idx, dat, x, out, n):
    """out = A x on level 0 (ptr[0:n+1] are level-0 row pointers)."""
    for i in range(n):
        acc = 0.0
        for k in range(ptr[i], ptr[i + 1]):
            acc += dat[k] * x[idx[k]]
        out[i] = acc


@njit(cache=True)
def _dot(a, b, n):
    s = 0.0
    for i in range(n):
        s += a[i] * b[i]
    return s


@njit(cache=True)
def _remove_mean(a, n):
    s = 0.0
    for i in range(n):
        s += a[i]
    s /= n
    for i in range(n):
        a[i] -= s


@njit(cache=True)
def pcg(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
        r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, rhs, sol, rtol, maxiter, singular, xs, bs, rs, w):
    """Conjugate gradients preconditioned by one V-cycle (Saad 2003, Iterative Methods for Sparse
    Linear Systems, alg. 9.1) on A sol = rhs until ||r||_2 <= rtol ||rhs||_2.

    ``singular``: A has the constant null vector; rhs and iterates are kept mean-free.
    ``w`` is (3, n0) work. Returns (iterations, final relative residual).
    """
    n0 = n[0]
    res = w[0]
    pdir = w[1]
    q = w[2]
    if singular:
        _remove_mean(rhs, n0)
    bnorm = np.sqrt(_dot(rhs, rhs, n0))
    if bnorm == 0.0:
        for i in range(n0):
            sol[i] = 0.0
        return 0, 0.0
    _matvec(a_ptr, a_idx, a_dat, sol, q, n0)
    for i in range(n0):
        res[i] = rhs[i] - q[i]
    rnorm = np.sqrt(_dot(res, res, n0))
    if rnorm <= rtol * bnorm:
        return 0, rnorm / bnorm
    rz_old = 0.0
    it = 0
    while it < maxiter:
        for i in range(n0):
            bs[i] = res[i]
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, xs, bs, rs)
        if singular:
            _remove_mean(xs, n0)
        rz = _dot(res, xs, n0)
        if it == 0:
            for i in range(n0):
                pdir[i] = xs[i]
        else:
            beta = rz / rz_old
            for i in range(n0):
                pdir[i] = xs[i] + beta * pdir[i]
        rz_old = rz
        _matvec(a_ptr, a_idx, a_dat, pdir, q, n0)
        pq = _dot(pdir, q, n0)
        if pq == 0.0 or not np.isfinite(pq):
            break
        alpha = rz / pq
        for i in range(n0):
            sol[i] += alpha * pdir[i]
            res[i] -= alpha * q[i]
        it += 1
        rnorm = np.sqrt(_dot(res, res, n0))
        if rnorm <= rtol * bnorm:
            break
    if singular:
        _remove_mean(sol, n0)
    return it, rnorm / bnorm


@njit(cache=True)
def bicgstab(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
             r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, rhs, sol, rtol, maxiter, xs, bs, rs, w):
    """Right-preconditioned BiCGStab (van der Vorst 1992, SIAM J. Sci. Stat. Comput. 13, 631-644)
    with one V-cycle as preconditioner, until ||b - A x||_2 <= rtol ||b - A x0||_2.

    ``w`` is (7, n0) work. Returns (iterations, final residual relative to the initial one).
    """
    n0 = n[0]
    res = w[0]
    rhat = w[1]
    pdir = w[2]
    v = w[3]
    phat = w[4]
    shat = w[5]
    t = w[6]
    _matvec(a_ptr, a_idx, a_dat, sol, v, n0)
    for i in range(n0):
        res[i] = rhs[i] - v[i]
        rhat[i] = res[i]
        pdir[i] = 0.0
        v[i] = 0.0
    r0 = np.sqrt(_dot(res, res, n0))
    if r0 == 0.0:
        return 0, 0.0
    rho_old = 1.0
    alpha = 1.0
    omega = 1.0
    it = 0
    rnorm = r0
    while it < maxiter:
        rho = _dot(rhat, res, n0)
        if rho == 0.0 or omega == 0.0:
            break
        beta = (rho / rho_old) * (alpha / omega)
        for i in range(n0):
            pdir[i] = res[i] + beta * (pdir[i] - omega * v[i])
            bs[i] = pdir[i]
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, xs, bs, rs)
        for i in range(n0):
            phat[i] = xs[i]
        _matvec(a_ptr, a_idx, a_dat, phat, v, n0)
        rv = _dot(rhat, v, n0)
        if rv == 0.0 or not np.isfinite(rv):
            break
        alpha = rho / rv
        for i in range(n0):
            res[i] -= alpha * v[i]  # res now holds s
        it += 1
        snorm = np.sqrt(_dot(res, res, n0))
        if snorm <= rtol * r0:
            for i in range(n0):
                sol[i] += alpha * phat[i]
            rnorm = snorm
            break
        for i in range(n0):
            bs[i] = res[i]
        vcycle(nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat,
               r_ptr, r_pofs, r_idx, r_dat, cinv, sweeps, xs, bs, rs)
        for i in range(n0):
            shat[i] = xs[i]
        _matvec(a_ptr, a_idx, a_dat, shat, t, n0)
        tt = _dot(t, t, n0)
        omega = _dot(t, res, n0) / tt if tt > 0.0 else 0.0
        for i in range(n0):
            sol[i] += alpha * phat[i] + omega * shat[i]
            res[i] -= omega * t[i]
        rho_old = rho
        rnorm = np.sqrt(_dot(res, res, n0))
        if rnorm <= rtol * r0 or not np.isfinite(rnorm):
            break
    return it, rnorm / r0


@njit(cache=True)
def refresh_fine(src, a_dat, a_ptr, a_idx, n0, dinv):
    """Copy the current fine matrix values into level 0 and recompute its inverse diagonal."""
    for k in range(src.shape[0]):
        a_dat[k] = src[k]
    for i in range(n0):
        d = 0.0
        for k in range(a_ptr[i], a_ptr[i + 1]):
            if a_idx[k] == i:
                d += a_dat[k]
        dinv[i] = 1.0 / d if d != 0.0 else 0.0


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
        for i in range(m):
            if i != k:
                fac = a[i, k]
                if fac != 0.0:
                    for j in range(m):
                        a[i, j] -= fac * a[k, j]
                        out[i, j] -= fac * out[k, j]
    for k in range(m):
        if dropped[k]:
            for j in range(m):
                out[k, j] = 0.0
                out[j, k] = 0.0
    return n_dropped
