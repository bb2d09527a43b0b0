"""Plots of a result directory: every plot type renders headless (Agg canvas, no pyplot) and the
figures carry what a reader needs (labels with units, one line per equation, reference curves,
law-of-the-wall lines, zero-shear markers, colour-bar labels). Synthetic result directories
written with fvrans.post.writers keep the tests fast."""

from __future__ import annotations

import json

import matplotlib
import numpy as np
import pytest
from matplotlib.collections import LineCollection, PolyCollection
from post_meshes import channel, mixed_cells, square_with_hole

from fvrans.errors import CaseError
from fvrans.post.plots import (
    field_figure,
    make_plots,
    plot_wall_profile,
    read_fields,
    residual_figure,
    result_figures,
    wall_figure,
    wall_profile_figure,
)
from fvrans.post.residuals import RESIDUAL_LABEL, RESIDUAL_NORMALISATION
from fvrans.post.writers import write_csv_atomic, write_json_atomic, write_vtu_atomic

TITLE = "Synthetic plate"
WALL_HEADER = ["face", "segment", "s", "x", "y", "tx", "ty", "d_perp", "tau_w", "cf", "p_wall", "cp", "u_tau",
               "y_plus"]


def _wall_columns(x: np.ndarray, y: np.ndarray, tx: np.ndarray, ty: np.ndarray, cf: np.ndarray) -> list:
    n = len(x)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(x), np.diff(y)))])
    cp = 1.0 - x / max(x.max(), 1e-12)
    return [np.arange(n), np.zeros(n, dtype=np.int64), s, x, y, tx, ty, np.full(n, 0.01), 0.5 * cf, cf,
            0.5 * cp, cp, np.sqrt(np.abs(0.5 * cf)), np.full(n, 1.0)]


def _write_result(d, nut: bool = True, zero_shear=(0.75,)) -> None:
    """A small result directory: summary, residuals, one wall, fields on a 8 x 4 channel."""
    (d / "wall").mkdir(parents=True)
    x = np.linspace(0.05, 1.95, 20)
    cf = 0.01 * (x - 0.75)  # changes sign at x = 0.75
    write_csv_atomic(d / "wall" / "plate.csv", WALL_HEADER,
                     _wall_columns(x, 0 * x, np.ones(20), np.zeros(20), cf))
    it = np.arange(1, 31)
    write_csv_atomic(d / "residuals.csv", ["iteration", "u", "v", "continuity", "seconds"],
                     [it, 10.0 ** (-it / 5), 10.0 ** (-it / 6), 10.0 ** (-it / 4), np.full(30, 0.01)])
    mesh, geom = channel(8, 4)
    c = geom.cell_centre
    vel = np.stack([c[:, 1] * (1 - c[:, 1]) * 6.0, np.zeros(mesh.n_cells)], axis=1)
    data = {"velocity": vel, "pressure": 2.0 - c[:, 0]}
    if nut:
        data["eddy_viscosity_ratio"] = 1.0 + c[:, 1]
    write_vtu_atomic(d / "fields.vtu", mesh, data)
    write_json_atomic(d / "summary.json", {
        "title": TITLE,
        "reference": {"rho": 1.0, "mu": 0.01, "u_ref": 2.0, "p_ref": 0.0, "l_ref": 1.0, "flow_direction": [1, 0]},
        "walls": {"plate": {"shear_sign_change_x": list(zero_shear), "shear_sign_change_s": [0.7],
                            "shear_sign_change_kind": ["-to+"] * len(zero_shear)}},
    })


def _labelled_lines(ax) -> dict:
    return {ln.get_label(): ln for ln in ax.get_lines() if not ln.get_label().startswith("_")}


# ---------------------------------------------------------------------------------------------
def test_residual_figure_one_log_line_per_equation(tmp_path):
    _write_result(tmp_path)
    fig = residual_figure(tmp_path / "residuals.csv", title=TITLE)
    ax = fig.axes[0]
    assert ax.get_yscale() == "log"
    assert sorted(_labelled_lines(ax)) == ["continuity", "u", "v"]
    assert "iteration" in ax.get_xlabel() and RESIDUAL_LABEL in ax.get_ylabel()
    # the normalisation is stated on the figure
    assert RESIDUAL_NORMALISATION[:40] in fig.get_supxlabel().replace("\n", " ")
    assert TITLE in ax.get_title()
    assert ax.get_legend() is not None
    u = _labelled_lines(ax)["u"]
    np.testing.assert_allclose(u.get_ydata(), 10.0 ** (-np.arange(1, 31) / 5))


def test_residual_figure_from_arrays_drops_zeros_and_ignores_round_off_start():
    r = np.array([1e-21, 1e-3, 1e-4, 0.0, 1e-5, 1e-6, 1e-7])
    fig = residual_figure({"u": r, "seconds": np.ones(7)})
    ax = fig.axes[0]
    (line,) = ax.get_lines()
    assert np.isnan(line.get_ydata()[3])  # zero cannot go on a log axis
    assert ax.get_legend() is None  # a single line needs no legend
    # the axis follows the history after the start-up, not the 1e-21 of the first iteration
    assert 1e-8 < ax.get_ylim()[0] < 1e-7


def test_residual_figure_without_residual_columns_is_a_clear_error(tmp_path):
    p = tmp_path / "residuals.csv"
    write_csv_atomic(p, ["iteration", "seconds"], [np.arange(3), np.ones(3)])
    with pytest.raises(CaseError, match="no residual columns"):
        residual_figure(p)


# ---------------------------------------------------------------------------------------------
def test_wall_figure_references_and_zero_shear_markers(tmp_path):
    _write_result(tmp_path)
    nu, u = 1e-4, 1.0

    def blasius(x):
        # laminar flat plate, Cf = 0.664 / sqrt(Re_x) (Blasius 1908; e.g. Schlichting,
        # Boundary-Layer Theory, ch. 7)
        return 0.664 / np.sqrt(u * x / nu)

    xa, ya = np.array([0.5, 1.0, 1.5]), np.array([0.001, 0.002, 0.003])
    refs = [("Blasius laminar", blasius), ("measured (arrays)", xa, ya)]
    fig = wall_figure(tmp_path / "wall" / "plate.csv", "cf", title=TITLE, zero_shear=[0.75, 1.25],
                      references=refs, l_ref=0.5)
    ax = fig.axes[0]
    lines = _labelled_lines(ax)
    assert {"computed", "Blasius laminar", "measured (arrays)", "zero shear (τ_w = 0)"} <= set(lines)
    # lengths over L_ref = 0.5 on the horizontal axis
    assert ax.get_xlabel().startswith("x / L_ref")
    np.testing.assert_allclose(lines["measured (arrays)"].get_xdata(), xa / 0.5)
    bl = lines["Blasius laminar"]
    np.testing.assert_allclose(bl.get_ydata(), blasius(bl.get_xdata() * 0.5), rtol=1e-12)
    assert "Cf" in ax.get_ylabel() and "[-]" in ax.get_ylabel()
    # two vertical markers at x / L_ref = 1.5 and 2.5, one legend entry for both
    vlines = [ln for ln in ax.get_lines() if np.ptp(ln.get_xdata()) == 0 and len(ln.get_xdata()) == 2
              and ln.get_linestyle() == ":"]
    assert sorted(float(v.get_xdata()[0]) for v in vlines) == [1.5, 2.5]
    legend_texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert legend_texts.count("zero shear (τ_w = 0)") == 1
    assert "plate" in ax.get_title() and TITLE in ax.get_title()


def test_wall_figure_runs_along_the_arc_length_for_a_vertical_wall():
    y = np.linspace(0.05, 0.95, 10)
    cols = dict(zip(WALL_HEADER, _wall_columns(0 * y, y, np.zeros(10), np.ones(10), np.ones(10))))
    fig = wall_figure(cols, "cp", patch="side")
    ax = fig.axes[0]
    assert ax.get_xlabel().startswith("s")
    assert "Cp" in ax.get_ylabel()
    (line,) = ax.get_lines()
    np.testing.assert_allclose(line.get_xdata(), cols["s"])
    assert ax.get_legend() is None


def test_wall_figure_bad_reference_is_a_clear_error(tmp_path):
    _write_result(tmp_path)
    with pytest.raises(CaseError, match="reference 0"):
        wall_figure(tmp_path / "wall" / "plate.csv", references=[("only a label",)])
    with pytest.raises(CaseError, match="missing"):
        wall_figure(tmp_path / "wall" / "plate.csv", "drag")


# ---------------------------------------------------------------------------------------------
def test_field_figure_velocity_magnitude_on_the_cells(tmp_path):
    _write_result(tmp_path)
    fields = read_fields(tmp_path / "fields.vtu")
    ref = {"rho": 1.0, "u_ref": 2.0, "p_ref": 0.0, "l_ref": 1.0}
    fig = field_figure(fields, "velocity", title=TITLE, reference=ref, mesh_edges=True)
    ax, cax = fig.axes
    (coll,) = [c for c in ax.collections if isinstance(c, PolyCollection)]
    assert len(coll.get_paths()) == 32
    u = fields.data["velocity"]
    np.testing.assert_allclose(coll.get_array(), np.hypot(u[:, 0], u[:, 1]) / 2.0)
    assert cax.get_xlabel() == "|U| / U_ref [-]" or cax.get_ylabel() == "|U| / U_ref [-]"
    assert ax.get_aspect() == 1.0
    assert ax.get_xlabel() == "x" and ax.get_ylabel() == "y"  # the units of the case, as in compare overlays
    assert np.all(coll.get_linewidths() > 0)  # mesh edges drawn
    assert not any(isinstance(c, LineCollection) for c in ax.collections)  # no streamlines asked


def test_field_figure_pressure_as_cp_and_eddy_viscosity_ratio(tmp_path):
    _write_result(tmp_path)
    fields = read_fields(tmp_path / "fields.vtu")
    ref = {"rho": 1.0, "u_ref": 2.0, "p_ref": 0.5, "l_ref": 1.0}
    fig = field_figure(fields, "pressure", reference=ref)
    coll = fig.axes[0].collections[0]
    np.testing.assert_allclose(coll.get_array(), (fields.data["pressure"] - 0.5) / (0.5 * 1.0 * 2.0**2))
    labels = {fig.axes[1].get_xlabel(), fig.axes[1].get_ylabel()}
    assert any(lb.startswith("Cp = (p − p_ref)") for lb in labels)
    fig = field_figure(fields, "eddy_viscosity_ratio")
    assert "ν_t / ν [-]" in {fig.axes[1].get_xlabel(), fig.axes[1].get_ylabel()}
    # without reference values: the units of the case, said so
    fig = field_figure(fields, "pressure")
    assert "p (units of the case)" in {fig.axes[1].get_xlabel(), fig.axes[1].get_ylabel()}
    with pytest.raises(CaseError, match="no cell data 'nu_tilde'"):
        field_figure(fields, "nu_tilde")


def test_field_figure_polygons_of_mixed_sizes(tmp_path):
    mesh = mixed_cells()
    write_vtu_atomic(tmp_path / "f.vtu", mesh, {"velocity": np.ones((mesh.n_cells, 2)),
                                                  "pressure": np.arange(mesh.n_cells, dtype=float)})
    fields = read_fields(tmp_path / "f.vtu")
    fig = field_figure(fields, "pressure")
    coll = fig.axes[0].collections[0]
    sizes = sorted(len(p.vertices) for p in coll.get_paths())
    # closed paths repeat the first vertex: 2 triangles, 3 quads, a pentagon and a hexagon
    assert sizes == [4, 4, 5, 5, 5, 6, 7]
    fig.canvas.draw()


def test_streamlines_stay_out_of_a_body(tmp_path):
    """Uniform flow (1, 0.3) around the square hole [1, 3]^2 of [0, 4]^2: streamlines are drawn
    but none enters the hole (grid points outside the cells are masked)."""
    mesh, geom = square_with_hole(4)
    vel = np.tile([1.0, 0.3], (mesh.n_cells, 1))
    write_vtu_atomic(tmp_path / "f.vtu", mesh, {"velocity": vel})
    fig = field_figure(tmp_path / "f.vtu", "velocity", streamlines=True)
    ax = fig.axes[0]
    (lc,) = [c for c in ax.collections if isinstance(c, LineCollection)]
    segs = np.concatenate([np.asarray(s) for s in lc.get_segments()])
    assert len(segs) > 100
    inside = (segs > 1.0 + 0.1) & (segs < 3.0 - 0.1)
    assert not np.any(inside.all(axis=1))
    # the flow direction survives the interpolation: segments run along (1, 0.3)
    d = np.concatenate([np.diff(np.asarray(s), axis=0) for s in lc.get_segments()])
    d = d[np.hypot(*d.T) > 1e-9]
    np.testing.assert_allclose(d[:, 1] / d[:, 0], 0.3, atol=1e-6)


# ---------------------------------------------------------------------------------------------
def test_wall_profile_figure_draws_both_laws_of_the_wall(tmp_path):
    yp = np.geomspace(0.5, 500.0, 30)
    up = np.where(yp < 11.0, yp, np.log(yp) / 0.41 + 5.0)
    fig = plot_wall_profile(yp, up, tmp_path / "p.png", title=TITLE, label="run")
    assert (tmp_path / "p.png").stat().st_size > 1000
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    lines = _labelled_lines(ax)
    assert set(lines) == {"run", "u+ = y+", "u+ = ln(y+) / 0.41 + 5"}
    lin = lines["u+ = y+"]
    np.testing.assert_allclose(lin.get_ydata(), lin.get_xdata())
    log = lines["u+ = ln(y+) / 0.41 + 5"]
    # log law u+ = ln(y+) / 0.41 + 5.0 (Coles 1956; common practice)
    np.testing.assert_allclose(log.get_ydata(), np.log(log.get_xdata()) / 0.41 + 5.0)
    assert ax.get_xlabel().startswith("y+") and ax.get_ylabel().startswith("u+")
    assert ax.get_legend() is not None


def test_wall_profile_figure_leaves_out_non_positive_y_plus():
    fig = wall_profile_figure([0.0, 1.0, 2.0], [0.0, 1.0, 2.0])
    data = _labelled_lines(fig.axes[0])["computed"]
    np.testing.assert_allclose(data.get_xdata(), [1.0, 2.0])


# ---------------------------------------------------------------------------------------------
def test_make_plots_writes_every_plot(tmp_path):
    _write_result(tmp_path)
    backend = matplotlib.get_backend()
    refs = {"plate": {"cf": [("Blasius laminar", lambda x: 0.664 / np.sqrt(1e4 * x))]}}
    paths = make_plots(tmp_path, references=refs)
    names = sorted(p.name for p in paths)
    assert names == sorted(["residuals.png", "wall_plate_cf.png", "wall_plate_cp.png", "field_velocity.png",
                            "field_pressure.png", "field_eddy_viscosity_ratio.png"])
    for p in paths:
        assert p.parent == tmp_path / "plots"
        head = p.read_bytes()[:8]
        assert head == b"\x89PNG\r\n\x1a\n"
        assert 2_000 < p.stat().st_size < 300_000
    # atomic writes leave no temporary files; the caller's backend is untouched
    assert sorted(q.name for q in (tmp_path / "plots").iterdir()) == names
    assert matplotlib.get_backend() == backend


def test_make_plots_optional_parts_and_profiles(tmp_path):
    _write_result(tmp_path, nut=False)
    (tmp_path / "profiles").mkdir()
    yp = np.geomspace(1.0, 100.0, 12)
    write_csv_atomic(tmp_path / "profiles" / "x1.csv", ["y_plus", "u_plus"], [yp, np.log(yp) / 0.41 + 5.0])
    out = tmp_path / "elsewhere"
    names = sorted(p.name for p in make_plots(tmp_path, out_dir=out))
    assert "field_eddy_viscosity_ratio.png" not in names
    assert "profile_x1.png" in names
    assert all((out / n).is_file() for n in names)


def test_make_plots_errors_name_the_problem(tmp_path):
    with pytest.raises(CaseError, match="no such result directory"):
        make_plots(tmp_path / "missing")
    with pytest.raises(CaseError, match="no result files"):
        make_plots(tmp_path)
    _write_result(tmp_path / "run")
    with pytest.raises(CaseError, match="'wing'.*walls: plate"):
        make_plots(tmp_path / "run", references={"wing": {"cf": []}})
    with pytest.raises(CaseError, match="use 'cf' or 'cp'"):
        make_plots(tmp_path / "run", references={"plate": {"drag": []}})
    (tmp_path / "run" / "fields.vtu").write_text("not a vtu file")
    with pytest.raises(CaseError, match="fields.vtu: cannot read the field file"):
        make_plots(tmp_path / "run")


def test_result_figures_take_zero_shear_points_and_references_from_their_inputs(tmp_path):
    _write_result(tmp_path, zero_shear=(0.5, 1.0, 1.5))
    refs = {"plate": {"CF": [("arrays", [0.5, 1.0], [0.001, 0.002])]}}
    figs = dict(result_figures(tmp_path, refs, streamlines=False))
    ax = figs["wall_plate_cf.png"].axes[0]
    v = sorted(float(ln.get_xdata()[0]) for ln in ax.get_lines() if ln.get_linestyle() == ":")
    assert v == [0.5, 1.0, 1.5]  # from summary.json walls.plate.shear_sign_change_x, L_ref = 1
    assert "arrays" in _labelled_lines(ax)
    assert "arrays" not in _labelled_lines(figs["wall_plate_cp.png"].axes[0])
    assert TITLE in figs["field_velocity.png"].axes[0].get_title()


# ---------------------------------------------------------------------------------------------
def test_zoomed_maps_from_the_summary_window_and_a_thin_window_is_stretched(tmp_path):
    _write_result(tmp_path)
    # the case's output.map_window travels in summary.json
    summary = json.loads((tmp_path / "summary.json").read_text())
    summary["map_window"] = [0.5, 1.5, 0.0, 0.5]
    write_json_atomic(tmp_path / "summary.json", summary)
    figs = dict(result_figures(tmp_path))
    assert {"field_velocity_zoom.png", "field_pressure_zoom.png", "field_eddy_viscosity_ratio_zoom.png"} <= set(figs)
    ax = figs["field_pressure_zoom.png"].axes[0]
    assert ax.get_xlim() == (0.5, 1.5) and ax.get_ylim() == (0.0, 0.5)
    assert ax.get_aspect() == 1.0 and "stretched" not in ax.get_ylabel()
    # a window given to the call wins; 0.05 high on 2 wide is drawn with y stretched 10x
    # (0.35 * 2 / 0.05 = 14, rounded to one significant digit)
    figs = dict(result_figures(tmp_path, window=(0.0, 2.0, 0.0, 0.05)))
    ax = figs["field_velocity_zoom.png"].axes[0]
    assert ax.get_ylim() == (0.0, 0.05)
    assert ax.get_aspect() == 10.0 and "y stretched 10×" in ax.get_ylabel()
    with pytest.raises(CaseError, match="xmin < xmax"):
        result_figures(tmp_path, window=(1.0, 0.0, 0.0, 1.0))


def test_wall_figure_keeps_a_leading_edge_spike_off_scale_and_says_so():
    x = np.linspace(0.001, 2.0, 200)
    cf = 0.0592 * (5e6 * x) ** -0.2  # Prandtl's turbulent power law (Schlichting, ch. 21), spiked below
    cf[:3] = [0.05, 0.03, 0.02]  # a singular leading edge
    cols = dict(zip(WALL_HEADER, _wall_columns(x, 0 * x, np.ones(200), np.zeros(200), cf)))
    ax = wall_figure(cols, "cf", patch="plate").axes[0]
    top = ax.get_ylim()[1]
    assert cf[3:].max() < top < 0.02
    assert "max 0.05 at x = 0.001 (off scale)" in ax.get_xlabel()
    # without a spike the whole range is shown and nothing is said
    ax = wall_figure(dict(zip(WALL_HEADER, _wall_columns(x, 0 * x, np.ones(200), np.zeros(200), cf * 0 + 0.003))),
                     "cf", patch="plate").axes[0]
    assert "off scale" not in ax.get_xlabel()


def test_plot_command_window(tmp_path, capsys):
    from fvrans.cli import main

    _write_result(tmp_path)
    assert main(["plot", str(tmp_path), "--window", "0", "1", "0", "0.5", "--no-streamlines"]) == 0
    assert (tmp_path / "plots" / "field_velocity_zoom.png").is_file()


# ---------------------------------------------------------------------------------------------
def test_zero_shear_labels_never_overlap(tmp_path):
    """Issue #12 item 8: close zero-shear points once gave the label "0.001060.0806". Labels that
    would overlap go a row lower (or are left out beyond three rows); every line is drawn."""
    _write_result(tmp_path)
    zs = [0.00106, 0.0806, 0.09, 0.1, 0.5, 1.2]
    fig = wall_figure(tmp_path / "wall" / "plate.csv", "cf", zero_shear=zs)
    ax = fig.axes[0]
    renderer = fig.canvas.get_renderer()
    fig.draw(renderer)
    texts = [t for t in ax.texts if t.get_text() in {f"{z:.3g}" for z in zs}]
    boxes = [t.get_window_extent(renderer) for t in texts]
    assert len(texts) >= 4 and "0.00106" in [t.get_text() for t in texts]
    assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1:])
    vlines = [ln for ln in ax.get_lines() if ln.get_linestyle() == ":" and np.ptp(ln.get_xdata()) == 0]
    assert len(vlines) == len(zs)


def test_colours_clipped_to_what_most_of_the_map_holds_and_said_so(tmp_path):
    """Issue #12 item 8: a singular point (a leading edge, here one small cell of 1000) once set the
    whole colour range; the colours now span the area-weighted 1st-99th percentiles when the
    full range is 1.5 times wider, and the colour bar says so."""
    mesh, geom = channel(40, 20)
    p = 2.0 - geom.cell_centre[:, 0]
    write_vtu_atomic(tmp_path / "fields.vtu", mesh, {"pressure": p})
    fields = read_fields(tmp_path / "fields.vtu")
    fig = field_figure(fields, "pressure")  # smooth: the full range
    assert "clipped" not in fig.axes[1].get_xlabel() + fig.axes[1].get_ylabel()
    fields.data["pressure"] = np.where(np.arange(len(p)) == 0, 1000.0, fields.data["pressure"])
    fig = field_figure(fields, "pressure")
    (coll,) = [c for c in fig.axes[0].collections if isinstance(c, PolyCollection)]
    lo, hi = coll.norm.vmin, coll.norm.vmax
    assert hi < 2.2 and lo < 0.1  # the linear field 2 - x spans 0.025 .. 1.975 on the other cells
    label = fig.axes[1].get_xlabel() + fig.axes[1].get_ylabel()
    label = label.replace("\n", " ")
    assert "colours clipped to" in label and "values reach 0.025 .. 1e+03" in label


def test_run_plots_and_compare_overlays_share_the_x_axis(tmp_path, monkeypatch):
    """Issue #12 item 8: wall plots of a run once showed x / L_ref while fvrans compare drew x."""
    import io

    import fvrans.verify.report as report
    from fvrans.verify import compare_command

    _write_result(tmp_path)
    s = json.loads((tmp_path / "summary.json").read_text())
    s["reference"]["l_ref"] = 2.0
    write_json_atomic(tmp_path / "summary.json", s)
    figs = dict(result_figures(tmp_path, streamlines=False))
    ax = figs["wall_plate_cf.png"].axes[0]
    assert ax.get_xlabel() == "x" and figs["field_pressure.png"].axes[0].get_xlabel() == "x"
    run_line = _labelled_lines(ax)["computed"]
    (tmp_path / "ref.csv").write_text("x,cf\n0.5,-0.0025\n1.5,0.0075\n")
    (tmp_path / "spec.toml").write_text('[[item]]\nname = "cf"\nkind = "wall"\nmetric = "max_abs"\n'
                                        'tolerance = 1e-3\n[item.result]\npatch = "plate"\ny = "cf"\n'
                                        '[item.reference]\nfile = "ref.csv"\nx = "x"\ny = "cf"\n')
    drawn = []
    monkeypatch.setattr(report, "save_figure", lambda fig, path: drawn.append(fig))
    assert compare_command(tmp_path, tmp_path / "spec.toml", tmp_path / "report", stream=io.StringIO()) == 0
    overlay = drawn[0].axes[0]
    assert overlay.get_xlabel() == ax.get_xlabel()
    np.testing.assert_allclose(overlay.get_lines()[0].get_xdata(), run_line.get_xdata())  # same x values
