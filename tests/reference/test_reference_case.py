"""The [reference] table and the injection keys of [model] (#17 phase 2): validation messages, the
input paths of a run's reference (case key, Python objects), outside rules, regions, comparison
figures worked by hand, the monitored quantity of a frozen run, the feature table of a run."""

from __future__ import annotations

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.case.schema import Region
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.monitor.watch import FlowState, VariableChange
from fvrans.reference import diagnostics as D
from fvrans.reference.cells import reference_from_cells
from fvrans.reference.interpolate import DataSet, stencil

BASE = {
    "mesh": {"generator": "channel", "parameters": {"length": 2.0, "height": 1.0, "nx": 8, "ny": 6}},
    "fluid": {"density": 1.0, "viscosity": 0.01},
    "boundary": {"inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
                 "outlet": {"kind": "outflow-pressure"},
                 "lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}},
    "solver": {"tolerance": 1e-7},
}


def case(**tables) -> fa.Case:
    d = {k: dict(v) for k, v in BASE.items()}
    d.update(tables)
    return fa.case_from_dict(d)


def cloud(tmp_path, header: str = "x,y,U,V,uu,uv,vv", stress: bool = True, name: str = "ref.csv",
          x_max: float = 2.0):
    """A CSV cloud over the channel: u parabolic, invented stresses (test data)."""
    xs, ys = np.linspace(0, x_max, 9), np.linspace(0, 1, 11)
    X, Y = (a.ravel() for a in np.meshgrid(xs, ys, indexing="ij"))
    cols = [X, Y, 6 * Y * (1 - Y), 0 * X]
    if stress:
        cols += [1e-3 + 0 * X, -1e-3 * (1 - 2 * Y), 5e-4 + 0 * X]
    rows = "\n".join(",".join(repr(float(v)) for v in r) for r in zip(*cols))
    p = tmp_path / name
    p.write_text(header + "\n" + rows + "\n")
    return p


NAMES = {"u": "U", "v": "V", "R_xx": "uu", "R_xy": "uv", "R_yy": "vv"}


# -- validation ----------------------------------------------------------------------------------
@pytest.mark.parametrize("tables,message", [
    ({"model": {"stress_form": "implicit"}}, r"model.stress_form: only used with turbulence = \"reference-stress\""),
    ({"model": {"turbulence": "reference-stress", "stress_form": "both"}}, r"model.stress_form: 'both' is not allowed"),
    ({"model": {"turbulence": "reference-stress", "blend_share": 0.3}}, r"model.blend_share: needs blend_model"),
    ({"model": {"turbulence": "reference-stress", "blend_model": "spalart-allmaras", "blend_share": 1.5}},
     r"model.blend_share: must be in \[0, 1\]"),
    ({"model": {"turbulence": "reference-stress", "eddy_viscosity_cap": 0}}, r"model.eddy_viscosity_cap: must be > 0"),
    ({"model": {"turbulence": "reference-stress", "nonlinear_stress": "qcr2000"}},
     r"model.nonlinear_stress: a non-linear Reynolds stress needs an eddy-viscosity model"),
    ({"reference": {"freeze_velocity": True}}, r"reference.freeze_velocity: an a-priori run solves only a turbulence"),
    ({"reference": {"data": "nowhere.csv"}}, r"reference.data: .*nowhere.csv does not exist"),
    ({"reference": {"outside": "extrapolate"}}, r"reference.outside: 'extrapolate' is not allowed"),
    ({"reference": {"names": {"u": 3}}}, r"reference.names: 'u' = int 3: give the column or field name"),
    ({"reference": {"regions": {"all": {"box": [0, 1, 0, 1]}}}}, r"reference.regions.all: 'all' is the whole mesh"),
    ({"reference": {"regions": {"a": {}}}}, r"reference.regions.a: give box"),
    ({"reference": {"regions": {"a": {"box": [1, 0, 0, 1]}}}}, r"reference.regions.a.box: needs xmin < xmax"),
    ({"reference": {"regions": {"a": {"wall_distance": [0.2, 0.1]}}}},
     r"reference.regions.a.wall_distance: needs 0 <= dmin < dmax"),
    ({"reference": {"regions": {"a": {"corner": [0, 1]}}}}, r"reference.regions.a.corner: unknown key"),
    ({"reference": {"frozen": True}}, r"reference.frozen: unknown key"),
])
def test_keys_checked(tables, message):
    with pytest.raises(CaseError, match=message):
        case(**tables)


def test_keys_round_trip(tmp_path):
    p = cloud(tmp_path)
    c = case(model={"turbulence": "reference-stress", "stress_form": "explicit", "blend_model": "k-omega-sst"},
             reference={"data": str(p), "names": NAMES, "outside": "zero-stress", "write_features": True,
                        "regions": {"low": {"box": [0, 2, 0, 0.5], "wall_distance": [0, 0.1]}}})
    assert c.model.injection.blend_share == 0.5 and c.model.injection.stress_form == "explicit"
    assert c.solver.turbulence_tolerance == 1e-6  # the blend model's default (k-omega SST)
    assert c.reference.regions["low"] == Region(box=(0.0, 2.0, 0.0, 0.5), wall_distance=(0.0, 0.1))
    again = fa.case_from_dict(c.to_dict())
    assert again == c
    assert fa.residual_names(c) == ["u", "v", "continuity", "k", "omega"]


# -- inputs of a run's reference --------------------------------------------------------------------
def test_reference_names_and_bad_input_named(tmp_path):
    pb = fa.prepare(case(reference={"data": str(cloud(tmp_path)), "names": NAMES}))
    ref = fa.load_reference(pb)
    np.testing.assert_allclose(ref.velocity[:, 0], 6 * pb.geom.cell_centre[:, 1] * (1 - pb.geom.cell_centre[:, 1]),
                               atol=0.02)  # linear interpolation of a parabola on 11 levels
    assert ref.stress.shape == (pb.mesh.n_cells, 3) and ref.inside.all()
    with pytest.raises(CaseError, match=r"ref.csv: no column 'uvw'.*x, y, U, V, uu, uv, vv"):
        fa.load_reference(fa.prepare(case(reference={"data": str(cloud(tmp_path)), "names": {**NAMES, "R_xy": "uvw"}})))
    bad = tmp_path / "nan.csv"
    lines = cloud(tmp_path).read_text().splitlines()
    row = lines[3].split(",")
    lines[3] = ",".join(row[:2] + ["nan"] + row[3:])
    bad.write_text("\n".join(lines) + "\n")
    with pytest.raises(CaseError, match=r"nan.csv: column U holds nan at line 4"):
        fa.load_reference(fa.prepare(case(reference={"data": str(bad), "names": NAMES})))


def test_outside_rules(tmp_path):
    half = cloud(tmp_path, x_max=1.0, name="half.csv")  # covers x <= 1 only
    with pytest.raises(CaseError, match=r"half.csv: 48 of 48 cells|half.csv: \d+ of 48 cells lie outside the data"):
        fa.load_reference(fa.prepare(case(reference={"data": str(half), "names": NAMES, "outside": "refuse"})))
    pb = fa.prepare(case(reference={"data": str(half), "names": NAMES, "outside": "zero-stress"}))
    ref = fa.load_reference(pb)
    out = pb.geom.cell_centre[:, 0] > 1.0
    assert (~ref.inside == out).all() and np.all(ref.stress[out] == 0.0) and np.all(ref.stress[~out, 0] > 0)
    masks = D.region_masks(pb.geom.cell_centre, ref.inside)
    assert masks["all"].sum() == (~out).sum()  # cells outside the data are left out of the comparison


def test_python_reference_objects():
    pb = fa.prepare(case())
    n = pb.mesh.n_cells
    ref = fa.load_reference(pb, {"velocity": np.ones((n, 2)), "stress": np.zeros((n, 3)), "k": np.ones(n)})
    assert ref.kind == "values per cell" and ref.quantities["k"].shape == (n,)
    with pytest.raises(CaseError, match=r"'R_xx', 'R_xy' given without|R_xx given without R_xy, R_yy"):
        reference_from_cells({"u": np.ones(n), "v": np.ones(n), "R_xx": np.ones(n)}, n)
    with pytest.raises(CaseError, match=r"'velocity' is not a finite number in cell 3"):
        reference_from_cells({"u": np.where(np.arange(n) == 3, np.nan, 1.0), "v": np.ones(n)}, n)
    with pytest.raises(CaseError, match=r"reference= takes a path, a FieldSource"):
        fa.load_reference(pb, 3.0)


def test_data_on_the_target_points_taken_as_they_are():
    """A column of cell centres (collinear: no triangles) takes the values given at those centres."""
    y = np.linspace(0.05, 0.95, 10)
    sites = np.column_stack([np.full(10, 0.5), y])
    ds = DataSet("column", "cloud", sites, {"u": y**3})
    st = stencil(ds, sites[::-1])
    np.testing.assert_array_equal(st.apply(ds.values["u"]), (y**3)[::-1])
    with pytest.raises(CaseError, match="lie on one line"):  # other points still need triangles
        stencil(ds, sites + 0.01)


# -- comparison figures by hand ----------------------------------------------------------------------
def test_velocity_error_norms_and_regions():
    c = np.array([[0.5, 0.1], [1.5, 0.1], [0.5, 0.9], [1.5, 0.9]])
    regions = {"left": Region(box=(0.0, 1.0, 0.0, 1.0)), "wall": Region(wall_distance=(0.0, 0.2))}
    masks = D.region_masks(c, np.array([True, True, True, False]), regions, wall_distance=np.array([.1, .1, .1, .1]))
    assert [m.tolist() for m in masks.values()] == [[1, 1, 1, 0], [1, 0, 1, 0], [1, 1, 1, 0]]
    ref = np.array([[2.0, 0.0]] * 4)
    u = ref + np.array([[0.3, 0.4], [0.0, 0.0], [0.0, 0.1], [9.0, 9.0]])  # |du| = 0.5, 0, 0.1 (the last outside)
    vol = np.array([1.0, 1.0, 2.0, 1.0])
    e, fig = D.velocity_error(u, ref, vol, masks)
    assert fig["scale"] == 2.0 and e[0] == pytest.approx(0.25)
    assert fig["regions"]["all"]["max"] == pytest.approx(0.25)
    assert fig["regions"]["all"]["L2"] == pytest.approx(np.sqrt((0.25 + 2 * 0.01) / 4) / 2)
    assert fig["regions"]["left"]["L2"] == pytest.approx(np.sqrt((0.25 + 2 * 0.01) / 3) / 2)
    with pytest.raises(ValueError, match="no wall"):
        D.region_masks(c, np.ones(4, bool), regions)


def test_model_departure_by_hand():
    masks = {"all": np.ones(3, bool)}
    stress = np.array([[0.0, -1.0, 0.0], [0.0, -2.0, 0.0], [1.0, 0.0, -1.0]])
    maps, fig = D.model_departure(np.array([1.0, 20.0, 0.0]), np.array([1.0, 2.0, np.nan]), stress, stress,
                                  np.ones(3), masks)
    np.testing.assert_allclose(maps[D.LOG_RATIO], [0.0, 1.0, np.nan])
    assert np.all(maps[D.STRESS_DEPARTURE] == 0.0)
    r = fig["regions"]["all"]
    assert r["eddy_viscosity"]["max"] == pytest.approx(18.0 / 2.0) and r["eddy_viscosity"]["cells"] == 2
    assert r["median_log10_ratio"] == pytest.approx(0.5)


def test_variable_change_watch():
    w = VariableChange(["nu_tilde"], {"nu_tilde": 1.0})
    f = Fields.uniform(3, 1)
    state = lambda v: FlowState(np.zeros((3, 2)), np.zeros(3), np.zeros((3, 2)), fields=f)  # noqa: E731
    f.variables = {"nu_tilde": np.array([0.1, 0.2, 0.3])}
    assert np.isnan(w.values(state(0))[0])
    f.variables = {"nu_tilde": np.array([0.1, 0.2, 0.35])}
    assert w.values(state(1)) == [pytest.approx(0.05)]  # the floor 1.0 is above max |nu_tilde|
    f.variables = {"nu_tilde": np.array([10.0, 0.2, 0.35])}
    assert w.values(state(2)) == [pytest.approx(9.9 / 10.0)]


# -- a run with reference data ------------------------------------------------------------------------
def test_laminar_run_compared_and_features_written(tmp_path):
    """Plane Poiseuille flow against its exact profile (u = 6 U y (1 - y), a textbook solution), with
    invented stresses and k = 1 as feature targets: error maps and figures, the feature table."""
    c = case(reference={"data": str(cloud(tmp_path, header="x,y,U,V,uu,uv,vv")), "names": NAMES,
                        "write_features": True, "regions": {"core": {"wall_distance": [0.2, 0.5]}}},
             boundary={**BASE["boundary"], "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]}})
    n = fa.prepare(c).mesh.n_cells
    ref = fa.load_reference(fa.prepare(c))
    ref.quantities["k"] = np.ones(n)
    r = fa.solve(c, reference=ref)
    comp = r.summary()["reference_comparison"]
    err = comp["velocity_error"]["regions"]
    assert comp["velocity_error"]["scale"] == pytest.approx(ref.velocity[:, 0].max())
    assert 0 < err["core"]["max"] <= err["all"]["max"]  # a developing flow from a uniform inlet
    assert set(r.cell_data()) >= {D.VELOCITY_ERROR, D.OPTIMAL_RATIO, D.MISALIGNMENT, D.NON_EDDY_SHARE}
    assert "model" not in comp  # a laminar run has no model to compare
    r.write(tmp_path / "out")
    table = np.load(tmp_path / "out" / "features.npz")
    np.testing.assert_allclose(table["b_xx"], 1e-3 / 2 - 1 / 3)  # R_xx / 2k - 1/3
    np.testing.assert_allclose(table["R_xy"], ref.stress[:, 1])
    header = (tmp_path / "out" / "features.csv").read_text().splitlines()[0].split(",")
    assert header[:6] == ["x", "y", "wall_distance", "time_scale", "lambda_1", "lambda_2"]


def test_reference_data_must_be_a_regular_file(tmp_path):
    import os

    if not hasattr(os, "mkfifo"):
        pytest.skip("no named pipes here")
    os.mkfifo(tmp_path / "pipe.csv")
    with pytest.raises(CaseError, match=r"reference.data: .*pipe.csv is a named pipe"):
        case(reference={"data": str(tmp_path / "pipe.csv")})
