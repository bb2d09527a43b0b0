"""Monitors of a run: the quantities watched every iteration (velocity change, wall forces, point
probes, derived scalars), the estimate of their iteration error and the stopping rule built on it.

The solver knows nothing of them: :func:`fvrans.api.solve` plugs a :class:`Monitor` into the
solver hooks (``callback`` records, ``converged_when`` decides), and the result writes its history
(``monitored.csv``) and estimates (``summary.json``).
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np

from fvrans.case.schema import Case
from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh
from fvrans.monitor.estimate import ErrorEstimate, iteration_error
from fvrans.monitor.monitor import STOP_REASONS, ColumnStatus, Monitor, stop_reason
from fvrans.monitor.watch import (
    FlowState,
    VariableChange,
    case_watches,
    derived_value,
    force_coefficients,
    probe_stencils,
    sample_flow,
)
from fvrans.physics.boundary import FlowBoundary
from fvrans.post.probes import Stencil

#: the history of the monitored quantities, beside residuals.csv
MONITOR_CSV = "monitored.csv"


def speed_scale(boundary: FlowBoundary, initial_velocity: np.ndarray | None = None) -> float:
    """The run's speed U: the largest speed imposed on the boundary, else the largest initial speed,
    else 1 (as the solver's residual scale)."""
    s = float(np.abs(boundary.velocity).max(initial=0.0)) if len(boundary.velocity) else 0.0
    if s <= 0.0 and initial_velocity is not None:
        s = float(np.abs(np.asarray(initial_velocity)).max(initial=0.0))
    return s if s > 0.0 else 1.0


def case_monitor(case: Case, mesh: Mesh, geom: Geometry, boundary: FlowBoundary, speed: float,
                 stencils: Mapping[str, Stencil] | None = None) -> Monitor:
    """The monitor of a case (its watches, its ``[monitor]`` settings) at speed scale ``speed``."""
    return Monitor(case_watches(case, mesh, geom, boundary, speed, stencils), case.monitor, speed)


def frozen_monitor(case: Case, variables: tuple[str, ...] | list[str], speed: float) -> Monitor:
    """The monitor of an a-priori run (``[reference] freeze_velocity``): the velocity, pressure and
    forces do not move, so it watches only the change of the model's variables (nu_tilde measured
    against nu at least)."""
    floors = {"nu_tilde": case.fluid.kinematic_viscosity}
    return Monitor([VariableChange(variables, floors)], case.monitor, speed)


__all__ = ["MONITOR_CSV", "STOP_REASONS", "ColumnStatus", "ErrorEstimate", "FlowState", "Monitor", "case_monitor",
           "derived_value", "force_coefficients", "frozen_monitor", "iteration_error", "probe_stencils", "sample_flow",
           "speed_scale", "stop_reason"]
