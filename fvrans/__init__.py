"""fvrans: steady incompressible RANS on unstructured 2D meshes (cell-centred finite volumes)."""

from fvrans.errors import CaseError, DivergenceError, FvransError, MeshError
from fvrans.mesh import Geometry, Mesh, compute_geometry, read_mesh

__version__ = "0.1.0"

__all__ = [
    "CaseError",
    "DivergenceError",
    "FvransError",
    "Geometry",
    "Mesh",
    "MeshError",
    "compute_geometry",
    "read_mesh",
]
