"""Grid Convergence Index: the worked example of Celik et al. (2008), exact power-law data, flags,
and studies over result directories."""

from __future__ import annotations

import io
import json
import math

import pytest

from fvrans.errors import CaseError
from fvrans.verify.gci import gci_three, grid_convergence, grid_study, grid_study_command, representative_size

# Celik, Ghia, Roache, Freitas, Coleman, Raad (2008), J. Fluids Eng. 130, 078001, Table 1, first
# column (dimensionless reattachment length), from memory: N = 18000, 8000, 4500 cells (2D),
# phi = 6.063, 5.972, 5.863; reported r21 = 1.5, r32 = 1.333, p = 1.53, phi_ext21 = 6.1685,
# e_a21 = 1.5 %, e_ext21 = 1.7 %, GCI_fine21 = 2.2 % (table values rounded as printed).
CELIK_N = (18000, 8000, 4500)
CELIK_PHI = (6.063, 5.972, 5.863)


def _celik():
    h = [representative_size(1.0, n) for n in CELIK_N]  # h = sqrt(A/N); A cancels in the ratios
    return gci_three(h, CELIK_PHI)


def test_celik_2008_table1_from_memory():
    g = _celik()
    assert g.r21 == pytest.approx(1.5, abs=5e-4)  # sqrt(18000/8000) = 1.5
    assert g.r32 == pytest.approx(1.333, abs=5e-4)  # sqrt(8000/4500)
    assert g.p == pytest.approx(1.53, abs=5e-3)
    assert g.phi_ext21 == pytest.approx(6.1685, abs=5e-5)
    assert g.e_a21 == pytest.approx(0.015, abs=5e-4)
    assert g.e_ext21 == pytest.approx(0.017, abs=5e-4)
    assert g.gci_fine21 == pytest.approx(0.022, abs=5e-4)
    assert g.behaviour == "monotone" and not g.flagged
    assert g.safety_factor == 1.25  # Roache (1994), three grids


def test_celik_example_step_by_step_by_hand():
    # The procedure worked by hand (calculator, 6 digits) on the same inputs:
    # eps21 = 5.972 - 6.063 = -0.091, eps32 = 5.863 - 5.972 = -0.109, s = +1,
    # ln|eps32/eps21| = ln(0.109/0.091) = 0.180488; ln r21 = ln 1.5 = 0.405465.
    # One fixed-point step from p = 1.5330: 1.5^p = 1.86186, (4/3)^p = 1.55429,
    # q = ln(0.86186/0.55429) = 0.441415, p = (0.180488 + 0.441415)/0.405465 = 1.53380;
    # the iteration settles at p = 1.53397, where 1.5^p = 1.86260.
    # phi_ext21 = (1.86260 * 6.063 - 5.972)/0.86260 = 6.16850;
    # e_a21 = 0.091/6.063 = 0.0150091; GCI_fine21 = 1.25 * 0.0150091/0.86260 = 0.0217499.
    g = _celik()
    lr = math.log(0.109 / 0.091)
    assert lr == pytest.approx(0.180488, abs=1e-6)
    q = math.log((1.5**g.p - 1) / ((4 / 3) ** g.p - 1))
    assert g.p == pytest.approx((lr + q) / math.log(1.5), rel=1e-10)  # the fixed-point equation holds
    assert g.p == pytest.approx(1.53397, abs=1e-5)
    assert 1.5**g.p == pytest.approx(1.86260, abs=1e-5)
    assert g.phi_ext21 == pytest.approx(6.16850, abs=1e-5)
    assert g.e_a21 == pytest.approx(0.0150091, abs=1e-7)
    assert g.e_ext21 == pytest.approx((6.16850 - 6.063) / 6.16850, abs=1e-6)
    assert g.gci_fine21 == pytest.approx(0.0217499, abs=1e-6)


def test_exact_power_law_recovered():
    # phi = 2 + 0.3 h^2 on grids with unequal ratios 1.4 and 1.7: p = 2, phi_ext = 2 exactly
    h = [0.1, 0.14, 0.238]
    phi = [2.0 + 0.3 * x**2 for x in h]
    g = gci_three(h[::-1], phi[::-1])  # any order
    assert g.p == pytest.approx(2.0, rel=1e-9)
    assert g.phi_ext21 == pytest.approx(2.0, rel=1e-12)
    assert g.phi_ext32 == pytest.approx(2.0, rel=1e-12)
    assert g.e_ext21 == pytest.approx(0.003 / 2.0, rel=1e-9)  # |2 - 2.003| / 2
    assert g.asymptotic_ratio == pytest.approx(phi[0] / phi[1], rel=1e-9)  # e_a normalised by phi1 vs phi2
    # first order, equal ratios
    g1 = gci_three([1.0, 2.0, 4.0], [1.0 + 0.5, 1.0 + 1.0, 1.0 + 2.0])
    assert g1.p == pytest.approx(1.0, rel=1e-10) and g1.phi_ext21 == pytest.approx(1.0, rel=1e-12)
    # GCI = 1.25 * |(1.5 - 2)/1.5| / (2 - 1)
    assert g1.gci_fine21 == pytest.approx(1.25 / 3.0, rel=1e-12)


def test_flags():
    osc = gci_three([1.0, 2.0, 4.0], [1.0, 1.1, 0.95])  # differences change sign
    assert osc.behaviour == "oscillatory" and osc.flagged
    div = gci_three([1.0, 2.0, 4.0], [1.0, 1.2, 1.3])  # |eps21| = 0.2 > |eps32| = 0.1
    assert div.behaviour == "divergent" and div.flagged
    # unequal ratios: eps32/eps21 = 1.1 is below ln r32/ln r21 = ln 3/ln 1.5 = 2.71 -> divergent
    div2 = gci_three([1.0, 1.5, 4.5], [1.0, 1.1, 1.21])
    assert div2.behaviour == "divergent"
    same = gci_three([1.0, 2.0, 4.0], [3.0, 3.0, 3.0])
    assert same.behaviour == "grid-independent" and math.isnan(same.p)
    und = gci_three([1.0, 2.0, 4.0], [3.0, 3.0, 3.1])
    assert und.behaviour == "undetermined" and und.flagged
    with pytest.raises(CaseError, match="different cell sizes"):
        gci_three([1.0, 1.0, 2.0], [1.0, 2.0, 3.0])
    with pytest.raises(CaseError, match="at least 3 grids"):
        grid_convergence([1.0, 2.0], [1.0, 2.0])


def test_far_below_the_formal_order_or_a_large_gci_is_flagged(tmp_path, make_result_dir):
    """Issue #12 item 7: a cavity lid force once came out "monotone" with order 0.02 and GCI 1126 %
    and exit 0. A series with the same figures (ratio 2: eps32 / eps21 = 2^0.02; then
    GCI = 1.25 e_a21 / (2^0.02 - 1) = 11.26 gives e_a21 = 11.26 (2^0.02 - 1) / 1.25) is flagged."""
    k = 2.0**0.02
    e_a21 = 11.26 * (k - 1.0) / 1.25
    phi1 = 1.0
    phi2 = phi1 * (1.0 - e_a21)
    phi3 = phi2 - k * (phi1 - phi2)
    g = gci_three([1.0, 2.0, 4.0], [phi1, phi2, phi3])
    assert g.behaviour == "monotone" and g.p == pytest.approx(0.02, rel=1e-6)
    assert g.gci_fine21 == pytest.approx(11.26, rel=1e-6)
    assert g.flagged and g.flags == ("order 0.02 far below the formal 2", "GCI 1.13e+03 % above 10 %")
    # each flag alone, on power laws phi = 1 + C h^p over h = 1, 2, 4
    low = gci_three([1.0, 2.0, 4.0], [1.0 + 0.001 * h**0.9 for h in (1.0, 2.0, 4.0)])  # GCI 0.125 %
    assert low.p == pytest.approx(0.9, rel=1e-9) and low.flags == ("order 0.9 far below the formal 2",)
    assert not gci_three([1.0, 2.0, 4.0], [1.0 + 0.001 * h**0.9 for h in (1.0, 2.0, 4.0)], formal_order=1.0).flagged
    # p = 2 and GCI = 1.25 C / (1 + C) = 8.33 % for C = 1/14: within 10 %, above 5 %
    c = 1.0 / 14.0
    second = [1.0 + c * h**2 for h in (1.0, 2.0, 4.0)]
    assert not gci_three([1.0, 2.0, 4.0], second).flagged
    assert gci_three([1.0, 2.0, 4.0], second, gci_limit=0.05).flags == ("GCI 8.33 % above 5 %",)
    # over result folders: exit 1 and the flags on the result line
    dirs = [make_result_dir(f"g{n}", n_cells=n, summary_extra={"walls": {"lid": {"forces": {"Fx": v}}}},
                            field=(m, m, 1.0, 1.0, lambda x, y: x))
            for n, m, v in ((4096, 64, phi1), (1024, 32, phi2), (256, 16, phi3))]
    out = io.StringIO()
    assert grid_study_command(dirs, ["walls.lid.forces.Fx"], tmp_path / "gs", stream=out) == 1
    assert "FLAGGED: order 0.02 far below the formal 2, GCI 1.13e+03 % above 10 %" in out.getvalue()
    md = (tmp_path / "gs" / "grid_study.md").read_text()
    assert "flagged: order 0.02" in md and "common practice" in md


def test_more_than_three_grids():
    h = [0.05, 0.1, 0.2, 0.4]
    gc = grid_convergence(h[::-1], [1.0 + x**2 for x in h[::-1]], "q")
    assert gc.h == tuple(h) and len(gc.triplets) == 2
    assert [t.p for t in gc.triplets] == pytest.approx([2.0, 2.0], rel=1e-9)
    assert gc.finest is gc.triplets[0]


def test_grid_study_over_result_dirs(tmp_path, make_result_dir):
    # three runs of a 2 x 1 domain with 8x4, 12x6, 18x9 cells (ratio 1.5): h = sqrt(2 / N)
    dirs = []
    for nx in (8, 12, 18):
        n = nx * (nx // 2)
        h = math.sqrt(2.0 / n)
        d = make_result_dir(f"g{nx}", n_cells=n,
                            summary_extra={"walls": {"w": {"forces": {"Cd": 0.5 + 0.2 * h**2, "Cl": 1.0}}}},
                            field=(nx, nx // 2, 2.0, 1.0, lambda x, y: x))
        dirs.append(d)
    study = grid_study(dirs[::-1], ["walls.w.forces.Cd"])
    assert study.n_cells == (162, 72, 32)
    assert study.h[0] == pytest.approx(math.sqrt(2.0 / 162), rel=1e-12)  # area read from fields.vtu
    g = study.quantities["walls.w.forces.Cd"].finest
    assert g.p == pytest.approx(2.0, rel=1e-8) and g.phi_ext21 == pytest.approx(0.5, rel=1e-12)
    # given area instead of the fields: same h
    assert grid_study(dirs, ["walls.w.forces.Cd"], area=2.0).h == pytest.approx(study.h, rel=1e-12)

    out = tmp_path / "gs"
    assert grid_study_command(dirs, ["walls.w.forces.Cd"], out, stream=io.StringIO()) == 0
    data = json.loads((out / "grid_study.json").read_text())
    assert data["quantities"]["walls.w.forces.Cd"]["finest"]["behaviour"] == "monotone"
    assert "| walls.w.forces.Cd |" in (out / "grid_study.md").read_text()
    assert (out / "plots" / "walls.w.forces.Cd.png").read_bytes()[:4] == b"\x89PNG"
    # Cl is the same on every grid: not a monotone convergence -> exit 1 (flagged)
    assert grid_study_command(dirs, ["walls.w.forces.Cl"], tmp_path / "gs2", stream=io.StringIO()) == 1
    err = io.StringIO()
    assert grid_study_command(dirs, ["walls.w.forces.Cm"], tmp_path / "gs3", stream=err) == 2
    assert "no key 'Cm'" in err.getvalue() and "Cd, Cl" in err.getvalue()
    assert grid_study_command(dirs[:2], ["walls.w.forces.Cd"], tmp_path / "gs4", stream=io.StringIO()) == 2
