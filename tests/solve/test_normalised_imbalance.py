"""Normalised imbalances that depend neither on the cell size nor on the cell aspect ratio (#13, item 3).

A channel of 25 x 8 cells at Re_h = 50 (rho U h / mu), started from rest, on copies scaled as a
whole (absolute size x 1e3 and x 1e-3) and stretched (height 1e-4 to 1e-5 and 1e-6 of a length 1
to 3.125: cell aspect ratios 3.2e3 to 1e6). With cells this long the flow is plane Poiseuille flow
after the first column (entrance length ~0.05 Re_h h = 2.5 h, Schlichting, Boundary-Layer Theory,
from memory; the columns are 300 h and more long), so every copy has the same answer in scaled
variables: u / U and p h^2 / (mu U L). The former residual reference (U sum a_P for momentum,
rho U sum perimeter / 2 for continuity) was dominated by the long faces: the copy of height 1e-6
stopped as converged after one iteration with a mean velocity of 2.5e-7 U.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from fvrans.fv.residual import normalised_imbalance
from fvrans.mesh import compute_geometry
from fvrans.mesh.generate import channel
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.fields import Fields
from fvrans.solve.simple import SimpleSolver, SolverControls

RE_H = 50.0
SPECS = {
    "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
    "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
    "lower_wall": {"kind": "wall"},
    "upper_wall": {"kind": "wall"},
}
#: (length, height): cell aspect ratio (length / 25) / (height / 8)
BASE = (1.0, 1e-4)  # 3.2e3
COPIES = {
    "size x 1e3": (1e3, 1e-1),
    "size x 1e-3": (1e-3, 1e-7),
    "squashed (aspect ratio 3.2e4)": (1.0, 1e-5),
    "stretched (aspect ratio 1e5)": (3.125, 1e-5),
}


def channel_solver(length: float, height: float, **controls) -> SimpleSolver:
    mesh = channel(length, height, 25, 8)
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, SPECS)
    rest = Fields.uniform(mesh.n_cells, mesh.n_faces, [0.0, 0.0], 0.0)
    return SimpleSolver(mesh, geom, bc, rho=1.0, mu=height / RE_H,
                        controls=SolverControls(max_iterations=600, **controls), fields=rest)


def scaled(s: SimpleSolver, length: float, height: float) -> tuple[np.ndarray, np.ndarray]:
    """u / U and p h^2 / (mu U L) per cell."""
    mu = height / RE_H
    return s.fields.velocity.copy(), s.fields.pressure * height**2 / (mu * length)


@pytest.fixture(scope="module")
def base_run():
    s = channel_solver(*BASE)
    assert s.run()
    return s


def test_base_copy_is_plane_poiseuille_flow(base_run):
    """Developed profile u = 6 U (y/h) (1 - y/h) (plane Poiseuille flow, e.g. White, Viscous Fluid
    Flow, 3rd ed., sec. 3-3.2) in the last column: 8 cells give it within 3 % of U."""
    s = base_run
    xc = s.geom.cell_centre
    last = xc[:, 0] > BASE[0] * 24 / 25
    eta = xc[last, 1] / BASE[1]
    assert np.max(np.abs(s.fields.velocity[last, 0] - 6 * eta * (1 - eta))) < 0.03


@pytest.mark.parametrize("name", list(COPIES))
def test_scaled_and_stretched_copies_give_the_same_answer_in_the_same_iterations(base_run, name):
    length, height = COPIES[name]
    s = channel_solver(length, height)
    assert s.run()
    u0, p0 = scaled(base_run, *BASE)
    u, p = scaled(s, length, height)
    assert np.max(np.abs(u - u0)) < 5e-3
    assert np.max(np.abs(p - p0)) < 5e-3 * np.max(np.abs(p0))
    # the same number of iterations to a level well above every copy's round-off floor: the copy of
    # aspect ratio 1e5 levels off at a continuity imbalance of about 4.5e-7, so its last steps to the
    # tolerance 1e-6 slow down (with the second-order wall flux 151 iterations to 1e-6 against 132,
    # but 115 against 111 to 3e-6)
    def to(run, level):
        return int(np.argmax(np.max(run.history.as_array(), axis=1) < level)) + 1

    assert abs(to(s, 3e-6) - to(base_run, 3e-6)) <= 0.1 * to(base_run, 3e-6)


def test_a_start_from_rest_reads_one_and_does_not_stop_as_converged():
    """At rest (without the conservative start, which begins from the potential flow) only the
    inlet's boundary terms act: each momentum residual is exactly its share of the terms, 1 for u
    (v has no boundary term). The copy of aspect ratio 1e6 reaches the answer of the others; its
    continuity residual stops falling at the round-off floor of the pressure (about 1e-5 there, see
    fvrans.fv.residual), so it does not stop as converged at 1e-6 either."""
    length, height = 3.125, 1e-6
    assert channel_solver(length, height, conservative_start=False).iterate()[0] == pytest.approx(1.0, abs=1e-12)
    s = channel_solver(length, height)
    assert not s.run(max_iterations=300)
    ref = channel_solver(*COPIES["stretched (aspect ratio 1e5)"])
    assert ref.run()
    u, _ = scaled(s, length, height)
    u1, _ = scaled(ref, *COPIES["stretched (aspect ratio 1e5)"])
    assert np.max(np.abs(u - u1)) < 1e-3
    assert s.history.rows[-1][2] < 1e-4


def test_normalised_imbalance_of_a_scalar_system():
    """sum |b - A x| / sum (|A||x| + |b|): in [0, 1], 1 at x = 0, 0 at the solution, invariant
    under scaling of the equation."""
    A = sp.csr_matrix(np.array([[4.0, -1.0, 0.0], [-1.0, 4.0, -1.0], [0.0, -1.0, 4.0]]))
    b = np.array([1.0, 2.0, 3.0])
    x = np.linalg.solve(A.toarray(), b)
    assert normalised_imbalance(A, b, np.zeros(3)) == 1.0
    assert normalised_imbalance(A, b, x) < 1e-15
    y = np.array([0.3, -0.2, 0.9])
    r = normalised_imbalance(A, b, y)
    assert r == pytest.approx(np.abs(b - A @ y).sum() / (np.abs(A.toarray()) @ np.abs(y) + np.abs(b)).sum())
    assert normalised_imbalance(1e-9 * A, 1e-9 * b, y) == pytest.approx(r)
