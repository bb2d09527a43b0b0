"""Unit tests of the Spalart-Allmaras model functions and of its transport equation.

References: Spalart & Allmaras 1994, La Recherche Aerospatiale 1, 5-21 (SA 1994): the standard
model and its constants; Allmaras, Johnson & Spalart 2012, ICCFD7-1902 (AJS 2012): the
modified-vorticity safeguard (cv2 = 0.7, cv3 = 0.9) and the negative-nu_tilde model (cn1 = 16).
Expected values are written out from those formulas with the published constants typed in here
(not imported from the code); a few are also given as numbers worked out by hand.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from fvrans.fields import Fields
from fvrans.mesh.geometry import compute_geometry
from fvrans.mesh.mesh import Mesh
from fvrans.models import _sa_kernels as K
from fvrans.models.spalart_allmaras import CONSTANTS, SpalartAllmaras, eddy_viscosity, source_terms
from fvrans.physics.boundary import INLET, SYMMETRY, FlowBoundary

# published constants (SA 1994; AJS 2012), typed in independently of the code
CB1, SIGMA, CB2, KAPPA = 0.1355, 2.0 / 3.0, 0.622, 0.41
CW2, CW3, CV1, CT3, CT4 = 0.3, 2.0, 7.1, 1.2, 0.5
CV2, CV3, CN1 = 0.7, 0.9, 16.0
CW1 = CB1 / KAPPA**2 + (1 + CB2) / SIGMA


def test_constants_are_the_published_ones():
    ref = {"cb1": CB1, "sigma": SIGMA, "cb2": CB2, "kappa": KAPPA, "cw2": CW2, "cw3": CW3, "cv1": CV1,
           "ct3": CT3, "ct4": CT4, "cv2": CV2, "cv3": CV3, "cn1": CN1}
    for k, v in ref.items():
        assert CONSTANTS[k] == pytest.approx(v, rel=1e-15), k


def test_log_layer_consistency_of_cw1():
    # SA 1994: cw1 = cb1/kappa^2 + (1 + cb2)/sigma, quoted there as about 3.239 (from memory)
    assert CONSTANTS["cw1"] == pytest.approx(CB1 / KAPPA**2 + (1 + CB2) / SIGMA, rel=1e-14)
    assert CONSTANTS["cw1"] == pytest.approx(3.239, abs=5e-4)


def test_log_layer_balance_of_the_implemented_source():
    """In the log layer nu_tilde = kappa u_tau y and Omega = u_tau/(kappa y) (chi -> infinity,
    f_t2 -> 0, r = 1, f_w = 1): production cb1 u_tau^2 - destruction cw1 kappa^2 u_tau^2 + the
    diffusion terms (1/sigma)(1 + cb2)(kappa u_tau)^2 must sum to zero (SA 1994, sec. on the
    log layer). Uses the source exactly as assembled."""
    u_tau, y, nu = 0.7, 0.3, 1e-12
    nt = KAPPA * u_tau * y
    omega = u_tau / (KAPPA * y)
    P, D = source_terms(nt, nu, omega, y, "standard")
    diffusion = (1 + CB2) / SIGMA * (KAPPA * u_tau) ** 2  # (nt nt')' + cb2 nt'^2 with nt' = kappa u_tau
    assert float(P) == pytest.approx(CB1 * u_tau**2, rel=1e-6)
    assert float(P - D) + diffusion == pytest.approx(0.0, abs=1e-6 * CB1 * u_tau**2)


@pytest.mark.parametrize("chi", [0.0, 0.5, 1.0, 5.0, 7.1, 30.0])
def test_fv1_fv2_ft2(chi):
    f1 = chi**3 / (chi**3 + CV1**3)
    assert K.fv1(chi) == pytest.approx(f1, rel=1e-14, abs=1e-300)
    assert K.fv2(chi) == pytest.approx(1 - chi / (1 + chi * f1), rel=1e-14, abs=1e-15)
    assert K.ft2(chi) == pytest.approx(CT3 * math.exp(-CT4 * chi**2), rel=1e-14)


def test_function_values_worked_by_hand():
    # chi = cv1: f_v1 = 1/2 exactly; chi = 5: 125/(125 + 357.911) = 0.258848
    assert K.fv1(7.1) == pytest.approx(0.5, rel=1e-14)
    assert K.fv1(5.0) == pytest.approx(0.258848, rel=1e-5)
    # f_v2(5) = 1 - 5/(1 + 5 x 0.258848) = 1 - 5/2.294238 = -1.179375
    assert K.fv2(5.0) == pytest.approx(-1.179375, rel=1e-5)
    # f_t2(1) = 1.2 exp(-0.5) = 0.727837
    assert K.ft2(1.0) == pytest.approx(0.727837, rel=1e-5)


@pytest.mark.parametrize("r", [0.0, 0.1, 0.5, 1.0, 2.0, 10.0])
def test_fw(r):
    g = r + CW2 * (r**6 - r)
    expected = g * ((1 + CW3**6) / (g**6 + CW3**6)) ** (1 / 6)
    assert K.fw(r) == pytest.approx(expected, rel=1e-13, abs=1e-300)


def test_fw_special_values():
    assert K.fw(1.0) == pytest.approx(1.0, rel=1e-14)  # g = 1: the log-layer calibration point
    # r = 0.5: g = 0.5 + 0.3 (1/64 - 0.5) = 0.3546875, g^6 = 0.0019911,
    # f_w = g (65/(g^6 + 64))^(1/6) = 0.3546875 x 1.0025826 = 0.355603
    g = 0.3546875
    assert K.fw(0.5) == pytest.approx(g * (65 / (g**6 + 64)) ** (1 / 6), rel=1e-13)
    assert K.fw(0.5) == pytest.approx(0.355603, rel=1e-5)
    # r is clipped at 10: f_w(20) = f_w(10) ~ 65^(1/6) = 2.00517
    assert K.fw(20.0) == K.fw(10.0)
    assert K.fw(10.0) == pytest.approx(65 ** (1 / 6), rel=1e-6)


@pytest.mark.parametrize(
    "omega, s_bar, expected",
    [
        (1.0, 0.5, 1.5),  # ordinary branch: Omega + S_bar
        (1.0, -0.5, 0.5),  # S_bar >= -cv2 Omega: still Omega + S_bar
        (1.0, -0.7, 0.3),  # the switch point: both branches give 0.3 Omega
        (1.0, -2.0, 1.0 + (0.49 - 1.8) / (-0.5 + 2.0)),  # = 0.126667
        (2.0, -200.0, 2.0 + 2.0 * (0.49 * 2.0 - 180.0) / (-0.5 * 2.0 + 200.0)),
        (0.0, -1.0, 0.0),  # no vorticity, negative S_bar: zero, not negative
    ],
)
def test_modified_vorticity_safeguard(omega, s_bar, expected):
    assert K.modified_vorticity(omega, s_bar) == pytest.approx(expected, rel=1e-13, abs=1e-15)


def test_modified_vorticity_stays_positive_and_continuous():
    omega = 3.0
    sb = np.linspace(-1e4, 10.0, 20001)
    st = np.array([K.modified_vorticity(omega, s) for s in sb])
    assert np.all(st >= 0.1 * omega * (1 - 1e-9))  # tends to (1 - cv3) Omega = 0.1 Omega
    eps = 1e-9
    assert K.modified_vorticity(omega, -CV2 * omega - eps) == pytest.approx(
        K.modified_vorticity(omega, -CV2 * omega + eps), abs=1e-8)


def _reference_source(nt, nu, omega, d, ft2_on):
    """P and D of SA 1994 without trip, S_tilde with the AJS 2012 safeguard."""
    chi = nt / nu
    f1 = chi**3 / (chi**3 + CV1**3)
    f2 = 1 - chi / (1 + chi * f1)
    s_bar = nt * f2 / (KAPPA * d) ** 2
    if s_bar >= -CV2 * omega:
        st = omega + s_bar
    else:
        st = omega + omega * (CV2**2 * omega + CV3 * s_bar) / ((CV3 - 2 * CV2) * omega - s_bar)
    r = min(nt / (st * (KAPPA * d) ** 2), 10.0)
    g = r + CW2 * (r**6 - r)
    f_w = g * ((1 + CW3**6) / (g**6 + CW3**6)) ** (1 / 6)
    f_t2 = CT3 * math.exp(-CT4 * chi**2) if ft2_on else 0.0
    P = CB1 * (1 - f_t2) * st * nt
    D = (CW1 * f_w - CB1 / KAPPA**2 * f_t2) * (nt / d) ** 2
    return P, D


@pytest.mark.parametrize("variant", ["standard", "no-ft2"])
@pytest.mark.parametrize("nt_over_nu, omega, d", [(0.5, 10.0, 1e-3), (3.0, 200.0, 1e-4), (40.0, 5.0, 0.02),
                                                   (8.0, 1.0, 1e-5)])
def test_source_terms_positive_branch(variant, nt_over_nu, omega, d):
    nu = 1.5e-5
    nt = nt_over_nu * nu
    P, D = source_terms(nt, nu, omega, d, variant)
    Pr, Dr = _reference_source(nt, nu, omega, d, variant == "standard")
    assert float(P) == pytest.approx(Pr, rel=1e-12)
    assert float(D) == pytest.approx(Dr, rel=1e-12)


def test_ft2_variant_differs_where_chi_is_small():
    nu, omega, d = 1e-5, 50.0, 1e-3
    Ps, _ = source_terms(nu, nu, omega, d, "standard")
    Pn, _ = source_terms(nu, nu, omega, d, "no-ft2")
    assert float(Ps / Pn) == pytest.approx(1 - 1.2 * math.exp(-0.5), rel=1e-12)  # (1 - f_t2(1))


def test_negative_branch():
    """AJS 2012: P_n = cb1 (1 - ct3) Omega nt, D_n = -cw1 (nt/d)^2, diffusivity nu + nt f_n."""
    nu, omega, d = 1e-7, 10.0, 0.01
    nt = -2.0 * nu
    P, D = source_terms(nt, nu, omega, d, "standard")
    # worked by hand: 0.1355 x 0.2 x 10 x 2e-7 = 5.42e-8; cw1 (2e-5)^2 = 3.239067 x 4e-10 = 1.295627e-9
    assert float(P - D) == pytest.approx(5.42e-8 + 1.295627e-9, rel=1e-6)
    assert float(P - D) == pytest.approx(CB1 * (1 - CT3) * omega * nt + CW1 * (nt / d) ** 2, rel=1e-13)
    # f_n(chi = -2) = (16 - 8)/(16 + 8) = 1/3: diffusivity nu (1 - 2/3) = nu/3
    out = np.empty(3)
    K.cell_diffusivity(np.array([-2.0 * nu, 0.0, 5.0 * nu]), nu, out)
    assert out == pytest.approx([nu / 3, nu, 6 * nu], rel=1e-13)
    chi = np.linspace(-50, 0, 501)
    diff = np.empty_like(chi)
    K.cell_diffusivity(chi * nu, nu, diff)
    assert np.all(diff > 0)  # the negative model keeps the diffusivity positive


def test_eddy_viscosity_never_negative():
    nu = 1e-5
    nt = np.array([-5e-5, -1e-12, 0.0, 1e-6, 7.1e-5, 1e-3])
    mut = eddy_viscosity(nt, nu, rho=1.2)
    f1 = (nt / nu) ** 3 / ((nt / nu) ** 3 + CV1**3)
    expected = np.where(nt > 0, 1.2 * nt * f1, 0.0)
    assert mut == pytest.approx(expected, rel=1e-13, abs=1e-300)
    assert np.all(mut >= 0.0)
    assert mut[4] == pytest.approx(1.2 * 7.1e-5 * 0.5, rel=1e-13)  # chi = cv1: f_v1 = 1/2


# -- the transport equation without flow ---------------------------------------------------
def _strip(n: int, y0: float, y1: float, width: float = 0.05):
    y = np.linspace(y0, y1, n + 1)
    pts = np.array([[x, yy] for yy in y for x in (0.0, width)])
    cells = [[2 * j, 2 * j + 1, 2 * j + 3, 2 * j + 2] for j in range(n)]
    bnd = {
        "bottom": [[0, 1]],
        "top": [[2 * n, 2 * n + 1]],
        "sides": [[2 * j, 2 * j + 2] for j in range(n)] + [[2 * j + 1, 2 * j + 3] for j in range(n)],
    }
    mesh = Mesh.from_arrays(pts, cells, bnd)
    return mesh, compute_geometry(mesh)


def _power_law_run(n: int, solver: str = "amg"):
    """Zero velocity, Omega = 0, nu -> 0, wall at y = 0 (outside the strip [1, 2]): the equation
    reduces to (1/sigma)[(nt nt')' + cb2 nt'^2] = cw1 f_w(10) (nt/y)^2 (r = 1/f_v2 > 10 is
    clipped; production ~ nu and f_t2 vanish), solved exactly by nt = A y^p with
    (2 + cb2) p^2 - p - sigma cw1 f_w(10) = 0."""
    nu, A = 1e-9, 1.0
    g10 = 10 + CW2 * (10**6 - 10)
    fw10 = g10 * ((1 + CW3**6) / (g10**6 + CW3**6)) ** (1 / 6)
    a = 2 + CB2
    p = (1 + math.sqrt(1 + 4 * a * SIGMA * CW1 * fw10)) / (2 * a)
    mesh, geom = _strip(n, 1.0, 2.0)
    ni = mesh.n_internal_faces
    nb = mesh.n_boundary_faces
    kind = np.full(nb, SYMMETRY, dtype=np.int64)
    ratio = np.zeros(nb)
    for name in ("bottom", "top"):
        pt = mesh.patch(name)
        sl = slice(pt.start - ni, pt.stop - ni)
        kind[sl] = INLET
        ratio[sl] = A * geom.face_centre[pt.start : pt.stop, 1] ** p / nu
    fb = FlowBoundary(kind=kind, velocity=np.zeros((nb, 2)), pressure=np.zeros(nb), nu_tilde_ratio=ratio,
                      patch_kind={"bottom": "inflow-velocity", "top": "inflow-velocity", "sides": "symmetry"})
    yc = geom.cell_centre[:, 1]
    model = SpalartAllmaras(mesh, geom, fb, rho=1.0, mu=nu, relax=1.0, wall_distance=yc, linear_solver=solver,
                            linear_max_iterations=400, linear_tolerance=1e-12)
    fields = Fields.uniform(mesh.n_cells, mesh.n_faces)
    fields.variables["nu_tilde"] = np.full(mesh.n_cells, 1.5)
    grad_u = np.zeros((mesh.n_cells, 2, 2))
    for _ in range(200):
        res = model.update(fields, grad_u)[0]
        if res < 1e-12:
            break
    assert res < 1e-11
    return fields.variables["nu_tilde"], A * yc**p, p


@pytest.mark.parametrize("solver", ["amg", "gauss-seidel"])
def test_pure_diffusion_and_destruction_power_law(solver):
    nt32, exact32, p = _power_law_run(32, solver)
    nt64, exact64, _ = _power_law_run(64, solver)
    assert p == pytest.approx(1.4898, abs=2e-4)  # worked by hand from the quadratic
    e32 = np.max(np.abs(nt32 / exact32 - 1))
    e64 = np.max(np.abs(nt64 / exact64 - 1))
    assert e64 < 5e-5
    assert e32 / e64 > 3.0  # second order: the error falls about 4x per halving
    assert np.all(nt64 > 0)


def test_a_case_without_walls_is_refused_with_a_clear_message():
    from fvrans.errors import CaseError

    mesh, geom = _strip(4, 0.0, 1.0)
    nb = mesh.n_boundary_faces
    fb = FlowBoundary(kind=np.full(nb, SYMMETRY, dtype=np.int64), velocity=np.zeros((nb, 2)),
                      pressure=np.zeros(nb), nu_tilde_ratio=np.zeros(nb),
                      patch_kind={"bottom": "symmetry", "top": "symmetry", "sides": "symmetry"})
    with pytest.raises(CaseError, match="needs at least one wall patch"):
        SpalartAllmaras(mesh, geom, fb, rho=1.0, mu=1e-5)
    with pytest.raises(CaseError, match="sa_variant"):
        SpalartAllmaras(mesh, geom, fb, rho=1.0, mu=1e-5, variant="sa-neg", wall_distance=np.ones(4))
