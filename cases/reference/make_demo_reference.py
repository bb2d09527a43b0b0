"""INVENTED reference data for the a-priori demo (cases/flat_plate_a_priori_demo.toml): a demo scenario,
not a measurement, not a simulation, never a reference value.

Writes ``demo_plate_invented.csv`` next to this script: a point cloud (x, y, u, v, R_xx, R_xy, R_yy,
k) over the bundled flat-plate domain (x in [-1/3, 2], y in [0, 1]), U = 1, nu = 2e-7, made of
invented formulas chosen only to look like a thin boundary layer with anisotropic stresses:

- thickness delta(x) = 0.37 x (x / nu)^(-1/5) for x > 0 (x offset by 0.005 at the leading edge);
- u / U = f(eta) = 0.55 tanh(60 eta) + 0.45 tanh(1.8 eta), eta = y / delta; uniform u = U ahead of
  the plate; v from continuity, v = U delta' (eta f - (0.55/60) ln cosh(60 eta) - (0.45/1.8) ln cosh(1.8 eta));
- u_tau^2 = nu U f'(0) / delta; R_xy = -u_tau^2 (1 - eta)^2 (1 - exp(-y+ / 26))^2 for eta < 1 (0
  beyond), y+ = y u_tau / nu; R_xx = 2.2 |R_xy|, R_yy = 0.6 |R_xy|, k = 1.6 |R_xy|.

Run from the repository root:  python cases/reference/make_demo_reference.py [--out DIR]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
NAME = "demo_plate_invented.csv"
NU, U = 2e-7, 1.0
A, B, C, D = 0.55, 60.0, 0.45, 1.8  # f(eta) = A tanh(B eta) + C tanh(D eta)


def _log_cosh(z: np.ndarray) -> np.ndarray:
    """ln cosh z without overflow: |z| + ln(1 + exp(-2|z|)) - ln 2."""
    a = np.abs(z)
    return a + np.log1p(np.exp(-2.0 * a)) - np.log(2.0)


def fields(x: np.ndarray, y: np.ndarray) -> dict[str, np.ndarray]:
    """The invented quantities at points (x, y) (see the module docstring)."""
    xe = np.maximum(x, 0.0) + 0.005
    delta = 0.37 * xe * (U * xe / NU) ** -0.2
    ddelta = 0.8 * 0.37 * (U * xe / NU) ** -0.2
    eta = y / delta
    f = A * np.tanh(B * eta) + C * np.tanh(D * eta)
    ln_cosh = A / B * _log_cosh(B * eta) + C / D * _log_cosh(D * eta)
    v = U * ddelta * (eta * f - ln_cosh)
    u_tau2 = NU * U * (A * B + C * D) / delta
    yp = y * np.sqrt(u_tau2) / NU
    rxy = -u_tau2 * np.clip(1.0 - eta, 0.0, None) ** 2 * (1.0 - np.exp(-yp / 26.0)) ** 2
    ahead = x < 0.0
    u = np.where(ahead, U, U * f)
    v = np.where(ahead, 0.0, v)
    rxy = np.where(ahead, 0.0, rxy)
    return {"u": u, "v": v, "R_xx": 2.2 * np.abs(rxy), "R_xy": rxy, "R_yy": 0.6 * np.abs(rxy), "k": 1.6 * np.abs(rxy)}


def cloud() -> tuple[np.ndarray, np.ndarray]:
    """The points: 46 x-stations (clustered at the leading edge) by 40 y-levels (clustered at the wall)."""
    xs = np.concatenate([np.linspace(-1.0 / 3.0, -0.02, 6), 2.0 * np.linspace(0.0, 1.0, 40) ** 2])
    ys = np.concatenate([[0.0], np.geomspace(1e-6, 1.0, 39)])
    X, Y = np.meshgrid(xs, ys, indexing="ij")
    return X.ravel(), Y.ravel()


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", default=str(HERE), help="folder to write into (default: next to this script)")
    args = p.parse_args(argv)
    try:
        from fvrans.post.writers import atomic_write
    except ImportError:  # run from a source checkout without installing the package
        sys.path.insert(0, str(HERE.parents[1]))
        from fvrans.post.writers import atomic_write
    x, y = cloud()
    cols = {"x": x, "y": y, **fields(x, y)}
    lines = ["# INVENTED demo data (not a measurement or a simulation): made by cases/reference/"
             "make_demo_reference.py; do not edit by hand",
             ",".join(cols)]
    lines += [",".join(f"{float(v):.9g}" for v in row) for row in zip(*cols.values())]
    text = "\n".join(lines) + "\n"
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    atomic_write(out / NAME, lambda f: f.write(text))
    print(out / NAME)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
