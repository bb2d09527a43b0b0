"""The design-loop example cases/design_bump.py, run with a small budget on the coarse resolution so
it stays true: every design converges, warm starts need no more iterations than cold starts and fewer
over the loop, the
separation length agrees with the sign changes of the wall shear that summary.json reports
(fvrans.post), and the added pressure loss grows with the bump height (more blockage)."""

from __future__ import annotations

import importlib.util
import sys
from pathlib import Path

import numpy as np

import fvrans.api as fa

CASES = Path(__file__).resolve().parents[1] / "cases"


def load_example():
    spec = importlib.util.spec_from_file_location("design_bump", CASES / "design_bump.py")
    mod = importlib.util.module_from_spec(spec)
    sys.modules["design_bump"] = mod
    spec.loader.exec_module(mod)
    return mod


def test_design_loop_small_budget(capsys):
    db = load_example()
    base = fa.load_case(CASES / "bump_laminar.toml")
    base = base.set("mesh.parameters", {**base.mesh.parameters, **db.RESOLUTIONS["coarse"]})
    loop, best = db.run_design(base, max_evaluations=4, compare_cold=True)
    designs = loop.designs
    assert 1 <= len(designs) <= 4
    assert all(d.converged and 0.05 <= d.height <= 0.45 for d in designs)
    # a warm start never costs more than a cold one, and saves iterations over the loop (on the
    # simultaneous path the first design, warm from the flat channel, can take as many as cold)
    assert all(d.warm_from is not None and d.iterations <= d.cold_iterations for d in designs)
    assert sum(d.iterations for d in designs) < sum(d.cold_iterations for d in designs)
    by_height = sorted(designs, key=lambda d: d.height)
    assert np.all(np.diff([d.loss for d in by_height]) > 0)
    assert best is not None and best.loss <= 0.2 and best.separation <= 0.6
    # separation length against the shear sign changes of summary.json (one bubble: end - start)
    checked = 0
    for h, r in loop.results.items():
        wall = r.summary()["walls"]["lower_wall"]
        xs = wall["shear_sign_change_x"]
        sep = db.separation_length(r)
        if not xs:
            assert sep == 0.0
        elif len(xs) == 2 and wall["shear_sign_change_kind"] == ["+to-", "-to+"]:
            assert abs(sep - (xs[1] - xs[0])) < 1e-9, (h, sep, xs)
            checked += 1
    assert checked >= 1  # at least one design with a bubble was compared
    print(db.format_table(loop))
    assert db.main(["--resolution", "coarse", "--max-evaluations", "2"]) in (0, 1)
    out = capsys.readouterr().out
    assert "demo scenario" in out and "height" in out
