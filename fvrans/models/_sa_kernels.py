"""numba kernels of the Spalart-Allmaras model; the model constants live here, in one place.

Constants: Spalart & Allmaras 1994, La Recherche Aerospatiale 1, 5-21 (cb1, sigma, cb2, kappa,
cw1 = cb1/kappa^2 + (1 + cb2)/sigma, cw2, cw3, cv1, ct3, ct4); the modified-vorticity safeguard
(cv2, cv3) and the negative-nu_tilde model (cn1) of Allmaras, Johnson & Spalart 2012, ICCFD7-1902,
"Modifications and clarifications for the implementation of the Spalart-Allmaras turbulence
model". The trip term is not used.

Functions of one cell (``fv1`` ... ``cell_source``) are njit scalar functions so that the tests
can evaluate exactly what the assembly kernel uses.
"""

from __future__ import annotations

import math

from numba import njit

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
def cell_source(nt, nu, omega, d, use_ft2):
    """Source of one cell as (production, destruction coefficient) with source = P - Dc nt.

    nu_tilde >= 0 (SA 1994 without trip): P = cb1 (1 - f_t2) S_tilde nt,
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
    prod = CB1 * (1.0 - f_t2) * st * nt
    dc = (CW1 * fw(r) - CB1 / (KAPPA * KAPPA) * f_t2) * nt / (d * d)
    return prod, dc


@njit(cache=True)
def net_source(nt, nu, omega, d, use_ft2):
    """P - D of one cell (per unit volume), see :func:`cell_source`."""
    prod, dc = cell_source(nt, nu, omega, d, use_ft2)
    return prod - dc * nt


@njit(cache=True)
def assemble_sources(nt, nu, rho, vol, d, grad_u, grad_nt, use_ft2, diag, source):
    """Add the cell sources rho V (P - D + cb2/sigma |grad nt|^2) to one equation.

    P - D = s(nt) is linearised by Newton's rule about the current value, s(nt_new) ~ s(nt) +
    J (nt_new - nt), J = ds/dnt by a one-sided difference: where J < 0 (destruction growing
    faster than production) -J goes on the diagonal and s - J nt to the source; where J >= 0 the
    source is explicit. At convergence this is s(nt) exactly. (Picard's form, the destruction
    coefficient Dc = D/nt alone on the diagonal, under-estimates the derivative of the quadratic
    destruction by half and lets the outer iteration oscillate where destruction dominates.)
    The cb2 term is explicit. Omega = |dv/dx - du/dy| with grad_u[c, component, direction].
    """
    for c in range(nt.shape[0]):
        omega = abs(grad_u[c, 1, 0] - grad_u[c, 0, 1])
        gx = grad_nt[c, 0]
        gy = grad_nt[c, 1]
        rv = rho * vol[c]
        n = nt[c]
        s0 = net_source(n, nu, omega, d[c], use_ft2)
        h = 1e-6 * max(abs(n), 1e-3 * nu)
        if n < 0.0 and n + h > 0.0:
            h = -h  # stay on the negative branch
        jac = (net_source(n + h, nu, omega, d[c], use_ft2) - s0) / h
        s = s0 + CB2 / SIGMA * (gx * gx + gy * gy)
        if jac < 0.0:
            diag[c] -= rv * jac
            s -= jac * n
        source[c] += rv * s


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
def continuity_correction(owner, neighbour, nfi, flux, diag):
    """diag[c] -= sum of the face fluxes out of c: removes the mass-imbalance part of div(F phi)
    (zero at convergence); with upwind convection the diagonal stays the sum of the inflows."""
    nf = owner.shape[0]
    for f in range(nfi):
        diag[owner[f]] -= flux[f]
        diag[neighbour[f]] += flux[f]
    for f in range(nfi, nf):
        diag[owner[f]] -= flux[f]
