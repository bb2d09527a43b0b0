"""The numba products of the block preconditioner (``fvrans.linalg._block_kernels``) against scipy's
products taken one by one: the same bits, on one thread and on two."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from fvrans import jit
from fvrans.linalg import _block_kernels as BK

NO_CIND = np.zeros(1, dtype=np.int64)  # G as a CSR matrix of its own


@pytest.fixture(autouse=True)
def _restore_threads():
    yield
    jit.set_threads()


def _random_csr(rows: int, cols: int, per_row: int, rng: np.random.Generator) -> sp.csr_matrix:
    r = np.repeat(np.arange(rows), per_row)
    c = (r * cols // rows + rng.integers(-3 * per_row, 3 * per_row, size=r.size)) % cols
    m = sp.csr_matrix((rng.normal(size=r.size), (r, c)), shape=(rows, cols))
    m.sum_duplicates()
    m.sort_indices()
    return m


def test_commutator_products_are_scipys_products_to_the_bit_on_one_and_two_threads():
    """out = c (Lq y + D H G y) - D H A H G y from the continuity rows (n x 3n, D their first 2n columns;
    the pressure columns, which hold values here, are not read), and the two single products, on
    2 PARALLEL_MIN_CELLS + 7 rows (the threaded branch): equal to scipy's products in the order the
    Python form takes them (``LeastSquaresCommutator.schur_inverse`` without a continuity matrix)."""
    n = 2 * jit.PARALLEL_MIN_CELLS + 7
    rng = np.random.default_rng(3)
    G = _random_csr(2 * n, n, 5, rng)
    Au, Av, lq = (_random_csr(n, n, 5, rng) for _ in range(3))
    cont = _random_csr(n, 3 * n, 20, rng)
    y, hu, hv, c = rng.normal(size=n), rng.random(n) + 0.5, rng.random(n) + 0.5, rng.random(n)
    r = rng.normal(size=2 * n)
    d = rng.random(2 * n) + 0.1

    def kernels(threads: int):
        jit.set_threads(threads)
        par = jit.threads() > 1
        out, minus, scaled = np.empty(n), np.empty(2 * n), np.empty(2 * n)
        BK.commutator_middle(G.indptr, G.indices, G.data, NO_CIND, 0, Au.indptr, Au.indices, Au.data, Av.indptr,
                             Av.indices, Av.data, lq.indptr, lq.indices, lq.data, cont.indptr, cont.indices, cont.data,
                             y, hu, hv, c, out, np.empty((4, n)), par)
        BK.minus_product(G.indptr, G.indices, G.data, NO_CIND, 0, y, r, minus, par)
        BK.scaled_product(G.indptr, G.indices, G.data, y, d, scaled, par)
        return out, minus, scaled

    def times_d(a: np.ndarray, b: np.ndarray) -> np.ndarray:
        return cont @ np.concatenate([a, b, np.zeros(n)])

    gx, gy = hu * (G[:n] @ y), hv * (G[n:] @ y)
    expect = c * ((lq @ y) + times_d(gx, gy))
    expect -= times_d(hu * (Au @ gx), hv * (Av @ gy))
    for threads in (1, 2):
        out, minus, scaled = kernels(threads)
        np.testing.assert_array_equal(out, expect)
        np.testing.assert_array_equal(minus, r - G @ y)
        np.testing.assert_array_equal(scaled, d * (G @ y))


@pytest.mark.parametrize("side", [64, 136])  # 4 096 rows (two V-cycles at once) and 18 496 (one after the other)
def test_momentum_pair_gives_the_same_bits_on_one_and_two_threads(side):
    """The two momentum V-cycles of the block preconditioner (``block_preconditioner._momentum_pair``): on two
    threads (at once below PARALLEL_MIN_CELLS rows, each on both threads from there) the bits of one thread,
    and each the V-cycle of its own matrix."""
    from fvrans.linalg.block_preconditioner import _momentum_pair
    from fvrans.linalg.fgmres import VCycle

    n = side * side
    assert (n < jit.PARALLEL_MIN_CELLS) == (side == 64)
    lap = sp.kronsum(sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(side, side)),
                     sp.diags([-1.0, 2.0, -1.0], [-1, 0, 1], shape=(side, side)), format="csr")
    Au = (lap + sp.diags(np.full(n, 0.5))).tocsr()
    Av = (lap + sp.diags(np.linspace(0.2, 2.0, n))).tocsr()
    mu, mv = VCycle(), VCycle()
    mu.update(Au)
    mv.update(Av)
    w = np.random.default_rng(3).normal(size=2 * n)
    jit.set_threads(1)
    one = _momentum_pair(mu, mv, w, n, False)
    jit.set_threads(2)
    two = _momentum_pair(mu, mv, w, n, jit.threads() > 1)
    for a, b in zip(one, two):
        np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(one[0], mu(w[:n]))
    np.testing.assert_array_equal(one[1], mv(w[n:]))
    assert not np.array_equal(one[0], one[1])
