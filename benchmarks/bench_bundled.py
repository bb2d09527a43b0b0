"""Bundled cases at their own settings: outer iterations, seconds and the iteration error left.

For each case: the run at the case's settings (optionally from rest: ``--cold`` sets
``initial.velocity = [0, 0]``; any ``--set key=value`` applies to every case), then the distance
of its velocity from the fully converged answer, max over cells of |u - u_conv| / U_ref
(U_ref the run's reference velocity, ``Result.force_reference()``), with u_conv the same case run on to
residuals 1e-11 from the result (cached in ``--reference-dir``; the converged answer depends neither on the start nor
on the residual definition). Printed per case: cells, converged flag, iterations, seconds,
microseconds per cell and iteration, that cost over a numpy triad ``a = b + s*c`` on arrays of
cell length timed in the same run, and the error. Numba compilation is excluded by a warm-up
run. No assertions; timings on a shared machine are noisy, the ratio to the triad less so.

``channel_re800`` is the channel at Re_h = 800 (viscosity 0.00125), the cold start of #14.

Run:  python benchmarks/bench_bundled.py [--cases channel cavity ...] [--cold] [--set key=value ...]
                                         [--reference-dir runs/bench_reference] [--no-reference]
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np
from triad import triad_seconds

import fvrans.api as fa

ROOT = Path(__file__).resolve().parents[1]
#: short name -> (case file, overrides)
CASES = {
    "channel": ("channel_poiseuille.toml", {}),
    "channel_re800": ("channel_poiseuille.toml", {"fluid.viscosity": 0.00125}),  # the reproduction of #14
    "step_laminar": ("step_laminar.toml", {}),
    "cavity": ("cavity_re100.toml", {}),
    "plate_laminar": ("flat_plate_laminar.toml", {}),
    "plate_turbulent": ("flat_plate_turbulent.toml", {}),
    "bump_laminar": ("bump_laminar.toml", {}),
    "bump_turbulent": ("bump_turbulent.toml", {}),
    "step_coarse": ("step_coarse.toml", {}),
    "step_medium": ("step_medium.toml", {}),
}
DEFAULT = ["channel", "channel_re800", "cavity", "plate_laminar", "plate_turbulent", "bump_laminar", "bump_turbulent",
           "step_laminar", "step_coarse"]


def load(name: str, cold: bool, sets: list[str]) -> fa.Case:
    file, changes = CASES[name]
    case = fa.load_case(ROOT / "cases" / file)
    if changes:
        case = case.replace(changes)
    if cold:
        case = case.set("initial.velocity", [0.0, 0.0])
    return fa.apply_overrides(case, sets) if sets else case


def converged_velocity(name: str, case: fa.Case, start: fa.Result, ref_dir: Path) -> np.ndarray:
    """The case's velocity at residuals 1e-11 (cached per case and cell count)."""
    path = ref_dir / f"{name}_{start.mesh.n_cells}.npz"
    if path.exists():
        return np.load(path)["velocity"]
    tight = case.replace({"solver.tolerance": 1e-11, "solver.max_iterations": 20000})
    r = fa.solve(tight, initial=start)
    if not r.converged:
        print(f"  ({name}: the reference run stopped at residuals {r.residuals[-1]} after {r.iterations} iterations)")
    ref_dir.mkdir(parents=True, exist_ok=True)
    np.savez(path, velocity=r.velocity)
    return r.velocity


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--cases", nargs="+", default=DEFAULT, choices=sorted(CASES))
    ap.add_argument("--cold", action="store_true", help="start from rest: initial.velocity = [0, 0]")
    ap.add_argument("--set", dest="sets", action="append", default=[], help="dotted.key=value for every case")
    ap.add_argument("--reference-dir", type=Path, default=ROOT / "runs" / "bench_reference")
    ap.add_argument("--no-reference", action="store_true", help="skip the iteration-error column")
    args = ap.parse_args()
    fa.solve(fa.case_from_dict({  # numba compilation / cache load
        "mesh": {"generator": "cavity", "parameters": {"n": 8}}, "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
        "solver": {"max_iterations": 5}}))
    start = "from rest" if args.cold else "their own start"
    print(f"bundled cases, {start}{', ' + ' '.join(args.sets) if args.sets else ''}")
    print(f"{'case':>16} {'cells':>7} {'conv':>5} {'iters':>6} {'seconds':>8} {'us/cell/it':>10} {'/triad':>7} "
          f"{'|u-u_conv|/U':>12}")
    for name in args.cases:
        case = load(name, args.cold, args.sets)
        t0 = time.perf_counter()
        r = fa.solve(case)
        sec = time.perf_counter() - t0
        n = r.mesh.n_cells
        triad = triad_seconds(n)
        per = sec / max(r.iterations, 1) / n * 1e6
        err = float("nan")
        if not args.no_reference and not r.diverged:
            u_conv = converged_velocity(name, case, r, args.reference_dir)
            err = float(np.max(np.abs(r.velocity - u_conv))) / r.force_reference().velocity
        state = "yes" if r.converged else ("div" if r.diverged else "no")
        print(f"{name:>16} {n:>7} {state:>5} {r.iterations:>6} {sec:>8.2f} {per:>10.2f} "
              f"{per / (triad / n * 1e6):>7.0f} {err:>12.2e}", flush=True)


if __name__ == "__main__":
    main()
