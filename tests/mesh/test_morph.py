"""Mesh morphing (fvrans.mesh.morph) and warm starts between neighbouring designs (fvrans.api).

The bump wall y = h cos^2(pi x / L) (fvrans.mesh.shapes.bump_wall) moved from h = 0.05 to 0.06:
the morphed mesh keeps its topology and valid cells; its exact area is H (L + up + down) - h L / 2
(see tests/mesh/test_shapes.py). Warm starts must need fewer iterations than cold starts (the
iteration counts are deterministic; nothing here is timed).
"""

from __future__ import annotations

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.errors import CaseError, MeshError
from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import bump_channel, cavity
from fvrans.mesh.morph import boundary_point_ids, morph, same_topology, topology_difference
from fvrans.mesh.shapes import bump_wall

RES = dict(nx_bump=24, nx_up=10, nx_down=30, ny=16, wall_spacing=0.02)
L, H, LENGTH = 1.0, 1.0, 1.0 + 2.0 + 6.0  # bump length, channel height, domain length (defaults)


def move_bump(h_old: float, h_new: float):
    """Boundary map: lower-wall points onto the new bump, all other boundary points stay."""

    def move(p: np.ndarray) -> np.ndarray:
        q = p.copy()
        on_wall = (np.abs(p[:, 1] - bump_wall(p[:, 0], h_old, L)) < 1e-12) & (p[:, 1] < 0.5 * H)
        q[on_wall, 1] = bump_wall(p[on_wall, 0], h_new, L)
        return q

    return move


@pytest.mark.parametrize("triangles", [False, True], ids=["quads", "triangles"])
def test_laplace_morph_keeps_topology_and_follows_the_new_wall(triangles):
    a = bump_channel(bump_height=0.05, triangles=triangles, **RES)
    exact = bump_channel(bump_height=0.06, triangles=triangles, **RES)
    m = morph(a, move_bump(0.05, 0.06))
    assert same_topology(a, m) and m.points is not a.points
    g = compute_geometry(m)
    assert g.cell_area.min() > 0
    assert abs(g.cell_area.sum() - (H * LENGTH - 0.06 * L / 2)) < 1e-13 * LENGTH
    ids = boundary_point_ids(m)
    assert np.abs(m.points[ids] - exact.points[ids]).max() < 1e-15  # boundary exactly on the new shape
    # interior points: close to the generator's own map at the new height (within a fraction of
    # the 0.01 wall displacement)
    assert np.abs(m.points - exact.points).max() < 0.5 * 0.01
    assert np.abs(m.points - a.points).max() <= 0.01 + 1e-15


def test_morph_to_a_generated_mesh_of_same_topology_is_exact_and_other_topology_refused():
    a = bump_channel(bump_height=0.05, **RES)
    b = bump_channel(bump_height=0.06, **RES)
    m = morph(a, b)
    assert same_topology(a, m) and np.array_equal(m.points, b.points)
    other = bump_channel(bump_height=0.06, **{**RES, "ny": 18})
    assert "points" in topology_difference(a, other)
    with pytest.raises(MeshError, match="topology differs"):
        morph(a, other)
    with pytest.raises(MeshError, match="fold"):
        morph(a, lambda p: np.column_stack([p[:, 0], np.where(p[:, 1] < 0.5, 0.9 + p[:, 1], p[:, 1])]))
    with pytest.raises(MeshError, match="expected"):
        morph(a, np.zeros((3, 2)))


def bump_case(h: float, **extra) -> fa.Case:
    return fa.case_from_dict({
        "mesh": {"generator": "bump_channel", "parameters": {"bump_height": h, **RES, **extra}},
        "fluid": {"density": 1.0, "viscosity": 0.01},  # Re_h = 100
        "initial": {"velocity": [1.0, 0.0]},
        "boundary": {
            "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
            "outlet": {"kind": "outflow-pressure"},
            "lower_wall": {"kind": "wall"},
            "upper_wall": {"kind": "wall"},
        },
        "solver": {"tolerance": 1e-6, "max_iterations": 2000},
    })


def test_warm_start_on_morphed_bump_converges_faster_than_cold():
    """Measured (64 x 16 cells, Re_h = 100, tolerance 1e-6; iteration counts, deterministic): cold
    start 131, warm start from h = 0.05 on the regenerated mesh 75 and on the morphed mesh 75; the
    two h = 0.06 solutions differ by 0.006 U at most (the meshes differ inside by < 0.005 H)."""
    base = fa.solve(bump_case(0.05))
    assert base.converged
    case6 = bump_case(0.06)
    cold = fa.solve(case6)
    # (1) the generator at the new parameter: same topology, exact shape
    warm = fa.solve(case6, initial=base)
    # (2) the previous mesh morphed by boundary displacement, solved as a prepared problem
    morphed = morph(base.mesh, move_bump(0.05, 0.06))
    warm_m = fa.solve(fa.prepare(case6, mesh=morphed), initial=base)
    assert cold.converged and warm.converged and warm_m.converged
    print(f"iterations: cold {cold.iterations}, warm (regenerated) {warm.iterations}, "
          f"warm (morphed) {warm_m.iterations}")
    assert warm.iterations < cold.iterations
    assert warm_m.iterations < cold.iterations
    # the morphed and the regenerated mesh give the same flow to discretisation accuracy
    du = np.abs(warm_m.velocity - warm.velocity).max()
    assert du < 0.02, du  # measured 0.006
    # bare fields of another size are refused with a clear message (a Result is interpolated instead)
    with pytest.raises(CaseError, match="warm start has"):
        fa.solve(bump_case(0.06, ny=18), initial=base.fields)
    # a Result on a mesh of the same size but another topology (cells renumbered) is interpolated:
    # with the same cell centres the start is the old velocity, cell for cell
    order = np.arange(base.mesh.n_cells)[::-1].copy()
    other = fa.prepare(bump_case(0.05), mesh=bump_channel(bump_height=0.05, **RES).permuted(order))
    start, report = fa.start_fields(other, base)
    np.testing.assert_allclose(start.velocity, base.velocity[order], rtol=0, atol=1e-12)
    assert report["cells_inside_data"] == 1.0


def test_topology_difference_names_what_differs():
    a = cavity(4)
    assert topology_difference(a, cavity(4, size=2.0)) is None
    b = a.permuted(np.arange(a.n_cells)[::-1].copy())
    assert "cell 0" in topology_difference(a, b)
