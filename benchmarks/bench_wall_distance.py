"""Speed of the exact wall distance on point sets shaped like cell centres of 10k, 100k and 400k cells.

Cases (wall faces M, query points N):
* ``o-grid``: cell centres of an O-grid around a circle of radius 1 (M faces round the wall,
  N / M layers growing geometrically out to 50 radii), the usual RANS layout;
* ``channel``: a uniform grid between two flat walls 1 apart (M / 2 faces each, length 10);
* ``box+cylinder``: uniform random points in a 40 x 40 box around a circular wall (most points far
  from the wall, where the search has the least help from the mesh layout).

For each: tree build time, query time (best of a few repeats after a warm-up call, numba
compilation excluded), and the ratio to a vectorised numpy brute force O(N M) where that is
affordable (N M <= 2e8), whose result is also compared. Run:
python benchmarks/bench_wall_distance.py [--quick]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from fvrans.physics.wall_distance import SegmentTree, wall_distance


def circle_segments(m: int, R: float = 1.0) -> np.ndarray:
    th = np.linspace(0.0, 2.0 * np.pi, m + 1)
    v = R * np.stack([np.cos(th), np.sin(th)], axis=1)
    return np.stack([v[:-1], v[1:]], axis=1)


def o_grid(n: int, m: int) -> tuple[np.ndarray, np.ndarray]:
    layers = max(2, n // m)
    r = np.geomspace(1.0, 50.0, layers + 1)
    rc = 0.5 * (r[1:] + r[:-1])
    th = (np.arange(m) + 0.5) * 2.0 * np.pi / m
    R, T = np.meshgrid(rc, th)
    pts = np.stack([(R * np.cos(T)).ravel(), (R * np.sin(T)).ravel()], axis=1)
    return pts, circle_segments(m)


def channel(n: int, m: int) -> tuple[np.ndarray, np.ndarray]:
    nx = m // 2
    ny = max(2, n // nx)
    x = np.linspace(0.0, 10.0, nx + 1)
    xc, yc = 0.5 * (x[1:] + x[:-1]), (np.arange(ny) + 0.5) / ny
    X, Y = np.meshgrid(xc, yc)
    pts = np.stack([X.ravel(), Y.ravel()], axis=1)
    low = np.stack([np.stack([x[:-1], 0 * x[:-1]], 1), np.stack([x[1:], 0 * x[1:]], 1)], axis=1)
    high = low.copy()
    high[:, :, 1] = 1.0
    return pts, np.concatenate([low, high])


def box_cylinder(n: int, m: int) -> tuple[np.ndarray, np.ndarray]:
    pts = np.random.default_rng(0).uniform(-20.0, 20.0, (n, 2))
    return pts, circle_segments(m)


def brute_force(points: np.ndarray, segments: np.ndarray, chunk: int = 2048) -> np.ndarray:
    a = segments[:, 0, :]
    e = segments[:, 1, :] - a
    l2 = np.einsum("ij,ij->i", e, e)
    out = np.empty(len(points))
    for lo in range(0, len(points), chunk):
        p = points[lo : lo + chunk, None, :]
        t = np.clip(np.einsum("nmk,mk->nm", p - a[None], e) / l2, 0.0, 1.0)
        q = a[None] + t[..., None] * e[None]
        out[lo : lo + chunk] = np.sqrt(np.sum((p - q) ** 2, axis=2)).min(axis=1)
    return out


def best_time(fn, repeats: int) -> float:
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t0)
    return best


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10k and 100k cells only, no brute force above 2e7 pairs")
    args = ap.parse_args()
    sizes = [(10_000, 200), (100_000, 1000), (400_000, 2000)]
    if args.quick:
        sizes = sizes[:2]
    limit = 2e7 if args.quick else 2e8
    wall_distance(np.zeros((1, 2)), circle_segments(64))  # compile / load the kernels
    print(f"{'case':>13} {'N':>7} {'M':>5} {'build s':>9} {'query s':>9} {'us/point':>9} {'brute s':>8} {'ratio':>7}")
    for n, m in sizes:
        for name, make in (("o-grid", o_grid), ("channel", channel), ("box+cylinder", box_cylinder)):
            pts, seg = make(n, m)
            t_build = best_time(lambda seg=seg: SegmentTree(seg), 3)
            tree = SegmentTree(seg)
            t_query = best_time(lambda tree=tree, pts=pts: tree.query(pts), 3)
            total = t_build + t_query
            brute, ratio = "n/a", "n/a"
            if len(pts) * len(seg) <= limit:
                t0 = time.perf_counter()
                ref = brute_force(pts, seg)
                tb = time.perf_counter() - t0
                err = np.max(np.abs(tree.query(pts)[0] - ref))
                assert err < 1e-12, f"{name}: differs from brute force by {err:.3g}"
                brute, ratio = f"{tb:8.2f}", f"{tb / total:7.0f}"
            print(
                f"{name:>13} {len(pts):7d} {len(seg):5d} {t_build:9.4f} {t_query:9.4f} "
                f"{1e6 * t_query / len(pts):9.3f} {brute:>8} {ratio:>7}"
            )


if __name__ == "__main__":
    main()
