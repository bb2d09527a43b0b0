"""The solution state: what a checkpoint stores and a warm start reuses.

It sits below the solver and the turbulence models (both read and write it), so that neither
imports the other.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


@dataclass
class Fields:
    """Cell velocity (nc, 2), cell pressure (nc,), face mass fluxes (nf,) and the transported
    variables of the turbulence model by name (each (nc,); e.g. ``{"nu_tilde": ...}`` for
    Spalart-Allmaras, empty for laminar flow). The model names its variables
    (:attr:`fvrans.models.base.TurbulenceModel.variables`) and fills missing ones
    (:meth:`~fvrans.models.base.TurbulenceModel.initialise`)."""

    velocity: np.ndarray
    pressure: np.ndarray
    face_flux: np.ndarray
    variables: dict[str, np.ndarray] = field(default_factory=dict)

    def copy(self) -> Fields:
        return Fields(
            self.velocity.copy(),
            self.pressure.copy(),
            self.face_flux.copy(),
            {k: np.array(v, dtype=float) for k, v in self.variables.items()},
        )

    def is_finite(self) -> bool:
        ok = bool(
            np.all(np.isfinite(self.velocity))
            and np.all(np.isfinite(self.pressure))
            and np.all(np.isfinite(self.face_flux))
        )
        for v in self.variables.values():
            ok = ok and bool(np.all(np.isfinite(v)))
        return ok

    @classmethod
    def uniform(cls, n_cells: int, n_faces: int, velocity=(0.0, 0.0), pressure: float = 0.0) -> Fields:
        """A uniform start with zero face fluxes (fluxes are rebuilt on the first iteration);
        the model fills its variables when the solver starts."""
        u = np.empty((n_cells, 2))
        u[:] = np.asarray(velocity, dtype=float)
        return cls(u, np.full(n_cells, float(pressure)), np.zeros(n_faces))
