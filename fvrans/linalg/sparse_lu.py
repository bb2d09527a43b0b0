"""Sparse LU factorisation of a square system, for the simultaneous path's direct solve.

``factorize(A)`` returns an object with ``solve(b)``. It uses UMFPACK (Davis 2004, ACM Trans. Math.
Softw. 30, 196-199, unsymmetric multifrontal with column pre-ordering, from memory), the library
cvxopt's wheel carries, through its C functions (ctypes), and falls back to scipy's SuperLU where
cvxopt cannot be imported or UMFPACK finds the matrix singular. Measured on the fine backward-facing
step's coupled system (331 776 unknowns, 10.7 entries per row, 2026-12-03, 2-core machine at load
1-2): SuperLU with fvrans's ordering 17.4 s to factorise and 0.18 s per solve; UMFPACK 0.9 s symbolic
+ 4.6 s numeric and 0.23 s per solve without iterative refinement (0.64-0.91 s with its default two
steps, all cvxopt's Python interface offers), residuals 9e-14 (SuperLU), 1.1e-13 and 6e-14 (UMFPACK
without and with refinement).

>>> import numpy as np, scipy.sparse as sp
>>> A = sp.csc_matrix(np.array([[4.0, 1.0, 0.0], [1.0, 3.0, 1.0], [0.0, 2.0, 5.0]]))
>>> x = factorize(A).solve(np.array([5.0, 5.0, 7.0]))
>>> bool(np.allclose(x, [1.0, 1.0, 1.0]))
True
"""

from __future__ import annotations

import ctypes

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

try:
    from cvxopt import matrix as _cvx_matrix
    from cvxopt import spmatrix as _cvx_spmatrix
    from cvxopt import umfpack as _umfpack
except ImportError:  # pragma: no cover - cvxopt is a dependency; SuperLU stands in without it
    _umfpack = None

#: SuperLU's fill-reducing ordering and diagonal pivot threshold (minimum degree on A^T + A,
#: preferring the diagonal pivot unless it is below 0.01 of its column's largest entry): against
#: column AMD with partial pivoting its factors held half the entries on the bundled systems
SUPERLU_ORDERING = "MMD_AT_PLUS_A"
SUPERLU_PIVOT_THRESHOLD = 0.01

#: UMFPACK's control array: its length, and the slot of the number of iterative-refinement steps per
#: solve (umfpack.h: UMFPACK_CONTROL, UMFPACK_IRSTEP); the codes its calls return (UMFPACK_OK,
#: UMFPACK_WARNING_singular_matrix, UMFPACK_ERROR_out_of_memory)
_CONTROL_SIZE, _INFO_SIZE, _IRSTEP = 20, 90, 7
_OK, _SINGULAR, _OUT_OF_MEMORY = 0, 1, -1
#: refinement steps per solve: none. The fine step's system (331 776 unknowns) solved to a relative
#: residual of 1.1e-13 without refinement, 6e-14 with UMFPACK's default two steps at 4x the time
#: (0.23 s against 0.91 s, 2026-12-03); the simultaneous path's systems need a relative residual of
#: 0.01 (``system_tolerance``), and with kept factors FGMRES refines by itself
REFINEMENT_STEPS = 0


def _umfpack_library() -> ctypes.CDLL | None:
    """UMFPACK's C functions (``umfpack_dl_*``) from the library cvxopt's wheel loads, through ctypes:
    unlike cvxopt's Python interface, they take UMFPACK's control array (the refinement steps). None
    where they cannot be reached (no cvxopt, or a platform whose loader does not look through the
    extension module's dependencies)."""
    if _umfpack is None:
        return None
    try:
        lib = ctypes.CDLL(_umfpack.__file__)
        handle, control, info = ctypes.POINTER(ctypes.c_void_p), _DOUBLES, _DOUBLES
        lib.umfpack_dl_defaults.argtypes = [control]
        lib.umfpack_dl_symbolic.argtypes = [ctypes.c_int64, ctypes.c_int64, _LONGS, _LONGS, _DOUBLES,
                                            handle, control, info]
        lib.umfpack_dl_numeric.argtypes = [_LONGS, _LONGS, _DOUBLES, ctypes.c_void_p, handle, control, info]
        lib.umfpack_dl_solve.argtypes = [ctypes.c_int, _LONGS, _LONGS, _DOUBLES, _DOUBLES, _DOUBLES,
                                         ctypes.c_void_p, control, info]
        lib.umfpack_dl_free_symbolic.argtypes = [handle]
        lib.umfpack_dl_free_numeric.argtypes = [handle]
    except (OSError, AttributeError):  # pragma: no cover - platform dependent
        return None
    return lib


_DOUBLES = np.ctypeslib.ndpointer(np.float64, flags="C_CONTIGUOUS")
_LONGS = np.ctypeslib.ndpointer(np.int64, flags="C_CONTIGUOUS")
_LIBRARY = _umfpack_library()


def _check(status: int, what: str) -> None:
    if status == _SINGULAR:
        raise ArithmeticError(f"UMFPACK {what}: the matrix is singular")
    if status == _OUT_OF_MEMORY:
        raise MemoryError(f"UMFPACK {what}: out of memory")
    if status != _OK:
        raise RuntimeError(f"UMFPACK {what} failed with status {status}")


class _Symbolic:
    """UMFPACK's symbolic factorisation of a pattern (column ordering and analysis), freed with the object."""

    def __init__(self, indptr: np.ndarray, indices: np.ndarray, data: np.ndarray, control: np.ndarray):
        n = len(indptr) - 1
        self.handle = ctypes.c_void_p()
        _check(_LIBRARY.umfpack_dl_symbolic(n, n, indptr, indices, data, ctypes.byref(self.handle), control,
                                            np.zeros(_INFO_SIZE)), "symbolic analysis")

    def __del__(self):
        if self.handle and _LIBRARY is not None:
            _LIBRARY.umfpack_dl_free_symbolic(ctypes.byref(self.handle))


class UmfpackLU:
    """UMFPACK's factors of ``A`` (symbolic and numeric factorisation); ``solve(b)`` -> x without
    iterative refinement (``REFINEMENT_STEPS``). ``analysis``: an earlier matrix's ``analysis`` (its
    pattern and symbolic factorisation: ordering and analysis, about 1/6 of the work on the fine step's
    system), reused when the patterns agree; it holds no factors, so the earlier factors can be freed
    first. Through cvxopt's Python interface (with UMFPACK's default refinement) where its C functions
    cannot be reached."""

    backend = "umfpack"

    def __init__(self, A: sp.spmatrix, analysis: tuple | None = None):
        csc = sp.csc_matrix(A)
        csc.sort_indices()
        pattern = (csc.shape, csc.indptr.astype(np.int64), csc.indices.astype(np.int64))
        same = analysis is not None and _same_pattern(analysis[0], pattern)
        if _LIBRARY is None:  # pragma: no cover - platform dependent
            self._init_cvxopt(csc, analysis[1] if same else None)
            self.analysis = (pattern, self._symbolic)
            return
        self._indptr, self._indices = (analysis[0][1], analysis[0][2]) if same else pattern[1:]
        self._data = np.ascontiguousarray(csc.data, dtype=np.float64)
        self._control = np.zeros(_CONTROL_SIZE)
        _LIBRARY.umfpack_dl_defaults(self._control)
        self._control[_IRSTEP] = REFINEMENT_STEPS
        symbolic = analysis[1] if same else _Symbolic(self._indptr, self._indices, self._data, self._control)
        self._numeric = ctypes.c_void_p()
        _check(_LIBRARY.umfpack_dl_numeric(self._indptr, self._indices, self._data, symbolic.handle,
                                           ctypes.byref(self._numeric), self._control, np.zeros(_INFO_SIZE)),
               "numeric factorisation")
        self.analysis = ((csc.shape, self._indptr, self._indices), symbolic)

    def _init_cvxopt(self, csc: sp.csc_matrix, symbolic) -> None:  # pragma: no cover - platform dependent
        n = csc.shape[0]
        coo = csc.tocoo()
        self._A = _cvx_spmatrix(_cvx_matrix(np.ascontiguousarray(coo.data, dtype=float)),
                                _cvx_matrix(coo.row.astype(np.int64)), _cvx_matrix(coo.col.astype(np.int64)),
                                (n, n))
        self._symbolic = symbolic if symbolic is not None else _umfpack.symbolic(self._A)
        self._factors = _umfpack.numeric(self._A, self._symbolic)

    def solve(self, b: np.ndarray) -> np.ndarray:
        if _LIBRARY is None:  # pragma: no cover - platform dependent
            x = _cvx_matrix(np.array(b, dtype=float))
            _umfpack.solve(self._A, self._factors, x)
            return np.asarray(x).ravel()
        x = np.empty(len(self._indptr) - 1)
        _check(_LIBRARY.umfpack_dl_solve(0, self._indptr, self._indices, self._data, x,
                                         np.ascontiguousarray(b, dtype=np.float64), self._numeric, self._control,
                                         np.zeros(_INFO_SIZE)), "solve")
        return x

    def __del__(self):
        if getattr(self, "_numeric", None) and _LIBRARY is not None:
            _LIBRARY.umfpack_dl_free_numeric(ctypes.byref(self._numeric))


class SuperLUFactors:
    """scipy's SuperLU factors of ``A``; ``solve(b)`` -> x."""

    backend = "superlu"
    analysis = None

    def __init__(self, A: sp.spmatrix):
        self._lu = spla.splu(sp.csc_matrix(A), permc_spec=SUPERLU_ORDERING,
                             diag_pivot_thresh=SUPERLU_PIVOT_THRESHOLD)

    def solve(self, b: np.ndarray) -> np.ndarray:
        return self._lu.solve(b)


def _same_pattern(a: tuple, b: tuple) -> bool:
    return a[0] == b[0] and np.array_equal(a[1], b[1]) and np.array_equal(a[2], b[2])


def factorize(A: sp.spmatrix, backend: str = "auto", analysis: tuple | None = None) -> UmfpackLU | SuperLUFactors:
    """The LU factors of the square sparse matrix ``A`` (its stored entries; drop explicit zeros
    first). ``backend``: "auto" (UMFPACK when cvxopt is importable, SuperLU if UMFPACK finds the
    matrix numerically singular or cvxopt is missing), "umfpack" or "superlu". ``analysis``: an earlier
    UMFPACK factorisation's ``analysis``, reused if the pattern is the same (``UmfpackLU``)."""
    if backend == "superlu" or (backend == "auto" and _umfpack is None):
        return SuperLUFactors(A)
    if _umfpack is None:
        raise ImportError("the UMFPACK backend needs cvxopt (pip install cvxopt)")
    try:
        return UmfpackLU(A, analysis)
    except ArithmeticError:
        if backend == "umfpack":
            raise
        return SuperLUFactors(A)
