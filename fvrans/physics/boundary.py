"""Flow boundary conditions by patch, turned into per-boundary-face arrays for the kernels.

Kinds (integer codes shared with the solver kernels):

* ``wall`` (0): no-slip; u = u_wall (tangential motion only), zero mass flux.
* ``velocity-inlet`` (1): u = u_in (uniform, a table along a coordinate, or a Python callable).
* ``pressure-outlet`` (2): fixed static pressure, zero-gradient velocity; reverse flow enters
  normal to the boundary.
* ``symmetry`` (3): zero normal velocity and zero shear.
* ``freestream`` (4): fixed pressure; velocity u_inf where the flux enters, zero gradient where
  it leaves.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

KIND_CODES = {"wall": 0, "velocity-inlet": 1, "pressure-outlet": 2, "symmetry": 3, "freestream": 4}
WALL, INLET, OUTLET, SYMMETRY, FREESTREAM = 0, 1, 2, 3, 4


@dataclass(frozen=True)
class FlowBoundary:
    """Per-boundary-face data (index b = face - n_internal_faces)."""

    kind: np.ndarray  # (nb,) int64 codes above
    velocity: np.ndarray  # (nb, 2) wall / inlet / freestream velocity
    pressure: np.ndarray  # (nb,) fixed static pressure (outlet, freestream)
    nut_ratio: np.ndarray  # (nb,) inflow nu_tilde / nu (inlet, freestream)
    patch_kind: dict[str, str]  # patch name -> kind name

    @property
    def has_fixed_pressure(self) -> bool:
        return bool(np.any((self.kind == OUTLET) | (self.kind == FREESTREAM)))


def _get(spec: Any, key: str, default=None):
    if isinstance(spec, Mapping):
        return spec.get(key, default)
    return getattr(spec, key, default)


def _profile_velocity(spec: Any, patch: str, xf: np.ndarray) -> np.ndarray:
    """Velocity of an inlet: a case BoundarySpec evaluates itself (uniform, CSV profile or
    callable); plain mappings may give a callable f(x, y) -> (u, v), a table or a vector."""
    if hasattr(spec, "velocity_at"):
        u, v = spec.velocity_at(xf[:, 0], xf[:, 1], f"boundary.{patch}")
        return np.stack([u, v], axis=1)
    vel = _get(spec, "velocity")
    if callable(vel):
        try:
            u, v = vel(xf[:, 0].copy(), xf[:, 1].copy())
        except Exception as exc:  # noqa: BLE001 - user code; report it with the patch name
            raise CaseError(f"boundary.{patch}.velocity: the Python callable failed: {exc}") from exc
        out = np.empty((len(xf), 2))
        out[:, 0] = np.broadcast_to(np.asarray(u, dtype=float), (len(xf),))
        out[:, 1] = np.broadcast_to(np.asarray(v, dtype=float), (len(xf),))
        if not np.all(np.isfinite(out)):
            raise CaseError(f"boundary.{patch}.velocity: the callable returned non-finite values")
        return out
    table = _get(spec, "profile_table")
    if table is not None:
        coord, uu, vv = table
        axis = _get(spec, "profile_axis", 1)
        s = xf[:, axis]
        return np.stack([np.interp(s, coord, uu), np.interp(s, coord, vv)], axis=1)
    if vel is None:
        raise CaseError(f"boundary.{patch}: a velocity inlet needs 'velocity' (or 'profile')")
    return np.broadcast_to(np.asarray(vel, dtype=float), (len(xf), 2)).copy()


def _nut_ratio(spec: Any, patch: str, xf: np.ndarray) -> np.ndarray:
    if hasattr(spec, "nut_ratio_at") and (spec.nut_ratio is not None or spec.profile is not None):
        try:
            return np.asarray(spec.nut_ratio_at(xf[:, 0], xf[:, 1], f"boundary.{patch}"), dtype=float)
        except CaseError:
            return np.full(len(xf), 3.0)
    value = _get(spec, "nut_ratio", 3.0)
    return np.full(len(xf), 3.0 if value is None else float(value))


def build_flow_boundary(
    mesh: Mesh, geom: Geometry, specs: Mapping[str, Any], callable_ok: bool = True
) -> FlowBoundary:
    """Per-face boundary arrays from ``specs`` (patch name -> object or dict with ``kind``,
    ``velocity``, ``pressure``, ``nut_ratio``; inlets may carry ``profile_table`` =
    (coordinate, u, v) with ``profile_axis`` 0 or 1)."""
    nb = mesh.n_boundary_faces
    ni = mesh.n_internal_faces
    kind = np.full(nb, -1, dtype=np.int64)
    vel = np.zeros((nb, 2))
    pres = np.zeros(nb)
    nut = np.zeros(nb)
    patch_kind: dict[str, str] = {}
    for patch in mesh.patches:
        if patch.name not in specs:
            raise CaseError(
                f"{mesh.source}: patch {patch.name!r} has no boundary condition; add a "
                f"[boundary.{patch.name}] table with a 'kind'"
            )
        spec = specs[patch.name]
        kname = _get(spec, "kind")
        if kname not in KIND_CODES:
            raise CaseError(
                f"boundary.{patch.name}.kind = {kname!r} is not a known kind; use one of {sorted(KIND_CODES)}"
            )
        sl = slice(patch.start - ni, patch.stop - ni)
        code = KIND_CODES[kname]
        kind[sl] = code
        patch_kind[patch.name] = kname
        xf = geom.face_centre[patch.start : patch.stop]
        if code == WALL:
            v = _get(spec, "velocity")
            if v is not None:
                uw = np.broadcast_to(np.asarray(v, dtype=float), (patch.size, 2))
                n = geom.face_normal[patch.start : patch.stop]
                un = np.einsum("ij,ij->i", uw, n)
                vel[sl] = uw - un[:, None] * n  # tangential motion only
        elif code == INLET:
            vel[sl] = _profile_velocity(spec, patch.name, xf)
            nut[sl] = _nut_ratio(spec, patch.name, xf)
        elif code == OUTLET:
            pres[sl] = float(_get(spec, "pressure", 0.0) or 0.0)
        elif code == FREESTREAM:
            v = _get(spec, "velocity")
            if v is None:
                raise CaseError(f"boundary.{patch.name}: a freestream boundary needs 'velocity'")
            vel[sl] = np.asarray(v, dtype=float)
            pres[sl] = float(_get(spec, "pressure", 0.0) or 0.0)
            nut[sl] = _nut_ratio(spec, patch.name, xf)
    return FlowBoundary(kind=kind, velocity=vel, pressure=pres, nut_ratio=nut, patch_kind=patch_kind)


VelocityCallable = Callable[[np.ndarray, np.ndarray], tuple[np.ndarray, np.ndarray]]
