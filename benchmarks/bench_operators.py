"""Speed of the finite-volume kernels on uniform quad meshes of about 10k, 100k and 400k cells.

For each kernel: best time of several repeats after a warm-up call (numba compilation
excluded), in nanoseconds per face and as a ratio to a numpy triad ``a = b + s*c`` over arrays
of length n_faces timed in the same run. Run:  python benchmarks/bench_operators.py [--quick]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from fvrans.fv import BoundaryScalar, Coefficients, CsrAssembler, LeastSquaresGradient
from fvrans.fv import _assembly_kernels as ak
from fvrans.fv import _gradient_kernels as gk
from fvrans.fv import _operator_kernels as ok
from fvrans.mesh import Mesh, compute_geometry


def structured_quads(n: int) -> Mesh:
    """n x n unit-square quads with patches left/right/bottom/top (vectorised)."""
    x = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(x, x)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)
    i, j = (a.ravel() for a in np.meshgrid(np.arange(n), np.arange(n)))

    def p(i, j):
        return j * (n + 1) + i

    cells = np.stack([p(i, j), p(i + 1, j), p(i + 1, j + 1), p(i, j + 1)], axis=1)
    k = np.arange(n)
    bnd = {
        "left": np.stack([p(0, k), p(0, k + 1)], axis=1),
        "right": np.stack([p(n, k), p(n, k + 1)], axis=1),
        "bottom": np.stack([p(k, 0), p(k + 1, 0)], axis=1),
        "top": np.stack([p(k, n), p(k + 1, n)], axis=1),
    }
    return Mesh.from_arrays(pts, cells, bnd, source=f"structured {n}x{n}")


def best_time(fn, repeats: int) -> float:
    fn()  # warm-up (compiles on first use)
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def run(n: int, repeats: int) -> list[tuple[str, float, float]]:
    m = structured_quads(n)
    g = compute_geometry(m)
    nf, nfi, nc = m.n_faces, m.n_internal_faces, m.n_cells
    own, nb = m.face_owner, m.face_neighbour
    rng = np.random.default_rng(0)
    phi = rng.random(nc)
    phi_b = rng.random(m.n_boundary_faces)
    grad = rng.random((nc, 2))
    out = np.empty((nc, 2))
    lsq = LeastSquaresGradient(m, g)
    bc = BoundaryScalar.uniform(m, 0, 1.0)
    gamma_f = np.ones(nf)
    flux = g.face_area_vector @ np.array([1.0, 0.5])
    co = Coefficients.zeros(m)
    asm = CsrAssembler(m)
    work = np.empty((nc, 2))
    res_out = np.empty(nc)

    b_arr = rng.random(nf)
    c_arr = rng.random(nf)
    s = 1.7

    def triad():
        a = b_arr + s * c_arr  # noqa: F841

    kernels = {
        "triad a = b + s*c": triad,
        "gradient least squares": lambda: gk.lsq_gradient(
            own, nb, nfi, *m.cell_faces, lsq.weighted_delta, lsq.inverse_matrix, phi, phi_b, out
        ),
        "gradient Green-Gauss (1 pass, skew)": lambda: gk.green_gauss_pass(
            own, nb, nfi, *m.cell_faces, g.face_area_vector, g.face_weight, g.face_skew, g.cell_area, phi, phi_b,
            grad, True, work,
        ),
        "diffusion + non-orth. correction": lambda: ok.diffusion(
            own, nb, nfi, g.face_area_vector, g.face_delta, g.face_weight, gamma_f, bc.kind, bc.value, grad,
            True, co.diag, co.off_owner, co.off_neighbour, co.source,
        ),
        "convection linear upwind": lambda: ok.convection(
            own, nb, nfi, flux, phi_b, g.face_centre, g.cell_centre, grad, True,
            co.diag, co.off_owner, co.off_neighbour, co.source,
        ),
        "CSR refill": lambda: ak.csr_refill(
            asm._indptr, *m.cell_faces, asm.diag_pos, asm.owner_pos, asm.neigh_pos, co.diag, co.off_owner,
            co.off_neighbour, asm._data,
        ),
        "residual b - A phi": lambda: ak.residual(
            own, nb, co.diag, co.off_owner, co.off_neighbour, co.source, phi, res_out
        ),
    }
    times = {name: best_time(fn, repeats) for name, fn in kernels.items()}
    t_triad = times["triad a = b + s*c"]
    print(f"\nmesh {m.source}: {nc} cells, {nf} faces")
    print(f"{'kernel':38s} {'best ms':>9s} {'ns/face':>9s} {'x triad':>8s}")
    rows = []
    for name, t in times.items():
        print(f"{name:38s} {t * 1e3:9.3f} {t / nf * 1e9:9.2f} {t / t_triad:8.2f}")
        rows.append((name, t / nf * 1e9, t / t_triad))
    return rows


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="only the 10k-cell mesh")
    ap.add_argument("--repeats", type=int, default=7)
    args = ap.parse_args()
    sizes = (100,) if args.quick else (100, 316, 632)
    for n in sizes:
        run(n, args.repeats)


if __name__ == "__main__":
    main()
