"""The plot of the monitored quantities of a run (``monitored.csv``): how each one settled.

Top panel: the distance of every monitored quantity from its last value, over the quantity's
scale (``allowed / iteration_error`` from summary.json's ``monitors``), on a log axis, with the
allowed estimated iteration error as a dashed line; the velocity change (already a change over
the speed scale) is drawn as it is. Below: the values of up to :data:`VALUE_PANELS` quantities
(the first force coefficients and probe values), one small panel each, sharing the iteration axis,
scaled to the last four fifths of the run (the first iterations' swings would hide the settling).
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from fvrans.errors import CaseError
from fvrans.post._plot_data import read_csv_columns, read_summary
from fvrans.post.plots import _title, new_figure

#: panels of raw values below the settling panel
VALUE_PANELS = 3
#: the column of the velocity change (a change per iteration, not a value)
CHANGE_COLUMN = "velocity_change"
#: most columns named in the legend (the rest are drawn, and counted in the legend)
LEGEND_ENTRIES = 12


def _short(name: str, n: int = 28) -> str:
    return name if len(name) <= n else name[: n - 3] + "..."


def monitor_figure(source: str | os.PathLike, summary: Mapping[str, Any] | None = None,
                   title: str | None = None) -> Figure:
    """The figure of ``monitored.csv`` (or the result directory holding it); ``summary``: the
    run's summary.json content (read from beside the table when None)."""
    p = Path(source)
    if p.is_dir():
        p = p / "monitored.csv"
    cols = read_csv_columns(p, required=("iteration",))
    if summary is None:
        summary = read_summary(p.parent / "summary.json")
    it = cols.pop("iteration")
    if not cols:
        raise CaseError(f"{p}: no monitored columns besides 'iteration'; nothing to plot")
    info = summary.get("monitors") if isinstance(summary.get("monitors"), Mapping) else {}
    stopping = summary.get("stopping") if isinstance(summary.get("stopping"), Mapping) else {}
    tol = stopping.get("iteration_error")
    tol = float(tol) if isinstance(tol, (int, float)) and tol > 0 else None
    values = [n for n in cols if n != CHANGE_COLUMN][:VALUE_PANELS]
    fig = new_figure((7.0, 3.2 + 1.5 * len(values)))
    axes = fig.subplots(1 + len(values), 1, sharex=True, height_ratios=[2.2] + [1.0] * len(values),
                        squeeze=False)[:, 0]
    ax = axes[0]
    for k, (name, v) in enumerate(cols.items()):
        if name == CHANGE_COLUMN:
            y = v
        else:
            entry = info.get(name) if isinstance(info.get(name), Mapping) else {}
            allowed = entry.get("allowed")
            scale = float(allowed) / tol if (tol and isinstance(allowed, (int, float)) and allowed > 0) else None
            y = np.abs(v - v[-1]) / (scale or max(float(np.max(np.abs(v))), 1e-300))
        y = np.where(np.isfinite(y) & (y > 0), y, np.nan)
        label = (_short(name) if k < LEGEND_ENTRIES else
                 f"... and {len(cols) - LEGEND_ENTRIES} more" if k == LEGEND_ENTRIES else None)
        ax.plot(it, y, lw=1.2, color=f"C{k % 10}", ls=("-", "--", ":")[(k // 10) % 3], label=label)
    if tol:
        ax.axhline(tol, color="0.3", ls="--", lw=1.0, label=f"allowed iteration error {tol:g}")
    ax.set_yscale("log")
    ax.set_ylabel("|q − q_last| / scale [-]")
    ax.grid(True, which="major", alpha=0.35)
    ax.legend(loc="best", fontsize=8, ncol=2 if len(cols) > 5 else 1)
    if len(cols) > LEGEND_ENTRIES:
        ax.text(0.01, 0.01, "every column: monitored.csv", transform=ax.transAxes, fontsize=7, color="0.35")
    stop = summary.get("stopped_by")
    what = "monitored quantities settling" + (f" (stopped: {stop})" if isinstance(stop, str) else "")
    ax.set_title(_title(title or summary.get("title"), what), fontsize=11)
    for k, name in enumerate(values):
        a = axes[k + 1]
        a.plot(it, cols[name], color=f"C{list(cols).index(name) % 10}", lw=1.3)
        late = cols[name][len(it) // 5:]  # the first iterations' swings would hide the settling
        late = late[np.isfinite(late)]
        if len(late):
            lo, hi = float(late.min()), float(late.max())
            pad = 0.08 * (hi - lo) if hi > lo else 1e-6 * max(abs(hi), 1e-300)
            a.set_ylim(lo - pad, hi + pad)
        a.set_ylabel(_short(name, 18), fontsize=9)
        a.grid(True, alpha=0.3)
        a.ticklabel_format(axis="y", useOffset=False, style="sci", scilimits=(-3, 4))
    axes[-1].set_xlabel("outer iteration")
    if len(it):
        axes[-1].set_xlim(float(np.min(it)), float(max(np.max(it), np.min(it) + 1)))
    return fig


__all__ = ["VALUE_PANELS", "monitor_figure"]
