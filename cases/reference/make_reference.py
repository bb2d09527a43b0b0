"""Reference curves of the bundled comparison specs, computed from their formulas (not typed in).

Writes, next to this script (each file says its formula and source in its header):

- ``law_of_the_wall_sublayer.csv``: viscous sublayer u+ = y+, 0.1 <= y+ <= 3 (40 points, log-spaced);
- ``law_of_the_wall_log.csv``: log layer u+ = ln(y+) / 0.41 + 5.0, 30 <= y+ <= 300 (40 points,
  log-spaced); kappa = 0.41 and B = 5.0 are Coles' constants (common practice);
- ``flat_plate_cf_correlation.csv``: turbulent flat-plate skin friction Cf = 0.0592 Re_x^(-1/5)
  (Schlichting, Boundary-Layer Theory; the 1/7-power-law estimate, valid for about
  5e5 < Re_x < 1e7) at Re = 5e6 per unit length (cases/flat_plate_turbulent.toml), 0.5 <= x <= 2
  (31 points).

Run from the repository root:  python cases/reference/make_reference.py [--out DIR]
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
KAPPA, B = 0.41, 5.0  # Coles' log-law constants (common practice)
RE_UNIT = 5.0e6  # flat_plate_turbulent.toml: rho U / mu per unit length


def write(out: Path, name: str, header: str, columns: dict[str, np.ndarray]) -> None:
    """Comment lines, a line of column names, rows at full precision; written atomically."""
    try:
        from fvrans.post.writers import atomic_write
    except ImportError:  # run from a source checkout without installing the package
        sys.path.insert(0, str(HERE.parents[1]))
        from fvrans.post.writers import atomic_write
    lines = [f"# {h}" if h else "#" for h in header.strip().splitlines()]
    lines.append("# made by cases/reference/make_reference.py; do not edit by hand")
    lines.append(",".join(columns))
    lines += [",".join(repr(float(v)) for v in row) for row in zip(*columns.values())]
    text = "\n".join(lines) + "\n"
    atomic_write(out / name, lambda f: f.write(text))
    print(f"{name}: {len(next(iter(columns.values())))} rows")


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description="Write the reference curves of the bundled comparison specs.")
    ap.add_argument("--out", type=Path, default=HERE, help="output folder (default: beside this script)")
    out = ap.parse_args(argv).out
    out.mkdir(parents=True, exist_ok=True)
    y = np.geomspace(0.1, 3.0, 40)
    write(out, "law_of_the_wall_sublayer.csv",
          "Viscous sublayer of the law of the wall: u+ = y+ (common practice), 0.1 <= y+ <= 3.",
          {"y_plus": y, "u_plus": y})
    y = np.geomspace(30.0, 300.0, 40)
    write(out, "law_of_the_wall_log.csv",
          f"Log layer of the law of the wall: u+ = ln(y+) / {KAPPA} + {B}, 30 <= y+ <= 300\n"
          "(Coles' constants kappa = 0.41, B = 5.0; common practice).",
          {"y_plus": y, "u_plus": np.log(y) / KAPPA + B})
    x = np.linspace(0.5, 2.0, 31)
    write(out, "flat_plate_cf_correlation.csv",
          "Turbulent flat-plate skin friction Cf = 0.0592 Re_x^(-1/5) (Schlichting, Boundary-Layer Theory;\n"
          f"1/7-power-law estimate, about 5e5 < Re_x < 1e7) with Re_x = {RE_UNIT:g} x, 0.5 <= x <= 2.",
          {"x": x, "cf": 0.0592 * (RE_UNIT * x) ** -0.2})
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
