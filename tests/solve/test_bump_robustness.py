"""Default settings on wall cells stretched along a curved wall (channel with a steep bump).

The bump channel with a first cell of 1e-4 of the height has wall cells of aspect ratio ~250 and
26 deg non-orthogonality on the bump flanks (its grid columns are vertical, the wall is not). With
the linear-upwind reconstruction u_f = u_P + grad u_P . (x_f - x_P) taken from the face-neighbour
least-squares gradient, the Spalart-Allmaras run at Re_h = 1e5 ran away within 5 iterations. The
cause: in a wall cell the two short offsets (to the wall face and to the next cell out) are not
collinear, so the least-squares fit takes the along-wall derivative from offsets of the wall-normal
size; a change of u_P moved the extrapolated value on the long faces by ~100 times that change and
the deferred correction outgrew the implicit upwind part. Least squares is known to be inaccurate
on stretched curved meshes (Mavriplis 2003, AIAA 2003-3986). The solver now reconstructs with the
face-sum gradient (Green-Gauss, face values moved to the face centre with the least-squares
gradient), whose response stays below 2 there. At Re_h = 1e6 that alone still ran away in 8
iterations: over the curved wall the line between the centroids of two wall cells side by side
meets their common face line up to 13 face lengths outside the face (wall curvature times
dx^2 / 8 against a cell height of 1e-4), and the skewness correction extrapolated the value there
across the boundary layer; the reconstruction gradient now moves face values at most to the face
ends.

Physical checks of the converged flow (common practice, no reference data for this geometry):
mass conservation between inlet and outlet, a separated region behind the crest that reattaches
before the outlet, positive skin friction in the developing channel flow upstream.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

import fvrans.api as fa
from fvrans.fv.gradient import gradient_operator
from fvrans.post.wall import zero_shear_points

CASES = Path(__file__).resolve().parents[2] / "cases"
#: cases/bump_turbulent.toml on a coarser grid with a first cell of 1e-4 h (3 072 cells): it still
#: diverged within 5 iterations with the least-squares reconstruction; now about 300 iterations
COARSER = {"nx_down": 40, "ny": 32, "wall_spacing": 1e-4}


def bump_case(mu: float, turbulence: str) -> fa.Case:
    """The bundled turbulent bump case on the coarser grid, default solver settings."""
    case = fa.load_case(CASES / "bump_turbulent.toml")
    changes = {f"mesh.parameters.{k}": v for k, v in COARSER.items()}
    # the solver's default tolerance (the case file asks for 1e-7)
    changes.update({"fluid.viscosity": mu, "model.turbulence": turbulence, "solver.max_iterations": 1500,
                    "solver.tolerance": 1e-6})
    return case.replace(changes)


def extrapolation_response(problem: fa.Problem, method: str, cells: np.ndarray) -> np.ndarray:
    """max over the faces of each cell of |d(u_P + g_P . (x_f - x_P)) / d u_P| (the other cell and
    boundary values fixed): 1 for first-order upwind."""
    mesh, geom = problem.mesh, problem.geom
    grad = gradient_operator(mesh, geom, method)
    ub = np.zeros(mesh.n_boundary_faces)
    out = []
    for c in cells:
        u = np.zeros(mesh.n_cells)
        u[c] = 1.0
        g = grad(u, ub)[c]
        faces = np.flatnonzero((mesh.face_owner == c) | (mesh.face_neighbour == c))
        out.append(np.max(np.abs(1.0 + (geom.face_centre[faces] - geom.cell_centre[c]) @ g)))
    return np.asarray(out)


def test_face_sum_gradient_keeps_the_reconstruction_bounded_in_stretched_wall_cells():
    problem = fa.prepare(bump_case(1e-5, "none"))
    xc = problem.geom.cell_centre
    ny = COARSER["ny"]
    wall_cells = np.flatnonzero((np.arange(problem.mesh.n_cells) % ny == 0) & (np.abs(xc[:, 0]) < 0.45))
    assert np.all(xc[wall_cells, 1] < 0.3)  # the first cells of the columns over the bump
    lsq = extrapolation_response(problem, "least_squares", wall_cells)
    face_sum = extrapolation_response(problem, "gauss_least_squares", wall_cells)
    assert lsq.max() > 50.0  # the mechanism of the run-away
    assert face_sum.max() < 2.0


# At Re_h = 1e6 the run was a limit cycle (the velocity of some cell flipping by 8e-3 U every
# iteration, so the monitors never settled) until the turbulence equation got local pseudo-time steps
# (solver.turbulence_cfl; issue #14, item 1): see test_bump_at_re_1e6_converges_without_a_limit_cycle.


@pytest.mark.parametrize("turbulence, mu", [("spalart-allmaras", 1e-5), ("spalart-allmaras", 1e-6), ("none", 1e-3)])
def test_bump_with_stretched_wall_cells_converges_at_default_settings(turbulence, mu):
    r = fa.solve(bump_case(mu, turbulence))
    assert r.converged, r.message
    mesh, F = r.problem.mesh, r.fields.face_flux
    inflow = F[mesh.patch("inlet").faces].sum()
    outflow = F[mesh.patch("outlet").faces].sum()
    assert abs(inflow + outflow) < 1e-6 * abs(inflow)
    w = r.wall("lower_wall")
    tau_x = w.tau_w * w.tangent[:, 0]
    upstream = w.x < -1.0
    assert np.all(tau_x[upstream] > 0.0)
    behind = (w.x > 0.0) & (w.x < 2.0)
    assert np.any(tau_x[behind] < 0.0)  # separated behind the crest
    outlet_end = w.x > w.x.max() - 1.0
    assert np.all(tau_x[outlet_end] > 0.0)  # and reattached before the outlet
    reattach = max(p.x for p in zero_shear_points(w))
    assert 0.5 < reattach < w.x.max() - 1.0


@pytest.mark.slow
def test_bump_at_re_1e6_converges_without_a_limit_cycle():
    """Re_h = 1e6 at the defaults, on to residuals 1e-9. Without the turbulence equation's local
    pseudo-time steps (turbulence_cfl = 0, relax_turbulence 1.0) this run stalls in a limit cycle
    with residuals between 4e-7 and 4e-6 (1 200 iterations, measured); Patankar relaxation of
    nu_tilde (0.95) also ends it, but ties the stacks of thin cells of the step (coarse step 901
    iterations instead of 632)."""
    r = fa.solve(bump_case(1e-6, "spalart-allmaras").set("solver.tolerance", 1e-9))
    assert r.converged, r.message
