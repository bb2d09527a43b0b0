"""Parametric shapes (fvrans.mesh.shapes): geometry, topology, parameter checks, a laminar flow.

Exact areas, worked out by hand from the shape definitions:
- bump channel: H (L + up + down) - h L / 2, since the integral of h cos^2(pi s) over s in
  [-1/2, 1/2] is h / 2. The mesh's lower wall is the polygon through the wall points; on the
  uniform points along the bump the trapezoidal rule integrates cos^2 = (1 + cos 2 pi s) / 2 over
  its full period exactly (the trapezoidal rule is exact for trigonometric polynomials of degree
  below the number of points on a period: Trefethen & Weideman 2014, SIAM Review 56, 385-458,
  Thm. 2.1), so the mesh area equals the exact area to round-off.
- planar diffuser (straight walls, exact as polygons): H (l_in + l_div + l_out)
  + k tan(a) (l_div^2 / 2 + l_div l_out), k = 1 one-sided, 2 symmetric.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fvrans.case import case_from_dict
from fvrans.case.build import build_case_mesh
from fvrans.errors import CaseError, MeshError
from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import backward_facing_step, bump_channel, planar_diffuser
from fvrans.mesh.mesh import Mesh


def same_numbering(a: Mesh, b: Mesh) -> bool:
    return (
        np.array_equal(a.cell_points, b.cell_points)
        and np.array_equal(a.face_owner, b.face_owner)
        and np.array_equal(a.face_neighbour, b.face_neighbour)
        and np.array_equal(a.face_points, b.face_points)
        and a.patches == b.patches
    )


def patch_lengths(mesh: Mesh) -> dict[str, float]:
    g = compute_geometry(mesh)
    return {p.name: float(g.face_length[p.start : p.stop].sum()) for p in mesh.patches}


SMALL_BUMP = dict(nx_bump=20, nx_up=8, nx_down=24, ny=12)


@pytest.mark.parametrize("triangles", [False, True], ids=["quads", "triangles"])
@pytest.mark.parametrize("h", [0.0, 0.05, 0.3, 0.9])
def test_bump_area_exact_and_cells_positive(h, triangles):
    L, H, up, down = 1.5, 1.0, 2.0, 5.0
    m = bump_channel(bump_height=h, bump_length=L, height=H, upstream_length=up, downstream_length=down,
                     triangles=triangles, **SMALL_BUMP)
    g = compute_geometry(m)
    exact = H * (L + up + down) - h * L / 2
    assert abs(g.cell_area.sum() - exact) < 1e-13 * exact
    assert g.cell_area.min() > 0
    n_wall = 20 + 8 + 24
    sizes = {p.name: p.size for p in m.patches}
    assert sizes == {"inlet": 12, "outlet": 12, "lower_wall": n_wall, "upper_wall": n_wall}
    lengths = patch_lengths(m)
    assert abs(lengths["inlet"] - H) < 1e-14 and abs(lengths["outlet"] - H) < 1e-14
    assert abs(lengths["upper_wall"] - (L + up + down)) < 1e-12
    # wall points lie on the bump shape; the crest is a grid point (even nx_bump)
    wall = m.points[np.unique(m.face_points[m.patch("lower_wall").faces])]
    s = wall[:, 0] / L
    on = np.where(np.abs(s) <= 0.5, h * np.cos(np.pi * s) ** 2, 0.0)
    assert np.abs(wall[:, 1] - on).max() < 1e-14
    assert abs(wall[:, 1].max() - h) < 1e-14


def test_bump_symmetry_upper_boundary_and_clustering():
    m = bump_channel(bump_height=0.2, upper="symmetry", wall_spacing=0.02, **SMALL_BUMP)
    assert m.patch_names == ["inlet", "outlet", "lower_wall", "symmetry"]
    g = compute_geometry(m)
    # first cell at the inlet column: 0.02 of the height at the lower wall, the largest at the top
    col = np.sort(m.points[np.isclose(m.points[:, 0], m.points[:, 0].min()), 1])
    dy = np.diff(col)
    assert abs(dy[0] - 0.02) < 1e-12 and dy[-1] == dy.max()
    assert g.cell_area.min() > 0


@pytest.mark.parametrize("symmetric", [False, True])
@pytest.mark.parametrize("angle", [0.0, 7.0, 20.0, 45.0])
def test_diffuser_area_and_walls_exact(angle, symmetric):
    H, li, ld, lo = 1.0, 1.5, 3.0, 4.0
    m = planar_diffuser(angle_deg=angle, height=H, inlet_length=li, diverging_length=ld, outlet_length=lo,
                        symmetric=symmetric, nx_in=6, nx_div=12, nx_out=10, ny=10)
    g = compute_geometry(m)
    k = 2 if symmetric else 1
    t = math.tan(math.radians(angle))
    exact = H * (li + ld + lo) + k * t * (ld**2 / 2 + ld * lo)
    assert abs(g.cell_area.sum() - exact) < 1e-13 * exact
    assert g.cell_area.min() > 0
    lengths = patch_lengths(m)
    assert abs(lengths["inlet"] - H) < 1e-14
    assert abs(lengths["outlet"] - (H + k * ld * t)) < 1e-12
    inclined = li + ld / math.cos(math.radians(angle)) + lo
    assert abs(lengths["lower_wall"] - inclined) < 1e-12
    assert abs(lengths["upper_wall"] - (inclined if symmetric else li + ld + lo)) < 1e-12
    assert {p.name: p.size for p in m.patches} == {"inlet": 10, "outlet": 10, "lower_wall": 28, "upper_wall": 28}


def test_topology_independent_of_shape_parameters():
    """Designs in a loop: same resolution -> identical cell and face numbering, moved points."""
    shapes = ((0.0, 1.0), (0.05, 1.0), (0.3, 2.0))
    meshes = [bump_channel(bump_height=h, bump_length=b, **SMALL_BUMP) for h, b in shapes]
    assert all(same_numbering(meshes[0], m) for m in meshes[1:])
    assert not np.array_equal(meshes[1].points, meshes[2].points)
    d = [planar_diffuser(angle_deg=a, nx_in=4, nx_div=8, nx_out=8, ny=6) for a in (0.0, 5.0, 30.0)]
    assert all(same_numbering(d[0], m) for m in d[1:])
    s = [backward_facing_step(step_height=h, nx_up=8, nx_down=16, ny_upper=8, ny_lower=6) for h in (0.5, 1.0, 2.0)]
    assert all(same_numbering(s[0], m) for m in s[1:])
    # step height: the exact area 8 |x_in| + 50 (8 + H) and the step face length H
    for h, m in zip((0.5, 1.0, 2.0), s):
        assert abs(compute_geometry(m).cell_area.sum() - (8 * 4 + 50 * (8 + h))) < 1e-10
        assert abs(patch_lengths(m)["step_face"] - h) < 1e-14


@pytest.mark.parametrize(
    "gen, params, name, allowed",
    [
        (bump_channel, {"bump_height": 1.0}, "bump_height", "0 <= bump_height < height = 1"),
        (bump_channel, {"bump_height": -0.1}, "bump_height", "0 <= bump_height"),
        (bump_channel, {"bump_height": float("nan")}, "bump_height", "0 <= bump_height"),
        (bump_channel, {"bump_length": -1.0}, "bump_length", "bump_length > 0"),
        (bump_channel, {"upstream_length": 0.0}, "upstream_length", "upstream_length > 0"),
        (bump_channel, {"downstream_length": -2.0}, "downstream_length", "downstream_length > 0"),
        (bump_channel, {"ny": 1}, "ny", "integer >= 2"),
        (bump_channel, {"nx_bump": 1}, "nx_bump", "integer >= 2"),
        (bump_channel, {"nx_up": 2.5}, "nx_up", "integer >= 2"),
        (bump_channel, {"wall_spacing": 0.5}, "wall_spacing", "0 < wall_spacing <= 1/ny"),
        (bump_channel, {"upper": "lid"}, "upper", "'wall', 'symmetry'"),
        (planar_diffuser, {"angle_deg": 50.0}, "angle_deg", "0 <= angle_deg <= 45"),
        (planar_diffuser, {"angle_deg": -1.0}, "angle_deg", "0 <= angle_deg <= 45"),
        (planar_diffuser, {"diverging_length": -1.0}, "diverging_length", "diverging_length > 0"),
        (planar_diffuser, {"nx_div": 0}, "nx_div", "integer >= 2"),
        (backward_facing_step, {"step_height": -1.0}, "step_height", "0 < step_height <= 8"),
    ],
)
def test_invalid_parameters_name_the_parameter_and_range(gen, params, name, allowed):
    with pytest.raises(MeshError) as err:
        gen(**params)
    msg = str(err.value)
    assert f"parameter {name} = " in msg and allowed in msg


def test_generators_from_a_case_file_and_bad_parameter_reported():
    data = {
        "mesh": {"generator": "bump_channel", "parameters": {"bump_height": 0.2, **SMALL_BUMP}},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {
            "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
            "outlet": {"kind": "outflow-pressure"},
            "lower_wall": {"kind": "wall"},
            "upper_wall": {"kind": "wall"},
        },
    }
    mesh = build_case_mesh(case_from_dict(data))
    assert mesh.n_cells == (20 + 8 + 24) * 12
    data["mesh"] = {"generator": "planar_diffuser", "parameters": {"angle_deg": 8.0}}
    assert build_case_mesh(case_from_dict(data)).n_cells == (16 + 40 + 40) * 32
    data["mesh"] = {"generator": "bump_channel", "parameters": {"bump_height": 1.5}}
    with pytest.raises(MeshError, match=r"mesh.parameters: bump_channel: parameter bump_height = 1.5"):
        build_case_mesh(case_from_dict(data))
    data["mesh"] = {"generator": "bump_channel", "parameters": {"bump_hieght": 0.1}}
    with pytest.raises(CaseError, match="bump_height"):
        build_case_mesh(case_from_dict(data))
