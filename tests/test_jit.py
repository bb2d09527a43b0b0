"""Compilation on the first run (issue #12 item 11): numba's compile events tell a cold cache
from a warm one for certain; the run says so once and summary.json keeps the compile time apart."""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap

import numba
import pytest

from fvrans.cli import main
from fvrans.jit import COMPILE_MESSAGE, CompileWatch

KERNEL = textwrap.dedent("""
    import numba

    @numba.njit(cache=True)
    def twice(x):
        return 2.0 * x
""")
PROBE = textwrap.dedent("""
    import sys
    sys.path.insert(0, sys.argv[1])
    from fvrans.jit import CompileWatch
    import kernel_for_test
    firsts = []
    with CompileWatch(on_first=lambda: firsts.append(1)) as w:
        kernel_for_test.twice(1.5)
        kernel_for_test.twice(2.5)
    print(w.count, len(firsts), w.seconds > 0)
""")


def test_a_cold_cache_compiles_once_and_a_warm_one_not_at_all(tmp_path):
    (tmp_path / "kernel_for_test.py").write_text(KERNEL)
    env = {**os.environ, "NUMBA_CACHE_DIR": str(tmp_path / "cache")}

    def run() -> str:
        out = subprocess.run([sys.executable, "-c", PROBE, str(tmp_path)], env=env, capture_output=True, text=True,
                             timeout=300)
        assert out.returncode == 0, out.stderr
        return out.stdout.split()

    assert run() == ["1", "1", "True"]  # first process: one compilation, announced once, timed
    assert run() == ["0", "0", "False"]  # second process: loaded from the disk cache, nothing to say


def _fresh_kernel():
    @numba.njit
    def thrice(x):
        return 3.0 * x

    return thrice


def test_the_run_says_so_once_and_keeps_compile_time_apart(tmp_path, monkeypatch, capsys):
    import fvrans.api as fa

    case = tmp_path / "cavity.toml"
    case.write_text('[mesh]\ngenerator = "cavity"\nparameters = { n = 6 }\n[fluid]\ndensity = 1.0\n'
                    'viscosity = 0.01\n[boundary.lid]\nkind = "wall"\nvelocity = [1.0, 0.0]\n'
                    '[boundary.walls]\nkind = "wall"\n[solver]\nmax_iterations = 4\n')
    prepare = fa.prepare
    kernel = _fresh_kernel()

    def prepare_compiling(c, mesh=None):  # stands for a kernel met for the first time
        kernel(1.0)
        return prepare(c, mesh)

    monkeypatch.setattr(fa, "prepare", prepare_compiling)
    main(["run", str(case), "--out", str(tmp_path / "a"), "--no-plots"])
    assert capsys.readouterr().err.count(COMPILE_MESSAGE) == 1
    monkeypatch.setattr(fa, "prepare", prepare)
    main(["run", str(case), "--out", str(tmp_path / "b"), "--no-plots"])
    assert COMPILE_MESSAGE not in capsys.readouterr().err  # every kernel known now: nothing said
    s = json.loads((tmp_path / "b" / "summary.json").read_text())
    assert s["compile_seconds"] == 0.0 and s["solve_seconds"] == pytest.approx(s["wall_seconds"])


def test_compile_seconds_are_inside_the_wall_seconds():
    import fvrans.api as fa

    case = fa.case_from_dict({"mesh": {"generator": "cavity", "parameters": {"n": 6}},
                              "fluid": {"density": 1.0, "viscosity": 0.01},
                              "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
                              "solver": {"max_iterations": 3}})
    kernel = _fresh_kernel()
    with CompileWatch() as w:
        r = fa.solve(case, callback=lambda it, res: bool(kernel(float(it))) and False)
    assert w.count == 1 and 0 < r.compile_seconds <= r.wall_seconds
    s = r.summary()
    assert s["solve_seconds"] + s["compile_seconds"] == pytest.approx(s["wall_seconds"])


@pytest.mark.parametrize("variable, default, given", [("OMP_WAIT_POLICY", "PASSIVE", "ACTIVE"),
                                                       ("GOMP_SPINCOUNT", "3000", "0")])
def test_openmp_wait_settings_are_set_unless_the_environment_gives_them(variable, default, given):
    """fvrans.jit sets, before numba starts its OpenMP threads, OMP_WAIT_POLICY=PASSIVE (threads spinning
    without end took the core the solver needed on a shared machine) and GOMP_SPINCOUNT (a short spin
    between parallel loops before they sleep), and keeps a value the user gave."""
    code = f"import os, fvrans.jit; print(os.environ[{variable!r}])"
    env = {k: v for k, v in os.environ.items() if k != variable}
    unset = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True, text=True, check=True)
    kept = subprocess.run([sys.executable, "-c", code], env={**env, variable: given},
                          capture_output=True, text=True, check=True)
    assert unset.stdout.strip() == default
    assert kept.stdout.strip() == given
