"""The simultaneous solver's system, refilled in place on a pattern made once
(``fvrans.solve._coupled_kernels``), equals the one scipy builds from COO triplets, sparse
products and ``bmat`` (the solver's former assembly, kept here as the reference) to round-off,
at every state of a run: quads and triangles, walls only (no given pressure) and a channel with
inflow and a given outlet pressure, cell pressure gradients implicit or lagged."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from flows import CAVITY, CHANNEL, simultaneous_solver, split_same_diagonal

from fvrans.mesh.generate import cavity, channel
from fvrans.solve import _coupled_kernels as CK
from fvrans.solve import _kernels as K
from fvrans.solve.coupled import EXTRAPOLATION_LIMIT, _wall_flux_stencil


def scipy_system(s):
    """(A, rhs, G, W, A_u, A_v, size) at the state of the solver's last ``_assemble``, built as the
    solver built them before: triplets, scipy products (G = M^-1 G0, D diag(r), W V^-1 G), ``bmat``;
    ``size``: the sum of the magnitudes of the terms of each right-hand side entry."""
    nc, ni, g, rho = s.nc, s.ni, s.geom, s.rho
    _, _, _, r_u, r_v, rbar, _, hu, _ = s._parts
    gu = s.gu
    V = s.vol
    fl = s.fields
    # G = M^-1 G0 and D
    rows, cols, vals = CK.face_sum_triplets(s.owner, s.neigh, ni, s.S, g.face_weight, ~s.fixed, 1.0)
    G0 = sp.csr_matrix((vals.T.ravel(), (np.concatenate([rows, nc + rows]), np.tile(cols, 2))), shape=(2 * nc, nc))
    r = np.arange(nc)
    minv = CK.extrapolation_inverse(s.owner, ni, s.S, g.face_delta, ~s.fixed, V, EXTRAPOLATION_LIMIT)
    M = sp.csr_matrix((minv.transpose(1, 2, 0).ravel(),
                       (np.concatenate([r, r, nc + r, nc + r]), np.concatenate([r, nc + r, r, nc + r]))),
                      shape=(2 * nc, 2 * nc))
    G = (M @ G0).tocsr()
    rows, cols, vals = CK.face_sum_triplets(s.owner, s.neigh, ni, s.S, g.face_weight, s.fixed, float(rho))
    D = sp.csr_matrix((vals.T.ravel(), (np.tile(rows, 2), np.concatenate([cols, nc + cols]))), shape=(nc, 2 * nc))
    # momentum blocks and the wall-flux matrix
    own, nei = s.owner[:ni], s.neigh
    mr, mc = np.concatenate([r, own, nei]), np.concatenate([r, nei, own])
    blocks = [sp.csr_matrix((np.concatenate([s.a_rel[:, d], s.off_own, s.off_nei]), (mr, mc)), shape=(nc, nc))
              for d in range(2)]
    Amom = sp.block_diag(blocks, format="csr")
    wrows, wcols, geo, t_row, t_col, faces = _wall_flux_stencil(s.wall_grad, s.owner, s.S, nc)
    wf = s.wall_faces
    dvals = -s.muf[wf] * s.dcoef[wf]
    wo = s.owner[wf]
    Wall = sp.csr_matrix((np.concatenate([-s.muf[faces] * geo * t_row * t_col, dvals, dvals]),
                          (np.concatenate([wrows, wo, nc + wo]), np.concatenate([wcols, wo, nc + wo]))),
                         shape=(2 * nc, 2 * nc))
    # continuity: the constant part of the fluxes, the Rhie-Chow pressure terms
    Fc = np.empty(s.nf)
    K.rhie_chow_fluxes(s.owner, s.neigh, ni, s.S, s.dcoef, s.kvec, g.face_weight, g.face_skew, g.face_delta, gu,
                       hu, s.hess is not None, rho, s._zero_c2, rbar, s._zero_c, s._zero_c2, s.pb, s.bc.kind,
                       s.bc.velocity, s._zero_beta, fl.face_flux, Fc)
    c0 = np.zeros(nc)
    CK.face_sums(s.owner, s.neigh, ni, Fc, c0)
    gp, p = s.grad_p, fl.pressure
    E = np.concatenate([V * gp[:, 0], V * gp[:, 1]]) - G @ p
    size_E = np.abs(np.concatenate([V * gp[:, 0], V * gp[:, 1]])) + abs(G) @ np.abs(p)
    rows, cols, vals = CK.pressure_difference_triplets(s.owner, s.neigh, ni, s.dcoef, s.kvec, g.face_weight, rbar,
                                                       s.fixed, rho)
    Lc, Kx, Ky = (sp.csr_matrix((vals[:, i], (rows, cols)), shape=(nc, nc)) for i in range(3))
    W = D @ sp.diags(np.concatenate([r_u, r_v])) - sp.hstack([Kx, Ky])
    Wv = W @ sp.diags(np.concatenate([1.0 / V, 1.0 / V]))
    if s.implicit_gradient:
        App = (Lc + Wv @ G).tocsr()
        rhs_c = -(c0 + Wv @ E)
        size_c = np.abs(c0) + abs(Wv) @ size_E
    else:
        App = Lc.tocsr()
        gs = np.concatenate([gp[:, 0], gp[:, 1]])
        rhs_c = -(c0 + W @ gs)
        size_c = np.abs(c0) + abs(W) @ np.abs(gs)
    us = np.concatenate([fl.velocity[:, 0], fl.velocity[:, 1]])
    rhs_m = np.concatenate([s.rhs_u, s.rhs_v]) + G @ p + Wall @ us
    size_m = np.abs(np.concatenate([s.rhs_u, s.rhs_v])) + abs(G) @ np.abs(p) + abs(Wall) @ np.abs(us)
    A = sp.bmat([[(Amom + Wall).tocsr(), G], [D, App]], format="csr")
    return A, np.concatenate([rhs_m, rhs_c]), G, Wall, blocks[0], blocks[1], np.concatenate([size_m, size_c])


def assert_same_rows(new, ref, rtol=1e-13):
    """Every entry of ``new`` within rtol x the largest entry of its row in ``ref``."""
    assert new.shape == ref.shape
    scale = abs(ref).max(axis=1).toarray().ravel()
    diff = abs(sp.csr_matrix(new) - ref).max(axis=1).toarray().ravel()
    assert np.all(diff <= rtol * scale), float(np.max(diff / np.where(scale > 0, scale, 1.0)))


def assert_same_system(s):
    A, rhs, _ = s._assemble()
    A_ref, rhs_ref, G_ref, W_ref, Au_ref, Av_ref, size = scipy_system(s)
    assert_same_rows(A, A_ref)
    assert np.all(np.abs(rhs - rhs_ref) <= 1e-13 * size), float(np.max(np.abs(rhs - rhs_ref) / (size + 1e-300)))
    assert_same_rows(s.G.tocsr(), G_ref)
    assert_same_rows(s._wall_flux_matrix(), W_ref)
    # the preconditioner's momentum blocks: without the wall-flux matrix
    Au, Av = s._parts[0], s._parts[1]
    assert_same_rows(Au, Au_ref, rtol=0)
    assert_same_rows(Av, Av_ref, rtol=0)
    # the pattern is the structural one: at least every nonzero scipy keeps
    assert A.nnz >= A_ref.nnz
    return A


@pytest.mark.parametrize("name", ["cavity_quads", "cavity_triangles", "channel_triangles", "channel_lagged"])
def test_refilled_system_equals_the_scipy_built_one(name):
    """Compared at three states of a run (after 0, 2 and 4 outer iterations), so that values left
    from an earlier refill would show."""
    if name == "cavity_quads":
        s = simultaneous_solver(cavity(6), CAVITY, system_solver="direct")
    elif name == "cavity_triangles":
        s = simultaneous_solver(split_same_diagonal(cavity(5)), CAVITY, system_solver="iterative")
    else:
        s = simultaneous_solver(split_same_diagonal(channel(3.0, 1.0, 9, 4)), CHANNEL, mu=0.02,
                                system_solver="direct")
        s.implicit_gradient = name == "channel_triangles"
    s.keep_assembly_work = True  # the reference reads the momentum coefficients the assembly made
    A = assert_same_system(s)
    for _ in range(2):
        s._parts = None
        for _ in range(2):
            s.iterate()
        assert assert_same_system(s) is A  # one matrix, refilled in place
    assert np.abs(s.fields.velocity).max() > 0.1  # the flow did develop between the checks


def test_face_coefficients_are_numpys_row_products_bit_for_bit():
    """dcoef = |S|^2 / (S . d) and kvec = S - dcoef d per face (``simple.face_coefficients``, a numba loop
    made every outer iteration) equal numpy's row-wise formulas bit for bit on triangles (quads cut along
    one diagonal: non-orthogonal faces) and on quads; and kvec . S = 0 to round-off (over-relaxed
    decomposition: the non-orthogonal part is normal to S, Jasak 1996, PhD thesis, Imperial College, from
    memory)."""
    from fvrans.mesh.geometry import compute_geometry
    from fvrans.solve.simple import face_coefficients

    for k, mesh in enumerate((split_same_diagonal(channel(3.0, 1.0, 9, 4)), cavity(12))):
        g = compute_geometry(mesh)
        S, d = g.face_area_vector, g.face_delta
        dcoef, kvec = face_coefficients(g)
        ref = (S[:, 0] * S[:, 0] + S[:, 1] * S[:, 1]) / (S[:, 0] * d[:, 0] + S[:, 1] * d[:, 1])
        np.testing.assert_array_equal(dcoef, ref)
        np.testing.assert_array_equal(kvec, S - ref[:, None] * d)
        np.testing.assert_allclose((kvec * S).sum(axis=1), 0.0, atol=1e-12 * (S * S).sum(axis=1).max())
        if k == 0:  # (the triangles' diagonal faces are not orthogonal: a non-orthogonal part to check)
            assert np.abs(kvec).max() > 0.1 * np.abs(S).max()


def test_system_rows_are_the_same_bits_on_one_and_two_threads():
    """The system's rows refilled by their kernels (momentum and continuity rows, the latter in one chunk
    of rows per thread with position marks of its own) on a cavity of 130^2 cells (above
    PARALLEL_MIN_CELLS: the parallel loops run), at the state after one outer iteration: values and
    right-hand side on one and on two threads bit for bit."""
    from fvrans import jit

    s = simultaneous_solver(cavity(130), CAVITY, system_solver="iterative")
    assert s.nc >= jit.PARALLEL_MIN_CELLS
    s.iterate()
    out = []
    before = jit.threads()
    try:
        for n in (1, 2):
            jit.set_threads(n)
            A, rhs, _ = s._assemble()
            out.append((A.data.copy(), rhs.copy()))
    finally:
        jit.set_threads(before)
    np.testing.assert_array_equal(out[1][0], out[0][0])
    np.testing.assert_array_equal(out[1][1], out[0][1])
