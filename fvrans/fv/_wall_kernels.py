"""numba kernels of the wall-face gradient (arrays and scalars only; see ``fvrans.fv.wall_gradient``)."""

from __future__ import annotations

import numpy as np
from numba import njit

#: singular values of the scaled fit below this fraction of the largest count as zero
RANK_TOLERANCE = 1e-7


@njit(cache=True)
def wall_coordinates(faces, nfi, ptr, idx, cell_centre, face_centre, chain_start, chain_stop, chain, s_face,
                     open_ends, out, beyond):
    """Wall coordinates of every stencil point: out[m] = (s, eta, t_x, t_y) with s the arc length
    along the face's wall chain (a polyline through the wall faces around it, ``chain[chain_start[k]:
    chain_stop[k]]`` in the direction of the face tangent) from the face centre (at arc length
    ``s_face[k]``), eta the distance from the chain (positive on the fluid side, to the right of the
    walk), and (t_x, t_y) the direction of the chain segment nearest to the point. ``beyond[m]``:
    the point lies past an end of the chain where the wall ends (``open_ends[k]``: at its start,
    at its end), so not above the wall (ahead of a leading edge, across a corner)."""
    for k in range(faces.shape[0]):
        c0 = chain_start[k]
        c1 = chain_stop[k]
        for q in range(ptr[k], ptr[k + 1]):
            j = idx[q]
            if j >= 0:
                x = cell_centre[j, 0]
                y = cell_centre[j, 1]
            else:
                x = face_centre[nfi - 1 - j, 0]
                y = face_centre[nfi - 1 - j, 1]
            best = 1e300
            arc = 0.0
            beyond[q] = False
            for i in range(c0, c1 - 1):
                ax = chain[i, 0]
                ay = chain[i, 1]
                dx = chain[i + 1, 0] - ax
                dy = chain[i + 1, 1] - ay
                ln = np.sqrt(dx * dx + dy * dy)
                tx = dx / ln
                ty = dy / ln
                lam = (x - ax) * tx + (y - ay) * ty
                lc = min(max(lam, 0.0), ln)
                px = x - (ax + lc * tx)
                py = y - (ay + lc * ty)
                dist = np.sqrt(px * px + py * py)
                if dist < best * (1.0 - 1e-12):
                    best = dist
                    side = -(tx * py - ty * px)  # > 0 to the right of the walk
                    out[q, 0] = arc + lc - s_face[k]
                    out[q, 1] = dist if side >= 0.0 else -dist
                    out[q, 2] = tx
                    out[q, 3] = ty
                    tol = 1e-9 * ln
                    beyond[q] = (i == c0 and lam < -tol and open_ends[k, 0]) or (
                        i == c1 - 2 and lam > ln + tol and open_ends[k, 1])
                arc += ln


@njit(cache=True)
def _distinct(values, tol):
    """The number of distinct values (closer than ``tol`` counts as one)."""
    v = np.sort(values)
    n = 1 if len(v) else 0
    for i in range(1, len(v)):
        if v[i] - v[i - 1] > tol:
            n += 1
    return n


@njit(cache=True)
def wall_fit_coefficients(ptr, idx, coords, moments, tangent, normal, coef, order):
    """Coefficients of the gradient at each face centre from a weighted least-squares quadratic
    through the face value in wall coordinates (s, eta) = ``coords[m, :2]`` (see
    :func:`wall_coordinates`):

        phi = phi_f + g_s s + g_eta eta + (H_ss s^2 + 2 H_se s eta + H_ee eta^2) / 2,

    fitted to the stencil data of face k (``idx[ptr[k]:ptr[k+1]]``): cell averages (entry j >= 0:
    the quadratic's average over the cell, its centroid value plus H : I / 2 with the cell's
    central second moments per unit area I turned to the direction ``coords[m, 2:]`` of the wall
    below it), or boundary face values (entry < 0, point values). s and eta are scaled by the
    stencil's extents; weights 1 / |r|^2 in the scaled coordinates. On a straight wall the
    coordinates are Cartesian and the fit is exact for quadratic fields. At the face centre the
    wall coordinates are the face's (``tangent``, ``normal`` into the fluid), so on return
    coef[m, :2] gives grad phi = sum_m coef[m, :2] (phi_m - phi_f). ``order[k]``: 2 for the
    full quadratic, 1 where the stencil fixes only part of it (terms whose positions the data do
    not span are left out, and singular values below ``RANK_TOLERANCE`` of the largest: the
    minimum-norm fit), 0 where it fixes no normal derivative.
    """
    nq = ptr.shape[0] - 1
    for k in range(nq):
        lt = 0.0
        ln = 0.0
        for q in range(ptr[k], ptr[k + 1]):
            lt = max(lt, abs(coords[q, 0]))
            ln = max(ln, abs(coords[q, 1]))
        # an extent at round-off level next to the other one (a single column of cells, all at s = 0)
        # is no extent: scaled by the other one the positions are zero and not counted as distinct
        size = max(lt, ln, 1e-300)
        if lt < 1e-8 * size:
            lt = size
        if ln < 1e-8 * size:
            ln = size
        npts = ptr[k + 1] - ptr[k]
        A = np.zeros((max(npts, 5), 5))  # rows sqrt(w) a; zero rows pad a short stencil
        sw = np.zeros(max(npts, 5))
        for q in range(ptr[k], ptr[k + 1]):
            i = q - ptr[k]
            j = idx[q]
            s = coords[q, 0] / lt
            eta = coords[q, 1] / ln
            iss = 0.0
            ise = 0.0
            iee = 0.0
            if j >= 0:
                t0 = coords[q, 2]
                t1 = coords[q, 3]
                n0 = t1  # the fluid side: to the right of the walk
                n1 = -t0
                ixx = moments[j, 0]
                ixy = moments[j, 1]
                iyy = moments[j, 2]
                iss = (t0 * t0 * ixx + 2.0 * t0 * t1 * ixy + t1 * t1 * iyy) / (lt * lt)
                ise = (t0 * n0 * ixx + (t0 * n1 + t1 * n0) * ixy + t1 * n1 * iyy) / (lt * ln)
                iee = (n0 * n0 * ixx + 2.0 * n0 * n1 * ixy + n1 * n1 * iyy) / (ln * ln)
            sw[i] = 1.0 / np.sqrt(s * s + eta * eta)
            A[i, 0] = sw[i] * s
            A[i, 1] = sw[i] * eta
            A[i, 2] = sw[i] * 0.5 * (s * s + iss)
            A[i, 3] = sw[i] * (s * eta + ise)
            A[i, 4] = sw[i] * 0.5 * (eta * eta + iee)
        # the terms the positions of the data can fix: along the wall a slope needs two distinct
        # positions s and a curvature three (over one or two columns of cells, as in a channel a
        # cell or two long between periodic ends, the cells' moments alone would make H_ss a free
        # constant that ignores the wall value); likewise across the wall
        ns = _distinct(coords[ptr[k] : ptr[k + 1], 0], 1e-9 * size)
        ne = _distinct(coords[ptr[k] : ptr[k + 1], 1], 1e-9 * size)
        use = np.array([ns >= 2, ne >= 2, ns >= 3, ns >= 2 and ne >= 2, ne >= 3])
        cols = np.nonzero(use)[0]
        order[k] = 0
        for q in range(ptr[k], ptr[k + 1]):
            coef[q, 0] = 0.0
            coef[q, 1] = 0.0
        if not use[1]:
            continue
        # least squares by the singular value decomposition; directions still left undetermined
        # are dropped (the minimum-norm solution) instead of failing the fit
        U, sv, Vt = np.linalg.svd(A[:, cols], full_matrices=False)
        cut = RANK_TOLERANCE * sv[0]
        rank = 0
        for r in range(len(cols)):
            if sv[r] > cut:
                rank += 1
        order[k] = 2 if rank == 5 else 1
        ig = -1
        in_ = -1
        for c in range(len(cols)):
            if cols[c] == 0:
                ig = c
            if cols[c] == 1:
                in_ = c
        for q in range(ptr[k], ptr[k + 1]):
            i = q - ptr[k]
            gs = 0.0
            gn = 0.0
            for r in range(rank):
                c = U[i, r] / sv[r] * sw[i]
                if ig >= 0:
                    gs += Vt[r, ig] * c
                gn += Vt[r, in_] * c
            gs /= lt
            gn /= ln
            coef[q, 0] = gs * tangent[k, 0] + gn * normal[k, 0]
            coef[q, 1] = gs * tangent[k, 1] + gn * normal[k, 1]
    return 0


@njit(cache=True)
def wall_gradient_apply(faces, nfi, ptr, idx, coef, phi, phi_b, out):
    """grad phi at each face (k, component i) = sum_m coef[m] (phi_m - phi_f), phi_f the
    boundary value of the face. ``phi`` (nc, c), ``phi_b`` (nb, c), ``out`` (nq, c, 2)."""
    nq = faces.shape[0]
    nco = phi.shape[1]
    for k in range(nq):
        b0 = faces[k] - nfi
        for i in range(nco):
            pf = phi_b[b0, i]
            g0 = 0.0
            g1 = 0.0
            for q in range(ptr[k], ptr[k + 1]):
                j = idx[q]
                d = (phi[j, i] if j >= 0 else phi_b[-1 - j, i]) - pf
                g0 += coef[q, 0] * d
                g1 += coef[q, 1] * d
            out[k, i, 0] = g0
            out[k, i, 1] = g1
