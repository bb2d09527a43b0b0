"""Side by side: several result folders on one set of plots, from Python and the command line,
labelled by the user, the run titles or a sweep's parameter values."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.cli import main
from fvrans.errors import CaseError
from fvrans.post.overlay import overlay_figures, read_runs, wall_units

CASE = """
title = "periodic laminar channel"

[mesh]
generator = "channel"
parameters = {{ length = 0.2, height = 1.0, nx = 1, ny = 40 }}
periodic_pairs = [["inlet", "outlet"]]

[fluid]
density = 1.0
viscosity = {mu}

[mean_flow]
pressure_gradient = [-0.12, 0.0]

[boundary.lower_wall]
kind = "wall"

[boundary.upper_wall]
kind = "wall"

[solver]
tolerance = 1e-9

[probes.across]
start = [0.1, 0.0]
end = [0.1, 1.0]
points = 41
"""


@pytest.fixture(scope="module")
def runs(tmp_path_factory) -> list[Path]:
    base = tmp_path_factory.mktemp("overlay")
    out = []
    for mu in (0.01, 0.02):
        case_file = base / f"channel_{mu}.toml"
        case_file.write_text(CASE.format(mu=mu))
        r = fa.solve(fa.load_case(case_file))
        assert r.converged
        out.append(r.write(base / f"mu_{mu}"))
    return out


def test_figures_of_the_shared_quantities_with_the_given_labels(runs):
    figs = dict(overlay_figures(read_runs(runs, ["thin", "thick"])))
    assert set(figs) == {"residuals.png", "wall_lower_wall_cf.png", "wall_lower_wall_cp.png", "wall_upper_wall_cf.png",
                         "wall_upper_wall_cp.png", "probe_across_u.png", "probe_across_v.png", "probe_across_p.png",
                         "probe_across_wall_units.png"}
    for fig in figs.values():
        labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
        assert labels[:2] == ["thin", "thick"]
    u = [line.get_ydata() for line in figs["probe_across_u.png"].axes[0].get_lines()[:2]]
    assert np.max(u[0]) == pytest.approx(2 * np.max(u[1]), rel=1e-3)  # U = G h^2 / (8 mu) at the centre
    # titles repeat: folder names are added; no labels and one folder are refused
    assert [r.label for r in read_runs(runs)] == [f"periodic laminar channel ({p.name})" for p in runs]
    with pytest.raises(CaseError, match="two or more"):
        read_runs(runs[:1])
    with pytest.raises(CaseError, match="one label per result folder"):
        read_runs(runs, ["a"])


def test_wall_units_of_a_probe_from_the_wall(runs):
    """Plane Poiseuille flow in wall units (u_tau^2 = G h / 2): u+ = y+ (1 - y/h) exactly; the wall
    shear of the wall file is exact for the parabola (second-order wall gradient), the probe's
    samples carry the linear reconstruction of the cells (0.3 % at most here)."""
    for folder in runs:
        run = read_runs([folder, folder])[0]
        yp, up = wall_units(run, "across")
        nu = run.kinematic_viscosity
        probe = np.loadtxt(folder / "profiles" / "across.csv", delimiter=",", skiprows=1)
        with open(folder / "wall" / "lower_wall.csv", encoding="utf-8") as f:
            names = f.readline().strip().split(",")
        u_tau = float(np.loadtxt(folder / "wall" / "lower_wall.csv", delimiter=",", skiprows=1)[names.index("u_tau")])
        np.testing.assert_allclose(yp, probe[:, 0] * u_tau / nu, rtol=1e-12)  # y+ = s u_tau / nu
        np.testing.assert_allclose(up * u_tau, probe[:, 3], rtol=1e-12, atol=1e-15)  # u+ = u_t / u_tau
        y = probe[:, 0]
        inside = (y > 0) & (y < 0.5)
        np.testing.assert_allclose(up[inside], yp[inside] * (1 - y[inside]), rtol=0.003)


def test_overlay_from_the_command_line_and_of_a_sweep(runs, tmp_path, capsys):
    assert main(["overlay", *map(str, runs), "--label", "a", "--label", "b", "--out", str(tmp_path / "o")]) == 0
    assert (tmp_path / "o" / "probe_across_wall_units.png").stat().st_size > 1000
    assert main(["overlay", str(runs[0]), "--out", str(tmp_path / "x")]) == 2
    assert "two or more" in capsys.readouterr().err
    # a sweep whose runs are named by their parameter values
    spec = tmp_path / "sweep.toml"
    (tmp_path / "c.toml").write_text(CASE.format(mu=0.01))
    spec.write_text('case = "c.toml"\n[[parameter]]\nkey = "fluid.viscosity"\nname = "mu"\nvalues = [0.01, 0.02]\n')
    assert main(["sweep", str(spec), "--out", str(tmp_path / "sw"), "--workers", "1", "--quiet"]) == 0
    assert main(["overlay", "--sweep", str(tmp_path / "sw"), "--out", str(tmp_path / "so")]) == 0
    from fvrans.post.overlay import sweep_labels

    assert sorted(sweep_labels(tmp_path / "sw").values()) == ["mu=0.01", "mu=0.02"]
