"""Make the README gallery: run bundled cases and keep a few of their plots, small, in docs/gallery/.

    python cases/make_gallery.py              # runs into runs/gallery/ (about 1-2 minutes), then draws
    python cases/make_gallery.py --reuse      # draw again from the runs already there

Each image is drawn at 100 dpi and stored with a 256-colour palette (Pillow, which matplotlib
installs), so that it stays well under 150 kB. Reference curves on the wall plots:
laminar plate Cf = 0.664 / sqrt(Re_x) (Blasius 1908); turbulent plate Cf = 0.0592 Re_x^(-1/5)
(the 1/7-power-law estimate; Schlichting, Boundary-Layer Theory, ch. 21).
"""

from __future__ import annotations

import argparse
import io
import json
from collections.abc import Sequence
from pathlib import Path

import numpy as np
from PIL import Image

import fvrans.api as fa
from fvrans.post.plots import result_figures

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
DPI = 100
#: case -> plots kept (file names of fvrans.post.plots.result_figures)
SELECTION: dict[str, tuple[str, ...]] = {
    "flat_plate_turbulent": ("wall_plate_cf.png", "field_eddy_viscosity_ratio_zoom.png", "residuals.png"),
    "flat_plate_laminar": ("wall_plate_cf.png",),
    "step_coarse": ("field_velocity_zoom.png", "wall_lower_wall_cf.png", "probe_x_4.png"),
    "cavity_re100": ("field_velocity.png",),
}


def _references(case_name: str, nu: float) -> dict:
    """Reference curves for the plate's Cf, functions of x (U = 1)."""
    if case_name == "flat_plate_laminar":
        return {"plate": {"cf": [("Blasius: 0.664 / sqrt(Re_x)", lambda x: 0.664 / np.sqrt(x / nu))]}}
    if case_name == "flat_plate_turbulent":
        return {"plate": {"cf": [("power law: 0.0592 Re_x^(-1/5)", lambda x: 0.0592 * (x / nu) ** -0.2)]}}
    return {}


def run_case(name: str, runs: Path, reuse: bool) -> Path:
    out = runs / name
    if reuse and (out / "summary.json").is_file():
        return out
    case = fa.load_case(HERE / f"{name}.toml")
    result = fa.solve(case)
    print(f"{name}: {'converged' if result.converged else 'NOT converged'} after {result.iterations} iterations "
          f"in {result.wall_seconds:.1f} s")
    return result.write(out)


def save_small(fig, path: Path) -> int:
    """Save ``fig`` at :data:`DPI` with a 256-colour palette; return the size in bytes."""
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=DPI)
    buf.seek(0)
    img = Image.open(buf).convert("RGB").quantize(colors=256, method=Image.Quantize.MEDIANCUT)
    img.save(path, format="PNG", optimize=True)
    return path.stat().st_size


def main(argv: Sequence[str] | None = None) -> list[Path]:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--runs", default=str(ROOT / "runs" / "gallery"), help="folder for the runs")
    p.add_argument("--out", default=str(ROOT / "docs" / "gallery"), help="folder for the images")
    p.add_argument("--reuse", action="store_true", help="reuse runs already in --runs")
    p.add_argument("--cases", nargs="+", default=list(SELECTION), help="cases to include")
    args = p.parse_args(argv)
    runs, out = Path(args.runs), Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    written = []
    for name in args.cases:
        rd = run_case(name, runs, args.reuse)
        summary = json.loads((rd / "summary.json").read_text())
        nu = summary["reference"]["mu"] / summary["reference"]["rho"]
        wanted = SELECTION[name]
        for fname, fig in result_figures(rd, _references(name, nu)):
            if fname in wanted:
                target = out / f"{name}_{fname}"
                size = save_small(fig, target)
                print(f"  {target.relative_to(ROOT) if target.is_relative_to(ROOT) else target}: {size / 1e3:.0f} kB")
                written.append(target)
    return written


if __name__ == "__main__":
    main()
