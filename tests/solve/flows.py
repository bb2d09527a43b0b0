"""Small drivers shared by the solver tests: build, solve, sample."""

from __future__ import annotations

import numpy as np
from scipy.interpolate import LinearNDInterpolator

from fvrans.mesh import compute_geometry
from fvrans.physics.boundary import build_flow_boundary
from fvrans.solve.coupled import SimultaneousSolver
from fvrans.solve.simple import SimpleSolver, SolverControls

#: a lid-driven cavity (``fvrans.mesh.generate.cavity``) with the lid moving at 1
CAVITY = {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}}
#: a plane channel (``fvrans.mesh.generate.channel``): uniform inflow 1, outlet pressure 0
CHANNEL = {
    "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
    "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
    "lower_wall": {"kind": "wall"},
    "upper_wall": {"kind": "wall"},
}
#: a backward-facing step (``fvrans.mesh.generate.backward_facing_step``): uniform inflow 1, outlet
#: pressure 0, no-slip walls
STEP = {
    "inlet": {"kind": "inflow-velocity", "velocity": [1.0, 0.0]},
    "outlet": {"kind": "outflow-pressure", "pressure": 0.0},
    "lower_wall": {"kind": "wall"},
    "step_face": {"kind": "wall"},
    "upper_wall": {"kind": "wall"},
}


def simultaneous_solver(mesh, specs, rho=1.0, mu=0.01, **controls):
    """A :class:`SimultaneousSolver` on the mesh with these boundary specs (not run)."""
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, specs)
    controls.setdefault("coupling", "simultaneous")
    return SimultaneousSolver(mesh, geom, bc, rho=rho, mu=mu, controls=SolverControls(**controls))


def solve(mesh, specs, rho=1.0, mu=0.01, **controls):
    geom = compute_geometry(mesh)
    bc = build_flow_boundary(mesh, geom, specs)
    solver = SimpleSolver(mesh, geom, bc, rho=rho, mu=mu, controls=SolverControls(**controls))
    converged = solver.run()
    return solver, converged


def record_each_assembly(solver, attribute):
    """The list that gets ``solver.<attribute>`` after each of the solver's assemblies (one per outer
    iteration of the simultaneous path), read as the assembly leaves it."""
    seen = []
    assemble = solver._assemble

    def recorded():
        out = assemble()
        seen.append(getattr(solver, attribute))
        return out

    solver._assemble = recorded
    return seen


def sampler(solver):
    """Linear interpolation of the cell velocities (plus boundary face values) at points."""
    g = solver.geom
    ni = solver.mesh.n_internal_faces
    pts = np.r_[g.cell_centre, g.face_centre[ni:]]
    ub = solver._velocity_on_boundary(solver.fields.velocity, solver.fields.face_flux[ni:])
    vals = np.r_[solver.fields.velocity, ub]
    return LinearNDInterpolator(pts, vals)


def split_same_diagonal(quad_mesh):
    """Split every quad of a structured quad mesh into two triangles along the diagonal from its
    first to its third vertex (all diagonals parallel)."""
    from fvrans.mesh import Mesh

    cells = []
    for c in range(quad_mesh.n_cells):
        q = quad_mesh.cell(c)
        cells += [q[[0, 1, 2]], q[[0, 2, 3]]]
    patches = {p.name: quad_mesh.face_points[p.start : p.stop] for p in quad_mesh.patches}
    return Mesh.from_arrays(quad_mesh.points, cells, patches, source=quad_mesh.source + " split")
