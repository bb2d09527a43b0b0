"""Velocity profiles across a wall at a given station, in physical and wall units.

At station x the profile is taken along the wall normal from the wall face whose extent contains
x: the cells crossed by that normal line give the points; each cell value is moved from the cell
centre to the line with the least-squares velocity gradient, u(p) = u_c + grad u_c . (p - x_c),
p the foot of the centre on the line. Wall units (e.g. Pope 2000, Turbulent Flows, sec. 7.1.3):
u_tau = sqrt(|tau_w| / rho) at x (linear interpolation between wall-face centres),
y+ = y u_tau / nu, u+ = u / u_tau, u the velocity component along the wall tangent, oriented so
that the wall shear is positive (u+ > 0 in attached flow).
"""

from __future__ import annotations

from typing import Any, NamedTuple

import numpy as np

from fvrans.errors import CaseError
from fvrans.fv.gradient import LeastSquaresGradient
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.post.wall import WallData


class WallProfile(NamedTuple):
    """Distance from the wall y, tangential velocity u, and the same in wall units."""

    y: np.ndarray
    u: np.ndarray
    y_plus: np.ndarray
    u_plus: np.ndarray


def _cells_crossing(mesh: Mesh, geom: Geometry, origin: np.ndarray, normal: np.ndarray) -> np.ndarray:
    """Cells whose polygon the line through ``origin`` with direction ``normal`` cuts (in its
    forward half), by the sign of the across-line coordinate of their vertices."""
    t = np.array([normal[1], -normal[0]])
    s = (mesh.points - origin) @ t
    off = mesh.cell_offsets
    cp = mesh.cell_points
    smin = np.minimum.reduceat(s[cp], off[:-1])
    smax = np.maximum.reduceat(s[cp], off[:-1])
    ahead = (geom.cell_centre - origin) @ normal > 0.0
    return np.flatnonzero((smin <= 0.0) & (smax >= 0.0) & ahead)


def wall_profile_arrays(
    mesh: Mesh,
    geom: Geometry,
    velocity: np.ndarray,
    velocity_boundary: np.ndarray,
    wall: WallData,
    x: float,
    max_distance: float | None = None,
) -> WallProfile:
    """Profile at station ``x`` along wall ``wall`` (see the module docstring).

    ``velocity`` (n_cells, 2); ``velocity_boundary`` (n_boundary_faces, 2) the velocity on the
    boundary faces for the gradient. Points farther than ``max_distance`` from the wall are left
    out; the result is sorted by y.
    """
    xs = wall.x
    order = np.argsort(xs)
    lo = wall.x - 0.5 * wall.length * np.abs(wall.tangent[:, 0])
    hi = wall.x + 0.5 * wall.length * np.abs(wall.tangent[:, 0])
    hit = np.flatnonzero((lo <= x) & (x <= hi))
    if len(hit) == 0:
        raise CaseError(
            f"wall profile: x = {x:g} is not on wall patch {wall.patch!r} (it spans x = "
            f"{lo.min():g} .. {hi.max():g}); choose a station on the wall"
        )
    k = int(hit[0])
    f = int(wall.faces[k])
    n_in = wall.normal[k]
    tangent = wall.tangent[k]
    sign = 1.0 if np.interp(x, xs[order], wall.tau_w[order]) >= 0.0 else -1.0
    u_tau = float(np.interp(x, xs[order], wall.u_tau[order]))
    # the foot of the profile on the wall face's line at abscissa x
    xf = geom.face_centre[f]
    if abs(tangent[0]) < 1e-12:
        raise CaseError(f"wall profile: the wall face at x = {x:g} is normal to the x axis; no station x")
    origin = xf + (x - xf[0]) / tangent[0] * tangent
    cells = _cells_crossing(mesh, geom, origin, n_in)
    grad = LeastSquaresGradient(mesh, geom)(np.asarray(velocity, float), np.asarray(velocity_boundary, float))
    rel = geom.cell_centre[cells] - origin
    y = rel @ n_in
    foot = origin + y[:, None] * n_in
    shift = foot - geom.cell_centre[cells]
    u_vec = velocity[cells] + np.einsum("cij,cj->ci", grad[cells], shift)
    u_wall = velocity_boundary[f - mesh.n_internal_faces]
    u = sign * ((u_vec - u_wall) @ tangent)
    keep = np.ones(len(y), dtype=bool) if max_distance is None else y <= max_distance
    o = np.argsort(y[keep])
    y, u = y[keep][o], u[keep][o]
    nu = wall.mu / wall.rho
    return WallProfile(y=y, u=u, y_plus=y * u_tau / nu, u_plus=u / u_tau)


def wall_profile(result: Any, x: float, patch: str | None = None, max_distance: float | None = None) -> WallProfile:
    """Profile at station ``x`` of a solved :class:`fvrans.api.Result` on wall ``patch`` (the only
    wall patch if None); see :func:`wall_profile_arrays`."""
    walls = result.walls()
    if patch is None:
        if len(walls) != 1:
            raise CaseError(f"wall profile: name the wall patch; this run has walls {sorted(walls)}")
        patch = next(iter(walls))
    wall = result.wall(patch)
    prob = result.problem
    mesh, geom = prob.mesh, prob.geom
    ni = mesh.n_internal_faces
    vb = np.asarray(result.velocity)[mesh.face_owner[ni:]].copy()
    is_wall = prob.boundary.kind == 0
    vb[is_wall] = prob.boundary.velocity[is_wall]
    inlet = prob.boundary.kind == 1
    vb[inlet] = prob.boundary.velocity[inlet]
    return wall_profile_arrays(mesh, geom, result.velocity, vb, wall, x, max_distance)
