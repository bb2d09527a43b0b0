"""``compare``: a spec with passing and failing items against a hand-written result directory.

The result curves are linear functions, so linear interpolation at the reference abscissae is exact
and every metric has a value derived by hand (noted beside each check)."""

from __future__ import annotations

import io
import json
import math
import xml.etree.ElementTree as ET

import numpy as np
import pytest

from fvrans.errors import CaseError
from fvrans.verify.compare import curve_metric
from fvrans.verify.report import compare_command
from fvrans.verify.spec import load_spec

XW = np.linspace(0.05, 9.95, 100)  # wall face centres of a 10-long wall
CF = 0.1 + 0.01 * XW


@pytest.fixture
def run_dir(make_result_dir):
    return make_result_dir(
        n_cells=400,
        walls={"lower_wall": {"x": XW, "y": 0 * XW, "s": XW, "cf": CF, "cp": 1.0 - 0.1 * XW}},
        summary_extra={"walls": {"lower_wall": {"forces": {"Cd": 2.5}}}},
        field=(10, 4, 10.0, 1.0, lambda x, y: 1.0 + 0.5 * x + 0.25 * y),
    )


SPEC = """
title = "hand-made checks"

[[item]]
name = "cf_good"
kind = "wall"
metric = "max_abs"
tolerance = 1e-9
range = [-2.0, 12.0]
[item.result]
patch = "lower_wall"
y = "cf"
[item.reference]
file = "ref/cf.dat"
x = "x"
y = "cf"

[[item]]
name = "cf_offset"
kind = "wall"
metric = "l2"
tolerance = 0.01
[item.result]
patch = "lower_wall"
y = "cf"
[item.reference]
file = "ref/cf_offset.csv"
x = 1
y = 2

[[item]]
name = "cp_shifted"
kind = "wall"
metric = "max_abs"
tolerance = 1e-9
[item.result]
patch = "lower_wall"
y = "cp"
x_scale = 0.5
y_zero_at = 1.0
[item.reference]
file = "ref/cp.csv"
x = "x/H"
y = "cp"

[[item]]
name = "drag"
kind = "scalar"
metric = "rel_error"
tolerance = 0.02
[item.result]
path = "walls.lower_wall.forces.Cd"
[item.reference]
value = 2.4

[[item]]
name = "u_line"
kind = "line"
metric = "max_abs"
tolerance = 1e-9
[item.result]
start = [2.0, 0.1]
end = [2.0, 0.9]
points = 9
field = "velocity"
component = 0
x = "y"
[item.reference]
file = "ref/u.txt"
x = "y"
y = "u"
"""


def _write_refs(d):
    ref = d / "ref"
    ref.mkdir()
    # cf = 0.1 + 0.01 x exactly, sampled beyond both ends of the wall (x = -2 .. 12, step 0.5)
    xs = np.arange(-2.0, 12.01, 0.5)
    body = "\n".join(f"{float(x)!r} {0.1 + 0.01 * float(x)!r}" for x in xs)
    (ref / "cf.dat").write_text(f'# linear skin friction\nvariables = "x" "cf"\nzone t = "all"\n{body}\n')
    # offset by 0.05 everywhere: l2 = 0.05 > 0.01 -> fails
    (ref / "cf_offset.csv").write_text("x,cf\n" + "\n".join(f"{x},{0.15 + 0.01 * x}" for x in (1.0, 3.0, 5.0)))
    # cp = 1 - 0.1 x with x/H = x/2, shifted to zero at x/H = 1 (x = 2): cp' = -0.2 (x/H - 1)
    (ref / "cp.csv").write_text("x/H,cp\n" + "\n".join(f"{t},{-0.2 * (t - 1.0)}" for t in (0.5, 1.5, 2.5, 4.0)))
    # u = 1 + 0.5 * 2 + 0.25 y = 2 + 0.25 y along x = 2 (cell data linear between centres: exact)
    (ref / "u.txt").write_text("y u\n" + "\n".join(f"{y} {2.0 + 0.25 * y}" for y in (0.2, 0.4, 0.6, 0.8)))


def test_compare_pass_and_fail_gives_exit_1_and_reports(tmp_path, run_dir):
    _write_refs(tmp_path)
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC)
    report = tmp_path / "report"
    out = io.StringIO()
    assert compare_command(run_dir, spec, report, stream=out) == 1
    rep = json.loads((report / "report.json").read_text())
    items = {it["name"]: it for it in rep["items"]}
    assert rep["passed"] is False and rep["n_items"] == 5 and rep["n_failed"] == 2 and rep["n_errors"] == 0
    assert {k: v["status"] for k, v in items.items()} == {
        "cf_good": "pass", "cf_offset": "fail", "cp_shifted": "pass", "drag": "fail", "u_line": "pass"}

    good = items["cf_good"]
    # no extrapolation: only reference points inside the wall's extent [0.05, 9.95] are compared:
    # x = 0.5, 1.0, ..., 9.5 -> 19 points; coverage = (9.95 - 0.05) / (12 - (-2)) = 9.9 / 14
    assert good["n_points"] == 19
    assert good["compared_range"] == pytest.approx([0.05, 9.95])
    assert good["coverage"] == pytest.approx(9.9 / 14, rel=1e-12)
    assert good["value"] < 1e-12
    assert good["requested_range"] == [-2.0, 12.0]

    off = items["cf_offset"]
    assert off["value"] == pytest.approx(0.05, rel=1e-9)  # constant difference: l2 = 0.05
    assert off["coverage"] == pytest.approx(1.0)  # reference extent [1, 5] inside the wall
    assert "exceeds the tolerance" in off["message"]
    assert items["cp_shifted"]["value"] < 1e-12 and items["cp_shifted"]["n_points"] == 4
    assert items["drag"]["value"] == pytest.approx(0.1 / 2.4, rel=1e-12)  # |2.5 - 2.4| / 2.4
    assert items["u_line"]["value"] < 1e-12 and items["u_line"]["n_points"] == 4

    # JUnit: one test case per item, failures carry the message
    root = ET.parse(report / "junit.xml").getroot()
    suite = root.find("testsuite")
    assert suite.get("tests") == "5" and suite.get("failures") == "2" and suite.get("errors") == "0"
    cases = {tc.get("name"): tc for tc in suite.findall("testcase")}
    assert set(cases) == set(items)
    assert cases["cf_offset"].find("failure") is not None and cases["cf_good"].find("failure") is None
    assert "exceeds the tolerance" in cases["drag"].find("failure").get("message")

    md = (report / "summary.md").read_text()
    assert "3 of 5 items pass." in md
    assert "| cf_good | wall | max_abs |" in md and "| 70.7% |" in md
    assert "| cf_offset | wall | l2 | 0.05 | 0.01 | 100.0% | 3 | **FAIL** |" in md
    for name in items:
        png = report / "plots" / f"{name}.png"
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert items[name]["plot"] == f"plots/{name}.png"
    assert not list(report.glob(".*"))  # no temporary files left behind
    assert "FAIL  drag" in out.getvalue()


def test_compare_all_pass_gives_exit_0(tmp_path, run_dir):
    _write_refs(tmp_path)
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.split("[[item]]\nname = \"cf_offset\"")[0])
    assert compare_command(run_dir, spec, tmp_path / "r", stream=io.StringIO()) == 0


def test_no_overlap_fails_and_min_coverage(tmp_path, run_dir):
    ref = tmp_path / "far.csv"
    ref.write_text("x,cf\n20,1\n30,1\n")
    spec = tmp_path / "s.toml"
    spec.write_text(f"""
[[item]]
name = "far"
kind = "wall"
metric = "max_abs"
tolerance = 1.0
[item.result]
patch = "lower_wall"
y = "cf"
[item.reference]
file = "{ref}"
x = "x"
y = "cf"

[[item]]
name = "short"
kind = "wall"
metric = "max_abs"
tolerance = 1.0
range = [0.0, 20.0]
min_coverage = 0.9
[item.result]
patch = "lower_wall"
y = "cf"
[item.reference]
file = "ref.csv"
x = "x"
y = "cf"
""")
    (tmp_path / "ref.csv").write_text("x,cf\n0,0.1\n10,0.2\n")
    assert compare_command(run_dir, spec, tmp_path / "r", stream=io.StringIO()) == 1
    rep = json.loads((tmp_path / "r" / "report.json").read_text())
    far, short = rep["items"]
    assert far["status"] == "fail" and far["coverage"] == 0.0 and "no overlap" in far["message"]
    # covered [0.05, 9.95] of [0, 20]: 49.5 % < 90 %
    assert short["coverage"] == pytest.approx(9.9 / 20) and "below the required 90.0%" in short["message"]


def test_bad_input_gives_exit_2_naming_file_and_column(tmp_path, run_dir):
    (tmp_path / "ref.csv").write_text("x,cf\n1,0.1\n2,0.2\n")
    spec = tmp_path / "s.toml"
    spec.write_text("""
[[item]]
name = "missing_column"
kind = "wall"
metric = "max_abs"
tolerance = 1.0
[item.result]
patch = "lower_wall"
y = "cf"
[item.reference]
file = "ref.csv"
x = "x"
y = "tau_w"
""")
    err = io.StringIO()
    assert compare_command(run_dir, spec, tmp_path / "r", stream=err) == 2
    rep = json.loads((tmp_path / "r" / "report.json").read_text())
    msg = rep["items"][0]["message"]
    assert rep["items"][0]["status"] == "error"
    assert str(tmp_path / "ref.csv") in msg and "'tau_w'" in msg and "named on line 1" in msg
    root = ET.parse(tmp_path / "r" / "junit.xml").getroot()
    assert root.find("testsuite").get("errors") == "1"
    # a broken spec: nothing to report, exit 2 with the key named
    spec.write_text('[[item]]\nname = "a"\nkind = "wall"\nmetric = "max_abs"\ntolerence = 1.0\n')
    err = io.StringIO()
    assert compare_command(run_dir, spec, tmp_path / "r2", stream=err) == 2
    assert "unknown key 'tolerence'" in err.getvalue()
    assert compare_command(tmp_path / "nope", tmp_path / "s.toml", tmp_path / "r3", stream=io.StringIO()) == 2


@pytest.mark.parametrize(
    "body, match",
    [
        ('kind = "wall"\nmetric = "max_abs"\n', "give the tolerance"),
        ('kind = "surface"\nmetric = "max_abs"\ntolerance = 1\n', "kind = 'surface'"),
        ('kind = "scalar"\nmetric = "l2"\ntolerance = 1\n', "for a scalar item choose one of rel_error"),
        ('kind = "wall"\nmetric = "l2"\ntolerance = 1\nrange = [2, 1]\n', "range = .*smaller"),
        ('kind = "wall"\nmetric = "l2"\ntolerance = 1\n[item.result]\npatch = "w"\n', "missing key 'y'"),
    ],
)
def test_spec_errors_name_the_key(tmp_path, body, match):
    p = tmp_path / "s.toml"
    p.write_text('[[item]]\nname = "a"\n' + body)
    with pytest.raises(CaseError, match=match):
        load_spec(p)


def test_non_monotonic_reference_names_the_line(tmp_path, run_dir):
    (tmp_path / "ref.dat").write_text("x cf\n1 0.1\n3 0.2\n2 0.3\n")
    spec = tmp_path / "s.toml"
    spec.write_text('[[item]]\nname = "a"\nkind = "wall"\nmetric = "rms"\ntolerance = 1\n'
                    '[item.result]\npatch = "lower_wall"\ny = "cf"\n'
                    '[item.reference]\nfile = "ref.dat"\nx = "x"\ny = "cf"\n')
    assert compare_command(run_dir, spec, tmp_path / "r", stream=io.StringIO()) == 2
    msg = json.loads((tmp_path / "r" / "report.json").read_text())["items"][0]["message"]
    assert "ref.dat: line 4: the abscissa is not strictly monotonic" in msg


def test_curve_metrics_by_hand():
    x = np.linspace(0.0, 2.0, 2001)
    d = 3.0 * x  # l2 = sqrt(int_0^2 9 x^2 dx / 2) = sqrt(12) (trapezoid error ~1e-7 here)
    assert curve_metric("l2", x, d) == pytest.approx(math.sqrt(12.0), rel=1e-6)
    assert curve_metric("max_abs", x, d - 1.0) == pytest.approx(5.0)
    assert curve_metric("rms", np.arange(4.0), np.array([1.0, -1.0, 1.0, -1.0])) == pytest.approx(1.0)


def test_field_item_against_a_reference_field(tmp_path, run_dir):
    from verify_helpers import write_quad_field

    # reference on a different (finer) mesh of the same linear field: point data, exact inside
    write_quad_field(tmp_path / "ref.vtu", 7, 5, 10.0, 1.0, point_fn=lambda x, y: 1.0 + 0.5 * x + 0.25 * y + 0.01)
    spec = tmp_path / "s.toml"
    spec.write_text('[[item]]\nname = "f"\nkind = "field"\nmetric = "l2"\ntolerance = 0.02\n'
                    'region = [0.0, 5.0, 0.0, 1.0]\n'
                    '[item.result]\nfield = "f"\n[item.reference]\nfile = "ref.vtu"\nfield = "f"\n')
    assert compare_command(run_dir, spec, tmp_path / "r", stream=io.StringIO()) == 0
    it = json.loads((tmp_path / "r" / "report.json").read_text())["items"][0]
    assert it["value"] == pytest.approx(0.01, rel=1e-9)  # constant offset 0.01
    assert it["coverage"] == pytest.approx(1.0) and it["n_points"] == 20  # 5 x 4 cells in the region


# ------------------------------------------------------------------ acceptance: exit codes, JUnit
ONE_ITEM = """
title = "one curve"
[[item]]
name = "cp_lower"
kind = "wall"
metric = "max_abs"
tolerance = 0.01
[item.result]
patch = "lower_wall"
y = "cp"
[item.reference]
file = "{file}"
x = "x"
y = "cp"
"""


def test_equal_passes_shifted_fails_and_junit_names_the_item(tmp_path, run_dir):
    spec = tmp_path / "s.toml"
    spec.write_text(ONE_ITEM.format(file="ref.csv"))
    xs = np.linspace(0.5, 9.5, 10)
    # the result's own curve cp = 1 - 0.1 x: passes (linear interpolation is exact)
    (tmp_path / "ref.csv").write_text("x,cp\n" + "\n".join(f"{x!r},{1.0 - 0.1 * x!r}" for x in xs.tolist()))
    assert compare_command(run_dir, spec, tmp_path / "r0", stream=io.StringIO()) == 0
    # shifted by 0.02, twice the tolerance: exit 1, and the JUnit file names the failing item
    (tmp_path / "ref.csv").write_text("x,cp\n" + "\n".join(f"{x!r},{1.02 - 0.1 * x!r}" for x in xs.tolist()))
    assert compare_command(run_dir, spec, tmp_path / "r1", stream=io.StringIO()) == 1
    suite = ET.parse(tmp_path / "r1" / "junit.xml").getroot().find("testsuite")
    failed = [tc.get("name") for tc in suite.findall("testcase") if tc.find("failure") is not None]
    assert failed == ["cp_lower"]
    assert json.loads((tmp_path / "r1" / "report.json").read_text())["items"][0]["value"] == pytest.approx(0.02)


def test_spec_naming_a_missing_file_exits_2(tmp_path, run_dir):
    spec = tmp_path / "s.toml"
    spec.write_text(ONE_ITEM.format(file="data/absent.csv"))
    err = io.StringIO()
    assert compare_command(run_dir, spec, tmp_path / "r", stream=err) == 2
    assert str(tmp_path / "data" / "absent.csv") in err.getvalue() and "does not exist" in err.getvalue()
    suite = ET.parse(tmp_path / "r" / "junit.xml").getroot().find("testsuite")
    assert suite.get("errors") == "1" and suite.find("testcase").get("name") == "cp_lower"


# ----------------------------------------------------------------------- profiles in wall units
WALL_UNITS = """
[[item]]
name = "uplus"
kind = "line"
metric = "max_abs"
tolerance = 1e-9
[item.result]
start = [{x0}, 0.0]
end = [{x0}, 1.0]
field = "velocity"
component = 0
sampling = "{sampling}"
wall_units = "lower_wall"
[item.reference]
file = "ref.csv"
x = "y_plus"
y = "u_plus"
"""


def test_line_in_wall_units_at_cell_centres(tmp_path, make_result_dir):
    # velocity u = 3 y in every cell (cell data), u_tau = 0.5 on the wall, nu = mu / rho = 0.01:
    # y+ = 50 y, u+ = 6 y = 0.12 y+ at the cell centres y = 0.05, 0.15, ..., 0.95 (10 rows of cells)
    xw = np.linspace(0.05, 1.95, 20)
    d = make_result_dir(
        n_cells=200, walls={"lower_wall": {"x": xw, "y": 0 * xw, "s": xw, "u_tau": 0 * xw + 0.5}},
        summary_extra={"reference": {"rho": 2.0, "mu": 0.02}},
        field=(20, 10, 2.0, 1.0, lambda x, y: 3.0 * y),
    )
    yp = np.array([5.0, 12.5, 20.0, 45.0])
    (tmp_path / "ref.csv").write_text("y_plus,u_plus\n" + "\n".join(f"{v!r},{0.12 * v!r}" for v in yp.tolist()))
    spec = tmp_path / "s.toml"
    spec.write_text(WALL_UNITS.format(x0=0.33, sampling="cells"))
    assert compare_command(d, spec, tmp_path / "r", stream=io.StringIO()) == 0
    it = json.loads((tmp_path / "r" / "report.json").read_text())["items"][0]
    assert it["n_points"] == 4 and it["value"] < 1e-12
    assert it["compared_range"] == pytest.approx([5.0, 45.0])
    # the centres span y+ = 2.5 .. 47.5: a reference point at y+ = 1 is outside (never extrapolated)
    (tmp_path / "ref.csv").write_text("y_plus,u_plus\n1.0,0.12\n3.0,0.36\n45.0,5.4\n")
    assert compare_command(d, spec, tmp_path / "r2", stream=io.StringIO()) == 0
    it = json.loads((tmp_path / "r2" / "report.json").read_text())["items"][0]
    assert it["n_points"] == 2 and it["coverage"] == pytest.approx(42.5 / 44.0)
    # a line that does not start on the wall: bad input, named
    spec.write_text(WALL_UNITS.format(x0=0.33, sampling="cells").replace("start = [0.33, 0.0]", "start = [0.33, 0.2]"))
    err = io.StringIO()
    assert compare_command(d, spec, tmp_path / "r3", stream=err) == 2
    assert "away from wall patch 'lower_wall'" in err.getvalue()


def test_cells_along_a_line_on_a_cell_edge(tmp_path):
    from verify_helpers import write_quad_field

    from fvrans.verify.readers import read_field

    write_quad_field(tmp_path / "f.vtu", 4, 2, 4.0, 2.0, cell_fn=lambda x, y: x + 10 * y)
    ff = read_field(tmp_path / "f.vtu")
    # x = 2 is the edge between the columns of centres x = 1.5 and 2.5: one column is taken
    cells, s = ff.cells_along(np.array([2.0, 0.0]), np.array([2.0, 2.0]))
    np.testing.assert_allclose(s, [0.5, 1.5])
    assert len(set(ff.cell_centre[cells, 0])) == 1
    cells, s = ff.cells_along(np.array([0.0, 0.5]), np.array([4.0, 0.5]))  # along y = 0.5
    np.testing.assert_allclose(ff.cell_values("f", cells), [0.5 + 5, 1.5 + 5, 2.5 + 5, 3.5 + 5])
    np.testing.assert_allclose(s, [0.5, 1.5, 2.5, 3.5])


def test_probe_profile_file_in_wall_units(tmp_path, make_result_dir):
    """A line-probe file profiles/<name>.csv (columns s, x, y, u, v, p, nu_tilde, eddy_viscosity_ratio) along
    the normal of a wall y = x tan(30 deg): the start is found from s and the points, u_tau from
    the wall table at that start (linear between face centres), nu from summary.json."""
    c, sn = np.cos(np.pi / 6), np.sin(np.pi / 6)
    sw = np.array([0.5, 1.5, 2.5])  # wall-face centres along the inclined wall, u_tau 0.2, 0.4, 0.6
    d = make_result_dir(walls={"w": {"x": sw * c, "y": sw * sn, "s": sw, "u_tau": 0.2 * (sw + 0.5)}},
                        summary_extra={"reference": {"rho": 1.0, "mu": 1e-3}})
    s = np.array([0.01, 0.02, 0.05, 0.1])
    start = np.array([2.0 * c, 2.0 * sn])  # wall arc length 2: u_tau = 0.5
    pts = start[None, :] + s[:, None] * np.array([-sn, c])[None, :]
    u = 4.0 * s
    (d / "profiles").mkdir()
    rows = [",".join(repr(float(v)) for v in (a, x, y, b, 0.0, 0.0, 0.0, 0.0)) for a, (x, y), b in zip(s, pts, u)]
    (d / "profiles" / "normal.csv").write_text("s,x,y,u,v,p,nu_tilde,eddy_viscosity_ratio\n" + "\n".join(rows) + "\n")
    # y+ = s 0.5 / 1e-3 = 500 s, u+ = 4 s / 0.5 = 8 s = 0.016 y+
    (tmp_path / "ref.csv").write_text("y_plus,u_plus\n10,0.16\n25,0.4\n50,0.8\n")
    spec = tmp_path / "s.toml"
    spec.write_text('[[item]]\nname = "p"\nkind = "profile"\nmetric = "max_abs"\ntolerance = 1e-9\n'
                    '[item.result]\nprofile = "normal"\ny = "u"\nwall_units = "w"\n'
                    '[item.reference]\nfile = "ref.csv"\nx = "y_plus"\ny = "u_plus"\n')
    assert compare_command(d, spec, tmp_path / "r", stream=io.StringIO()) == 0
    it = json.loads((tmp_path / "r" / "report.json").read_text())["items"][0]
    assert it["n_points"] == 3 and it["value"] < 1e-12
    spec.write_text(spec.read_text().replace('wall_units = "w"', 'wall_units = "w"\nx = "y"'))
    with pytest.raises(CaseError, match='with wall_units the abscissa is the distance from the wall'):
        load_spec(spec)
