"""The monitor of a run: one place that evaluates the watched quantities after every iteration
and feeds the progress line, the stopping rule and the history table (``monitors.csv``), so the
three never disagree.

Stopping rule. The solver asks :meth:`Monitor.converged_when` only once every normalised imbalance
is below ``solver.tolerance``; with ``monitor.settle`` (the default) the run then stops as
converged only when every watched column has settled: its estimated iteration error
(:func:`fvrans.monitor.estimate.iteration_error`, over windows of ``monitor.window``
iterations) is at most ``monitor.iteration_error`` times the column's scale (see
:mod:`fvrans.monitor.watch`: the run's speed U for velocities and the velocity change, 1/2 rho U^2
for pressures, the size of the patch's coefficient vector for force coefficients, the line's
length for recirculation lengths).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from fvrans.case.schema import MonitorSettings
from fvrans.monitor.estimate import ErrorEstimate, iteration_error
from fvrans.monitor.watch import FlowState, Watch

#: names of the stopping criteria recorded in summary.json (``stopped_by``)
STOP_REASONS = {
    "settled": "every residual below the tolerance and every monitored quantity settled",
    "residuals": "every residual below the tolerance (monitor.settle = false)",
    "iteration-limit": "solver.max_iterations reached",
    "diverged": "the run diverged",
    "interrupted": "stopped on request (signal or callback)",
}


@dataclass(frozen=True)
class ColumnStatus:
    """Last value, estimated iteration error, allowed error and contraction ratio of a column."""

    name: str
    value: float
    error: float
    allowed: float
    ratio: float

    @property
    def settled(self) -> bool:
        return self.error <= self.allowed

    def as_dict(self) -> dict[str, Any]:
        return {"value": self.value, "iteration_error": self.error, "allowed": self.allowed,
                "contraction": self.ratio, "settled": self.settled}


class Monitor:
    """Evaluates ``watches`` on the state given by ``state()`` after each iteration.

    ``speed``: the run's speed scale U. Plug in as the solver hooks:
    ``callback(iteration, residuals)`` (records a row) and ``converged_when(iteration,
    residuals)`` (the stopping rule).
    """

    def __init__(self, watches: Sequence[Watch], settings: MonitorSettings, speed: float,
                 state: Callable[[], FlowState] | None = None):
        self.watches = list(watches)
        self.settings = settings
        self.speed = float(speed)
        self.state = state
        self.names = [c for w in self.watches for c in w.columns]
        if len(set(self.names)) != len(self.names):
            dup = sorted({n for n in self.names if self.names.count(n) > 1})
            raise ValueError(f"monitor columns named twice: {dup}")
        self._is_change = np.array([w.is_change for w in self.watches for _ in w.columns], dtype=bool)
        self.iterations: list[int] = []
        self.rows: list[list[float]] = []
        self.seconds: list[float] = []
        self.show = self._shown_column(settings.show)

    def _shown_column(self, wanted: str) -> str | None:
        if wanted:
            if wanted not in self.names:
                from fvrans.errors import CaseError

                raise CaseError(f"monitor.show: {wanted!r} is not a monitored quantity; choose one of "
                                f"{', '.join(repr(n) for n in self.names)}")
            return wanted
        values = [n for n in self.names if n != "velocity_change"]
        return values[0] if values else None

    # -- recording -----------------------------------------------------------------------
    def record(self, iteration: int, state: FlowState) -> list[float]:
        """Evaluate every watch on ``state`` and append the row of ``iteration``."""
        row = [float(v) for w in self.watches for v in w.values(state)]
        self.iterations.append(int(iteration))
        self.rows.append(row)
        return row

    def callback(self, iteration: int, residuals: Sequence[float]) -> None:
        """The solver callback: record the state after ``iteration``."""
        if self.state is None:
            raise RuntimeError("Monitor.callback needs the state function (Monitor(..., state=...))")
        self.record(iteration, self.state())

    def converged_when(self, iteration: int, residuals: Sequence[float]) -> bool:
        """The solver's stopping hook (asked when every residual is below the tolerance)."""
        return (not self.settings.settle) or not self.unsettled()

    # -- estimates -----------------------------------------------------------------------
    def table(self) -> np.ndarray:
        """The history (iterations, columns)."""
        return np.asarray(self.rows, dtype=float).reshape(len(self.rows), len(self.names))

    def status(self) -> list[ColumnStatus]:
        """Per column: last value, estimated iteration error (the column's units), allowed error."""
        t = self.table()
        if len(t) == 0:
            return [ColumnStatus(n, math.nan, math.inf, 0.0, math.nan) for n in self.names]
        window = self.settings.window
        last = t[-1]
        scales = []
        k = 0
        for w in self.watches:
            n = len(w.columns)
            scales += list(w.scales(list(last[k:k + n]), self.speed))
            k += n
        out = []
        for j, name in enumerate(self.names):
            col = t[:, j]
            if self._is_change[j]:
                changes = col[1:] if len(col) and not np.isfinite(col[0]) else col
                est: ErrorEstimate = iteration_error(changes, window, 1.0)
                value = float(col[-1])
            else:
                size = abs(float(col[-1])) if np.isfinite(col[-1]) else 0.0
                est = iteration_error(_changes(col), window, max(size, float(scales[j])))
                value = float(col[-1])
            out.append(ColumnStatus(name, value, est.error, self.settings.iteration_error * float(scales[j]),
                                    est.ratio))
        return out

    def unsettled(self) -> list[ColumnStatus]:
        return [s for s in self.status() if not s.settled]

    # -- reporting -----------------------------------------------------------------------
    def progress_text(self) -> str:
        """The shown column and its last value, e.g. ``"plate.Cd 2.8712e-03"`` (or "")."""
        if self.show is None or not self.rows:
            return ""
        return f"{self.show} {self.rows[-1][self.names.index(self.show)]:.5g}"

    def columns(self) -> tuple[list[str], list[np.ndarray]]:
        """Header and columns of ``monitors.csv``: ``iteration`` and one column per watched quantity."""
        t = self.table()
        return ["iteration", *self.names], [np.asarray(self.iterations, dtype=np.int64)] + [t[:, j] for j in
                                                                                       range(len(self.names))]

    def summary(self) -> dict[str, Any]:
        """``{column: {value, iteration_error, allowed, contraction, settled}}`` for summary.json."""
        return {s.name: s.as_dict() for s in self.status()}


def _changes(col: np.ndarray) -> np.ndarray:
    """|differences| of a column; a quantity that stays undefined (NaN, e.g. a recirculation length
    where the flow does not reverse) does not change, one that becomes (un)defined changes by inf."""
    d = np.abs(np.diff(col))
    a, b = np.isnan(col[:-1]), np.isnan(col[1:])
    d[a & b] = 0.0
    d[a ^ b] = np.inf
    return d


def stop_reason(converged: bool, diverged: bool, interrupted: bool, settle: bool) -> str:
    """The key of :data:`STOP_REASONS` that ended a run."""
    if diverged:
        return "diverged"
    if converged:
        return "settled" if settle else "residuals"
    return "interrupted" if interrupted else "iteration-limit"


__all__ = ["STOP_REASONS", "ColumnStatus", "Monitor", "stop_reason"]
