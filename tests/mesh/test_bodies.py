"""Meshes round curved walls (fvrans.mesh.bodies): areas worked out by hand from the polygons,
patches, nesting of the cylinder-channel grid family, and parameter checks.

Area of a regular n-gon inscribed in a circle of radius R: n R^2 sin(2 pi / n) / 2.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fvrans.errors import MeshError
from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import annulus, cylinder_channel, cylinder_channel_grid


def ngon(n: int, r: float) -> float:
    return n * r * r * math.sin(2 * math.pi / n) / 2


@pytest.mark.parametrize("cells, count", [("quads", 32 * 6), ("triangles", 2 * 32 * 6), ("mixed", 32 * 8)])
def test_annulus_area_patches_and_cells(cells, count):
    m = annulus(1.0, 2.5, 32, 6, cells=cells, wall_layers=2, twist=20.0, angle=7.0, centre=(1.0, -2.0))
    g = compute_geometry(m)
    assert g.cell_area.min() > 0
    assert g.cell_area.sum() == pytest.approx(ngon(32, 2.5) - ngon(32, 1.0), rel=1e-12)
    assert m.n_cells == count and m.patch_names == ["inner", "outer"]
    assert m.patch("inner").size == m.patch("outer").size == 32
    r = np.hypot(g.face_centre[m.patch("inner").faces, 0] - 1.0, g.face_centre[m.patch("inner").faces, 1] + 2.0)
    np.testing.assert_allclose(r, math.cos(math.pi / 32), rtol=1e-12)  # chord midpoints
    sizes = np.bincount(m.cell_sizes())
    assert (cells == "quads") == (sizes[3] == 0 if len(sizes) > 3 else True)


def test_cylinder_channel_grid_family_is_nested_and_covers_the_channel():
    coarse, fine = cylinder_channel_grid(32), cylinder_channel_grid(64)
    for m, n in ((coarse, 32), (fine, 64)):
        g = compute_geometry(m)
        # the circle's points (on the circle; its four quarter arcs end on the rays to the square's
        # corners, so the polygon is not regular): the hole is the polygon through them
        cyl = m.patch("cylinder")
        ids = np.unique(m.face_points[cyl.start : cyl.stop])
        xy = m.points[ids] - [0.2, 0.2]
        np.testing.assert_allclose(np.hypot(*xy.T), 0.05, rtol=1e-12)
        ang = np.sort(np.arctan2(xy[:, 1], xy[:, 0]))
        hole = 0.5 * 0.05**2 * np.sum(np.sin(np.diff(np.r_[ang, ang[0] + 2 * np.pi])))
        assert g.cell_area.sum() == pytest.approx(2.2 * 0.41 - hole, rel=1e-12)
        assert {p.name: p.size for p in m.patches} == {"cylinder": n, "walls": 2 * (n // 4 + 3 * n // 4),
                                                        "inlet": n // 4, "outlet": n // 4}
        assert g.cell_area.min() > 0 and np.all(m.cell_sizes() == 3)
    # every point of the coarse grid is a point of the fine one
    fine_pts = {tuple(np.round(p, 12)) for p in fine.points}
    assert all(tuple(np.round(p, 12)) in fine_pts for p in coarse.points)
    assert cylinder_channel_grid(32, cells="quads").n_cells == coarse.n_cells // 2


def test_cylinder_channel_with_a_ring_and_triangles():
    m = cylinder_channel(32)
    g = compute_geometry(m)
    assert g.cell_area.sum() == pytest.approx(2.2 * 0.41 - ngon(32, 0.05), rel=1e-12)
    assert m.patch("cylinder").size == 32 and g.cell_area.min() > 0
    assert np.all(m.cell_sizes() == 3) and np.any(cylinder_channel(32, cells="mixed").cell_sizes() == 4)


@pytest.mark.parametrize("call, words", [
    (lambda: annulus(2.0, 1.0), "r_outer"),
    (lambda: annulus(n_theta=7), "n_theta"),
    (lambda: annulus(n_r=4, cells="mixed", wall_layers=2), "wall_layers"),
    (lambda: annulus(cells="hexagons"), "cells"),
    (lambda: cylinder_channel(30), "n_cylinder"),
    (lambda: cylinder_channel(32, ring_radius=0.3), "ring_radius"),
    (lambda: cylinder_channel(32, centre=(0.02, 0.2)), "centre"),
    (lambda: cylinder_channel_grid(40), "n_cylinder"),
    (lambda: cylinder_channel_grid(32, cells="mixed"), "cells"),
])
def test_bad_parameters_name_the_parameter(call, words):
    with pytest.raises(MeshError, match=words):
        call()
