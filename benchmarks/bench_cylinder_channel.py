"""Cylinder in a channel at Re = 20 (Schaefer & Turek 1996, steady case 2D-1) on nested grids:
drag, lift and the front-back pressure difference against the published ranges, and the cost.

Runs cases/cylinder_channel_re20.toml with ``n_cylinder`` points round the cylinder (default 48,
96, 192: the grids of tests/verification/test_cylinder_channel.py; add 384 for a 110 592-cell
grid) and prints per grid: cells, iterations, seconds (numba compilation excluded by a warm-up
run), microseconds per cell and iteration and that over a numpy triad ``a = b + s*c`` on arrays
of cell length timed in the same run, then Cd, Cl (with their pressure and viscous parts) and
dp = p(0.15, 0.2) - p(0.25, 0.2) (the case's point probes and derived scalar), and whether each
lies in the range of the benchmark's participants (Cd 5.57 .. 5.59, Cl 0.0104 .. 0.0110, dp
0.1172 .. 0.1176; from memory). No assertions.

Run:  python benchmarks/bench_cylinder_channel.py [--levels 48 96 192] [--generator cylinder_channel_grid]

Measured (2 cores shared with other jobs; tolerance 1e-8, from the uniform start):

    n   cells  iters  seconds  us/cell/it  /triad  Cd       Cl        dp
   48   1 728    290      0.6        1.13    1700  5.59379  0.013949  0.11830
   96   6 912    371      2.0        0.79    1771  5.57943  0.011816  0.11770
  192  27 648    444     12.9        1.05    2804  5.57883  0.010952  0.11757   (all three in the ranges)

(the runs end when the monitors of drag, lift and the probes have settled, which takes more
iterations than the residuals alone: 290, 287, 308 to residuals 1e-8)
(Cd parts, pressure / viscous: 3.65286 / 1.94093, 3.63136 / 1.94807, 3.63071 / 1.94812)
and one level finer on the nested family (64 / 128 / 256, up to 49 152 cells): Cd 5.58548, 5.57874,
5.57903; Cl 0.012904, 0.011328, 0.010818; dp (from the wall pressures) 0.11819, 0.11764, 0.11756.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from triad import triad_seconds

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[1]
CASE = ROOT / "cases" / "cylinder_channel_re20.toml"
RANGES = {"Cd": (5.57, 5.59), "Cl": (0.0104, 0.0110), "dp": (0.1172, 0.1176)}  # Schaefer & Turek (1996), from memory


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--levels", nargs="+", type=int, default=[48, 96, 192])
    ap.add_argument("--generator", default="cylinder_channel_grid",
                    help="cylinder_channel_grid (nested, default) or cylinder_channel (polar ring + unstructured)")
    args = ap.parse_args(argv)
    case = fa.load_case(CASE).set("mesh.generator", args.generator)
    print("warm-up (numba compilation) ...", flush=True)
    fa.solve(case.replace({"mesh.parameters": {"n_cylinder": 16 if args.generator.endswith("grid") else 8},
                           "solver.max_iterations": 3}))
    print(f"{'n':>4} {'cells':>7} {'iters':>6} {'conv':>4} {'seconds':>8} {'us/c/it':>8} {'/triad':>7}"
          f" {'Cd':>8} {'Cd_p':>8} {'Cd_v':>8} {'Cl':>9} {'dp':>8}  in ranges")
    for n in args.levels:
        r = fa.solve(case.set("mesh.parameters", {"n_cylinder": n}))
        f = r.summary()["walls"]["cylinder"]["forces"]
        dp = r.summary()["derived"]["dp"]  # the case's point probes front, back
        cells = r.mesh.n_cells
        us = r.wall_seconds / max(r.iterations, 1) / cells * 1e6
        triad = triad_seconds(cells) / cells * 1e6
        inside = [k for k, v in (("Cd", f["Cd"]), ("Cl", f["Cl"]), ("dp", dp)) if RANGES[k][0] <= v <= RANGES[k][1]]
        print(f"{n:>4} {cells:>7} {r.iterations:>6} {int(r.converged):>4} {r.wall_seconds:>8.1f} {us:>8.2f} "
              f"{us / triad:>7.0f} {f['Cd']:>8.5f} {f['Cd_pressure']:>8.5f} {f['Cd_viscous']:>8.5f} {f['Cl']:>9.6f} "
              f"{dp:>8.5f}  {', '.join(inside) or '-'}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
