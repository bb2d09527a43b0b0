"""numba kernels adding diffusion and convection terms to face-based coefficient arrays.

Row c of the system reads  diag[c] phi_c + sum_f off[f] phi_nb = source[c]; ``off_owner[f]``
multiplies phi_N in the owner's row, ``off_neighbour[f]`` phi_O in the neighbour's row. All
kernels ADD to the arrays they are given.
"""

from __future__ import annotations

from numba import njit


@njit(cache=True)
def diffusion(owner, neighbour, nfi, sf, delta, weight, gamma_f, bkind, bvalue, grad, correct,
              diag, off_owner, off_neighbour, source):
    """-div(Gamma grad phi) with the over-relaxed non-orthogonal decomposition (Jasak 1996):
    S_f = Delta + k, Delta = (|S|^2 / (S . d)) d. The part along d is implicit,
    Gamma_f |S|^2/(S . d) (phi_N - phi_O); Gamma_f k . (grad phi)_f goes to the source if
    ``correct`` (face gradient = w g_O + (1-w) g_N inside, g_O on boundary faces).
    Boundary kind 0: phi_b = bvalue (implicit, distance to the face centre); kind 1: outward
    normal gradient bvalue, flux Gamma_f bvalue |S| in the source."""
    nf = owner.shape[0]
    for f in range(nfi):
        o = owner[f]
        n = neighbour[f]
        sx = sf[f, 0]
        sy = sf[f, 1]
        dx = delta[f, 0]
        dy = delta[f, 1]
        s2 = sx * sx + sy * sy
        r = s2 / (sx * dx + sy * dy)
        g = gamma_f[f]
        a = g * r
        diag[o] += a
        diag[n] += a
        off_owner[f] -= a
        off_neighbour[f] -= a
        if correct:
            kx = sx - r * dx
            ky = sy - r * dy
            w = weight[f]
            gx = w * grad[o, 0] + (1.0 - w) * grad[n, 0]
            gy = w * grad[o, 1] + (1.0 - w) * grad[n, 1]
            q = g * (kx * gx + ky * gy)
            source[o] += q
            source[n] -= q
    for f in range(nfi, nf):
        o = owner[f]
        i = f - nfi
        sx = sf[f, 0]
        sy = sf[f, 1]
        g = gamma_f[f]
        s2 = sx * sx + sy * sy
        if bkind[i] == 0:
            dx = delta[f, 0]
            dy = delta[f, 1]
            r = s2 / (sx * dx + sy * dy)
            a = g * r
            diag[o] += a
            source[o] += a * bvalue[i]
            if correct:
                kx = sx - r * dx
                ky = sy - r * dy
                source[o] += g * (kx * grad[o, 0] + ky * grad[o, 1])
        else:
            source[o] += g * bvalue[i] * s2**0.5


@njit(cache=True)
def convection(owner, neighbour, nfi, flux, phi_b, face_centre, cell_centre, shift, grad, high_order,
               diag, off_owner, off_neighbour, source):
    """div(F phi) with face mass fluxes F (> 0 out of the owner). Implicit first-order upwind;
    if ``high_order``, the linear-upwind value phi_U + g_U . (x_f - x_U) by deferred correction
    (the difference to upwind goes to the source; the neighbour at x_N + ``shift[f]``, its image
    across a periodic face). Boundary: inflow (F < 0) takes phi_b, outflow the upwind (owner)
    value, reconstructed with g_O if ``high_order``."""
    nf = owner.shape[0]
    for f in range(nfi):
        o = owner[f]
        n = neighbour[f]
        F = flux[f]
        if F >= 0.0:
            diag[o] += F
            off_neighbour[f] -= F
            if high_order:
                q = F * (grad[o, 0] * (face_centre[f, 0] - cell_centre[o, 0])
                         + grad[o, 1] * (face_centre[f, 1] - cell_centre[o, 1]))
                source[o] -= q
                source[n] += q
        else:
            off_owner[f] += F
            diag[n] -= F
            if high_order:
                q = F * (grad[n, 0] * (face_centre[f, 0] - cell_centre[n, 0] - shift[f, 0])
                         + grad[n, 1] * (face_centre[f, 1] - cell_centre[n, 1] - shift[f, 1]))
                source[o] -= q
                source[n] += q
    for f in range(nfi, nf):
        o = owner[f]
        F = flux[f]
        if F >= 0.0:
            diag[o] += F
            if high_order:
                source[o] -= F * (grad[o, 0] * (face_centre[f, 0] - cell_centre[o, 0])
                                  + grad[o, 1] * (face_centre[f, 1] - cell_centre[o, 1]))
        else:
            source[o] -= F * phi_b[f - nfi]


@njit(cache=True)
def stress_divergence(owner, neighbour, nfi, sf, weight, normal, bmode, stress, out):
    """out[c] = sum_f T_f . S_f over the faces of c (outward S): the integral of div T over the
    cell, T symmetric given per cell as (T_xx, T_xy, T_yy). Inside T_f = w T_O + (1-w) T_N;
    boundary faces by ``bmode``: 0 zero stress, 1 the owner value, 2 the owner's normal-normal
    part only, (n . T_O . n) n (no shear along the face)."""
    nc = out.shape[0]
    nf = owner.shape[0]
    for c in range(nc):
        out[c, 0] = 0.0
        out[c, 1] = 0.0
    for f in range(nfi):
        o = owner[f]
        n = neighbour[f]
        w = weight[f]
        txx = w * stress[o, 0] + (1.0 - w) * stress[n, 0]
        txy = w * stress[o, 1] + (1.0 - w) * stress[n, 1]
        tyy = w * stress[o, 2] + (1.0 - w) * stress[n, 2]
        fx = txx * sf[f, 0] + txy * sf[f, 1]
        fy = txy * sf[f, 0] + tyy * sf[f, 1]
        out[o, 0] += fx
        out[o, 1] += fy
        out[n, 0] -= fx
        out[n, 1] -= fy
    for f in range(nfi, nf):
        mode = bmode[f - nfi]
        if mode == 0:
            continue
        o = owner[f]
        txx = stress[o, 0]
        txy = stress[o, 1]
        tyy = stress[o, 2]
        fx = txx * sf[f, 0] + txy * sf[f, 1]
        fy = txy * sf[f, 0] + tyy * sf[f, 1]
        if mode == 2:
            n0 = normal[f, 0]
            n1 = normal[f, 1]
            fn = fx * n0 + fy * n1
            fx = fn * n0
            fy = fn * n1
        out[o, 0] += fx
        out[o, 1] += fy
