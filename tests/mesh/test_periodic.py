"""Periodic pairs joined at the mesh level: faces matched geometrically, internal faces whose
owner-to-neighbour vector includes the translation, clear errors for faces that do not match."""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh.generate import channel
from fvrans.mesh.geometry import compute_geometry
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.periodic import join_periodic
from fvrans.physics.wall_distance import cell_wall_distance


def test_joined_faces_are_internal_with_the_translation_in_their_delta():
    m = channel(2.0, 1.0, 4, 3, grading_y=0.1)
    j = join_periodic(m, [("inlet", "outlet")])
    assert j.patch_names == ["lower_wall", "upper_wall"]
    assert j.n_internal_faces == m.n_internal_faces + 3 and j.n_faces == m.n_faces - 3
    (pair,) = j.periodic
    assert (pair.first, pair.second, pair.translation) == ("inlet", "outlet", (2.0, 0.0))
    g = compute_geometry(j)
    f = np.arange(pair.start, pair.stop)
    # owner at x = 0.25, neighbour's image at 1.75 - 2 = -0.25: d = (-0.5, 0), w = 1/2, no skew
    np.testing.assert_allclose(g.face_delta[f], [[-0.5, 0.0]] * 3, atol=1e-14)
    np.testing.assert_allclose(g.face_weight[f], 0.5)
    np.testing.assert_allclose(g.face_skew[f], 0.0, atol=1e-14)
    np.testing.assert_allclose(g.face_nonorth_deg[f], 0.0, atol=1e-6)
    # every cell is closed: the area vectors of its faces sum to zero
    s = np.zeros((j.n_cells, 2))
    np.add.at(s, j.face_owner, g.face_area_vector)
    np.add.at(s, j.face_neighbour[: j.n_internal_faces], -g.face_area_vector[: j.n_internal_faces])
    np.testing.assert_allclose(s, 0.0, atol=1e-14)


def test_a_one_cell_long_column_joins_each_cell_to_itself():
    j = join_periodic(channel(0.1, 1.0, 1, 5), [("inlet", "outlet")])
    p = j.periodic[0]
    np.testing.assert_array_equal(j.face_owner[p.start : p.stop], j.face_neighbour[p.start : p.stop])
    g = compute_geometry(j)
    np.testing.assert_allclose(g.face_delta[p.start : p.stop], [[-0.1, 0.0]] * 5, atol=1e-14)


def _split_lower_wall(nx: int) -> Mesh:
    """channel(1, 1, nx, 1) with its lower wall split into 'wall_a' (the first face) and 'wall_b'."""
    m = channel(1.0, 1.0, nx, 1)
    fp = {p.name: m.face_points[p.start : p.stop] for p in m.patches}
    x = 0.5 * (m.points[fp["lower_wall"][:, 0], 0] + m.points[fp["lower_wall"][:, 1], 0])
    order = np.argsort(x)
    return Mesh.from_arrays(m.points, [m.cell(c) for c in range(m.n_cells)], {
        "inlet": fp["inlet"], "outlet": fp["outlet"], "upper_wall": fp["upper_wall"],
        "wall_a": fp["lower_wall"][order[:1]], "wall_b": fp["lower_wall"][order[1:]]})


def test_wall_distance_sees_the_walls_across_the_joined_pair():
    # a wall only under the first of three cells: the last cell is nearer its copy beyond x = 1
    m = _split_lower_wall(3)
    j = join_periodic(m, [("inlet", "outlet")])
    g = compute_geometry(j)
    d = cell_wall_distance(j, g, ["wall_a"])
    x = g.cell_centre[:, 0]
    near = np.minimum(np.maximum(0.0, x - 1 / 3), np.maximum(0.0, 1.0 - x))  # along x to [0, 1/3] or [1, 4/3]
    np.testing.assert_allclose(d, np.hypot(near, 0.5))
    assert d[np.argmax(x)] == pytest.approx(np.hypot(1 / 6, 0.5))  # without the copy: hypot(1/2, 1/2)


def _column(right_mid: float) -> Mesh:
    pts = np.array([[0, 0], [1, 0], [0, 0.5], [1, right_mid], [0, 1], [1, 1]], float)
    return Mesh.from_arrays(pts, [[0, 1, 3, 2], [2, 3, 5, 4]], {
        "left": [[0, 2], [2, 4]], "right": [[1, 3], [3, 5]], "bottom": [[0, 1]], "top": [[4, 5]]})


def test_faces_that_do_not_match_are_refused_and_named():
    with pytest.raises(MeshError, match=r"periodic pair \('left', 'right'\) with translation \(1, 0.05\): "
                                        r"2 face\(s\) of 'left' \(end points differ\) have no partner, "
                                        r"centres \(0, 0.25\), \(0, 0.75\)"):
        join_periodic(_column(0.6), [("left", "right")])
    m = channel(1.0, 1.0, 1, 3)
    split = Mesh.from_arrays(m.points, [m.cell(c) for c in range(m.n_cells)], {
        "inlet": m.face_points[m.patch("inlet").start : m.patch("inlet").stop],
        "outlet": m.face_points[m.patch("outlet").start : m.patch("outlet").stop][:2],
        "walls": np.r_[m.face_points[m.patch("outlet").start : m.patch("outlet").stop][2:],
                       m.face_points[m.patch("lower_wall").start :]]})
    with pytest.raises(MeshError, match=r"face\(s\) of 'inlet' \(3 faces\) have no partner"):
        join_periodic(split, [("inlet", "outlet")])
    with pytest.raises(MeshError, match="no boundary patch named 'outflow'"):
        join_periodic(m, [("inlet", "outflow")])
    with pytest.raises(MeshError, match="face the same way"):
        join_periodic(_split_lower_wall(2), [("wall_a", "wall_b")])


def test_a_joined_mesh_keeps_its_pairs_through_topology_checks():
    from fvrans.checkpoint import mesh_hash
    from fvrans.mesh.morph import morph, topology_difference

    m = channel(1.0, 1.0, 2, 2)
    j = join_periodic(m, [("inlet", "outlet")])
    assert "periodic" in topology_difference(j, m) or "faces" in topology_difference(j, m)
    assert mesh_hash(j) != mesh_hash(m)
    with pytest.raises(MeshError, match="morph the mesh before joining"):
        morph(j, lambda p: p * 1.01)
    with pytest.raises(MeshError, match="renumber the cells before joining"):
        j.permuted(np.arange(j.n_cells)[::-1])
