"""Forces and moments of bodies: per wall patch and per named group of patches, in the frame of the
free stream, and the reference values of the coefficients.

For a wall face of length |S| with centre x_f, outward normal n_out (out of the fluid, into the
wall), wall pressure p_w and viscous traction tau_v = mu (G + G^T) . n (``WallData.traction``), the
fluid exerts per unit depth

    dF = [(p_w - p_ref) n_out + tau_v] |S|,    dM = (x_f - x_c) x dF = (x - x_c) dF_y - (y - y_c) dF_x,

M the moment about the moment centre x_c, positive counter-clockwise (about +z with x to the right
and y up; for a free stream along +x a nose-up pitching moment is negative). With the free-stream
direction e (unit) and l = e rotated by +90 degrees:

    drag D = F . e,  lift L = F . l,  C_D = D / (q l_ref),  C_L = L / (q l_ref),
    C_x = F_x / (q l_ref),  C_y = F_y / (q l_ref),  C_M = M / (q l_ref^2),  q = rho_ref U_ref^2 / 2,

each also split into its pressure and viscous parts. In 2D there is no side force across the
plane; C_x and C_y are the components along the mesh axes. Per unit depth, l_ref is the reference
length (chord, diameter) and the reference area l_ref x 1.

Reference values: ``U_ref`` defaults to the inflow's speed (:func:`inflow_reference`: the free-stream
velocity, or the mean normal velocity through the velocity inlets, flow rate / inlet length), and
e to its direction, so the coefficients of a run follow its own inflow (a sweep over the inlet
speed gets the coefficients of each run).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.geometry import Geometry
from fvrans.physics.boundary import FREESTREAM, INLET, FlowBoundary
from fvrans.post.wall import WallData


@dataclass(frozen=True)
class PatchForces:
    """Force and moment per unit depth exerted by the fluid on a wall patch (or a group of
    patches), split into pressure and viscous parts; formulas in the module docstring."""

    patch: str
    pressure: tuple[float, float]
    viscous: tuple[float, float]
    q_ref: float
    l_ref: float
    flow_direction: tuple[float, float] = (1.0, 0.0)
    moment_pressure: float = 0.0
    moment_viscous: float = 0.0
    moment_centre: tuple[float, float] = (0.0, 0.0)

    @property
    def total(self) -> tuple[float, float]:
        return (self.pressure[0] + self.viscous[0], self.pressure[1] + self.viscous[1])

    @property
    def moment(self) -> float:
        return self.moment_pressure + self.moment_viscous

    def _parts(self) -> tuple[tuple[str, tuple[float, float], float], ...]:
        return (("", self.total, self.moment), ("_pressure", self.pressure, self.moment_pressure),
                ("_viscous", self.viscous, self.moment_viscous))

    def coefficients(self) -> dict[str, float]:
        """Cx, Cy, Cd, Cl and Cm, each total and its pressure and viscous parts."""
        s = 1.0 / (self.q_ref * self.l_ref)
        ex, ey = self.flow_direction
        out: dict[str, float] = {}
        for part, (fx, fy), m in self._parts():
            out["Cx" + part] = fx * s
            out["Cy" + part] = fy * s
            out["Cd" + part] = (fx * ex + fy * ey) * s
            out["Cl" + part] = (-fx * ey + fy * ex) * s
            out["Cm" + part] = m * s / self.l_ref
        return out

    def as_dict(self) -> dict[str, float]:
        """Forces, moments and coefficients as plain floats (for summary.json): ``Fx``, ``Fy``,
        ``drag``, ``lift``, ``moment`` and the coefficients, each with ``_pressure`` and
        ``_viscous`` parts."""
        ex, ey = self.flow_direction
        d: dict[str, float] = {}
        for part, (fx, fy), m in self._parts():
            d["Fx" + part] = fx
            d["Fy" + part] = fy
            d["drag" + part] = fx * ex + fy * ey
            d["lift" + part] = -fx * ey + fy * ex
            d["moment" + part] = m
        d.update(self.coefficients())
        return {k: float(v) for k, v in d.items()}


def check_direction(direction: Sequence[float], what: str = "the flow direction") -> tuple[float, float]:
    """A unit vector along ``direction`` (CaseError for a zero or non-finite one)."""
    e = np.asarray(direction, dtype=float)
    if e.shape != (2,) or not np.all(np.isfinite(e)) or np.hypot(*e) == 0.0:
        raise CaseError(f"{what} must be a non-zero 2-vector, got {direction!r}")
    e = e / np.hypot(*e)
    return (float(e[0]), float(e[1]))


def patch_forces(
    wall: WallData,
    l_ref: float = 1.0,
    flow_direction: Sequence[float] = (1.0, 0.0),
    moment_centre: Sequence[float] = (0.0, 0.0),
) -> PatchForces:
    """Force and moment per unit depth on a wall (module docstring).

    n_out (= -``wall.normal``) points from the fluid into the wall, so pressure pushes the wall
    along n_out. Subtracting p_ref changes nothing on a closed body (sum n_out |S_f| = 0) and
    makes open walls independent of the pressure level.
    """
    if not np.isfinite(l_ref) or l_ref <= 0:
        raise CaseError(f"the reference length must be a positive number, got {l_ref!r}")
    e = check_direction(flow_direction)
    c = np.asarray(moment_centre, dtype=float)
    if c.shape != (2,) or not np.all(np.isfinite(c)):
        raise CaseError(f"the moment centre must be two finite numbers [x, y], got {moment_centre!r}")
    n_out = -wall.normal
    L = wall.length
    dfp = ((wall.p_wall - wall.p_ref) * L)[:, None] * n_out
    dfv = wall.traction * L[:, None]
    rx, ry = wall.x - c[0], wall.y - c[1]
    fp, fv = dfp.sum(axis=0), dfv.sum(axis=0)
    return PatchForces(
        patch=wall.patch,
        pressure=(float(fp[0]), float(fp[1])),
        viscous=(float(fv[0]), float(fv[1])),
        q_ref=wall.q_ref,
        l_ref=float(l_ref),
        flow_direction=e,
        moment_pressure=float(np.sum(rx * dfp[:, 1] - ry * dfp[:, 0])),
        moment_viscous=float(np.sum(rx * dfv[:, 1] - ry * dfv[:, 0])),
        moment_centre=(float(c[0]), float(c[1])),
    )


def group_forces(name: str, parts: Sequence[PatchForces]) -> PatchForces:
    """The sum of the forces and moments of several patches (same reference values)."""
    if not parts:
        raise CaseError(f"force group {name!r} has no wall patches")
    first = parts[0]
    return PatchForces(
        patch=name,
        pressure=(sum(p.pressure[0] for p in parts), sum(p.pressure[1] for p in parts)),
        viscous=(sum(p.viscous[0] for p in parts), sum(p.viscous[1] for p in parts)),
        q_ref=first.q_ref,
        l_ref=first.l_ref,
        flow_direction=first.flow_direction,
        moment_pressure=sum(p.moment_pressure for p in parts),
        moment_viscous=sum(p.moment_viscous for p in parts),
        moment_centre=first.moment_centre,
    )


@dataclass(frozen=True)
class InflowReference:
    """Speed and direction of the inflow, and where they came from (``"outer-flow"``,
    ``"inflow-velocity"``)."""

    speed: float
    direction: tuple[float, float]
    source: str


def inflow_reference(geom: Geometry, boundary: FlowBoundary, n_internal_faces: int) -> InflowReference | None:
    """The inflow of a case: the length-weighted mean free-stream velocity when the case has
    outer-flow faces; otherwise the velocity inlets' flow rate over their length,
    U = sum(-u . n_out |S|) / sum |S|, along their length-weighted mean velocity. None when the
    case has neither (or no net inflow)."""
    length = geom.face_length[n_internal_faces:]
    for code, name in ((FREESTREAM, "outer-flow"), (INLET, "inflow-velocity")):
        on = boundary.kind == code
        if not np.any(on):
            continue
        L = length[on]
        u = boundary.velocity[on]
        mean = (u * L[:, None]).sum(axis=0)
        if code == FREESTREAM:
            speed = float(np.hypot(*mean) / L.sum())
        else:
            n_out = geom.face_normal[n_internal_faces:][on]
            speed = float(-np.einsum("ij,ij->i", u, n_out) @ L / L.sum())
        if not (math.isfinite(speed) and speed > 0.0) or np.hypot(*mean) == 0.0:
            continue
        return InflowReference(speed, check_direction(mean), name)
    return None


@dataclass(frozen=True)
class ForceReference:
    """Reference values of a run's coefficients: velocity U_ref, density, free-stream direction
    (unit vector) and where the velocity and direction came from (``"case"``, ``"outer-flow"``,
    ``"inflow-velocity"`` or ``"default"``)."""

    velocity: float
    density: float
    direction: tuple[float, float]
    velocity_from: str
    direction_from: str


def case_reference(output: Any, fluid_density: float, geom: Geometry, boundary: FlowBoundary,
                   n_internal_faces: int) -> ForceReference:
    """The reference values of a case's ``[output]`` settings (``reference_velocity``,
    ``reference_density``, ``direction()``), those it leaves open taken from the inflow
    (:func:`inflow_reference`): U_ref the inflow's speed, the free-stream direction the inflow's;
    without an inflow U_ref = 1 and the direction +x; the density the fluid's."""
    inflow = inflow_reference(geom, boundary, n_internal_faces)
    if output.reference_velocity is not None:
        u, u_from = float(output.reference_velocity), "case"
    elif inflow is not None:
        u, u_from = inflow.speed, inflow.source
    else:
        u, u_from = 1.0, "default"
    given = output.direction()
    if given is not None:
        e, e_from = given, "case"
    elif inflow is not None:
        e, e_from = inflow.direction, inflow.source
    else:
        e, e_from = (1.0, 0.0), "default"
    rho = float(fluid_density) if output.reference_density is None else float(output.reference_density)
    return ForceReference(u, rho, e, u_from, e_from)


def forces_summary(
    walls: Mapping[str, WallData],
    l_ref: float,
    flow_direction: Sequence[float],
    moment_centre: Sequence[float] = (0.0, 0.0),
    groups: Mapping[str, Sequence[str]] | None = None,
) -> tuple[dict[str, PatchForces], dict[str, PatchForces]]:
    """Forces of each wall patch and of each named group of patches (the patches of a group
    that are not in ``walls`` are an error naming them)."""
    per_patch = {name: patch_forces(w, l_ref, flow_direction, moment_centre) for name, w in walls.items()}
    per_group: dict[str, PatchForces] = {}
    for gname, members in (groups or {}).items():
        missing = [m for m in members if m not in per_patch]
        if missing:
            raise CaseError(f"force group {gname!r}: {', '.join(repr(m) for m in missing)} not among the wall patches "
                            f"with wall data ({', '.join(repr(n) for n in per_patch) or 'none'})")
        per_group[gname] = group_forces(gname, [per_patch[m] for m in members])
    return per_patch, per_group
