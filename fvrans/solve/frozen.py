"""An a-priori model test: only the turbulence model's equations, on a velocity field held fixed.

With the mean velocity (and its face fluxes) of a reference flow frozen, each outer iteration
calls the model's ``update`` once with the loop's gradient of that velocity (boundary values by
the flow's conditions, :meth:`SimpleSolver.velocity_gradient`); nothing else moves. The converged
model variables are the model's answer to the reference mean flow: its eddy viscosity against
the reference's optimal one shows where the model departs from the data (:mod:`fvrans.reference.diagnostics`).

The face fluxes are the reference's own when it is a run on the same mesh (its Rhie-Chow fluxes:
a model frozen on its own converged run returns its own variables to the solver's tolerance),
otherwise the linear interpolation of the velocity that every start from a velocity field gets.
The solver keeps the loop's interface (``run`` with ``callback`` and ``converged_when``, ``fields``,
``iteration``, ``history``, ``grad_p``); its residual columns are the model's alone.
"""

from __future__ import annotations

from fvrans.errors import CaseError
from fvrans.solve.simple import History, SimpleSolver


class FrozenVelocitySolver(SimpleSolver):
    """:class:`SimpleSolver` whose iteration advances only the model (see the module docstring); the
    velocity, pressure and face fluxes of ``fields`` stay as given (so any coupling will do)."""

    COUPLINGS = ("simple", "simplec", "simultaneous")

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        if not self.model.names:
            raise CaseError(f"an a-priori run solves a turbulence model's equations on a frozen velocity; the "
                            f"model {self.model.key!r} has none (choose a model with transport equations)")
        self.history = History(names=list(self.model.names))
        self.frozen_gradient = self.velocity_gradient(self.fields.velocity, self.fields.face_flux)

    def iterate(self) -> list[float]:
        """One update of the model's equations; returns their normalised imbalances."""
        res = self.model.update(self.fields, self.frozen_gradient)
        self.iteration += 1
        return [float(r) for r in res]


__all__ = ["FrozenVelocitySolver"]
