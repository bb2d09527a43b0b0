"""AMG-preconditioned Krylov solvers: checked against scipy's direct solver and by residuals
computed independently with scipy.sparse."""

from __future__ import annotations

import numpy as np
import pyamg
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from fvrans.fv.assembly import CsrAssembler
from fvrans.jit import PARALLEL_MIN_CELLS
from fvrans.linalg import _amg_kernels as K
from fvrans.linalg import amg
from fvrans.linalg.amg import AmgKrylovSolver
from fvrans.mesh.generate import cavity, step_mixed
from fvrans.mesh.geometry import compute_geometry


def laplacian(n: int, neumann: bool) -> sp.csr_matrix:
    """5-point Laplacian on an n x n grid; Neumann (singular) or Dirichlet boundaries."""
    T = sp.diags([-np.ones(n - 1), 2 * np.ones(n), -np.ones(n - 1)], [-1, 0, 1]).tolil()
    if neumann:
        T[0, 0] = T[n - 1, n - 1] = 1.0
    eye = sp.identity(n)
    return (sp.kron(eye, T) + sp.kron(T, eye)).tocsr()


def convection_diffusion(n: int, peclet: float) -> sp.csr_matrix:
    """Dirichlet Laplacian plus first-order upwind convection in x (a nonsymmetric M-matrix)."""
    up = sp.diags([-np.ones(n - 1), np.ones(n)], [-1, 0])
    return (laplacian(n, False) + peclet * sp.kron(sp.identity(n), up)).tocsr()


def test_cg_on_singular_laplacian_solves_the_mean_free_system():
    A = laplacian(40, neumann=True)
    b = np.random.default_rng(0).random(A.shape[0])
    s = AmgKrylovSolver("cg", rtol=1e-10, singular=True, max_iterations=100)
    x = np.zeros_like(b)
    s.solve(A, b.copy(), x)
    bm = b - b.mean()
    assert np.linalg.norm(bm - A @ x) <= 1e-9 * np.linalg.norm(bm)
    assert abs(x.mean()) < 1e-12 * np.abs(x).max()
    assert s.last_iterations < 30  # multigrid: a few tens of iterations at most, not ~n


@pytest.mark.parametrize("peclet", [0.0, 1.0, 20.0])
def test_bicgstab_matches_direct_solution(peclet):
    A = convection_diffusion(40, peclet) + 0.1 * sp.identity(1600)
    A = A.tocsr()
    b = np.random.default_rng(1).random(A.shape[0])
    exact = spla.spsolve(A.tocsc(), b)
    s = AmgKrylovSolver("bicgstab", rtol=1e-11, max_iterations=200)
    x = np.zeros_like(b)
    s.solve(A, b.copy(), x)
    assert np.max(np.abs(x - exact)) < 1e-8 * np.max(np.abs(exact))


def test_reused_hierarchy_serves_a_changed_matrix_and_counts_rebuilds():
    A = convection_diffusion(30, 2.0)
    b = np.random.default_rng(2).random(A.shape[0])
    s = AmgKrylovSolver("bicgstab", rtol=1e-8, rebuild_every=3, max_iterations=100)
    for k in range(5):
        B = (A + (0.5 * k) * sp.identity(A.shape[0])).tocsr()  # same structure, new values
        x = np.zeros_like(b)
        s.solve(B, b.copy(), x)
        assert np.linalg.norm(b - B @ x) <= 1e-8 * np.linalg.norm(b)
    assert s.rebuilds == 2  # set up at solve 1 and solve 4


def test_dense_inverse_regular_and_singular():
    rng = np.random.default_rng(3)
    M = rng.random((30, 30)) + 30 * np.eye(30)
    G = np.empty_like(M)
    assert K.dense_inverse(M.copy(), G, False) == 0
    assert np.allclose(G @ M, np.eye(30), atol=1e-12)
    L = laplacian(6, neumann=True).toarray()
    G = np.empty_like(L)
    assert K.dense_inverse(L.copy(), G, True) == 1
    assert np.allclose(G, G.T, atol=1e-12)
    assert np.allclose(L @ G @ L, L, atol=1e-10)  # a generalised inverse


def test_dense_inverse_keeps_the_weak_coupling_of_very_thin_cells():
    """Cells of aspect ratio 1e6 (channel of 25 x 8 cells, a fixed value on one end; couplings along
    and across in the ratio 1e-12): the smallest pivot is ~1e-11 of its diagonal and is not a null
    direction. A source spread over the closed end's column drives a solution uniform across the
    channel, the 1D solution along it (the former rule, a pivot below 1e-10 of its diagonal pinned
    to zero, returned zeros there). The condition number, ~1e15, leaves about three digits."""
    n_x, n_y, ratio = 25, 8, 1e6
    tx = sp.diags([-np.ones(n_x - 1), 2 * np.ones(n_x), -np.ones(n_x - 1)], [-1, 0, 1]).tolil()
    tx[0, 0] = 1.0  # closed inlet end; the outlet end keeps its fixed value
    ty = sp.diags([-np.ones(n_y - 1), 2 * np.ones(n_y), -np.ones(n_y - 1)], [-1, 0, 1]).tolil()
    ty[0, 0] = ty[n_y - 1, n_y - 1] = 1.0  # closed walls
    A = (sp.kron(sp.identity(n_y), tx / ratio) + sp.kron(ty * ratio, sp.identity(n_x))).toarray()
    G = np.empty_like(A)
    assert K.dense_inverse(A.copy(), G, False) == 0
    b = np.zeros(A.shape[0])
    b[::n_x] = 1.0  # first cell of each row of cells
    x = (G @ b).reshape(n_y, n_x)
    along = np.linalg.solve(tx.toarray() / ratio, np.eye(n_x)[0])
    assert np.max(np.abs(x - along)) < 1e-3 * np.max(along)


def test_unknown_method_is_rejected():
    with pytest.raises(ValueError, match="bicgstab"):
        AmgKrylovSolver("gmres")


def test_non_finite_matrix_gives_non_finite_solution_not_an_exception():
    A = laplacian(10, neumann=False)
    A.data[5] = np.nan
    x = np.zeros(A.shape[0])
    AmgKrylovSolver("bicgstab").solve(A, np.ones(A.shape[0]), x)
    assert not np.all(np.isfinite(x))


def test_converged_cavity_does_not_depend_on_the_momentum_solver():
    """Same discrete equations, different linear solvers and relaxation: same converged fields."""
    from fvrans.mesh import compute_geometry
    from fvrans.mesh.generate import cavity
    from fvrans.physics.boundary import build_flow_boundary
    from fvrans.solve.simple import SimpleSolver, SolverControls

    mesh = cavity(16)
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}})
    out = []
    for ms, alpha in [("amg", None), ("gauss-seidel", 0.7)]:
        ctl = SolverControls(momentum_solver=ms, relax_velocity=alpha, tolerance=1e-11, max_iterations=3000)
        s = SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.01, controls=ctl)
        assert s.run()
        out.append(s.fields.velocity.copy())
    assert np.max(np.abs(out[0] - out[1])) < 1e-8
    with pytest.raises(ValueError, match="momentum_solver"):
        SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.01, controls=SolverControls(momentum_solver="direct"))


# -- the block Gauss-Seidel smoother (amg.smoother_blocks, _amg_kernels._smooth) ----------------
def mesh_laplacian(mesh) -> sp.csr_matrix:
    """The two-point diffusion matrix |S_f|^2 / (S_f . d_f) of a mesh, plus a small multiple of
    the cell area (a regular pressure-like matrix)."""
    geom = compute_geometry(mesh)
    ni = mesh.n_internal_faces
    S, d = geom.face_area_vector[:ni], geom.face_delta[:ni]
    a = np.einsum("ij,ij->i", S, S) / np.einsum("ij,ij->i", S, d)
    diag = 1e-3 * geom.cell_area
    np.add.at(diag, mesh.face_owner[:ni], a)
    np.add.at(diag, mesh.face_neighbour[:ni], a)
    return CsrAssembler(mesh).matrix(diag, -a, -a).copy()


def levels_of(solver: AmgKrylovSolver):
    """(rows, level CSR matrix, colour pointers, block order) of every level of the hierarchy."""
    h = solver._h
    nlev, n, a_ptr, a_pofs, a_idx, a_dat, s_ptr, s_order = h[0], h[1], h[3], h[4], h[5], h[6], h[-2], h[-1]
    for lv in range(nlev):
        ptr = a_ptr[a_pofs[lv] : a_pofs[lv] + n[lv] + 1].astype(np.int64)
        m = sp.csr_matrix((a_dat[ptr[0] : ptr[-1]], a_idx[ptr[0] : ptr[-1]], ptr - ptr[0]), shape=(n[lv], n[lv]))
        yield int(n[lv]), m, s_ptr[lv], s_order[lv]


def assert_no_nonzero_joins_two_blocks_of_one_colour(m, nb: int, cptr, order) -> None:
    """The smoother's colouring (``colour_ptr``, ``order`` as ``amg.block_colours`` fills them) of
    ``nb`` blocks of consecutive rows of ``m``: no nonzero joins two different blocks of one colour."""
    rows = m.shape[0]
    ncol = cptr[0]
    block = np.searchsorted(np.arange(1, nb + 1) * rows // nb, np.arange(rows), side="right")
    colour = np.empty(nb, dtype=int)
    for c in range(ncol):
        colour[order[cptr[1 + c] : cptr[2 + c]]] = c
    coo = m.tocoo()
    bi, bj = block[coo.row], block[coo.col]
    assert not np.any((bi != bj) & (colour[bi] == colour[bj]))


def test_block_colouring_of_every_level_is_valid_on_triangles_and_quads(monkeypatch):
    """On a step mesh of quad layers and a triangle core (and its Galerkin coarse levels): every
    block of a level's sweep has one colour, and no nonzero of the level's matrix joins two
    different blocks of the same colour (so the blocks of a colour can be swept at once)."""
    monkeypatch.setattr(amg, "SMOOTHER_BLOCK_ROWS", 64)  # blocks on the coarse levels too
    mesh = step_mixed(first_spacing=2e-3, n_layers=12, growth=1.3, nx_up=16, nx_down=60, core_size=0.8,
                      n_smooth=15)
    assert set(np.unique(mesh.cell_sizes())) == {3, 4}
    s = AmgKrylovSolver("cg")
    s.rebuild(mesh_laplacian(mesh))
    blocked = 0
    for rows, m, cptr, order in levels_of(s):
        ncol = cptr[0]
        nb = cptr[1 + ncol]
        assert nb == amg.smoother_blocks(rows)
        assert sorted(order[:nb]) == list(range(nb))  # each block once
        assert_no_nonzero_joins_two_blocks_of_one_colour(m, nb, cptr, order)
        blocked += nb > 1
    assert blocked >= 3


def stationary_factor(solver: AmgKrylovSolver, A: sp.csr_matrix, cycles: int = 12) -> float:
    """Mean error reduction per V-cycle of x <- x + M^-1 (b - A x) from a random error (b = 0)."""
    x = np.random.default_rng(7).random(A.shape[0]) - 0.5
    h = solver._h
    xs, bs, rs = solver._vec
    n0 = A.shape[0]
    e0 = np.linalg.norm(x)
    for _ in range(cycles):
        bs[:n0] = -(A @ x)
        K.vcycle(*h, xs, bs, rs, False)
        x += xs[:n0]
    return float((np.linalg.norm(x) / e0) ** (1.0 / cycles))


def test_block_sweep_smooths_a_poisson_error_like_the_plain_sweep(monkeypatch):
    """The V-cycle with 16 blocks on the large levels reduces the error of a Poisson problem (a
    triangle cavity of 20 000 cells) at most 1.25 times more slowly per cycle than with the plain
    sweep, and is a symmetric operator (x . M^-1 y = y . M^-1 x, as CG needs)."""
    A = mesh_laplacian(cavity(100, triangles=True))
    factors = {}
    for label, rows in (("plain", 10**9), ("blocks", 256)):
        monkeypatch.setattr(amg, "SMOOTHER_BLOCK_ROWS", rows)
        s = AmgKrylovSolver("cg")
        s.rebuild(A)
        factors[label] = stationary_factor(s, A)
    assert s._h[-2][0][1 + s._h[-2][0][0]] == 16  # the fine level in 16 blocks
    assert factors["plain"] < 0.5  # a working multigrid cycle (0.42 here)
    assert factors["blocks"] <= 1.25 * factors["plain"]
    xs, bs, rs = s._vec
    n0 = A.shape[0]
    rng = np.random.default_rng(8)
    u, w = rng.random(n0), rng.random(n0)
    out = []
    for v in (u, w):
        bs[:n0] = v
        K.vcycle(*s._h, xs, bs, rs, False)
        out.append(xs[:n0].copy())
    assert abs(u @ out[1] - w @ out[0]) <= 1e-12 * abs(u @ out[1])


def test_restriction_is_p_transpose_to_the_bit_and_is_not_stored():
    """The V-cycle restricts with P's rows (R = P^T is not kept): on a 40 000-row convection-diffusion
    matrix the restricted vector equals scipy's product with pyamg's own R = P^T (each coarse entry
    summed in increasing fine row, as a CSR row of R sums it) to the bit, in one pass and by chunks
    of coarse rows on the threads; and the hierarchy holds the level matrices and prolongations only (and a
    residual vector of the finest level's size)."""
    A = convection_diffusion(200, 0.5)
    ml = pyamg.ruge_stuben_solver(A, max_coarse=200, max_levels=25, CF="RS")
    s = AmgKrylovSolver("bicgstab", coarsening="RS")
    s.rebuild(A)
    nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv, p_ptr, p_pofs, p_idx, p_dat, t_rows, cinv = s._h[:14]
    assert [lv.A.shape[0] for lv in ml.levels] == list(n)
    nf, nc = n[0], n[1]
    assert nc >= PARALLEL_MIN_CELLS and t_rows[0, 0, 0] >= 0  # the chunked restriction on level 0
    x = np.random.default_rng(3).standard_normal(nf)
    expected = ml.levels[0].R @ x
    for par in (False, True):
        y = np.full(nf + nc, np.nan)
        K._restrict(p_ptr, p_pofs[0], p_idx, p_dat, x, voff[0], nf, y, voff[1], nc, t_rows[0], par)
        assert np.array_equal(y[nf:], expected)
    held = sum(a.nbytes for a in s._h if isinstance(a, np.ndarray))
    operators = sum(m.nnz * 12 + (m.shape[0] + 1) * 4 for lv in ml.levels for m in (lv.A, getattr(lv, "P", None))
                    if m is not None)
    extra = dinv.nbytes + cinv.nbytes + t_rows.nbytes + s._h[-2].nbytes + s._h[-1].nbytes + 8 * (4 * nlev + 2)
    assert held <= operators + extra
    # the cycle's residual holds one level at a time: the finest level's size, not level-stacked
    assert s._scratch()[2].size == nf and s._scratch()[0].size == n.sum()


def _gauss_jordan_full(a: np.ndarray) -> np.ndarray:
    """Gauss-Jordan inverse without pivoting, every entry of both arrays updated at every step (the
    plain textbook loops, no singular or dropped pivots): the reference of ``dense_inverse``'s values."""
    a = a.copy()
    m = a.shape[0]
    out = np.eye(m)
    for k in range(m):
        inv = 1.0 / a[k, k]
        a[k] *= inv
        out[k] *= inv
        for i in range(m):
            if i != k and a[i, k] != 0.0:
                fac = a[i, k]
                a[i] -= fac * a[k]
                out[i] -= fac * out[k]
    return out


def test_dense_inverse_skips_only_entries_that_stay_unchanged():
    """The coarsest level's inverse updates only a's columns beyond the pivot and out's columns up to
    it (the others are not read again, or are zero): the values of the full Gauss-Jordan loops bit
    for bit, on a nonsymmetric diagonally dominant matrix and a 2D Laplacian's Galerkin-like block."""
    rng = np.random.default_rng(8)
    for M in (rng.random((40, 40)) - 0.5 + 20 * np.eye(40), laplacian(7, neumann=False).toarray()):
        G = np.empty_like(M)
        assert K.dense_inverse(M.copy(), G, False) == 0
        np.testing.assert_array_equal(G, _gauss_jordan_full(M))


def _block_colours_reference(m: sp.csr_matrix, nb: int) -> tuple[list[int], list[int]]:
    """Greedy block colouring written out with sets: (colour_ptr[: C + 2], order)."""
    n = m.shape[0]
    block = [min(b for b in range(nb) if i < (b + 1) * n // nb) for i in range(n)]
    coo = m.tocoo()
    adj = {(block[i], block[j]) for i, j in zip(coo.row, coo.col)}
    adj |= {(b, a) for a, b in adj}
    colour: list[int] = []
    for k in range(nb):
        taken = {colour[q] for q in range(k) if (k, q) in adj}
        colour.append(min(c for c in range(nb + 1) if c not in taken))
    ncol = max(colour) + 1
    order = [k for c in range(ncol) for k in range(nb) if colour[k] == c]
    starts = [sum(1 for k in range(nb) if colour[k] < c) for c in range(ncol + 1)]
    return [ncol, *starts], order


def test_block_colouring_of_the_smoother():
    """The coloured blocks of the Gauss-Seidel sweep (``amg.block_colours``, numba): the greedy colouring
    written out with sets, on a 2D Laplacian (rows in lines: neighbouring blocks couple, two colours), a
    random nonsymmetric pattern (more colours) and 7 blocks on 1 001 rows (blocks of unequal size); no two
    blocks of one colour are joined by a nonzero."""
    far = sp.random(1001, 1001, density=0.002, random_state=7, format="csr") + sp.identity(1001)
    for m, nb in ((laplacian(64, neumann=False), 16), (sp.csr_matrix(far), 8), (sp.csr_matrix(far), 7),
                  (laplacian(20, neumann=True), 1)):
        m = sp.csr_matrix(m)
        ptr = np.zeros(amg.SMOOTHER_MAX_BLOCKS + 2, dtype=np.int64)
        order = np.zeros(amg.SMOOTHER_MAX_BLOCKS, dtype=np.int64)
        ncol = amg.block_colours(m, nb, ptr, order)
        ref_ptr, ref_order = _block_colours_reference(m, nb)
        assert ncol == ref_ptr[0]
        assert ptr[: ncol + 2].tolist() == ref_ptr
        assert order[:nb].tolist() == ref_order
        assert_no_nonzero_joins_two_blocks_of_one_colour(m, nb, ptr, order)


def test_first_sweep_from_zero_skips_only_zero_terms():
    """The V-cycle's first forward Gauss-Seidel sweep on a level starts from x = 0 and skips the row
    terms of the rows not yet swept in its block (``_smooth_rows_from_zero``): x equals the full
    sweep's bit for bit, with one block (lexicographic) and with coloured blocks (a 2D Laplacian of
    9 216 rows: 8 blocks), on every level of a hierarchy of a nonsymmetric convection-diffusion matrix."""
    A = sp.csr_matrix(laplacian(96, neumann=False) + 0.3 * sp.diags([-np.ones(96 * 96 - 1)], [-1]))
    b = np.random.default_rng(2).random(A.shape[0])
    for block_sweep in (False, True):
        s = AmgKrylovSolver("cg", coarsening="RS-second-pass", block_sweep=block_sweep)
        s.rebuild(A)
        nlev, n, voff, a_ptr, a_pofs, a_idx, a_dat, dinv = s._h[:8]
        s_ptr, s_order = s._h[15], s._h[16]
        assert s_ptr[0][0] == (2 if block_sweep else 1)  # (coloured blocks on the fine level)
        for lv in range(nlev - 1):
            out = []
            for zero in (False, True):
                x = np.zeros(int(np.sum(n)))
                bb = np.zeros_like(x)
                bb[voff[lv]:voff[lv] + n[lv]] = b[: n[lv]]
                K._smooth(a_ptr, a_pofs[lv], a_idx, a_dat, dinv, x, bb, voff[lv], n[lv], s_ptr[lv], s_order[lv], True,
                          False, zero)
                out.append(x)
            assert np.any(out[0] != 0.0)
            np.testing.assert_array_equal(out[1], out[0])
