"""Driving a periodic flow: a fixed mean pressure gradient, or a fixed bulk velocity.

With periodic pairs the pressure solved for is the periodic part; the mean gradient G enters the
momentum equation as the uniform body force f = -G. For a fixed bulk (volume-mean) velocity U_b
along e, G is found in every outer iteration by superposition: the momentum equations of the
iteration are linear in f, so after the momentum solve u* (with the current force f e) one more
solve of the same matrix gives the response u_1 to a unit force (A u_1 = V e), and
f += (U_b - <u*>_e) / <u_1>_e, u* += that change times u_1, makes the predicted velocity carry
exactly U_b. At convergence the change is zero and <u>_e = U_b.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from fvrans.linalg.amg import AmgKrylovSolver


class BulkVelocityControl:
    """Keeps the volume-mean velocity along ``bulk_velocity`` at its magnitude (see the module
    docstring); ``force`` is the current uniform body force along that direction (= -G . e)."""

    def __init__(self, bulk_velocity, volume: np.ndarray, force: float = 0.0, rtol: float = 1e-4):
        b = np.asarray(bulk_velocity, dtype=float)
        speed = float(np.hypot(b[0], b[1]))
        if not speed > 0.0:
            raise ValueError("BulkVelocityControl: the bulk velocity must not be zero")
        self.direction = b / speed
        self.speed = speed
        self.volume = np.asarray(volume, dtype=float)
        self.total_volume = float(self.volume.sum())
        self.force = float(force)
        self.solver = AmgKrylovSolver("bicgstab", rtol=rtol, rebuild_every=20, max_iterations=100)
        self.x = np.zeros(len(self.volume))
        self.y = np.zeros(len(self.volume))

    def mean(self, u: np.ndarray, v: np.ndarray) -> float:
        """<u . e>: the volume-mean velocity along the direction."""
        e = self.direction
        return float(np.dot(self.volume, e[0] * u + e[1] * v)) / self.total_volume

    def adjust(self, a_u: sp.csr_matrix, a_v: sp.csr_matrix, us: np.ndarray, vs: np.ndarray) -> np.ndarray:
        """Correct the predicted velocities ``us``, ``vs`` in place (matrices ``a_u``, ``a_v`` of the
        iteration) and return the change of the body force per unit volume, (2,)."""
        e = self.direction
        self.x[:] = 0.0
        self.y[:] = 0.0
        if e[0] != 0.0:
            self.solver.solve(a_u, self.volume * e[0], self.x)
        if e[1] != 0.0:
            self.solver.solve(a_v, self.volume * e[1], self.y)
        response = self.mean(self.x, self.y)
        df = (self.speed - self.mean(us, vs)) / response if response > 0.0 else 0.0
        us += df * self.x
        vs += df * self.y
        self.force += df
        return df * e


__all__ = ["BulkVelocityControl"]
