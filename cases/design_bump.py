"""Design loop: the tallest bump in the laminar channel that stays within a pressure-loss and a
separation limit, found with scipy.optimize and warm-started fvrans runs.

DEMO SCENARIO (invented limits, not a reference problem): a fitting on the floor of a laminar
channel (``bump_laminar.toml``: Re_h = 100, cos^2 bump of length 1 h) should be as tall as
possible, while the pressure loss it adds to the flat channel stays below ``--max-loss`` (default
0.2 rho U^2) and the recirculation behind it stays shorter than ``--max-separation`` (default
0.6 h). The cost minimised over the bump height h in [--low, --high] by
``scipy.optimize.minimize_scalar(method="bounded")`` is

    J(h) = -h + 10 (max(0, loss/max_loss - 1) + max(0, sep/max_separation - 1)).

Each design is a new mesh from the ``bump_channel`` generator with the same resolution, so it has
the same cells and faces as every other design, and its run starts from the converged flow of the
nearest design evaluated so far (a warm start; the flat channel h = 0, run first, is the only cold
start). Pressure loss: length-averaged pressure of the cells along the inlet minus that along the
outlet, less the same for the flat channel. Separation length: the length in x of the lower wall
where the wall shear points upstream (linear interpolation between face centres).

Run from the repository root:  python cases/design_bump.py [--max-evaluations 12] [--compare-cold]
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.optimize import minimize_scalar

import fvrans.api as fa

HERE = Path(__file__).resolve().parent
#: mesh resolutions: "case" as in bump_laminar.toml (3 712 cells), "coarse" for quick checks (840 cells)
RESOLUTIONS = {
    "case": None,
    "coarse": dict(nx_bump=20, nx_up=8, nx_down=32, ny=14, wall_spacing=0.02),
}
PENALTY = 10.0


@dataclass
class Design:
    """One evaluated design: bump height, outputs, run statistics."""

    height: float
    loss: float
    separation: float
    cost: float
    iterations: int
    seconds: float
    warm_from: float | None
    converged: bool
    cold_iterations: int | None = None


def pressure_drop(result: fa.Result) -> float:
    """Length-averaged pressure of the inlet cells minus that of the outlet cells."""
    mesh, geom = result.mesh, result.problem.geom

    def mean_p(patch: str) -> float:
        f = mesh.patch(patch).faces
        w = geom.face_length[f]
        return float(np.sum(result.pressure[mesh.face_owner[f]] * w) / np.sum(w))

    return mean_p("inlet") - mean_p("outlet")


def separation_length(result: fa.Result, patch: str = "lower_wall") -> float:
    """Length in x of the wall where the wall shear points upstream: tau_w sign(t_x) < 0 (tau_w along
    the tangent t; zero crossings interpolated linearly between face centres, in x)."""
    w = result.wall(patch)
    order = np.argsort(w.x)
    x, t = w.x[order], (w.tau_w * np.sign(w.tangent[:, 0]))[order]
    total = 0.0
    for i in range(len(x) - 1):
        a, b, dx = t[i], t[i + 1], x[i + 1] - x[i]
        if a < 0 and b < 0:
            total += dx
        elif (a < 0) != (b < 0):
            f = a / (a - b)  # position of the zero between the two face centres
            total += dx * (f if a < 0 else 1.0 - f)
    return total


class DesignLoop:
    """Evaluates bump heights with warm starts from the nearest design evaluated so far."""

    def __init__(self, base: fa.Case, max_loss: float, max_separation: float, compare_cold: bool = False):
        self.base, self.max_loss, self.max_separation = base, max_loss, max_separation
        self.compare_cold = compare_cold
        self.results: dict[float, fa.Result] = {}
        self.designs: list[Design] = []
        flat = self._run(0.0)  # the reference flat channel, cold
        self.flat_drop = pressure_drop(flat)

    def case_for(self, height: float) -> fa.Case:
        params = dict(self.base.mesh.parameters)
        params["bump_height"] = float(height)
        return self.base.set("mesh.parameters", params)

    def _run(self, height: float) -> fa.Result:
        near = min(self.results, key=lambda h: abs(h - height)) if self.results else None
        t0 = time.perf_counter()
        result = fa.solve(self.case_for(height), initial=None if near is None else self.results[near])
        result.extra["design_seconds"] = time.perf_counter() - t0
        result.extra["warm_from"] = near
        self.results[height] = result
        return result

    def __call__(self, height: float) -> float:
        r = self._run(float(height))
        loss = pressure_drop(r) - self.flat_drop
        sep = separation_length(r)
        cost = -height + PENALTY * (max(0.0, loss / self.max_loss - 1.0) + max(0.0, sep / self.max_separation - 1.0))
        if not r.converged:
            cost += PENALTY  # an unconverged design is never chosen
        d = Design(float(height), loss, sep, cost, r.iterations, r.extra["design_seconds"],
                   r.extra["warm_from"], r.converged)
        if self.compare_cold:
            d.cold_iterations = fa.solve(self.case_for(height)).iterations
        self.designs.append(d)
        return cost

    def feasible(self, d: Design) -> bool:
        return d.converged and d.loss <= self.max_loss and d.separation <= self.max_separation


def run_design(
    base: fa.Case,
    low: float = 0.05,
    high: float = 0.45,
    max_loss: float = 0.2,
    max_separation: float = 0.6,
    max_evaluations: int = 12,
    tolerance: float = 0.005,
    compare_cold: bool = False,
) -> tuple[DesignLoop, Design | None]:
    """Run the optimisation; returns the loop (all designs) and the best feasible design (or None)."""
    loop = DesignLoop(base, max_loss, max_separation, compare_cold)
    minimize_scalar(loop, bounds=(low, high), method="bounded",
                    options={"xatol": tolerance, "maxiter": max_evaluations})
    feasible = [d for d in loop.designs if loop.feasible(d)]
    return loop, (max(feasible, key=lambda d: d.height) if feasible else None)


def format_table(loop: DesignLoop) -> str:
    cold = any(d.cold_iterations is not None for d in loop.designs)
    head = f"{'#':>3} {'height':>8} {'loss':>8} {'sep':>7} {'cost':>8} {'iters':>6} {'seconds':>8} {'warm from':>10}"
    head += f" {'cold iters':>10}" if cold else ""
    lines = [head]
    for i, d in enumerate(loop.designs, 1):
        warm = "cold" if d.warm_from is None else f"{d.warm_from:.4f}"
        row = (f"{i:>3} {d.height:8.4f} {d.loss:8.4f} {d.separation:7.3f} {d.cost:8.4f} "
               f"{d.iterations:>6d}{'' if d.converged else '!'} {d.seconds:8.2f} {warm:>10}")
        if cold:
            row += f" {d.cold_iterations if d.cold_iterations is not None else '-':>10}"
        lines.append(row)
    return "\n".join(lines)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--case", default=str(HERE / "bump_laminar.toml"), help="base case (a bump_channel mesh)")
    ap.add_argument("--resolution", choices=sorted(RESOLUTIONS), default="case")
    ap.add_argument("--low", type=float, default=0.05, help="smallest bump height")
    ap.add_argument("--high", type=float, default=0.45, help="largest bump height")
    ap.add_argument("--max-loss", type=float, default=0.2, help="limit of the added pressure loss (rho U^2)")
    ap.add_argument("--max-separation", type=float, default=0.6, help="limit of the separation length (h)")
    ap.add_argument("--max-evaluations", type=int, default=12, help="budget of the optimiser")
    ap.add_argument("--tolerance", type=float, default=0.005, help="tolerance on the bump height")
    ap.add_argument("--compare-cold", action="store_true", help="also run each design from a cold start")
    args = ap.parse_args(argv)
    base = fa.load_case(args.case)
    if base.mesh.generator != "bump_channel":
        print(f"{args.case}: the design loop needs mesh.generator = \"bump_channel\"", file=sys.stderr)
        return 2
    res = RESOLUTIONS[args.resolution]
    if res is not None:
        base = base.set("mesh.parameters", {**base.mesh.parameters, **res})
    loop, best = run_design(base, args.low, args.high, args.max_loss, args.max_separation,
                            args.max_evaluations, args.tolerance, args.compare_cold)
    print("demo scenario: invented limits; see the docstring of cases/design_bump.py")
    print(f"flat channel: pressure drop {loop.flat_drop:.4f}; limits: added loss {args.max_loss:g}, "
          f"separation {args.max_separation:g}")
    print(format_table(loop))
    warm = [d for d in loop.designs if d.cold_iterations is not None]
    if warm:
        ratio = sum(d.iterations for d in warm) / sum(d.cold_iterations for d in warm)  # type: ignore[misc]
        print(f"warm / cold iterations: {ratio:.2f}")
    if best is None:
        print("no feasible design in the range")
        return 1
    print(f"best feasible design: bump height {best.height:.4f} (added loss {best.loss:.4f}, "
          f"separation {best.separation:.3f})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
