"""Cell-centred finite-volume operators on a :class:`fvrans.mesh.Mesh` with its
:class:`fvrans.mesh.Geometry`.

Conventions
-----------
* Faces: internal faces ``0 .. nfi-1`` (owner O, neighbour N), then boundary faces; boundary
  face ``i`` is face ``nfi + i``. Face fluxes are positive out of the owner.
* Boundary data: :class:`BoundaryScalar` (``kind`` 0 Dirichlet / 1 Neumann = outward normal
  gradient, ``value``), one entry per boundary face; build it per patch with
  :func:`boundary_scalar`; :func:`boundary_face_values` gives phi on the boundary faces.
* Gradients: ``g = LeastSquaresGradient(mesh, geom)(phi, phi_b)`` (default, exact for linear
  fields on any mesh) or :class:`GreenGaussGradient`; (n_cells, 2).
* Equations: a :class:`Coefficients` set ``diag[c] phi_c + sum_f off[f] phi_nb = source[c]``
  with ``off_owner[f]`` (owner row, column N) and ``off_neighbour[f]`` (neighbour row, column
  O). :func:`diffusion_coefficients` and :func:`convection_coefficients` ADD into a set;
  :class:`CsrAssembler` (built once per mesh) refills one ``csr_matrix`` in place.

Typical use (one outer iteration)::

    grad_op = LeastSquaresGradient(mesh, geom); asm = CsrAssembler(mesh)
    coeffs = Coefficients.zeros(mesh)
    phi_b = boundary_face_values(mesh, geom, bc, phi, g)
    g = grad_op(phi, phi_b)
    coeffs.clear()
    diffusion_coefficients(mesh, geom, face_diffusivity(mesh, geom, nu), bc, g, out=coeffs)
    convection_coefficients(mesh, geom, F, phi_b, "linear_upwind", g, out=coeffs)
    under_relax(coeffs, phi, 0.7)
    A, b = asm.assemble(coeffs)
"""

from fvrans.fv.assembly import Coefficients, CsrAssembler, under_relax
from fvrans.fv.boundary import (
    DIRICHLET,
    NEUMANN,
    BoundaryScalar,
    boundary_face_values,
    boundary_scalar,
    set_patch,
)
from fvrans.fv.convection import convection_coefficients
from fvrans.fv.diffusion import diffusion_coefficients, diffusion_system, face_diffusivity
from fvrans.fv.gradient import GreenGaussGradient, LeastSquaresGradient, gradient_operator, limit_gradient
from fvrans.fv.interpolation import interpolate_to_faces
from fvrans.fv.steady import SteadyScalarResult, solve_steady_scalar

__all__ = [
    "DIRICHLET",
    "NEUMANN",
    "BoundaryScalar",
    "Coefficients",
    "CsrAssembler",
    "GreenGaussGradient",
    "LeastSquaresGradient",
    "SteadyScalarResult",
    "boundary_face_values",
    "boundary_scalar",
    "convection_coefficients",
    "diffusion_coefficients",
    "diffusion_system",
    "face_diffusivity",
    "gradient_operator",
    "interpolate_to_faces",
    "limit_gradient",
    "set_patch",
    "solve_steady_scalar",
    "under_relax",
]
