"""Mesh generators for the bundled cases: graded structured blocks written as unstructured meshes.

Every generator returns a :class:`~fvrans.mesh.mesh.Mesh` with named boundary patches; lengths are
in case units. Blocks are glued along shared edges by point index (identical point distributions),
so no point is ever merged by a floating-point tolerance. ``triangles=True`` splits each quad into
two triangles with the diagonal alternating in a checker pattern (see ``BlockAssembly``).

Families (``flat_plate_family``, ``step_family``) are nested exactly: the point distributions of the
fine level are built once and the medium and coarse levels take every 2nd and every 4th point.
"""

from __future__ import annotations

import numpy as np

from fvrans.errors import MeshError
from fvrans.mesh._blocks import (
    BlockAssembly,
    geometric_points,
    rectangle_points,
    spacing_ratios,
    symmetric_geometric_points,
    tanh_points,
    triangulate_region,
    uniform_points,
)
from fvrans.mesh.bodies import annulus, cylinder_channel, cylinder_channel_grid
from fvrans.mesh.mesh import Mesh
from fvrans.mesh.shapes import bump_channel, planar_diffuser

__all__ = [
    "LEVELS",
    "annulus",
    "estimate_cells",
    "backward_facing_step",
    "bump_channel",
    "cavity",
    "channel",
    "curved_channel",
    "cylinder_channel",
    "cylinder_channel_grid",
    "flat_plate",
    "flat_plate_family",
    "flat_plate_lines",
    "geometric_points",
    "planar_diffuser",
    "spacing_ratios",
    "step_family",
    "step_lines",
    "step_mixed",
    "symmetric_geometric_points",
    "tanh_points",
    "uniform_points",
]

#: grid levels of the nested families and their point stride relative to the fine level
LEVELS = {"fine": 1, "medium": 2, "coarse": 4}


def _fmt(**kw) -> str:
    return ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v!r}" for k, v in kw.items())


def _stride(level: str) -> int:
    if level not in LEVELS:
        raise MeshError(f"unknown grid level {level!r}; use one of {', '.join(LEVELS)}")
    return LEVELS[level]


def _check_points(name: str, x, a: float, b: float, n: int | None = None) -> np.ndarray:
    x = np.asarray(x, dtype=np.float64).ravel()
    if len(x) < 2 or np.any(np.diff(x) <= 0) or x[0] != a or x[-1] != b:
        raise MeshError(f"{name}: the point distribution must increase strictly from {a:g} to {b:g}")
    if n is not None and len(x) != n + 1:
        raise MeshError(f"{name}: {len(x)} points given, {n + 1} expected for {n} cells")
    return x


# ------------------------------------------------------------------------------------------
# channel and cavity
# ------------------------------------------------------------------------------------------


def channel(
    length: float,
    height: float,
    nx: int,
    ny: int,
    grading_y: float | np.ndarray | None = None,
    triangles: bool = False,
) -> Mesh:
    """Rectangular channel [0, length] x [0, height]; uniform in x.

    grading_y: None (uniform), a wall spacing (float; two-sided tanh clustering with this first
    spacing at both walls) or the ny + 1 y-coordinates themselves.
    Patches: "inlet" (x = 0), "outlet" (x = length), "lower_wall" (y = 0), "upper_wall" (y = height).

    >>> m = channel(2.0, 1.0, 4, 2)
    >>> m.n_cells, m.n_points, m.patch_names
    (8, 15, ['inlet', 'outlet', 'lower_wall', 'upper_wall'])
    >>> channel(2.0, 1.0, 4, 2, triangles=True).n_cells
    16
    """
    if not (length > 0 and height > 0):
        raise MeshError(f"channel: length and height must be positive, got {length!r}, {height!r}")
    x = uniform_points(nx, 0.0, float(length))
    if grading_y is None:
        y = uniform_points(ny, 0.0, float(height))
        gy = "uniform"
    elif np.ndim(grading_y) == 0:
        y = tanh_points(ny, 0.0, float(height), float(grading_y), float(grading_y))
        gy = f"{float(grading_y):g}"
    else:
        y = _check_points("channel grading_y", grading_y, 0.0, float(height), ny)
        gy = "given"
    asm = BlockAssembly()
    asm.add_block("b", rectangle_points(x, y), triangles=triangles)
    for patch, side in (
        ("inlet", "left"),
        ("outlet", "right"),
        ("lower_wall", "bottom"),
        ("upper_wall", "top"),
    ):
        asm.add_patch(patch, "b", side)
    src = (
        f"generated:channel({_fmt(length=float(length), height=float(height), nx=nx, ny=ny)}, grading_y={gy}"
    )
    return asm.to_mesh(src + (", triangles=True)" if triangles else ")"))


def curved_channel(
    radius: float,
    width: float,
    angle_deg: float,
    n_theta: int,
    n_r: int,
    wall_spacing: float,
    straight_length: float = 0.0,
    n_straight: int = 0,
) -> Mesh:
    """A channel of ``width`` bent around the origin by ``angle_deg`` (counter-clockwise) with its
    centreline at ``radius``, after an optional straight entry of ``straight_length``.

    The straight part runs along +y from y = -straight_length to 0 between x = radius -+ width/2;
    the bend follows at constant radius. Cells: n_r across (two-sided tanh clustering with
    ``wall_spacing`` at both walls), n_straight along the entry and n_theta (uniform) along the bend.
    Patches: "inlet", "outlet", "inner_wall" (convex), "outer_wall" (concave).

    >>> m = curved_channel(5.0, 1.0, 90.0, 8, 4, 0.1, straight_length=2.0, n_straight=2)
    >>> m.n_cells, m.patch_names
    (40, ['inlet', 'outlet', 'inner_wall', 'outer_wall'])
    """
    if not (width > 0 and radius > width / 2 and 0 < angle_deg <= 360):
        raise MeshError(f"curved_channel: need width > 0, radius > width / 2 and 0 < angle_deg <= 360, got "
                        f"radius={radius!r}, width={width!r}, angle_deg={angle_deg!r}")
    if (straight_length > 0) != (n_straight > 0):
        raise MeshError("curved_channel: give straight_length > 0 and n_straight >= 1 together (or neither)")
    r = tanh_points(n_r, radius - width / 2, radius + width / 2, float(wall_spacing), float(wall_spacing))
    theta = np.radians(uniform_points(n_theta, 0.0, float(angle_deg)))
    asm = BlockAssembly()
    bend = np.stack([r[:, None] * np.cos(theta)[None, :], r[:, None] * np.sin(theta)[None, :]], axis=2)
    glue: tuple[tuple[str, str, str], ...] = ()
    if n_straight:
        asm.add_block("straight", rectangle_points(r, uniform_points(n_straight, -float(straight_length), 0.0)))
        glue = (("bottom", "straight", "top"),)
    asm.add_block("bend", bend, same=glue)
    first = "straight" if n_straight else "bend"
    asm.add_patch("inlet", first, "bottom")
    asm.add_patch("outlet", "bend", "top")
    for patch, side in (("inner_wall", "left"), ("outer_wall", "right")):
        if n_straight:
            asm.add_patch(patch, "straight", side)
        asm.add_patch(patch, "bend", side)
    src = (f"generated:curved_channel({_fmt(radius=float(radius), width=float(width), angle_deg=float(angle_deg))}, "
           f"n_theta={n_theta}, n_r={n_r}, wall_spacing={float(wall_spacing):g}, "
           f"straight_length={float(straight_length):g}, n_straight={n_straight})")
    return asm.to_mesh(src)


def cavity(n: int, size: float = 1.0, triangles: bool = False, wall_spacing: float | None = None) -> Mesh:
    """Square cavity [0, size]^2 with n x n cells (uniform, or tanh-clustered to all walls).

    Patches: "lid" (y = size), "walls" (the other three sides).
    """
    if not size > 0:
        raise MeshError(f"cavity: size must be positive, got {size!r}")
    s = float(size)
    x = (
        uniform_points(n, 0.0, s)
        if wall_spacing is None
        else tanh_points(n, 0.0, s, wall_spacing, wall_spacing)
    )
    asm = BlockAssembly()
    asm.add_block("b", rectangle_points(x, x), triangles=triangles)
    asm.add_patch("lid", "b", "top")
    for side in ("left", "bottom", "right"):
        asm.add_patch("walls", "b", side)
    extra = f", wall_spacing={wall_spacing:g}" if wall_spacing is not None else ""
    extra += ", triangles=True" if triangles else ""
    return asm.to_mesh(f"generated:cavity(n={n}, size={s:g}{extra})")


# ------------------------------------------------------------------------------------------
# flat plate
# ------------------------------------------------------------------------------------------

#: domain of the flat plate: x from X_INLET to X_OUTLET, y from 0 to Y_TOP; plate from x = 0
FLAT_PLATE_X_INLET = -1.0 / 3.0
FLAT_PLATE_X_OUTLET = 2.0
FLAT_PLATE_Y_TOP = 1.0

#: fine level of the flat-plate family (273 x 193 points); medium and coarse take every 2nd / 4th point
FLAT_PLATE_FINE = dict(
    nx_plate=204, nx_ahead=68, ny=192, first_spacing=1.0e-6, le_spacing=5.0e-4, outlet_spacing=0.015
)


def flat_plate_lines(
    nx_plate: int,
    nx_ahead: int,
    ny: int,
    first_spacing: float,
    le_spacing: float = 5.0e-4,
    outlet_spacing: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """x and y point distributions of the flat-plate mesh.

    x: ahead of the plate [-1/3, 0] geometric from spacing ``le_spacing`` at the leading edge;
    along the plate [0, 2] two-sided tanh from ``le_spacing`` at x = 0 to ``outlet_spacing`` at x = 2
    (default 1.7x the uniform spacing 2/nx_plate: a mild clustering towards the outlet, whose spacing
    stays below the largest one along the plate). y: geometric from ``first_spacing`` at the wall.
    """
    if outlet_spacing is None:
        outlet_spacing = 1.7 * (FLAT_PLATE_X_OUTLET / nx_plate)
    ahead = geometric_points(nx_ahead, 0.0, FLAT_PLATE_X_INLET, first=le_spacing)[::-1].copy()
    plate = tanh_points(nx_plate, 0.0, FLAT_PLATE_X_OUTLET, le_spacing, outlet_spacing)
    x = np.concatenate([ahead, plate[1:]])
    y = geometric_points(ny, 0.0, FLAT_PLATE_Y_TOP, first=first_spacing)
    return x, y


def _flat_plate_mesh(x: np.ndarray, i_le: int, y: np.ndarray, triangles: bool, source: str) -> Mesh:
    if x[i_le] != 0.0:
        raise MeshError(f"{source}: the leading edge x = 0 is not a grid line")
    asm = BlockAssembly()
    asm.add_block("ahead", rectangle_points(x[: i_le + 1], y), triangles=triangles)
    asm.add_block(
        "plate", rectangle_points(x[i_le:], y), same=(("left", "ahead", "right"),), triangles=triangles
    )
    asm.add_patch("inlet", "ahead", "left")
    asm.add_patch("outlet", "plate", "right")
    asm.add_patch("top", "ahead", "top")
    asm.add_patch("top", "plate", "top")
    asm.add_patch("symmetry_ahead", "ahead", "bottom")
    asm.add_patch("plate", "plate", "bottom")
    return asm.to_mesh(source)


def flat_plate(
    nx_plate: int,
    nx_ahead: int,
    ny: int,
    first_spacing: float,
    le_spacing: float = 5.0e-4,
    outlet_spacing: float | None = None,
    triangles: bool = False,
) -> Mesh:
    """Zero-pressure-gradient flat plate: x in [-1/3, 2], y in [0, 1], no-slip plate on y = 0, x >= 0.

    Clustered towards the wall (first cell height ``first_spacing``), towards the leading edge from
    both sides (spacing ``le_spacing``) and mildly towards the outlet; see ``flat_plate_lines``.
    Patches: "inlet" (x = -1/3), "outlet" (x = 2), "top" (y = 1, far boundary), "symmetry_ahead"
    (y = 0, x < 0), "plate" (y = 0, x >= 0).
    """
    x, y = flat_plate_lines(nx_plate, nx_ahead, ny, first_spacing, le_spacing, outlet_spacing)
    src = "generated:flat_plate(" + _fmt(
        nx_plate=nx_plate,
        nx_ahead=nx_ahead,
        ny=ny,
        first_spacing=float(first_spacing),
        le_spacing=float(le_spacing),
    )
    return _flat_plate_mesh(x, nx_ahead, y, triangles, src + (", triangles=True)" if triangles else ")"))


def flat_plate_family(level: str, triangles: bool = False) -> Mesh:
    """One level of the nested flat-plate family: coarse 69 x 49, medium 137 x 97, fine 273 x 193 points.

    The fine distributions (FLAT_PLATE_FINE: 68 cells ahead of the plate, 204 along it, 192 across;
    wall spacing 1e-6, leading-edge spacing 5e-4, outlet spacing 0.015) are built once; medium
    and coarse take every 2nd / 4th point, so each coarser grid is a subset of the finer ones.

    Wall resolution for Re = 5e6 per unit length, U = 1 (nu = 2e-7). Skin friction at x ~ 1
    taken as Cf ~ 0.0027 (the Schultz-Grunow flat-plate correlation 0.37 / log10(Re_x)^2.584
    gives 0.0027 at Re_x = 5e6; from memory), u_tau = sqrt(Cf / 2) = 0.0367, so
    y+ = y u_tau / nu = 1.84e5 y for the first grid point off the wall (first cell height):

    ======  ====================  =========  ==========================
    level   first cell height      y+ (x~1)   largest growth ratio in y
    ======  ====================  =========  ==========================
    fine    1.00e-6                0.18       1.059
    medium  2.06e-6                0.38       1.121
    coarse  4.37e-6                0.80       1.257
    ======  ====================  =========  ==========================

    Cf falls downstream, so y+ is lower still beyond x ~ 1; the cell centre sits at half these
    values. Even at Cf = 0.003 the coarse first cell has y+ = 0.85. Largest growth ratio in x:
    fine 1.055, medium 1.112, coarse 1.238; leading-edge spacing fine 5e-4, coarse 2.1e-3.
    """
    k = _stride(level)
    p = FLAT_PLATE_FINE
    x, y = flat_plate_lines(**p)  # type: ignore[arg-type]
    src = f"generated:flat_plate_family({level!r}" + (", triangles=True)" if triangles else ")")
    return _flat_plate_mesh(x[::k].copy(), int(p["nx_ahead"]) // k, y[::k].copy(), triangles, src)


# ------------------------------------------------------------------------------------------
# backward-facing step
# ------------------------------------------------------------------------------------------

#: step height, upper wall, downstream floor: upstream floor at y = 0, downstream floor at y = -H
STEP_H = 1.0
STEP_TOP = 8.0
STEP_FLOOR = -1.0

#: fine level of the step family (110 592 cells); medium and coarse take every 2nd / 4th point
STEP_FINE = dict(
    nx_up=96,
    nx_down=288,
    ny_upper=192,
    ny_lower=128,
    wall_spacing=2.5e-4,
    corner_spacing=1.0e-3,
    outlet_spacing=0.5,
)


def step_lines(
    x_in: float = -4.0,
    x_out: float = 50.0,
    nx_up: int = 96,
    nx_down: int = 288,
    ny_upper: int = 192,
    ny_lower: int = 128,
    wall_spacing: float = 2.5e-4,
    corner_spacing: float = 1.0e-3,
    outlet_spacing: float = 0.5,
    step_height: float = STEP_H,
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Point distributions (x_up, x_down, y_upper, y_lower) of the three-block step mesh.

    x_up on [x_in, 0]: geometric, spacing ``corner_spacing`` at the step (x = 0), growing upstream.
    x_down on [0, x_out]: two-sided tanh from ``corner_spacing`` at the step face to ``outlet_spacing``.
    y_upper on [0, 8] and y_lower on [-step_height, 0]: mirrored geometric halves with ``wall_spacing``
    at both ends (the walls, and the step-lip level y = 0 where the shear layer leaves the corner).
    """
    if not x_in < 0 < x_out:
        raise MeshError(
            f"step: need x_in < 0 < x_out (step face at x = 0), got x_in={x_in!r}, x_out={x_out!r}"
        )
    if not (np.isfinite(step_height) and 0 < step_height <= STEP_TOP):
        raise MeshError(
            f"step: parameter step_height = {step_height!r} is out of range; allowed: 0 < step_height <= {STEP_TOP:g}"
        )
    x_up = geometric_points(nx_up, 0.0, float(x_in), first=corner_spacing)[::-1].copy()
    x_down = tanh_points(nx_down, 0.0, float(x_out), corner_spacing, outlet_spacing)
    y_upper = symmetric_geometric_points(ny_upper, 0.0, STEP_TOP, wall_spacing)
    y_lower = symmetric_geometric_points(ny_lower, -float(step_height), 0.0, wall_spacing)
    return x_up, x_down, y_upper, y_lower


def _step_mesh(x_up, x_down, y_upper, y_lower, triangles: bool, source: str) -> Mesh:
    asm = BlockAssembly()
    asm.add_block("up", rectangle_points(x_up, y_upper), triangles=triangles)
    asm.add_block(
        "down_upper", rectangle_points(x_down, y_upper), same=(("left", "up", "right"),), triangles=triangles
    )
    asm.add_block(
        "down_lower",
        rectangle_points(x_down, y_lower),
        same=(("top", "down_upper", "bottom"),),
        triangles=triangles,
    )
    asm.add_patch("inlet", "up", "left")
    asm.add_patch("outlet", "down_lower", "right")
    asm.add_patch("outlet", "down_upper", "right")
    asm.add_patch("lower_wall", "up", "bottom")
    asm.add_patch("lower_wall", "down_lower", "bottom")
    asm.add_patch("step_face", "down_lower", "left")
    asm.add_patch("upper_wall", "up", "top")
    asm.add_patch("upper_wall", "down_upper", "top")
    return asm.to_mesh(source)


def backward_facing_step(
    x_in: float = -4.0,
    x_out: float = 50.0,
    nx_up: int = 24,
    nx_down: int = 72,
    ny_upper: int = 48,
    ny_lower: int = 32,
    wall_spacing: float = 1.0e-3,
    corner_spacing: float | None = None,
    outlet_spacing: float = 2.0,
    triangles: bool = False,
    step_height: float = STEP_H,
) -> Mesh:
    """Backward-facing step of height H (``step_height``, default 1): three structured blocks glued by index.

    Upstream floor y = 0 for x < 0, step face x = 0 for y in [-H, 0], downstream floor y = -H,
    upper wall y = 8 (with H = 1: 8H above the upstream floor, 9H above the downstream one; expansion
    ratio 9/8; in general (8 + H) / 8). ``step_height`` must lie in (0, 8]; the topology does not
    depend on it, so meshes of different step heights share cell and face numbering (warm starts).
    Inlet at x = x_in, outlet at x = x_out. Blocks: upstream [x_in, 0] x [0, 8], downstream
    upper [0, x_out] x [0, 8], downstream lower [0, x_out] x [-H, 0]. Clustered to all walls
    (``wall_spacing``) and to the step corner (``corner_spacing`` in x on both sides of x = 0,
    default 4 x wall_spacing); see ``step_lines``. The defaults give the coarse resolution;
    ``step_family`` gives the nested levels.
    Patches: "inlet", "outlet", "lower_wall" (both floors), "step_face" (x = 0), "upper_wall".
    """
    cs = 4.0 * wall_spacing if corner_spacing is None else corner_spacing
    lines = step_lines(
        x_in, x_out, nx_up, nx_down, ny_upper, ny_lower, wall_spacing, cs, outlet_spacing, step_height
    )
    src = "generated:backward_facing_step(" + _fmt(
        x_in=float(x_in),
        x_out=float(x_out),
        nx_up=nx_up,
        nx_down=nx_down,
        ny_upper=ny_upper,
        ny_lower=ny_lower,
        wall_spacing=float(wall_spacing),
        corner_spacing=float(cs),
    )
    src += f", step_height={float(step_height):g}" if step_height != STEP_H else ""
    return _step_mesh(*lines, triangles=triangles, source=src + (", triangles=True)" if triangles else ")"))


def _step_nx_up(x_in: float, corner_spacing: float, n0: int, max_ratio: float = 1.06) -> int:
    """Fine-level cells upstream of the step: at least n0, a multiple of 4, growth ratio <= max_ratio."""
    n = n0
    while spacing_ratios(geometric_points(n, 0.0, abs(x_in), first=corner_spacing)).max() > max_ratio:
        n += 4
    return n


def step_family(level: str, x_in: float = -4.0, x_out: float = 50.0, triangles: bool = False) -> Mesh:
    """One level of the nested backward-facing-step family (fine / medium / coarse, factor 2 per level).

    Fine (STEP_FINE): 96 x 192 cells upstream, 288 x 192 above and 288 x 128 below the step-lip level
    downstream = 110 592 cells (medium 27 648, coarse 6 912) for x_in = -4; a longer inlet section
    gets more upstream cells (growth ratio <= 1.06 on the fine level). Medium and coarse take every
    2nd / 4th fine point. Spacings on the fine level: walls 2.5e-4 H, x at the step 1e-3 H, x at
    the outlet 0.5 H.

    Wall resolution for Re_H = 36 000 (the Driver & Seegmiller 1985 experiment; from memory),
    U = 1 (nu = 1 / 36 000), with Cf ~ 0.003 for the incoming
    boundary layer (an order-of-magnitude estimate, common practice): u_tau = 0.039,
    y+ = 1390 y for the first cell height: fine 2.5e-4 -> 0.35, medium 5.2e-4 -> 0.72,
    coarse 1.12e-3 -> 1.56. Largest neighbour-spacing ratios: fine 1.08, medium 1.17, coarse 1.38
    (across the lower block).
    """
    k = _stride(level)
    p = dict(STEP_FINE)
    p["nx_up"] = _step_nx_up(x_in, float(p["corner_spacing"]), int(p["nx_up"]))
    x_up, x_down, y_upper, y_lower = step_lines(x_in, x_out, **p)  # type: ignore[arg-type]
    src = f"generated:step_family({level!r}, x_in={float(x_in):g}, x_out={float(x_out):g}"
    src += ", triangles=True)" if triangles else ")"
    return _step_mesh(
        x_up[::k].copy(), x_down[::k].copy(), y_upper[::k].copy(), y_lower[::k].copy(), triangles, src
    )


def _layer(first: float, growth: float, n: int) -> np.ndarray:
    """Wall-normal distances of a geometric layer: 0, first, first (1 + g), ... (n cells)."""
    return np.concatenate([[0.0], np.cumsum(first * growth ** np.arange(n))])


def _segment(a: float, b: float, first: float, last: float, max_spacing: float) -> np.ndarray:
    """Points from a to b with end spacings ``first`` / ``last`` and at most ``max_spacing`` between."""
    length = abs(b - a)
    if first + last >= 0.5 * length:
        return uniform_points(max(1, int(np.ceil(length / max_spacing))), a, b)
    n = max(3, int(np.ceil(length / max_spacing)))
    while True:
        x = tanh_points(n, a, b, first, last)
        if np.abs(np.diff(x)).max() <= max_spacing * (1 + 1e-9):
            return x
        n += 1


def step_mixed(
    x_in: float = -4.0,
    x_out: float = 50.0,
    first_spacing: float = 5.0e-4,
    n_layers: int = 24,
    growth: float = 1.2,
    nx_up: int = 48,
    nx_down: int = 160,
    core_size: float = 0.25,
    grading: float = 0.2,
    n_smooth: int = 40,
) -> Mesh:
    """The backward-facing-step domain with quad layers on all walls and triangles in the core.

    Layers: ``n_layers`` quads, first height ``first_spacing``, growth ratio ``growth`` (thickness
    delta = first (growth^n - 1) / (growth - 1)), as structured strips along the upstream floor, the
    step face, the downstream floor and the upper wall, plus a corner block in the concave corner at
    (0, -1). Core: the region bounded by the layers' outer edges, the inlet and the outlet, filled by
    ``triangulate_region`` (size-graded point cloud, force smoothing, Delaunay): the triangles share
    exactly the points of the layers' outer edges (conforming, no hanging nodes). Target triangle
    size: the local boundary spacing growing at rate ``grading`` with distance, capped at ``core_size``.
    Patches as in ``backward_facing_step``.

    Defaults: 25 145 cells (11 112 quads, 14 033 triangles), layer thickness 0.197 H, last layer
    height 0.033 H, smallest triangle angle 15 degrees; first spacing 5e-4 H gives y+ ~ 0.7 with
    the estimate of ``step_family``. About 6 s to build.
    """
    if not x_in < 0 < x_out:
        raise MeshError(f"step_mixed: need x_in < 0 < x_out, got x_in={x_in!r}, x_out={x_out!r}")
    lay = _layer(first_spacing, growth, n_layers)
    d = float(lay[-1])
    dl = float(lay[-1] - lay[-2])  # last layer height
    if d >= 0.5 * STEP_H:
        raise MeshError(
            f"step_mixed: the wall layer is {d:.3g} thick, more than half the step height; "
            "use fewer layers, a smaller first spacing or a smaller growth ratio"
        )
    x_in, x_out = float(x_in), float(x_out)
    # distributions along the walls
    x_up = tanh_points(nx_up, x_in, 0.0, min(core_size, 0.1 * abs(x_in)), dl)
    x_dn = tanh_points(nx_down, d, x_out, dl * growth, min(core_size, 0.1 * (x_out - d)))
    y_face = tanh_points(max(3, int(np.ceil((1.0 - d) / dl * 0.6))), STEP_FLOOR + d, 0.0, dl * growth, dl)
    x_top = uniform_points(int(np.ceil((x_out - x_in) / core_size)), x_in, x_out)
    asm = BlockAssembly()
    # L1: upstream floor layer, i along x, j normal
    asm.add_block("floor_up", rectangle_points(x_up, lay))
    # L2: step-face layer, i normal (x), j along y
    asm.add_block(
        "face",
        rectangle_points(lay, y_face),
        same_point=(((0, len(y_face) - 1), "floor_up", (len(x_up) - 1, 0)),),
    )
    # K: concave corner block at (0, -1)
    asm.add_block("corner", rectangle_points(lay, STEP_FLOOR + lay), same=(("top", "face", "bottom"),))
    # L3: downstream floor layer
    asm.add_block("floor_down", rectangle_points(x_dn, STEP_FLOOR + lay), same=(("left", "corner", "right"),))
    # L4: upper-wall layer (j = 0 on the layer's outer edge)
    asm.add_block("top", rectangle_points(x_top, STEP_TOP - lay[::-1]))
    # core boundary pieces at the outlet and the inlet (interior points only)
    dx_top = float(x_top[1] - x_top[0])
    y_out = _segment(STEP_FLOOR + d, STEP_TOP - d, float(x_dn[-1] - x_dn[-2]), dx_top, core_size)
    y_inl = _segment(d, STEP_TOP - d, float(x_up[1] - x_up[0]), dx_top, core_size)
    out_ids = asm.add_points(np.stack([np.full(len(y_out) - 2, x_out), y_out[1:-1]], axis=1))
    in_ids = asm.add_points(np.stack([np.full(len(y_inl) - 2, x_in), y_inl[1:-1]], axis=1))
    b = asm.blocks
    loop = np.concatenate(
        [
            b["floor_up"][:-1, -1],  # along the upstream layer edge y = d, x_in -> 0
            b["floor_up"][-1, :0:-1],  # down x = 0 from y = d to the lip (exclusive)
            b["face"][:-1, -1],  # along y = 0 from the lip to x = d
            b["face"][-1, :0:-1],  # down x = d to y = -1 + d
            b["floor_down"][:-1, -1],  # along y = -1 + d to the outlet
            [b["floor_down"][-1, -1]],
            out_ids,  # up the outlet
            b["top"][:0:-1, 0],  # along y = 8 - d back to the inlet
            [b["top"][0, 0]],
            in_ids[::-1],  # down the inlet
        ]
    )
    pts = asm.points
    new_pts, tris = triangulate_region(pts, loop, h_max=core_size, grading=grading, n_smooth=n_smooth)
    asm.add_points(new_pts)
    asm.add_cells(tris)
    # patches
    top_out = np.concatenate([[b["floor_down"][-1, -1]], out_ids, [b["top"][-1, 0]]])
    top_in = np.concatenate([[b["floor_up"][0, -1]], in_ids, [b["top"][0, 0]]])
    asm.add_patch("inlet", "floor_up", "left")
    asm.add_patch_polyline("inlet", top_in)
    asm.add_patch("inlet", "top", "left")
    asm.add_patch("outlet", "floor_down", "right")
    asm.add_patch_polyline("outlet", top_out)
    asm.add_patch("outlet", "top", "right")
    asm.add_patch("lower_wall", "floor_up", "bottom")
    asm.add_patch("lower_wall", "corner", "bottom")
    asm.add_patch("lower_wall", "floor_down", "bottom")
    asm.add_patch("step_face", "corner", "left")
    asm.add_patch("step_face", "face", "left")
    asm.add_patch("upper_wall", "top", "top")
    src = (
        "generated:step_mixed("
        + _fmt(
            x_in=x_in,
            x_out=x_out,
            first_spacing=float(first_spacing),
            n_layers=n_layers,
            growth=float(growth),
            core_size=float(core_size),
        )
        + ")"
    )
    return asm.to_mesh(src)


# ------------------------------------------------------------------------------------------
# sizes before building
# ------------------------------------------------------------------------------------------
def _tri(p: dict) -> float:
    return 2.0 if p.get("triangles") else 1.0


def _step_mixed_cells(p: dict) -> float:
    """Layer quads along the walls plus core triangles of size ``core_size`` (an over-estimate of
    about 1.5 at the defaults)."""
    length = float(p["x_out"]) - float(p["x_in"])
    core = float(p["core_size"])
    along = int(p["nx_up"]) + int(p["nx_down"]) + length / core
    return int(p["n_layers"]) * (along + 40) + 4.0 * length * 3.0 / core**2 + 20.0 * along


#: the cell count of each generator from its (bound) keyword arguments, before anything is built
_CELLS = {
    "channel": lambda p: float(p["nx"]) * float(p["ny"]) * _tri(p),
    "cavity": lambda p: float(p["n"]) ** 2 * _tri(p),
    "flat_plate": lambda p: (float(p["nx_plate"]) + float(p["nx_ahead"])) * float(p["ny"]) * _tri(p),
    "flat_plate_family": lambda p: 272 * 192 * _tri(p),
    "backward_facing_step": lambda p: (float(p["nx_up"]) * float(p["ny_upper"])
                                       + float(p["nx_down"]) * (float(p["ny_upper"]) + float(p["ny_lower"]))) * _tri(p),
    "step_family": lambda p: 2 * 110_592 * _tri(p),
    "step_mixed": _step_mixed_cells,
    "bump_channel": lambda p: (float(p["nx_up"]) + float(p["nx_bump"]) + float(p["nx_down"])) * float(p["ny"])
    * _tri(p),
    "planar_diffuser": lambda p: (float(p["nx_in"]) + float(p["nx_div"]) + float(p["nx_out"])) * float(p["ny"])
    * _tri(p),
}


def estimate_cells(name: str, **params) -> float | None:
    """About how many cells generator ``name`` would build with ``params`` (its defaults filled
    in), or None when unknown; cheap, so that an impossible size is refused before it is built.

    >>> estimate_cells("cavity", n=1000), estimate_cells("channel", length=1, height=1, nx=10, ny=4, triangles=True)
    (1000000.0, 80.0)
    """
    func, rule = globals().get(name), _CELLS.get(name)
    if func is None or rule is None:
        return None
    import inspect

    try:
        bound = inspect.signature(func).bind(**params)
    except TypeError:
        return None
    bound.apply_defaults()
    try:
        return float(rule(dict(bound.arguments)))
    except (TypeError, ValueError, KeyError, OverflowError, ZeroDivisionError):
        return None
