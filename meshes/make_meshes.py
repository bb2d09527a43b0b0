"""Regenerate every bundled mesh file (deterministic): ``python meshes/make_meshes.py [--out meshes/]``.

Files are Gmsh 4.1 binary meshes written by ``fvrans.mesh.io.write_mesh``: each boundary patch is
a named physical line group and the 2D cells one physical surface group. Every file is read back
with ``read_mesh`` and compared (points, cells, patches) before the sizes are printed.

The fine backward-facing-step mesh (110 592 cells, about 8 MB) is larger than the ~5 MB limit for
bundled files: it is not kept in the repository; make it on demand with ``--large`` (or call
``fvrans.mesh.generate.step_family("fine")`` directly).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

try:
    import fvrans  # noqa: F401
except ImportError:  # run from a source checkout without installing the package
    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
from fvrans.mesh import generate as gen
from fvrans.mesh.io import read_mesh, write_mesh
from fvrans.mesh.mesh import Mesh

#: largest file kept in the repository; bigger meshes are made on demand (``--large``)
MAX_BUNDLED_BYTES = 5_000_000

#: file name -> (generator, keyword arguments); all bundled meshes
BUNDLED = {
    "channel_100x40.msh": (gen.channel, dict(length=10.0, height=1.0, nx=100, ny=40)),
    "channel_100x40_tri.msh": (gen.channel, dict(length=10.0, height=1.0, nx=100, ny=40, triangles=True)),
    "cavity_128.msh": (gen.cavity, dict(n=128)),
    "cavity_128_tri.msh": (gen.cavity, dict(n=128, triangles=True)),
    "flat_plate_coarse.msh": (gen.flat_plate_family, dict(level="coarse")),
    "flat_plate_medium.msh": (gen.flat_plate_family, dict(level="medium")),
    "flat_plate_fine.msh": (gen.flat_plate_family, dict(level="fine")),
    "step_coarse.msh": (gen.step_family, dict(level="coarse")),
    "step_medium.msh": (gen.step_family, dict(level="medium")),
    "step_mixed.msh": (gen.step_mixed, dict()),
}

#: made only with --large (too big to keep in the repository)
LARGE = {
    "step_fine.msh": (gen.step_family, dict(level="fine")),
}


def check_readback(mesh: Mesh, path: Path) -> None:
    """Read the file back and compare points, cells (as a set: Gmsh blocks group cells by kind)
    and the named patches."""
    back = read_mesh(path)
    if not np.array_equal(back.points, mesh.points):
        raise RuntimeError(f"{path}: points differ after reading back")

    def cellset(m: Mesh) -> list[tuple[int, ...]]:
        return sorted(tuple(m.cell(c).tolist()) for c in range(m.n_cells))

    if cellset(back) != cellset(mesh):
        raise RuntimeError(f"{path}: cells differ after reading back")
    want = {p.name: p.size for p in mesh.patches}
    got = {p.name: p.size for p in back.patches}
    if got != want:
        raise RuntimeError(f"{path}: read back patches {got}, wrote {want}")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Regenerate the bundled mesh files.")
    ap.add_argument("--out", type=Path, default=Path(__file__).resolve().parent, help="output folder")
    ap.add_argument("--large", action="store_true", help="also make the meshes too large to bundle")
    ap.add_argument("names", nargs="*", help="only these files (default: all)")
    args = ap.parse_args(argv)
    todo = dict(BUNDLED)
    if args.large:
        todo.update(LARGE)
    if args.names:
        unknown = [n for n in args.names if n not in {**BUNDLED, **LARGE}]
        if unknown:
            ap.error(f"unknown mesh file(s) {unknown}; known: {sorted({**BUNDLED, **LARGE})}")
        todo = {n: v for n, v in {**BUNDLED, **LARGE}.items() if n in args.names}
    args.out.mkdir(parents=True, exist_ok=True)
    total = 0
    status = 0
    for name, (fn, kw) in todo.items():
        t0 = time.perf_counter()
        mesh = fn(**kw)
        path = args.out / name
        write_mesh(mesh, path, binary=True)
        check_readback(mesh, path)
        size = path.stat().st_size
        total += size
        n_tri = int(np.sum(mesh.cell_sizes() == 3))
        flag = ""
        if name in BUNDLED and size > MAX_BUNDLED_BYTES:
            flag = "  TOO LARGE to bundle"
            status = 1
        print(
            f"{name:26s} {mesh.n_cells:7d} cells ({mesh.n_cells - n_tri} quads, {n_tri} triangles) "
            f"{mesh.n_points:7d} points {size / 1e6:6.2f} MB {time.perf_counter() - t0:5.1f} s{flag}"
        )
    print(f"{'total':26s} {total / 1e6:.2f} MB")
    return status


if __name__ == "__main__":
    raise SystemExit(main())
