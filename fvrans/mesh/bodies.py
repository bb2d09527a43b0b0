"""Meshes around curved walls: the annulus between two concentric circles and the channel with a
circular cylinder.

Both are built here from their parameters (no external mesher). Circles are polygons through
points on the circle, so a wall face is a chord: its centre lies inside the circle by the sagitta
R (1 - cos(pi / n)) ~ R pi^2 / (2 n^2), a second-order geometric error.

- :func:`annulus`: ``cells = "quads"`` (a polar grid), ``"triangles"`` (each polar quad split in two,
  the diagonal alternating in a checker pattern) or ``"mixed"`` (``wall_layers`` rings of quads on
  each wall, split quads between). Radial points uniform or geometric from both walls.
- :func:`cylinder_channel`: a rectangular channel with a cylinder: a polar ring of split quads
  round the cylinder, then triangles by :func:`fvrans.mesh._blocks.triangulate_region` (the domain
  is cut in two simple polygons along the horizontal line through the cylinder centre); the
  defaults are the geometry of the cylinder-in-channel benchmark of Schaefer & Turek (1996).

Invalid parameters raise :class:`~fvrans.errors.MeshError` naming the parameter and its range.

>>> annulus(n_theta=8, n_r=2).n_cells, annulus(n_theta=8, n_r=2, cells="triangles").n_cells
(16, 32)
>>> annulus(n_theta=8, n_r=4, cells="mixed", wall_layers=1).cell_sizes().tolist().count(4)
16
"""

from __future__ import annotations

import math

import numpy as np

from fvrans.errors import MeshError
from fvrans.mesh._blocks import BlockAssembly, geometric_points, rectangle_points, triangulate_region, uniform_points
from fvrans.mesh.mesh import Mesh

__all__ = ["ANNULUS_CELLS", "annulus", "cylinder_channel", "cylinder_channel_grid"]

#: cell kinds of :func:`annulus`
ANNULUS_CELLS = ("quads", "triangles", "mixed")


def _positive(gen: str, name: str, value: float) -> float:
    v = float(value)
    if not (math.isfinite(v) and v > 0):
        raise MeshError(f"{gen}: parameter {name} = {value!r} is out of range; allowed: {name} > 0")
    return v


def _count(gen: str, name: str, value: int, least: int, even: bool = False) -> int:
    if isinstance(value, bool) or int(value) != value or value < least or (even and int(value) % 2):
        what = f"an {'even ' if even else ''}integer >= {least}"
        raise MeshError(f"{gen}: parameter {name} = {value!r} is out of range; allowed: {what}")
    return int(value)


def _fmt(gen: str, **kw) -> str:
    args = ", ".join(f"{k}={v:g}" if isinstance(v, float) else f"{k}={v!r}" for k, v in kw.items())
    return f"generated:{gen}({args})"


# ------------------------------------------------------------------------------------------
# annulus
# ------------------------------------------------------------------------------------------


def _radii(gen: str, r_inner: float, r_outer: float, n_r: int, wall_spacing: float | None) -> np.ndarray:
    """n_r + 1 radii from r_inner to r_outer: uniform, or geometric from both walls with the
    first spacing ``wall_spacing`` (symmetric about the mid-radius)."""
    if wall_spacing is None:
        return uniform_points(n_r, r_inner, r_outer)
    gap = r_outer - r_inner
    if not (0 < wall_spacing < gap / n_r):
        raise MeshError(f"{gen}: parameter wall_spacing = {wall_spacing!r} is out of range; allowed: "
                        f"0 < wall_spacing < (r_outer - r_inner) / n_r = {gap / n_r:.4g}, or none (uniform)")
    half = n_r // 2
    lo = geometric_points(half, r_inner, r_inner + 0.5 * gap * (2 * half / n_r), first=wall_spacing)
    if n_r % 2 == 0:
        hi = r_outer - (lo - r_inner)[::-1]
        return np.concatenate([lo, hi[1:]])
    mid = 0.5 * (r_inner + r_outer)
    lo = geometric_points(half, r_inner, mid - 0.5 * gap / n_r, first=wall_spacing)
    hi = r_outer - (lo - r_inner)[::-1]
    return np.concatenate([lo, hi])


def _ring_cells(idx: np.ndarray, split: np.ndarray) -> list[np.ndarray]:
    """Cells between the closed rings of points ``idx`` (n_rings + 1, n_around), counter-clockwise when
    the rings run counter-clockwise and outwards: a quad per pair of neighbouring points on two
    rings, or two triangles where ``split[j]`` is set for the layer j (the diagonal alternating in a
    checker pattern)."""
    nr = idx.shape[0] - 1
    nxt = np.roll(idx, -1, axis=1)
    p00, p10, p11, p01 = idx[:-1], idx[1:], nxt[1:], nxt[:-1]  # out along r, then on along theta
    jj, ii = np.meshgrid(np.arange(nr), np.arange(idx.shape[1]), indexing="ij")
    sp = np.broadcast_to(np.asarray(split, dtype=bool)[:, None], p00.shape)
    even = (ii + jj) % 2 == 0
    cell_list: list[np.ndarray] = [np.stack([p00, p10, p11, p01], -1)[~sp]]
    for mask, diag in ((sp & even, 0), (sp & ~even, 1)):
        a, b, c, d = p00[mask], p10[mask], p11[mask], p01[mask]
        if diag == 0:
            cell_list += [np.stack([a, b, c], -1), np.stack([a, c, d], -1)]
        else:
            cell_list += [np.stack([a, b, d], -1), np.stack([b, c, d], -1)]
    return [row for block in cell_list for row in block]


def annulus(
    r_inner: float = 1.0,
    r_outer: float = 2.0,
    n_theta: int = 64,
    n_r: int = 16,
    cells: str = "quads",
    wall_layers: int = 2,
    wall_spacing: float | None = None,
    centre: tuple[float, float] = (0.0, 0.0),
    angle: float = 0.0,
    twist: float = 0.0,
) -> Mesh:
    """The annulus r_inner <= r <= r_outer around ``centre``: ``n_theta`` points on each circle
    (the first at polar angle ``angle`` in degrees), ``n_r`` cells across the gap. ``twist``
    turns the circles of points by ``twist`` (r - r_inner) / (r_outer - r_inner) degrees, so the
    grid lines across the gap are spirals and the cells skewed (0: radial lines).

    ``cells``: ``"quads"``, ``"triangles"`` (each quad split, diagonals alternating) or
    ``"mixed"`` (quads in the ``wall_layers`` rings next to each wall, triangles between).
    ``wall_spacing``: first radial spacing at both walls (geometric growth), or None (uniform).
    Patches: "inner" (r = r_inner) and "outer" (r = r_outer).

    >>> m = annulus(n_theta=16, n_r=4)
    >>> m.patch_names, m.patch("inner").size
    (['inner', 'outer'], 16)
    """
    gen = "annulus"
    r0 = _positive(gen, "r_inner", r_inner)
    r1 = _positive(gen, "r_outer", r_outer)
    if r1 <= r0:
        raise MeshError(f"{gen}: parameter r_outer = {r_outer!r} is out of range; allowed: r_outer > r_inner = {r0:g}")
    nt = _count(gen, "n_theta", n_theta, 6, even=True)
    nr = _count(gen, "n_r", n_r, 1)
    if cells not in ANNULUS_CELLS:
        raise MeshError(f"{gen}: parameter cells = {cells!r} is not allowed; use one of {ANNULUS_CELLS}")
    layers = _count(gen, "wall_layers", wall_layers, 1) if cells == "mixed" else 0
    if cells == "mixed" and 2 * layers >= nr:
        raise MeshError(f"{gen}: parameter wall_layers = {wall_layers!r} is out of range; allowed: "
                        f"1 <= wall_layers < n_r / 2 = {nr / 2:g} (triangles need a ring between the layers)")
    r = _radii(gen, r0, r1, nr, None if wall_spacing is None else float(wall_spacing))
    th = np.radians(float(angle)) + 2.0 * np.pi * np.arange(nt) / nt
    cx, cy = (float(centre[0]), float(centre[1]))
    R, T = np.meshgrid(r, th, indexing="ij")  # (nr + 1, nt)
    T = T + np.radians(float(twist)) * (R - r0) / (r1 - r0)

    pts = np.stack([cx + R * np.cos(T), cy + R * np.sin(T)], axis=-1).reshape(-1, 2)
    idx = np.arange((nr + 1) * nt).reshape(nr + 1, nt)
    split = np.ones(nr, dtype=bool) if cells == "triangles" else np.zeros(nr, dtype=bool)
    if cells == "mixed":
        split[layers : nr - layers] = True
    flat_cells = _ring_cells(idx, split)
    ring = np.arange(nt)
    boundary = {
        "inner": np.stack([idx[0, (ring + 1) % nt], idx[0, ring]], axis=1),
        "outer": np.stack([idx[-1, ring], idx[-1, (ring + 1) % nt]], axis=1),
    }
    kw = dict(r_inner=r0, r_outer=r1, n_theta=nt, n_r=nr, cells=cells)
    if cells == "mixed":
        kw["wall_layers"] = layers
    if wall_spacing is not None:
        kw["wall_spacing"] = float(wall_spacing)
    if centre != (0.0, 0.0) and tuple(centre) != (0, 0):
        kw["centre"] = (cx, cy)
    if angle:
        kw["angle"] = float(angle)
    if twist:
        kw["twist"] = float(twist)
    mesh = Mesh.from_arrays(pts, flat_cells, boundary, source=_fmt(gen, **kw))
    if mesh.notes:
        raise MeshError(f"{mesh.source}: internal error in the generator: {'; '.join(mesh.notes)}")
    return mesh


# ------------------------------------------------------------------------------------------
# channel with a circular cylinder
# ------------------------------------------------------------------------------------------


def cylinder_channel(
    n_cylinder: int = 64,
    length: float = 2.2,
    height: float = 0.41,
    centre: tuple[float, float] = (0.2, 0.2),
    diameter: float = 0.1,
    wall_spacing: float | None = None,
    outlet_spacing: float | None = None,
    grading: float = 0.15,
    max_size: float | None = None,
    n_smooth: int = 40,
    ring_radius: float | None = None,
    ring_layers: int | None = None,
    cells: str = "triangles",
) -> Mesh:
    """Triangles in the channel [0, length] x [0, height] around a circular cylinder.

    ``n_cylinder`` points on the circle (a multiple of 4: points at its front, back, top and
    bottom). Round the cylinder out to ``ring_radius`` (default: the diameter) a polar ring of
    ``ring_layers`` layers (default: cells about as long as high, n_cylinder ln(ring_radius /
    radius) / (2 pi)), radii growing geometrically; ``cells = "triangles"`` splits its quads in two
    (diagonals alternating), ``"mixed"`` keeps them. Beyond the ring, triangles: spacing along the
    channel walls ``wall_spacing`` (default: 4 x the cylinder's), on the inlet the same, on the
    outlet ``outlet_spacing`` (default 2 x the walls'); the triangle size grows away from the
    boundary at the rate ``grading`` up to ``max_size`` (default: height / 8). The cut along
    y = centre[1] is a line of mesh points spaced like its ends, so the two halves conform. The
    ring refines with the cylinder spacing in both directions, so a family of n_cylinder = n, 2n,
    4n refines the cells next to the cylinder systematically. Patches: "inlet" (x = 0),
    "outlet" (x = length), "walls" (y = 0 and y = height), "cylinder".

    Defaults: the geometry of Schaefer & Turek (1996), cylinder of diameter 0.1 centred at
    (0.2, 0.2) in a channel 2.2 x 0.41.
    """
    gen = "cylinder_channel"
    nc = _count(gen, "n_cylinder", n_cylinder, 8)
    if nc % 4:
        raise MeshError(f"{gen}: parameter n_cylinder = {n_cylinder!r} is out of range; allowed: a multiple of 4, >= 8")
    L = _positive(gen, "length", length)
    H = _positive(gen, "height", height)
    D = _positive(gen, "diameter", diameter)
    xc, yc = float(centre[0]), float(centre[1])
    rad = 0.5 * D
    if not (rad < xc < L - rad and rad < yc < H - rad):
        raise MeshError(f"{gen}: parameter centre = {tuple(centre)!r} is out of range; the cylinder must lie "
                        f"inside the channel: {rad:g} < x < {L - rad:g}, {rad:g} < y < {H - rad:g}")
    r_ring = 2.0 * rad if ring_radius is None else _positive(gen, "ring_radius", ring_radius)
    room = min(xc, L - xc, yc, H - yc)
    if not rad < r_ring < room:
        raise MeshError(f"{gen}: parameter ring_radius = {ring_radius!r} is out of range; allowed: "
                        f"{rad:g} < ring_radius < {room:g} (the ring must stay inside the channel)")
    layers = max(1, round(nc * math.log(r_ring / rad) / (2 * math.pi))) if ring_layers is None else (
        _count(gen, "ring_layers", ring_layers, 1))
    if cells not in ("triangles", "mixed"):
        raise MeshError(f"{gen}: parameter cells = {cells!r} is not allowed; use 'triangles' or 'mixed'")
    h_cyl = 2.0 * math.pi * r_ring / nc  # the spacing on the ring's outer circle
    h_wall = 4.0 * h_cyl if wall_spacing is None else _positive(gen, "wall_spacing", wall_spacing)
    h_out = 2.0 * h_wall if outlet_spacing is None else _positive(gen, "outlet_spacing", outlet_spacing)
    h_max = H / 8.0 if max_size is None else _positive(gen, "max_size", max_size)
    g = _positive(gen, "grading", grading)

    def line(a: float, b: float, ha: float, hb: float) -> np.ndarray:
        """Points from a to b (both included) whose spacing changes linearly from ha to hb."""
        n = max(1, int(round(2.0 * abs(b - a) / (ha + hb))))
        s = np.linspace(0.0, 1.0, n + 1)
        # spacing linear in s: x(s) = a + (b - a) (ha' s + (hb' - ha') s^2 / 2), normalised
        w = ha * s + 0.5 * (hb - ha) * s * s
        return a + (b - a) * w / w[-1]

    ang = np.pi + 2.0 * np.pi * np.arange(nc) / nc
    radii = rad * (r_ring / rad) ** (np.arange(layers + 1) / layers)
    ring_xy = np.stack([xc + radii[:, None] * np.cos(ang)[None, :], yc + radii[:, None] * np.sin(ang)[None, :]], -1)
    q = nc // 2  # index of the back point (angle 0 / 2 pi)
    # the cut: inlet -> front point of the ring, its back point -> outlet
    cut_in = line(0.0, xc - r_ring, h_wall, h_cyl)
    cut_out = line(xc + r_ring, L, h_cyl, h_out)
    bottom = line(0.0, L, h_wall, h_out)
    top = bottom.copy()
    inlet_lo = line(0.0, yc, h_wall, h_wall)
    inlet_hi = line(yc, H, h_wall, h_wall)
    outlet_lo = line(0.0, yc, h_out, h_out)
    outlet_hi = line(yc, H, h_out, h_out)

    pts: list[np.ndarray] = []
    count = 0

    def add(xy: np.ndarray) -> np.ndarray:
        nonlocal count
        xy = np.asarray(xy, float).reshape(-1, 2)
        ids = np.arange(count, count + len(xy))
        pts.append(xy)
        count += len(xy)
        return ids

    ring_ids = add(ring_xy.reshape(-1, 2)).reshape(layers + 1, nc)
    c_ids = ring_ids[-1]  # the ring's outer circle, where the triangles start
    # circle point k lies at the angle pi + 2 pi k / nc: k = 0 the front, 0 < k < q below the
    # centre, k = q the back, q < k < nc above
    cut_in_ids = add(np.stack([cut_in[:-1], np.full(len(cut_in) - 1, yc)], axis=1))  # x = 0 .. before the front
    cut_out_ids = add(np.stack([cut_out[1:], np.full(len(cut_out) - 1, yc)], axis=1))  # after the back .. x = L
    bot_ids = add(np.stack([bottom, np.zeros(len(bottom))], axis=1))
    top_ids = add(np.stack([top, np.full(len(top), H)], axis=1))
    in_lo_ids = add(np.stack([np.zeros(len(inlet_lo) - 2), inlet_lo[1:-1]], axis=1))
    in_hi_ids = add(np.stack([np.zeros(len(inlet_hi) - 2), inlet_hi[1:-1]], axis=1))
    out_lo_ids = add(np.stack([np.full(len(outlet_lo) - 2, L), outlet_lo[1:-1]], axis=1))
    out_hi_ids = add(np.stack([np.full(len(outlet_hi) - 2, L), outlet_hi[1:-1]], axis=1))
    inlet_mid, outlet_mid = int(cut_in_ids[0]), int(cut_out_ids[-1])
    lower_arc = c_ids[: q + 1][::-1]  # back -> front under the cylinder
    upper_arc = np.r_[c_ids[:1], c_ids[q:][::-1]]  # front -> back over the cylinder
    # counter-clockwise loops (fluid on the left). Lower: the bottom wall, up the outlet to the cut,
    # along the cut to the back point, under the cylinder to the front, along the cut to the inlet,
    # down the inlet. Upper: along the cut from the inlet to the front, over the cylinder to the back,
    # along the cut to the outlet, up the outlet, the top wall back to x = 0, down the inlet to the cut.
    lower = np.r_[bot_ids, out_lo_ids, cut_out_ids[::-1], lower_arc, cut_in_ids[::-1], in_lo_ids[::-1]]
    upper = np.r_[cut_in_ids, upper_arc, cut_out_ids, out_hi_ids, top_ids[::-1], in_hi_ids[::-1]]
    all_pts = np.concatenate(pts)
    cells_all: list[np.ndarray] = list(_ring_cells(ring_ids, np.full(layers, cells == "triangles")))
    for loop in (lower, upper):
        new_pts, tris = triangulate_region(all_pts, loop, h_max=h_max, grading=g, n_smooth=n_smooth)
        all_pts = np.concatenate([all_pts, new_pts])
        cells_all.extend(tris)
    ring = np.arange(nc)
    wall_ids = ring_ids[0]
    inlet_line = np.r_[bot_ids[:1], in_lo_ids, [inlet_mid], in_hi_ids, top_ids[:1]]
    outlet_line = np.r_[bot_ids[-1:], out_lo_ids, [outlet_mid], out_hi_ids, top_ids[-1:]]
    bnd = {
        "inlet": np.stack([inlet_line[1:], inlet_line[:-1]], axis=1),
        "outlet": np.stack([outlet_line[:-1], outlet_line[1:]], axis=1),
        "walls": np.concatenate([np.stack([bot_ids[:-1], bot_ids[1:]], axis=1),
                                 np.stack([top_ids[1:], top_ids[:-1]], axis=1)]),
        "cylinder": np.stack([wall_ids[(ring + 1) % nc], wall_ids[ring]], axis=1),
    }
    kw: dict = dict(n_cylinder=nc)
    if cells != "triangles":
        kw["cells"] = cells
    for k, v, d in (("length", L, 2.2), ("height", H, 0.41), ("diameter", D, 0.1), ("grading", g, 0.15)):
        if v != d:
            kw[k] = v
    if (xc, yc) != (0.2, 0.2):
        kw["centre"] = (xc, yc)
    for k, v in (("wall_spacing", wall_spacing), ("outlet_spacing", outlet_spacing), ("max_size", max_size),
                 ("ring_radius", ring_radius), ("ring_layers", ring_layers)):
        if v is not None:
            kw[k] = float(v) if k != "ring_layers" else int(v)
    mesh = Mesh.from_arrays(all_pts, cells_all, bnd, source=_fmt(gen, **kw))
    if mesh.notes:
        raise MeshError(f"{mesh.source}: internal error in the generator: {'; '.join(mesh.notes)}")
    return mesh


def cylinder_channel_grid(
    n_cylinder: int = 64,
    cells: str = "triangles",
    length: float = 2.2,
    height: float = 0.41,
    centre: tuple[float, float] = (0.2, 0.2),
    diameter: float = 0.1,
    outlet_stretch: float = 2.5,
) -> Mesh:
    """The channel with a circular cylinder as a block-structured grid that refines systematically:
    an O-grid in the square [0, height] x [0, height] round the cylinder (four blocks from the
    quarter arcs to the square's sides, points on straight rays from the centre, radii growing
    geometrically so the cells stay about as long as high) and a rectangle from x = height to the
    outlet (spacing growing exponentially by ``outlet_stretch`` from its first to its last column).
    ``cells = "triangles"`` splits every quad in two (diagonals alternating), ``"quads"`` keeps them.

    ``n_cylinder`` (a multiple of 16) points on the circle, n_cylinder / 4 along each side of the
    square, 3 n_cylinder / 16 layers across the O-grid and 3 n_cylinder / 4 columns in the
    rectangle: doubling ``n_cylinder`` halves every spacing and keeps every point of the coarser grid
    (nested grids). Patches as :func:`cylinder_channel`. Defaults: the geometry of Schaefer & Turek
    (1996).

    >>> m = cylinder_channel_grid(16)
    >>> m.n_cells, m.patch("cylinder").size, m.patch("inlet").size
    (192, 16, 4)
    """
    gen = "cylinder_channel_grid"
    nc = _count(gen, "n_cylinder", n_cylinder, 16)
    if nc % 16:
        raise MeshError(f"{gen}: parameter n_cylinder = {n_cylinder!r} is out of range; allowed: a multiple of 16")
    if cells not in ("triangles", "quads"):
        raise MeshError(f"{gen}: parameter cells = {cells!r} is not allowed; use 'triangles' or 'quads'")
    L = _positive(gen, "length", length)
    H = _positive(gen, "height", height)
    D = _positive(gen, "diameter", diameter)
    beta = math.log(_positive(gen, "outlet_stretch", outlet_stretch))
    xc, yc = float(centre[0]), float(centre[1])
    rad = 0.5 * D
    if not (L > H and rad < xc < H - rad and rad < yc < H - rad):
        raise MeshError(f"{gen}: parameter centre = {tuple(centre)!r} is out of range; the cylinder must lie inside "
                        f"the square [0, {H:g}]^2 at the channel's inlet ({rad:g} < x, y < {H - rad:g}) and the "
                        "channel must be longer than high")
    q = nc // 4
    m = 3 * nc // 16
    # square corners, counter-clockwise from the lower left, and the sides between them
    corners = np.array([[0.0, 0.0], [H, 0.0], [H, H], [0.0, H]])
    ang_c = np.unwrap(np.arctan2(corners[:, 1] - yc, corners[:, 0] - xc))
    blocks = []
    for k in range(4):
        a0, a1 = ang_c[k], ang_c[(k + 1) % 4]
        if a1 < a0:
            a1 += 2 * np.pi
        t = np.arange(q + 1) / q
        circ = np.stack([xc + rad * np.cos(a0 + t * (a1 - a0)), yc + rad * np.sin(a0 + t * (a1 - a0))], axis=1)
        side = corners[k] + t[:, None] * (corners[(k + 1) % 4] - corners[k])
        reach = np.hypot(side[:, 0] - xc, side[:, 1] - yc)
        # on each ray: radius rad (reach / rad)^(j / m), as a fraction of the way from circle to side
        frac = (rad * (reach[:, None] / rad) ** (np.arange(m + 1)[None, :] / m) - rad) / (reach[:, None] - rad)
        xy = circ[:, None, :] + frac[..., None] * (side - circ)[:, None, :]
        blocks.append(xy)  # (q + 1, m + 1, 2): i along the arc, j outwards
    asm = BlockAssembly()
    split = cells == "triangles"
    asm.add_block("o0", blocks[0], triangles=split)
    asm.add_block("o1", blocks[1], same=(("left", "o0", "right"),), triangles=split)
    asm.add_block("o2", blocks[2], same=(("left", "o1", "right"),), triangles=split)
    asm.add_block("o3", blocks[3], same=(("left", "o2", "right"), ("right", "o0", "left")), triangles=split)
    # the rectangle: columns from x = H to L, exponential stretching; rows = the square's right side
    nx = 3 * nc // 4
    xi = np.arange(nx + 1) / nx
    xs = H + (L - H) * np.expm1(beta * xi) / np.expm1(beta) if beta > 0 else H + (L - H) * xi
    ys = blocks[1][:, -1, 1]  # the square's right side, bottom to top
    asm.add_block("rect", rectangle_points(xs, ys), same=(("left", "o1", "top"),), triangles=split)
    asm.add_patch("cylinder", "o0", "bottom")
    for b in ("o1", "o2", "o3"):
        asm.add_patch("cylinder", b, "bottom")
    asm.add_patch("walls", "o0", "top")
    asm.add_patch("walls", "o2", "top")
    asm.add_patch("walls", "rect", "bottom")
    asm.add_patch("walls", "rect", "top")
    asm.add_patch("inlet", "o3", "top")
    asm.add_patch("outlet", "rect", "right")
    kw: dict = dict(n_cylinder=nc)
    if cells != "triangles":
        kw["cells"] = cells
    for k, v, d in (("length", L, 2.2), ("height", H, 0.41), ("diameter", D, 0.1),
                    ("outlet_stretch", float(outlet_stretch), 2.5)):
        if v != d:
            kw[k] = v
    if (xc, yc) != (0.2, 0.2):
        kw["centre"] = (xc, yc)
    return asm.to_mesh(_fmt(gen, **kw))
