"""Cell renumbering by reverse Cuthill-McKee to reduce the bandwidth of the cell-to-cell matrix.

Reference: E. Cuthill and J. McKee (1969), "Reducing the bandwidth of sparse symmetric matrices",
Proc. 24th ACM National Conference; the reversed ordering is due to A. George (1971). The
ordering itself comes from :func:`scipy.sparse.csgraph.reverse_cuthill_mckee`.

Convention: ``order[i]`` is the old index of new cell ``i``, so a per-cell array ``v_old`` of
the original mesh becomes ``v_old[order]`` on the renumbered one.
"""

from __future__ import annotations

import numpy as np
from scipy.sparse import coo_matrix
from scipy.sparse.csgraph import reverse_cuthill_mckee

from fvrans.errors import MeshError
from fvrans.mesh.mesh import Mesh


def cell_bandwidth(mesh: Mesh) -> int:
    """Bandwidth of the cell adjacency matrix: max |owner - neighbour| over internal faces."""
    ni = mesh.n_internal_faces
    if ni == 0:
        return 0
    return int(np.abs(mesh.face_owner[:ni] - mesh.face_neighbour[:ni]).max())


def cell_adjacency(mesh: Mesh):
    """Symmetric sparse (n_cells, n_cells) matrix with a 1 for every pair of face neighbours."""
    ni = mesh.n_internal_faces
    o = mesh.face_owner[:ni]
    n = mesh.face_neighbour[:ni]
    rows = np.concatenate([o, n])
    cols = np.concatenate([n, o])
    data = np.ones(len(rows), dtype=np.int8)
    return coo_matrix((data, (rows, cols)), shape=(mesh.n_cells, mesh.n_cells)).tocsr()


def rcm_order(mesh: Mesh) -> np.ndarray:
    """Reverse Cuthill-McKee cell order: ``order[i]`` = old index of new cell ``i``."""
    return np.asarray(reverse_cuthill_mckee(cell_adjacency(mesh), symmetric_mode=True), dtype=np.int64)


def renumber_cells(mesh: Mesh) -> tuple[Mesh, np.ndarray]:
    """The mesh with cells in reverse Cuthill-McKee order, and ``order`` (new i = old order[i]).

    The ordering is kept only if it does not widen the bandwidth; otherwise the identity is
    returned with the mesh itself.

    >>> import numpy as np
    >>> from fvrans.mesh import Mesh
    >>> pts = np.array([[i, j] for j in range(2) for i in range(4)], float)
    >>> a, b, c = [0, 1, 5, 4], [1, 2, 6, 5], [2, 3, 7, 6]  # a strip of three squares
    >>> edges = [[0, 1], [1, 2], [2, 3], [3, 7], [7, 6], [6, 5], [5, 4], [4, 0]]
    >>> m = Mesh.from_arrays(pts, [a, c, b], {"all": edges})  # numbered out of order
    >>> cell_bandwidth(m)
    2
    >>> new, order = renumber_cells(m)
    >>> cell_bandwidth(new), sorted(order.tolist())
    (1, [0, 1, 2])
    """
    order = rcm_order(mesh)
    new = mesh.permuted(order)
    if cell_bandwidth(new) > cell_bandwidth(mesh):
        return mesh, np.arange(mesh.n_cells, dtype=np.int64)
    return new, order


def _check(values: np.ndarray, order: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    values = np.asarray(values)
    order = np.asarray(order, dtype=np.int64)
    if values.shape[:1] != order.shape:
        raise MeshError(
            f"a per-cell array of length {values.shape[0] if values.ndim else 0} does not match the "
            f"{len(order)} cells of the ordering; pass one value (row) per cell"
        )
    return values, order


def from_original(values: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Per-cell values of the original mesh, rearranged for the renumbered mesh: ``values[order]``."""
    values, order = _check(values, order)
    return values[order]


def to_original(values: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Per-cell values of the renumbered mesh, put back in the original order (inverse of from_original)."""
    values, order = _check(values, order)
    out = np.empty_like(values)
    out[order] = values
    return out
