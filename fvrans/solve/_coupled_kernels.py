"""Numba kernels of the simultaneous u-v-p solve (``fvrans.solve.coupled``): the pattern of the
coupled matrix (made once) and the refill of its values in place, face sums, and the static blocks
as (row, column, value) triplets.

Unknowns are ordered (u_0..u_{n-1}, v_0..v_{n-1}, p_0..p_{n-1}). Face conventions are those of
``fvrans.mesh.geometry`` (S_f points out of the owner P; ``w`` the owner's interpolation weight).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from fvrans.jit import PARALLEL_MIN_CELLS as PAR_MIN


@njit(cache=True)
def face_sum_triplets(owner, neigh, n_int, S, w, on_boundary, scale):
    """sum_f phi_f (scale S_f) per cell as two nc x nc blocks on one pattern (values[:, d] for the
    component d of S_f): phi_f = w phi_P + (1 - w) phi_N inside, phi_P on the boundary faces where
    ``on_boundary[b]``, nothing on the others. With phi = p (scale 1, faces without a given pressure)
    the blocks are the pressure gradient G p; with phi = u_d (scale rho, faces with a given pressure:
    walls, symmetry planes and inflow have given fluxes) the velocity part of continuity."""
    nf = owner.shape[0]
    m = 4 * n_int + (nf - n_int)
    rows = np.empty(m, dtype=np.int64)
    cols = np.empty(m, dtype=np.int64)
    vals = np.zeros((m, 2))
    k = 0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        rows[k] = P
        cols[k] = P
        rows[k + 1] = P
        cols[k + 1] = N
        rows[k + 2] = N
        cols[k + 2] = P
        rows[k + 3] = N
        cols[k + 3] = N
        for d in range(2):
            s = scale * S[f, d]
            vals[k, d] = w[f] * s
            vals[k + 1, d] = (1.0 - w[f]) * s
            vals[k + 2, d] = -w[f] * s
            vals[k + 3, d] = -(1.0 - w[f]) * s
        k += 4
    for f in range(n_int, nf):
        P = owner[f]
        rows[k] = P
        cols[k] = P
        if on_boundary[f - n_int]:
            for d in range(2):
                vals[k, d] = scale * S[f, d]
        k += 1
    return rows, cols, vals


@njit(cache=True)
def pressure_difference_triplets(owner, neigh, n_int, dcoef, kvec, w, rbar, fixed, rho):
    """The pressure parts of the Rhie-Chow fluxes summed per cell, as three matrices on one pattern
    (values[:, 0..2]): the compact difference Lc p = sum_f -rho r_f dcoef (p_N - p_P) (p_N = 0 on faces
    with a given pressure, which is in the constant part) and the non-orthogonal parts
    Kx gx + Ky gy = sum_f rho r_f k_f . grad p_f, grad p_f = w grad p_P + (1 - w) grad p_N inside,
    grad p_P on faces with a given pressure; r_f = w rbar_P + (1 - w) rbar_N."""
    nf = owner.shape[0]
    nb = nf - n_int
    m = 4 * n_int + nb
    rows = np.empty(m, dtype=np.int64)
    cols = np.empty(m, dtype=np.int64)
    vals = np.zeros((m, 3))
    k = 0
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        r = rho * (wf * rbar[P] + (1.0 - wf) * rbar[N])
        a = r * dcoef[f]
        k0 = r * kvec[f, 0]
        k1 = r * kvec[f, 1]
        rows[k] = P
        cols[k] = P
        vals[k, 0] = a
        vals[k, 1] = wf * k0
        vals[k, 2] = wf * k1
        rows[k + 1] = P
        cols[k + 1] = N
        vals[k + 1, 0] = -a
        vals[k + 1, 1] = (1.0 - wf) * k0
        vals[k + 1, 2] = (1.0 - wf) * k1
        rows[k + 2] = N
        cols[k + 2] = N
        vals[k + 2, 0] = a
        vals[k + 2, 1] = -(1.0 - wf) * k0
        vals[k + 2, 2] = -(1.0 - wf) * k1
        rows[k + 3] = N
        cols[k + 3] = P
        vals[k + 3, 0] = -a
        vals[k + 3, 1] = -wf * k0
        vals[k + 3, 2] = -wf * k1
        k += 4
    for f in range(n_int, nf):
        P = owner[f]
        rows[k] = P
        cols[k] = P
        if fixed[f - n_int]:
            r = rho * rbar[P]
            vals[k, 0] = r * dcoef[f]
            vals[k, 1] = r * kvec[f, 0]
            vals[k, 2] = r * kvec[f, 1]
        k += 1
    return rows, cols, vals


@njit(cache=True)
def face_sums(owner, neigh, n_int, F, out):
    """out[c] += sum over the faces of c of F_f (out of the owner, into the neighbour)."""
    for f in range(n_int):
        out[owner[f]] += F[f]
        out[neigh[f]] -= F[f]
    for f in range(n_int, owner.shape[0]):
        out[owner[f]] += F[f]


@njit(cache=True)
def extrapolation_inverse(owner, n_int, S, delta, extrapolated, vol, limit):
    """M_c^-1 per cell (nc, 2, 2), M_c = I - sum_b S_b d_b^T / V_c over the cell's boundary faces whose
    value is extrapolated (p_b = p_P + grad p_P . d_b, d_b = x_f - x_P): the face-sum gradient with
    extrapolated boundary values, V g = sum_f p_f S_f, is g = M^-1 (G p) / V. Cells where M^-1 has an
    entry beyond ``limit`` (M near singular: on a quad wall cell M^-1 has 2, on some boundary triangles
    M is singular) get the identity."""
    nc = vol.shape[0]
    M = np.zeros((nc, 2, 2))
    for c in range(nc):
        M[c, 0, 0] = 1.0
        M[c, 1, 1] = 1.0
    for f in range(n_int, owner.shape[0]):
        if extrapolated[f - n_int]:
            P = owner[f]
            for i in range(2):
                for j in range(2):
                    M[P, i, j] -= S[f, i] * delta[f, j] / vol[P]
    out = np.zeros_like(M)
    for c in range(nc):
        det = M[c, 0, 0] * M[c, 1, 1] - M[c, 0, 1] * M[c, 1, 0]
        i00 = M[c, 1, 1] / det
        i11 = M[c, 0, 0] / det
        i01 = -M[c, 0, 1] / det
        i10 = -M[c, 1, 0] / det
        if det > 0.0 and max(abs(i00), abs(i11), abs(i01), abs(i10)) <= limit:
            out[c, 0, 0] = i00
            out[c, 1, 1] = i11
            out[c, 0, 1] = i01
            out[c, 1, 0] = i10
        else:  # the extrapolation nearly fixes itself (e.g. boundary triangles): left lagged, M^-1 = I
            out[c, 0, 0] = 1.0
            out[c, 1, 1] = 1.0
    return out


# -- the coupled matrix on a pattern made once, refilled in place every outer iteration -------------
#
# Rows of the system (cell c; compact(c) = c and its face neighbours, the CSR structure
# ``cind``/``cidx`` of ``fvrans.fv.assembly.CsrAssembler``; wall(c) the cells of the wall fits of
# c's wall faces):
#   u row c      [A_u + W_uu: compact(c) + wall(c) | W_uv: wall(c) | G_x: compact(c)]
#   v row c      [W_vu: wall(c) | A_v + W_vv: compact(c) + wall(c) | G_y: compact(c)]
#   p row c      [D_x: compact(c) | D_y: compact(c) | A_pp: compact(k) for every k in compact(c)]
# Every block is stored with its structural pattern (zeros where a coefficient happens to vanish),
# so the pattern depends on the mesh only. The G and D blocks of a row end / start the row, in the
# order of compact(c), so that their positions follow from the compact structure.


@njit(cache=True, nogil=True, inline="always")
def _position(indices, lo, hi, col):
    """Position of ``col`` in the sorted row ``indices[lo:hi]`` (binary search; the column is there)."""
    while lo < hi:
        mid = (lo + hi) >> 1
        if indices[mid] < col:
            lo = mid + 1
        else:
            hi = mid
    return lo


@njit(cache=True, nogil=True, inline="always")
def _take(col, r, mark, indices, k, fill):
    """Append ``col`` to row r (once: ``mark`` remembers the row that took it last); the new count."""
    if mark[col] != r:
        mark[col] = r
        if fill:
            indices[k] = col
        k += 1
    return k


@njit(cache=True)
def system_pattern(nc, cind, cidx, wptr, wcells, indptr, indices, fill):
    """The CSR pattern of the coupled system (rows above). ``fill`` False: ``indptr[r + 1]`` gets the
    length of row r (``indices`` unused); True: ``indices`` the sorted columns of every row."""
    mark = np.full(3 * nc, -1, dtype=np.int64)
    for c in range(nc):
        a, b = cind[c], cind[c + 1]
        for blk in range(3):
            r = blk * nc + c
            k = indptr[r] if fill else 0
            k0 = k
            if blk < 2:
                for j in range(a, b):
                    k = _take(blk * nc + cidx[j], r, mark, indices, k, fill)
                for j in range(wptr[c], wptr[c + 1]):
                    k = _take(wcells[j], r, mark, indices, k, fill)
                    k = _take(nc + wcells[j], r, mark, indices, k, fill)
                for j in range(a, b):
                    k = _take(2 * nc + cidx[j], r, mark, indices, k, fill)
            else:
                for j in range(a, b):
                    k = _take(cidx[j], r, mark, indices, k, fill)
                for j in range(a, b):
                    k = _take(nc + cidx[j], r, mark, indices, k, fill)
                for j in range(a, b):
                    q = cidx[j]
                    for i in range(cind[q], cind[q + 1]):
                        k = _take(2 * nc + cidx[i], r, mark, indices, k, fill)
            if fill:
                indices[k0:k].sort()
            else:
                indptr[r + 1] = k


@njit(cache=True)
def positions(indptr, indices, rows, cols, out):
    """out[e] = the position of (rows[e], cols[e]) in a CSR pattern (every pair is in it)."""
    for e in range(rows.shape[0]):
        out[e] = _position(indices, indptr[rows[e]], indptr[rows[e] + 1], cols[e])


@njit(cache=True, nogil=True, inline="always")
def _face_sum_row(c, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, on_boundary, scale, out, ox, oy):
    """Row c of the face sums of ``face_sum_triplets`` (components x, y), added into ``out[ox + j]``,
    ``out[oy + j]`` (j the place of the column in compact(c)), faces in face order."""
    a, b = cind[c], cind[c + 1]
    for i in range(cf_ptr[c], cf_ptr[c + 1]):
        code = cf_face[i]
        # an internal face seen from c: its other cell, the interpolation weights of c and of that
        # cell, and the sign of S_f out of c
        if code >= 0:
            f = code
            if f >= n_int:
                if on_boundary[f - n_int]:
                    jd = _position(cidx, a, b, c) - a
                    out[ox + jd] += scale * S[f, 0]
                    out[oy + jd] += scale * S[f, 1]
                continue
            other, w_self, w_other, sign = neigh[f], w[f], 1.0 - w[f], 1.0
        else:
            f = -1 - code
            other, w_self, w_other, sign = owner[f], 1.0 - w[f], w[f], -1.0
        jd = _position(cidx, a, b, c) - a
        jo = _position(cidx, a, b, other) - a
        for d in range(2):
            s = scale * S[f, d]
            o = ox if d == 0 else oy
            out[o + jd] += sign * w_self * s
            out[o + jo] += sign * w_other * s


@njit(cache=True)
def gradient_values(nc, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, on_boundary, minv, out):
    """Values of G = M^-1 G0 (2nc x nc, rows [x; y], each block on the compact structure: x in
    ``out[:nnz]``, y in ``out[nnz:]``): G0 the face sums sum_f p_f S_f of ``face_sum_triplets``
    (faces where ``on_boundary``), M^-1 per cell (``extrapolation_inverse``)."""
    nnz = cidx.shape[0]
    out[:] = 0.0
    for c in range(nc):
        a = cind[c]
        _face_sum_row(c, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, on_boundary, 1.0, out, a, nnz + a)
        for j in range(a, cind[c + 1]):
            gx = out[j]
            gy = out[nnz + j]
            out[j] = minv[c, 0, 0] * gx + minv[c, 0, 1] * gy
            out[nnz + j] = minv[c, 1, 0] * gx + minv[c, 1, 1] * gy


@njit(cache=True)
def gradient_slots(nc, cind, indptr, data, g, into):
    """Copy G's values between ``g`` (x block in ``g[:nnz]``, y block in ``g[nnz:]``, each on the compact
    structure ``cind``) and their places in the system's values ``data``: the last entries of each
    momentum row (row c of u, row nc + c of v), in the order of compact(c). ``into``: g -> data,
    else data -> g."""
    nnz = cind[nc]
    for d in range(2):
        for c in range(nc):
            a, b = cind[c], cind[c + 1]
            t = indptr[d * nc + c + 1] - (b - a)
            for j in range(b - a):
                if into:
                    data[t + j] = g[d * nnz + a + j]
                else:
                    g[d * nnz + a + j] = data[t + j]


@njit(cache=True, nogil=True)
def gradient_product(nc, cind, cidx, indptr, data, p, first, last, out):
    """out[r - first] = (G p)[r] for the rows r in [first, last) of G (2nc x nc; rows [x; y]), G read from the
    system's momentum rows (``gradient_slots``): each row summed from 0 in column order, as a CSR
    product sums it (one thread: on a shared machine the parallel loop was slower)."""
    for d in range(2):
        lo = max(first - d * nc, 0)
        hi = min(last - d * nc, nc)
        for c in range(lo, hi):
            a, b = cind[c], cind[c + 1]
            t = indptr[d * nc + c + 1] - (b - a)
            acc = 0.0
            for j in range(b - a):
                acc += data[t + j] * p[cidx[a + j]]
            out[d * nc + c - first] = acc


@njit(cache=True, nogil=True, inline="always")
def _momentum_row(c, d, nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, indptr,
                  indices, data):
    r = d * nc + c
    lo, hi = indptr[r], indptr[r + 1]
    for k in range(lo, hi):
        data[k] = 0.0
    data[_position(indices, lo, hi, d * nc + c)] = a_rel[c, d]
    for i in range(cf_ptr[c], cf_ptr[c + 1]):
        code = cf_face[i]
        if code >= 0:
            if code < n_int:
                data[_position(indices, lo, hi, d * nc + neigh[code])] += off_own[code]
        else:
            f = -1 - code
            data[_position(indices, lo, hi, d * nc + owner[f])] += off_nei[f]
    # G: the last entries of the row, in the order of compact(c)
    a, b = cind[c], cind[c + 1]
    g0 = d * cind[nc] + a
    t = hi - (b - a)
    for j in range(b - a):
        data[t + j] = g_data[g0 + j]


@njit(cache=True, parallel=True)
def momentum_rows(nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, wall_data,
                  wall_pos, indptr, indices, data):
    """Refill the u and v rows of the system: A_u, A_v (diagonals ``a_rel[:, 0]``, ``a_rel[:, 1]``, ``off_own[f]``
    for the neighbour in the owner's row, ``off_nei[f]`` for the owner in the neighbour's row), plus
    the wall-flux matrix's values ``wall_data`` at ``wall_pos``, and G (``g_data`` as
    ``gradient_values`` made it). Each row is written by one thread."""
    if nc >= PAR_MIN:
        for c in prange(nc):
            _momentum_row(c, 0, nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, indptr,
                          indices, data)
            _momentum_row(c, 1, nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, indptr,
                          indices, data)
    else:
        for c in range(nc):
            _momentum_row(c, 0, nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, indptr,
                          indices, data)
            _momentum_row(c, 1, nc, cind, cf_ptr, cf_face, owner, neigh, n_int, a_rel, off_own, off_nei, g_data, indptr,
                          indices, data)
    for k in range(wall_pos.shape[0]):
        data[wall_pos[k]] += wall_data[k]


@njit(cache=True, nogil=True)
def _continuity_chunk(first, last, nc, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, dcoef, kvec, rbar, r_u,
                      r_v, vol, fixed, rho, implicit, g_data, E, gp, c0, indptr, indices, data, rhs):
    """Rows [first, last) of ``continuity_rows``, with their own position marks (``mark``: nc int32, -1 but
    for the pressure columns of the row being filled) and per-column scratch."""
    width = 0
    for c in range(first, last):
        width = max(width, cind[c + 1] - cind[c])
    mark = np.full(nc, -1, dtype=np.int32)
    lcj = np.empty(width)
    kxj = np.empty(width)
    kyj = np.empty(width)
    for c in range(first, last):
        r = 2 * nc + c
        lo, hi = indptr[r], indptr[r + 1]
        for k in range(lo, hi):
            data[k] = 0.0
        a, b = cind[c], cind[c + 1]
        L = b - a
        nnz = cind[nc]
        _face_sum_row(c, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, fixed, rho, data, lo, lo + L)
        # the Rhie-Chow pressure terms of row c per column of compact(c) (``pressure_difference_triplets``),
        # each summed over the faces of c in face order: the faces' terms go to the columns of c and of the
        # face's other cell
        for j in range(L):
            lcj[j] = 0.0
            kxj[j] = 0.0
            kyj[j] = 0.0
        jc = _position(cidx, a, b, c) - a
        for i in range(cf_ptr[c], cf_ptr[c + 1]):
            code = cf_face[i]
            # an internal face seen from c, as in ``_face_sum_row``
            if code >= 0:
                f = code
                if f >= n_int:
                    if fixed[f - n_int]:
                        rf = rho * rbar[c]
                        lcj[jc] += rf * dcoef[f]
                        kxj[jc] += rf * kvec[f, 0]
                        kyj[jc] += rf * kvec[f, 1]
                    continue
                other, w_self, w_other, sign = neigh[f], w[f], 1.0 - w[f], 1.0
            else:
                f = -1 - code
                other, w_self, w_other, sign = owner[f], 1.0 - w[f], w[f], -1.0
            rf = rho * (w_self * rbar[c] + w_other * rbar[other])
            af = rf * dcoef[f]
            k0 = rf * kvec[f, 0]
            k1 = rf * kvec[f, 1]
            lcj[jc] += af
            kxj[jc] += sign * w_self * k0
            kyj[jc] += sign * w_self * k1
            jo = _position(cidx, a, b, other) - a
            lcj[jo] += -af
            kxj[jo] += sign * w_other * k0
            kyj[jo] += sign * w_other * k1
        p0 = lo + 2 * L
        for q in range(p0, hi):
            mark[indices[q] - 2 * nc] = q
        s = 0.0
        for j in range(L):
            k = cidx[a + j]
            # W = D diag(r) - [Kx Ky]: continuity's response to the cell pressure gradients
            wx = data[lo + j] * r_u[k] - kxj[j]
            wy = data[lo + L + j] * r_v[k] - kyj[j]
            data[mark[k]] += lcj[j]
            if implicit:
                # grad p_k = V_k^-1 (G p + E)_k: A_pp += W V^-1 G, right-hand side -= W V^-1 E
                wx = wx * (1.0 / vol[k])
                wy = wy * (1.0 / vol[k])
                for i in range(cind[k], cind[k + 1]):
                    q = mark[cidx[i]]
                    data[q] += wx * g_data[i] + wy * g_data[nnz + i]
                s += wx * E[k] + wy * E[nc + k]
            else:
                s += wx * gp[k, 0] + wy * gp[k, 1]
        for q in range(p0, hi):
            mark[indices[q] - 2 * nc] = -1
        rhs[c] = -(c0[c] + s)


@njit(cache=True, parallel=True)
def continuity_rows(nc, cind, cidx, cf_ptr, cf_face, owner, neigh, n_int, S, w, dcoef, kvec, rbar, r_u, r_v, vol,
                    fixed, rho, implicit, g_data, E, gp, c0, indptr, indices, data, rhs, threads):
    """Refill the continuity rows: D (rho times the face sums on faces with a given pressure), and
    A_pp = Lc + W V^-1 G with W = D diag(r_u, r_v) - [Kx Ky] (``implicit``; else Lc alone), and their
    right-hand side -(c0 + W V^-1 E) (else -(c0 + W grad p)). Each row is written by one thread, its
    sums in a fixed order (the same bits on any thread count): the rows in one chunk per thread
    (``threads``, the parallel kernels' thread count: ``fvrans.jit.threads``).

    Per row: the Rhie-Chow pressure terms per column of compact(c) (``pressure_difference_triplets``),
    each summed over the faces of c in face order (a face's terms go to the columns of c and of its
    other cell), and the pressure columns found through marks set for the row (not searched)."""
    chunks = max(threads, 1) if nc >= PAR_MIN else 1
    for t in prange(chunks):
        _continuity_chunk(t * nc // chunks, (t + 1) * nc // chunks, nc, cind, cidx, cf_ptr, cf_face, owner, neigh,
                          n_int, S, w, dcoef, kvec, rbar, r_u, r_v, vol, fixed, rho, implicit, g_data, E, gp, c0,
                          indptr, indices, data, rhs)


@njit(cache=True)
def wall_flux_values(pos, geo, t_row, t_col, faces, dpos, wall_faces, muf, dcoef, data):
    """Values of the wall-flux matrix on its pattern: -mu_f (n . S)(coef_q . n) t_i t_j at ``pos[e]``
    for the stencil entries, -mu_f dcoef_f on the diagonal of both components (``dpos``)."""
    data[:] = 0.0
    for e in range(pos.shape[0]):
        data[pos[e]] += -muf[faces[e]] * geo[e] * t_row[e] * t_col[e]
    nw = wall_faces.shape[0]
    for k in range(nw):
        f = wall_faces[k]
        v = -muf[f] * dcoef[f]
        data[dpos[k]] += v
        data[dpos[nw + k]] += v


@njit(cache=True)
def convection_newton(nc, owner, neigh, n_int, S, w, xf, xc, shift, rho, u, gu, F, flux_faces, ub, indptr, indices,
                      data, rhs):
    """Add the Newton part of the convection term's linearisation to the momentum rows (Picard's part,
    F_old u_new, is ``assemble_momentum``'s), in its convective form: on each face and for each of its
    cells C, (F~(u_new) - F~(u_old)) (phi_f - u_C) with the sign of the face's flux out of C, where
    F~(u) = rho u_f . S_f (u_f linearly interpolated; ``flux_faces``: the boundary faces whose flux follows
    the cell's velocity, u_f = u_P there), phi_f the old face value (upwind cell by the sign of the face
    flux ``F``, moved to the face with its gradient ``gu``; ``ub`` on a boundary face) and u_C the old
    cell value: the derivative of (u . grad) u with respect to the convecting velocity. Subtracting u_C
    drops u_C sum_f dF~_f, which continuity makes zero for the Rhie-Chow fluxes but not for F~ (in the
    conservative form, without it, the laminar plate's outer iterations slowed from 18 to 90). The
    matrix part rho w S_f,d (phi_f,c - u_C,c) goes into row (c, C), column (d, Q); F~(u_old) (phi_f - u_C)
    into the right-hand side. Zero at convergence, so the fixed point is Picard's."""
    for f in range(n_int):
        P = owner[f]
        N = neigh[f]
        wf = w[f]
        f_old = rho * (wf * (u[P, 0] * S[f, 0] + u[P, 1] * S[f, 1])
                       + (1.0 - wf) * (u[N, 0] * S[f, 0] + u[N, 1] * S[f, 1]))
        for c in range(2):
            if F[f] >= 0.0:
                phi = u[P, c] + gu[P, c, 0] * (xf[f, 0] - xc[P, 0]) + gu[P, c, 1] * (xf[f, 1] - xc[P, 1])
            else:
                phi = u[N, c] + gu[N, c, 0] * (xf[f, 0] - xc[N, 0] - shift[f, 0]) + gu[N, c, 1] * (
                    xf[f, 1] - xc[N, 1] - shift[f, 1])
            for side in range(2):
                cell = P if side == 0 else N
                sign = 1.0 if side == 0 else -1.0
                r = c * nc + cell
                lo, hi = indptr[r], indptr[r + 1]
                dphi = phi - u[cell, c]
                rhs[r] += sign * f_old * dphi
                for d in range(2):
                    v = sign * rho * S[f, d] * dphi
                    data[_position(indices, lo, hi, d * nc + P)] += wf * v
                    data[_position(indices, lo, hi, d * nc + N)] += (1.0 - wf) * v
    for k in range(flux_faces.shape[0]):
        f = flux_faces[k]
        P = owner[f]
        b = f - n_int
        f_old = rho * (u[P, 0] * S[f, 0] + u[P, 1] * S[f, 1])
        for c in range(2):
            r = c * nc + P
            lo, hi = indptr[r], indptr[r + 1]
            dphi = ub[b, c] - u[P, c]
            rhs[r] += f_old * dphi
            for d in range(2):
                data[_position(indices, lo, hi, d * nc + P)] += rho * S[f, d] * dphi
