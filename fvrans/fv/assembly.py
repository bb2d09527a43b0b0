"""Face-based coefficient sets and their fixed-sparsity CSR assembly.

A discretised equation for a cell-centred scalar is kept as a :class:`Coefficients` set::

    diag[c] phi_c + sum_{internal f of c} off[f] phi_nb(f) = source[c]

with ``off_owner[f]`` the coefficient of phi_N in the owner's row and ``off_neighbour[f]`` the
coefficient of phi_O in the neighbour's row. Operators add their terms into one set; a
:class:`CsrAssembler`, built once per mesh, pours the set into the same ``csr_matrix`` every
iteration without rebuilding its structure.
"""

from __future__ import annotations

import weakref
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from fvrans.fv import _assembly_kernels as _k
from fvrans.mesh.mesh import Mesh


@dataclass
class Coefficients:
    """diag (n_cells,), off_owner / off_neighbour (n_internal_faces,), source (n_cells,)."""

    diag: np.ndarray
    off_owner: np.ndarray
    off_neighbour: np.ndarray
    source: np.ndarray

    @classmethod
    def zeros(cls, mesh: Mesh) -> Coefficients:
        nc, nfi = mesh.n_cells, mesh.n_internal_faces
        return cls(np.zeros(nc), np.zeros(nfi), np.zeros(nfi), np.zeros(nc))

    def clear(self) -> Coefficients:
        """Set every coefficient to zero in place; returns self."""
        self.diag[:] = 0.0
        self.off_owner[:] = 0.0
        self.off_neighbour[:] = 0.0
        self.source[:] = 0.0
        return self

    def copy(self) -> Coefficients:
        return Coefficients(
            self.diag.copy(), self.off_owner.copy(), self.off_neighbour.copy(), self.source.copy()
        )

    def __iadd__(self, other: Coefficients) -> Coefficients:
        self.diag += other.diag
        self.off_owner += other.off_owner
        self.off_neighbour += other.off_neighbour
        self.source += other.source
        return self

    def __add__(self, other: Coefficients) -> Coefficients:
        out = self.copy()
        out += other
        return out

    def residual(self, mesh: Mesh, phi: np.ndarray, out: np.ndarray | None = None) -> np.ndarray:
        """r = b - A phi (n_cells,)."""
        phi = np.ascontiguousarray(phi, dtype=np.float64)
        if out is None:
            out = np.empty(mesh.n_cells)
        _k.residual(
            mesh.face_owner, mesh.face_neighbour, self.diag, self.off_owner, self.off_neighbour,
            self.source, phi, out,
        )
        return out


def under_relax(coeffs: Coefficients, phi: np.ndarray, alpha: float) -> Coefficients:
    """Implicit under-relaxation in place: a_P <- a_P / alpha, b <- b + (1 - alpha)/alpha a_P phi.

    The solution of the relaxed system equals phi_new = alpha phi* + (1 - alpha) phi in the
    Jacobi sense (Patankar 1980, Numerical Heat Transfer and Fluid Flow, sec. 4.2-5); a converged
    phi is a fixed point of both systems.
    """
    if not 0.0 < alpha <= 1.0:
        raise ValueError(f"under_relax: alpha must be in (0, 1], got {alpha}")
    coeffs.source += (1.0 - alpha) / alpha * coeffs.diag * phi
    coeffs.diag /= alpha
    return coeffs


_STRUCTURES: dict[int, tuple[weakref.ref, tuple[np.ndarray, ...]]] = {}


def _structure(mesh: Mesh) -> tuple[np.ndarray, ...]:
    """(indptr, indices, diag_pos, owner_pos, neigh_pos) of the mesh's stencil, made once per mesh
    and shared by all its assemblers (the momentum, pressure and model equations: 64 bytes per
    cell of quads each otherwise); int32 while the entries fit."""
    hit = _STRUCTURES.get(id(mesh))
    if hit is not None and hit[0]() is mesh:
        return hit[1]
    nc, nfi = mesh.n_cells, mesh.n_internal_faces
    own = mesh.face_owner[:nfi]
    nb = mesh.face_neighbour[:nfi]
    cells = np.arange(nc, dtype=np.int64)
    rows = np.concatenate([cells, own, nb])
    cols = np.concatenate([cells, nb, own])
    keys = rows * np.int64(nc) + cols
    del rows, cols
    ukeys, inv = np.unique(keys, return_inverse=True)
    del keys
    itype = np.int32 if len(ukeys) < 2**31 - 1 else np.int64
    inv = inv.ravel().astype(itype)
    indptr = np.zeros(nc + 1, dtype=itype)
    np.cumsum(np.bincount(ukeys // nc, minlength=nc), out=indptr[1:])
    indices = (ukeys % nc).astype(itype)
    struct = (indptr, indices, inv[:nc], inv[nc : nc + nfi], inv[nc + nfi :])
    key = id(mesh)
    _STRUCTURES[key] = (weakref.ref(mesh, lambda _, key=key: _STRUCTURES.pop(key, None)), struct)
    return struct


class CsrAssembler:
    """Fixed CSR structure of the cell-centred stencil (diagonal + one entry per face neighbour).

    Built once per mesh (the structure is shared by every assembler of the mesh). ``diag_pos[c]``,
    ``owner_pos[f]`` (row O, column N) and ``neigh_pos[f]`` (row N, column O) are the positions
    in ``matrix.data``; :meth:`matrix` refills ``data`` in place and returns the same
    ``scipy.sparse.csr_matrix`` object every time (column indices sorted, no explicit structure
    rebuild). Two faces between the same two cells share an entry.
    """

    def __init__(self, mesh: Mesh):
        self.n_cells = mesh.n_cells
        self.n_internal_faces = mesh.n_internal_faces
        indptr, indices, self.diag_pos, self.owner_pos, self.neigh_pos = _structure(mesh)
        nc = mesh.n_cells
        data = np.zeros(len(indices))
        self._matrix = sp.csr_matrix((data, indices, indptr), shape=(nc, nc), copy=False)
        self._matrix.has_sorted_indices = True
        self._data = self._matrix.data
        self._indices = self._matrix.indices
        self._indptr = self._matrix.indptr
        self._cf_ptr, self._cf_face = mesh.cell_faces

    @property
    def nnz(self) -> int:
        return len(self._data)

    def matrix(
        self, diag: np.ndarray, off_owner: np.ndarray, off_neighbour: np.ndarray
    ) -> sp.csr_matrix:
        """Refill and return the matrix (the same object each call)."""
        A = self._matrix
        if A.data is not self._data or A.indices is not self._indices or A.indptr is not self._indptr:
            raise RuntimeError(
                "CsrAssembler: the matrix structure was changed outside the assembler "
                "(e.g. by eliminate_zeros or sum_duplicates); do not modify the assembled matrix in place"
            )
        if diag.shape != (self.n_cells,) or off_owner.shape != (self.n_internal_faces,) or (
            off_neighbour.shape != (self.n_internal_faces,)
        ):
            raise ValueError(
                f"CsrAssembler.matrix: expected diag ({self.n_cells},) and off-diagonals "
                f"({self.n_internal_faces},), got {diag.shape}, {off_owner.shape}, {off_neighbour.shape}"
            )
        _k.csr_refill(
            self._indptr, self._cf_ptr, self._cf_face, self.diag_pos, self.owner_pos, self.neigh_pos,
            np.ascontiguousarray(diag, dtype=np.float64),
            np.ascontiguousarray(off_owner, dtype=np.float64),
            np.ascontiguousarray(off_neighbour, dtype=np.float64),
            self._data,
        )
        return A

    def assemble(self, coeffs: Coefficients) -> tuple[sp.csr_matrix, np.ndarray]:
        """(A, b) of a coefficient set; A is the assembler's matrix, b is ``coeffs.source``."""
        return self.matrix(coeffs.diag, coeffs.off_owner, coeffs.off_neighbour), coeffs.source
