"""numba kernels for cell gradients, face interpolation and slope limiters (arrays and scalars only).

Face conventions (see fvrans.mesh.geometry): internal faces ``0 .. nfi-1`` have an owner and a
neighbour, boundary faces ``nfi .. nf-1`` only an owner; boundary face ``f`` has the boundary
value ``phi_b[f - nfi]``. ``delta`` is x_N - x_O (x_f - x_O on the boundary), ``sf`` the area
vector out of the owner, ``weight`` the owner weight at the intersection point and ``skew`` the
vector from that point to the face centre.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN


@njit(cache=True)
def lsq_matrices(owner, neighbour, nfi, delta, n_cells, minv, wd):
    """Fill ``wd = d/|d|^2`` (nf, 2) and ``minv`` (nc, 3) = packed (xx, xy, yy) inverse of
    M = sum_j d_j d_j^T / |d_j|^2 over the faces of each cell. Returns the first cell whose M is
    singular (relative determinant below 1e-12), or -1."""
    nf = owner.shape[0]
    m = np.zeros((n_cells, 3))
    for f in range(nf):
        dx = delta[f, 0]
        dy = delta[f, 1]
        r = 1.0 / (dx * dx + dy * dy)
        wd[f, 0] = dx * r
        wd[f, 1] = dy * r
        axx = dx * dx * r
        axy = dx * dy * r
        ayy = dy * dy * r
        o = owner[f]
        m[o, 0] += axx
        m[o, 1] += axy
        m[o, 2] += ayy
        if f < nfi:
            n = neighbour[f]
            m[n, 0] += axx
            m[n, 1] += axy
            m[n, 2] += ayy
    bad = -1
    for c in range(n_cells):
        a = m[c, 0]
        b = m[c, 1]
        d = m[c, 2]
        det = a * d - b * b
        tr = a + d
        if not det > 1e-12 * tr * tr:
            if bad < 0:
                bad = c
            minv[c, 0] = 0.0
            minv[c, 1] = 0.0
            minv[c, 2] = 0.0
            continue
        r = 1.0 / det
        minv[c, 0] = d * r
        minv[c, 1] = -b * r
        minv[c, 2] = a * r
    return bad


@njit(cache=True, nogil=True, inline="always")
def _lsq_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, wd, minv, phi, phi_b, out):
    bx = 0.0
    by = 0.0
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        if f < 0:
            f = -1 - f  # the neighbour sees the same vector and difference as the owner
        if f < nfi:
            dp = phi[neighbour[f]] - phi[owner[f]]
        else:
            dp = phi_b[f - nfi] - phi[c]
        bx += wd[f, 0] * dp
        by += wd[f, 1] * dp
    out[c, 0] = minv[c, 0] * bx + minv[c, 1] * by
    out[c, 1] = minv[c, 1] * bx + minv[c, 2] * by


@njit(cache=True, nogil=True, parallel=True)
def lsq_gradient(owner, neighbour, nfi, cf_ptr, cf_face, wd, minv, phi, phi_b, out):
    """Weighted least-squares gradient: g_c = M_c^-1 sum_j (d_j/|d_j|^2)(phi_j - phi_c).

    For an internal face both cells see the same vector d (phi_N - phi_O)/|d|^2, since the
    neighbour's offset is -d and its difference -(phi_N - phi_O). Summed per cell over its faces
    (``Mesh.cell_faces``: ``cf_ptr``, ``cf_face``), on every thread for large meshes."""
    nc = phi.shape[0]
    if nc >= PAR_MIN:
        for c in prange(nc):
            _lsq_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, wd, minv, phi, phi_b, out)
    else:
        for c in range(nc):
            _lsq_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, wd, minv, phi, phi_b, out)


@njit(cache=True, nogil=True, inline="always")
def _interior_face_value(f, owner, neighbour, weight, skew, phi, grad, use_grad):
    """phi_f = w phi_O + (1-w) phi_N [+ (x_f - x_ip) . (w g_O + (1-w) g_N)] on internal face f."""
    o = owner[f]
    n = neighbour[f]
    w = weight[f]
    pf = w * phi[o] + (1.0 - w) * phi[n]
    if use_grad:
        gx = w * grad[o, 0] + (1.0 - w) * grad[n, 0]
        gy = w * grad[o, 1] + (1.0 - w) * grad[n, 1]
        pf += skew[f, 0] * gx + skew[f, 1] * gy
    return pf


@njit(cache=True, nogil=True, inline="always")
def _green_gauss_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, sf, weight, skew, area, phi, phi_b, g_old,
                      use_skew, out):
    sx = 0.0
    sy = 0.0
    for k in range(cf_ptr[c], cf_ptr[c + 1]):
        f = cf_face[k]
        sign = 1.0
        if f < 0:
            f = -1 - f
            sign = -1.0
        if f < nfi:
            pf = _interior_face_value(f, owner, neighbour, weight, skew, phi, g_old, use_skew)
        else:
            pf = phi_b[f - nfi]
        sx += sign * (pf * sf[f, 0])
        sy += sign * (pf * sf[f, 1])
    r = 1.0 / area[c]
    out[c, 0] = sx * r
    out[c, 1] = sy * r


@njit(cache=True, nogil=True, parallel=True)
def green_gauss_pass(owner, neighbour, nfi, cf_ptr, cf_face, sf, weight, skew, area, phi, phi_b, g_old, use_skew,
                     out):
    """One Green-Gauss pass: g_c = (1/V_c) sum_f phi_f S_f with
    phi_f = w phi_O + (1-w) phi_N [+ (x_f - x_ip) . (w g_O + (1-w) g_N) if use_skew], phi_b on
    the boundary; summed per cell over ``Mesh.cell_faces``. ``out`` must not be ``g_old``."""
    nc = phi.shape[0]
    if nc >= PAR_MIN:
        for c in prange(nc):
            _green_gauss_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, sf, weight, skew, area, phi, phi_b,
                              g_old, use_skew, out)
    else:
        for c in range(nc):
            _green_gauss_cell(c, owner, neighbour, nfi, cf_ptr, cf_face, sf, weight, skew, area, phi, phi_b,
                              g_old, use_skew, out)


@njit(cache=True)
def face_interpolate(owner, neighbour, nfi, weight, skew, phi, phi_b, grad, use_grad, out):
    """phi_f = w phi_O + (1-w) phi_N [+ (x_f - x_ip) . (w g_O + (1-w) g_N)]; phi_b on the boundary."""
    nf = owner.shape[0]
    for f in range(nfi):
        out[f] = _interior_face_value(f, owner, neighbour, weight, skew, phi, grad, use_grad)
    for f in range(nfi, nf):
        out[f] = phi_b[f - nfi]


@njit(cache=True)
def _limit_one(d1, d2, kind, eps2):
    """Limiter value for an unlimited increment d2 and the allowed increment d1 (same sign)."""
    if kind == 0:  # Barth & Jespersen (1989)
        r = d1 / d2
        return r if r < 1.0 else 1.0
    # Venkatakrishnan (1995), eq. for phi(d1, d2) with eps^2
    d1s = d1 * d1
    return (d1s + eps2 + 2.0 * d2 * d1) / (d1s + 2.0 * d2 * d2 + d1 * d2 + eps2)


@njit(cache=True)
def slope_limiter(owner, neighbour, nfi, face_centre, cell_centre, shift, phi, phi_b, grad, kind, eps2, psi):
    """Per-cell limiter psi in [0, 1] so that phi_c + psi g_c . (x_f - x_c) stays within the
    min/max of phi over the cell and its face neighbours (boundary values included); a neighbour
    sees the face at x_f - ``shift[f]`` (its side of a periodic face).
    kind 0 = Barth-Jespersen, 1 = Venkatakrishnan with eps2[c] = (K h_c)^3."""
    nc = phi.shape[0]
    nf = owner.shape[0]
    pmax = np.empty(nc)
    pmin = np.empty(nc)
    for c in range(nc):
        pmax[c] = phi[c]
        pmin[c] = phi[c]
        psi[c] = 1.0
    for f in range(nfi):
        o = owner[f]
        n = neighbour[f]
        po = phi[o]
        pn = phi[n]
        if pn > pmax[o]:
            pmax[o] = pn
        if pn < pmin[o]:
            pmin[o] = pn
        if po > pmax[n]:
            pmax[n] = po
        if po < pmin[n]:
            pmin[n] = po
    for f in range(nfi, nf):
        o = owner[f]
        pb = phi_b[f - nfi]
        if pb > pmax[o]:
            pmax[o] = pb
        if pb < pmin[o]:
            pmin[o] = pb
    for f in range(nf):
        for side in range(2):
            s0 = 0.0
            s1 = 0.0
            if side == 0:
                c = owner[f]
            elif f < nfi:
                c = neighbour[f]
                s0 = shift[f, 0]
                s1 = shift[f, 1]
            else:
                break
            d2 = grad[c, 0] * (face_centre[f, 0] - cell_centre[c, 0] - s0) + grad[c, 1] * (
                face_centre[f, 1] - cell_centre[c, 1] - s1
            )
            if d2 > 0.0:
                d1 = pmax[c] - phi[c]
            elif d2 < 0.0:
                d1 = pmin[c] - phi[c]
            else:
                continue
            r = _limit_one(d1, d2, kind, eps2[c])
            if r < psi[c]:
                psi[c] = r
    for c in range(nc):
        if psi[c] < 0.0:
            psi[c] = 0.0


@njit(cache=True)
def vertex_stencils(cell_offsets, cell_points, point_cell_ptr, point_cells, point_bface_ptr, point_bfaces, nfi):
    """Vertex-neighbour stencil of every cell: the other cells sharing a vertex with it, then the
    boundary faces touching one of its vertices (entry ``-1 - b`` for boundary face ``nfi + b``).
    Returns (ptr, idx) in CSR form."""
    nc = cell_offsets.shape[0] - 1
    stamp_c = np.full(nc, -1, dtype=np.int64)
    nbmax = 0
    for k in range(point_bfaces.shape[0]):
        if point_bfaces[k] - nfi + 1 > nbmax:
            nbmax = point_bfaces[k] - nfi + 1
    stamp_b = np.full(nbmax + 1, -1, dtype=np.int64)
    ptr = np.zeros(nc + 1, dtype=np.int64)
    for sweep in range(2):
        if sweep == 1:
            idx = np.empty(ptr[nc], dtype=np.int64)
            stamp_c[:] = -1
            stamp_b[:] = -1
        else:
            idx = np.empty(0, dtype=np.int64)
        for c in range(nc):
            stamp_c[c] = c
            k = ptr[c]
            n = 0
            for q in range(cell_offsets[c], cell_offsets[c + 1]):
                v = cell_points[q]
                for r in range(point_cell_ptr[v], point_cell_ptr[v + 1]):
                    j = point_cells[r]
                    if stamp_c[j] != c:
                        stamp_c[j] = c
                        if sweep == 1:
                            idx[k + n] = j
                        n += 1
            for q in range(cell_offsets[c], cell_offsets[c + 1]):
                v = cell_points[q]
                for r in range(point_bface_ptr[v], point_bface_ptr[v + 1]):
                    b = point_bfaces[r] - nfi
                    if stamp_b[b] != c:
                        stamp_b[b] = c
                        if sweep == 1:
                            idx[k + n] = -1 - b
                        n += 1
            if sweep == 0:
                ptr[c + 1] = ptr[c] + n
    return ptr, idx


@njit(cache=True)
def quadratic_fit_matrices(ptr, idx, cell_centre, face_centre, area, nfi, coef):
    """Weighted least-squares quadratic fit through the cell value: for stencil point j at offset
    d_j = x_j - x_c, minimise sum_j |d_j|^-2 (phi_j - phi_c - g . d_j - d_j^T H d_j / 2)^2.
    ``coef[k]`` (nnz, 5) holds the rows giving (g_x, g_y, H_xx, H_xy, H_yy) = sum_k coef[k]
    (phi_j - phi_c). Exact for quadratic fields. Returns the number of cells whose fit is
    singular (their rows are zero)."""
    nc = ptr.shape[0] - 1
    bad = 0
    a = np.empty(5)
    for c in range(nc):
        h = np.sqrt(area[c])
        m = np.zeros((5, 5))
        for k in range(ptr[c], ptr[c + 1]):
            j = idx[k]
            if j >= 0:
                r0 = (cell_centre[j, 0] - cell_centre[c, 0]) / h
                r1 = (cell_centre[j, 1] - cell_centre[c, 1]) / h
            else:
                f = nfi - 1 - j
                r0 = (face_centre[f, 0] - cell_centre[c, 0]) / h
                r1 = (face_centre[f, 1] - cell_centre[c, 1]) / h
            wgt = 1.0 / (r0 * r0 + r1 * r1)
            a[0] = r0
            a[1] = r1
            a[2] = 0.5 * r0 * r0
            a[3] = r0 * r1
            a[4] = 0.5 * r1 * r1
            for p in range(5):
                coef[k, p] = wgt * a[p]
                for q in range(5):
                    m[p, q] += wgt * a[p] * a[q]
        ev = np.linalg.eigvalsh(m)
        if ptr[c + 1] - ptr[c] < 5 or not ev[0] > 1e-8 * ev[4]:
            bad += 1
            for k in range(ptr[c], ptr[c + 1]):
                for p in range(5):
                    coef[k, p] = 0.0
            continue
        minv = np.linalg.inv(m)
        for k in range(ptr[c], ptr[c + 1]):
            for p in range(5):
                a[p] = coef[k, p]
            for p in range(5):
                s = 0.0
                for q in range(5):
                    s += minv[p, q] * a[q]
                coef[k, p] = s / (h if p < 2 else h * h)
    return bad


@njit(cache=True)
def quadratic_fit_hessian(ptr, idx, coef, phi, phi_b, out):
    """Second derivatives (H_xx, H_xy, H_yy) of every component of phi (nc, m) from the
    quadratic fit; ``phi_b`` (nb, m) are the boundary face values. ``out`` is (nc, m, 3)."""
    nc = phi.shape[0]
    m = phi.shape[1]
    for c in range(nc):
        for i in range(m):
            h0 = 0.0
            h1 = 0.0
            h2 = 0.0
            pc = phi[c, i]
            for k in range(ptr[c], ptr[c + 1]):
                j = idx[k]
                dphi = (phi[j, i] if j >= 0 else phi_b[-1 - j, i]) - pc
                h0 += coef[k, 2] * dphi
                h1 += coef[k, 3] * dphi
                h2 += coef[k, 4] * dphi
            out[c, i, 0] = h0
            out[c, i, 1] = h1
            out[c, i, 2] = h2
