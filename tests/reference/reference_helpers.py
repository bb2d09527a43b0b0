"""Helpers for the reference-field tests: small meshes with data written as VTU (meshio), Gmsh 2.2
(written by hand in the file format, with $NodeData / $ElementData) and CSV point clouds."""

from __future__ import annotations

from pathlib import Path

import meshio
import numpy as np


def quad_grid(nx: int, ny: int, lx: float = 2.0, ly: float = 1.0, notch: bool = False):
    """Points (np, 2) and quads (nc, 4) of a uniform grid on [0, lx] x [0, ly]; ``notch`` leaves out
    the cells of the upper right quarter (an L-shaped, concave mesh)."""
    xs, ys = np.linspace(0.0, lx, nx + 1), np.linspace(0.0, ly, ny + 1)
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    pts = np.column_stack([X.ravel(), Y.ravel()])
    idx = np.arange(X.size).reshape(nx + 1, ny + 1)
    quads = np.column_stack([idx[:-1, :-1].ravel(), idx[1:, :-1].ravel(), idx[1:, 1:].ravel(), idx[:-1, 1:].ravel()])
    if notch:
        c = pts[quads].mean(axis=1)
        quads = quads[~((c[:, 0] > lx / 2) & (c[:, 1] > ly / 2))]
        used = np.unique(quads)
        new = -np.ones(len(pts), dtype=np.int64)
        new[used] = np.arange(len(used))
        pts, quads = pts[used], new[quads]
    return pts, quads


def centres(pts: np.ndarray, quads: np.ndarray) -> np.ndarray:
    return pts[quads].mean(axis=1)


def write_vtu(path: Path, pts, quads, point_data=None, cell_data=None) -> Path:
    p3 = np.column_stack([pts, np.zeros(len(pts))])
    cd = {k: [np.asarray(v)] for k, v in (cell_data or {}).items()}
    meshio.write(path, meshio.Mesh(p3, [("quad", quads)], point_data=point_data or {}, cell_data=cd),
                 file_format="vtu")
    return path


def _data_block(kind: str, name: str, values: np.ndarray) -> list[str]:
    v = np.asarray(values, dtype=float).reshape(len(values), -1)
    lines = [f"${kind}", "1", f'"{name}"', "1", "0.0", "3", "0", str(v.shape[1]), str(len(v))]
    lines += [f"{i + 1} " + " ".join(repr(float(x)) for x in row) for i, row in enumerate(v)]
    return lines + [f"$End{kind}"]


def write_gmsh22(path: Path, pts, quads, node_data=None, element_data=None) -> Path:
    """A Gmsh 2.2 ASCII file: nodes, quad elements (type 3), one $NodeData / $ElementData block per field."""
    out = ["$MeshFormat", "2.2 0 8", "$EndMeshFormat", "$Nodes", str(len(pts))]
    out += [f"{i + 1} {x!r} {y!r} 0.0" for i, (x, y) in enumerate(pts.tolist())]
    out += ["$EndNodes", "$Elements", str(len(quads))]
    out += [f"{e + 1} 3 2 1 1 " + " ".join(str(int(q) + 1) for q in quad) for e, quad in enumerate(quads)]
    out += ["$EndElements"]
    for name, v in (node_data or {}).items():
        out += _data_block("NodeData", name, v)
    for name, v in (element_data or {}).items():
        out += _data_block("ElementData", name, v)
    Path(path).write_text("\n".join(out) + "\n")
    return Path(path)


def write_cloud(path: Path, columns: dict[str, np.ndarray]) -> Path:
    names = list(columns)
    rows = np.column_stack([np.asarray(columns[n], dtype=float) for n in names])
    text = "# a point cloud\n" + ",".join(names) + "\n" + "\n".join(",".join(repr(float(x)) for x in r) for r in rows)
    Path(path).write_text(text + "\n")
    return Path(path)


def linear(x, y, a=1.0, b=2.0, c=-3.0):
    """A field linear in x and y, reproduced exactly by every linear interpolation."""
    return a + b * x + c * y
