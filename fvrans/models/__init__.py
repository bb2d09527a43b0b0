"""Turbulence models below the solution loop, and the registry that builds one from a case.

``[model] turbulence = "<key>"`` selects a class from :data:`MODELS` (bundled models, imported
when first asked for) or one added with :func:`register_model`; :func:`model_for_case` builds
it through its ``from_case``. The interface every model implements is
:class:`fvrans.models.base.TurbulenceModel`.
"""

from __future__ import annotations

import importlib
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.models.base import EDDY_VISCOSITY_RATIO, EddyViscosityModel, TurbulenceModel

#: bundled models: key -> "module:class" (imported on first use)
MODELS: dict[str, str] = {
    "none": "fvrans.models.base:TurbulenceModel",
    "spalart-allmaras": "fvrans.models.spalart_allmaras:SpalartAllmaras",
    "k-omega-sst": "fvrans.models.sst:KOmegaSST",
    "reference-stress": "fvrans.models.injected:ReferenceStress",
}
_ADDED: dict[str, type[TurbulenceModel]] = {}


def register_model(key: str, cls: type[TurbulenceModel]) -> None:
    """Make ``cls`` (a :class:`TurbulenceModel` with ``from_case``) available under ``key``."""
    if not (isinstance(cls, type) and issubclass(cls, TurbulenceModel)):
        raise TypeError(f"register_model({key!r}, ...): give a subclass of fvrans.models.base.TurbulenceModel")
    _ADDED[key] = cls


def model_names() -> list[str]:
    """Every key a case may choose."""
    return [*MODELS, *(k for k in _ADDED if k not in MODELS)]


def model_class(key: str) -> type[TurbulenceModel]:
    """The class registered under ``key``; CaseError listing the keys otherwise."""
    if key in _ADDED:
        return _ADDED[key]
    if key not in MODELS:
        raise CaseError(f"model.turbulence = {key!r} is not a known model; use one of "
                        f"{', '.join(repr(k) for k in model_names())}")
    module, name = MODELS[key].split(":")
    return getattr(importlib.import_module(module), name)


def model_for_case(case: Any, mesh: Any, geom: Any, boundary: Any,
                   wall_distance: np.ndarray | None = None, reference: Any = None) -> TurbulenceModel:
    """The model a case asks for (the laminar base model for ``turbulence = "none"``); ``reference``
    (the run's reference flow on the cells) goes to models that use one."""
    cls = model_class(case.model.turbulence)
    if cls.uses_reference:
        return cls.from_case(case, mesh, geom, boundary, wall_distance=wall_distance, reference=reference)
    return cls.from_case(case, mesh, geom, boundary, wall_distance=wall_distance)


def residual_names(case: Any) -> list[str]:
    """The residual columns of a run of ``case``: u, v, continuity and the model's equations (an
    a-priori run, ``[reference] freeze_velocity``, has only the model's)."""
    names = list(model_class(case.model.turbulence).names_for(case))
    reference = getattr(case, "reference", None)
    if reference is not None and reference.freeze_velocity:
        return names
    return ["u", "v", "continuity", *names]


__all__ = [
    "EDDY_VISCOSITY_RATIO", "MODELS", "EddyViscosityModel", "TurbulenceModel", "model_class", "model_for_case",
    "model_names", "register_model", "residual_names",
]
