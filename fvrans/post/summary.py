"""The run summary (``summary.json``): outcome, cost, wall forces and zero-shear points."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post.forces import forces_summary
from fvrans.post.residuals import HistoryLike
from fvrans.post.wall import WallData, zero_shear_points
from fvrans.post.writers import to_jsonable


def summary_value(summary: Any, dotted: str, where: str, none_as_nan: bool = False) -> float:
    """A number of a summary.json by dotted path (list entries by index, ``a.0.b``); ``where``
    starts the error messages. A null (a non-finite number written by the run) is NaN with
    ``none_as_nan``, an error otherwise.

    >>> summary_value({"walls": {"w": {"forces": {"Cd": 0.5}}}}, "walls.w.forces.Cd", "s")
    0.5
    """
    node = summary
    done: list[str] = []
    for part in dotted.split("."):
        if isinstance(node, dict) and part in node:
            node = node[part]
        elif isinstance(node, list) and part.lstrip("-").isdigit() and -len(node) <= int(part) < len(node):
            node = node[int(part)]
        else:
            at = ".".join(done) or "the top level"
            if isinstance(node, dict):  # key names only, short ones, a few (no file contents)
                keys = sorted(str(k) for k in node if len(str(k)) <= 40 and str(k).isprintable())
                have = ", ".join(keys[:12]) + (f" and {len(node) - 12} more" if len(node) > 12 else "") or "nothing"
            else:
                have = f"a {type(node).__name__}"
            raise CaseError(f"{where}: no key {part!r} under {at}; there are: {have}")
        done.append(part)
    if node is None and none_as_nan:
        return float("nan")
    if isinstance(node, bool) or not isinstance(node, (int, float)):
        what = "null" if node is None else f"a {type(node).__name__}"
        raise CaseError(f"{where}: {dotted} is {what}, not a number")
    return float(node)


def wall_summary(
    wall: WallData,
    l_ref: float = 1.0,
    flow_direction: Sequence[float] = (1.0, 0.0),
    moment_centre: Sequence[float] = (0.0, 0.0),
) -> dict[str, Any]:
    """Forces, coefficients, zero-shear points and y+ range of one wall patch (plain types)."""
    zs = zero_shear_points(wall)
    yp = wall.y_plus
    forces, _ = forces_summary({wall.patch: wall}, l_ref, flow_direction, moment_centre)
    return {
        "forces": forces[wall.patch].as_dict(),
        "shear_sign_change_x": [p.x for p in zs],
        "shear_sign_change_y": [p.y for p in zs],
        "shear_sign_change_s": [p.s for p in zs],
        "shear_sign_change_kind": [p.kind for p in zs],
        "faces": len(wall),
        "y_plus_max": float(np.max(yp)) if len(yp) else None,
        "y_plus_mean": float(np.mean(yp)) if len(yp) else None,
    }


def build_summary(
    title: str,
    converged: bool,
    iterations: int,
    wall_seconds: float,
    n_cells: int,
    history: HistoryLike | None = None,
    walls: Mapping[str, WallData] | None = None,
    l_ref: float = 1.0,
    flow_direction: Sequence[float] = (1.0, 0.0),
    extra: Mapping[str, Any] | None = None,
    moment_centre: Sequence[float] = (0.0, 0.0),
    groups: Mapping[str, Sequence[str]] | None = None,
    reference_notes: Mapping[str, Any] | None = None,
) -> dict[str, Any]:
    """The summary as a JSON-ready dict (plain floats, ints, strings, lists; NaN/inf as None).

    Keys: ``title``, ``converged``, ``iterations``, ``wall_seconds``, ``n_cells``,
    ``final_residuals`` (name -> last value), ``reference`` (rho (the density of the
    coefficients), mu, u_ref, p_ref, l_ref, flow_direction, flow_angle (degrees), moment_centre,
    plus ``reference_notes`` such as where u_ref came from; when walls are given), ``walls``
    (patch -> :func:`wall_summary`), ``force_groups`` (group -> patches and forces; with
    ``groups``), plus the items of ``extra``.

    >>> build_summary("demo", True, 12, 0.5, 100)["final_residuals"]
    {}
    """
    out: dict[str, Any] = {
        "title": str(title),
        "converged": bool(converged),
        "iterations": int(iterations),
        "wall_seconds": float(wall_seconds),
        "n_cells": int(n_cells),
        "final_residuals": {},
    }
    if history is not None and len(history.rows):
        last = history.rows[-1]
        out["final_residuals"] = {str(n): float(v) for n, v in zip(history.names, last)}
    if walls:
        any_wall = next(iter(walls.values()))
        e = np.asarray(flow_direction, dtype=float) / np.hypot(*flow_direction)
        out["reference"] = {
            "rho": any_wall.rho if any_wall.rho_ref is None else any_wall.rho_ref,
            "mu": any_wall.mu,
            "u_ref": any_wall.u_ref,
            "p_ref": any_wall.p_ref,
            "l_ref": float(l_ref),
            "flow_direction": [float(e[0]), float(e[1])],
            "flow_angle": float(np.degrees(np.arctan2(e[1], e[0]))),
            "moment_centre": [float(moment_centre[0]), float(moment_centre[1])],
            **dict(reference_notes or {}),
        }
        out["walls"] = {name: wall_summary(w, l_ref, flow_direction, moment_centre) for name, w in walls.items()}
        if groups:
            _, per_group = forces_summary(walls, l_ref, flow_direction, moment_centre, groups)
            out["force_groups"] = {g: {"patches": list(groups[g]), "forces": f.as_dict()} for g, f in per_group.items()}
    if extra:
        clash = set(extra) & set(out)
        if clash:
            raise ValueError(f"extra summary key {sorted(clash)[0]!r} would overwrite a standard key")
        out.update(extra)
    return to_jsonable(out)
