"""Mesh generators: point distributions, glued blocks, the bundled case meshes.

Geometric facts checked (worked out by hand from the domain definitions in fvrans.mesh.generate):
channel L x H has area L H and perimeter 2 (L + H); flat plate domain [-1/3, 2] x [0, 1] has area
7/3, plate length 2, symmetry stretch 1/3; the step domain [x_in, 0] x [0, 8] + [0, 50] x [-1, 8]
has area 8 |x_in| + 450, step face length H = 1, inlet 8, outlet 9, each wall 50 + |x_in|.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import compute_geometry, read_mesh
from fvrans.mesh._blocks import BlockAssembly, rectangle_points, triangulate_region
from fvrans.mesh.generate import (
    FLAT_PLATE_FINE,
    STEP_FINE,
    backward_facing_step,
    cavity,
    channel,
    flat_plate,
    flat_plate_family,
    flat_plate_lines,
    geometric_points,
    spacing_ratios,
    step_family,
    step_lines,
    step_mixed,
    symmetric_geometric_points,
    tanh_points,
    uniform_points,
)
from fvrans.mesh.mesh import Mesh

MESH_DIR = Path(__file__).resolve().parents[2] / "meshes"


def patch_lengths(mesh: Mesh) -> dict[str, float]:
    g = compute_geometry(mesh)
    return {p.name: float(g.face_length[p.start : p.stop].sum()) for p in mesh.patches}


def total_area(mesh: Mesh) -> float:
    return float(compute_geometry(mesh).cell_area.sum())


def point_set(mesh: Mesh) -> set[tuple[float, float]]:
    return set(map(tuple, mesh.points.tolist()))


# ------------------------------------------------------------------------------------------
# 1D distributions
# ------------------------------------------------------------------------------------------


def test_uniform_points_ends_exact():
    x = uniform_points(7, -1.0 / 3.0, 2.0)
    assert x[0] == -1.0 / 3.0 and x[-1] == 2.0
    assert np.allclose(np.diff(x), (2.0 + 1.0 / 3.0) / 7, rtol=1e-13)


def test_geometric_first_spacing_and_constant_ratio():
    x = geometric_points(40, 0.0, 3.0, first=1e-3)
    d = np.diff(x)
    assert d[0] == pytest.approx(1e-3, rel=1e-12)
    r = d[1:] / d[:-1]
    assert np.ptp(r) < 1e-12  # one growth ratio throughout
    # closed form of the geometric sum: first (r^n - 1) / (r - 1) = length
    assert 1e-3 * (r[0] ** 40 - 1) / (r[0] - 1) == pytest.approx(3.0, rel=1e-12)
    assert x[0] == 0.0 and x[-1] == 3.0


def test_geometric_with_ratio_and_shrinking():
    x = geometric_points(10, 0.0, 1.0, ratio=1.1)
    assert np.diff(x)[0] == pytest.approx(0.1 / (1.1**10 - 1), rel=1e-13)
    # first spacing larger than uniform: the spacings shrink
    y = geometric_points(10, 0.0, 1.0, first=0.2)
    assert np.diff(y)[0] == pytest.approx(0.2, rel=1e-12) and np.all(np.diff(np.diff(y)) < 0)
    # reversed segment clusters towards the other end
    z = geometric_points(10, 1.0, 0.0, first=0.01)[::-1]
    assert z[-1] - z[-2] == pytest.approx(0.01, rel=1e-12)


@pytest.mark.parametrize(
    "n, a, b, first, last",
    [
        (224, 0.0, 2.0, 5e-4, 0.02),  # strong at one end, mild at the other
        (160, 0.0, 8.0, 1.5e-4, 1.5e-4),  # symmetric wall clustering
        (48, -4.0, 0.0, 0.2, 1.5e-4),  # one end larger than uniform
        (10, 0.0, 1.0, 0.3, 0.3),  # both ends larger than uniform (tan branch)
    ],
)
def test_tanh_end_spacings_exact(n, a, b, first, last):
    x = tanh_points(n, a, b, first, last)
    d = np.diff(x)
    assert len(x) == n + 1 and x[0] == a and x[-1] == b
    assert np.all(d > 0)
    assert d[0] == pytest.approx(first, rel=1e-9)
    assert d[-1] == pytest.approx(last, rel=1e-9)


def test_tanh_uniform_and_symmetric_limits():
    x = tanh_points(20, 0.0, 1.0, 0.05, 0.05)  # end spacings equal the uniform spacing
    assert np.allclose(x, np.linspace(0, 1, 21), atol=1e-10)
    y = tanh_points(30, 0.0, 1.0, 1e-3, 1e-3)
    assert np.allclose(y + y[::-1], 1.0, atol=1e-12)  # mirror symmetric


def test_symmetric_geometric():
    y = symmetric_geometric_points(64, -1.0, 0.0, 2.5e-4)
    d = np.diff(y)
    assert d[0] == pytest.approx(2.5e-4, rel=1e-10) and d[-1] == pytest.approx(2.5e-4, rel=1e-10)
    assert np.allclose(d, d[::-1], rtol=1e-9)
    with pytest.raises(MeshError, match="even"):
        symmetric_geometric_points(5, 0.0, 1.0, 0.01)


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: geometric_points(10, 0.0, 1.0), "exactly one"),
        (lambda: geometric_points(10, 0.0, 1.0, first=2.0), "first spacing"),
        (lambda: tanh_points(10, 0.0, 1.0, 0.6, 0.5), "add up"),
        (lambda: tanh_points(0, 0.0, 1.0, 0.1, 0.1), "positive integer"),
        (lambda: flat_plate_family("extra"), "coarse"),
        (lambda: step_lines(x_in=1.0), "x_in < 0"),
    ],
)
def test_bad_parameters_give_clear_errors(call, match):
    with pytest.raises(MeshError, match=match):
        call()


# ------------------------------------------------------------------------------------------
# blocks
# ------------------------------------------------------------------------------------------


def test_blocks_glued_by_index_not_tolerance():
    x1, x2, y = uniform_points(3, 0.0, 1.0), uniform_points(4, 1.0, 3.0), uniform_points(2, 0.0, 1.0)
    asm = BlockAssembly()
    asm.add_block("a", rectangle_points(x1, y))
    asm.add_block("b", rectangle_points(x2, y), same=(("left", "a", "right"),))
    assert asm.n_points == 4 * 3 + 4 * 3  # the shared column is stored once
    assert np.array_equal(asm.blocks["b"][0], asm.blocks["a"][-1])
    # a side that does not coincide is refused
    with pytest.raises(MeshError, match="does not coincide"):
        asm.add_block("c", rectangle_points(x2 + 1.0, y), same=(("left", "b", "right"),))


def test_triangle_split_alternates_diagonals():
    m = channel(4.0, 2.0, 4, 2, triangles=True)
    diag = set()
    for c in range(m.n_cells):
        p = m.points[m.cell(c)]
        for k in range(3):  # the edge that is neither horizontal nor vertical
            e = p[(k + 1) % 3] - p[k]
            if e[0] != 0 and e[1] != 0:
                diag.add(np.sign(e[0] * e[1]))
    assert diag == {1.0, -1.0}


# ------------------------------------------------------------------------------------------
# channel and cavity
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("triangles", [False, True])
def test_channel_area_patches(triangles):
    m = channel(10.0, 1.0, 100, 40, grading_y=0.005, triangles=triangles)
    assert m.n_cells == 4000 * (2 if triangles else 1)
    assert total_area(m) == pytest.approx(10.0, rel=1e-13)
    assert patch_lengths(m) == pytest.approx(
        {"inlet": 1.0, "outlet": 1.0, "lower_wall": 10.0, "upper_wall": 10.0}, rel=1e-13
    )
    y = np.unique(m.points[:, 1])
    assert y[1] - y[0] == pytest.approx(0.005, rel=1e-9)
    assert y[-1] - y[-2] == pytest.approx(0.005, rel=1e-9)
    assert m.notes == ()


def test_channel_given_y_points_checked():
    with pytest.raises(MeshError, match="increase strictly"):
        channel(1.0, 1.0, 2, 2, grading_y=[0.0, 0.7, 0.5])


def test_cavity_patches_and_wall_spacing():
    m = cavity(32, size=2.0, wall_spacing=0.01)
    assert total_area(m) == pytest.approx(4.0, rel=1e-13)
    assert patch_lengths(m) == pytest.approx({"lid": 2.0, "walls": 6.0}, rel=1e-13)
    x = np.unique(m.points[:, 0])
    assert x[1] - x[0] == pytest.approx(0.01, rel=1e-9)
    t = cavity(16, triangles=True)
    assert t.n_cells == 2 * cavity(16).n_cells and total_area(t) == pytest.approx(1.0, rel=1e-13)


# ------------------------------------------------------------------------------------------
# flat plate
# ------------------------------------------------------------------------------------------


def test_flat_plate_geometry_and_patches():
    m = flat_plate(nx_plate=24, nx_ahead=8, ny=16, first_spacing=1e-4)
    assert total_area(m) == pytest.approx(7.0 / 3.0, rel=1e-13)
    lengths = patch_lengths(m)
    assert lengths == pytest.approx(
        {"inlet": 1.0, "outlet": 1.0, "top": 7.0 / 3.0, "symmetry_ahead": 1.0 / 3.0, "plate": 2.0}, rel=1e-13
    )
    y = np.unique(m.points[:, 1])
    assert y[1] == pytest.approx(1e-4, rel=1e-10)
    # the plate patch is exactly the y = 0 faces with x >= 0
    p = m.patch("plate")
    xs = m.points[m.face_points[p.start : p.stop]]
    assert np.all(xs[..., 1] == 0.0) and np.all(xs[..., 0] >= 0.0)


def test_flat_plate_family_sizes_and_nesting():
    coarse, medium = flat_plate_family("coarse"), flat_plate_family("medium")
    assert coarse.n_points == 69 * 49 and coarse.n_cells == 68 * 48
    assert medium.n_points == 137 * 97 and medium.n_cells == 136 * 96
    assert point_set(coarse) <= point_set(medium)
    # the fine level (not built here): its distributions contain the medium grid lines
    x, y = flat_plate_lines(**FLAT_PLATE_FINE)
    assert len(x) == 273 and len(y) == 193
    assert set(np.unique(medium.points[:, 0])) <= set(x.tolist())
    assert set(np.unique(medium.points[:, 1])) <= set(y.tolist())
    assert y[1] == pytest.approx(FLAT_PLATE_FINE["first_spacing"], rel=1e-10)
    # leading-edge spacing from both sides
    i = int(np.nonzero(x == 0.0)[0][0])
    assert x[i] - x[i - 1] == pytest.approx(FLAT_PLATE_FINE["le_spacing"], rel=1e-10)
    assert x[i + 1] - x[i] == pytest.approx(FLAT_PLATE_FINE["le_spacing"], rel=1e-10)
    # between a quarter and a third of the x points ahead of the plate
    assert 0.25 <= i / (len(x) - 1) <= 1.0 / 3.0
    for m in (coarse, medium):
        assert total_area(m) == pytest.approx(7.0 / 3.0, rel=1e-13)


def test_flat_plate_coarse_first_cell_below_y_plus_one():
    # Re = 5e6 per unit length, U = 1; Cf at x = 0.97 from the Schultz-Grunow correlation
    # Cf = 0.37 / (log10 Re_x)^2.584 (Schlichting, Boundary-Layer Theory; from memory);
    # Cf decreases downstream, so x = 0.97 bounds y+ on the rest of the plate.
    nu = 1.0 / 5e6
    cf = 0.37 / np.log10(0.97 / nu) ** 2.584
    u_tau = np.sqrt(cf / 2.0)
    coarse = flat_plate_family("coarse")
    y1 = np.unique(coarse.points[:, 1])[1]
    assert y1 * u_tau / nu < 1.0


# ------------------------------------------------------------------------------------------
# backward-facing step
# ------------------------------------------------------------------------------------------

STEP_LENGTHS_4 = {"inlet": 8.0, "outlet": 9.0, "lower_wall": 54.0, "step_face": 1.0, "upper_wall": 54.0}


def test_step_coarse_geometry_patches_nesting():
    coarse, medium = step_family("coarse"), step_family("medium")
    assert coarse.n_cells == 6912 and medium.n_cells == 4 * 6912
    for m in (coarse, medium):
        assert total_area(m) == pytest.approx(4 * 8 + 50 * 9, rel=1e-13)
        assert patch_lengths(m) == pytest.approx(STEP_LENGTHS_4, rel=1e-13)
        assert m.notes == ()
    assert point_set(coarse) <= point_set(medium)
    # the step face is the vertical segment x = 0, -1 <= y <= 0
    p = coarse.patch("step_face")
    pts = coarse.points[coarse.face_points[p.start : p.stop]]
    assert np.all(pts[..., 0] == 0.0) and pts[..., 1].min() == -1.0 and pts[..., 1].max() == 0.0


def test_step_fine_lines_spacings():
    x_up, x_down, y_upper, y_lower = step_lines(**STEP_FINE)
    ws, cs = STEP_FINE["wall_spacing"], STEP_FINE["corner_spacing"]
    for y in (y_upper, y_lower):
        d = np.diff(y)
        assert d[0] == pytest.approx(ws, rel=1e-10) and d[-1] == pytest.approx(ws, rel=1e-10)
    assert x_up[-1] - x_up[-2] == pytest.approx(cs, rel=1e-10)
    assert x_down[1] - x_down[0] == pytest.approx(cs, rel=1e-10)
    n_fine = (len(x_up) - 1) * (len(y_upper) - 1) + (len(x_down) - 1) * (len(y_upper) + len(y_lower) - 2)
    assert n_fine == 4 * 27648


def test_step_longer_inlet_and_triangles():
    m = step_family("coarse", x_in=-20.0)
    assert total_area(m) == pytest.approx(20 * 8 + 450, rel=1e-13)
    assert patch_lengths(m)["lower_wall"] == pytest.approx(70.0, rel=1e-13)
    q = backward_facing_step(nx_up=8, nx_down=16, ny_upper=8, ny_lower=4)
    t = backward_facing_step(nx_up=8, nx_down=16, ny_upper=8, ny_lower=4, triangles=True)
    assert t.n_cells == 2 * q.n_cells
    assert total_area(t) == pytest.approx(total_area(q), rel=1e-13)


def test_step_mixed_conforming_quads_and_triangles():
    m = step_mixed(
        first_spacing=2e-3, n_layers=12, growth=1.3, nx_up=16, nx_down=60, core_size=0.8, n_smooth=15
    )
    sizes = m.cell_sizes()
    assert np.any(sizes == 3) and np.any(sizes == 4) and set(np.unique(sizes)) == {3, 4}
    assert m.notes == ()  # no merged or unused points: the core shares the layer points
    assert total_area(m) == pytest.approx(482.0, rel=1e-12)
    assert patch_lengths(m) == pytest.approx(STEP_LENGTHS_4, rel=1e-12)
    # quads and triangles meet across internal faces (conforming interface, no hanging nodes)
    ni = m.n_internal_faces
    kind_o = sizes[m.face_owner[:ni]]
    kind_n = sizes[m.face_neighbour[:ni]]
    assert np.any(kind_o != kind_n)
    # first cell height on the walls
    p = m.patch("upper_wall")
    g = compute_geometry(m)
    h = 8.0 - g.cell_centre[m.face_owner[p.start : p.stop], 1]
    assert np.allclose(h, 1e-3, rtol=1e-9)  # centroid at half the first spacing


def test_triangulate_region_l_shape():
    # L-shaped region (area 3) with uneven boundary spacing, counter-clockwise
    def seg(a, b, n):
        t = geometric_points(n, 0.0, 1.0, ratio=1.15)
        return np.asarray(a) + t[:-1, None] * (np.asarray(b) - np.asarray(a))

    corners = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]
    loop_pts = np.concatenate([seg(corners[k], corners[(k + 1) % 6], 8) for k in range(6)])
    loop = np.arange(len(loop_pts))
    new, tri = triangulate_region(loop_pts, loop, h_max=0.2, grading=0.3, n_smooth=20)
    pts = np.concatenate([loop_pts, new])
    v = pts[tri]
    area = 0.5 * (
        (v[:, 1, 0] - v[:, 0, 0]) * (v[:, 2, 1] - v[:, 0, 1])
        - (v[:, 1, 1] - v[:, 0, 1]) * (v[:, 2, 0] - v[:, 0, 0])
    )
    assert np.all(area > 0)
    assert area.sum() == pytest.approx(3.0, rel=1e-12)
    m = Mesh.from_arrays(pts, tri, {"b": np.stack([loop, np.roll(loop, -1)], axis=1)})
    assert m.patch("b").size == len(loop) and m.notes == ()
    # no degenerate slivers (the smoothing keeps angles well away from zero)
    e = [v[:, (k + 1) % 3] - v[:, k] for k in range(3)]
    cos = [
        -np.sum(e[k] * e[(k + 1) % 3], axis=1)
        / np.linalg.norm(e[k], axis=1)
        / np.linalg.norm(e[(k + 1) % 3], axis=1)
        for k in range(3)
    ]
    assert np.degrees(np.arccos(np.max(cos))) > 10.0


def test_spacing_ratios():
    assert np.allclose(spacing_ratios([0.0, 1.0, 3.0, 4.0]), [2.0, 2.0])


# ------------------------------------------------------------------------------------------
# bundled files match the generators
# ------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "name, make",
    [
        ("channel_100x40.msh", lambda: channel(10.0, 1.0, 100, 40)),
        ("flat_plate_coarse.msh", lambda: flat_plate_family("coarse")),
        ("step_coarse.msh", lambda: step_family("coarse")),
    ],
)
def test_bundled_file_matches_generator(name, make):
    path = MESH_DIR / name
    if not path.exists():
        pytest.skip(f"{path} not generated (run python meshes/make_meshes.py)")
    m, f = make(), read_mesh(path)
    assert f.n_cells == m.n_cells
    assert np.allclose(f.points, m.points, rtol=0, atol=1e-12)
    assert np.array_equal(f.cell_points, m.cell_points)
    assert {p.name: p.size for p in f.patches} == {p.name: p.size for p in m.patches}


def test_block_on_a_quadrilateral():
    # trapezoid (0,0), (4,0), (3,2), (1,2): area (4 + 2) / 2 * 2 = 6
    from fvrans.mesh._blocks import quadrilateral_points

    xy = quadrilateral_points(
        tanh_points(8, 0.0, 1.0, 0.05, 0.05), uniform_points(5), [(0, 0), (4, 0), (3, 2), (1, 2)]
    )
    asm = BlockAssembly()
    asm.add_block("q", xy)
    for side in ("left", "right", "bottom", "top"):
        asm.add_patch(side, "q", side)
    m = asm.to_mesh("trapezoid")
    assert total_area(m) == pytest.approx(6.0, rel=1e-13)
    assert patch_lengths(m) == pytest.approx(
        {"bottom": 4.0, "top": 2.0, "left": np.sqrt(5.0), "right": np.sqrt(5.0)}, rel=1e-13
    )
