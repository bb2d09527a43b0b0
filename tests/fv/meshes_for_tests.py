"""Small in-memory meshes of the unit square for the finite-volume tests.

Patches: 'left' (x = 0), 'right' (x = lx), 'bottom' (y = 0), 'top' (y = ly). ``perturb`` moves
every interior point by a uniform random amount in [-perturb, perturb] times the spacing in each
coordinate (seeded), which keeps the cells convex for perturb <= 0.25.
"""

from __future__ import annotations

import numpy as np

from fvrans.mesh import Mesh, compute_geometry


def _grid(nx: int, ny: int, lx: float, ly: float, perturb: float, seed: int):
    x = np.linspace(0.0, lx, nx + 1)
    y = np.linspace(0.0, ly, ny + 1)
    X, Y = np.meshgrid(x, y)  # (ny+1, nx+1), point (i, j) -> j*(nx+1)+i
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)
    if perturb > 0.0:
        rng = np.random.default_rng(seed)
        i = np.tile(np.arange(nx + 1), ny + 1)
        j = np.repeat(np.arange(ny + 1), nx + 1)
        inner = (i > 0) & (i < nx) & (j > 0) & (j < ny)
        shift = rng.uniform(-perturb, perturb, size=(inner.sum(), 2)) * [lx / nx, ly / ny]
        pts[inner] += shift
    ii, jj = np.meshgrid(np.arange(nx), np.arange(ny))
    ii, jj = ii.ravel(), jj.ravel()

    def p(i, j):
        return j * (nx + 1) + i

    corners = np.stack([p(ii, jj), p(ii + 1, jj), p(ii + 1, jj + 1), p(ii, jj + 1)], axis=1)
    ib = np.arange(nx)
    jb = np.arange(ny)
    boundary = {
        "left": np.stack([p(0, jb), p(0, jb + 1)], axis=1),
        "right": np.stack([p(nx, jb), p(nx, jb + 1)], axis=1),
        "bottom": np.stack([p(ib, 0), p(ib + 1, 0)], axis=1),
        "top": np.stack([p(ib, ny), p(ib + 1, ny)], axis=1),
    }
    return pts, corners, ii + jj, boundary


def quad_mesh(nx: int, ny: int | None = None, lx: float = 1.0, ly: float = 1.0,
              perturb: float = 0.0, seed: int = 0) -> Mesh:
    """nx x ny quadrilaterals on [0, lx] x [0, ly]."""
    ny = nx if ny is None else ny
    pts, corners, _, bnd = _grid(nx, ny, lx, ly, perturb, seed)
    return Mesh.from_arrays(pts, corners, bnd, source=f"quads {nx}x{ny} perturb {perturb}")


def tri_mesh(n: int, perturb: float = 0.0, seed: int = 0) -> Mesh:
    """n x n squares each split into two triangles along the same diagonal."""
    pts, c, _, bnd = _grid(n, n, 1.0, 1.0, perturb, seed)
    tris = np.concatenate([c[:, [0, 1, 2]], c[:, [0, 2, 3]]])
    return Mesh.from_arrays(pts, tris, bnd, source=f"triangles {n}x{n} perturb {perturb}")


def mixed_mesh(n: int, perturb: float = 0.0, seed: int = 0) -> Mesh:
    """Checkerboard of quads and squares split into two triangles (alternating diagonals)."""
    pts, c, parity, bnd = _grid(n, n, 1.0, 1.0, perturb, seed)
    quad = parity % 2 == 0
    cells: list = [row for row in c[quad]]
    tc = c[~quad]
    alt = (np.arange(len(tc)) // 2) % 2 == 0
    cells += list(np.where(alt[:, None], tc[:, [0, 1, 2]], tc[:, [1, 2, 3]]))
    cells += list(np.where(alt[:, None], tc[:, [0, 2, 3]], tc[:, [1, 3, 0]]))
    return Mesh.from_arrays(pts, cells, bnd, source=f"mixed {n}x{n} perturb {perturb}")


MESH_KINDS = {
    "quad": lambda n: quad_mesh(n),
    "tri": lambda n: tri_mesh(n),
    "mixed": lambda n: mixed_mesh(n),
    "perturbed_quad": lambda n: quad_mesh(n, perturb=0.25, seed=n),
    "perturbed_mixed": lambda n: mixed_mesh(n, perturb=0.2, seed=n + 1),
}


def mesh_and_geometry(kind: str, n: int):
    m = MESH_KINDS[kind](n)
    return m, compute_geometry(m)
