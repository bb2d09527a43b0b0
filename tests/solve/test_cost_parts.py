"""The cost benchmark's split of an outer iteration (``benchmarks/bench_coupled.py``'s ``PartTimer``): each
part counted once, nested parts taken out of the part that calls them."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

import fvrans.api as fa
from fvrans.mesh.generate import cavity

sys.path.insert(0, str(Path(__file__).resolve().parents[2] / "benchmarks"))
bench_coupled = pytest.importorskip("bench_coupled")

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.parametrize("system_solver", ["iterative", "direct"])
def test_parts_of_an_outer_iteration_add_up_to_no_more_than_the_run(system_solver: str) -> None:
    case = fa.load_case(ROOT / "cases" / "cavity_re100.toml").replace(
        {"solver.coupling": "simultaneous", "solver.system_solver": system_solver, "solver.max_iterations": 4,
         "solver.threads": 1, "output.write_fields": False})
    problem = fa.prepare(case, mesh=cavity(24))
    fa.solve(problem)  # compilation outside the timed run
    timer = bench_coupled.PartTimer()
    with timer:
        c0 = bench_coupled._cpu()
        fa.solve(problem)
        total = bench_coupled._cpu() - c0
    s = timer.seconds
    assert all(v >= 0.0 for v in s.values()), s
    # nested parts are not counted twice: together they fit in the run's CPU time
    assert sum(s.values()) <= total * 1.001 + 1e-3, (s, total)
    assert s["assembly"] > 0.0 and s["model"] == 0.0  # laminar: no model update
    if system_solver == "iterative":
        assert s["Krylov"] > 0.0 and s["set-up"] > 0.0 and s["sparse LU"] == 0.0
    else:
        assert s["sparse LU"] > 0.0 and s["set-up"] == 0.0
    # the wrapped methods are put back
    import fvrans.solve.coupled as C

    assert C.fgmres.__module__ == "fvrans.linalg.fgmres"
