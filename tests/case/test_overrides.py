"""``key=value`` overrides: TOML values, bare words as strings, clear errors."""

from __future__ import annotations

import pytest

from fvrans.case import apply_overrides, case_from_dict, parse_override


@pytest.mark.parametrize(
    "item, key, value",
    [
        ("solver.max_iterations=100", "solver.max_iterations", 100),
        ("solver.tolerance=1e-8", "solver.tolerance", 1e-8),
        ("boundary.lid.velocity=[2.0, 0.0]", "boundary.lid.velocity", [2.0, 0.0]),
        ("output.write_fields=false", "output.write_fields", False),
        ("model.turbulence=spalart-allmaras", "model.turbulence", "spalart-allmaras"),
        ('title="Cavity, Re = 400"', "title", "Cavity, Re = 400"),
        ("mesh.file=../meshes/a.msh", "mesh.file", "../meshes/a.msh"),
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
        ("solver.max_iterations=", ["no value after '='"]),
        ("solver..x=1", ["not a valid dotted key"]),
        ("model.turbulence=sa", ["model.turbulence", "'none', 'spalart-allmaras'"]),
    ],
)
def test_override_errors(item, expected, base, err):
    msg = err(apply_overrides, case_from_dict(base), [item])
    assert msg.startswith("<in memory>: ")
    for t in expected:
        assert t in msg, f"{t!r} not in: {msg}"
