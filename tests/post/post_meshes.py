"""Small in-memory meshes for the post-processing tests.

``channel``: the rectangle [0, length] x [0, height] (optionally rotated about the origin) with
patches 'bottom', 'top' (walls), 'inlet' (x = 0) and 'outlet' (x = length); quads, or each quad
split into two triangles; interior points may be moved at random (seeded).
``square_with_hole``: [0, 4]^2 minus the square body [1, 3]^2, patches 'outer' and 'body'.
``mixed_cells``: a hexagon surrounded by triangles, quads and a pentagon, patch 'outer'.
"""

from __future__ import annotations

import numpy as np

from fvrans.mesh import Mesh, compute_geometry
from fvrans.physics.boundary import build_flow_boundary


def rotation(angle: float) -> np.ndarray:
    c, s = np.cos(angle), np.sin(angle)
    return np.array([[c, -s], [s, c]])


def boundary_edges(cells) -> np.ndarray:
    """Edges used by exactly one cell, as point pairs."""
    count: dict[tuple[int, int], list[int]] = {}
    for c in cells:
        for a, b in zip(c, list(c[1:]) + [c[0]]):
            count.setdefault((min(a, b), max(a, b)), []).append(1)
    return np.array([e for e, v in count.items() if len(v) == 1])


def channel(nx: int, ny: int, length: float = 2.0, height: float = 1.0, triangles: bool = False,
            perturb: float = 0.0, angle: float = 0.0, seed: int = 1):
    x = np.linspace(0.0, length, nx + 1)
    y = np.linspace(0.0, height, ny + 1)
    X, Y = np.meshgrid(x, y)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)
    i = np.tile(np.arange(nx + 1), ny + 1)
    j = np.repeat(np.arange(ny + 1), nx + 1)
    if perturb > 0:
        inner = (i > 0) & (i < nx) & (j > 0) & (j < ny)
        rng = np.random.default_rng(seed)
        pts[inner] += rng.uniform(-perturb, perturb, (inner.sum(), 2)) * [length / nx, height / ny]

    def p(a, b):
        return b * (nx + 1) + a

    cells = []
    for b in range(ny):
        for a in range(nx):
            q = [p(a, b), p(a + 1, b), p(a + 1, b + 1), p(a, b + 1)]
            if triangles:
                cells += [[q[0], q[1], q[2]], [q[0], q[2], q[3]]]
            else:
                cells.append(q)
    bnd = {
        "bottom": [[p(a, 0), p(a + 1, 0)] for a in range(nx)],
        "top": [[p(a, ny), p(a + 1, ny)] for a in range(nx)],
        "inlet": [[p(0, b), p(0, b + 1)] for b in range(ny)],
        "outlet": [[p(nx, b), p(nx, b + 1)] for b in range(ny)],
    }
    pts = pts @ rotation(angle).T
    mesh = Mesh.from_arrays(pts, cells, bnd, source="channel")
    return mesh, compute_geometry(mesh)


def channel_boundary(mesh, geom, top_velocity=(0.0, 0.0), specs=None, inlet_velocity=(1.0, 0.0)):
    """Walls 'bottom' and 'top' (moving with ``top_velocity``), a velocity inlet and a pressure
    outlet. The wall gradient takes the inlet velocity as data at the corner cells, so a test with
    a given velocity field passes the field's own values there (``inlet_velocity`` may be a
    function of x, y)."""
    specs = specs or {
        "bottom": {"kind": "wall"},
        "top": {"kind": "wall", "velocity": top_velocity},
        "inlet": {"kind": "inflow-velocity", "velocity": inlet_velocity},
        "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
    }
    return build_flow_boundary(mesh, geom, specs)


def cell_averages(mesh, geom, field):
    """Exact cell averages of a polynomial velocity field of degree <= 2, field(x, y) -> (n, 2):
    the centroid value plus H : I / 2 with the second derivatives H taken by central differences
    of step 1 (exact for quadratics) and the cells' central second moments I."""
    from fvrans.mesh.geometry import polygon_second_moments

    xc = geom.cell_centre
    moments = polygon_second_moments(mesh.points, mesh.cell_offsets, mesh.cell_points, xc)

    def f(dx, dy):
        return np.asarray(field(xc[:, 0] + dx, xc[:, 1] + dy), dtype=float)

    f0 = f(0.0, 0.0)
    hxx = f(1.0, 0.0) - 2 * f0 + f(-1.0, 0.0)
    hyy = f(0.0, 1.0) - 2 * f0 + f(0.0, -1.0)
    hxy = 0.25 * (f(1.0, 1.0) - f(1.0, -1.0) - f(-1.0, 1.0) + f(-1.0, -1.0))
    return f0 + 0.5 * (hxx * moments[:, :1] + 2 * hxy * moments[:, 1:2] + hyy * moments[:, 2:])


def square_with_hole(n: int = 4):
    """[0, 4]^2 on an n-per-unit grid without the cells inside [1, 3]^2."""
    m = 4 * n
    x = np.linspace(0.0, 4.0, m + 1)
    X, Y = np.meshgrid(x, x)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)

    def p(a, b):
        return b * (m + 1) + a

    cells = []
    for b in range(m):
        for a in range(m):
            if n <= a < 3 * n and n <= b < 3 * n:
                continue
            cells.append([p(a, b), p(a + 1, b), p(a + 1, b + 1), p(a, b + 1)])
    edges = boundary_edges(cells)
    mid = 0.5 * (pts[edges[:, 0]] + pts[edges[:, 1]])
    outer = np.any((mid < 1e-12) | (mid > 4.0 - 1e-12), axis=1)
    mesh = Mesh.from_arrays(pts, cells, {"outer": edges[outer], "body": edges[~outer]}, source="hole")
    return mesh, compute_geometry(mesh)


def mixed_cells():
    """A hexagon with, on its six edges: quad, triangle, pentagon, triangle, quad, quad."""
    ang = np.radians(60.0 * np.arange(6))
    v = np.stack([np.cos(ang), np.sin(ang)], axis=1)
    pts = list(v) + list(2.0 * v)  # 0..5 inner ring, 6..11 outer ring

    def apex(i, r):
        a = np.radians(60.0 * i + 30.0)
        pts.append(r * np.array([np.cos(a), np.sin(a)]))
        return len(pts) - 1

    def nx(i):
        return (i + 1) % 6

    cells = [
        [1, apex(1, 1.5), 2],  # triangle on edge 1
        list(range(6)),  # hexagon
        [0, 6, 7, 1],  # quad on edge 0
        [2, 8, apex(2, 2.5), 9, 3],  # pentagon on edge 2
        [3, apex(3, 1.5), 4],  # triangle on edge 3
        [4, 10, 11, 5],  # quad on edge 4
        [5, 11, 6, 0],  # quad on edge 5
    ]
    assert all(len(c) >= 3 for c in cells) and nx(5) == 0
    mesh = Mesh.from_arrays(np.array(pts), cells, {"outer": boundary_edges(cells)}, source="mixed")
    return mesh
