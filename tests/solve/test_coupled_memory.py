"""What the simultaneous path holds while its linear system is solved (where a run's memory peaks):
no assembly work arrays, no copies of the solution vector, no idle model-solver vectors, one
least-squares gradient operator per mesh, an FGMRES that keeps its basis and a few vectors; and
what it lets go is made again to the same bits (the fields of a run that keeps everything are the
fields of one that does not, exactly)."""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
import scipy.sparse as sp
from flows import CAVITY, CHANNEL, simultaneous_solver, split_same_diagonal

from fvrans import api
from fvrans.bundled import bundled_root
from fvrans.linalg.fgmres import fgmres
from fvrans.mesh.generate import cavity, channel, flat_plate
from fvrans.solve import coupled as C


def _state_during_solve(solver, monkeypatch):
    """Run two outer iterations; return what the solver holds at the start of the second FGMRES solve:
    (names of ASSEMBLY_ONLY arrays still set, the held arrays of the solver's own attributes in bytes
    per cell by name, the solver)."""
    seen = {}

    def spy(*args, **kwargs):
        if "held" not in seen and len(solver.lin_iterations) == 1:
            parts = [p for part in C.ASSEMBLY_ONLY.values() for p in part]
            seen["work"] = [p for p in parts if getattr(solver, p) is not None]
            seen["held"] = {name: value.nbytes / solver.nc for name, value in vars(solver).items()
                            if isinstance(value, np.ndarray) and value.ndim and value.shape[0] >= solver.nc}
            seen["lazy"] = (solver._dcoef, solver._kvec, solver._gu, solver._parts[6])
        return original(*args, **kwargs)

    original = C.fgmres
    monkeypatch.setattr(C, "fgmres", spy)
    solver.ctl.max_iterations = 2
    solver.run()
    return seen


def test_the_solve_holds_no_assembly_work(monkeypatch):
    """At the FGMRES solve of a channel on triangles: none of the assembly's work arrays, coefficients,
    face geometry or velocity gradient; of the solver's own arrays per cell only the ones the solve or
    the next iteration reads (each named: a new one fails this until it is either let go or added)."""
    s = simultaneous_solver(split_same_diagonal(channel(3.0, 1.0, 12, 5)), CHANNEL, mu=0.02,
                            system_solver="iterative")
    seen = _state_during_solve(s, monkeypatch)
    assert seen["work"] == []
    assert seen["lazy"] == (None, None, None, None)
    # read by the solve (row scale), by the next assembly (Rhie-Chow's previous pressure gradient,
    # the Hessians' buffer on triangles, the wall-layer cells of the system's pattern) or static
    # geometry the kernels take (face vectors, cell volumes, owner / neighbour indices; the float32 normal
    # of each thin cell's longest face, which picks the preconditioner's stabilisation weight)
    allowed = {"S", "owner", "neigh", "cf_ptr", "cf_face", "vol", "hu", "grad_p", "_row_scale", "_cind", "_cidx",
               "_wall_in_system", "_thin_normal"}
    assert set(seen["held"]) <= allowed, sorted(set(seen["held"]) - allowed)
    # M^-1 of the pressure extrapolation only for the cells next to a boundary face with an
    # extrapolated pressure (walls, inflow): not one 2 x 2 matrix per cell
    assert 0 < len(s._extrapolated) < 0.6 * s.nc


def test_letting_go_and_making_again_gives_the_same_bits():
    """The velocity gradient, dcoef / kvec and the momentum coefficients are let go before the solve
    and made again from the same inputs: six outer iterations with and without keeping them give the
    same fields to the last bit (cavity on triangles with the iterative solve, channel on quads with
    the sparse LU)."""
    runs = []
    for keep in (True, False):
        for mesh, specs, solver in ((split_same_diagonal(cavity(7)), CAVITY, "iterative"),
                                    (channel(3.0, 1.0, 10, 5), CHANNEL, "direct")):
            s = simultaneous_solver(mesh, specs, mu=0.02, system_solver=solver, max_iterations=6, tolerance=1e-14)
            s.keep_assembly_work = keep
            s.run()
            runs.append((s.fields.velocity, s.fields.pressure, s.fields.face_flux))
    for kept, let_go in zip(runs[:2], runs[2:]):
        for a, b in zip(kept, let_go):
            assert np.array_equal(a, b)
    assert np.abs(runs[0][0]).max() > 0.1  # the flow did develop


def test_pressure_is_not_a_view_of_the_solution_vector():
    s = simultaneous_solver(cavity(6), CAVITY, system_solver="iterative", max_iterations=1)
    s.run()
    p = s.fields.pressure
    assert p.base is None and p.flags.owndata and p.shape == (s.nc,)


def test_model_and_flow_share_one_least_squares_gradient_and_the_model_keeps_no_solver_vectors():
    """Spalart-Allmaras plate: the loop's velocity gradient, the face-sum gradients' least-squares part
    and the model's equation use one operator; after an outer iteration the model's equation holds no
    coefficient set and its BiCGStab solver no work or cycle vectors (its hierarchy stays)."""
    case = api.load_case(bundled_root() / "cases" / "flat_plate_turbulent.toml").replace(
        {"solver.coupling": "simultaneous", "solver.system_solver": "iterative", "solver.max_iterations": 2,
         "output.write_fields": False})
    mesh = flat_plate(nx_plate=12, nx_ahead=4, ny=12, first_spacing=1.6e-5)
    problem = api.prepare(case, mesh)
    seen = {}
    original = C.SimultaneousSolver.iterate

    def iterate(self):
        seen["solver"] = self
        return original(self)

    C.SimultaneousSolver.iterate = iterate
    try:
        api.solve(problem)
    finally:
        C.SimultaneousSolver.iterate = original
    s = seen["solver"]
    eq = s.model.equation
    assert s.grad is s.grad_pressure._lsq is s.grad_convection._lsq is eq.grad
    assert eq.coeffs is None
    ks = eq.ksolver
    assert ks._h is not None and ks._work is None and ks._vec is None


@pytest.mark.parametrize("flexible", [False, True])
def test_fgmres_keeps_its_basis_and_a_few_vectors(flexible):
    """Traced peak of one FGMRES(5) solve of n unknowns, float32 basis, beside its right-hand side:
    the basis (6 n single-precision values; with flexibility also the 5 preconditioned vectors in double)
    and at most 3 vectors of n doubles (dx and the preconditioned vector and its product, or at a
    restart the new residual and its product). Copying r0 or the product, or holding the preconditioned
    vector or a restart's residual through the cycle, breaks it."""
    n = 200_000
    A = sp.diags([np.full(n - 1, -0.3), np.linspace(1.0, 3.0, n), np.full(n - 1, -0.4)], [-1, 0, 1], format="csr")
    b = np.random.default_rng(0).normal(size=n)
    dinv = 1.0 / A.diagonal()
    fgmres(lambda z: A[:9, :9] @ z, lambda v: v * dinv[:9], b[:9], 1e-10, restart=5, flexible=flexible,
           basis=np.float32)  # the kernels loaded (their compilation allocates too)
    tracemalloc.start()
    tracemalloc.reset_peak()
    base = tracemalloc.get_traced_memory()[0]
    dx, its, rel = fgmres(lambda z: A @ z, lambda v: v * dinv, b, 1e-10, restart=5, max_iterations=40,
                          flexible=flexible, basis=np.float32)
    peak = tracemalloc.get_traced_memory()[1] - base
    tracemalloc.stop()
    assert its > 5 and rel < 1e-3  # restarted at least once
    basis = 6 * n * 4 + (5 * n * 8 if flexible else 0)
    assert peak <= basis + 3 * n * 8 + 100_000, (peak - basis) / (n * 8)


def test_freed_memory_is_handed_back_at_each_phase(monkeypatch):
    """glibc keeps freed arrays' pages resident in its heap: the solver returns them at the start and
    end of the assembly, before the FGMRES solve and before the model's update (4 times per outer
    iteration)."""
    calls = []
    monkeypatch.setattr(C, "_malloc_trim", lambda pad: calls.append(pad))
    s = simultaneous_solver(cavity(6), CAVITY, system_solver="iterative", max_iterations=3, tolerance=1e-14)
    s.run()
    assert calls == [0] * 12
    monkeypatch.setattr(C, "RELEASE_FREE_MEMORY", False)
    s.run()
    assert len(calls) == 12


def test_gradient_is_held_in_the_system_only_and_comes_back_after_a_release():
    """G = M^-1 G0 keeps no values of its own: its products (whole, x rows, y rows) read the system's
    momentum rows and equal, to the bit, those of a matrix of its own made from the geometry; after
    ``release_work`` (the system's values let go) the next outer iteration puts the same values back.
    Channel on triangles, where M^-1 differs from the identity next to the walls."""
    s = simultaneous_solver(split_same_diagonal(channel(3.0, 1.0, 12, 5)), CHANNEL, mu=0.02,
                            system_solver="iterative", max_iterations=2, tolerance=1e-14)
    assert len(s._extrapolated) > 0
    nc, nnz = s.nc, len(s._cidx)
    cind = s._cind.astype(np.int64)
    own = sp.csr_matrix((s._gradient_values(), np.concatenate([s._cidx, s._cidx]),
                         np.concatenate([cind, cind[1:] + nnz])), shape=(2 * nc, nc))
    p = np.sin(np.arange(nc) * 0.7)
    for _ in range(2):
        s.run()
        held = [a for a in vars(s.G).values() if isinstance(a, np.ndarray)]
        assert all(a is s._cind or a is s._cidx for a in held)
        assert np.array_equal(s.G @ p, own @ p)
        x, y = s.G.halves()
        assert np.array_equal(x @ p, own[:nc] @ p) and np.array_equal(y @ p, own[nc:] @ p)
        s.release_work()
        assert s._A.data.size == 0
        s.ctl.max_iterations += 2
