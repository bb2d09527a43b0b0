"""The solution state: what a checkpoint stores and a warm start reuses."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class Fields:
    """Cell velocity (nc, 2), cell pressure (nc,), face mass fluxes (nf,), and the model variable
    nu_tilde (nc,) when a Spalart-Allmaras run carries one."""

    velocity: np.ndarray
    pressure: np.ndarray
    face_flux: np.ndarray
    nu_tilde: np.ndarray | None = None

    def copy(self) -> Fields:
        return Fields(
            self.velocity.copy(),
            self.pressure.copy(),
            self.face_flux.copy(),
            None if self.nu_tilde is None else self.nu_tilde.copy(),
        )

    def is_finite(self) -> bool:
        ok = bool(
            np.all(np.isfinite(self.velocity))
            and np.all(np.isfinite(self.pressure))
            and np.all(np.isfinite(self.face_flux))
        )
        if self.nu_tilde is not None:
            ok = ok and bool(np.all(np.isfinite(self.nu_tilde)))
        return ok

    @classmethod
    def uniform(cls, n_cells: int, n_faces: int, velocity=(0.0, 0.0), pressure: float = 0.0) -> Fields:
        """A uniform start with zero face fluxes (fluxes are rebuilt on the first iteration)."""
        u = np.empty((n_cells, 2))
        u[:] = np.asarray(velocity, dtype=float)
        return cls(u, np.full(n_cells, float(pressure)), np.zeros(n_faces))
