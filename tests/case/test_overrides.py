"""``key=value`` overrides: TOML values, bare words as strings, clear errors."""

from __future__ import annotations

from pathlib import Path

import pytest

from fvrans.case import apply_overrides, case_from_dict, load_case, parse_override


@pytest.mark.parametrize(
    "item, key, value",
    [
        ("solver.max_iterations=100", "solver.max_iterations", 100),
        ("solver.tolerance=1e-8", "solver.tolerance", 1e-8),
        ("boundary.lid.velocity=[2.0, 0.0]", "boundary.lid.velocity", [2.0, 0.0]),
        ("output.write_fields=false", "output.write_fields", False),
        ("model.turbulence=spalart-allmaras", "model.turbulence", "spalart-allmaras"),
        ('title="Cavity, Re = 400"', "title", "Cavity, Re = 400"),
        ("mesh.file=/meshes/a.msh", "mesh.file", "/meshes/a.msh"),
        ("solver.relax_velocity=", "solver.relax_velocity", None),
        ("mesh.parameters={ n = 64, ratio = 1.1 }", "mesh.parameters", {"n": 64, "ratio": 1.1}),
        (' boundary."outer wall".kind = wall ', 'boundary."outer wall".kind', "wall"),
        ('boundary."a=b".kind=wall', 'boundary."a=b".kind', "wall"),
    ],
)
def test_parse_override(item, key, value):
    assert parse_override(item) == (key, value)


def test_apply_overrides(base):
    c = case_from_dict(base)
    c2 = apply_overrides(
        c,
        [
            "solver.max_iterations=100",
            "boundary.lid.velocity=[2.0, 0.0]",
            "model.turbulence=spalart-allmaras",
            "solver.coupling=simple",
            "mesh.parameters.n=16",
        ],
    )
    assert c2.solver.max_iterations == 100
    assert c2.boundaries["lid"].velocity == (2.0, 0.0)
    assert c2.model.turbulence == "spalart-allmaras"
    assert c2.solver.relax_pressure == 0.3  # the default of the new coupling
    assert c2.mesh.parameters == {"n": 16}
    assert c.solver.max_iterations == 5000 and c.boundaries["lid"].velocity == (1.0, 0.0)  # unchanged
    assert apply_overrides(c, []) == c


def test_overrides_are_validated_together(base):
    # changing a boundary's kind needs the whole table at once
    c = apply_overrides(
        case_from_dict(base), ['boundary.lid={ kind = "inflow-velocity", velocity = [0, -1] }']
    )
    assert c.boundaries["lid"].kind == "inflow-velocity" and c.boundaries["lid"].velocity == (0.0, -1.0)


@pytest.mark.parametrize(
    "item, expected",
    [
        (
            "solver.relax_velocity=2",
            ["solver.relax_velocity", "(0, 1]", "override(s) 'solver.relax_velocity=2'"],
        ),
        ("solver.max_iterations=many", ["solver.max_iterations", "got str 'many'"]),
        ("solver.relax_velocty=0.5", ["did you mean 'relax_velocity'"]),
        ("boundary.lid.velocity=[2.0, 0.0", ["not valid TOML", "boundary.lid.velocity=[2.0, 0.0"]),
        ("solver.max_iterations", ["must look like key=value"]),
        ("fluid.density=", ["fluid.density", "missing required key"]),
        ("solver..x=1", ["not a valid dotted key"]),
        ("model.turbulence=sa", ["model.turbulence", "'none', 'spalart-allmaras'"]),
    ],
)
def test_override_errors(item, expected, base, err):
    msg = err(apply_overrides, case_from_dict(base), [item])
    assert msg.startswith("<in memory>: ")
    for t in expected:
        assert t in msg, f"{t!r} not in: {msg}"


def test_an_empty_value_removes_the_key_and_its_default_applies(base):
    """Issue #12 item 14: ``KEY=`` removes a key; here the relaxation the case sets, whose
    coupling default then applies again."""
    base["solver"] = {"coupling": "simple", "relax_velocity": 0.5}
    c = case_from_dict(base)
    assert c.solver.relax_velocity == 0.5
    c2 = apply_overrides(c, ["solver.relax_velocity="])
    assert c2.solver.relax_velocity == 0.7  # the default of SIMPLE (README's [solver] table)
    assert apply_overrides(c, ["probes.nothing="]) == c  # removing a key that is not there: no change


def test_relative_paths_in_overrides_start_from_the_working_directory(tmp_path, monkeypatch, base):
    """Issue #12 item 14: a path given on the command line is relative to where the command runs,
    whatever folder the case file is in."""
    cases = tmp_path / "cases"
    cases.mkdir()
    work = tmp_path / "work"
    (work / "data").mkdir(parents=True)
    (work / "data" / "inflow.csv").write_text("y,u,v\n0,1,0\n1,1,0\n")
    src = cases / "c.toml"
    src.write_text('[mesh]\ngenerator = "cavity"\n[fluid]\ndensity = 1.0\nviscosity = 0.01\n'
                   '[boundary.lid]\nkind = "wall"\n[boundary.walls]\nkind = "wall"\n')
    monkeypatch.chdir(work)
    c = apply_overrides(load_case(src), ['boundary.lid={ kind = "inflow-velocity", profile = "data/inflow.csv" }'])
    assert c.boundaries["lid"].profile == (work / "data" / "inflow.csv").resolve()
    c = apply_overrides(load_case(src), ["boundary.lid.kind=inflow-velocity", "boundary.lid.profile=data/inflow.csv"])
    assert c.boundaries["lid"].profile == (work / "data" / "inflow.csv").resolve()
    assert Path.cwd() == work
