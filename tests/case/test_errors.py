"""Every class of bad case input gives a CaseError naming the file, the dotted key and the fix."""

from __future__ import annotations

from pathlib import Path

import pytest

from fvrans.case import case_from_dict, load_case


def _set(path: str, value):
    """A mutation of the case dict: set (or with value ..., delete) a dotted key."""

    def apply(d: dict) -> None:
        *head, last = path.split(".")
        node = d
        for p in head:
            node = node.setdefault(p, {})
        if value is ...:
            del node[last]
        else:
            node[last] = value

    return apply


# (mutation, substrings the message must contain)
CASES = {
    # -- unknown keys: name the key, suggest the closest, list the allowed ones --
    "unknown solver key": (
        _set("solver.relax_velocty", 0.5),
        [
            "solver.relax_velocty",
            "unknown key",
            "did you mean 'relax_velocity'",
            "relax_pressure",
            "checkpoint_every",
        ],
    ),
    "unknown top-level table": (
        _set("boundaries", {}),
        ["boundaries", "did you mean 'boundary'", "solver, output"],
    ),
    "unknown mesh key": (
        _set("mesh.generater", "x"),
        ["mesh.generater", "did you mean 'generator'", "renumber"],
    ),
    "unknown output key": (
        _set("output.wall_patch", []),
        ["output.wall_patch", "did you mean 'wall_patches'"],
    ),
    "key of another boundary kind": (
        _set("boundary.lid.pressure", 1.0),
        ["boundary.lid.pressure", "kind 'wall'", "'outflow-pressure'", "takes: kind, velocity"],
    ),
    "misspelt boundary key": (
        _set("boundary.lid.velocty", [1, 0]),
        ["boundary.lid.velocty", "did you mean 'velocity'"],
    ),
    # -- missing required keys and tables --
    "missing mesh table": (_set("mesh", ...), ["mesh", "missing required table", "file =", "generator ="]),
    "missing fluid table": (_set("fluid", ...), ["fluid", "missing required table", "viscosity"]),
    "missing viscosity": (
        _set("fluid.viscosity", ...),
        ["fluid.viscosity", "missing required key", "viscosity ="],
    ),
    "missing density": (_set("fluid.density", ...), ["fluid.density", "missing required key", "density ="]),
    "missing boundary table": (
        _set("boundary", ...),
        ["boundary", "missing required table", "[boundary.walls]"],
    ),
    "empty boundary table": (_set("boundary", {}), ["boundary", "is empty", 'kind = "wall"']),
    "missing kind": (
        _set("boundary.lid.kind", ...),
        ["boundary.lid.kind", "missing required key", "'inflow-velocity'", "'outer-flow'"],
    ),
    "freestream without velocity": (
        _set("boundary.far", {"kind": "outer-flow"}),
        ["boundary.far.velocity", "missing required key", "velocity = [u, v]"],
    ),
    "inlet without velocity or profile": (
        _set("boundary.in", {"kind": "inflow-velocity"}),
        ["boundary.in", "velocity = [u, v]", "profile ="],
    ),
    "inlet with velocity and profile": (
        _set("boundary.in", {"kind": "inflow-velocity", "velocity": [1, 0], "profile": "p.csv"}),
        ["boundary.in", "either velocity or profile, not both"],
    ),
    "profile_columns without profile": (
        _set("boundary.in", {"kind": "inflow-velocity", "velocity": [1, 0], "profile_columns": {"u": "U"}}),
        ["boundary.in.profile_columns", "only used with profile"],
    ),
    # -- wrong types --
    "string for number": (
        _set("solver.relax_velocity", "abc"),
        ["solver.relax_velocity", "must be a number", "got str 'abc'"],
    ),
    "quoted number": (_set("fluid.density", "1.0"), ["fluid.density", "got str '1.0'", "remove the quotes"]),
    "bool for number": (
        _set("initial.pressure", True),
        ["initial.pressure", "got bool true", "not a number"],
    ),
    "bool for integer": (_set("solver.max_iterations", False), ["solver.max_iterations", "got bool false"]),
    "fraction for integer": (
        _set("solver.momentum_sweeps", 2.5),
        ["solver.momentum_sweeps", "must be an integer", "got float 2.5"],
    ),
    "short vector": (_set("initial.velocity", [1.0]), ["initial.velocity", "2 numbers", "1 item(s)"]),
    "vector of strings": (
        _set("boundary.lid.velocity", ["1", 0]),
        ["boundary.lid.velocity", "item 1", "got str '1'"],
    ),
    "scalar for vector": (
        _set("boundary.lid.velocity", 1.0),
        ["boundary.lid.velocity", "2 numbers", "float 1.0"],
    ),
    "string for bool": (
        _set("output.write_fields", "true"),
        ["output.write_fields", "true or false without quotes"],
    ),
    "number for string": (_set("title", 3), ["title", "must be a string", "got int 3"]),
    "value for table": (_set("solver", 3), ["solver", "must be a table", "got int 3"]),
    "boundary not a table": (
        _set("boundary.lid", "wall"),
        ["boundary.lid", "must be a table", "[boundary.<patch name>]"],
    ),
    "wall_patches not a list": (
        _set("output.wall_patches", "lid"),
        ["output.wall_patches", "list of patch names"],
    ),
    "non-finite number": (_set("initial.pressure", float("nan")), ["initial.pressure", "finite"]),
    # -- enum values: list the allowed ones --
    "bad turbulence model": (
        _set("model.turbulence", "k-omega"),
        ["model.turbulence", "'k-omega'", "'none', 'spalart-allmaras'"],
    ),
    "capitalised turbulence model": (
        _set("model.turbulence", "Spalart-Allmaras"),
        ["did you mean 'spalart-allmaras'"],
    ),
    "bad SA variant": (_set("model.sa_variant", "noft2"), ["model.sa_variant", "'standard', 'no-ft2'"]),
    "bad boundary kind": (
        _set("boundary.lid.kind", "inlet"),
        ["boundary.lid.kind", "'inlet'", "'wall', 'inflow-velocity', 'outflow-pressure'"],
    ),
    "bad coupling": (_set("solver.coupling", "piso"), ["solver.coupling", "'simple', 'simplec'"]),
    "bad convection": (
        _set("solver.convection", "central"),
        ["solver.convection", "'upwind', 'linear-upwind'"],
    ),
    "bad gradient": (_set("solver.gradient", "lsq"), ["solver.gradient", "'least-squares', 'green-gauss'"]),
    "bad limiter": (
        _set("solver.limiter", "minmod"),
        ["solver.limiter", "'none', 'venkatakrishnan', 'barth-jespersen'"],
    ),
    "number for enum": (_set("solver.limiter", 1), ["solver.limiter", "quoted string", "got int 1"]),
    # -- non-physical values --
    "negative viscosity": (_set("fluid.viscosity", -0.01), ["fluid.viscosity", "> 0", "got -0.01"]),
    "zero viscosity": (_set("fluid.viscosity", 0), ["fluid.viscosity", "> 0", "got 0.0"]),
    "zero density": (_set("fluid.density", 0.0), ["fluid.density", "> 0"]),
    "negative density": (_set("fluid.density", -1.0), ["fluid.density", "> 0"]),
    "relaxation above 1": (
        _set("solver.relax_velocity", 1.5),
        ["solver.relax_velocity", "(0, 1]", "got 1.5"],
    ),
    "zero relaxation": (_set("solver.relax_pressure", 0.0), ["solver.relax_pressure", "(0, 1]"]),
    "negative turbulence relaxation": (
        _set("solver.relax_turbulence", -0.2),
        ["solver.relax_turbulence", "(0, 1]"],
    ),
    "negative initial nu_tilde_ratio": (_set("initial.nu_tilde_ratio", -1.0), ["initial.nu_tilde_ratio", ">= 0"]),
    "negative inlet nu_tilde_ratio": (
        _set("boundary.in", {"kind": "inflow-velocity", "velocity": [1, 0], "nu_tilde_ratio": -3}),
        ["boundary.in.nu_tilde_ratio", ">= 0"],
    ),
    "negative freestream nu_tilde_ratio": (
        _set("boundary.far", {"kind": "outer-flow", "velocity": [1, 0], "nu_tilde_ratio": -1}),
        ["boundary.far.nu_tilde_ratio", ">= 0"],
    ),
    "zero tolerance": (_set("solver.tolerance", 0.0), ["solver.tolerance", "> 0"]),
    "pressure tolerance of 1": (
        _set("solver.pressure_tolerance", 1.0),
        ["solver.pressure_tolerance", "(0, 1)"],
    ),
    "negative momentum tolerance": (
        _set("solver.momentum_tolerance", -0.1),
        ["solver.momentum_tolerance", "(0, 1)"],
    ),
    "zero iterations": (_set("solver.max_iterations", 0), ["solver.max_iterations", ">= 1"]),
    "turbulence tolerance of 1": (
        _set("solver.turbulence_tolerance", 1.0),
        ["solver.turbulence_tolerance", "(0, 1)"],
    ),
    "zero turbulence iterations": (
        _set("solver.turbulence_max_iterations", 0),
        ["solver.turbulence_max_iterations", ">= 1"],
    ),
    "unknown turbulence solver": (
        _set("solver.turbulence_solver", "jacobi"),
        ["solver.turbulence_solver", "gauss-seidel"],
    ),
    "zero sweeps": (_set("solver.momentum_sweeps", 0), ["solver.momentum_sweeps", ">= 1"]),
    "zero AMG rebuild interval": (_set("solver.amg_rebuild_every", 0), ["solver.amg_rebuild_every", ">= 1"]),
    "divergence factor 1": (_set("solver.divergence_factor", 1.0), ["solver.divergence_factor", "> 1"]),
    "negative checkpoint interval": (
        _set("solver.checkpoint_every", -1),
        ["solver.checkpoint_every", ">= 0"],
    ),
    "negative turbulence CFL": (_set("solver.turbulence_cfl", -1.0), ["solver.turbulence_cfl", ">= 0"]),
    "conservative start not a flag": (_set("solver.conservative_start", "yes"), ["solver.conservative_start"]),
    "negative thread count": (_set("solver.threads", -1), ["solver.threads", ">= 0"]),
    "zero reference velocity": (_set("output.reference_velocity", 0.0), ["output.reference_velocity", "> 0"]),
    "negative reference length": (_set("output.reference_length", -1.0), ["output.reference_length", "> 0"]),
    # -- mesh source --
    "both mesh file and generator": (
        _set("mesh.file", "m.msh"),
        ["mesh", "either file or generator, not both"],
    ),
    "neither mesh file nor generator": (
        _set("mesh", {"renumber": True}),
        ["mesh", "needs file =", "generator ="],
    ),
    "parameters with a mesh file": (
        _set("mesh", {"file": "m.msh", "parameters": {"n": 4}}),
        ["mesh.parameters", "only used with mesh.generator"],
    ),
    "generator name not a name": (
        _set("mesh.generator", "my cavity"),
        ["mesh.generator", "not a generator name"],
    ),
    "parameters not a table": (_set("mesh.parameters", [1, 2]), ["mesh.parameters", "must be a table"]),
    # -- output patches --
    "wall patch without condition": (
        _set("output.wall_patches", ["lidd"]),
        ["output.wall_patches", "'lidd'", "did you mean 'lid'", "'lid', 'walls'"],
    ),
}


@pytest.mark.parametrize("name", list(CASES))
def test_in_memory_error_names_key_and_fix(name, base, err, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "m.msh").write_text("x")
    (tmp_path / "p.csv").write_text("y,u,v\n0,0,0\n1,1,0\n")
    mutate, expected = CASES[name]
    mutate(base)
    msg = err(case_from_dict, base)
    assert msg.startswith("<in memory>: "), msg
    for text in expected:
        assert text in msg, f"{text!r} not in: {msg}"


def test_error_names_the_case_file(base, err, tmp_path):
    base["solver"] = {"relax_velocity": 2.0}
    src = tmp_path / "cases" / "c.toml"
    msg = err(case_from_dict, base, source=src)
    assert msg.startswith(f"{src}: solver.relax_velocity: ")


def test_wall_patch_of_another_kind(base, err):
    base["boundary"]["out"] = {"kind": "outflow-pressure"}
    base["output"] = {"wall_patches": ["out"]}
    msg = err(case_from_dict, base)
    assert "output.wall_patches" in msg and "'outflow-pressure'" in msg and 'kind = "wall"' in msg


def test_quoted_patch_name_in_message(base, err):
    base["boundary"]["outer wall"] = {"kind": "wall", "velocity": [1, 2, 3]}
    assert 'boundary."outer wall".velocity' in err(case_from_dict, base)


def test_missing_mesh_file_names_resolved_path(base, err, tmp_path):
    base["mesh"] = {"file": "../meshes/none.msh"}
    src = tmp_path / "cases" / "c.toml"
    msg = err(case_from_dict, base, source=src)
    resolved = (tmp_path / "meshes" / "none.msh").resolve()
    assert msg.startswith(f"{src}: mesh.file: ") and str(resolved) in msg and "does not exist" in msg
    assert str((tmp_path / "cases").resolve()) in msg  # where relative paths start


def test_mesh_file_is_a_directory(base, err, tmp_path):
    base["mesh"] = {"file": str(tmp_path)}
    assert "is a directory" in err(case_from_dict, base)


# -- inlet profiles ---------------------------------------------------------------------------
def _inlet(tmp_path: Path, base: dict, csv_text: str | None, **keys) -> dict:
    if csv_text is not None:
        (tmp_path / "p.csv").write_text(csv_text)
    base["boundary"]["in"] = {"kind": "inflow-velocity", "profile": "p.csv", **keys}
    return base


PROFILE_ERRORS = {
    "missing file": (None, {}, ["boundary.in.profile", "p.csv", "does not exist"]),
    "missing default column": (
        "y,U,V\n0,0,0\n1,1,0\n",
        {},
        ["boundary.in.profile", "no column 'u'", "'y', 'U', 'V'", "profile_columns"],
    ),
    "missing named column": (
        "y,u,v\n0,0,0\n1,1,0\n",
        {"profile_columns": {"v": "vel_y"}},
        ["no column 'vel_y'", "profile_columns.v names it"],
    ),
    "missing named nu_tilde_ratio column": (
        "y,u,v\n0,0,0\n1,1,0\n",
        {"profile_columns": {"nu_tilde_ratio": "nr"}},
        ["no column 'nr'"],
    ),
    "not a number": ("y,u,v\n0,0,0\n1,abc,0\n", {}, ["boundary.in.profile", "line 3", "column 2", "not a number"]),
    "no header": ("0,0,0\n1,1,0\n", {}, ["line 1", "header line"]),
    "ragged row": ("y,u,v\n0,0\n1,1,0\n", {}, ["line 2", "2 value(s)", "3 columns"]),
    "one row": ("y,u,v\n0,0,0\n", {}, ["1 data row(s)", "at least two"]),
    "repeated coordinate": ("y,u,v\n0,0,0\n0,1,0\n", {}, ["y = 0 twice"]),
    "coordinate not an axis": (
        "h,u,v\n0,0,0\n1,1,0\n",
        {"profile_columns": {"coordinate": "h"}},
        ["boundary.in.profile_columns.coordinate", "'x' or 'y'"],
    ),
    "unknown column key": (
        "y,u,v\n0,0,0\n1,1,0\n",
        {"profile_columns": {"w": "w"}},
        ["boundary.in.profile_columns.w", "unknown key", "coordinate, u, v, nu_tilde_ratio"],
    ),
    "negative nu_tilde_ratio column": (
        "y,u,v,nu_tilde_ratio\n0,0,0,1\n1,1,0,-1\n", {}, ["negative", "'nu_tilde_ratio'"]
    ),
    "nu_tilde_ratio twice": (
        "y,u,v,nu_tilde_ratio\n0,0,0,1\n1,1,0,1\n",
        {"nu_tilde_ratio": 2.0},
        ["boundary.in.nu_tilde_ratio", "already gives nu_tilde_ratio"],
    ),
    # one name, one meaning (issue #12 item 4): nut_ratio could be either ratio
    "ambiguous nut_ratio column": (
        "y,u,v,nut_ratio\n0,0,0,1\n1,1,0,1\n",
        {},
        ["boundary.in.profile", "p.csv", "'nut_ratio'", "could mean", "rename it to 'nu_tilde_ratio'",
         "profile_columns = { nu_tilde_ratio"],
    ),
    "both ratios": (
        "y,u,v,nu_tilde_ratio,eddy_viscosity_ratio\n0,0,0,1,1\n1,1,0,1,1\n",
        {},
        ["boundary.in.profile", "both 'nu_tilde_ratio'", "'eddy_viscosity_ratio'", "profile_columns"],
    ),
    "eddy-viscosity ratio only": (
        "y,u,v,eddy_viscosity_ratio\n0,0,0,1\n1,1,0,1\n",
        {},
        ["boundary.in.profile", "'eddy_viscosity_ratio' (nu_t / nu", "add a column nu_tilde_ratio",
         "constant nu_tilde_ratio"],
    ),
    "eddy-viscosity ratio named as the input": (
        "y,u,v,eddy_viscosity_ratio\n0,0,0,1\n1,1,0,1\n",
        {"profile_columns": {"nu_tilde_ratio": "eddy_viscosity_ratio"}},
        ["boundary.in.profile_columns.nu_tilde_ratio", "holds nu_t / nu"],
    ),
}


@pytest.mark.parametrize("name", list(PROFILE_ERRORS))
def test_profile_errors(name, base, err, tmp_path):
    text, keys, expected = PROFILE_ERRORS[name]
    src = tmp_path / "case.toml"
    msg = err(case_from_dict, _inlet(tmp_path, base, text, **keys), source=src)
    assert msg.startswith(f"{src}: boundary.in"), msg
    for t in expected:
        assert t in msg, f"{t!r} not in: {msg}"


# -- the TOML file itself -----------------------------------------------------------------------
def test_toml_syntax_error_gives_file_line_column(tmp_path, err):
    f = tmp_path / "bad.toml"
    f.write_text('[mesh]\ngenerator = "cavity"\n[fluid]\ndensity = 1.0\nviscosity = abc\n')
    msg = err(load_case, f)
    assert msg.startswith(f"{f}: not valid TOML")
    assert "line 5, column 13" in msg  # as tomllib reports it
    assert "viscosity = abc" in msg and "strings need quotes" in msg


def test_toml_duplicate_key(tmp_path, err):
    f = tmp_path / "dup.toml"
    f.write_text("[solver]\ntolerance = 1e-6\ntolerance = 1e-7\n")
    msg = err(load_case, f)
    assert str(f) in msg and "line 3" in msg and "given twice" in msg


def test_case_file_not_found(tmp_path, err):
    msg = err(load_case, tmp_path / "nope.toml")
    assert "nope.toml" in msg and "not found" in msg


def test_errors_in_a_file_name_the_file(tmp_path, err):
    f = tmp_path / "c.toml"
    f.write_text(
        '[mesh]\ngenerator = "cavity"\n[fluid]\ndensity = 1.0\nviscosity = 0.01\n'
        '[boundary.walls]\nkind = "wal"\n'
    )
    msg = err(load_case, f)
    assert msg.startswith(f"{f}: boundary.walls.kind: 'wal'") and "did you mean 'wall'" in msg
