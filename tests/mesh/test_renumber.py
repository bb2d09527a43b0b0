"""Reverse Cuthill-McKee renumbering: bandwidth, topology and per-cell arrays mapped back.

Expectation for an nx x ny block of quads (nx >= ny): numbering the cells line by line across
the short side gives bandwidth ny (cells of neighbouring lines differ by ny), so a good ordering
should land near ny; the test allows 2 ny (this project's choice). A random numbering has a
bandwidth near the cell count.
"""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import Mesh, compute_geometry
from fvrans.mesh.renumber import cell_bandwidth, from_original, renumber_cells, to_original


def quad_block(nx: int, ny: int) -> Mesh:
    x = np.linspace(0.0, 2.0, nx + 1) ** 1.3  # uneven spacing: every cell has its own geometry
    y = np.linspace(0.0, 1.0, ny + 1)
    pts = np.array([[xi, yj] for yj in y for xi in x])

    def pid(i: int, j: int) -> int:
        return j * (nx + 1) + i

    cells = np.array(
        [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(ny) for i in range(nx)]
    )
    bnd = {
        "in": [[pid(0, j), pid(0, j + 1)] for j in range(ny)],
        "out": [[pid(nx, j), pid(nx, j + 1)] for j in range(ny)],
        "walls": [[pid(i, 0), pid(i + 1, 0)] for i in range(nx)]
        + [[pid(i, ny), pid(i + 1, ny)] for i in range(nx)],
    }
    return Mesh.from_arrays(pts, cells, bnd, source="block")


def _pairs(mesh: Mesh, to_old: np.ndarray | None = None) -> set:
    ni = mesh.n_internal_faces
    o, n = mesh.face_owner[:ni], mesh.face_neighbour[:ni]
    if to_old is not None:
        o, n = to_old[o], to_old[n]
    return {frozenset(p) for p in zip(o.tolist(), n.tolist())}


@pytest.fixture(scope="module")
def scrambled() -> Mesh:
    m = quad_block(40, 25)
    perm = np.random.default_rng(12345).permutation(m.n_cells)
    return m.permuted(perm)


def test_bandwidth_drops_on_scrambled_block(scrambled: Mesh) -> None:
    nx, ny = 40, 25
    before = cell_bandwidth(scrambled)
    assert before > 0.5 * scrambled.n_cells  # random numbering: near the cell count
    new, order = renumber_cells(scrambled)
    after = cell_bandwidth(new)
    assert after <= before
    assert after < 0.05 * before
    assert after <= 2 * min(nx, ny)
    assert sorted(order.tolist()) == list(range(scrambled.n_cells))


def test_topology_and_patches_preserved(scrambled: Mesh) -> None:
    new, order = renumber_cells(scrambled)
    assert _pairs(new, order) == _pairs(scrambled)
    assert [(p.name, p.size) for p in new.patches] == [(p.name, p.size) for p in scrambled.patches]
    for p in scrambled.patches:
        q = new.patch(p.name)
        old_faces = {frozenset(e) for e in scrambled.face_points[p.start : p.stop].tolist()}
        new_faces = {frozenset(e) for e in new.face_points[q.start : q.stop].tolist()}
        assert old_faces == new_faces
        # each boundary face keeps its owner cell (in old numbering)
        own_old = dict(
            zip(
                map(frozenset, scrambled.face_points[p.start : p.stop].tolist()),
                scrambled.face_owner[p.start : p.stop],
            )
        )
        for e, c in zip(new.face_points[q.start : q.stop].tolist(), new.face_owner[q.start : q.stop]):
            assert order[c] == own_old[frozenset(e)]
    assert np.array_equal(new.points, scrambled.points)


def test_geometry_maps_back_exactly(scrambled: Mesh) -> None:
    new, order = renumber_cells(scrambled)
    g0, g1 = compute_geometry(scrambled), compute_geometry(new)
    assert np.array_equal(to_original(g1.cell_centre, order), g0.cell_centre)
    assert np.array_equal(to_original(g1.cell_area, order), g0.cell_area)
    assert np.array_equal(from_original(g0.cell_area, order), g1.cell_area)
    assert np.array_equal(to_original(g1.cell_aspect_ratio, order), g0.cell_aspect_ratio)
    v = np.random.default_rng(1).random((scrambled.n_cells, 2))
    assert np.array_equal(to_original(from_original(v, order), order), v)
    assert np.array_equal(from_original(to_original(v, order), order), v)


def test_good_numbering_is_not_made_worse() -> None:
    # a 1-cell-high strip numbered along its length: bandwidth 1, the minimum
    m = quad_block(30, 1)
    assert cell_bandwidth(m) == 1
    new, order = renumber_cells(m)
    assert cell_bandwidth(new) == 1
    assert sorted(order.tolist()) == list(range(m.n_cells))


def test_single_cell_and_length_mismatch() -> None:
    m = quad_block(1, 1)
    new, order = renumber_cells(m)
    assert cell_bandwidth(new) == 0 and order.tolist() == [0]
    with pytest.raises(MeshError, match="length 3 does not match the 1 cells"):
        to_original(np.zeros(3), order)
