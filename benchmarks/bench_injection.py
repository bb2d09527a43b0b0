"""Reynolds-stress injection (model 'reference-stress') on the bundled grids: explicit against implicit.

Two tables (a shared machine: times are indicative, the ratio to a numpy triad timed in the same run
is printed beside them):

1. Self-consistency: fvrans's own converged Spalart-Allmaras run is written to a result folder,
   its stresses -2 mu_t S read back from fields.vtu and injected into the same case from the uniform
   start; the largest velocity difference from the SA run over the free-stream speed, for each
   form. Cases: the flat plate on its coarse and medium grids, the step (Re_H = 36 000) on its
   coarse grid and on the small Re_H = 5 000 step of the tests.
2. Conditioning: the half channel of tests/verification/test_reference_channel.py (Reichardt 1951,
   from memory) with 1 % seeded noise on R_xy, at Re_tau 180, 550, 2000 and 5200, 128 cells; the
   velocity's answer to the noise max |u_noisy - u_clean| / U_centre and its L2 norm, mean over
   five seeds, explicit and implicit.

Run:  python benchmarks/bench_injection.py [--quick]   (--quick: the coarse grids only)
"""

from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import fvrans.api as fa  # noqa: E402
from fvrans.reference.analytic import channel_reference  # noqa: E402

STEP_SMALL = {"x_in": -4.0, "x_out": 30.0, "nx_up": 12, "nx_down": 36, "ny_upper": 24, "ny_lower": 16,
              "wall_spacing": 2e-3, "corner_spacing": 8e-3, "outlet_spacing": 1.0}


def triad_seconds(n: int = 2_000_000, repeat: int = 5) -> float:
    a, b, c = np.ones(n), np.ones(n), np.ones(n)
    best = np.inf
    for _ in range(repeat):
        t = time.perf_counter()
        np.add(b, 2.5 * c, out=a)
        best = min(best, time.perf_counter() - t)
    return best


def cases(quick: bool) -> dict[str, fa.Case]:
    plate = fa.load_case(ROOT / "cases" / "flat_plate_turbulent.toml")
    step = fa.load_case(ROOT / "cases" / "step_coarse.toml").set("solver.tolerance", 1e-8)
    out = {
        "plate coarse (3 264 cells)": plate.set("mesh.file", str(ROOT / "meshes" / "flat_plate_coarse.msh")),
        "step Re_H 5 000 (1 728 cells)": step.replace({"mesh.file": None, "mesh.generator": "backward_facing_step",
                                                        "mesh.parameters": STEP_SMALL, "fluid.viscosity": 2e-4}),
    }
    if not quick:
        out["plate medium (13 056 cells)"] = plate
        out["step coarse Re_H 36 000 (6 912 cells)"] = step.set("solver.max_iterations", 6000)
    return out


def self_consistency(quick: bool) -> None:
    print("\n1. Own SA stresses injected (from the result folder), max |u - u_SA| / U, uniform start")
    print(f"{'case':40s} {'SA its':>7s} {'form':>9s} {'its':>6s} {'stopped by':>16s} {'max |du|/U':>11s} "
          f"{'Cd or Cf diff':>13s} {'s':>6s}")
    for label, case in cases(quick).items():
        t0 = time.perf_counter()
        sa = fa.solve(case)
        t_sa = time.perf_counter() - t0
        folder = Path(tempfile.mkdtemp(prefix="bench_injection_"))
        sa.write(folder)
        wall = case.output.wall_patches[0]
        for form in ("implicit", "explicit"):
            c = case.replace({"model.turbulence": "reference-stress", "model.stress_form": form,
                              "reference.data": str(folder)})
            t0 = time.perf_counter()
            r = fa.solve(c)
            dt = time.perf_counter() - t0
            du = float(np.abs(r.velocity - sa.velocity).max())
            cd = r.summary()["walls"][wall]["forces"]["Cd"] / sa.summary()["walls"][wall]["forces"]["Cd"] - 1
            print(f"{label:40s} {sa.iterations:7d} {form:>9s} {r.iterations:6d} {r.stopped_by:>16s} {du:11.2e} "
                  f"{cd:13.2e} {dt:6.1f}")
        print(f"{'':40s} (SA run {t_sa:.1f} s, {sa.stopped_by})")


def channel(n: int, re_tau: float, form: str, noise: float, seed: int, gamma: float) -> tuple[np.ndarray, np.ndarray]:
    eta = np.linspace(0.0, 1.0, n + 1)
    pts = (1.0 - np.tanh(gamma * (1.0 - eta)) / np.tanh(gamma)).tolist()
    problem = fa.prepare(fa.case_from_dict({
        "mesh": {"generator": "channel", "parameters": {"length": 0.1, "height": 1.0, "nx": 1, "ny": n,
                                                        "grading_y": pts},
                 "periodic_pairs": [["inlet", "outlet"]]},
        "fluid": {"density": 1.0, "viscosity": 1.0 / re_tau},
        "model": {"turbulence": "reference-stress", "stress_form": form},
        "mean_flow": {"pressure_gradient": [-1.0, 0.0]},
        "boundary": {"lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "symmetry"}},
        "solver": {"tolerance": 1e-10, "max_iterations": 500, "relax_velocity": 1.0, "momentum_tolerance": 1e-8,
                   "momentum_max_iterations": 200},
    }))
    ref = channel_reference(problem.geom.cell_centre[:, 1], re_tau)
    if noise:
        ref["R_xy"] = ref["R_xy"] * (1.0 + noise * np.random.default_rng(seed).standard_normal(n))
    r = fa.solve(problem, reference=ref)
    return r.velocity[:, 0], ref["u"]


def conditioning() -> None:
    print("\n2. Half channel (Reichardt 1951), 128 cells, 1 % seeded noise on R_xy: the velocity's answer, mean of "
          "5 seeds")
    print(f"{'Re_tau':>7s} {'y+ 1st':>7s} {'form':>9s} {'clean max err':>13s} {'noise max':>10s} {'noise L2':>10s}")
    for re_tau, gamma in ((180.0, 2.5), (550.0, 3.0), (2000.0, 3.5), (5200.0, 4.0)):
        for form in ("explicit", "implicit"):
            clean, exact = channel(128, re_tau, form, 0.0, 0, gamma)
            mx, l2 = [], []
            for seed in range(5):
                noisy, _ = channel(128, re_tau, form, 0.01, seed, gamma)
                d = (noisy - clean) / exact.max()
                mx.append(np.abs(d).max())
                l2.append(np.sqrt(np.mean(d * d)))
            first = (1.0 - np.tanh(gamma * (1.0 - 1.0 / 128)) / np.tanh(gamma)) / 2 * re_tau
            print(f"{re_tau:7.0f} {first:7.2f} {form:>9s} {np.abs(clean - exact).max() / exact.max():13.2e} "
                  f"{np.mean(mx):10.2e} {np.mean(l2):10.2e}")


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true", help="the small grids only")
    args = p.parse_args(argv)
    t = triad_seconds()
    print(f"numpy triad (2e6 doubles): {t * 1e3:.2f} ms (shared machine: times indicative)")
    conditioning()
    self_consistency(args.quick)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
