"""Inflow profile of the backward-facing-step cases (``cases/step_inflow.csv``), computed by fvrans.

The incoming boundary layer of Driver & Seegmiller (1985) at x = -4H: 99% thickness about 1.5 H
and Re_theta about 5 000 at Re_H = 36 000 (as summarised in the NASA Turbulence Modeling
Resource; from memory). Growing it on an upstream wall would need about 80 H of plate
(turbulent flat-plate estimate Re_theta = 0.036 Re_x^0.8, common practice), so the profile is
taken from fvrans' own zero-pressure-gradient flat plate instead (``flat_plate_turbulent.toml``,
Spalart-Allmaras, Re = 5e6 per unit length, medium grid): at a station x_s the profiles u/U
and nu_tilde/nu are, in the self-similar variables of a flat-plate layer,
those of a layer with the same Re_theta at any unit Reynolds number; lengths scale by
(5e6 / 36 000). v is set to zero (v/U ~ 1e-3 at the layer edge there).

Both targets cannot be met at once: the model's flat-plate layer has delta99 / theta ~ 9 at
Re_theta ~ 5 000 (the measured layer ~ 10.8), so at Re_theta = 5 000 delta99 is only about 1.3 H.
The station x_s is the plate cell column that minimises the larger of the two relative errors
(delta99 against 1.5 H, Re_theta against 5 000; edge velocity u_e = u at 4 H from the wall):
on the medium plate grid delta99 = 1.34 H (-10.5 %), Re_theta = 5 355 (+7 %).

The step channel has a viscous upper wall 8 H above the upstream floor; its incoming layer is
not specified by the issue, so the same layer is put on it (the profile mirrored about y = 4 H,
the channel mid-height, where both halves reach the free-stream values u = U, nu_tilde = 3 nu).

With ``--model k-omega-sst`` the plate is run with that model and the file
(``cases/step_inflow_sst.csv``) holds k and omega instead of nu_tilde / nu: k keeps its value
(a velocity squared) and omega scales as a velocity over a length, omega_step = omega_plate /
(lengths factor); at the wall k = 0 and omega takes the first cell's value.

Run from the repository root:  python cases/make_step_inflow.py [--level medium] [--model k-omega-sst]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

import fvrans.api as fa
from fvrans.post.separation import cell_column, layer_thickness

HERE = Path(__file__).resolve().parent
RE_UNIT_PLATE = 5.0e6  # flat_plate_turbulent.toml
RE_H_STEP = 36_000.0  # Driver & Seegmiller (1985), from memory
RE_THETA_TARGET = 5_000.0  # Driver & Seegmiller (1985) via NASA TMR, from memory
DELTA99_TARGET = 1.5  # H; Driver & Seegmiller (1985) via NASA TMR, from memory
CHANNEL_HEIGHT = 8.0  # upper wall at y = 8 H above the upstream floor


def column_profiles(result: fa.Result, x: float) -> tuple[np.ndarray, np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """Cell-centre y, u, v and the model columns (nu_tilde_ratio = nu_tilde/nu, or k and omega) of the
    column of cells that contains station x, sorted by y, with the wall point in front (zero,
    omega the first cell's value)."""
    cells = cell_column(result.problem.mesh, result.cell_centres, x)
    nu = result.case.fluid.viscosity / result.case.fluid.density
    y = np.concatenate([[0.0], result.cell_centres[cells, 1]])
    u = np.concatenate([[0.0], result.velocity[cells, 0]])
    v = np.concatenate([[0.0], result.velocity[cells, 1]])
    var = result.fields.variables
    if "nu_tilde" in var:
        return y, u, v, {"nu_tilde_ratio": np.concatenate([[0.0], var["nu_tilde"][cells] / nu])}
    w = var["omega"][cells]
    return y, u, v, {"k": np.concatenate([[0.0], var["k"][cells]]), "omega": np.concatenate([[w[0]], w])}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--level", default="medium", help="flat-plate grid level (coarse, medium, fine)")
    ap.add_argument("--model", default="spalart-allmaras", choices=("spalart-allmaras", "k-omega-sst"))
    ap.add_argument("--out", default=None, help="default: step_inflow.csv (SA) or step_inflow_sst.csv")
    args = ap.parse_args(argv)
    sst = args.model == "k-omega-sst"
    out = args.out or str(HERE / ("step_inflow_sst.csv" if sst else "step_inflow.csv"))
    case = fa.load_case(HERE / "flat_plate_turbulent.toml").replace(
        {"mesh.file": str(HERE.parent / "meshes" / f"flat_plate_{args.level}.msh"), "model.turbulence": args.model})
    res = fa.solve(case)
    print(f"flat plate ({args.level}): converged={res.converged}, {res.iterations} iterations, "
          f"{res.wall_seconds:.1f} s", flush=True)
    nu = case.fluid.viscosity / case.fluid.density
    # Re_theta along the plate at the x positions of the cell columns
    mesh = res.problem.mesh
    xs = np.unique(np.round(res.cell_centres[:, 0], 12))
    xs = xs[(xs > 0.05) & (xs < 1.9)]
    scale = RE_UNIT_PLATE / RE_H_STEP  # plate length -> step heights
    half = 0.5 * CHANNEL_HEIGHT
    err = []
    for x in xs:
        y, u, _, _ = column_profiles(res, float(x))
        u_e = float(np.interp(half / scale, y, u))
        d99, _, th = layer_thickness(y, u, u_e)
        err.append(max(abs(u_e * th / nu / RE_THETA_TARGET - 1), abs(d99 * scale / DELTA99_TARGET - 1)))
    i = int(np.argmin(err))
    x_s = float(xs[i])
    y, u, v, extra = column_profiles(res, x_s)
    u_e = float(np.interp(half / scale, y, u))
    d99, ds, th = layer_thickness(y, u, u_e)
    print(f"station x = {x_s:.4f} (Re_x = {x_s / nu:.3g}): Re_theta = {u_e * th / nu:.0f}, "
          f"u_e = {u_e:.5f}, delta99 = {d99 * scale:.3f} H, delta* = {ds * scale:.3f} H, theta = {th * scale:.4f} H, "
          f"H12 = {ds / th:.3f}; cells {mesh.n_cells}")
    ys = y * scale
    m = ys < half
    if sst:
        extra["omega"] = extra["omega"] / scale  # 1 / time: velocity over length
    # lower half from the plate profile, the point y = 4 H interpolated, upper half mirrored
    def mirrored(c: np.ndarray) -> np.ndarray:
        lower = np.concatenate([c[m], [float(np.interp(half, ys, c))]])
        return np.concatenate([lower, lower[-2::-1]])

    y_all = np.concatenate([np.concatenate([ys[m], [half]]), CHANNEL_HEIGHT - np.concatenate([ys[m], [half]])[-2::-1]])
    y_all[-1] = CHANNEL_HEIGHT
    u_all = mirrored(u)
    cols = {k: mirrored(c) for k, c in extra.items()}
    lines = [
        "# Inflow of the backward-facing-step cases at x = -4 H, written by cases/make_step_inflow.py",
        f"# from flat_plate_turbulent.toml ({args.level} grid, {'SST' if sst else 'SA'}) at x = {x_s:.5f}, "
        f"lengths x {scale:.4f};",
        f"# Re_theta = {u_e * th / nu:.0f}, delta99 = {d99 * scale:.4f} H (edge velocity u(4 H) = {u_e:.5f});",
        "# upper half mirrored about y = 4 H",
        ",".join(["y", "u", "v", *cols]),
    ]
    lines += [",".join([f"{a:.8e}", f"{b:.8e}", "0.0", *(f"{c[i]:.8e}" for c in cols.values())])
              for i, (a, b) in enumerate(zip(y_all, u_all))]
    Path(out).write_text("\n".join(lines) + "\n")
    print(f"wrote {out} ({len(y_all)} rows)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
