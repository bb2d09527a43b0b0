"""While a solver runs, the BLAS library under numpy and scipy works on one thread
(``fvrans.jit.one_blas_thread``): the solvers' own kernels are what ``[solver] threads`` spreads
over the cores, and a BLAS pool beside them busy-waits on the cores those need (on two idle cores it
made the simultaneous path's two-thread iterations 1.1-2.0x slower than its one-thread ones,
benchmarks/bench_coupled.py --cost). After the run the caller's BLAS setting is back."""

from __future__ import annotations

import pytest
from flows import CAVITY, simultaneous_solver

from fvrans.mesh.generate import cavity

threadpoolctl = pytest.importorskip("threadpoolctl")


def _blas_threads() -> list[int]:
    return [lib["num_threads"] for lib in threadpoolctl.threadpool_info() if lib["user_api"] == "blas"]


def test_blas_runs_on_one_thread_during_a_run_and_is_restored_after():
    seen: list[list[int]] = []
    with threadpoolctl.threadpool_limits(limits=2, user_api="blas"):
        before = _blas_threads()
        solver = simultaneous_solver(cavity(8), CAVITY, max_iterations=3)
        solver.run(callback=lambda it, res: seen.append(_blas_threads()))
        after = _blas_threads()
    if not before:
        pytest.skip("numpy here links no BLAS library that threadpoolctl can see")
    assert seen and all(t == [1] * len(before) for t in seen)
    assert after == before
