"""numba kernels of the wall-face gradient (arrays and scalars only; see ``fvrans.fv.wall_gradient``)."""

from __future__ import annotations

import numpy as np
from numba import njit


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
    quadratic fit, 1 where the stencil cannot fix a quadratic (fewer than 6 data or a singular
    fit) and a linear one was taken, 0 where even that is singular (zero coefficients).
    """
    nq = ptr.shape[0] - 1
    a = np.empty(5)
    for k in range(nq):
        lt = 0.0
        ln = 0.0
        for q in range(ptr[k], ptr[k + 1]):
            lt = max(lt, abs(coords[q, 0]))
            ln = max(ln, abs(coords[q, 1]))
        if lt == 0.0 or ln == 0.0:
            lt = max(lt, ln, 1e-300)
            ln = lt
        npts = ptr[k + 1] - ptr[k]
        m5 = np.zeros((5, 5))
        for q in range(ptr[k], ptr[k + 1]):
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
            w = 1.0 / (s * s + eta * eta)
            a[0] = s
            a[1] = eta
            a[2] = 0.5 * (s * s + iss)
            a[3] = s * eta + ise
            a[4] = 0.5 * (eta * eta + iee)
            for p in range(5):
                coef[q, p] = w * a[p]
                for r in range(5):
                    m5[p, r] += w * a[p] * a[r]
        nu = 5
        ok = False
        if npts >= 6:
            ev = np.linalg.eigvalsh(m5)
            ok = ev[0] > 1e-9 * ev[4]
        if not ok:
            nu = 2
            ev2 = np.linalg.eigvalsh(m5[:2, :2])
            ok = npts >= 2 and ev2[0] > 1e-12 * ev2[1]
        if not ok:
            order[k] = 0
            for q in range(ptr[k], ptr[k + 1]):
                coef[q, 0] = 0.0
                coef[q, 1] = 0.0
            continue
        order[k] = 2 if nu == 5 else 1
        minv = np.linalg.inv(m5[:nu, :nu])
        for q in range(ptr[k], ptr[k + 1]):
            gs = 0.0
            gn = 0.0
            for r in range(nu):
                gs += minv[0, r] * coef[q, r]
                gn += minv[1, r] * coef[q, r]
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
