"""The Reynolds stress of a reference flow in the mean-flow equations: ``[model] turbulence =
"reference-stress"`` with ``[reference] data`` (or ``fvrans.api.solve(..., reference=...)``).

The reference gives, per cell, the in-plane Reynolds stresses R = <u_i' u_j'> (R_xx, R_xy, R_yy, per
unit mass) and its mean velocity u_ref. The Reynolds stress -rho R enters the momentum equation in
one of two forms (``stress_form``):

* ``"explicit"``: all of it, T = -rho R, as the explicit source sum_f T_f . S_f
  (:mod:`fvrans.fv.stress`); no eddy viscosity;
* ``"implicit"``: the optimal eddy viscosity nu* of the reference, the least-squares projection of
  its stress anisotropy on the strain rate S(u_ref) (:func:`fvrans.reference.stress.optimal_eddy_viscosity`),
  clipped to [0, ``eddy_viscosity_cap`` nu] (0 where the strain rate vanishes), taken implicitly as
  mu_t = rho nu*, and only the remainder T = -rho R - 2 mu_t S(u_ref) explicitly.

In both forms the injected stress 2 mu_t S(u) + T equals -rho R in every cell when u = u_ref:
S(u_ref) is the loop's own velocity gradient of the reference velocity (handed over by
``prepare``), so a reference that is a converged fvrans eddy-viscosity run on the same mesh is a
discrete solution of the injected equations (``tests/reference/test_injection.py``).

Why the implicit form: Wu, Xiao, Sun & Wang (2019), "RANS equations with explicit data-driven
Reynolds stress closure can be ill-conditioned", J. Fluid Mech. 869, 553-586 (from memory) showed
that with the stress explicit the mean velocity answers a small stress error with a gain that grows
with the Reynolds number (only the molecular viscosity is left to damp it), and proposed the
implicit treatment of the part along the strain rate with the optimal eddy viscosity; Brener, Cruz,
Thompson & Anjos (2021), J. Fluid Mech. 915, A110 (from memory) studied the conditioning of such
implicit/explicit splits further. The channel of ``benchmarks/bench_injection_conditioning.py``
measures it here (README: "Reference stresses").

Blending (``blend_model``, ``blend_share`` b): a model (Spalart-Allmaras or k-omega SST) is solved
alongside on the current flow and the implicit eddy viscosity becomes (1 - b) nu* + b nu_model
(implicit form) or b nu_model (explicit form); the explicit remainder carries the rest, so the
injected stress at u_ref is still -rho R: the blend changes the conditioning, not the answer.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.models.base import EDDY_VISCOSITY_RATIO, TurbulenceModel
from fvrans.reference.stress import optimal_eddy_viscosity, strain_rate

#: the choices of ``stress_form``
FORMS = ("implicit", "explicit")
#: cell output: 1 where the optimal eddy viscosity was clipped (negative, above the cap) or undefined
CLIPPED = "optimal_eddy_viscosity_clipped"


class ReferenceStress(TurbulenceModel):
    """Injects the reference stress ``stress`` (n_cells, 3: R_xx, R_xy, R_yy per unit mass) of a
    reference flow with velocity ``velocity`` (n_cells, 2); see the module docstring. ``cap``: the
    largest optimal eddy viscosity as nu_t / nu; ``blend``: a model solved alongside and
    ``blend_share`` its share of the implicit eddy viscosity."""

    key = "reference-stress"
    uses_reference = True

    def __init__(self, rho: float, mu: float, stress: np.ndarray, velocity: np.ndarray, form: str = "implicit",
                 cap: float = 1e5, blend: TurbulenceModel | None = None, blend_share: float = 0.0,
                 label: str = "the reference"):
        if form not in FORMS:
            raise CaseError(f"model.stress_form = {form!r}: use one of {', '.join(FORMS)}")
        self.rho = float(rho)
        self.nu = float(mu) / float(rho)
        self.stress = np.ascontiguousarray(stress, dtype=np.float64)
        self.velocity_ref = np.ascontiguousarray(velocity, dtype=np.float64)
        n = len(self.velocity_ref)
        if self.stress.shape != (n, 3) or self.velocity_ref.shape != (n, 2):
            raise CaseError(f"{label}: the stress {self.stress.shape} and velocity {self.velocity_ref.shape} do not "
                            f"match {n} cells ((n, 3) and (n, 2) needed)")
        self.form = form
        self.cap = float(cap)
        self.blend = blend
        self.blend_share = float(blend_share) if blend is not None else 0.0
        self.names = blend.names if blend is not None else ()
        self.variables = blend.variables if blend is not None else ()
        self.label = label
        self.strain: np.ndarray | None = None
        self.nu_optimal: np.ndarray | None = None
        self.nu_star = np.zeros(n)
        self.clipped = np.zeros(n)
        self.nu_implicit = np.zeros(n)
        self.mu_t = np.zeros(n)
        self.remainder = np.zeros((n, 3))

    # -- construction ----------------------------------------------------------------------
    @classmethod
    def _blend_key(cls, case: Any) -> str:
        return case.model.injection.blend_model

    @classmethod
    def names_for(cls, case: Any) -> tuple[str, ...]:
        from fvrans.models import model_class

        key = cls._blend_key(case)
        return () if key == "none" else model_class(key).names

    @classmethod
    def variables_for(cls, case: Any) -> tuple[str, ...]:
        from fvrans.models import model_class

        key = cls._blend_key(case)
        return () if key == "none" else model_class(key).variables

    @classmethod
    def from_case(cls, case: Any, mesh: Any, geom: Any, boundary: Any, wall_distance: np.ndarray | None = None,
                  reference: Any = None) -> ReferenceStress:
        """The model of a case; ``reference``: the run's reference on the cells
        (:class:`fvrans.reference.cells.CellReference`)."""
        if reference is None:
            raise CaseError(f"{case.label}: model.turbulence = 'reference-stress' takes its Reynolds stress from "
                            "reference data; add [reference] data = \"<file or result folder>\" (or pass reference= "
                            "to fvrans.api.solve)")
        stress = reference.require_stress("model.turbulence = 'reference-stress'")
        inj = case.model.injection
        blend = None
        if inj.blend_model != "none":
            from fvrans.models import model_class

            blend = model_class(inj.blend_model).from_case(case, mesh, geom, boundary, wall_distance=wall_distance)
        return cls(case.fluid.density, case.fluid.viscosity, stress, reference.velocity, form=inj.stress_form,
                   cap=inj.eddy_viscosity_cap, blend=blend, blend_share=inj.blend_share, label=reference.label)

    def prepare(self, gradient_of: Callable[[np.ndarray], np.ndarray]) -> None:
        """The strain rate of the reference velocity with the loop's gradient, the optimal eddy
        viscosity and its clipped form."""
        g = gradient_of(self.velocity_ref)
        self.strain = strain_rate(g)
        self.nu_optimal = optimal_eddy_viscosity(g, self.stress)
        nu = np.nan_to_num(self.nu_optimal, nan=0.0)
        self.nu_star = np.clip(nu, 0.0, self.cap * self.nu)
        self.clipped = (~np.isfinite(self.nu_optimal) | (nu != self.nu_star)).astype(float)
        if self.blend is not None:
            self.blend.prepare(gradient_of)

    def _ready(self) -> np.ndarray:
        if self.strain is None:
            raise RuntimeError("ReferenceStress: prepare(gradient_of) must be called before the first iteration "
                               "(the solution loop does so)")
        return self.strain

    # -- state ----------------------------------------------------------------------------
    def initial_values(self) -> dict[str, np.ndarray]:
        return self.blend.initial_values() if self.blend is not None else {}

    def initialise(self, fields: Fields) -> None:
        if self.blend is not None:
            self.blend.initialise(fields)
        else:
            super().initialise(fields)

    # -- what the momentum equation takes -------------------------------------------------
    def implicit_viscosity(self, fields: Fields) -> np.ndarray:
        """The kinematic eddy viscosity taken implicitly (n_cells,)."""
        base = self.nu_star if self.form == "implicit" else np.zeros_like(self.nu_star)
        if self.blend is not None:
            model = self.blend.eddy_viscosity(fields)
            model = np.zeros_like(base) if model is None else np.asarray(model) / self.rho
            base = (1.0 - self.blend_share) * base + self.blend_share * model
        self.nu_implicit[:] = base
        return self.nu_implicit

    def eddy_viscosity(self, fields: Fields) -> np.ndarray | None:
        """rho times the implicit eddy viscosity; None for the explicit form without a blend."""
        self._ready()
        if self.form == "explicit" and self.blend is None:
            return None
        self.mu_t[:] = self.rho * self.implicit_viscosity(fields)
        return self.mu_t

    def wall_eddy_viscosity(self) -> float:
        return 0.0  # the Reynolds stress vanishes on a no-slip wall

    def extra_stress(self, fields: Fields, grad_u: np.ndarray) -> np.ndarray:
        """T = -rho R - 2 rho nu_implicit S(u_ref): what the implicit eddy viscosity does not carry at u_ref."""
        S = self._ready()
        nu = self.implicit_viscosity(fields)
        r, t = self.stress, self.remainder
        t[:, 0] = -self.rho * (r[:, 0] + 2.0 * nu * S[:, 0, 0])
        t[:, 1] = -self.rho * (r[:, 1] + 2.0 * nu * S[:, 0, 1])
        t[:, 2] = -self.rho * (r[:, 2] + 2.0 * nu * S[:, 1, 1])
        return t

    def update(self, fields: Fields, grad_u: np.ndarray, pseudo_time: np.ndarray | None = None) -> list[float]:
        """The blend model's equations (nothing to solve without one)."""
        return self.blend.update(fields, grad_u, pseudo_time) if self.blend is not None else []

    # -- outputs --------------------------------------------------------------------------
    def cell_outputs(self, fields: Fields) -> dict[str, np.ndarray]:
        """The blend model's outputs (its nu_t / nu as ``blend_eddy_viscosity_ratio``), the implicit
        nu_t / nu and where the optimal eddy viscosity was clipped."""
        out: dict[str, np.ndarray] = {}
        if self.blend is not None:
            for k, v in self.blend.cell_outputs(fields).items():
                out["blend_" + k if k == EDDY_VISCOSITY_RATIO else k] = v
        self._ready()
        out[EDDY_VISCOSITY_RATIO] = self.implicit_viscosity(fields) / self.nu
        out[CLIPPED] = self.clipped.copy()
        return out

    def probe_fields(self, fields: Fields) -> dict[str, tuple[np.ndarray, np.ndarray | None]]:
        out = dict(self.blend.probe_fields(fields)) if self.blend is not None else {}
        out[EDDY_VISCOSITY_RATIO] = (self.implicit_viscosity(fields) / self.nu, None)
        return out

    def probe_columns(self, sampled: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        if self.blend is None:
            return {}
        return {k: v for k, v in self.blend.probe_columns(sampled).items() if k != EDDY_VISCOSITY_RATIO}


__all__ = ["CLIPPED", "FORMS", "ReferenceStress"]
