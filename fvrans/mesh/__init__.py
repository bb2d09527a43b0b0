"""Mesh layer: the Mesh object, readers/writers, geometry, quality checks, generators."""

from fvrans.mesh.geometry import Geometry, compute_geometry
from fvrans.mesh.io import read_mesh, write_mesh
from fvrans.mesh.mesh import Mesh, Patch, build_mesh

__all__ = ["Geometry", "Mesh", "Patch", "build_mesh", "compute_geometry", "read_mesh", "write_mesh"]
