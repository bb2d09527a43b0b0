"""Loading case files: defaults, path resolution, round trips, Python-side changes."""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pytest

from fvrans.case import Case, apply_overrides, case_from_dict, load_case
from fvrans.errors import CaseError

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

FULL_CASE = """
title = "Channel with a measured inlet profile"
description = "turbulent channel, SA, profile inlet"

[mesh]
file = "meshes/channel.msh"
renumber = true

[fluid]
density = 1.2
viscosity = 1.8e-5

[model]
turbulence = "spalart-allmaras"
sa_variant = "no-ft2"

[initial]
velocity = [10, 0]
pressure = 0.0
nu_tilde_ratio = 5

[boundary.inlet]
kind = "inflow-velocity"
profile = "inlet.csv"
profile_columns = { coordinate = "y", u = "U", v = "V" }
nu_tilde_ratio = 4.0

[boundary.outlet]
kind = "outflow-pressure"
pressure = 0.5

[boundary.bottom]
kind = "wall"

[boundary.top]
kind = "symmetry"

[boundary."far field"]
kind = "outer-flow"
velocity = [10.0, 0.0]

[solver]
coupling = "simple"
max_iterations = 200
tolerance = 1e-7
relax_velocity = 0.5
relax_turbulence = 0.6
convection = "upwind"
turbulence_convection = "linear-upwind"
gradient = "green-gauss"
limiter = "venkatakrishnan"
pressure_tolerance = 0.05
momentum_tolerance = 0.2
momentum_sweeps = 3
turbulence_solver = "gauss-seidel"
turbulence_tolerance = 0.02
turbulence_max_iterations = 8
amg_rebuild_every = 10
divergence_factor = 1e4
checkpoint_every = 50

[output]
wall_patches = ["bottom"]
reference_velocity = 10.0
reference_pressure = 1.0
reference_length = 0.5
write_fields = false
"""

INLET_CSV = "# measured inlet\ny,U,V\n0.0,0.0,0.0\n0.5,8.0,0.0\n1.0,10.0,0.1\n"


@pytest.fixture
def full_case_file(tmp_path: Path) -> Path:
    (tmp_path / "meshes").mkdir()
    (tmp_path / "meshes" / "channel.msh").write_text("placeholder: only existence is checked on load\n")
    (tmp_path / "inlet.csv").write_text(INLET_CSV)
    f = tmp_path / "case.toml"
    f.write_text(FULL_CASE)
    return f


def test_defaults_of_a_minimal_case(base):
    c = case_from_dict(base)
    assert c.source is None and c.label == "<in memory>"
    assert (c.title, c.description) == ("", "")
    assert c.mesh.generator == "cavity" and c.mesh.file is None and c.mesh.parameters == {"n": 8}
    assert c.mesh.renumber is False
    assert (c.model.turbulence, c.model.sa_variant) == ("none", "standard")
    assert (c.initial.velocity, c.initial.pressure, c.initial.nu_tilde_ratio) == ((0.0, 0.0), 0.0, 3.0)
    assert c.boundaries["walls"].velocity == (0.0, 0.0)  # resting wall by default
    s = c.solver
    assert (s.coupling, s.max_iterations, s.tolerance) == ("simplec", 5000, 1e-6)
    assert (s.relax_velocity, s.relax_pressure, s.relax_turbulence) == (0.95, 1.0, 1.0)
    assert (s.momentum_solver, s.momentum_max_iterations) == ("amg", 20)
    assert (s.convection, s.turbulence_convection, s.gradient, s.limiter) == (
        "linear-upwind",
        "upwind",
        "least-squares",
        "none",
    )
    assert (s.pressure_tolerance, s.momentum_tolerance, s.momentum_sweeps) == (0.01, 0.1, 5)
    assert (s.turbulence_solver, s.turbulence_tolerance, s.turbulence_max_iterations) == ("amg", 0.01, 20)
    assert (s.amg_rebuild_every, s.divergence_factor, s.checkpoint_every) == (20, 1e5, 0)
    assert (s.conservative_start, s.turbulence_cfl, s.threads) == (True, 20.0, 0)
    o = c.output
    assert o.wall_patches == ("lid", "walls")  # every wall patch by default
    # reference velocity and free-stream direction: the inflow's (None here), density: the fluid's
    assert (o.reference_velocity, o.reference_pressure, o.reference_length, o.write_fields) == (
        None,
        0.0,
        1.0,
        True,
    )
    assert (o.reference_density, o.flow_direction, o.flow_angle, o.moment_centre, o.force_groups) == (
        None, None, None, (0.0, 0.0), {})


@pytest.mark.parametrize("coupling, expected", [("simplec", 1.0), ("simple", 0.3)])
def test_relax_pressure_default_follows_coupling(base, coupling, expected):
    base["solver"] = {"coupling": coupling}
    assert case_from_dict(base).solver.relax_pressure == expected


def test_relax_pressure_default_is_rederived_by_set_but_explicit_value_kept(base):
    c = case_from_dict(base)
    assert c.set("solver.coupling", "simple").solver.relax_pressure == 0.3
    explicit = c.set("solver.relax_pressure", 0.5)
    assert explicit.set("solver.coupling", "simple").solver.relax_pressure == 0.5
    # removing the explicit value brings the coupling's default back
    assert (
        explicit.replace({"solver.coupling": "simple", "solver.relax_pressure": None}).solver.relax_pressure
        == 0.3
    )


def test_full_case_file(full_case_file, tmp_path, monkeypatch):
    monkeypatch.chdir(Path(full_case_file.anchor))  # paths must not depend on the working directory
    c = load_case(full_case_file)
    assert c.source == full_case_file and c.label == str(full_case_file)
    assert c.title.startswith("Channel")
    assert c.mesh.file == (tmp_path / "meshes" / "channel.msh").resolve() and c.mesh.renumber
    assert c.fluid.density == 1.2 and c.fluid.viscosity == 1.8e-5
    assert c.fluid.kinematic_viscosity == pytest.approx(1.8e-5 / 1.2)
    assert c.turbulent and c.model.sa_variant == "no-ft2"
    assert c.initial.velocity == (10.0, 0.0) and isinstance(c.initial.velocity[0], float)
    inlet = c.boundaries["inlet"]
    assert inlet.profile == (tmp_path / "inlet.csv").resolve()
    assert inlet.profile_columns == {"coordinate": "y", "u": "U", "v": "V"}
    assert inlet.nu_tilde_ratio == 4.0
    assert c.boundaries["outlet"].pressure == 0.5
    assert c.boundaries["top"].kind == "symmetry"
    ff = c.boundaries["far field"]
    assert (ff.velocity, ff.pressure, ff.nu_tilde_ratio) == ((10.0, 0.0), 0.0, 3.0)
    assert list(c.boundaries) == ["inlet", "outlet", "bottom", "top", "far field"]  # file order
    assert c.solver.coupling == "simple" and c.solver.relax_pressure == 0.3
    assert c.solver.limiter == "venkatakrishnan" and c.solver.checkpoint_every == 50
    assert (c.solver.turbulence_solver, c.solver.turbulence_tolerance, c.solver.turbulence_max_iterations) == (
        "gauss-seidel", 0.02, 8)
    assert c.output.wall_patches == ("bottom",) and c.output.write_fields is False


def test_inlet_profile_is_interpolated_linearly(full_case_file):
    c = load_case(full_case_file)
    # table y: 0, 0.5, 1 -> U: 0, 8, 10, V: 0, 0, 0.1 (piecewise linear)
    u, v = c.boundary_velocity("inlet", np.zeros(4), np.array([0.0, 0.25, 0.75, 1.0]))
    np.testing.assert_allclose(u, [0.0, 4.0, 9.0, 10.0])
    np.testing.assert_allclose(v, [0.0, 0.0, 0.05, 0.1])
    np.testing.assert_allclose(c.boundary_nu_tilde_ratio("inlet", 0.0, np.array([0.1, 0.9])), [4.0, 4.0])


def test_relative_paths_in_memory_start_from_cwd(base, tmp_path, monkeypatch):
    (tmp_path / "m.msh").write_text("x")
    monkeypatch.chdir(tmp_path)
    base["mesh"] = {"file": "m.msh"}
    assert case_from_dict(base).mesh.file == (tmp_path / "m.msh").resolve()
    # with a source, they start from the source's directory instead
    sub = tmp_path / "sub"
    sub.mkdir()
    (sub / "m.msh").write_text("y")
    assert case_from_dict(base, source=sub / "case.toml").mesh.file == (sub / "m.msh").resolve()


def _round_trip_cases(base, full_case_file) -> list[Case]:
    sa = dict(base)
    sa["model"] = {"turbulence": "spalart-allmaras"}
    sa["boundary"] = {
        "far": {"kind": "outer-flow", "velocity": [1, 0.1], "nu_tilde_ratio": 0},
        "wing": {"kind": "wall"},
        "out": {"kind": "outflow-pressure"},
    }
    return [case_from_dict(base), case_from_dict(sa), load_case(full_case_file)]


def test_round_trip_through_dict_and_toml(base, full_case_file):
    for c in _round_trip_cases(base, full_case_file):
        d = c.to_dict()
        assert case_from_dict(d) == c
        assert case_from_dict(tomllib.loads(c.to_toml())) == c
        assert tomllib.loads(c.to_toml()) == d  # to_dict is plain TOML data
        # every key is filled in: the solver and output tables are complete
        assert len(d["solver"]) == 27 and len(d["output"]) == 6
        # equality is not trivial: a changed setting makes a different case
        assert c.set("solver.relax_velocity", 0.55) != c


def test_round_trip_with_defaulted_profile_nu_tilde_ratio(tmp_path, base):
    (tmp_path / "p.csv").write_text("y,u,v,nu_tilde_ratio\n0,1,0,2\n1,1,0,6\n")
    base["boundary"]["inlet"] = {"kind": "inflow-velocity", "profile": "p.csv"}
    c = case_from_dict(base, source=tmp_path / "c.toml")
    spec = c.boundaries["inlet"]
    assert spec.nu_tilde_ratio is None and spec.profile_columns["nu_tilde_ratio"] == "nu_tilde_ratio"
    np.testing.assert_allclose(
        c.boundary_nu_tilde_ratio("inlet", 0.0, np.array([0.0, 0.25, 1.0])), [2.0, 3.0, 6.0]
    )
    assert case_from_dict(c.to_dict()) == c


def test_python_velocity_function(base, make_mesh):
    def parabola(x, y):
        return 6.0 * y * (1.0 - y), 0.0 * x

    base["boundary"] = {
        "left": {"kind": "inflow-velocity", "velocity": parabola},
        "right": {"kind": "outflow-pressure"},
        "top": {"kind": "wall"},
        "bottom": {"kind": "wall"},
    }
    c = case_from_dict(base)
    u, v = c.boundary_velocity("left", np.zeros(3), np.array([0.0, 0.5, 1.0]))
    np.testing.assert_allclose(u, [0.0, 1.5, 0.0])
    np.testing.assert_allclose(v, 0.0)
    assert c.to_dict()["boundary"]["left"]["velocity"] == "<python callable>"
    msg = str(pytest.raises(CaseError, case_from_dict, c.to_dict()).value)
    assert "boundary.left.velocity" in msg and "Python function" in msg
    # the function survives other changes, and can be set from Python
    c2 = c.set("solver.max_iterations", 10)
    assert c2.boundaries["left"].velocity is parabola
    c3 = case_from_dict(base).set("boundary.left.velocity", lambda x, y: (1.0, 2.0))
    np.testing.assert_allclose(c3.boundary_velocity("left", [0.0, 0.0], [0.1, 0.2]), [[1, 1], [2, 2]])


def test_python_velocity_function_errors(base, err):
    base["boundary"] = {"in": {"kind": "inflow-velocity", "velocity": lambda x, y: (x,)}}
    msg = err(case_from_dict(base).boundary_velocity, "in", [0.0], [0.0])
    assert "boundary.in.velocity" in msg and "return (u, v)" in msg
    c = case_from_dict(base).set("boundary.in.velocity", lambda x, y: (np.nan * x, x))
    assert "non-finite" in err(c.boundary_velocity, "in", [0.0], [0.0])
    assert "'in'" in err(c.boundary_velocity, "inn", [0.0], [0.0])


def test_set_makes_a_new_validated_case(base, err):
    c = case_from_dict(base)
    c2 = c.set("solver.relax_velocity", 0.5)
    assert c.solver.relax_velocity == 0.95 and c2.solver.relax_velocity == 0.5
    c3 = c.set("boundary.lid.velocity", [2, 0])
    assert c3.boundaries["lid"].velocity == (2.0, 0.0)
    c4 = c.set("boundary.inlet", {"kind": "inflow-velocity", "velocity": [1, 0]})
    assert c4.boundaries["inlet"].kind == "inflow-velocity" and "inlet" not in c.boundaries
    assert c.set("boundary.walls", None).boundaries.keys() == {"lid"}
    assert c.set('boundary."outer wall"', {"kind": "wall"}).boundaries["outer wall"].kind == "wall"
    msg = err(c.set, "solver.relax_velocity", 0)
    assert msg.startswith("<in memory>: solver.relax_velocity:") and "(0, 1]" in msg
    assert "not a table" in err(c.set, "fluid.density.x", 1)
    assert "not a valid dotted key" in err(c.set, "solver..x", 1)


def test_int_for_float_and_integral_float_for_int(base):
    base["fluid"] = {"density": 1, "viscosity": 1}
    base["solver"] = {"max_iterations": 1e3}
    c = case_from_dict(base)
    assert isinstance(c.fluid.density, float) and c.fluid.density == 1.0
    assert isinstance(c.solver.max_iterations, int) and c.solver.max_iterations == 1000


def test_numpy_values_accepted(base):
    base["initial"] = {"velocity": np.array([1.0, 2.0]), "pressure": np.float64(3.0)}
    base["solver"] = {"max_iterations": np.int64(7)}
    c = case_from_dict(base)
    assert c.initial.velocity == (1.0, 2.0) and c.initial.pressure == 3.0 and c.solver.max_iterations == 7
    assert case_from_dict(tomllib.loads(c.to_toml())) == c


def test_wall_patches_dedupe_and_empty_means_all(base):
    base["output"] = {"wall_patches": ["walls", "walls"]}
    assert case_from_dict(base).output.wall_patches == ("walls",)
    base["output"] = {"wall_patches": []}
    assert case_from_dict(base).output.wall_patches == ("lid", "walls")


def test_overrides_on_a_loaded_file(full_case_file):
    c = load_case(full_case_file)
    c2 = apply_overrides(
        c,
        [
            "solver.max_iterations=100",
            "boundary.bottom.velocity=[2.0, 0.0]",
            "model.turbulence=none",
            'boundary."far field".pressure=-1',
        ],
    )
    assert c2.solver.max_iterations == 100 and c2.boundaries["bottom"].velocity == (2.0, 0.0)
    assert c2.model.turbulence == "none" and c2.boundaries["far field"].pressure == -1.0
    assert c2.source == c.source and c.solver.max_iterations == 200
