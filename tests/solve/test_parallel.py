"""Kernels on every thread: the same numbers as on one.

The cell and face kernels sum each cell's faces in face order (``Mesh.cell_faces``), so they give
the same bits whatever the thread count; the multigrid Krylov solvers sweep coloured blocks of
rows in a fixed order and form their dot products from 16 fixed chunks, so they do too, and so do
whole runs. The parallel loops start at ``fvrans.jit.PARALLEL_MIN_CELLS`` cells, so the meshes
here are just above it.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
from flows import solve

from fvrans import jit
from fvrans.errors import CaseError
from fvrans.fv import _gradient_kernels as GK
from fvrans.fv.assembly import CsrAssembler
from fvrans.fv.gradient import LeastSquaresGradient
from fvrans.linalg import _amg_kernels as AK
from fvrans.linalg.amg import AmgKrylovSolver
from fvrans.mesh.generate import cavity, channel
from fvrans.mesh.geometry import compute_geometry
from fvrans.models import _sa_kernels as SA
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve import _kernels as K
from fvrans.solve.simple import SimpleSolver, SolverControls

SPECS = {
    "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
    "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
    "lower_wall": {"kind": "wall"},
    "upper_wall": {"kind": "symmetry"},
}


@pytest.fixture(autouse=True)
def _restore_threads():
    yield
    jit.set_threads()


@pytest.fixture(scope="module")
def big():
    """A triangle channel of 16 928 cells (wall, inflow, outflow, symmetry faces) with a solver
    and smooth random-looking fields on it."""
    mesh = channel(4.0, 1.0, 92, 92, triangles=True)
    assert mesh.n_cells >= jit.PARALLEL_MIN_CELLS
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, SPECS)
    s = SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.01, controls=SolverControls(threads=1))
    x, y = geom.cell_centre.T
    s.fields.velocity = np.c_[np.sin(3 * x) * y + 1.0, np.cos(2 * y) * x * 0.1]
    s.fields.pressure = np.cos(x + 2 * y)
    rng = np.random.default_rng(5)
    s.fields.face_flux = rng.normal(size=mesh.n_faces) * geom.face_length
    return s


def on_threads(fn, n):
    jit.set_threads(n)
    return fn()


def same_bits(fn):
    """fn() -> tuple of arrays/scalars, on one and on two threads: identical."""
    one = on_threads(fn, 1)
    two = on_threads(fn, 2)
    for a, b in zip(one, two):
        np.testing.assert_array_equal(a, b)
    return one


def test_cell_faces_follow_the_face_loop():
    mesh = cavity(3)
    ptr, code = mesh.cell_faces
    ni = mesh.n_internal_faces
    expect = [[] for _ in range(mesh.n_cells)]
    for f in range(mesh.n_faces):
        expect[mesh.face_owner[f]].append(f)
        if f < ni:
            expect[mesh.face_neighbour[f]].append(-1 - f)
    assert [list(code[ptr[c]:ptr[c + 1]]) for c in range(mesh.n_cells)] == expect


def test_gradient_and_refill_kernels(big):
    s = big
    mesh, geom = s.mesh, s.geom
    ni, nc = mesh.n_internal_faces, mesh.n_cells
    phi = np.ascontiguousarray(s.fields.velocity[:, 0])
    phi_b = np.sin(geom.face_centre[ni:, 0])
    lsq = LeastSquaresGradient(mesh, geom)
    own, nei = mesh.face_owner, mesh.face_neighbour
    cf = mesh.cell_faces

    def lsq_run():
        out = np.empty((nc, 2))
        GK.lsq_gradient(own, nei, ni, *cf, lsq.weighted_delta, lsq.inverse_matrix, phi, phi_b, out)
        return (out,)

    (g,) = same_bits(lsq_run)
    # the face loop in numpy: sum_j (d_j / |d_j|^2)(phi_j - phi_c), then M^-1
    wd = lsq.weighted_delta
    acc = np.zeros((nc, 2))
    dp = phi[nei[:ni]] - phi[own[:ni]]
    np.add.at(acc, own[:ni], wd[:ni] * dp[:, None])
    np.add.at(acc, nei[:ni], wd[:ni] * dp[:, None])
    np.add.at(acc, own[ni:], wd[ni:] * (phi_b - phi[own[ni:]])[:, None])
    mi = lsq.inverse_matrix
    ref = np.c_[mi[:, 0] * acc[:, 0] + mi[:, 1] * acc[:, 1], mi[:, 1] * acc[:, 0] + mi[:, 2] * acc[:, 1]]
    np.testing.assert_allclose(g, ref, rtol=1e-10, atol=1e-12 * np.abs(ref).max())

    def gg_run():
        out = np.empty((nc, 2))
        GK.green_gauss_pass(own, nei, ni, *cf, geom.face_area_vector, geom.face_weight, geom.face_skew,
                            geom.cell_area, phi, phi_b, g, True, out)
        return (out,)

    same_bits(gg_run)

    asm = CsrAssembler(mesh)
    rng = np.random.default_rng(1)
    diag, oo, on = rng.random(nc), rng.random(ni), rng.random(ni)
    (data,) = same_bits(lambda: (asm.matrix(diag, oo, on).data.copy(),))
    ref = sp.coo_matrix((np.r_[diag, oo, on], (np.r_[np.arange(nc), own[:ni], nei[:ni]],
                                               np.r_[np.arange(nc), nei[:ni], own[:ni]])), shape=(nc, nc)).tocsr()
    A = asm.matrix(diag, oo, on)
    assert abs(A - ref).max() < 1e-15


def test_solver_kernels(big):
    s = big
    g = s.geom
    ni, nc, nf = s.ni, s.nc, s.nf
    cf = (s.cf_ptr, s.cf_face)
    F = s.fields.face_flux
    u = s.fields.velocity
    rng = np.random.default_rng(2)
    gu = rng.normal(size=(nc, 2, 2))
    gc = rng.normal(size=(nc, 2, 2))
    gwall = rng.normal(size=(nf - ni, 2, 2))
    muf = 0.01 + 0.001 * rng.random(nf)

    def momentum():
        d_u, d_v, oo, on, bu, bv = (np.empty(n) for n in (nc, nc, ni, ni, nc, nc))
        K.assemble_momentum(s.owner, s.neigh, ni, s.S, s.dcoef, s.kvec, g.face_weight, g.face_centre,
                            g.cell_centre, g.face_shift, F, muf, u, gu, gc, gwall, s.bc.kind, s.bc.velocity, True,
                            d_u, d_v, oo, on, bu, bv, *cf, np.empty((ni, 2)))
        return d_u, d_v, oo, on, bu, bv

    d_u, d_v, oo, on, bu, bv = same_bits(momentum)

    vol = g.cell_area
    body = np.zeros((nc, 2))
    gp = rng.normal(size=(nc, 2))
    pt = rng.random(nc)

    def sources():
        out = [np.empty((nc, 2)) for _ in range(2)] + [np.empty(nc), np.empty(nc), np.empty((nc, 2))]
        sums = K.momentum_sources(s.owner, s.neigh, vol, body, gp, u, 0.9, pt, d_u, d_v, oo, on, bu, bv,
                                  out[0], out[1], out[2], out[3], out[4], *cf)
        return (*out, sums)

    one = on_threads(sources, 1)
    two = on_threads(sources, 2)
    for a, b in zip(one[:-1], two[:-1]):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_allclose(one[-1], two[-1], rtol=1e-13)  # sums over cells: order per thread
    b_np, a_rel = one[0], one[1]
    # the residual against the assembled matrix (scipy), r = b_np - V grad p - A u
    A_u = CsrAssembler(s.mesh).matrix(d_u, oo, on)
    r_u = b_np[:, 0] - vol * gp[:, 0] - A_u @ u[:, 0]
    np.testing.assert_allclose(one[4][:, 0], r_u, rtol=1e-9, atol=1e-12 * np.abs(r_u).max())

    def interpolation():
        out = [np.empty((nc, 2)), np.empty(nc), np.empty(nc), np.empty(nc), np.empty((nc, 2))]
        K.interpolation_coefficients(s.owner, s.neigh, vol, oo, on, d_u, d_v, a_rel, b_np, u[:, 0].copy(),
                                     u[:, 1].copy(), True, *out, *cf)
        return out

    hbya, rau, beta, dp, _ = same_bits(interpolation)

    def rhie_chow():
        out = np.empty(nf)
        hu = rng_hu
        K.rhie_chow_fluxes(s.owner, s.neigh, ni, s.S, s.dcoef, s.kvec, g.face_weight, g.face_skew, g.face_delta,
                           gu, hu, True, 1.0, hbya, rau, s.fields.pressure, gp, np.zeros(nf - ni), s.bc.kind,
                           s.bc.velocity, beta, F, out)
        return (out,)

    rng_hu = rng.normal(size=(nc, 2, 3))
    (Fn,) = same_bits(rhie_chow)

    def pressure():
        out = [np.empty(nc), np.empty(ni), np.empty(nc)]
        sums = K.assemble_pressure_correction(s.owner, s.neigh, ni, s.dcoef, 1.0, dp, s.bc.kind, Fn, *out, *cf)
        return (*out, sums)

    one = on_threads(pressure, 1)
    two = on_threads(pressure, 2)
    for a, b in zip(one[:3], two[:3]):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_allclose(one[3], two[3], rtol=1e-13)
    rhs = one[2]
    div = np.zeros(nc)  # -sum_f F over each cell's faces
    np.add.at(div, s.owner, -Fn)
    np.add.at(div, s.neigh, Fn[:ni])
    np.testing.assert_allclose(rhs, div, rtol=1e-10, atol=1e-13 * np.abs(div).max())

    def correct():
        out = Fn.copy()
        K.correct_fluxes(s.owner, s.neigh, ni, s.dcoef, 1.0, dp, s.bc.kind, g.cell_centre[:, 0].copy(), out)
        return (out,)

    same_bits(correct)


def test_model_sources_and_krylov_solvers(big):
    s = big
    nc = s.nc
    rng = np.random.default_rng(3)
    nt = 1e-3 * rng.random(nc)
    d = 0.01 + rng.random(nc)
    gu = rng.normal(size=(nc, 2, 2))
    gnt = rng.normal(size=(nc, 2))

    def sa():
        diag, src = np.ones(nc), np.zeros(nc)
        SA.assemble_sources(nt, 1e-5, 1.0, s.geom.cell_area, d, gu, gnt, False, np.ones(nc), diag, src)
        return diag, src

    same_bits(sa)

    # a Laplacian of the mesh (CG) and a convection-diffusion matrix (BiCGStab)
    ni = s.ni
    own, nei = s.owner[:ni], s.neigh
    a = s.dcoef[:ni]
    flux = s.fields.face_flux[:ni]
    b = rng.normal(size=nc)
    for method, fl in (("cg", 0.0 * flux), ("bicgstab", flux)):
        diag = 1e-3 * s.geom.cell_area
        np.add.at(diag, own, a + np.maximum(fl, 0))
        np.add.at(diag, nei, a - np.minimum(fl, 0))
        A = CsrAssembler(s.mesh).matrix(diag, -a + np.minimum(fl, 0), -a - np.maximum(fl, 0)).copy()

        def run(A=A, method=method):
            x = np.zeros(nc)
            AmgKrylovSolver(method, rtol=1e-9, max_iterations=200).solve(A, b.copy(), x)
            return (x,)

        x1 = same_bits(run)[0]
        assert np.linalg.norm(b - A @ x1) <= 1e-9 * np.linalg.norm(b)


def test_multigrid_cycle_gives_the_same_bits_on_one_and_two_threads(big):
    """The V-cycle (block Gauss-Seidel sweeps, residuals, transfers; 16 928 rows in 16 blocks) on
    two threads gives the bits of one thread."""
    s = big
    ni, nc = s.ni, s.nc
    a = s.dcoef[:ni]
    diag = 1e-3 * s.geom.cell_area
    np.add.at(diag, s.owner[:ni], a)
    np.add.at(diag, s.neigh, a)
    solver = AmgKrylovSolver("cg")
    solver.rebuild(CsrAssembler(s.mesh).matrix(diag, -a, -a).copy())
    s_ptr = solver._h[-2]
    assert s_ptr[0][1 + s_ptr[0][0]] == 16 and s_ptr[0][0] >= 2  # the fine level in blocks of colours
    b = np.random.default_rng(6).normal(size=nc)

    def cycle():
        xs, bs, rs = (v.copy() for v in solver._vec)
        bs[:nc] = b
        AK.vcycle(*solver._h, xs, bs, rs, True)
        return (xs,)

    same_bits(cycle)


def test_pair_of_momentum_solves_equals_the_sequence():
    """solve_pair (two systems at once, one per thread) gives the bits of two solves in a row, also
    across a hierarchy rebuild."""
    mesh = cavity(40)
    asm1, asm2 = CsrAssembler(mesh), CsrAssembler(mesh)
    geom = compute_geometry(mesh)
    ni, nc = mesh.n_internal_faces, mesh.n_cells
    own, nei = mesh.face_owner[:ni], mesh.face_neighbour[:ni]
    rng = np.random.default_rng(4)
    results = []
    for pair in (False, True):
        jit.set_threads(2)
        solver = AmgKrylovSolver("bicgstab", rtol=1e-3, rebuild_every=3, max_iterations=4)
        xs = []
        for k in range(7):
            rng = np.random.default_rng(k)
            a = geom.face_length[:ni] * (1 + rng.random(ni))
            flux = rng.normal(size=ni) * 2.0 * (k + 1)
            diag1 = np.zeros(nc)
            np.add.at(diag1, own, a + np.maximum(flux, 0))
            np.add.at(diag1, nei, a - np.minimum(flux, 0))
            A1 = asm1.matrix(diag1 * 1.1, -a + np.minimum(flux, 0), -a - np.maximum(flux, 0))
            A2 = asm2.matrix(diag1 * 1.3, -a + np.minimum(flux, 0), -a - np.maximum(flux, 0))
            b1, b2 = rng.normal(size=nc), rng.normal(size=nc)
            x1, x2 = np.zeros(nc), np.zeros(nc)
            if pair:
                solver.solve_pair(A1, b1, x1, A2, b2, x2)
            else:
                solver.solve(A1, b1, x1)
                solver.solve(A2, b2, x2)
            xs += [x1, x2]
        results.append((xs, solver.rebuilds, solver.total_iterations))
    (seq, r_seq, it_seq), (par, r_par, it_par) = results
    assert r_seq == r_par and it_seq == it_par
    assert r_seq > 2  # misses of the 4-iteration limit rebuilt the hierarchy on the way
    for a, b in zip(seq, par):
        np.testing.assert_array_equal(a, b)


def test_a_case_converges_to_the_same_answer_on_one_and_two_threads():
    """A developing channel flow (4 000 cells: the two velocity components solved at once on two
    threads) run to 1e-9 on one and on two threads: the same bits."""
    mesh = channel(10.0, 1.0, 100, 40)
    specs = dict(SPECS, upper_wall={"kind": "wall"})
    runs = []
    for n in (1, 2):
        solver, converged = solve(mesh, specs, mu=0.02, tolerance=1e-9, max_iterations=2000, threads=n)
        assert converged and solver.threads == n
        runs.append(solver)
    one, two = (r.fields for r in runs)
    assert runs[0].iteration == runs[1].iteration
    np.testing.assert_array_equal(one.velocity, two.velocity)
    np.testing.assert_array_equal(one.pressure, two.pressure)


def test_iterations_on_a_large_mesh_are_the_same_on_one_and_two_threads():
    """20 outer iterations on 16 640 cells, where every parallel loop runs on both threads (and the
    smoothing of the two finest multigrid levels): the same bits."""
    mesh = channel(1.0, 1.0, 130, 128)
    assert mesh.n_cells >= jit.PARALLEL_MIN_CELLS
    specs = dict(SPECS, upper_wall={"kind": "wall"})
    runs = []
    for n in (1, 2):
        solver, _ = solve(mesh, specs, mu=0.02, tolerance=1e-12, max_iterations=20, threads=n)
        runs.append(solver.fields)
    one, two = runs
    np.testing.assert_array_equal(one.velocity, two.velocity)
    np.testing.assert_array_equal(one.pressure, two.pressure)
    np.testing.assert_array_equal(one.face_flux, two.face_flux)


def test_thread_switch(monkeypatch):
    most = jit.available_threads()
    monkeypatch.setenv(jit.THREADS_VARIABLE, "1")
    assert jit.set_threads() == 1 and jit.threads() == 1
    assert jit.set_threads(2) == min(2, most)  # the case's key wins over the variable
    monkeypatch.setenv(jit.THREADS_VARIABLE, "")
    monkeypatch.setattr(jit.os, "getloadavg", lambda: (0.0, 0.0, 0.0))
    assert jit.set_threads() == most  # default: every idle core
    monkeypatch.setattr(jit.os, "getloadavg", lambda: (most + 3.0, 0.0, 0.0))
    assert jit.set_threads() == 1  # other processes hold every core
    assert jit.requested_threads(10 * most) == most
    monkeypatch.setenv(jit.THREADS_VARIABLE, "two")
    with pytest.raises(CaseError, match="FVRANS_THREADS"):
        jit.set_threads()


def test_krylov_basis_kernels_give_the_same_bits_on_one_and_two_threads():
    """The Gram-Schmidt step, norm and basis combination of FGMRES (``_krylov_kernels``) on a vector of
    2 PARALLEL_MIN_CELLS + 7 unknowns (not a multiple of the 16 chunks): two threads give the bits of
    one, and the numbers are numpy's to round-off (classical Gram-Schmidt against an orthonormal basis
    leaves w orthogonal to it, with a second pass when the first cancelled most of w; h holds the
    projections V w, then ||w||)."""
    from fvrans.linalg import _krylov_kernels as KK

    n, k = 2 * jit.PARALLEL_MIN_CELLS + 7, 6
    rng = np.random.default_rng(11)
    V0 = np.zeros((k + 2, n))
    V0[: k + 1] = np.linalg.qr(rng.normal(size=(n, k + 1)))[0].T
    w0 = rng.normal(size=n)
    y = rng.normal(size=k + 1)

    def kernels():
        V, w, h, x = V0.copy(), w0.copy(), np.zeros(k + 2), w0.copy()
        par = jit.threads() > 1
        KK.orthogonalise(V, k, w, h, par)
        KK.add_combination(V0[: k + 1], y, x, par)
        return V, w, h, x, np.array([KK.norm2(w0, par)])

    V, w, h, x, nrm = same_bits(kernels)
    proj = V0[: k + 1] @ w0
    rest = w0 - proj @ V0[: k + 1]
    np.testing.assert_allclose(h[: k + 1], proj, rtol=0, atol=1e-12 * np.linalg.norm(w0))
    np.testing.assert_allclose(h[k + 1], np.linalg.norm(rest), rtol=1e-12)
    np.testing.assert_allclose(w, rest, rtol=0, atol=1e-12 * np.linalg.norm(w0))
    np.testing.assert_allclose(V[k + 1], rest / np.linalg.norm(rest), rtol=0, atol=1e-12)
    assert np.abs(V0[: k + 1] @ w).max() < 1e-12 * np.linalg.norm(w0)
    np.testing.assert_allclose(x, w0 + y @ V0[: k + 1], rtol=0, atol=1e-12 * np.linalg.norm(x))
    np.testing.assert_allclose(nrm[0], np.linalg.norm(w0), rtol=1e-13)
    # w nearly in the span of V: one pass would leave it orthogonal to ~1e-10 of its length only
    # (cancellation); the second pass, which this case must trigger, makes it 1e-13
    near = y @ V0[: k + 1] + 1e-6 * rng.normal(size=n) / np.sqrt(n)

    def nearly_dependent():
        V, w, h = V0.copy(), near.copy(), np.zeros(k + 2)
        KK.orthogonalise(V, k, w, h, jit.threads() > 1)
        return V, w, h

    V, w, h = same_bits(nearly_dependent)
    assert np.abs(V0[: k + 1] @ V[k + 1]).max() < 1e-13
    np.testing.assert_allclose(h[: k + 1], V0[: k + 1] @ near, rtol=0, atol=1e-12 * np.linalg.norm(near))


def test_threads_from_idle_cores_only_when_no_count_is_given(monkeypatch):
    monkeypatch.delenv(jit.THREADS_VARIABLE, raising=False)
    assert jit.threads_from_idle_cores(None) and jit.threads_from_idle_cores(0)
    assert not jit.threads_from_idle_cores(2)
    monkeypatch.setenv(jit.THREADS_VARIABLE, "2")
    assert not jit.threads_from_idle_cores(0)
    monkeypatch.setenv(jit.THREADS_VARIABLE, "0")
    assert jit.threads_from_idle_cores(0)


@pytest.mark.skipif(jit.available_threads() < 2, reason="needs two cores")
def test_a_run_on_idle_cores_goes_on_with_one_thread_when_its_threads_lose_their_cores(monkeypatch):
    """Threads taken from the idle cores: iterations that keep fewer than SHARED_CORE_USE cores busy (here
    each waits 0.05 s asleep, as a thread waits for a core another process holds) send the run to one
    thread after SHARED_CORE_STRIKES of them; iterations that keep two busy do not, nor does a count the
    case gives."""
    import time

    from fvrans.solve import simple

    monkeypatch.delenv(jit.THREADS_VARIABLE, raising=False)
    monkeypatch.setattr(jit.os, "getloadavg", lambda: (0.0, 0.0, 0.0))
    mesh = channel(2.0, 1.0, 20, 8)
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, SPECS)

    def solver(threads):
        s = SimpleSolver(mesh, geom, bc, rho=1.0, mu=0.02, controls=SolverControls(threads=threads))
        iterate = s.iterate

        def waiting():
            res = iterate()
            time.sleep(0.05)
            return res

        s.iterate = waiting
        return s

    watched = solver(0)
    assert watched.threads_watched and watched.threads == 2
    watched.run(max_iterations=simple.SHARED_CORE_STRIKES - 1, tolerance=0.0)
    assert watched.threads == 2 and jit.threads() == 2
    watched.run(max_iterations=1, tolerance=0.0)
    assert watched.threads == 1 and jit.threads() == 1
    busy = solver(0)
    for _ in range(3 * simple.SHARED_CORE_STRIKES):
        busy._watch_threads(1.0, 1.9)
    assert busy.threads == 2 and jit.threads() == 2
    given = solver(2)
    assert not given.threads_watched
    given.run(max_iterations=2 * simple.SHARED_CORE_STRIKES, tolerance=0.0)
    assert given.threads == 2 and jit.threads() == 2
