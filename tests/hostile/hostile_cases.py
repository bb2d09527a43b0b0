"""Small cases for the hostile-input tests: a lid-driven box whose walls carry chosen patch names,
written as a mesh file of any format and a case file next to it.

Only walls are used (kind "wall", the lid moving along itself), so the cases need no inflow data.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from fvrans.case.tomlwrite import dumps
from fvrans.mesh import Mesh
from fvrans.mesh.io import write_mesh


def box_mesh(bottom_names: list[str], n: int | None = None) -> Mesh:
    """The unit square in n x n quads; the bottom edges split evenly into one patch per name of
    ``bottom_names``; 'lid' on top, 'left' and 'right' on the sides."""
    k = len(bottom_names)
    n = n or max(4, 2 * k)
    assert n % k == 0 or n >= k
    x = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(x, x)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)

    def pid(i: int, j: int) -> int:
        return j * (n + 1) + i

    cells = [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(n) for i in range(n)]
    bottom = [[pid(i, 0), pid(i + 1, 0)] for i in range(n)]
    groups = np.array_split(np.arange(n), k)
    boundary = {name: [bottom[i] for i in g] for name, g in zip(bottom_names, groups)}
    boundary["lid"] = [[pid(i, n), pid(i + 1, n)] for i in range(n)]
    boundary["left"] = [[pid(0, j), pid(0, j + 1)] for j in range(n)]
    boundary["right"] = [[pid(n, j), pid(n, j + 1)] for j in range(n)]
    return Mesh.from_arrays(pts, cells, boundary, source="box")


def box_case_data(mesh_file: str | Path, names: list[str], **extra) -> dict:
    """Case settings for :func:`box_mesh` (every named patch a wall; the lid moves)."""
    boundary = {name: {"kind": "wall"} for name in names}
    boundary.update({"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "left": {"kind": "wall"},
                     "right": {"kind": "wall"}})
    data = {"title": "box", "mesh": {"file": str(mesh_file)}, "fluid": {"density": 1.0, "viscosity": 0.05},
            "boundary": boundary, "solver": {"max_iterations": 3}}
    for k, v in extra.items():
        data.setdefault(k, {}).update(v)
    return data


def write_box_case(folder: Path, names: list[str], file_format: str = "gmsh22", **extra) -> Path:
    """Mesh file (``gmsh22``, ``gmsh41`` or ``vtu``) and case file ``case.toml`` in ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    suffix = ".vtu" if file_format == "vtu" else ".msh"
    mesh_file = folder / f"box{suffix}"
    write_mesh(box_mesh(names), mesh_file, file_format=file_format)
    case = folder / "case.toml"
    case.write_text(dumps(box_case_data(mesh_file.name, names, **extra)), encoding="utf-8")
    return case


def cavity_data(n: int = 8, tolerance: float = 1e-6, max_iterations: int = 3, **tables: dict) -> dict:
    """A lid-driven cavity on the ``cavity`` generator (n x n cells, Re 100) with its solver limits;
    ``tables`` are merged into the case's tables (e.g. ``model={"turbulence": ...}``)."""
    data = {"title": "cavity", "mesh": {"generator": "cavity", "parameters": {"n": n}},
            "fluid": {"density": 1.0, "viscosity": 0.01},
            "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
            "solver": {"tolerance": tolerance, "max_iterations": max_iterations}}
    for k, v in tables.items():
        data.setdefault(k, {}).update(v)
    return data


def write_cavity(path: Path, **kw) -> Path:
    """:func:`cavity_data` written as a case file at ``path``."""
    path.write_text(dumps(cavity_data(**kw)), encoding="utf-8")
    return path


def files_under(root: Path) -> set[Path]:
    """Every file and symbolic link below ``root``."""
    return {p for p in root.rglob("*") if p.is_file() or p.is_symlink()}
