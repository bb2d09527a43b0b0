"""A run against its reference flow: per-cell maps and per-region figures (fields.vtu and the
``reference_comparison`` section of summary.json).

* Mean-velocity error: e = |u - u_ref| per cell; per region its volume-weighted L2 norm
  sqrt(sum V e^2 / sum V) and its maximum, both over the velocity scale U (the largest reference
  speed unless given).
* The reference stress against the reference strain rate (:mod:`fvrans.reference.stress`): the
  optimal eddy viscosity nu* / nu, the misalignment angle of the anisotropy and the strain rate,
  the share and the components of the part an eddy viscosity cannot carry.
* A model against the reference (a-priori tests, or any turbulent run with reference stresses):
  log10(nu_t / nu*) per cell where both are positive, and the departure of the model's in-plane
  stress deviator from the reference's, |D_model - D_ref| / max |D_ref|; per region the L2 norm and
  maximum of (nu_t - nu*) / max nu* over the cells where nu* is defined and of the stress departure,
  and the median of log10(nu_t / nu*).

Regions: ``all`` (every cell inside the reference data) and the case's ``[reference.regions.<name>]``,
each a box and/or a band of wall distance, intersected with the cells inside the data.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from fvrans.reference.stress import misalignment, non_eddy_share, non_eddy_stress, optimal_eddy_viscosity

#: cell arrays of fields.vtu written by a run with reference data
VELOCITY_ERROR = "reference_velocity_error"
OPTIMAL_RATIO = "optimal_eddy_viscosity_ratio"
MISALIGNMENT = "stress_misalignment"
NON_EDDY_SHARE = "non_eddy_share"
NON_EDDY_XX, NON_EDDY_XY = "non_eddy_stress_xx", "non_eddy_stress_xy"
LOG_RATIO = "eddy_viscosity_log_ratio"
STRESS_DEPARTURE = "stress_departure"
#: the maps drawn from fields.vtu when present (:mod:`fvrans.post.plots`)
MAPS = (VELOCITY_ERROR, OPTIMAL_RATIO, MISALIGNMENT, NON_EDDY_SHARE, LOG_RATIO, STRESS_DEPARTURE)


def region_masks(centres: np.ndarray, inside: np.ndarray, regions: Mapping[str, Any] | None = None,
                 wall_distance: np.ndarray | None = None) -> dict[str, np.ndarray]:
    """``{"all": inside, name: inside & region}``; a region has ``box`` (xmin, xmax, ymin, ymax)
    and/or ``wall_distance`` (dmin, dmax), None for no limit (:class:`fvrans.case.schema.Region`)."""
    c = np.asarray(centres, dtype=np.float64)
    out = {"all": np.asarray(inside, dtype=bool).copy()}
    for name, g in (regions or {}).items():
        m = out["all"].copy()
        if g.box is not None:
            x0, x1, y0, y1 = g.box
            m &= (c[:, 0] >= x0) & (c[:, 0] <= x1) & (c[:, 1] >= y0) & (c[:, 1] <= y1)
        if g.wall_distance is not None:
            if wall_distance is None:
                raise ValueError(f"region {name!r} limits the wall distance, but the mesh has no wall")
            d0, d1 = g.wall_distance
            m &= (wall_distance >= d0) & (wall_distance <= d1)
        out[name] = m
    return out


def _norms(e: np.ndarray, volume: np.ndarray, mask: np.ndarray, scale: float) -> dict[str, Any]:
    ok = mask & np.isfinite(e)
    if not ok.any():
        return {"L2": None, "max": None, "cells": 0}
    v = volume[ok]
    l2 = float(np.sqrt(np.sum(v * e[ok] ** 2) / np.sum(v)))
    return {"L2": l2 / scale, "max": float(np.max(np.abs(e[ok]))) / scale, "cells": int(ok.sum())}


def velocity_error(velocity: np.ndarray, reference: np.ndarray, volume: np.ndarray,
                   masks: Mapping[str, np.ndarray], scale: float | None = None) -> tuple[np.ndarray, dict[str, Any]]:
    """(|u - u_ref| / U per cell, {"scale": U, "regions": {name: {L2, max, cells}}})."""
    e = np.hypot(*(np.asarray(velocity, dtype=np.float64) - np.asarray(reference, dtype=np.float64)).T)
    if scale is None:
        speed = np.hypot(*np.asarray(reference, dtype=np.float64).T)
        scale = float(speed[masks["all"]].max(initial=0.0)) if masks["all"].any() else float(speed.max(initial=0.0))
    scale = scale if scale > 0 else 1.0
    return e / scale, {"scale": scale, "regions": {n: _norms(e, volume, m, scale) for n, m in masks.items()}}


def stress_maps(grad_u: np.ndarray, stress: np.ndarray, nu: float) -> dict[str, np.ndarray]:
    """The reference stress against its strain rate, per cell (NaN where undefined)."""
    rest = non_eddy_stress(grad_u, stress)
    return {
        OPTIMAL_RATIO: optimal_eddy_viscosity(grad_u, stress) / nu,
        MISALIGNMENT: misalignment(grad_u, stress),
        NON_EDDY_SHARE: non_eddy_share(grad_u, stress),
        NON_EDDY_XX: rest[:, 0],
        NON_EDDY_XY: rest[:, 1],
    }


def _deviator(r: np.ndarray) -> np.ndarray:
    """In-plane deviator (xx part, xy part); A : B = 2 (a . b) for two of them."""
    return np.column_stack([0.5 * (r[:, 0] - r[:, 2]), r[:, 1]])


def model_departure(nu_model: np.ndarray, nu_optimal: np.ndarray, model_stress: np.ndarray, stress: np.ndarray,
                    volume: np.ndarray, masks: Mapping[str, np.ndarray]
                    ) -> tuple[dict[str, np.ndarray], dict[str, Any]]:
    """Maps and per-region figures of a model's eddy viscosity and stress against the reference
    (see the module docstring); ``nu_model`` and ``nu_optimal`` kinematic, the stresses per unit mass."""
    nm = np.asarray(nu_model, dtype=np.float64)
    no = np.asarray(nu_optimal, dtype=np.float64)
    with np.errstate(divide="ignore", invalid="ignore"):
        log_ratio = np.where((nm > 0) & (no > 0), np.log10(np.where(nm > 0, nm, 1.0) / np.where(no > 0, no, 1.0)),
                             np.nan)
    dm, dr = _deviator(np.asarray(model_stress)), _deviator(np.asarray(stress))
    diff = np.sqrt(2.0 * np.einsum("ij,ij->i", dm - dr, dm - dr))
    size = np.sqrt(2.0 * np.einsum("ij,ij->i", dr, dr))
    regions: dict[str, Any] = {}
    for name, m in masks.items():
        ok = m & np.isfinite(no)
        nu_scale = float(np.max(np.abs(no[ok]), initial=0.0))
        d_scale = float(np.max(size[m], initial=0.0))
        lr = log_ratio[m & np.isfinite(log_ratio)]
        regions[name] = {
            "eddy_viscosity": _norms(nm - no, volume, ok, nu_scale if nu_scale > 0 else 1.0),
            "stress": _norms(diff, volume, m, d_scale if d_scale > 0 else 1.0),
            "median_log10_ratio": float(np.median(lr)) if len(lr) else None,
            "optimal_eddy_viscosity_max": nu_scale,
        }
    whole = float(np.max(size[masks["all"]], initial=0.0)) if masks["all"].any() else float(size.max(initial=0.0))
    maps = {LOG_RATIO: log_ratio, STRESS_DEPARTURE: diff / (whole if whole > 0 else 1.0)}
    return maps, {"regions": regions}


__all__ = [
    "LOG_RATIO", "MAPS", "MISALIGNMENT", "NON_EDDY_SHARE", "NON_EDDY_XX", "NON_EDDY_XY", "OPTIMAL_RATIO",
    "STRESS_DEPARTURE", "VELOCITY_ERROR", "model_departure", "region_masks", "stress_maps", "velocity_error",
]
