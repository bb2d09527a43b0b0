"""Separation / reattachment along horizontal walls and boundary-layer integral thicknesses.

Separation and reattachment are the points where the x component of the wall shear stress,
tau_x = tau_w t_x, changes sign (the positions come from :func:`fvrans.post.wall.zero_shear_points`,
linear interpolation between face centres). Going downstream (increasing x) a change from + to -
is a separation, from - to + a reattachment.

Integral thicknesses of a layer with edge velocity u_e (e.g. Pope 2000, Turbulent Flows, sec. 7.3):
delta99 where u = 0.99 u_e, delta* = int (1 - u/u_e) dy, theta = int u/u_e (1 - u/u_e) dy.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from fvrans.errors import CaseError
from fvrans.mesh.mesh import Mesh
from fvrans.post.wall import WallData, zero_shear_points


class FlowPoint(NamedTuple):
    """A zero of the streamwise wall shear: position and ``"separation"`` or ``"reattachment"``."""

    x: float
    y: float
    kind: str


def streamwise_points(wall: WallData, x_min: float = -np.inf, x_max: float = np.inf) -> list[FlowPoint]:
    """Separation and reattachment points of ``wall`` with x_min < x < x_max, sorted by x.

    Only points on faces that run along x (|t_x| > 0.9) are classified; the kind is read from the
    sign of tau_x on the nearest face downstream of the point on the same wall line.
    """
    tau_x = wall.tau_w * wall.tangent[:, 0]
    along_x = np.abs(wall.tangent[:, 0]) > 0.9
    out: list[FlowPoint] = []
    for p in zero_shear_points(wall):
        if not (x_min < p.x < x_max):
            continue
        same_line = along_x & (np.abs(wall.y - p.y) < 0.5 * wall.length + 1e-12) & (wall.x > p.x)
        if not np.any(same_line):
            continue
        k = np.flatnonzero(same_line)[np.argmin(wall.x[same_line])]
        out.append(FlowPoint(p.x, p.y, "reattachment" if tau_x[k] > 0 else "separation"))
    return sorted(out, key=lambda q: q.x)


def reattachment_x(wall: WallData, x_min: float = -np.inf, x_max: float = np.inf) -> float:
    """x of the last (most downstream) reattachment point of ``wall`` in (x_min, x_max).

    Raises CaseError when there is none (attached flow, or the bubble reaches past x_max).
    """
    pts = [p.x for p in streamwise_points(wall, x_min, x_max) if p.kind == "reattachment"]
    if not pts:
        raise CaseError(
            f"wall {wall.patch!r}: no reattachment point between x = {x_min:g} and {x_max:g}; "
            "the flow is attached there or the separation bubble reaches beyond the range"
        )
    return float(max(pts))


class LayerThickness(NamedTuple):
    """99% thickness, displacement thickness, momentum thickness."""

    delta99: float
    delta_star: float
    theta: float


def layer_thickness(y: np.ndarray, u: np.ndarray, u_e: float, y_max: float | None = None) -> LayerThickness:
    """Integral thicknesses of the profile u(y) (y the wall distance, sorted; the wall point y = 0,
    u = 0 included) with edge velocity ``u_e``; trapezoidal rule up to ``y_max`` (default: three
    99% thicknesses, beyond which the integrands vanish)."""
    y = np.asarray(y, float)
    r = np.asarray(u, float) / u_e
    above = np.flatnonzero(r >= 0.99)
    if len(above) == 0 or above[0] == 0:
        raise CaseError("layer thickness: the profile does not rise from below to above 0.99 u_e")
    k = int(above[0])
    d99 = float(np.interp(0.99, r[k - 1 : k + 1], y[k - 1 : k + 1]))
    m = y <= (3.0 * d99 if y_max is None else y_max)
    ds = float(np.trapezoid(1.0 - r[m], y[m]))
    th = float(np.trapezoid(r[m] * (1.0 - r[m]), y[m]))
    return LayerThickness(d99, ds, th)


def cell_column(
    mesh: Mesh, cell_centre: np.ndarray, x: float, y_min: float = -np.inf, y_max: float = np.inf
) -> np.ndarray:
    """Cells whose polygon spans the vertical line at ``x`` and whose centre lies in
    [y_min, y_max], sorted by centre y."""
    off, cp = mesh.cell_offsets, mesh.cell_points
    px = mesh.points[cp, 0]
    lo = np.minimum.reduceat(px, off[:-1])
    hi = np.maximum.reduceat(px, off[:-1])
    yc = cell_centre[:, 1]
    cells = np.flatnonzero((lo <= x) & (x < hi) & (yc >= y_min) & (yc <= y_max))
    return cells[np.argsort(yc[cells])]
