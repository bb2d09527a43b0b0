"""The driver-script example in cases/ keeps working: a short Reynolds series with warm starts."""

from __future__ import annotations

import importlib.util
from pathlib import Path

CASES = Path(__file__).resolve().parents[1] / "cases"


def _load(name: str):
    spec = importlib.util.spec_from_file_location(name, CASES / f"{name}.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    return mod


def test_reynolds_series_runs_with_warm_starts_and_matches_blasius(capsys):
    series = _load("reynolds_series")
    rows = series.main(["--re", "1e5", "2e5", "--tolerance", "1e-7"])
    assert [r["re"] for r in rows] == [1e5, 2e5]
    assert all(r["converged"] for r in rows)
    assert [r["warm"] for r in rows] == [False, True]
    # the warm start from Re_L = 1e5 saves iterations at 2e5
    assert rows[1]["iterations"] < rows[0]["iterations"]
    # Cf sqrt(Re_x) = 0.664 (Blasius 1908; Schlichting, Boundary-Layer Theory, ch. 7); 3 % as in
    # tests/verification/test_flat_plate.py on this grid
    for r in rows:
        assert abs(r["cf_sqrt_rex"] / 0.664 - 1) < 0.03
    out = capsys.readouterr().out
    assert "Re_L" in out and "warm" in out and "cold" in out and len(out.splitlines()) == 4
