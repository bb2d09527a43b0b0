"""Plots of a run against its reference flow (:mod:`fvrans.reference.diagnostics`), from fields.vtu.

Maps (``field_<name>.png``, zoomed ``field_<name>_zoom.png`` with a map window) of each comparison
array the run wrote, and ``model_departure.png`` for a run whose model was compared with the
reference stresses (an a-priori test): left, the model's eddy viscosity against the optimal one of
the reference, cell by cell (log scales, the line of equality); right, log10(nu_t / nu*) against
the wall distance, where a model departs from the data in the boundary layer.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np
from matplotlib.figure import Figure

from fvrans.post._plot_data import FieldData
from fvrans.post.plots import _title, field_figure, new_figure
from fvrans.reference import diagnostics as D

#: colour-bar label and title name of each comparison map
LABELS = {
    D.VELOCITY_ERROR: ("|u − u_ref| / U [-]", "velocity error against the reference"),
    D.OPTIMAL_RATIO: ("ν* / ν [-] (optimal eddy viscosity)", "optimal eddy viscosity of the reference"),
    D.MISALIGNMENT: ("angle [deg]", "misalignment of reference stress and strain rate"),
    D.NON_EDDY_SHARE: ("|non-eddy part| / |anisotropy| [-]", "share an eddy viscosity cannot carry"),
    D.LOG_RATIO: ("log10(ν_t / ν*) [-]", "model eddy viscosity over the optimal one"),
    D.STRESS_DEPARTURE: ("|D_model − D_ref| / max|D_ref| [-]", "model stress departure from the reference"),
}


def departure_figure(fields: FieldData, title: str | None = None) -> Figure:
    """The model's nu_t / nu against the reference's nu* / nu per cell, and log10(nu_t / nu*) against
    the wall distance (when fields.vtu has ``wall_distance``) or y."""
    fig = new_figure((10.0, 4.2))
    a1, a2 = fig.subplots(1, 2)
    model = np.asarray(fields.data["eddy_viscosity_ratio"], dtype=float)
    opt = np.asarray(fields.data[D.OPTIMAL_RATIO], dtype=float)
    ok = np.isfinite(model) & np.isfinite(opt) & (model > 0) & (opt > 0)
    if ok.any():
        a1.loglog(opt[ok], model[ok], ".", ms=2.5, alpha=0.5, color="tab:blue")
        lo = float(min(opt[ok].min(), model[ok].min()))
        hi = float(max(opt[ok].max(), model[ok].max()))
        a1.loglog([lo, hi], [lo, hi], "k-", lw=1, label="model = reference")
        a1.legend(loc="upper left", fontsize=8)
    a1.set_xlabel("ν* / ν of the reference (optimal eddy viscosity)")
    a1.set_ylabel("ν_t / ν of the model")
    ratio = np.asarray(fields.data[D.LOG_RATIO], dtype=float)
    where = "wall_distance" if "wall_distance" in fields.data else None
    x = np.asarray(fields.data[where], dtype=float) if where else fields.centroids()[:, 1]
    good = np.isfinite(ratio) & np.isfinite(x) & (x > 0)
    if good.any():
        a2.semilogx(x[good], ratio[good], ".", ms=2.5, alpha=0.5, color="tab:red")
    a2.axhline(0.0, color="k", lw=1)
    a2.set_xlabel("wall distance" if where else "y")
    a2.set_ylabel("log10(ν_t / ν*)")
    fig.suptitle(_title(title, "model eddy viscosity against the reference"), fontsize=11)
    return fig


def reference_figures(fields: FieldData, title: str | None = None,
                      window: tuple[float, float, float, float] | None = None,
                      mesh_edges: bool = False) -> Iterator[tuple[str, Figure]]:
    """Yield ``(file name, figure)`` for every comparison array of ``fields`` (see the module docstring)."""
    for q in D.MAPS:
        if q in fields.data:
            yield f"field_{q}.png", field_figure(fields, q, title=title, mesh_edges=mesh_edges, label=LABELS[q])
            if window is not None:
                yield f"field_{q}_zoom.png", field_figure(fields, q, title=title, mesh_edges=mesh_edges,
                                                          window=window, label=LABELS[q])
    if D.LOG_RATIO in fields.data and D.OPTIMAL_RATIO in fields.data and "eddy_viscosity_ratio" in fields.data:
        yield "model_departure.png", departure_figure(fields, title)


__all__ = ["LABELS", "departure_figure", "reference_figures"]
