"""Numba kernels of the SIMPLE loop: momentum assembly, Rhie-Chow fluxes, pressure correction.

Arrays and scalars only. Face conventions are those of ``fvrans.mesh.geometry``; boundary kinds
are the integer codes of ``fvrans.physics.boundary``. ``dcoef = |S|^2 / (S . d)`` and
``kvec = S - dcoef d`` are the orthogonal and non-orthogonal parts of the over-relaxed
decomposition of the face area vector (Jasak 1996, PhD thesis, Imperial College, sec. 3.3.1.3).
"""

from __future__ import annotations

import numpy as np
from numba import njit

WALL = 0
INLET = 1
OUTLET = 2
SYMMETRY = 3
FREESTREAM = 4


@njit(cache=True)
def assemble_momentum(
    owner, neigh, n_int, S, dcoef, kvec, w, xf, xc, F, mu_f, u, gu, bkind, bvel, second_order,
    diag_u, diag_v, off_own, off_nei, bu, bv,
):
    """Coefficients of sum_f [F u_f - mu_f (grad u + grad u^T)_f . S_f] = 0 for both components.

    Implicit: first-order upwind convection and orthogonal diffusion. Explicit (deferred):
    linear-upwind correction F (u_f^LUD - u_f^UD), non-orthogonal diffusion mu k . grad u_f and
    the transpose-gradient stress mu (grad u)^T_f . S_f. ``off_own[f]`` multiplies u_N in row P,
    ``off_nei[f]`` multiplies u_P in row N.
    """
    nc = u.shape[0]
    nf = owner.shape[0]
    for c in range(nc):
        diag_u[c] = 0.0
        diag_v[c] = 0.0
        bu[c] = 0.0
        bv[c] = 0.0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        D = mu_f[f] * dcoef[f]
        Ff = F[f]
        fpos = Ff if Ff > 0.0 else 0.0
        fneg = Ff - fpos
        diag_u[P] += D + fpos
        diag_v[P] += D + fpos
        diag_u[N] += D - fneg
        diag_v[N] += D - fneg
        off_own[f] = -D + fneg
        off_nei[f] = -D - fpos
        wf = w[f]
        g00 = wf * gu[P, 0, 0] + (1.0 - wf) * gu[N, 0, 0]
        g01 = wf * gu[P, 0, 1] + (1.0 - wf) * gu[N, 0, 1]
        g10 = wf * gu[P, 1, 0] + (1.0 - wf) * gu[N, 1, 0]
        g11 = wf * gu[P, 1, 1] + (1.0 - wf) * gu[N, 1, 1]
        mu = mu_f[f]
        k0 = kvec[f, 0]
        k1 = kvec[f, 1]
        s0 = S[f, 0]
        s1 = S[f, 1]
        su = mu * (k0 * g00 + k1 * g01 + g00 * s0 + g10 * s1)
        sv = mu * (k0 * g10 + k1 * g11 + g01 * s0 + g11 * s1)
        if second_order:
            U = P if Ff >= 0.0 else N
            r0 = xf[f, 0] - xc[U, 0]
            r1 = xf[f, 1] - xc[U, 1]
            su -= Ff * (gu[U, 0, 0] * r0 + gu[U, 0, 1] * r1)
            sv -= Ff * (gu[U, 1, 0] * r0 + gu[U, 1, 1] * r1)
        bu[P] += su
        bv[P] += sv
        bu[N] -= su
        bv[N] -= sv
    for f in range(n_int, nf):
        b = f - n_int
        P = owner[f]
        kind = bkind[b]
        Ff = F[f]
        mu = mu_f[f]
        s0 = S[f, 0]
        s1 = S[f, 1]
        if kind == WALL or kind == INLET:
            D = mu * dcoef[f]
            diag_u[P] += D
            diag_v[P] += D
            k0 = kvec[f, 0]
            k1 = kvec[f, 1]
            bu[P] += D * bvel[b, 0] + mu * (
                k0 * gu[P, 0, 0] + k1 * gu[P, 0, 1] + gu[P, 0, 0] * s0 + gu[P, 1, 0] * s1
            )
            bv[P] += D * bvel[b, 1] + mu * (
                k0 * gu[P, 1, 0] + k1 * gu[P, 1, 1] + gu[P, 0, 1] * s0 + gu[P, 1, 1] * s1
            )
            bu[P] -= Ff * bvel[b, 0]
            bv[P] -= Ff * bvel[b, 1]
        elif kind == SYMMETRY:
            D = mu * dcoef[f]
            area = np.sqrt(s0 * s0 + s1 * s1)
            n0 = s0 / area
            n1 = s1 / area
            diag_u[P] += D * n0 * n0
            diag_v[P] += D * n1 * n1
            bu[P] -= D * n0 * n1 * u[P, 1]
            bv[P] -= D * n0 * n1 * u[P, 0]
        else:  # OUTLET or FREESTREAM: zero gradient on outflow
            if Ff >= 0.0:
                diag_u[P] += Ff
                diag_v[P] += Ff
                if second_order:
                    r0 = xf[f, 0] - xc[P, 0]
                    r1 = xf[f, 1] - xc[P, 1]
                    bu[P] -= Ff * (gu[P, 0, 0] * r0 + gu[P, 0, 1] * r1)
                    bv[P] -= Ff * (gu[P, 1, 0] * r0 + gu[P, 1, 1] * r1)
            elif kind == FREESTREAM:
                bu[P] -= Ff * bvel[b, 0]
                bv[P] -= Ff * bvel[b, 1]
            else:
                # reverse flow through an outlet: enters normal to the boundary
                area = np.sqrt(s0 * s0 + s1 * s1)
                n0 = s0 / area
                n1 = s1 / area
                un = u[P, 0] * n0 + u[P, 1] * n1
                bu[P] -= Ff * un * n0
                bv[P] -= Ff * un * n1


@njit(cache=True)
def rhie_chow_fluxes(
    owner, neigh, n_int, S, dcoef, kvec, w, skew, gu, rho, hbya, rau, p, gp, pb, bkind, bvel, relax_u, F_old, F,
):
    """Face mass fluxes F_f = rho [ (H/A)_f . S - (V/A)_f ((p_N - p_P) dcoef + k . grad p_f) ]
    + (1 - alpha_u) F_old   (Rhie & Chow 1983, AIAA J. 21, 1525-1532).

    ``hbya`` = (b - N u*) / A excludes the relaxation source (1 - alpha_u)/alpha_u a_P u_old, and
    A = a_P / alpha_u; the relaxation enters through the old face flux instead, so at convergence
    F = rho [((b - N u)/a_P)_f . S - (V/a_P)_f grad p_f . S] whatever alpha_u (Majumdar 1988,
    Numer. Heat Transfer 13, 125-132).
    """
    nf = owner.shape[0]
    a = 1.0 - relax_u
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        # linear interpolation to the intersection point, moved to the face centre with the
        # velocity gradient (skewness correction; H/A - u is smooth to higher order)
        s0 = skew[f, 0]
        s1 = skew[f, 1]
        h0 = wf * hbya[P, 0] + (1.0 - wf) * hbya[N, 0] + (
            (wf * gu[P, 0, 0] + (1.0 - wf) * gu[N, 0, 0]) * s0 + (wf * gu[P, 0, 1] + (1.0 - wf) * gu[N, 0, 1]) * s1
        )
        h1 = wf * hbya[P, 1] + (1.0 - wf) * hbya[N, 1] + (
            (wf * gu[P, 1, 0] + (1.0 - wf) * gu[N, 1, 0]) * s0 + (wf * gu[P, 1, 1] + (1.0 - wf) * gu[N, 1, 1]) * s1
        )
        r = wf * rau[P] + (1.0 - wf) * rau[N]
        gp0 = wf * gp[P, 0] + (1.0 - wf) * gp[N, 0]
        gp1 = wf * gp[P, 1] + (1.0 - wf) * gp[N, 1]
        F[f] = rho * (
            h0 * S[f, 0] + h1 * S[f, 1] - r * ((p[N] - p[P]) * dcoef[f] + kvec[f, 0] * gp0 + kvec[f, 1] * gp1)
        ) + a * F_old[f]
    for f in range(n_int, nf):
        b = f - n_int
        P = owner[f]
        kind = bkind[b]
        if kind == WALL or kind == SYMMETRY:
            F[f] = 0.0
        elif kind == INLET:
            F[f] = rho * (bvel[b, 0] * S[f, 0] + bvel[b, 1] * S[f, 1])
        else:
            r = rau[P]
            F[f] = rho * (
                hbya[P, 0] * S[f, 0] + hbya[P, 1] * S[f, 1]
                - r * ((pb[b] - p[P]) * dcoef[f] + kvec[f, 0] * gp[P, 0] + kvec[f, 1] * gp[P, 1])
            ) + a * F_old[f]


@njit(cache=True)
def assemble_pressure_correction(owner, neigh, n_int, dcoef, rho, dp, bkind, F, diag, off, rhs):
    """Pressure correction: sum_f rho D_f dcoef (p'_P - p'_N) = -sum_f F*_f, p' = 0 on fixed-pressure
    faces. ``off[f]`` is the (symmetric) coefficient of face f; returns the scaled mass imbalance
    numerator sum_P |sum_f F*_f|.
    """
    nc = diag.shape[0]
    nf = owner.shape[0]
    for c in range(nc):
        diag[c] = 0.0
        rhs[c] = 0.0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        r = 0.5 * (dp[P] + dp[N])
        a = rho * r * dcoef[f]
        off[f] = -a
        diag[P] += a
        diag[N] += a
        rhs[P] -= F[f]
        rhs[N] += F[f]
    for f in range(n_int, nf):
        b = f - n_int
        P = owner[f]
        rhs[P] -= F[f]
        kind = bkind[b]
        if kind == OUTLET or kind == FREESTREAM:
            diag[P] += rho * dp[P] * dcoef[f]
    total = 0.0
    for c in range(nc):
        total += abs(rhs[c])
    return total


@njit(cache=True)
def correct_fluxes(owner, neigh, n_int, dcoef, rho, dp, bkind, pc, F):
    """F_f += -rho D_f dcoef (p'_N - p'_P), with p'_b = 0 on fixed-pressure faces."""
    nf = owner.shape[0]
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        r = 0.5 * (dp[P] + dp[N])
        F[f] -= rho * r * dcoef[f] * (pc[N] - pc[P])
    for f in range(n_int, nf):
        b = f - n_int
        kind = bkind[b]
        if kind == OUTLET or kind == FREESTREAM:
            P = owner[f]
            F[f] -= rho * dp[P] * dcoef[f] * (0.0 - pc[P])


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


@njit(cache=True)
def offdiag_product(owner, neigh, off_own, off_nei, x, out):
    """out = N x, the off-diagonal part of a face-stencil matrix applied to x (2 components)."""
    for c in range(out.shape[0]):
        out[c, 0] = 0.0
        out[c, 1] = 0.0
    for f in range(off_own.shape[0]):
        P = owner[f]
        N = neigh[f]
        out[P, 0] += off_own[f] * x[N, 0]
        out[P, 1] += off_own[f] * x[N, 1]
        out[N, 0] += off_nei[f] * x[P, 0]
        out[N, 1] += off_nei[f] * x[P, 1]
