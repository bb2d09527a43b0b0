"""Scalar boundary conditions on the boundary faces and the boundary face values they imply.

Boundary face ``i`` is mesh face ``mesh.n_internal_faces + i`` (faces are grouped patch by patch).
Two kinds:

* ``DIRICHLET`` (0): fixed value, ``value = phi_b``;
* ``NEUMANN`` (1): fixed outward normal gradient, ``value = d phi / d n`` with ``n`` pointing out of
  the domain (= out of the owner cell).
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

DIRICHLET = 0
NEUMANN = 1

#: accepted kind names in :func:`boundary_scalar` specifications.
KIND_NAMES = {"dirichlet": DIRICHLET, "neumann": NEUMANN}

#: a boundary value: a number, an array with one value per patch face, or ``f(x, y)`` evaluated
#: at the face centres.
PatchValue = float | np.ndarray | Callable[[np.ndarray, np.ndarray], np.ndarray]


@dataclass
class BoundaryScalar:
    """Kind (int8, 0 Dirichlet / 1 Neumann) and value of a scalar on every boundary face.

    The arrays are plain and mutable: a solver may update ``value`` in place between iterations.
    """

    kind: np.ndarray
    value: np.ndarray

    def __post_init__(self) -> None:
        self.kind = np.ascontiguousarray(self.kind, dtype=np.int8)
        self.value = np.ascontiguousarray(self.value, dtype=np.float64)
        if self.kind.ndim != 1 or self.kind.shape != self.value.shape:
            raise ValueError(
                f"BoundaryScalar: kind and value must be 1D arrays of equal length, "
                f"got shapes {self.kind.shape} and {self.value.shape}"
            )
        if np.any((self.kind != DIRICHLET) & (self.kind != NEUMANN)):
            raise ValueError("BoundaryScalar: kind must be 0 (Dirichlet) or 1 (Neumann) on every face")

    @property
    def n_faces(self) -> int:
        return len(self.kind)

    @property
    def is_dirichlet(self) -> np.ndarray:
        return self.kind == DIRICHLET

    def copy(self) -> BoundaryScalar:
        return BoundaryScalar(self.kind.copy(), self.value.copy())

    @classmethod
    def uniform(cls, mesh: Mesh, kind: int, value: float = 0.0) -> BoundaryScalar:
        """The same kind and value on every boundary face."""
        nb = mesh.n_boundary_faces
        return cls(np.full(nb, kind, dtype=np.int8), np.full(nb, float(value)))


def _patch_values(mesh: Mesh, geom: Geometry, patch, value: PatchValue, where: str) -> np.ndarray:
    n = patch.size
    if callable(value):
        xf = geom.face_centre[patch.start : patch.stop]
        try:
            v = np.asarray(value(xf[:, 0], xf[:, 1]), dtype=np.float64)
        except Exception as exc:
            raise CaseError(f"{where}: evaluating the boundary value function failed: {exc}") from exc
        v = np.broadcast_to(v, (n,)) if v.ndim == 0 else v
    else:
        try:
            v = np.asarray(value, dtype=np.float64)
        except (TypeError, ValueError) as exc:
            raise CaseError(f"{where}: the value {value!r} is not a number or an array of numbers") from exc
        if v.ndim == 0:
            v = np.full(n, float(v))
    if v.shape != (n,):
        raise CaseError(
            f"{where}: the value has shape {v.shape}, the patch has {n} faces; give one number, "
            f"an array of {n} values or a function f(x, y) of the face centres"
        )
    if not np.all(np.isfinite(v)):
        bad = int((~np.isfinite(v)).sum())
        raise CaseError(f"{where}: the boundary value is not finite on {bad} face(s)")
    return v


def set_patch(
    bc: BoundaryScalar,
    mesh: Mesh,
    geom: Geometry,
    patch: str,
    kind: str,
    value: PatchValue,
    name: str = "phi",
) -> None:
    """Set kind and value of one patch of ``bc`` in place (``kind`` 'dirichlet' or 'neumann')."""
    where = f"{mesh.source}: {name}, patch {patch!r}"
    k = KIND_NAMES.get(str(kind).lower())
    if k is None:
        raise CaseError(
            f"{where}: unknown boundary kind {kind!r}; use 'dirichlet' (fixed value) or "
            "'neumann' (fixed outward normal gradient)"
        )
    p = mesh.patch(patch)
    s = slice(p.start - mesh.n_internal_faces, p.stop - mesh.n_internal_faces)
    bc.value[s] = _patch_values(mesh, geom, p, value, where)
    bc.kind[s] = k


def boundary_scalar(
    mesh: Mesh, geom: Geometry, spec: Mapping[str, tuple[str, PatchValue]], name: str = "phi"
) -> BoundaryScalar:
    """Build a :class:`BoundaryScalar` from ``{patch: (kind, value)}`` covering every patch.

    >>> import numpy as np
    >>> from fvrans.mesh import Mesh, compute_geometry
    >>> m = Mesh.from_arrays(np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float), [[0, 1, 2, 3]],
    ...                      {"wall": [[0, 1], [1, 2]], "open": [[2, 3], [3, 0]]})
    >>> bc = boundary_scalar(m, compute_geometry(m), {"wall": ("dirichlet", 1.0), "open": ("neumann", 0.0)})
    >>> bc.kind.tolist(), bc.value.tolist()
    ([0, 0, 1, 1], [1.0, 1.0, 0.0, 0.0])
    """
    unknown = [k for k in spec if k not in mesh.patch_names]
    if unknown:
        raise CaseError(
            f"{mesh.source}: {name}: boundary condition given for {unknown[0]!r}, which is not a patch "
            f"of the mesh (patches: {', '.join(repr(p) for p in mesh.patch_names)}); fix the patch name"
        )
    missing = [p for p in mesh.patch_names if p not in spec]
    if missing:
        raise CaseError(
            f"{mesh.source}: {name}: no boundary condition for patch(es) "
            f"{', '.join(repr(p) for p in missing)}; give each patch a kind and a value"
        )
    bc = BoundaryScalar.uniform(mesh, DIRICHLET, 0.0)
    for patch, item in spec.items():
        try:
            kind, value = item
        except (TypeError, ValueError) as exc:
            raise CaseError(
                f"{mesh.source}: {name}, patch {patch!r}: expected (kind, value), got {item!r}"
            ) from exc
        set_patch(bc, mesh, geom, patch, kind, value, name=name)
    return bc


def boundary_face_values(
    mesh: Mesh,
    geom: Geometry,
    bc: BoundaryScalar,
    phi: np.ndarray,
    grad: np.ndarray | None = None,
    out: np.ndarray | None = None,
) -> np.ndarray:
    """phi on the boundary faces (n_boundary_faces,).

    Dirichlet: the given value. Neumann: phi_b = phi_O + g (d . n) + grad_O . (d - (d . n) n),
    d = x_f - x_O; the last (tangential) term only if the cell gradient ``grad`` is given. It
    makes phi_b exact for linear fields on skewed boundary cells.
    """
    nfi = mesh.n_internal_faces
    own = mesh.face_owner[nfi:]
    if out is None:
        out = np.empty(mesh.n_boundary_faces)
    neu = bc.kind == NEUMANN
    out[:] = bc.value
    if neu.any():
        d = geom.face_delta[nfi:][neu]
        n = geom.face_normal[nfi:][neu]
        dn = d[:, 0] * n[:, 0] + d[:, 1] * n[:, 1]
        o = own[neu]
        v = phi[o] + bc.value[neu] * dn
        if grad is not None:
            t = d - dn[:, None] * n
            v += grad[o, 0] * t[:, 0] + grad[o, 1] * t[:, 1]
        out[neu] = v
    return out
