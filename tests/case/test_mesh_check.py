"""Case against mesh: patch names, moving walls, inlet profile coverage, mesh building."""

from __future__ import annotations

import sys
import types

import numpy as np
import pytest

from fvrans.case import build_case_mesh, case_from_dict, check_case_against_mesh, generator_names
from fvrans.mesh.mesh import Mesh

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

SQUARE = ("bottom", "right", "top", "left")


def _square_case(**boundary) -> dict:
    b = {
        "bottom": {"kind": "wall"},
        "right": {"kind": "wall"},
        "top": {"kind": "wall"},
        "left": {"kind": "wall"},
    }
    b.update(boundary)
    return {
        "mesh": {"generator": "square"},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {k: v for k, v in b.items() if v is not None},
    }


def test_patch_names_match(base):
    check_case_against_mesh(case_from_dict(base), ["lid", "walls"])  # no error


def test_missing_and_extra_patches_listed_with_fix(base, err):
    c = case_from_dict(base)
    msg = err(check_case_against_mesh, c, ["lid", "wall", "bottom"])
    assert msg.startswith("<in memory>: ")
    assert "no boundary condition: 'wall', 'bottom'" in msg
    assert "boundary.walls names a patch" in msg and "did you mean 'wall'" in msg
    assert "'lid', 'wall', 'bottom'" in msg  # the mesh's patch names
    # the snippet in the message, added to the case, fixes the missing patches
    snippet = msg.split("for example:\n", 1)[1].split("\nboundary.walls", 1)[0]
    added = tomllib.loads("\n".join(line.strip() for line in snippet.splitlines()))
    fixed = c.replace({"boundary.walls": None, **{f"boundary.{k}": v for k, v in added["boundary"].items()}})
    check_case_against_mesh(fixed, ["lid", "wall", "bottom"])


def test_suggested_tables_are_valid_conditions(base, err):
    c = case_from_dict(base)
    mesh_names = ["lid", "walls", "inlet_1", "Outlet", "symmetry plane", "far field", "plate"]
    msg = err(check_case_against_mesh, c, mesh_names)
    snippet = msg.split("for example:\n", 1)[1]
    added = tomllib.loads("\n".join(line.strip() for line in snippet.splitlines()))["boundary"]
    kinds = {k: v["kind"] for k, v in added.items()}
    assert kinds == {
        "inlet_1": "inflow-velocity",
        "Outlet": "outflow-pressure",
        "symmetry plane": "symmetry",
        "far field": "outer-flow",
        "plate": "wall",
    }
    fixed = c.replace({f'boundary."{k}"': v for k, v in added.items()})
    check_case_against_mesh(fixed, mesh_names)


def test_names_in_message_are_quoted_keys(base, err):
    msg = err(check_case_against_mesh, case_from_dict(base), ["lid", "walls", "outer wall"])
    assert '[boundary."outer wall"]' in msg


def test_tangential_moving_wall_passes(make_mesh):
    mesh = make_mesh(4, SQUARE)
    c = case_from_dict(
        _square_case(
            top={"kind": "wall", "velocity": [1.0, 0.0]}, left={"kind": "wall", "velocity": [0.0, -2.0]}
        )
    )
    check_case_against_mesh(c, mesh)
    # a normal component within the tolerance (1e-4 of the speed) is accepted
    check_case_against_mesh(c.set("boundary.top.velocity", [1.0, 1e-6]), mesh)


def test_wall_moving_through_itself_is_refused(make_mesh, err):
    mesh = make_mesh(4, SQUARE)
    c = case_from_dict(_square_case(top={"kind": "wall", "velocity": [1.0, 0.1]}))
    msg = err(check_case_against_mesh, c, mesh)
    assert "boundary.top.velocity" in msg and "4 of 4 faces" in msg and "inflow-velocity" in msg
    assert "0.1" in msg  # the normal component u . n = 0.1 on the top wall y = 1


def test_profile_must_cover_the_patch(make_mesh, err, tmp_path):
    mesh = make_mesh(4, SQUARE)
    (tmp_path / "full.csv").write_text("y,u,v\n0,0,0\n1,1,0\n")
    (tmp_path / "short.csv").write_text("y,u,v\n0,0,0\n0.9,1,0\n")
    (tmp_path / "nearly.csv").write_text("y,u,v\n0.0001,0,0\n0.9999,1,0\n")  # within 1e-3 of the span
    src = tmp_path / "c.toml"
    for ok in ("full.csv", "nearly.csv"):
        c = case_from_dict(_square_case(left={"kind": "inflow-velocity", "profile": ok}), source=src)
        check_case_against_mesh(c, mesh)
    c = case_from_dict(_square_case(left={"kind": "inflow-velocity", "profile": "short.csv"}), source=src)
    msg = err(check_case_against_mesh, c, mesh)
    assert msg.startswith(f"{src}: boundary.left.profile") and "y = 1" in msg and "[0, 0.9]" in msg


def test_profile_along_x(make_mesh, tmp_path):
    (tmp_path / "p.csv").write_text("x,u,v\n0,0,-1\n1,0,-3\n")
    c = case_from_dict(
        _square_case(
            top={"kind": "inflow-velocity", "profile": "p.csv", "profile_columns": {"coordinate": "x"}}
        ),
        source=tmp_path / "c.toml",
    )
    check_case_against_mesh(c, make_mesh(4, SQUARE))
    u, v = c.boundary_velocity("top", np.array([0.0, 0.5, 1.0]), np.ones(3))
    np.testing.assert_allclose(v, [-1.0, -2.0, -3.0])


def test_python_inlet_function_tried_on_the_mesh(make_mesh, err):
    c = case_from_dict(
        _square_case(left={"kind": "inflow-velocity", "velocity": lambda x, y: (1.0 / y, 0.0 * y)})
    )
    check_case_against_mesh(c, make_mesh(4, SQUARE))  # face centres have y > 0
    c = c.set("boundary.left.velocity", lambda x, y: (np.log(y - 0.5), 0.0))
    with np.errstate(invalid="ignore"):
        assert "non-finite" in err(check_case_against_mesh, c, make_mesh(4, SQUARE))


# -- building ------------------------------------------------------------------------------------
@pytest.fixture
def fake_generators(monkeypatch, make_mesh):
    """A stand-in for fvrans.mesh.generate: two generators, a helper and a constant."""
    mod = types.ModuleType("fvrans.mesh.generate")

    def square(n: int = 4, shuffle_seed: int | None = None) -> Mesh:
        return make_mesh(n, SQUARE, shuffle_seed)

    def channel(nx: int, ny: int) -> Mesh:
        raise AssertionError("not called in these tests")

    def spacing(n: int) -> np.ndarray:  # a helper, not a generator
        return np.linspace(0.0, 1.0, n)

    for f in (square, channel, spacing):
        f.__module__ = mod.__name__
        setattr(mod, f.__name__, f)
    mod.LEVELS = {"fine": 1}
    mod.__all__ = ["LEVELS", "channel", "spacing", "square"]
    monkeypatch.setitem(sys.modules, "fvrans.mesh.generate", mod)
    return mod


def test_generator_names(fake_generators):
    assert generator_names() == ["channel", "square"]


def test_real_generator_module_names():
    pytest.importorskip("fvrans.mesh.generate")
    names = generator_names()
    assert "cavity" in names and "LEVELS" not in names and "tanh_points" not in names


def test_helper_is_not_a_generator(fake_generators, err):
    msg = err(build_case_mesh, case_from_dict(_square_case()).set("mesh.generator", "spacing"))
    assert "no mesh generator named 'spacing'" in msg


def test_build_from_generator(fake_generators):
    c = case_from_dict(_square_case()).set("mesh.parameters", {"n": 3})
    mesh = build_case_mesh(c)
    assert mesh.n_cells == 9 and mesh.patch_names == list(SQUARE)


def test_unknown_generator_lists_available(fake_generators, err):
    c = case_from_dict(_square_case()).set("mesh.generator", "sqare")
    msg = err(build_case_mesh, c)
    assert msg.startswith("<in memory>: mesh.generator:") and "'sqare'" in msg
    assert "did you mean 'square'" in msg and "'channel', 'square'" in msg


def test_bad_generator_parameters_list_accepted(fake_generators, err):
    c = case_from_dict(_square_case()).set("mesh.parameters", {"m": 3})
    msg = err(build_case_mesh, c)
    assert (
        msg.startswith("<in memory>: mesh.parameters:") and "'m'" in msg and "takes: n, shuffle_seed" in msg
    )


def test_build_checks_the_case(fake_generators, err):
    c = case_from_dict(_square_case(left=None))
    assert "no boundary condition: 'left'" in err(build_case_mesh, c)
    assert build_case_mesh(c, check=False).n_cells == 16


def test_build_from_file(tmp_path, make_mesh):
    from fvrans.mesh.io import write_mesh

    write_mesh(make_mesh(3, SQUARE), tmp_path / "sq.msh")
    d = _square_case()
    d["mesh"] = {"file": "sq.msh"}
    mesh = build_case_mesh(case_from_dict(d, source=tmp_path / "case.toml"))
    assert mesh.n_cells == 9 and sorted(mesh.patch_names) == sorted(SQUARE)


def _bandwidth(mesh) -> int:
    i = mesh.n_internal_faces
    return int(np.max(np.abs(mesh.face_owner[:i] - mesh.face_neighbour[:i])))


def test_renumbering_reduces_bandwidth(fake_generators):
    c = case_from_dict(_square_case()).replace(
        {"mesh.parameters": {"n": 12, "shuffle_seed": 1}, "mesh.renumber": True}
    )
    shuffled = fake_generators.square(12, 1)
    mesh = build_case_mesh(c)
    # a row-by-row numbering of an n x n grid has bandwidth n; shuffled cells are far worse
    assert _bandwidth(shuffled) > 5 * 12
    assert _bandwidth(mesh) <= 2 * 12

    # same cells, reordered: the set of cell vertex sets is unchanged
    def cellset(m):
        return sorted(tuple(sorted(m.points[m.cell(k)].round(9).ravel().tolist())) for k in range(m.n_cells))

    assert cellset(mesh) == cellset(shuffled)
    assert mesh.source == "square-test-mesh"
