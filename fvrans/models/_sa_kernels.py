"""numba kernels of the Spalart-Allmaras model; the model constants live here, in one place.

Constants: Spalart & Allmaras 1994, La Recherche Aerospatiale 1, 5-21 (cb1, sigma, cb2, kappa,
cw1 = cb1/kappa^2 + (1 + cb2)/sigma, cw2, cw3, cv1, ct3, ct4); the modified-vorticity safeguard
(cv2, cv3) and the negative-nu_tilde model (cn1) of Allmaras, Johnson & Spalart 2012, ICCFD7-1902,
"Modifications and clarifications for the implementation of the Spalart-Allmaras turbulence
model". The trip term is not used. Rotation/curvature correction (cr1, cr2, cr3): Shur, Strelets,
Travin & Spalart 2000, AIAA J. 38, 784-792, production cb1 (f_r1 - f_t2) S_tilde nt as written in
the NASA Turbulence Modeling Resource (from memory).

Functions of one cell (``fv1`` ... ``cell_source``) are njit scalar functions so that the tests
can evaluate exactly what the assembly kernel uses.
"""

from __future__ import annotations

import math

from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_HEAVY as PAR_MIN_HEAVY

CB1 = 0.1355
SIGMA = 2.0 / 3.0
CB2 = 0.622
KAPPA = 0.41
CW1 = CB1 / KAPPA**2 + (1.0 + CB2) / SIGMA
CW2 = 0.3
CW3 = 2.0
CV1 = 7.1
CT3 = 1.2
CT4 = 0.5
CV2 = 0.7
CV3 = 0.9
CN1 = 16.0
#: r is clipped at this value (Spalart & Allmaras 1994; AJS 2012)
R_MAX = 10.0
CR1 = 1.0
CR2 = 12.0
CR3 = 1.0


@njit(cache=True)
def fv1(chi):
    """f_v1 = chi^3 / (chi^3 + cv1^3)."""
    c3 = chi * chi * chi
    return c3 / (c3 + CV1 * CV1 * CV1)


@njit(cache=True)
def fv2(chi):
    """f_v2 = 1 - chi / (1 + chi f_v1)."""
    return 1.0 - chi / (1.0 + chi * fv1(chi))


@njit(cache=True)
def ft2(chi):
    """f_t2 = ct3 exp(-ct4 chi^2)."""
    return CT3 * math.exp(-CT4 * chi * chi)


@njit(cache=True)
def fw(r):
    """f_w = g ((1 + cw3^6) / (g^6 + cw3^6))^(1/6), g = r + cw2 (r^6 - r), r clipped at 10."""
    if r > R_MAX:
        r = R_MAX
    g = r + CW2 * (r**6 - r)
    c6 = CW3**6
    return g * ((1.0 + c6) / (g**6 + c6)) ** (1.0 / 6.0)


@njit(cache=True)
def fn(chi):
    """Diffusion factor of the negative model: (cn1 + chi^3) / (cn1 - chi^3) for chi < 0, else 1."""
    if chi >= 0.0:
        return 1.0
    c3 = chi * chi * chi
    return (CN1 + c3) / (CN1 - c3)


@njit(cache=True)
def modified_vorticity(omega, s_bar):
    """S_tilde of AJS 2012 (their eq. 11-12): Omega + S_bar if S_bar >= -cv2 Omega, else
    Omega + Omega (cv2^2 Omega + cv3 S_bar) / ((cv3 - 2 cv2) Omega - S_bar); never negative."""
    if s_bar >= -CV2 * omega:
        return omega + s_bar
    return omega + omega * (CV2 * CV2 * omega + CV3 * s_bar) / ((CV3 - 2.0 * CV2) * omega - s_bar)


@njit(cache=True)
def cell_source(nt, nu, omega, d, use_ft2, fr1=1.0):
    """Source of one cell as (production, destruction coefficient) with source = P - Dc nt.

    nu_tilde >= 0 (SA 1994 without trip): P = cb1 (f_r1 - f_t2) S_tilde nt (f_r1 = 1 without the
    rotation/curvature correction),
    Dc = (cw1 f_w - cb1 f_t2 / kappa^2) nt / d^2.
    nu_tilde < 0 (AJS 2012): P_n = cb1 (1 - ct3) Omega nt, D_n = -cw1 (nt/d)^2, so
    P_n - D_n = -[cb1 (ct3 - 1) Omega - cw1 nt / d^2] nt: returned as P = 0 and that bracket as Dc
    (positive, both parts drive nt back to zero).
    """
    if nt < 0.0:
        return 0.0, CB1 * (CT3 - 1.0) * omega - CW1 * nt / (d * d)
    chi = nt / nu
    kd2 = KAPPA * KAPPA * d * d
    s_bar = nt * fv2(chi) / kd2
    st = modified_vorticity(omega, s_bar)
    f_t2 = ft2(chi) if use_ft2 else 0.0
    if st > 0.0:
        r = nt / (st * kd2)
        if r > R_MAX:
            r = R_MAX
    else:
        r = R_MAX
    prod = CB1 * (fr1 - f_t2) * st * nt
    dc = (CW1 * fw(r) - CB1 / (KAPPA * KAPPA) * f_t2) * nt / (d * d)
    return prod, dc


@njit(cache=True)
def net_source(nt, nu, omega, d, use_ft2, fr1=1.0):
    """P - D of one cell (per unit volume), see :func:`cell_source`."""
    prod, dc = cell_source(nt, nu, omega, d, use_ft2, fr1)
    return prod - dc * nt


@njit(cache=True, nogil=True, inline="always")
def _sources_cell(c, nt, nu, rho, vol, d, grad_u, grad_nt, use_ft2, fr1, diag, source):
    omega = abs(grad_u[c, 1, 0] - grad_u[c, 0, 1])
    gx = grad_nt[c, 0]
    gy = grad_nt[c, 1]
    rv = rho * vol[c]
    n = nt[c]
    s0 = net_source(n, nu, omega, d[c], use_ft2, fr1[c])
    h = 1e-6 * max(abs(n), 1e-3 * nu)
    if n < 0.0 and n + h > 0.0:
        h = -h  # stay on the negative branch
    jac = (net_source(n + h, nu, omega, d[c], use_ft2, fr1[c]) - s0) / h
    s = s0 + CB2 / SIGMA * (gx * gx + gy * gy)
    if jac < 0.0:
        diag[c] -= rv * jac
        s -= jac * n
    source[c] += rv * s


@njit(cache=True, nogil=True, parallel=True)
def assemble_sources(nt, nu, rho, vol, d, grad_u, grad_nt, use_ft2, fr1, diag, source):
    """Add the cell sources rho V (P - D + cb2/sigma |grad nt|^2) to one equation.

    P - D = s(nt) is linearised by Newton's rule about the current value, s(nt_new) ~ s(nt) +
    J (nt_new - nt), J = ds/dnt by a one-sided difference: where J < 0 (destruction growing
    faster than production) -J goes on the diagonal and s - J nt to the source; where J >= 0 the
    source is explicit. At convergence this is s(nt) exactly. (Picard's form, the destruction
    coefficient Dc = D/nt alone on the diagonal, under-estimates the derivative of the quadratic
    destruction by half and lets the outer iteration oscillate where destruction dominates.)
    The cb2 term is explicit. Omega = |dv/dx - du/dy| with grad_u[c, component, direction];
    ``fr1`` the rotation/curvature factor per cell (ones without the correction). Cells on every
    thread when there are many.
    """
    nc = nt.shape[0]
    if nc >= PAR_MIN_HEAVY:
        for c in prange(nc):
            _sources_cell(c, nt, nu, rho, vol, d, grad_u, grad_nt, use_ft2, fr1, diag, source)
    else:
        for c in range(nc):
            _sources_cell(c, nt, nu, rho, vol, d, grad_u, grad_nt, use_ft2, fr1, diag, source)


@njit(cache=True)
def cb2_linearisation(owner, neigh, n_int, area_vector, delta, nt, coef, diag, off_owner, off_neighbour, source):
    """Add to a coefficient set the implicit operator B of the cb2 term and B nt to its source
    (deferred correction, Khosla & Rubin 1974, Computers & Fluids 2, 207-209, from memory: the
    fixed point of the iterations is that of the explicit term alone).

    B is the upwind form of the term's Newton derivative: rho (cb2/sigma) |grad nt|^2 varies by
    2 rho (cb2/sigma) grad nt . grad dnt, a convection of dnt with velocity -2 (cb2/sigma) grad nt,
    down the gradient of nt. First-order upwind, with the face gradient (nt_N - nt_P) / |d|
    along S: on each internal face the cell holding the smaller value gets
    a = coef (nt_big - nt_small) |S|^2 / (S . d) on its diagonal and -a on the coefficient of the
    cell with the larger value (``coef`` = 2 rho cb2 / sigma); faces with equal values and
    boundary faces add nothing. B is an M-matrix part, so the system stays diagonally dominant.
    Explicit alone, the term (~ |grad nt|^2, largest where the turbulent region ends in a few
    cells) outgrows the implicit diffusion at the edge of a boundary layer on fine grids and
    nt there grows without bound from one outer iteration to the next (flat plate 52k cells)."""
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        sx = area_vector[f, 0]
        sy = area_vector[f, 1]
        dcoef = (sx * sx + sy * sy) / (sx * delta[f, 0] + sy * delta[f, 1])
        g = nt[N] - nt[P]
        a = coef * abs(g) * dcoef
        if g > 0.0:
            diag[P] += a
            off_owner[f] -= a
            source[P] -= a * g
        elif g < 0.0:
            diag[N] += a
            off_neighbour[f] -= a
            source[N] += a * g


@njit(cache=True)
def cell_diffusivity(nt, nu, out):
    """nu + nt f_n per value (f_n = 1 for nt >= 0): the diffusivity of AJS 2012."""
    for i in range(nt.shape[0]):
        out[i] = nu + nt[i] * fn(nt[i] / nu)


@njit(cache=True)
def eddy_viscosity(nt, nu, rho, out):
    """mu_t = rho nt f_v1(nt / nu), zero where nt < 0."""
    for i in range(nt.shape[0]):
        n = nt[i]
        out[i] = rho * n * fv1(n / nu) if n > 0.0 else 0.0


@njit(cache=True)
def rotation_function(grad_u, velocity, grad_strain, out):
    """f_r1 = (1 + cr1) 2 r* / (1 + r*) [1 - cr3 atan(cr2 r~)] - cr1 per cell (Shur et al. 2000), with
    r* = S / Omega and r~ = 2 Omega_ik S_jk (D S_ij / Dt) / D^4, D^2 = (S^2 + Omega^2) / 2, in a
    frame at rest and steady flow, where D S_ij / Dt = u . grad S_ij. ``grad_strain[c, m]`` is the
    gradient of S_11, S_12, S_22 (m = 0, 1, 2). f_r1 = 1 where the velocity gradient vanishes."""
    for c in range(grad_u.shape[0]):
        s11 = grad_u[c, 0, 0]
        s22 = grad_u[c, 1, 1]
        s12 = 0.5 * (grad_u[c, 0, 1] + grad_u[c, 1, 0])
        w12 = 0.5 * (grad_u[c, 0, 1] - grad_u[c, 1, 0])
        s2 = 2.0 * (s11 * s11 + s22 * s22 + 2.0 * s12 * s12)
        w2 = 4.0 * w12 * w12
        d2 = 0.5 * (s2 + w2)
        if d2 <= 0.0:
            out[c] = 1.0
            continue
        u0 = velocity[c, 0]
        u1 = velocity[c, 1]
        a11 = u0 * grad_strain[c, 0, 0] + u1 * grad_strain[c, 0, 1]
        a12 = u0 * grad_strain[c, 1, 0] + u1 * grad_strain[c, 1, 1]
        a22 = u0 * grad_strain[c, 2, 0] + u1 * grad_strain[c, 2, 1]
        # sum_ij (Omega S^T)_ij a_ij with Omega = [[0, w12], [-w12, 0]], S symmetric
        m11 = w12 * s12
        m12 = w12 * s22
        m21 = -w12 * s11
        m22 = -w12 * s12
        rt = 2.0 * (m11 * a11 + (m12 + m21) * a12 + m22 * a22) / (d2 * d2)
        s = math.sqrt(s2)
        w = math.sqrt(w2)
        ratio = 2.0 * s / (s + w)  # 2 r* / (1 + r*)
        out[c] = (1.0 + CR1) * ratio * (1.0 - CR3 * math.atan(CR2 * rt)) - CR1
