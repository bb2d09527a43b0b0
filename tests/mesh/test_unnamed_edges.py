"""Meshes whose boundary lines carry no names (issue #12 item 9): fvrans's own fields.vtu,
meshio's conversion of a bundled Gmsh file to VTU (tags kept, names dropped), another tool's VTU
with an integer array on its lines. The [mesh] keys edge_tags, edge_tag_array, edge_boxes and
unnamed_edges name the patches; without them the message names those keys."""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np
import pytest

import fvrans.api as fa
from fvrans.case import case_from_dict
from fvrans.case.build import build_case_mesh
from fvrans.errors import CaseError, MeshError

ROOT = Path(__file__).resolve().parents[2]


def _cavity(mesh: dict) -> dict:
    return {"mesh": mesh, "fluid": {"density": 1.0, "viscosity": 0.01},
            "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
            "solver": {"max_iterations": 3}}


def test_own_fields_vtu_with_boxes_and_a_patch_for_the_rest(tmp_path):
    run = fa.solve(fa.case_from_dict(_cavity({"generator": "cavity", "parameters": {"n": 8}})))
    run.write(tmp_path / "run")
    vtu = tmp_path / "run" / "fields.vtu"
    with pytest.raises(MeshError) as exc:
        build_case_mesh(case_from_dict(_cavity({"file": str(vtu)})))
    msg = str(exc.value)
    assert str(vtu) in msg and "32 boundary edge(s) belong to no named patch" in msg
    assert 'unnamed_edges = "<patch>"' in msg and "edge_boxes" in msg
    case = case_from_dict(_cavity({"file": str(vtu), "edge_boxes": {"lid": [0.0, 1.0, 1.0, 1.0]},
                                   "unnamed_edges": "walls"}))
    mesh = build_case_mesh(case)
    assert mesh.patch_names == ["lid", "walls"] and [p.size for p in mesh.patches] == [8, 24]
    # the same mesh as the generator's (all quads keep their order in fields.vtu): the same run
    again = fa.solve(case)
    np.testing.assert_allclose(again.velocity, run.velocity, rtol=0, atol=1e-12)
    assert case_from_dict(case.to_dict()) == case  # the keys survive the resolved case


def test_meshio_conversion_of_a_bundled_gmsh_file(tmp_path):
    mm = meshio.read(ROOT / "meshes" / "cavity_128.msh")
    vtu = tmp_path / "cavity.vtu"
    meshio.write(vtu, mm)  # VTU keeps gmsh:physical as cell data but not the group names
    with pytest.raises(MeshError, match=r'physical tag 1, which has no name.*edge_tags = \{ 1 = "<patch>" \}'):
        build_case_mesh(case_from_dict(_cavity({"file": str(vtu)})))
    mesh = build_case_mesh(case_from_dict(_cavity({"file": str(vtu), "edge_tags": {"1": "lid", "2": "walls"}})))
    assert mesh.patch_names == ["lid", "walls"] and [p.size for p in mesh.patches] == [128, 384]


def test_another_tools_vtu_with_an_integer_array_on_its_lines(tmp_path):
    pts = np.array([[0, 0, 0], [1, 0, 0], [2, 0, 0], [0, 1, 0], [1, 1, 0], [2, 1, 0]], float)
    quads = np.array([[0, 1, 4, 3], [1, 2, 5, 4]])
    lines = np.array([[0, 1], [1, 2], [2, 5], [5, 4], [4, 3], [3, 0]])
    ids = np.array([7, 7, 9, 7, 7, 8])
    vtu = tmp_path / "other.vtu"
    meshio.write(vtu, meshio.Mesh(pts, [("quad", quads), ("line", lines)],
                                  cell_data={"boundary_id": [np.zeros(2, int), ids]}))
    with pytest.raises(MeshError, match="no named patch"):
        build_case_mesh(case_from_dict(_channel(vtu, {})))
    with pytest.raises(MeshError, match="no cell-data array 'bc'.*'boundary_id'"):
        build_case_mesh(case_from_dict(_channel(vtu, {"edge_tag_array": "bc", "edge_tags": {"7": "walls"}})))
    mesh = build_case_mesh(case_from_dict(_channel(vtu, {"edge_tag_array": "boundary_id",
                                                         "edge_tags": {"7": "walls", "8": "inlet", "9": "outlet"}})))
    assert sorted(mesh.patch_names) == ["inlet", "outlet", "walls"] and mesh.patch("walls").size == 4


def _channel(vtu: Path, keys: dict) -> dict:
    return {"mesh": {"file": str(vtu), **keys}, "fluid": {"density": 1.0, "viscosity": 0.01},
            "boundary": {"inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
                         "outlet": {"kind": "outflow-pressure"}, "walls": {"kind": "wall"}}}


@pytest.mark.parametrize("keys, words", [
    ({"edge_tags": {"one": "lid"}}, ["mesh.edge_tags", "not an integer tag"]),
    ({"edge_boxes": {"lid": [0, 1, 1]}}, ["mesh.edge_boxes", "[xmin, xmax, ymin, ymax]"]),
    ({"edge_boxes": {"lid": [1, 0, 1, 1]}}, ["mesh.edge_boxes", "xmin <= xmax"]),
    ({"unnamed_edges": 3}, ["mesh.unnamed_edges", "string"]),
])
def test_bad_edge_keys_name_the_key(tmp_path, keys, words):
    f = tmp_path / "m.vtu"
    f.write_text("")
    with pytest.raises(CaseError) as exc:
        case_from_dict(_cavity({"file": str(f), **keys}))
    for w in words:
        assert w in str(exc.value), str(exc.value)
    with pytest.raises(CaseError, match="only used with mesh.file"):
        case_from_dict(_cavity({"generator": "cavity", **keys}))
