"""Parametric shapes for design loops: a channel with a bump and a planar diffuser.

Each generator builds one structured block from its parameters (no external mesher): the x
stations of the grid columns, the lower and upper wall heights y_l(x), y_u(x) at each station,
and one wall-normal distribution eta_j on [0, 1] shared by every column,

    P_ij = (x_i, y_l(x_i) + eta_j (y_u(x_i) - y_l(x_i))),

a transfinite map with straight vertical grid lines. The topology (cells, faces, patches) depends
only on the resolution parameters, so two designs with the same resolution have identical cell and
face numbering: the mesh of a neighbouring design is the same mesh with moved points, and a solution
of one is a valid warm start for the other (see :func:`fvrans.mesh.morph.same_topology`).

Invalid parameters raise :class:`~fvrans.errors.MeshError` naming the parameter and its allowed range.

>>> m = bump_channel(bump_height=0.1, nx_bump=8, nx_up=4, nx_down=8, ny=6)
>>> m.n_cells, m.patch_names
(120, ['inlet', 'outlet', 'lower_wall', 'upper_wall'])
>>> planar_diffuser(angle_deg=10.0, nx_in=4, nx_div=8, nx_out=8, ny=6).n_cells
120
"""

from __future__ import annotations

import math

import numpy as np

from fvrans.errors import MeshError
from fvrans.mesh._blocks import BlockAssembly, geometric_points, tanh_points, uniform_points
from fvrans.mesh.mesh import Mesh

__all__ = ["bump_channel", "bump_wall", "planar_diffuser"]

#: allowed wall kinds of the bump channel's upper boundary and their patch names
UPPER_PATCH = {"wall": "upper_wall", "symmetry": "symmetry"}


# ------------------------------------------------------------------------------------------
# parameter checks
# ------------------------------------------------------------------------------------------


def _positive(gen: str, name: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise MeshError(f"{gen}: parameter {name} = {value!r} is out of range; allowed: {name} > 0")
    return v


def _cells(gen: str, name: str, value: int) -> int:
    if isinstance(value, bool) or int(value) != value or value < 2:
        raise MeshError(f"{gen}: parameter {name} = {value!r} is out of range; allowed: an integer >= 2")
    return int(value)


def _fraction(gen: str, name: str, value: float | None, n: int) -> float | None:
    """A first-cell height as a fraction of the local channel height, in (0, 1 / n]."""
    if value is None:
        return None
    v = float(value)
    if not (math.isfinite(v) and 0 < v <= 1.0 / n):
        raise MeshError(
            f"{gen}: parameter {name} = {value!r} is out of range; allowed: 0 < {name} <= 1/ny = {1.0 / n:.4g} "
            "(a fraction of the local channel height), or none for a uniform distribution"
        )
    return v


def _eta(gen: str, ny: int, wall_spacing: float | None, both: bool) -> np.ndarray:
    """Wall-normal distribution on [0, 1]: uniform, or clustered to y = 0 (and y = 1 if ``both``)."""
    if wall_spacing is None or wall_spacing >= 1.0 / ny * (1 - 1e-12):
        return uniform_points(ny, 0.0, 1.0)
    try:
        if both and ny >= 3:
            return tanh_points(ny, 0.0, 1.0, wall_spacing, wall_spacing)
        return geometric_points(ny, 0.0, 1.0, first=wall_spacing)
    except MeshError as exc:
        raise MeshError(
            f"{gen}: parameter wall_spacing = {wall_spacing!r} cannot be met with ny = {ny}: {exc}"
        ) from None


def _column_mesh(
    x: np.ndarray,
    y_lower: np.ndarray,
    y_upper: np.ndarray,
    eta: np.ndarray,
    patches: dict[str, str],
    triangles: bool,
    source: str,
) -> Mesh:
    """One block of vertical grid columns between two wall lines; patches maps a side to a name."""
    if np.any(y_upper - y_lower <= 0):
        i = int(np.argmin(y_upper - y_lower))
        raise MeshError(f"{source}: the walls touch or cross at x = {x[i]:.6g}; reduce the wall displacement")
    X = np.repeat(x[:, None], len(eta), axis=1)
    Y = y_lower[:, None] + eta[None, :] * (y_upper - y_lower)[:, None]
    Y[:, 0], Y[:, -1] = y_lower, y_upper
    asm = BlockAssembly()
    asm.add_block("b", np.stack([X, Y], axis=-1), triangles=triangles)
    for side in ("left", "right", "bottom", "top"):
        asm.add_patch(patches[side], "b", side)
    return asm.to_mesh(source)


def _fmt(gen: str, triangles: bool, **kw) -> str:
    args = ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v!r}" for k, v in kw.items())
    return f"generated:{gen}({args}{', triangles=True' if triangles else ''})"


def _approach(n: int, a: float, b: float, spacing: float) -> np.ndarray:
    """n + 1 points from a to b with spacing ``spacing`` at b, growing geometrically towards a
    (uniform if ``spacing`` is the uniform spacing or larger)."""
    if spacing * n >= abs(b - a) * (1 - 1e-12):
        return uniform_points(n, a, b)
    return geometric_points(n, b, a, first=spacing)[::-1].copy()


# ------------------------------------------------------------------------------------------
# channel with a bump
# ------------------------------------------------------------------------------------------


def bump_wall(x: np.ndarray, bump_height: float, bump_length: float, bump_centre: float = 0.0) -> np.ndarray:
    """Lower-wall height of the bump channel: y = h cos^2(pi (x - x_c) / L) for |x - x_c| <= L/2, else 0.

    Smooth (continuous slope) at both ends; area under the bump h L / 2; largest slope pi h / L.
    """
    s = (np.asarray(x, float) - bump_centre) / bump_length
    return np.where(np.abs(s) <= 0.5, bump_height * np.cos(np.pi * s) ** 2, 0.0)


def bump_channel(
    bump_height: float = 0.1,
    bump_length: float = 1.0,
    height: float = 1.0,
    upstream_length: float = 2.0,
    downstream_length: float = 6.0,
    nx_bump: int = 40,
    nx_up: int = 16,
    nx_down: int = 60,
    ny: int = 32,
    wall_spacing: float | None = 0.01,
    upper: str = "wall",
    triangles: bool = False,
) -> Mesh:
    """Channel of height ``height`` with a cos^2 bump on the lower wall (see :func:`bump_wall`).

    The bump (height ``bump_height``, length ``bump_length``) is centred at x = 0; the inlet is
    ``upstream_length`` before its start (x = -L/2 - upstream_length), the outlet
    ``downstream_length`` after its end. x: ``nx_bump`` uniform cells along the bump, geometric
    growth away from it over ``nx_up`` / ``nx_down`` cells. y: ``ny`` cells per column, first cell
    ``wall_spacing`` times the local channel height at each wall (None: uniform). ``upper``:
    ``"wall"`` (patch "upper_wall", clustered) or ``"symmetry"`` (patch "symmetry", clustered to the
    lower wall only). Patches: "inlet", "outlet", "lower_wall" and the upper one.
    Exact domain area: height (L + upstream + downstream) - bump_height L / 2 (the discrete lower
    wall is the polygon through the wall points, so the mesh area is that polygon's).
    """
    g = "bump_channel"
    H = _positive(g, "height", height)
    L = _positive(g, "bump_length", bump_length)
    up = _positive(g, "upstream_length", upstream_length)
    down = _positive(g, "downstream_length", downstream_length)
    hb = float(bump_height)
    if not (math.isfinite(hb) and 0 <= hb < H):
        raise MeshError(
            f"{g}: parameter bump_height = {bump_height!r} is out of range; allowed: 0 <= bump_height < height = {H:g}"
        )
    nb, nu, nd, nj = (_cells(g, k, v) for k, v in (("nx_bump", nx_bump), ("nx_up", nx_up),
                                                    ("nx_down", nx_down), ("ny", ny)))
    ws = _fraction(g, "wall_spacing", wall_spacing, nj)
    if upper not in UPPER_PATCH:
        raise MeshError(
            f"{g}: parameter upper = {upper!r} is not allowed; use one of {', '.join(map(repr, UPPER_PATCH))}"
        )
    dx = L / nb
    x = np.concatenate([
        _approach(nu, -0.5 * L - up, -0.5 * L, dx),
        uniform_points(nb, -0.5 * L, 0.5 * L)[1:],
        _approach(nd, 0.5 * L + down, 0.5 * L, dx)[::-1][1:],
    ])
    y_lower = bump_wall(x, hb, L)
    eta = _eta(g, nj, ws, both=(upper == "wall"))
    src = _fmt(g, triangles, bump_height=hb, bump_length=L, height=H, upstream_length=up,
               downstream_length=down, nx_bump=nb, nx_up=nu, nx_down=nd, ny=nj,
               wall_spacing=None if ws is None else ws, upper=upper)
    patches = {"left": "inlet", "right": "outlet", "bottom": "lower_wall", "top": UPPER_PATCH[upper]}
    return _column_mesh(x, y_lower, np.full_like(x, H), eta, patches, triangles, src)


# ------------------------------------------------------------------------------------------
# planar diffuser
# ------------------------------------------------------------------------------------------

#: allowed range of the diffuser wall angle in degrees (0 is a straight channel)
DIFFUSER_ANGLE_RANGE = (0.0, 45.0)


def planar_diffuser(
    angle_deg: float = 10.0,
    height: float = 1.0,
    inlet_length: float = 2.0,
    diverging_length: float = 4.0,
    outlet_length: float = 8.0,
    symmetric: bool = False,
    nx_in: int = 16,
    nx_div: int = 40,
    nx_out: int = 40,
    ny: int = 32,
    wall_spacing: float | None = 0.01,
    triangles: bool = False,
) -> Mesh:
    """Planar diffuser: a straight inlet channel of height ``height`` (x from -inlet_length to 0), a
    diverging section of length ``diverging_length`` whose lower wall turns down by ``angle_deg``
    (``symmetric=True``: both walls turn out by ``angle_deg``, the half-angle), and a straight
    outlet section of length ``outlet_length``.

    Outlet height: height + 2^s diverging_length tan(angle) (s = 1 symmetric, 0 one-sided); exact
    area: height (inlet + diverging + outlet lengths) + 2^s tan(angle) (diverging_length^2 / 2 +
    diverging_length outlet_length). The wall kinks at x = 0 and x = diverging_length are grid
    columns; x spacing uniform in the diverging section, growing geometrically away from it; y
    clustered to both walls (first cell ``wall_spacing`` times the local height; None: uniform).
    Patches: "inlet", "outlet", "lower_wall", "upper_wall".
    """
    g = "planar_diffuser"
    H = _positive(g, "height", height)
    li = _positive(g, "inlet_length", inlet_length)
    ld = _positive(g, "diverging_length", diverging_length)
    lo = _positive(g, "outlet_length", outlet_length)
    a = float(angle_deg)
    amin, amax = DIFFUSER_ANGLE_RANGE
    if not (math.isfinite(a) and amin <= a <= amax):
        raise MeshError(
            f"{g}: parameter angle_deg = {angle_deg!r} is out of range; allowed: {amin:g} <= angle_deg <= {amax:g}"
        )
    ni, nd, no, nj = (_cells(g, k, v) for k, v in (("nx_in", nx_in), ("nx_div", nx_div),
                                                    ("nx_out", nx_out), ("ny", ny)))
    ws = _fraction(g, "wall_spacing", wall_spacing, nj)
    dx = ld / nd
    x = np.concatenate([
        _approach(ni, -li, 0.0, dx),
        uniform_points(nd, 0.0, ld)[1:],
        _approach(no, ld + lo, ld, dx)[::-1][1:],
    ])
    drop = np.tan(np.radians(a)) * np.clip(x, 0.0, ld)
    y_lower = -drop
    y_upper = H + drop if symmetric else np.full_like(x, H)
    eta = _eta(g, nj, ws, both=True)
    src = _fmt(g, triangles, angle_deg=a, height=H, inlet_length=li, diverging_length=ld, outlet_length=lo,
               symmetric=bool(symmetric), nx_in=ni, nx_div=nd, nx_out=no, ny=nj, wall_spacing=ws)
    patches = {"left": "inlet", "right": "outlet", "bottom": "lower_wall", "top": "upper_wall"}
    return _column_mesh(x, y_lower, y_upper, eta, patches, triangles, src)
