"""The interface of a turbulence model as the solution loop sees it (laminar flow: the base as is).

The loop (``fvrans.solve``) imports this module and knows no model by name; every model imports
it from below and reaches nothing above (no solver, no post-processing). Per outer iteration the
loop asks a model for

* ``eddy_viscosity(fields)``: mu_t per cell, the implicit part of the Reynolds stress
  -rho u'u' = 2 mu_t S + T (the 2/3 rho k I part of two-equation models is left in the pressure);
* ``extra_stress(fields, grad_u)``: an optional explicit stress T per cell, (n_cells, 3) holding
  (T_xx, T_xy, T_yy) in units of stress (Pa): the part of the Reynolds stress that is not
  2 mu_t S (a non-linear constitutive relation such as QCR, the remainder of an injected
  stress). The momentum equation takes its divergence in conservative face form,
  sum_f T_f . S_f, as an explicit source (``fvrans.fv.stress.StressDivergence``);
* ``update(fields, grad_u, pseudo_time)``: advance the model's own equations once with the new
  velocity gradient grad_u[c, i, j] = du_i/dx_j and face fluxes; return one normalised imbalance per
  name in ``names``. ``pseudo_time`` (rho V / dt per cell, or None) is the loop's local pseudo-time
  term (``solver.turbulence_cfl``): added to each equation's diagonal with its old-value source
  (``TransportEquation.solve``), it vanishes at convergence.

Before its first iteration the loop calls ``prepare(gradient_of)`` with its own velocity gradient
as a function of any velocity field (boundary values by the flow's conditions), for models that
need the gradient of a field other than the current one (the reference velocity of an injected
stress, :mod:`fvrans.models.injected`).

Around the loop: ``variables`` are the transported variables the model keeps in
``Fields.variables`` (checkpoints store them, warm starts reuse them; ``initialise`` fills
missing ones), ``cell_outputs`` the per-cell arrays written to fields.vtu, ``probe_fields`` and
``probe_columns`` what line probes sample. A model is built from a case by the registry in
:mod:`fvrans.models` (``[model] turbulence = "<key>"``) through its ``from_case``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.fields import Fields

#: column / cell-data name of the eddy-viscosity ratio nu_t / nu in every output
EDDY_VISCOSITY_RATIO = "eddy_viscosity_ratio"


class TurbulenceModel:
    """A turbulence model seen by the loop; this base class as is means laminar flow."""

    #: the ``[model] turbulence`` choice that selects this class
    key: str = "none"
    #: residual names (columns of residuals.csv after u, v, continuity), one per equation
    names: tuple[str, ...] = ()
    #: transported variables kept in ``Fields.variables`` (checkpoints, warm starts)
    variables: tuple[str, ...] = ()
    #: True when ``from_case`` takes the reference flow of the run (``reference=``, a
    #: :class:`fvrans.reference.cells.CellReference`)
    uses_reference: bool = False

    @classmethod
    def from_case(cls, case: Any, mesh: Any, geom: Any, boundary: Any,
                  wall_distance: np.ndarray | None = None) -> TurbulenceModel:
        """The model with the settings of a case (``fvrans.case.Case``)."""
        return cls()

    @classmethod
    def names_for(cls, case: Any) -> tuple[str, ...]:
        """The residual names of this model with the settings of ``case`` (``names`` unless they
        depend on the case)."""
        return cls.names

    @classmethod
    def variables_for(cls, case: Any) -> tuple[str, ...]:
        """The transported variables of this model with the settings of ``case``."""
        return cls.variables

    def prepare(self, gradient_of: Any) -> None:
        """Called once by the loop before its first iteration: ``gradient_of(velocity)`` gives the
        loop's velocity gradient (n_cells, 2, 2) of any cell velocity field (n_cells, 2)."""

    # -- state ----------------------------------------------------------------------------
    def initial_values(self) -> dict[str, np.ndarray]:
        """Start values of every variable in ``variables`` (one (n_cells,) array each)."""
        return {}

    def initialise(self, fields: Fields) -> None:
        """Give ``fields`` every variable of this model it lacks or holds with another size (a
        uniform start, or a warm start from another model) and drop variables of other models."""
        n = len(fields.pressure)
        ok = {k: v for k, v in fields.variables.items() if k in self.variables and np.shape(v) == (n,)}
        missing = [k for k in self.variables if k not in ok]
        if missing:
            start = self.initial_values()
            ok.update({k: np.array(start[k], dtype=float) for k in missing})
        fields.variables = {k: np.ascontiguousarray(ok[k], dtype=float) for k in self.variables}

    # -- what the momentum equation takes -------------------------------------------------
    def eddy_viscosity(self, fields: Fields) -> np.ndarray | None:
        """mu_t per cell (n_cells,), or None for laminar flow."""
        return None

    def wall_eddy_viscosity(self) -> float:
        """mu_t on wall faces."""
        return 0.0

    def extra_stress(self, fields: Fields, grad_u: np.ndarray) -> np.ndarray | None:
        """Explicit stress (T_xx, T_xy, T_yy) per cell (n_cells, 3), in Pa, beside 2 mu_t S; or None."""
        return None

    def update(self, fields: Fields, grad_u: np.ndarray, pseudo_time: np.ndarray | None = None) -> list[float]:
        """Advance the model equations one outer iteration; return their normalised imbalances.
        ``pseudo_time``: rho V / dt per cell (the loop's local pseudo-time term) or None."""
        return []

    # -- outputs --------------------------------------------------------------------------
    def cell_outputs(self, fields: Fields) -> dict[str, np.ndarray]:
        """Per-cell arrays for fields.vtu (the variables, nu_t / nu, wall distance, ...)."""
        return {}

    def probe_fields(self, fields: Fields) -> dict[str, tuple[np.ndarray, np.ndarray | None]]:
        """Cell arrays a line probe samples, each with its cell gradient (n_cells, 2) or None."""
        return {}

    def probe_columns(self, sampled: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        """Columns derived from the sampled ``probe_fields`` at the probe points."""
        return {}


#: the name the interface had inside the solver; kept for code written against it
EddyViscosityModel = TurbulenceModel


def reynolds_stress(model: TurbulenceModel, fields: Fields, grad_u: np.ndarray, rho: float) -> np.ndarray:
    """The model's Reynolds stress per unit mass R = <u_i' u_j'> (R_xx, R_xy, R_yy) per cell:
    -(2 mu_t S + T) / rho, plus 2/3 k on the diagonal when the model carries k (n_cells, 3)."""
    g = np.asarray(grad_u, dtype=np.float64)
    n = len(g)
    mu_t = model.eddy_viscosity(fields)
    mu_t = np.zeros(n) if mu_t is None else np.asarray(mu_t, dtype=np.float64)
    sxx, sxy, syy = g[:, 0, 0], 0.5 * (g[:, 0, 1] + g[:, 1, 0]), g[:, 1, 1]
    tau = np.column_stack([2 * mu_t * sxx, 2 * mu_t * sxy, 2 * mu_t * syy])
    extra = model.extra_stress(fields, g)
    if extra is not None:
        tau = tau + np.asarray(extra, dtype=np.float64)
    r = -tau / float(rho)
    k = fields.variables.get("k")
    if k is not None and np.shape(k) == (n,):
        r[:, 0] += 2.0 / 3.0 * k
        r[:, 2] += 2.0 / 3.0 * k
    return r


def case_wall_distance(mesh: Any, geom: Any, boundary: Any, model_name: str) -> np.ndarray:
    """Exact distance of each cell centroid to the wall patches; CaseError without a wall."""
    walls = [name for name, kind in boundary.patch_kind.items() if kind == "wall"]
    if not walls:
        raise CaseError(
            f"{mesh.source}: the {model_name} model needs at least one wall patch (kind = 'wall') "
            "to measure the wall distance; add one or use model.turbulence = 'none'"
        )
    from fvrans.physics.wall_distance import cell_wall_distance

    return cell_wall_distance(mesh, geom, walls)


def checked_wall_distance(d: Any, n_cells: int) -> np.ndarray:
    """A wall distance array (n_cells,), positive everywhere."""
    d = np.ascontiguousarray(d, dtype=np.float64)
    if d.shape != (n_cells,) or not np.all(d > 0.0):
        raise ValueError(f"wall distance must be positive with shape ({n_cells},), got shape {d.shape}")
    return d


__all__ = [
    "EDDY_VISCOSITY_RATIO", "EddyViscosityModel", "TurbulenceModel", "case_wall_distance", "checked_wall_distance",
    "reynolds_stress",
]
