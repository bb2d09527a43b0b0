"""Flow boundary conditions by patch, turned into per-boundary-face arrays for the kernels.

Kinds (integer codes shared with the solver kernels):

* ``wall`` (0): no-slip; u = u_wall (tangential motion only; constant, a formula or a Python
  function of the face centres, e.g. a rotating cylinder), zero mass flux.
* ``inflow-velocity`` (1): u = u_in (uniform, a table along a coordinate, a formula or a Python
  callable; formulas and callables are averaged over each face by Simpson's rule).
* ``outflow-pressure`` (2): fixed static pressure, zero-gradient velocity; reverse flow enters
  normal to the boundary.
* ``symmetry`` (3): zero normal velocity and zero shear.
* ``outer-flow`` (4): fixed pressure; velocity u_inf where the flux enters, zero gradient where
  it leaves.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from fvrans.case.formula import values_at
from fvrans.case.schema import DEFAULT_EDDY_VISCOSITY_RATIO, DEFAULT_TURBULENCE_INTENSITY, BoundarySpec
from fvrans.errors import CaseError
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

KIND_CODES = {"wall": 0, "inflow-velocity": 1, "outflow-pressure": 2, "symmetry": 3, "outer-flow": 4}
WALL, INLET, OUTLET, SYMMETRY, FREESTREAM = 0, 1, 2, 3, 4


@dataclass(frozen=True)
class FlowBoundary:
    """Per-boundary-face data (index b = face - n_internal_faces)."""

    kind: np.ndarray  # (nb,) int64 codes above
    velocity: np.ndarray  # (nb, 2) wall / inlet / freestream velocity
    pressure: np.ndarray  # (nb,) fixed static pressure (outlet, freestream)
    nu_tilde_ratio: np.ndarray  # (nb,) inflow nu_tilde / nu (inlet, freestream)
    patch_kind: dict[str, str]  # patch name -> kind name
    #: (nb,) inflow sqrt(2k/3) / |u| and nu_t / nu of two-equation models (inlet, freestream); None: defaults
    turbulence_intensity: np.ndarray | None = None
    eddy_viscosity_ratio: np.ndarray | None = None
    #: (nb,) inflow k and omega of an inlet profile that gives them (NaN elsewhere); None: no such profile
    inflow_k: np.ndarray | None = None
    inflow_omega: np.ndarray | None = None

    @property
    def has_fixed_pressure(self) -> bool:
        return bool(np.any((self.kind == OUTLET) | (self.kind == FREESTREAM)))


def _as_spec(spec: Any) -> BoundarySpec:
    """A case BoundarySpec as is; a plain mapping (driver scripts, tests) turned into one."""
    if isinstance(spec, Mapping):
        return BoundarySpec(**dict(spec))
    return spec


def _nu_tilde_ratio(spec: BoundarySpec, patch: str, xf: np.ndarray) -> np.ndarray:
    """Inflow nu_tilde / nu: the condition's value or profile column, 3 when it gives none."""
    if spec.nu_tilde_ratio is None and spec.profile is None:
        return np.full(len(xf), 3.0)
    return np.asarray(spec.nu_tilde_ratio_at(xf[:, 0], xf[:, 1], f"boundary.{patch}"), dtype=float)


def build_flow_boundary(mesh: Mesh, geom: Geometry, specs: Mapping[str, Any]) -> FlowBoundary:
    """Per-face boundary arrays from ``specs``: patch name -> a case BoundarySpec, or a dict of
    its fields (``kind``, ``velocity`` as a vector or a callable f(x, y) -> (u, v),
    ``pressure``, ``nu_tilde_ratio``; numbers or :class:`fvrans.case.formula.Formula` objects)."""
    nb = mesh.n_boundary_faces
    ni = mesh.n_internal_faces
    kind = np.full(nb, -1, dtype=np.int64)
    vel = np.zeros((nb, 2))
    pres = np.zeros(nb)
    nut = np.zeros(nb)
    tu = np.full(nb, DEFAULT_TURBULENCE_INTENSITY)
    ratio = np.full(nb, DEFAULT_EDDY_VISCOSITY_RATIO)
    patch_kind: dict[str, str] = {}
    k_in = np.full(nb, np.nan)
    w_in = np.full(nb, np.nan)
    for patch in mesh.patches:
        if patch.name not in specs:
            raise CaseError(
                f"{mesh.source}: patch {patch.name!r} has no boundary condition; add a "
                f"[boundary.{patch.name}] table with a 'kind'"
            )
        spec = _as_spec(specs[patch.name])
        kname = spec.kind
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
            v = spec.velocity
            if v is not None:
                if callable(v):  # a Python function or a formula of the face centres
                    uw = np.stack(spec.velocity_at(xf[:, 0], xf[:, 1], f"boundary.{patch.name}"), axis=1)
                else:
                    uw = np.broadcast_to(np.asarray(v, dtype=float), (patch.size, 2))
                n = geom.face_normal[patch.start : patch.stop]
                un = np.einsum("ij,ij->i", uw, n)
                vel[sl] = uw - un[:, None] * n  # tangential motion only
        elif code == INLET:
            where = f"boundary.{patch.name}"
            vel[sl] = np.stack(spec.velocity_at(xf[:, 0], xf[:, 1], where), axis=1)
            if spec.profile is None and callable(spec.velocity):
                # a formula or function: the face average by Simpson's rule, so that the inflow
                # rate is exact for profiles up to cubic (a parabola at its centre values carries
                # 1/(2 n^2) too much flow on n faces)
                fp = mesh.face_points[patch.start : patch.stop]
                pa, pb = mesh.points[fp[:, 0]], mesh.points[fp[:, 1]]
                ua = np.stack(spec.velocity_at(pa[:, 0], pa[:, 1], where), axis=1)
                ub = np.stack(spec.velocity_at(pb[:, 0], pb[:, 1], where), axis=1)
                vel[sl] = (ua + 4.0 * vel[sl] + ub) / 6.0
            nut[sl] = _nu_tilde_ratio(spec, patch.name, xf)
            tu[sl], ratio[sl] = _two_equation_inflow(spec, xf)
            if isinstance(spec, BoundarySpec) and spec.profile_columns and "k" in spec.profile_columns:
                k_in[sl] = spec.profile_column_at("k", xf[:, 0], xf[:, 1], f"boundary.{patch.name}")
                w_in[sl] = spec.profile_column_at("omega", xf[:, 0], xf[:, 1], f"boundary.{patch.name}")
        elif code == OUTLET:
            pres[sl] = values_at(0.0 if spec.pressure is None else spec.pressure, xf[:, 0], xf[:, 1], "pressure")
        elif code == FREESTREAM:
            v = spec.velocity
            if v is None:
                raise CaseError(f"boundary.{patch.name}: an outer-flow boundary needs 'velocity'")
            vel[sl] = np.asarray(v, dtype=float)
            pres[sl] = values_at(0.0 if spec.pressure is None else spec.pressure, xf[:, 0], xf[:, 1], "pressure")
            nut[sl] = _nu_tilde_ratio(spec, patch.name, xf)
            tu[sl], ratio[sl] = _two_equation_inflow(spec, xf)
    given = bool(np.any(np.isfinite(k_in)))
    return FlowBoundary(kind=kind, velocity=vel, pressure=pres, nu_tilde_ratio=nut, patch_kind=patch_kind,
                        turbulence_intensity=tu, eddy_viscosity_ratio=ratio, inflow_k=k_in if given else None,
                        inflow_omega=w_in if given else None)


def _two_equation_inflow(spec: BoundarySpec, xf: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(turbulence intensity, nu_t / nu) of an inflow condition at the face centres ``xf`` (numbers
    or formulas), defaults where it gives none."""
    tu = getattr(spec, "turbulence_intensity", None)
    ratio = getattr(spec, "eddy_viscosity_ratio", None)
    tu_f = values_at(DEFAULT_TURBULENCE_INTENSITY if tu is None else tu, xf[:, 0], xf[:, 1], "turbulence_intensity")
    ratio_f = values_at(DEFAULT_EDDY_VISCOSITY_RATIO if ratio is None else ratio, xf[:, 0], xf[:, 1],
                        "eddy_viscosity_ratio")
    if np.any(tu_f < 0) or np.any(ratio_f <= 0):
        raise CaseError(f"{getattr(tu, 'where', None) or getattr(ratio, 'where', 'boundary')}: the formula gives a "
                        "turbulence_intensity below 0 or an eddy_viscosity_ratio not above 0 on some face; "
                        "check it or the patch it is used on")
    return tu_f, ratio_f
