"""Point probes: every cell whose closed polygon contains the point takes part (two on a shared
face, all around a vertex), so a probe value does not depend on which cell round-off picks; the
same physical point on a mesh and on its rotated copy gives the same values (#18 acceptance:
to 1e-8)."""

from __future__ import annotations

import numpy as np
import pytest
from post_meshes import channel, rotation

import fvrans.api as fa
from fvrans.case import case_from_dict
from fvrans.errors import CaseError
from fvrans.mesh.locate import CellLocator
from fvrans.post.probes import build_stencil


def _shared_face(mesh, geom, k: int = 0) -> tuple[int, np.ndarray]:
    """An internal face away from the boundary and its centre."""
    inner = np.flatnonzero((geom.face_centre[: mesh.n_internal_faces, 0] > 0.6)
                           & (geom.face_centre[: mesh.n_internal_faces, 0] < 1.4)
                           & (geom.face_centre[: mesh.n_internal_faces, 1] > 0.3)
                           & (geom.face_centre[: mesh.n_internal_faces, 1] < 0.7))
    f = int(inner[k])
    return f, geom.face_centre[f]


def test_a_point_on_a_face_takes_both_cells_and_a_vertex_all_around_it():
    mesh, geom = channel(6, 4, triangles=True, perturb=0.2)
    loc = CellLocator(mesh, centroids=geom.cell_centre)
    f, xf = _shared_face(mesh, geom)
    assert list(loc.containing(xf)) == sorted([mesh.face_owner[f], mesh.face_neighbour[f]])
    # an interior vertex: every cell that has it
    p = int(np.flatnonzero((mesh.points[:, 0] > 0.5) & (mesh.points[:, 0] < 1.5)
                           & (mesh.points[:, 1] > 0.2) & (mesh.points[:, 1] < 0.8))[0])
    around = [c for c in range(mesh.n_cells)
              if p in mesh.cell_points[mesh.cell_offsets[c]:mesh.cell_offsets[c + 1]]]
    assert list(loc.containing(mesh.points[p])) == around and len(around) >= 3
    # inside a cell: that cell alone
    assert list(loc.containing(geom.cell_centre[5])) == [5]
    # the stencil averages the cells' linear reconstructions
    phi = np.sin(3 * geom.cell_centre[:, 0]) + geom.cell_centre[:, 1] ** 2
    grad = np.stack([3 * np.cos(3 * geom.cell_centre[:, 0]), 2 * geom.cell_centre[:, 1]], axis=1)
    st = build_stencil(loc, geom.cell_centre, xf[None, :])
    one = [phi[c] + grad[c] @ (xf - geom.cell_centre[c]) for c in (mesh.face_owner[f], mesh.face_neighbour[f])]
    assert st.sample(phi, grad)[0] == pytest.approx(0.5 * (one[0] + one[1]), rel=1e-14)
    assert abs(one[0] - one[1]) > 1e-4  # so which cell is taken would matter


def _solve_channel(angle: float) -> tuple[fa.Result, np.ndarray]:
    mesh, _ = channel(8, 4, triangles=True, perturb=0.25, angle=angle)
    R = rotation(angle)
    case = case_from_dict({
        "mesh": {"generator": "channel"},
        "fluid": {"density": 1.0, "viscosity": 0.05},
        "boundary": {"inlet": {"kind": "inflow-velocity", "velocity": list(R @ [1.0, 0.0])},
                     "outlet": {"kind": "outflow-pressure"}, "bottom": {"kind": "wall"}, "top": {"kind": "wall"}},
        "solver": {"tolerance": 1e-12, "max_iterations": 3000},
        "monitor": {"settle": False},
    })
    return fa.solve(fa.prepare(case, mesh=mesh)), R


def test_probe_values_at_a_shared_face_agree_on_a_mesh_and_its_rotated_copy():
    base, _ = _solve_channel(0.0)
    turned, R = _solve_channel(np.radians(30.0))
    assert base.converged and turned.converged
    geom = base.problem.geom
    for k in range(6):
        f, xf = _shared_face(base.mesh, geom, k)
        a = base.sample_point(xf)
        b = turned.sample_point(R @ xf)
        u_back = R.T @ [b["u"], b["v"]]
        assert u_back == pytest.approx([a["u"], a["v"]], abs=1e-8)
        assert b["p"] == pytest.approx(a["p"], abs=1e-8)
        # the two cells' own reconstructions differ by far more than that
        o, n = base.mesh.face_owner[f], base.mesh.face_neighbour[f]
        g = base.extra["gradients"]["u"]
        u = base.velocity[:, 0]
        assert abs((u[o] + g[o] @ (xf - geom.cell_centre[o])) - (u[n] + g[n] @ (xf - geom.cell_centre[n]))) > 1e-6


def test_point_probe_keys_are_checked():
    base = {
        "mesh": {"generator": "cavity", "parameters": {"n": 4}},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"walls": {"kind": "wall"}, "lid": {"kind": "wall", "velocity": [1.0, 0.0]}},
    }
    with pytest.raises(CaseError, match=r"probes\.a\.start: unknown key.*a point probe"):
        case_from_dict({**base, "probes": {"a": {"at": [0.5, 0.5], "start": [0.0, 0.0]}}})
    with pytest.raises(CaseError, match=r"probes\.a\.at"):
        case_from_dict({**base, "probes": {"a": {"at": [0.5]}}})
    with pytest.raises(CaseError, match=r"probes\.out: the point \(2, 0\.5\) lies outside the mesh"):
        fa.prepare(case_from_dict({**base, "probes": {"out": {"at": [2.0, 0.5]}}}))
    case = case_from_dict({**base, "probes": {"a": {"at": [0.5, 0.5]}}})
    assert case_from_dict(case.to_dict()) == case
