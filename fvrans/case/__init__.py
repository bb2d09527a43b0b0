"""Case files: TOML settings of a run, validated into a frozen :class:`Case`.

>>> from fvrans.case import case_from_dict
>>> case = case_from_dict({
...     "title": "Lid-driven cavity",
...     "mesh": {"generator": "cavity", "parameters": {"n": 32}},
...     "fluid": {"density": 1.0, "viscosity": 0.01},
...     "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]},
...                  "walls": {"kind": "wall"}},
... })
>>> case.solver.coupling, case.solver.relax_pressure, case.output.wall_patches
('simplec', 1.0, ('lid', 'walls'))
>>> case.set("solver.coupling", "simple").solver.relax_pressure
0.3
>>> case_from_dict(case.to_dict()) == case
True
"""

from fvrans.case.build import build_case_mesh, check_case_against_mesh, generator_names
from fvrans.case.load import apply_overrides, load_case, parse_override, read_toml
from fvrans.case.schema import (
    BOUNDARY_KINDS,
    BoundarySpec,
    Case,
    Fluid,
    InitialState,
    MeshSettings,
    ModelSettings,
    OutputSettings,
    ProbeLine,
    SolverSettings,
)
from fvrans.case.validate import case_from_dict

__all__ = [
    "BOUNDARY_KINDS",
    "BoundarySpec",
    "Case",
    "Fluid",
    "InitialState",
    "MeshSettings",
    "ModelSettings",
    "OutputSettings",
    "ProbeLine",
    "SolverSettings",
    "apply_overrides",
    "build_case_mesh",
    "case_from_dict",
    "check_case_against_mesh",
    "generator_names",
    "load_case",
    "parse_override",
    "read_toml",
]
