"""Sweep specs, plans and the results table without solving: checks with clear messages,
factorial order, Latin-hypercube strata, Sobol points, log ranges, CSV quoting."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest

from fvrans.errors import CaseError
from fvrans.sweep import Output, Parameter, ResultsTable, Sweep, design_points, load_sweep
from fvrans.sweep.table import csv_text

GOOD = """
case = "channel.toml"

[[parameter]]
key = "fluid.viscosity"
name = "mu"
start = 0.01
stop = 0.04
count = 3
spacing = "log"

[[output]]
name = "p"
wall = "lower_wall"
quantity = "p_wall"
x = 4.0
"""


def _spec(tmp_path, text):
    p = tmp_path / "sweep.toml"
    p.write_text(text, encoding="utf-8")
    return p


def test_spec_file_gives_the_planned_values(tmp_path, channel_case):
    sweep = load_sweep(_spec(tmp_path, GOOD))
    mu = [p.changes["fluid.viscosity"] for p in design_points(sweep)]
    assert mu == pytest.approx([0.01, 0.02, 0.04], rel=1e-12)  # geometric: ratio 2 each step


@pytest.mark.parametrize(
    ("change", "needle"),
    [
        (("[[output]]", "[[outputs]]"), "outputs: unknown key (did you mean 'output'?)"),
        (('spacing = "log"', 'spacing = "logarithmic"'), "parameter 1 (fluid.viscosity).spacing"),
        (('key = "fluid.viscosity"', 'key = "fluid.viscosty"'), "accepts none of its values"),
        (('case = "channel.toml"', 'case = "missing.toml"'), "case: the case file"),
        (("count = 3\n", ""), "a range in a factorial plan needs count"),
        (('wall = "lower_wall"', 'wall = "inlet"'), "output 1 (p).wall: 'inlet' is not a wall patch"),
        (('quantity = "p_wall"', 'quantity = "pressure"'), "output 1 (p).quantity"),
        (('name = "mu"', 'name = "p"'), "the column name 'p' is also used"),
        (('name = "mu"', 'name = "status"'), "is a column of the results table itself"),
        (('key = "fluid.viscosity"', 'key = "mesh.parameters.lenght"'), "has no parameter 'lenght' (did you mean"),
    ],
)
def test_spec_errors_name_file_item_and_fix(tmp_path, channel_case, change, needle):
    path = _spec(tmp_path, GOOD.replace(*change))
    with pytest.raises(CaseError) as info:
        load_sweep(path)
    assert str(path) in str(info.value)
    assert needle in str(info.value)


def test_sampled_plan_checks(tmp_path, channel_case):
    text = GOOD.replace("count = 3\n", "") + '\n[plan]\nsampling = "sobol"\ncount = 10\n'
    with pytest.raises(CaseError, match="power of 2; give 8 or 16"):
        load_sweep(_spec(tmp_path, text))
    with pytest.raises(CaseError, match="plan.seed: a factorial plan draws nothing at random"):
        load_sweep(_spec(tmp_path, GOOD + "\n[plan]\nseed = 3\n"))
    with pytest.raises(CaseError, match=r"\.count: a sampled plan draws from \[start, stop\]"):
        load_sweep(_spec(tmp_path, GOOD + '\n[plan]\nsampling = "latin-hypercube"\ncount = 4\n'))


def test_factorial_order_first_parameter_slowest():
    sweep = Sweep("base.toml", [Parameter("a", values=[1, 2]), Parameter("b", values=["x", "y", "z"])])
    got = [tuple(p.changes.values()) for p in design_points(sweep)]
    assert got == [(1, "x"), (1, "y"), (1, "z"), (2, "x"), (2, "y"), (2, "z")]


def test_latin_hypercube_one_sample_per_stratum():
    """Latin hypercube (McKay, Beckman & Conover 1979): each of the n equal strata of every
    parameter's range holds exactly one sample; the same seed gives the same plan."""
    n = 12
    params = [Parameter("a", start=2.0, stop=5.0), Parameter("b", start=1e-3, stop=1e-1, spacing="log")]
    sweep = Sweep("base.toml", params, sampling="latin-hypercube", count=n, seed=7)
    pts = design_points(sweep)
    a = np.array([p.changes["a"] for p in pts])
    b = np.array([p.changes["b"] for p in pts])
    assert sorted(np.floor((a - 2.0) / 3.0 * n).astype(int)) == list(range(n))
    assert sorted(np.floor(np.log(b / 1e-3) / np.log(100.0) * n).astype(int)) == list(range(n))
    again = design_points(sweep)
    assert [p.changes for p in again] == [p.changes for p in pts]
    other = design_points(Sweep("base.toml", params, sampling="latin-hypercube", count=n, seed=8))
    assert [p.changes for p in other] != [p.changes for p in pts]


def test_sobol_points_lie_in_range_and_balance():
    """A scrambled Sobol sequence of 2^m points has one point in each of the 2^m equal intervals of
    every coordinate (a (0, m, 1)-net property of the first coordinate; Sobol 1967)."""
    sweep = Sweep("base.toml", [Parameter("a", start=-1.0, stop=1.0), Parameter("c", values=[0, 1, 2, 3])],
                  sampling="sobol", count=16, seed=3)
    pts = design_points(sweep)
    a = np.array([p.changes["a"] for p in pts])
    assert sorted(np.floor((a + 1.0) / 2.0 * 16).astype(int)) == list(range(16))
    c = [p.changes["c"] for p in pts]
    assert sorted(c) == [0] * 4 + [1] * 4 + [2] * 4 + [3] * 4


def test_python_objects_checked_like_files():
    with pytest.raises(CaseError, match=r"<in memory>: parameter 1 \(fluid.viscosity\): give either values"):
        design_points(Sweep("x.toml", [Parameter("fluid.viscosity", values=[1.0], start=1.0, stop=2.0)]))
    with pytest.raises(CaseError, match=r"output 1 \(cd\): give either summary"):
        design_points(Sweep("x.toml", [Parameter("a", values=[1])],
                            outputs=[Output("cd", summary="walls.w.forces.Cd", wall="w")]))


def test_csv_quotes_commas_and_keeps_lists():
    table = ResultsTable(["run", "u", "error"], [{"run": 0, "u": [1.0, 0.0], "error": "MeshError: a, b\nc"}])
    rows = list(csv.reader(io.StringIO(csv_text(table))))
    assert rows == [["run", "u", "error"], ["0", "[1.0, 0.0]", "MeshError: a, b | c"]]


def test_bad_spec_exits_2_with_the_message(tmp_path, channel_case, capsys):
    from fvrans.cli import main

    path = _spec(tmp_path, GOOD.replace("start = 0.01", "start = -0.01"))
    assert main(["sweep", str(path), "--out", str(tmp_path / "out"), "--quiet"]) == 2
    err = capsys.readouterr().err
    assert f"{path}: parameter 1 (fluid.viscosity): spacing = \"log\" needs start and stop > 0" in err
    assert not (tmp_path / "out").exists()


def test_bundled_demo_spec_loads():
    from pathlib import Path

    spec = Path(__file__).resolve().parents[2] / "cases" / "sweeps" / "channel_speed_viscosity.toml"
    sweep = load_sweep(spec)
    assert len(design_points(sweep)) == 8
