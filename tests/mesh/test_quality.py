"""Mesh quality summary against meshes whose measures are known in closed form.

Closed forms (worked out in the comments, plane geometry only):
* parallelogram cells sheared by an angle theta: every internal face is theta non-orthogonal,
  the centre-to-centre segment crosses each face at its mid-point (skewness 0), and the aspect
  ratio L_max^2 / A = (h / cos theta)^2 / h^2 = 1 / cos^2 theta;
* two triangles (0,0),(0,L),(-1,0) and (0,0),(1,0),(0,L): centroids (-1/3, L/3), (1/3, L/3)
  (vertex means), shared face x = 0 with centre (0, L/2), crossing point (0, L/3), so
  skewness = (L/6) / (2/3) = L/4 and non-orthogonality 0.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from fvrans.mesh import Mesh, compute_geometry, read_mesh
from fvrans.mesh.generate import cavity
from fvrans.mesh.quality import (
    ASPECT_WARN,
    NONORTH_WARN_DEG,
    SKEWNESS_WARN,
    format_report,
    mesh_quality,
)


def sheared_block(nx: int, ny: int, h: float, theta_deg: float, move=None) -> Mesh:
    t = np.tan(np.radians(theta_deg))
    pts = np.array([[i * h + j * h * t, j * h] for j in range(ny + 1) for i in range(nx + 1)], dtype=float)
    if move is not None:
        (i, j), dxy = move
        pts[j * (nx + 1) + i] += dxy

    def pid(i: int, j: int) -> int:
        return j * (nx + 1) + i

    cells = np.array(
        [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(ny) for i in range(nx)]
    )
    bnd = {
        "bottom": [[pid(i, 0), pid(i + 1, 0)] for i in range(nx)],
        "right": [[pid(nx, j), pid(nx, j + 1)] for j in range(ny)],
        "top": [[pid(i, ny), pid(i + 1, ny)] for i in range(nx)],
        "left": [[pid(0, j), pid(0, j + 1)] for j in range(ny)],
    }
    return Mesh.from_arrays(pts, cells, bnd, source="sheared block")


@pytest.mark.parametrize("theta", [0.0, 30.0, 60.0])
def test_sheared_block(theta: float) -> None:
    nx, ny, h = 6, 4, 0.5
    m = sheared_block(nx, ny, h, theta)
    q = mesh_quality(m, compute_geometry(m))
    assert (q.n_cells, q.n_points) == (nx * ny, (nx + 1) * (ny + 1))
    # internal edges: (nx-1) ny + nx (ny-1); boundary 2 (nx + ny)
    assert q.n_internal_faces == (nx - 1) * ny + nx * (ny - 1)
    assert q.n_faces == q.n_internal_faces + 2 * (nx + ny)
    assert (q.n_triangles, q.n_quads, q.n_polygons) == (0, nx * ny, 0)
    assert q.min_area == pytest.approx(h * h, rel=1e-12)
    assert q.max_area == pytest.approx(h * h, rel=1e-12)
    assert q.total_area == pytest.approx(nx * ny * h * h, rel=1e-12)
    assert q.max_nonorth_deg == pytest.approx(theta, abs=1e-9)
    assert q.mean_nonorth_deg == pytest.approx(theta, abs=1e-9)
    assert q.max_skewness == pytest.approx(0.0, abs=1e-12)
    assert q.max_aspect_ratio == pytest.approx(1.0 / np.cos(np.radians(theta)) ** 2, rel=1e-12)
    assert q.patch_faces == {"bottom": nx, "right": ny, "top": nx, "left": ny}
    side = h / np.cos(np.radians(theta))
    assert q.patch_length["bottom"] == pytest.approx(nx * h, rel=1e-12)
    assert q.patch_length["left"] == pytest.approx(ny * side, rel=1e-12)
    assert q.warnings == ()


def test_strong_shear_warns() -> None:
    theta = 75.0  # beyond the 63.5 degree limit (what the tests cover)
    assert theta > NONORTH_WARN_DEG
    m = sheared_block(3, 3, 1.0, theta)
    q = mesh_quality(m, compute_geometry(m))
    assert q.max_nonorth_deg == pytest.approx(theta, abs=1e-9)
    assert len(q.warnings) == 1
    # 12 internal faces, all 75 degrees
    assert q.warnings[0].startswith("12 internal face(s) are more than 63.5 degrees non-orthogonal (worst 75.0")
    report = format_report(q, "sheared block")
    assert "WARNINGS" in report and q.warnings[0] in report


@pytest.mark.parametrize("length", [1.0, 4.0])
def test_skewness_of_two_triangles(length: float) -> None:
    pts = np.array([[0, 0], [0, length], [-1, 0], [1, 0]], float)
    m = Mesh.from_arrays(pts, [[0, 1, 2], [0, 3, 1]], {"b": [[1, 2], [2, 0], [0, 3], [3, 1]]})
    q = mesh_quality(m, compute_geometry(m))
    assert q.max_skewness == pytest.approx(length / 4, rel=1e-12)
    assert q.max_nonorth_deg == pytest.approx(0.0, abs=1e-9)
    # triangles: L_max^2 / (2 A) with L_max = sqrt(1 + L^2) (the hypotenuse) and A = L / 2
    assert q.max_aspect_ratio == pytest.approx((1 + length**2) / length, rel=1e-12)
    assert (q.n_triangles, q.n_quads) == (2, 0)
    skew_warn = [w for w in q.warnings if "skewness" in w]
    assert len(skew_warn) == (1 if length / 4 > 0.5 else 0)


def test_worst_cells_surround_a_moved_point() -> None:
    nx = ny = 6
    h = 1.0
    moved = (2, 3)  # an interior point
    m = sheared_block(nx, ny, h, 0.0, move=(moved, np.array([0.35, 0.2])))
    g = compute_geometry(m)
    q = mesh_quality(m, g, n_worst=5)
    p = moved[1] * (nx + 1) + moved[0]
    touching = {c for c in range(m.n_cells) if p in m.cell(c).tolist()}
    assert len(touching) == 4
    for worst in (q.worst_nonorth, q.worst_skewness):
        assert len(worst) == 5
        assert worst[0].cell in touching
        vals = [w.value for w in worst]
        assert vals == sorted(vals, reverse=True)
        assert len({w.cell for w in worst}) == 5
        for w in worst:
            assert (w.x, w.y) == (g.cell_centre[w.cell, 0], g.cell_centre[w.cell, 1])
    assert q.worst_nonorth[0].value == q.max_nonorth_deg
    assert q.worst_skewness[0].value == q.max_skewness
    # far from the moved point every face is still orthogonal
    far = [c for c in range(m.n_cells) if np.hypot(*(g.cell_centre[c] - m.points[p])) > 2.5]
    no_cells = {w.cell for w in q.worst_nonorth if w.value > 1e-9}
    assert not no_cells & set(far)
    assert q.worst_aspect[0].cell in touching


def test_mixed_cell_kinds_and_report() -> None:
    # a square split into a pentagon, a quad and triangles
    pts = np.array([[0, 0], [2, 0], [2, 2], [0, 2], [1, 0], [2, 1], [1, 1], [0, 1]], float)
    cells = [[0, 4, 6, 7], [4, 1, 5], [4, 5, 6], [7, 6, 5, 2, 3]]
    bnd = {"south": [[0, 4], [4, 1]], "rest": [[1, 5], [5, 2], [2, 3], [3, 7], [7, 0]]}
    m = Mesh.from_arrays(pts, cells, bnd, source="mixed")
    q = mesh_quality(m, compute_geometry(m))
    assert (q.n_triangles, q.n_quads, q.n_polygons) == (2, 1, 1)
    assert q.total_area == pytest.approx(4.0, rel=1e-14)
    assert q.min_area == pytest.approx(0.5, rel=1e-14)  # each triangle: half of a unit square
    assert q.max_area == pytest.approx(2.0, rel=1e-14)  # the pentagon: 4 - 1 - 0.5 - 0.5
    report = format_report(q, "mixed")
    assert report.splitlines()[0] == "Mesh report: mixed"
    assert re.search(r"cells +4 \(2 triangles, 1 quads, 1 polygons\)", report)
    # internal edges 4-6, 6-7, 4-5, 5-6; boundary edges 0-4, 4-1, 1-5, 5-2, 2-3, 3-7, 7-0
    assert re.search(r"faces +11 \(4 between cells, 7 on the boundary\)", report)
    assert "south" in report and "rest" in report
    assert "no quality warnings" in report


ROOT = Path(__file__).resolve().parents[2]


def test_round_off_is_reported_as_zero():
    """Issue #12 item 3: the flat-plate grid (Cartesian) has no skewness; its round-off (4.5e-11)
    is reported as 0, and no worst cells are listed for a measure that is 0 everywhere."""
    mesh = read_mesh(ROOT / "meshes" / "flat_plate_coarse.msh")
    geom = compute_geometry(mesh)
    assert 0 < geom.face_skewness[: mesh.n_internal_faces].max() < 1e-8  # round-off in the geometry
    q = mesh_quality(mesh, geom)
    assert q.max_skewness == 0.0 and q.max_nonorth_deg == 0.0
    text = format_report(q)
    assert "skewness           largest 0\n" in text and "largest skewness: 0 in every cell" in text
    assert "e-1" not in text  # no round-off figures anywhere
    assert "no quality warnings" in text  # its aspect ratio, 1.86e4, is covered by the tests


def test_warning_thresholds_are_the_largest_values_the_tests_cover(monkeypatch):
    """The thresholds are the largest values of the meshes the named tests solve (module docstring
    of fvrans.mesh.quality): each mesh is just inside its threshold."""
    monkeypatch.syspath_prepend(str(ROOT / "tests" / "solve"))
    from flows import split_same_diagonal
    from test_bump_robustness import COARSER

    import fvrans.api as fa
    from fvrans.mesh.generate import channel

    tri = split_same_diagonal(channel(10.0, 1.0, 100, 40))  # tests/solve/test_poiseuille.py
    q = mesh_quality(tri, compute_geometry(tri))
    assert NONORTH_WARN_DEG - 0.5 < q.max_nonorth_deg <= NONORTH_WARN_DEG and not q.warnings
    case = fa.load_case(ROOT / "cases" / "bump_turbulent.toml")
    params = {**case.mesh.parameters, **COARSER}  # tests/solve/test_bump_robustness.py
    bump = fa.prepare(case.set("mesh.parameters", params)).mesh
    q = mesh_quality(bump, compute_geometry(bump))
    assert SKEWNESS_WARN - 0.01 < q.max_skewness <= SKEWNESS_WARN
    plate = read_mesh(ROOT / "meshes" / "flat_plate_medium.msh")  # tests/verification/test_flat_plate.py
    q = mesh_quality(plate, compute_geometry(plate))
    assert 0.98 * ASPECT_WARN < q.max_aspect_ratio <= ASPECT_WARN and not q.warnings


def test_quality_measures_are_made_when_read_not_held_by_the_geometry():
    """The non-orthogonality and skewness per face are made when read (the quality report reads them,
    no solver does): the geometry a run keeps holds neither (16 B per face each)."""
    g = compute_geometry(cavity(8, triangles=True))
    held = {k for k, v in vars(g).items() if isinstance(v, np.ndarray)}
    assert "face_nonorth_deg" not in held and "face_skewness" not in held
    assert g.face_nonorth_deg.shape == g.face_skewness.shape == (g.n_faces,)
