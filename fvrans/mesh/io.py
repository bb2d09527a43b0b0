"""Reading meshes with meshio (Gmsh 2.2/4.1, VTU, ...) and writing them back (placeholder)."""

from __future__ import annotations

from pathlib import Path

from fvrans.mesh.mesh import Mesh


def read_mesh(path: str | Path) -> Mesh:
    raise NotImplementedError


def write_mesh(mesh: Mesh, path: str | Path) -> None:
    raise NotImplementedError
