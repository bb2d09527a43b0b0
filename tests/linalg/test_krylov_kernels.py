"""The Gram-Schmidt kernels of FGMRES (fvrans/linalg/_krylov_kernels.py) form their sums in a stated
order (row order within each of SUM_CHUNKS consecutive chunks, chunks added in order; per row the
basis vectors subtracted in turn), whatever loop layout makes them fast: the bits of a plain
sequential evaluation of the same formulas (numpy's cumulative sums are sequential)."""

from __future__ import annotations

import numpy as np

from fvrans.jit import PARALLEL_MIN_CELLS
from fvrans.linalg import _krylov_kernels as KK
from fvrans.linalg._amg_kernels import SUM_CHUNKS


def _sequential_sum(terms: np.ndarray) -> float:
    """Sum in row order by chunks as the kernels state it (one chunk below PARALLEL_MIN_CELLS)."""
    n = terms.size
    nq = SUM_CHUNKS if n >= PARALLEL_MIN_CELLS else 1
    total = 0.0
    for q in range(nq):
        chunk = terms[q * n // nq:(q + 1) * n // nq]
        total += float(np.cumsum(chunk)[-1]) if chunk.size else 0.0
    return total


def _subtract(V: np.ndarray, k: int, c: np.ndarray, w: np.ndarray) -> np.ndarray:
    """w - c_0 V_0 - c_1 V_1 - ... per row in the order of i."""
    out = w.copy()
    for i in range(k + 1):
        out -= c[i] * V[i].astype(np.float64)
    return out


def _reference(V: np.ndarray, k: int, w: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Classical Gram-Schmidt with the second pass when ||w|| fell below REORTHOGONALISE_BELOW of its
    length, written as the plain sequential formulas: (h[0..k+1], the new basis vector)."""
    before = np.sqrt(_sequential_sum(w * w))
    basis = V[: k + 1].astype(np.float64)
    c = np.array([_sequential_sum(basis[i] * w) for i in range(k + 1)])
    h = c.copy()
    w = _subtract(V, k, c, w)
    nrm = np.sqrt(_sequential_sum(w * w))
    if nrm < KK.REORTHOGONALISE_BELOW * before:
        c = np.array([_sequential_sum(basis[i] * w) for i in range(k + 1)])
        h += c
        w = _subtract(V, k, c, w)
        nrm = np.sqrt(_sequential_sum(w * w))
    return np.append(h, nrm), (w * (1.0 / nrm)).astype(V.dtype)


def test_gram_schmidt_gives_the_bits_of_the_sequential_sums():
    """Float32 basis as the simultaneous solve stores it, 5 and 11 basis vectors (neither a multiple of
    the four the dot products take at once), one chunk (3 001 rows, not a multiple of the 512-row
    blocks) and SUM_CHUNKS chunks (PARALLEL_MIN_CELLS + 1 003 rows); w mostly in the span, so the
    second pass is taken, and a w that needs one pass only: h and the new basis vector equal the
    sequential evaluation bit for bit (a kernel that reorders a sum, e.g. into vector lanes, fails)."""
    rng = np.random.default_rng(3)
    for n in (3001, PARALLEL_MIN_CELLS + 1003):
        for k in (4, 10):
            V = np.zeros((k + 2, n), dtype=np.float32)
            V[: k + 1] = np.linalg.qr(rng.normal(size=(n, k + 1)))[0].T
            for spread in (0.01, 10.0):
                w = rng.normal(size=n) * spread + rng.normal(size=k + 1) @ V[: k + 1].astype(np.float64)
                h_ref, v_ref = _reference(V, k, w)
                h = np.zeros(k + 2)
                Vk = V.copy()
                KK.orthogonalise(Vk, k, w.copy(), h, False)
                np.testing.assert_array_equal(h, h_ref)
                np.testing.assert_array_equal(Vk[k + 1], v_ref)


def test_basis_combination_adds_the_vectors_in_turn():
    """x += sum_i y_i Z_i equals x + y_0 Z_0 + y_1 Z_1 + ... evaluated per row in that order, bit for bit."""
    rng = np.random.default_rng(4)
    n, m = 5003, 7
    Z = rng.normal(size=(m, n))
    y = rng.normal(size=m)
    x0 = rng.normal(size=n)
    ref = x0.copy()
    for i in range(m):
        ref += y[i] * Z[i]
    x = x0.copy()
    KK.add_combination(Z, y, x, False)
    np.testing.assert_array_equal(x, ref)
