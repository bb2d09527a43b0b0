"""Periodic laminar channel (plane Poiseuille flow, u = G y (h - y) / (2 mu), U_b = G h^2 / (12 mu);
e.g. White, Viscous Fluid Flow, 3rd ed., sec. 3-3.2) driven by a fixed pressure gradient or a fixed
bulk velocity, on columns of cells joined by a periodic pair."""

from __future__ import annotations

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.errors import CaseError, MeshError

MU, H, G = 0.01, 1.0, 0.12  # U_b = G h^2 / (12 mu) = 1, Re_h = 100


def _case(mode: str, nx: int = 2, ny: int = 20, triangles: bool = False, **extra) -> fa.Case:
    data = {
        "mesh": {"generator": "channel",
                 "parameters": {"length": 0.5, "height": H, "nx": nx, "ny": ny, "triangles": triangles},
                 "periodic_pairs": [["inlet", "outlet"]]},
        "fluid": {"density": 1.0, "viscosity": MU},
        "boundary": {"lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"}},
        "mean_flow": {mode: [-G, 0.0] if mode == "pressure_gradient" else [1.0, 0.0]},
        "initial": {"velocity": [0.5, 0.0]},
        "solver": {"tolerance": 1e-10, "max_iterations": 3000},
    }
    data.update(extra)
    return fa.case_from_dict(data)


def _errors(r: fa.Result) -> tuple[float, float, float]:
    """(max |u - exact|, |U_b - 1|, |G - 0.12| / 0.12) with the exact profile of the run's gradient."""
    mf = r.summary()["mean_flow"]
    g = -mf["pressure_gradient"][0]
    y = r.cell_centres[:, 1]
    u_exact = g / (2 * MU) * y * (H - y)
    return float(np.max(np.abs(r.velocity[:, 0] - u_exact))), abs(mf["bulk_velocity"][0] - 1.0), abs(g / G - 1)


@pytest.mark.parametrize("mode", ["pressure_gradient", "bulk_velocity"])
def test_poiseuille_profile_second_order_with_either_driving(mode):
    e20 = _errors(fa.solve(_case(mode, ny=20)))
    r40 = fa.solve(_case(mode, ny=40))
    assert r40.converged
    e40 = _errors(r40)
    assert e40[0] < 1e-3 and e20[0] / e40[0] == pytest.approx(4.0, rel=0.02)  # second order in y
    # the cell values are the parabola's cell averages (its centroid values less G dy^2 / (24 mu), the
    # error above): the second-order wall gradient is exact for the parabola, so the flow rate and the
    # friction are exact to the solver tolerance (with the one-sided wall shear they were second order)
    if mode == "pressure_gradient":
        assert r40.summary()["mean_flow"]["pressure_gradient"][0] == pytest.approx(-G, rel=1e-12)
        assert e20[1] < 1e-6 and e40[1] < 1e-6  # flow rate
    else:
        assert e40[1] < 1e-12  # the bulk velocity held exactly
        assert e20[2] < 1e-6 and e40[2] < 1e-6  # friction: G = 12 mu U_b / h^2
    assert np.max(np.abs(r40.velocity[:, 1])) < 1e-12


def test_one_cell_long_column_and_triangles():
    one = fa.solve(_case("bulk_velocity", nx=1, ny=20))
    two = fa.solve(_case("bulk_velocity", nx=4, ny=20))
    by_y = [r.velocity[np.argsort(r.cell_centres[:, 1], kind="stable"), 0].reshape(20, -1) for r in (one, two)]
    np.testing.assert_allclose(by_y[1], np.repeat(by_y[0], 4, axis=1), atol=1e-9)
    tri = fa.solve(_case("bulk_velocity", nx=2, ny=20, triangles=True))
    assert tri.converged
    err, _, dg = _errors(tri)
    assert err < 5e-3 and dg < 5e-3  # quads at ny = 20: 3.7e-3 and 5.0e-3


def test_wall_friction_and_restart_of_a_periodic_run(tmp_path):
    r = fa.solve(_case("bulk_velocity", ny=40, solver={"tolerance": 1e-10, "max_iterations": 20}))
    assert not r.converged
    r.write(tmp_path)
    r.write_checkpoint(tmp_path / "checkpoint.npz")
    more = fa.solve(_case("bulk_velocity", ny=40), restart=tmp_path)
    full = fa.solve(_case("bulk_velocity", ny=40))
    assert more.converged and more.iterations > 20
    np.testing.assert_allclose(more.velocity, full.velocity, atol=1e-8)
    # wall shear stress: tau_w = G h / 2 on both walls
    for patch in ("lower_wall", "upper_wall"):
        tau = more.wall(patch).tau_w
        assert np.allclose(np.abs(tau), G * H / 2, rtol=3e-3)


def test_bad_periodic_settings_are_refused_with_the_key():
    with pytest.raises(CaseError, match="mean_flow: drives the flow through periodic pairs"):
        fa.case_from_dict({"mesh": {"generator": "cavity"}, "fluid": {"density": 1, "viscosity": 1},
                           "boundary": {"walls": {"kind": "wall"}},
                           "mean_flow": {"bulk_velocity": [1.0, 0.0]}})
    with pytest.raises(CaseError, match="either pressure_gradient or bulk_velocity"):
        _case("bulk_velocity", mean_flow={"bulk_velocity": [1, 0], "pressure_gradient": [1, 0]})
    with pytest.raises(CaseError, match=r"boundary.inlet: patch 'inlet' is joined by mesh.periodic_pairs"):
        fa.prepare(_case("bulk_velocity", boundary={"lower_wall": {"kind": "wall"}, "upper_wall": {"kind": "wall"},
                                                     "inlet": {"kind": "wall"}}))
    with pytest.raises(CaseError, match="mesh.periodic_pairs: the mesh .* has no patch 'outflow'"):
        fa.prepare(_case("bulk_velocity").set("mesh.periodic_pairs", [["inlet", "outflow"]]))
    with pytest.raises(MeshError, match=r"mesh.periodic_pairs: .*20 face\(s\) of 'inlet' \(20 faces\) have no partner"):
        fa.prepare(_case("bulk_velocity").replace({
            "mesh.periodic_pairs": [["inlet", "lower_wall"]],
            "boundary": {"outlet": {"kind": "wall"}, "upper_wall": {"kind": "wall"}}}))


def test_renumbered_periodic_mesh_gives_the_same_flow():
    """Cells are renumbered before the pairs are joined (a joined mesh refuses to be permuted)."""
    plain = fa.solve(_case("bulk_velocity", nx=3, ny=12))
    case = _case("bulk_velocity", nx=3, ny=12)
    renumbered = fa.solve(case.set("mesh.renumber", True))
    assert renumbered.mesh.periodic and renumbered.converged
    for r in (plain, renumbered):
        o = np.lexsort((r.cell_centres[:, 0], r.cell_centres[:, 1]))
        r.extra["sorted_u"] = r.velocity[o, 0]
    np.testing.assert_allclose(renumbered.extra["sorted_u"], plain.extra["sorted_u"], atol=1e-8)
