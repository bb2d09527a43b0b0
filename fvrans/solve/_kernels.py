"""Numba kernels of the SIMPLE loop: momentum assembly, Rhie-Chow fluxes, pressure correction.

Arrays and scalars only. Face conventions are those of ``fvrans.mesh.geometry``; boundary kinds
are the integer codes of ``fvrans.physics.boundary``. ``dcoef = |S|^2 / (S . d)`` and
``kvec = S - dcoef d`` are the orthogonal and non-orthogonal parts of the over-relaxed
decomposition of the face area vector (Jasak 1996, PhD thesis, Imperial College, sec. 3.3.1.3).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN
from fvrans.linalg._smoother_kernels import csr_residual_l1, gauss_seidel  # noqa: F401 (used as K.gauss_seidel)

WALL = 0
INLET = 1
OUTLET = 2
SYMMETRY = 3
FREESTREAM = 4


@njit(cache=True, nogil=True)
def face_coefficient_values(S, d, dcoef, kvec):
    """dcoef_f = |S_f|^2 / (S_f . d_f) and kvec_f = S_f - dcoef_f d_f per face (``simple.face_coefficients``),
    each sum formed x term first, as numpy's row-wise products form it."""
    for f in range(S.shape[0]):
        c = (S[f, 0] * S[f, 0] + S[f, 1] * S[f, 1]) / (S[f, 0] * d[f, 0] + S[f, 1] * d[f, 1])
        dcoef[f] = c
        kvec[f, 0] = S[f, 0] - c * d[f, 0]
        kvec[f, 1] = S[f, 1] - c * d[f, 1]


@njit(cache=True, nogil=True, inline="always")
def _momentum_face(f, owner, neigh, S, dcoef, kvec, w, xf, xc, shift, F, mu_f, gu, gc, second_order, off_own, off_nei,
                   face_work):
    P = owner[f]
    N = neigh[f]
    D = mu_f[f] * dcoef[f]
    Ff = F[f]
    fpos = Ff if Ff > 0.0 else 0.0
    fneg = Ff - fpos
    off_own[f] = -D + fneg  # = -(D - fneg), the neighbour's diagonal share
    off_nei[f] = -D - fpos  # = -(D + fpos), the owner's
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
        if Ff >= 0.0:
            U = P
            r0 = xf[f, 0] - xc[P, 0]
            r1 = xf[f, 1] - xc[P, 1]
        else:
            U = N
            r0 = xf[f, 0] - xc[N, 0] - shift[f, 0]
            r1 = xf[f, 1] - xc[N, 1] - shift[f, 1]
        su -= Ff * (gc[U, 0, 0] * r0 + gc[U, 0, 1] * r1)
        sv -= Ff * (gc[U, 1, 0] * r0 + gc[U, 1, 1] * r1)
    face_work[f, 0] = su
    face_work[f, 1] = sv


@njit(cache=True, nogil=True, inline="always")
def _momentum_cell(P, n_int, cf_ptr, cf_face, S, dcoef, kvec, xf, xc, F, mu_f, u, gu, gc, gwall, bkind, bvel,
                   second_order, off_own, off_nei, face_work, diag_u, diag_v, bu, bv):
    du = 0.0
    dv = 0.0
    su = 0.0
    sv = 0.0
    for k in range(cf_ptr[P], cf_ptr[P + 1]):
        f = cf_face[k]
        if f < 0:  # P is the neighbour of internal face f
            f = -1 - f
            du -= off_own[f]
            dv -= off_own[f]
            su -= face_work[f, 0]
            sv -= face_work[f, 1]
            continue
        if f < n_int:
            du -= off_nei[f]
            dv -= off_nei[f]
            su += face_work[f, 0]
            sv += face_work[f, 1]
            continue
        b = f - n_int
        kind = bkind[b]
        Ff = F[f]
        mu = mu_f[f]
        s0 = S[f, 0]
        s1 = S[f, 1]
        if kind == WALL:
            D = mu * dcoef[f]
            du += D
            dv += D
            g00 = gwall[b, 0, 0]
            g01 = gwall[b, 0, 1]
            g10 = gwall[b, 1, 0]
            g11 = gwall[b, 1, 1]
            # D (u_wall - u_P) implicit; the flux mu (G + G^T) . S less the same with u_P now
            su += mu * (g00 * s0 + g01 * s1 + g00 * s0 + g10 * s1) + D * u[P, 0]
            sv += mu * (g10 * s0 + g11 * s1 + g01 * s0 + g11 * s1) + D * u[P, 1]
        elif kind == INLET:
            D = mu * dcoef[f]
            du += D
            dv += D
            k0 = kvec[f, 0]
            k1 = kvec[f, 1]
            su += D * bvel[b, 0] + mu * (
                k0 * gu[P, 0, 0] + k1 * gu[P, 0, 1] + gu[P, 0, 0] * s0 + gu[P, 1, 0] * s1
            )
            sv += D * bvel[b, 1] + mu * (
                k0 * gu[P, 1, 0] + k1 * gu[P, 1, 1] + gu[P, 0, 1] * s0 + gu[P, 1, 1] * s1
            )
            su -= Ff * bvel[b, 0]
            sv -= Ff * bvel[b, 1]
        elif kind == SYMMETRY:
            D = mu * dcoef[f]
            area = np.sqrt(s0 * s0 + s1 * s1)
            n0 = s0 / area
            n1 = s1 / area
            du += D * n0 * n0
            dv += D * n1 * n1
            su -= D * n0 * n1 * u[P, 1]
            sv -= D * n0 * n1 * u[P, 0]
        else:  # OUTLET or FREESTREAM: zero normal gradient; the transpose stress still acts
            su += mu * (gu[P, 0, 0] * s0 + gu[P, 1, 0] * s1)
            sv += mu * (gu[P, 0, 1] * s0 + gu[P, 1, 1] * s1)
            if Ff >= 0.0:
                du += Ff
                dv += Ff
                if second_order:
                    r0 = xf[f, 0] - xc[P, 0]
                    r1 = xf[f, 1] - xc[P, 1]
                    su -= Ff * (gc[P, 0, 0] * r0 + gc[P, 0, 1] * r1)
                    sv -= Ff * (gc[P, 1, 0] * r0 + gc[P, 1, 1] * r1)
            elif kind == FREESTREAM:
                su -= Ff * bvel[b, 0]
                sv -= Ff * bvel[b, 1]
            else:
                # reverse flow through an outlet: enters normal to the boundary
                area = np.sqrt(s0 * s0 + s1 * s1)
                n0 = s0 / area
                n1 = s1 / area
                un = u[P, 0] * n0 + u[P, 1] * n1
                su -= Ff * un * n0
                sv -= Ff * un * n1
    diag_u[P] = du
    diag_v[P] = dv
    bu[P] = su
    bv[P] = sv


@njit(cache=True, nogil=True, parallel=True)
def assemble_momentum(
    owner, neigh, n_int, S, dcoef, kvec, w, xf, xc, shift, F, mu_f, u, gu, gc, gwall, bkind, bvel, second_order,
    diag_u, diag_v, off_own, off_nei, bu, bv, cf_ptr, cf_face, face_work,
):
    """Coefficients of sum_f [F u_f - mu_f (grad u + grad u^T)_f . S_f] = 0 for both components.

    Implicit: first-order upwind convection and orthogonal diffusion. Explicit (deferred):
    linear-upwind correction F (u_f^LUD - u_f^UD) = F gc_U . (x_f - x_U) with the upwind cell's
    gradient ``gc`` (the solver passes the face-sum gradient, see ``SimpleSolver``; the neighbour
    at x_N + ``shift[f]``, its image across a periodic face), non-orthogonal
    diffusion mu k . grad u_f and the transpose-gradient stress mu (grad u)^T_f . S_f with ``gu``.
    Wall faces: the flux is mu (G + G^T) . S with the second-order wall gradient G = ``gwall[b]``
    (nb, 2, 2; ``fvrans.fv.wall_gradient``), the gradient the wall shear stress is reported with;
    implicit part mu dcoef (u_wall - u_P) as before, the rest deferred:
    mu [G . S - dcoef (u_wall - u_P)] + mu G^T . S with the current u_P.
    ``off_own[f]`` multiplies u_N in row P, ``off_nei[f]`` multiplies u_P in row N.

    Race-free on every thread (large meshes): a loop over the internal faces writes the face
    coefficients and explicit fluxes (``face_work`` (n_int, 2)), then a loop over the cells adds
    up each cell's faces (``Mesh.cell_faces``: ``cf_ptr``, ``cf_face``) in face order, so the sums
    are those of a single face loop to the last bit.
    """
    nc = u.shape[0]
    if nc >= PAR_MIN:
        for f in prange(n_int):
            _momentum_face(f, owner, neigh, S, dcoef, kvec, w, xf, xc, shift, F, mu_f, gu, gc, second_order, off_own,
                           off_nei, face_work)
        for c in prange(nc):
            _momentum_cell(c, n_int, cf_ptr, cf_face, S, dcoef, kvec, xf, xc, F, mu_f, u, gu, gc, gwall, bkind, bvel,
                           second_order, off_own, off_nei, face_work, diag_u, diag_v, bu, bv)
    else:
        for f in range(n_int):
            _momentum_face(f, owner, neigh, S, dcoef, kvec, w, xf, xc, shift, F, mu_f, gu, gc, second_order, off_own,
                           off_nei, face_work)
        for c in range(nc):
            _momentum_cell(c, n_int, cf_ptr, cf_face, S, dcoef, kvec, xf, xc, F, mu_f, u, gu, gc, gwall, bkind, bvel,
                           second_order, off_own, off_nei, face_work, diag_u, diag_v, bu, bv)


@njit(cache=True, nogil=True, inline="always")
def _rhie_chow_face(
    f, owner, neigh, n_int, S, dcoef, kvec, w, skew, delta, gu, hu, quadratic, rho, hbya, rau, p, gp, pb, bkind, bvel,
    beta, F_old, F,
):
    if f < n_int:
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        # linear interpolation to the intersection point, moved to the face centre with the
        # velocity gradient (skewness correction; H/a - u is smooth to higher order)
        s0 = skew[f, 0]
        s1 = skew[f, 1]
        h0 = wf * hbya[P, 0] + (1.0 - wf) * hbya[N, 0] + (
            (wf * gu[P, 0, 0] + (1.0 - wf) * gu[N, 0, 0]) * s0 + (wf * gu[P, 0, 1] + (1.0 - wf) * gu[N, 0, 1]) * s1
        )
        h1 = wf * hbya[P, 1] + (1.0 - wf) * hbya[N, 1] + (
            (wf * gu[P, 1, 0] + (1.0 - wf) * gu[N, 1, 0]) * s0 + (wf * gu[P, 1, 1] + (1.0 - wf) * gu[N, 1, 1]) * s1
        )
        if quadratic:
            # exact for quadratic u: - w (1-w) d^T H d / 2 at the intersection point, + s^T H s / 2
            # to the face centre, H interpolated linearly
            d0 = delta[f, 0]
            d1 = delta[f, 1]
            c0 = -0.5 * wf * (1.0 - wf)
            t00 = c0 * d0 * d0 + 0.5 * s0 * s0
            t01 = c0 * 2.0 * d0 * d1 + s0 * s1
            t11 = c0 * d1 * d1 + 0.5 * s1 * s1
            # the face integral of a quadratic: midpoint value + (t^T H t) / 24, t the face vector
            e0 = -S[f, 1]
            e1 = S[f, 0]
            t00 += e0 * e0 / 24.0
            t01 += 2.0 * e0 * e1 / 24.0
            t11 += e1 * e1 / 24.0
            h0 += (t00 * (wf * hu[P, 0, 0] + (1.0 - wf) * hu[N, 0, 0])
                   + t01 * (wf * hu[P, 0, 1] + (1.0 - wf) * hu[N, 0, 1])
                   + t11 * (wf * hu[P, 0, 2] + (1.0 - wf) * hu[N, 0, 2]))
            h1 += (t00 * (wf * hu[P, 1, 0] + (1.0 - wf) * hu[N, 1, 0])
                   + t01 * (wf * hu[P, 1, 1] + (1.0 - wf) * hu[N, 1, 1])
                   + t11 * (wf * hu[P, 1, 2] + (1.0 - wf) * hu[N, 1, 2]))
        r = wf * rau[P] + (1.0 - wf) * rau[N]
        gp0 = wf * gp[P, 0] + (1.0 - wf) * gp[N, 0]
        gp1 = wf * gp[P, 1] + (1.0 - wf) * gp[N, 1]
        bf = wf * beta[P] + (1.0 - wf) * beta[N]
        F[f] = (1.0 - bf) * rho * (
            h0 * S[f, 0] + h1 * S[f, 1] - r * ((p[N] - p[P]) * dcoef[f] + kvec[f, 0] * gp0 + kvec[f, 1] * gp1)
        ) + bf * F_old[f]
    else:
        b = f - n_int
        P = owner[f]
        kind = bkind[b]
        if kind == WALL or kind == SYMMETRY:
            F[f] = 0.0
        elif kind == INLET:
            F[f] = rho * (bvel[b, 0] * S[f, 0] + bvel[b, 1] * S[f, 1])
        else:
            # H/a carried from the cell centre to the face centre with grad u
            d0 = delta[f, 0]
            d1 = delta[f, 1]
            h0 = hbya[P, 0] + gu[P, 0, 0] * d0 + gu[P, 0, 1] * d1
            h1 = hbya[P, 1] + gu[P, 1, 0] * d0 + gu[P, 1, 1] * d1
            r = rau[P]
            bf = beta[P]
            F[f] = (1.0 - bf) * rho * (
                h0 * S[f, 0] + h1 * S[f, 1]
                - r * ((pb[b] - p[P]) * dcoef[f] + kvec[f, 0] * gp[P, 0] + kvec[f, 1] * gp[P, 1])
            ) + bf * F_old[f]


@njit(cache=True, nogil=True, parallel=True)
def rhie_chow_fluxes(
    owner, neigh, n_int, S, dcoef, kvec, w, skew, delta, gu, hu, quadratic, rho, hbya, rau, p, gp, pb, bkind, bvel,
    beta, F_old, F,
):
    """Face mass fluxes F_f = (1 - beta_f) rho [ (H/a)_f . S - (V/a)_f ((p_N - p_P) dcoef + k . grad p_f) ]
    + beta_f F_old   (Rhie & Chow 1983, AIAA J. 21, 1525-1532).

    ``hbya`` = (b - N u*) / a_P and ``rau`` = V / a_P use the unrelaxed diagonal a_P; ``beta`` per
    cell is the share of the relaxed diagonal A that relaxation and the pseudo-time term add,
    beta = 1 - a_P / A (Patankar's relaxation alone: 1 - alpha_u), linearly interpolated to the
    face. The relaxation thus enters the face flux only through the old face flux, as it enters the
    cell velocity through the old velocity, so at convergence (F = F_old) F = rho [(H/a_P)_f . S -
    (V/a_P)_f grad p_f . S] whatever alpha_u and the pseudo-time steps (Majumdar 1988, Numer. Heat
    Transfer 13, 125-132, for a uniform alpha_u).

    With ``quadratic`` the H/a face value gets the terms that make the flux exact for a quadratic
    velocity (second derivatives ``hu`` (nc, 2, 3) = (u_xx, u_xy, u_yy) per component, from a
    quadratic fit): -w (1-w) d^T H d / 2 (linear interpolation to the intersection point),
    + s^T H s / 2 (on to the face centre, s = skew) and + t^T H t / 24 (the face integral against
    its midpoint value, t the face vector). On triangles the O(h^2) errors of these three face
    values do not cancel over the three faces (they do over opposite faces of a quadrilateral):
    the continuity equation keeps an O(h) truncation error of alternating sign between
    neighbouring triangles, which the Rhie-Chow term (weight ~ V/a_P ~ h^2/mu) balances with an
    O(h) pressure oscillation.
    """
    nf = owner.shape[0]
    if nf >= PAR_MIN:
        for f in prange(nf):
            _rhie_chow_face(f, owner, neigh, n_int, S, dcoef, kvec, w, skew, delta, gu, hu, quadratic, rho, hbya, rau,
                            p, gp, pb, bkind, bvel, beta, F_old, F)
    else:
        for f in range(nf):
            _rhie_chow_face(f, owner, neigh, n_int, S, dcoef, kvec, w, skew, delta, gu, hu, quadratic, rho, hbya, rau,
                            p, gp, pb, bkind, bvel, beta, F_old, F)


@njit(cache=True, nogil=True, inline="always")
def _pressure_correction_cell(c, owner, neigh, n_int, dcoef, rho, dp, bkind, F, diag, off, rhs, cf_ptr, cf_face):
    d = 0.0
    r = 0.0
    mag = 0.0
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        side = 1.0
        if f < 0:
            f = -1 - f
            side = -1.0
        if f < n_int:
            a = rho * (0.5 * (dp[owner[f]] + dp[neigh[f]])) * dcoef[f]
            if side > 0.0:
                off[f] = -a
                r -= F[f]
            else:
                r += F[f]
            d += a
            mag += abs(F[f])
        else:
            r -= F[f]
            mag += abs(F[f])
            kind = bkind[f - n_int]
            if kind == OUTLET or kind == FREESTREAM:
                d += rho * dp[c] * dcoef[f]
    diag[c] = d
    rhs[c] = r
    return abs(r), mag


@njit(cache=True, nogil=True, parallel=True)
def assemble_pressure_correction(owner, neigh, n_int, dcoef, rho, dp, bkind, F, diag, off, rhs, cf_ptr, cf_face):
    """Pressure correction: sum_f rho D_f dcoef (p'_P - p'_N) = -sum_f F*_f, p' = 0 on fixed-pressure
    faces. ``off[f]`` is the (symmetric) coefficient of face f; returns the mass imbalance
    sum_P |sum_f F*_f| and the magnitude of its terms sum_P sum_f |F*_f| (see ``fvrans.solve.residuals``).
    """
    nc = diag.shape[0]
    total = 0.0
    mag = 0.0
    if nc >= PAR_MIN:
        for c in prange(nc):
            t, m = _pressure_correction_cell(c, owner, neigh, n_int, dcoef, rho, dp, bkind, F, diag, off, rhs, cf_ptr,
                                             cf_face)
            total += t
            mag += m
    else:
        for c in range(nc):
            t, m = _pressure_correction_cell(c, owner, neigh, n_int, dcoef, rho, dp, bkind, F, diag, off, rhs, cf_ptr,
                                             cf_face)
            total += t
            mag += m
    return total, mag

@njit(cache=True, nogil=True, parallel=True)
def correct_fluxes(owner, neigh, n_int, dcoef, rho, dp, bkind, pc, F):
    """F_f += -rho D_f dcoef (p'_N - p'_P), with p'_b = 0 on fixed-pressure faces."""
    nf = owner.shape[0]
    if nf >= PAR_MIN:
        for f in prange(nf):
            _correct_flux(f, owner, neigh, n_int, dcoef, rho, dp, bkind, pc, F)
    else:
        for f in range(nf):
            _correct_flux(f, owner, neigh, n_int, dcoef, rho, dp, bkind, pc, F)


@njit(cache=True, nogil=True, inline="always")
def _correct_flux(f, owner, neigh, n_int, dcoef, rho, dp, bkind, pc, F):
    if f < n_int:
        P = owner[f]
        N = neigh[f]
        r = 0.5 * (dp[P] + dp[N])
        F[f] -= rho * r * dcoef[f] * (pc[N] - pc[P])
    else:
        kind = bkind[f - n_int]
        if kind == OUTLET or kind == FREESTREAM:
            P = owner[f]
            F[f] -= rho * dp[P] * dcoef[f] * (0.0 - pc[P])

@njit(cache=True)
def boundary_velocity(owner, n_int, normal, delta, bkind, bvel, u, gu, F, ub):
    """Boundary-face velocities: the given value on walls, inlets and freestream inflow; elsewhere
    the owner value carried along the face by the latest gradient, u_P + grad u_P . t with
    t = d - (d.n) n (zero normal gradient, exact for fields varying along the boundary), then
    its tangential part on symmetry planes and its normal part for reverse flow at an outlet."""
    for b in range(ub.shape[0]):
        f = n_int + b
        P = owner[f]
        kind = bkind[b]
        Fb = F[f]
        if kind == WALL or kind == INLET or (kind == FREESTREAM and Fb < 0.0):
            ub[b, 0] = bvel[b, 0]
            ub[b, 1] = bvel[b, 1]
            continue
        n0 = normal[f, 0]
        n1 = normal[f, 1]
        dn = delta[f, 0] * n0 + delta[f, 1] * n1
        t0 = delta[f, 0] - dn * n0
        t1 = delta[f, 1] - dn * n1
        u0 = u[P, 0] + gu[P, 0, 0] * t0 + gu[P, 0, 1] * t1
        u1 = u[P, 1] + gu[P, 1, 0] * t0 + gu[P, 1, 1] * t1
        if kind == SYMMETRY:
            un = u0 * n0 + u1 * n1
            ub[b, 0] = u0 - un * n0
            ub[b, 1] = u1 - un * n1
        elif kind == OUTLET and Fb < 0.0:
            un = u0 * n0 + u1 * n1
            ub[b, 0] = un * n0
            ub[b, 1] = un * n1
        else:
            ub[b, 0] = u0
            ub[b, 1] = u1


@njit(cache=True)
def face_viscosity(owner, neigh, n_int, w, mu_cell, bkind, mu_wall, muf):
    """mu_f: linear interpolation inside, the owner value on boundaries, ``mu_wall`` on walls."""
    for f in range(n_int):
        muf[f] = w[f] * mu_cell[owner[f]] + (1.0 - w[f]) * mu_cell[neigh[f]]
    for f in range(n_int, owner.shape[0]):
        muf[f] = mu_wall if bkind[f - n_int] == WALL else mu_cell[owner[f]]


@njit(cache=True)
def boundary_pressure(owner, n_int, delta, bkind, bp, p, gp, pb):
    """p_b = p_P + grad p_P . (x_f - x_P), or the given value on outlets and freestream faces."""
    for b in range(pb.shape[0]):
        kind = bkind[b]
        if kind == OUTLET or kind == FREESTREAM:
            pb[b] = bp[b]
        else:
            P = owner[n_int + b]
            pb[b] = p[P] + gp[P, 0] * delta[n_int + b, 0] + gp[P, 1] * delta[n_int + b, 1]


@njit(cache=True, nogil=True, inline="always")
def _momentum_sources_cell(c, owner, neigh, vol, body, gp, u, alpha, pt, diag_u, diag_v, off_own, off_nei, bu, bv,
                           b_np, a_rel, rhs_u, rhs_v, work, cf_ptr, cf_face):
    V = vol[c]
    b0 = bu[c] + V * body[c, 0]
    b1 = bv[c] + V * body[c, 1]
    b_np[c, 0] = b0
    b_np[c, 1] = b1
    r0 = b0 - V * gp[c, 0]
    r1 = b1 - V * gp[c, 1]
    w0 = r0 - diag_u[c] * u[c, 0]
    w1 = r1 - diag_v[c] * u[c, 1]
    a0 = diag_u[c] * u[c, 0]
    a1 = diag_v[c] * u[c, 1]
    mag = (np.sqrt(a0 * a0 + a1 * a1) + np.sqrt(bu[c] * bu[c] + bv[c] * bv[c])
           + V * (np.sqrt(body[c, 0] * body[c, 0] + body[c, 1] * body[c, 1])
                  + np.sqrt(gp[c, 0] * gp[c, 0] + gp[c, 1] * gp[c, 1])))
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        if f >= off_own.shape[0]:
            continue  # boundary face: no neighbour
        if f >= 0:
            N = neigh[f]
            w0 -= off_own[f] * u[N, 0]
            w1 -= off_own[f] * u[N, 1]
            mag += abs(off_own[f]) * np.sqrt(u[N, 0] * u[N, 0] + u[N, 1] * u[N, 1])
        else:
            f = -1 - f
            P = owner[f]
            w0 -= off_nei[f] * u[P, 0]
            w1 -= off_nei[f] * u[P, 1]
            mag += abs(off_nei[f]) * np.sqrt(u[P, 0] * u[P, 0] + u[P, 1] * u[P, 1])
    work[c, 0] = w0
    work[c, 1] = w1
    au = diag_u[c] / alpha + pt[c]
    av = diag_v[c] / alpha + pt[c]
    a_rel[c, 0] = au
    a_rel[c, 1] = av
    rhs_u[c] = r0 + (au - diag_u[c]) * u[c, 0]
    rhs_v[c] = r1 + (av - diag_v[c]) * u[c, 1]
    return abs(w0), abs(w1), mag


@njit(cache=True, nogil=True, parallel=True)
def momentum_sources(
    owner, neigh, vol, body, gp, u, alpha, pt, diag_u, diag_v, off_own, off_nei, bu, bv,
    b_np, a_rel, rhs_u, rhs_v, work, cf_ptr, cf_face,
):
    """Complete the momentum equations and under-relax them.

    b_np = b + V f_body (sources without the pressure force, kept for H/a); the unrelaxed
    residuals r = b_np - V grad p - a_P u - sum a_nb u_nb of the current velocity; the relaxed
    diagonals a_rel = a_P / alpha + pt (Patankar 1980, sec. 4.2-5, plus the pseudo-time term
    pt = rho V / dt per cell) and right-hand sides b_np - V grad p + (a_rel - a_P) u. Returns
    (sum |r_u|, sum |r_v|, sum of the term magnitudes): per cell |(a_P^u u_P, a_P^v v_P)|
    + sum_nb |a_nb| |u_nb| + |b| + V |f_body| + V |grad p| (vector magnitudes; ``b`` the boundary
    and deferred terms), the reference of ``fvrans.fv.residual``. Per cell over its faces
    (``Mesh.cell_faces``), on every thread for large meshes.
    """
    nc = u.shape[0]
    ru = 0.0
    rv = 0.0
    mag = 0.0
    if nc >= PAR_MIN:
        for c in prange(nc):
            x, y, m = _momentum_sources_cell(c, owner, neigh, vol, body, gp, u, alpha, pt, diag_u, diag_v, off_own,
                                             off_nei, bu, bv, b_np, a_rel, rhs_u, rhs_v, work, cf_ptr, cf_face)
            ru += x
            rv += y
            mag += m
    else:
        for c in range(nc):
            x, y, m = _momentum_sources_cell(c, owner, neigh, vol, body, gp, u, alpha, pt, diag_u, diag_v, off_own,
                                             off_nei, bu, bv, b_np, a_rel, rhs_u, rhs_v, work, cf_ptr, cf_face)
            ru += x
            rv += y
            mag += m
    return ru, rv, mag

@njit(cache=True, nogil=True, inline="always")
def _interpolation_cell(c, owner, neigh, vol, off_own, off_nei, diag_u, diag_v, a_rel, b_np, us, vs, simplec, hbya,
                        rau, beta, dp, work, cf_ptr, cf_face):
    w0 = 0.0
    w1 = 0.0
    snb = 0.0
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        if f >= off_own.shape[0]:
            continue
        if f >= 0:
            N = neigh[f]
            w0 += off_own[f] * us[N]
            w1 += off_own[f] * vs[N]
            snb += abs(off_own[f])
        else:
            f = -1 - f
            P = owner[f]
            w0 += off_nei[f] * us[P]
            w1 += off_nei[f] * vs[P]
            snb += abs(off_nei[f])
    work[c, 0] = w0
    work[c, 1] = w1
    hbya[c, 0] = (b_np[c, 0] - w0) / diag_u[c]
    hbya[c, 1] = (b_np[c, 1] - w1) / diag_v[c]
    a = 0.5 * (diag_u[c] + diag_v[c])
    A = 0.5 * (a_rel[c, 0] + a_rel[c, 1])
    rau[c] = vol[c] / a
    beta[c] = 1.0 - a / A
    if simplec:
        dp[c] = vol[c] / max(A - snb, 0.01 * A)
    else:
        dp[c] = vol[c] / A


@njit(cache=True, nogil=True, parallel=True)
def interpolation_coefficients(
    owner, neigh, vol, off_own, off_nei, diag_u, diag_v, a_rel, b_np, us, vs, simplec, hbya, rau, beta, dp, work,
    cf_ptr, cf_face,
):
    """H/a = (b - N u*) / a_P per component (a_P the unrelaxed diagonal), rau = V / a with
    a = (a_P^u + a_P^v)/2, the relaxation share of the diagonal beta = 1 - a / A (A the relaxed
    diagonal, averaged likewise) and the pressure-correction coefficient dp: V/A (SIMPLE) or
    V / max(A - sum |a_nb|, A/100) (SIMPLEC, Van Doormaal & Raithby 1984)."""
    nc = us.shape[0]
    if nc >= PAR_MIN:
        for c in prange(nc):
            _interpolation_cell(c, owner, neigh, vol, off_own, off_nei, diag_u, diag_v, a_rel, b_np, us, vs, simplec,
                                hbya, rau, beta, dp, work, cf_ptr, cf_face)
    else:
        for c in range(nc):
            _interpolation_cell(c, owner, neigh, vol, off_own, off_nei, diag_u, diag_v, a_rel, b_np, us, vs, simplec,
                                hbya, rau, beta, dp, work, cf_ptr, cf_face)

@njit(cache=True)
def update_pressure(p_old, pc, alpha_p, remove_mean, owner, n_int, bkind, p, pcb):
    """p = p_old + alpha_p p' (mean removed when no boundary fixes the level) and the boundary
    values of p' for its gradient (0 on fixed-pressure faces, the owner value elsewhere)."""
    nc = p.shape[0]
    s = 0.0
    for c in range(nc):
        p[c] = p_old[c] + alpha_p * pc[c]
        s += p[c]
    if remove_mean:
        s /= nc
        for c in range(nc):
            p[c] -= s
    for b in range(pcb.shape[0]):
        kind = bkind[b]
        pcb[b] = 0.0 if (kind == OUTLET or kind == FREESTREAM) else pc[owner[n_int + b]]


@njit(cache=True)
def correct_velocity(us, vs, dp, gpc, u):
    """u = u* - D grad p'."""
    for c in range(u.shape[0]):
        u[c, 0] = us[c] - dp[c] * gpc[c, 0]
        u[c, 1] = vs[c] - dp[c] * gpc[c, 1]


@njit(cache=True)
def flow_rates(owner, neigh, n_int, F, width, rho_u_floor, q):
    """Mass flow through each cell, q = max(sum_f |F_f| / 2, rho u_floor w), w = V / (longest face)
    the cell's narrow width: the floor is the flow of speed u_floor along the cell's long side (for
    cells the flow has not reached yet; it does not grow with the aspect ratio). The local
    pseudo-time step of a cell is dt = CFL rho V / q, its diagonal term rho V / dt = q / CFL."""
    nc = q.shape[0]
    for c in range(nc):
        q[c] = 0.0
    for f in range(n_int):
        a = 0.5 * abs(F[f])
        q[owner[f]] += a
        q[neigh[f]] += a
    for f in range(n_int, owner.shape[0]):
        q[owner[f]] += 0.5 * abs(F[f])
    for c in range(nc):
        lo = rho_u_floor * width[c]
        if q[c] < lo:
            q[c] = lo
