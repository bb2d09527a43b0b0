"""Names to file names (issue 13, item 1): nothing read from a mesh or case file becomes a path
outside --out; kept names keep their form; mapped names are unique; empty names are refused."""

from __future__ import annotations

import os

import numpy as np
import pytest
from hostile_cases import box_mesh, files_under, write_box_case

import fvrans.api as fa
from fvrans.case import case_from_dict
from fvrans.cli import main
from fvrans.errors import CaseError, MeshError
from fvrans.mesh import Mesh
from fvrans.post.filenames import MAX_KEPT, check_inside, output_file, safe_file_name
from fvrans.post.writers import atomic_write, write_csv_atomic, write_json_atomic

HOSTILE = ["../../escaped", "/tmp/fvrans_abs_escape", ".", "..", "...", "a/b", "a\\b", "a_b", "a b",
           "x" * 300, "-rf", ".hidden", "wall\x00.csv", "caf\u00e9", "a" * MAX_KEPT, "a" * (MAX_KEPT + 1),
           "~", "$HOME", "a:b", "con", "sub/../../../x"]


@pytest.mark.parametrize("name", ["lower_wall", "x_4.5", "Cd", "wall.plate.cf@x=0.97", "a-b", "_x", "7"])
def test_plain_names_keep_their_form(name):
    assert safe_file_name(name) == name


@pytest.mark.parametrize("name", HOSTILE)
def test_any_name_becomes_one_plain_component(name, tmp_path):
    s = safe_file_name(name)
    assert s == safe_file_name(name)  # a pure function: a reader finds what a writer wrote
    assert "/" not in s and "\\" not in s and "\x00" not in s and s not in (".", "..")
    assert not s.startswith((".", "-", "~")) and s.isascii() and 0 < len(s) <= MAX_KEPT
    p = output_file(tmp_path / "out", name, ".csv", subfolder="wall")
    assert p.parent == tmp_path / "out" / "wall" and p.name == s + ".csv"


def test_mapping_is_one_to_one():
    names = HOSTILE + ["lower_wall", "escaped", "x" * 301, "A/b", "a/B", "a//b", "a\tb", "a\nb", "name"]
    assert len({safe_file_name(n) for n in names}) == len(set(names))


@pytest.mark.parametrize("name", ["", " ", "\t\n"])
def test_empty_names_are_refused(name):
    with pytest.raises(CaseError, match="empty"):
        safe_file_name(name, "wall patch")


def test_non_string_names_are_refused():
    with pytest.raises(CaseError, match="must be a string"):
        safe_file_name(3)  # type: ignore[arg-type]


def test_writers_refuse_a_target_outside_their_folder(tmp_path):
    out = tmp_path / "out"
    out.mkdir()
    for bad in (out / ".." / "x.csv", out / "sub" / ".." / ".." / "y.csv", tmp_path / "z.json"):
        with pytest.raises(CaseError, match="outside the output folder"):
            write_csv_atomic(bad, ["a"], [np.arange(2)], within=out)
        with pytest.raises(CaseError, match="outside the output folder"):
            write_json_atomic(bad, {}, within=out)
    (out / "link").symlink_to(tmp_path, target_is_directory=True)  # a folder leading out of --out
    with pytest.raises(CaseError, match="outside the output folder"):
        atomic_write(out / "link" / "w.txt", lambda f: f.write("x"), within=out)
    with pytest.raises(CaseError):
        check_inside(out / "..", out)
    assert files_under(tmp_path) == {out / "link"}
    write_csv_atomic(out / "ok.csv", ["a"], [np.arange(2)], within=out)  # inside: written
    assert (out / "ok.csv").is_file()


@pytest.mark.parametrize("name", ["", "  "])
def test_an_empty_patch_name_is_refused(name):
    with pytest.raises(MeshError, match="empty name"):
        box_mesh(["floor", name])


# names a mesh file can carry in each format (quotes and NUL cannot be written to a Gmsh or VTU file)
FILE_NAMES = ["../../escaped", "ABS", "..", ".", "a\\b", "a/b", "a_b", "x" * 300, "sub/../../../deep"]


@pytest.mark.parametrize("fmt", ["gmsh22", "gmsh41", "vtu"])
def test_hostile_patch_names_in_mesh_files_stay_inside_out(tmp_path, fmt):
    """A mesh whose physical names are traversal, absolute, dot, backslash, colliding and very long
    names: `fvrans run` writes every wall table inside --out, one per patch, nothing elsewhere."""
    work = tmp_path / "work"
    names = [str(tmp_path / "abs_escape") if n == "ABS" else n for n in FILE_NAMES]
    case = write_box_case(work / "input", names, fmt)
    before = files_under(tmp_path)
    out = work / "deep" / "out"
    args = ["run", str(case), "--out", str(out), "--quiet"] + (["--no-plots"] if fmt != "gmsh41" else [])
    assert main(args) in (0, 1)
    written = files_under(tmp_path) - before
    assert written and all(out in p.parents for p in written), sorted(map(str, written - set(out.rglob("*"))))
    walls = sorted(p.name for p in (out / "wall").iterdir() if p.is_file())
    assert len(walls) == len(names) + 3  # one table per wall patch, none overwritten by another
    assert sorted(p.name for p in (out / "wall" / "zero_shear").iterdir()) == walls  # and its zero-shear points
    assert "lid.csv" in walls and "a_b.csv" in walls
    assert not [p for p in out.rglob("*") if p.name.startswith((".fvrans-tmp", ".fvrans-staging"))]  # none left
    if fmt == "gmsh41":  # plot file names come from the same mapping
        pngs = [p.name for p in (out / "plots").glob("wall_*_cf.png")]
        assert len(pngs) == len(names) + 3 and all("/" not in p for p in pngs)


def test_names_given_in_python_stay_inside_out(tmp_path):
    """Through the API, where names may hold anything (NUL, line breaks), the same holds; a probe
    name is mapped the same way."""
    names = ["wall\x00x", "line\nbreak", "../../../py_escape", os.sep + "abs"]
    mesh = box_mesh(names)
    data = {"mesh": {"generator": "cavity"}, "fluid": {"density": 1.0, "viscosity": 0.05},
            "boundary": {n: {"kind": "wall"} for n in names + ["left", "right"]}
            | {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}},
            "solver": {"max_iterations": 2}}
    case = case_from_dict(data)
    result = fa.solve(fa.prepare(case, mesh=mesh))
    out = tmp_path / "a" / "out"
    result.write(out)
    assert all(out in p.parents for p in files_under(tmp_path))
    assert len([p for p in (out / "wall").iterdir() if p.is_file()]) == len(names) + 3
    assert len(list((out / "wall" / "zero_shear").iterdir())) == len(names) + 3


def test_a_reader_finds_the_table_of_a_mapped_name(tmp_path):
    """`fvrans compare` and sweep outputs read wall/<patch>.csv through the same mapping."""
    from fvrans.sweep.collect import collect_outputs
    from fvrans.sweep.spec import Output

    name = "../outer wall"
    case = write_box_case(tmp_path / "in", [name, "floor"], "gmsh22")
    out = tmp_path / "out"
    assert main(["run", str(case), "--out", str(out), "--quiet", "--no-plots"]) in (0, 1)
    values, errors = collect_outputs(out, [Output("p", wall=name, quantity="p_wall", x=0.2)])
    assert not errors and values["p"] is not None


def test_mesh_with_a_mapped_name_round_trips(tmp_path):
    """The patch names themselves are kept as given (only file names are mapped)."""
    from fvrans.mesh.io import read_mesh, write_mesh

    m = box_mesh(["../x", "y"])
    write_mesh(m, tmp_path / "m.msh", file_format="gmsh22")
    back = read_mesh(tmp_path / "m.msh")
    assert sorted(back.patch_names) == sorted(m.patch_names)
    assert isinstance(back, Mesh)


def test_a_linked_folder_inside_out_does_not_carry_a_set_outside(tmp_path):
    """A folder of the output set (``wall/``) that is a symbolic link to elsewhere: the set is
    refused before anything is put in place, naming the link; the previous set stays and nothing
    lands outside ``--out``; recovery of a staged set skips such files too."""
    from fvrans.post import outputs

    out, elsewhere = tmp_path / "out", tmp_path / "elsewhere"
    out.mkdir()
    elsewhere.mkdir()
    with outputs.output_set(out, iteration=1) as stage:
        (stage / "summary.json").write_text("{}")
    (out / "wall").symlink_to(elsewhere, target_is_directory=True)
    with pytest.raises(CaseError, match="leads out of the output folder"):
        with outputs.output_set(out, iteration=2) as stage:
            (stage / "wall").mkdir()
            (stage / "wall" / "plate.csv").write_text("x\n")
            (stage / "summary.json").write_text('{"iteration": 2}')
    assert list(elsewhere.iterdir()) == []
    assert (out / "summary.json").read_text() == "{}" and not (out / outputs.STAGING).exists()
    # a staged set left by a kill (its list written) is rolled forward without the linked file
    stage = out / outputs.STAGING
    (stage / "wall").mkdir(parents=True)
    (stage / "wall" / "plate.csv").write_text("x\n")
    (stage / "summary.json").write_text('{"iteration": 3}')
    (stage / outputs.MANIFEST).write_text('{"files": ["summary.json", "wall/plate.csv"], "iteration": 3}')
    outputs.recover(out)
    assert list(elsewhere.iterdir()) == []
    assert (out / "summary.json").read_text() == '{"iteration": 3}'
