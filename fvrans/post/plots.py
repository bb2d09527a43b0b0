"""Plots of a result directory as PNG files (matplotlib, Agg canvas; pyplot is never imported).

Every ``*_figure`` function returns a :class:`matplotlib.figure.Figure` attached to its own Agg
canvas, so the global matplotlib state (backend, open figures) of a caller is left alone;
:func:`make_plots` draws all plots of a run and saves them atomically into ``DIR/plots/``.

Non-dimensional groups used in labels (reference values from ``summary.json``):
``Cf = tau_w / (1/2 rho U_ref^2)``, ``Cp = (p - p_ref) / (1/2 rho U_ref^2)``, lengths over
``L_ref``, velocities over ``U_ref``. Law of the wall in wall units: viscous sublayer
``u+ = y+`` and log law ``u+ = ln(y+) / kappa + B`` with kappa = 0.41, B = 5.0 (Coles 1956;
common practice).
"""

from __future__ import annotations

import os
import textwrap
from collections.abc import Callable, Iterator, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import PolyCollection
from matplotlib.colors import Normalize, TwoSlopeNorm
from matplotlib.figure import Figure

from fvrans.errors import CaseError
from fvrans.post._plot_data import (
    MAX_NAME_CHARS,
    MAX_TITLE_CHARS,
    FieldData,
    cap_text,
    read_csv_columns,
    read_fields,
    read_summary,
)
from fvrans.post.outputs import listed_outputs, output_set, recover
from fvrans.post.residuals import RESIDUAL_LABEL, RESIDUAL_NORMALISATION
from fvrans.post.writers import atomic_path, safe_file_name

__all__ = [
    "DPI",
    "FIGSIZE",
    "FieldData",
    "field_figure",
    "make_plots",
    "new_figure",
    "plot_wall_profile",
    "probe_figure",
    "read_fields",
    "residual_figure",
    "result_figures",
    "save_figure",
    "wall_figure",
    "wall_profile_figure",
]

FIGSIZE = (7.0, 4.0)  # inches
#: the sub-folder of a result folder that holds its plots
PLOTS_DIR = "plots"
#: field-map windows less high than this per unit width are drawn with y stretched
THIN_WINDOW = 0.08
DPI = 120
KAPPA = 0.41  # von Karman constant (Coles 1956; common practice)
B_LOG = 5.0  # log-law intercept (Coles 1956; common practice)

#: a reference curve: ``(label, x, y)`` arrays or ``(label, f)`` with ``y = f(x)``
Reference = tuple[str, Any, Any] | tuple[str, Callable[[np.ndarray], Any]]

_WALL_LABELS = {
    "cf": ("Cf", "Cf = τ_w / (½ ρ U_ref²) [-]"),
    "cp": ("Cp", "Cp = (p − p_ref) / (½ ρ U_ref²) [-]"),
    "y_plus": ("y+", "y+ of the wall cell [-]"),
    "tau_w": ("τ_w", "τ_w (units of the case)"),
    "p_wall": ("p", "wall pressure p (units of the case)"),
    "u_tau": ("u_τ", "u_τ (units of the case)"),
}
_ZERO_SHEAR_LABEL = "zero shear (τ_w = 0)"


# ---------------------------------------------------------------------------------------------
def new_figure(size: tuple[float, float] = FIGSIZE) -> Figure:
    """A figure with constrained layout on its own Agg canvas (no pyplot, no global state)."""
    fig = Figure(figsize=size, dpi=DPI, layout="constrained")
    FigureCanvasAgg(fig)
    return fig


def save_figure(fig: Figure, path: str | os.PathLike, within: str | os.PathLike | None = None) -> Path:
    """Save ``fig`` as PNG atomically (temporary file in the same directory, then os.replace);
    ``within``: the folder the file must lie in."""
    target = Path(path)
    with atomic_path(target, suffix=".png", within=within) as tmp:
        fig.savefig(tmp, format="png", dpi=DPI)
    return target


def _title(case_title: str | None, what: str, width: int = 72) -> str:
    """``"<case title>: <what>"``; when longer than ``width`` characters (about 10 per inch of
    figure at size 11) the case title and the subject go on lines of their own, each wrapped.
    The case title is cut to :data:`MAX_TITLE_CHARS` characters."""
    case_title = cap_text(case_title, MAX_TITLE_CHARS) if case_title else case_title
    if not case_title:
        return what[:1].upper() + what[1:]
    text = f"{case_title}: {what}"
    if len(text) <= width:
        return text
    lines = textwrap.wrap(case_title, width, break_on_hyphens=False)
    lines += textwrap.wrap(what, width, break_on_hyphens=False)
    return "\n".join(lines)


def _length_label(axis: str, l_ref: float | None) -> str:
    if l_ref is None:
        return axis
    return f"{axis} / L_ref  (L_ref = {l_ref:g})"


def _num(value: Any, default: float | None) -> float | None:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return default
    return v if np.isfinite(v) else default


# ---------------------------------------------------------------------------------------------
def _residual_columns(source: str | os.PathLike | Mapping[str, Any]) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    if isinstance(source, Mapping):
        cols = {str(k): np.asarray(v, dtype=float).ravel() for k, v in source.items()}
        where = "the residual arrays"
    else:
        p = Path(source)
        if p.is_dir():
            p = p / "residuals.csv"
        cols = read_csv_columns(p)
        where = str(p)
    names = [n for n in cols if n not in ("iteration", "seconds")]
    if not names:
        raise CaseError(f"{where}: no residual columns (only 'iteration'/'seconds'); nothing to plot")
    n = len(cols[names[0]])
    for k in names:
        if len(cols[k]) != n:
            raise CaseError(f"{where}: residual {k!r} has {len(cols[k])} values, {names[0]!r} has {n}")
    it = cols.get("iteration", np.arange(1, n + 1, dtype=float))
    if len(it) != n:
        raise CaseError(f"{where}: 'iteration' has {len(it)} values, the residuals have {n}")
    return it, {k: cols[k] for k in names}


def residual_figure(
    source: str | os.PathLike | Mapping[str, Any], title: str | None = None
) -> Figure:
    """Residual history on a log axis, one line per equation.

    ``source``: ``residuals.csv`` (or the directory holding it) or a mapping name -> values
    with an optional ``iteration`` entry (a ``seconds`` entry is ignored). ``title``: the case
    title. Zero, negative and non-finite values are left out of the log plot.
    """
    it, res = _residual_columns(source)
    fig = new_figure()
    ax = fig.add_subplot()
    marker = "o" if len(it) < 3 else None
    for name, r in res.items():
        y = np.where(np.isfinite(r) & (r > 0), r, np.nan)
        ax.plot(it, y, label=cap_text(name), lw=1.3, marker=marker)
    ax.set_yscale("log")
    ax.set_xlabel("outer iteration")
    ax.set_ylabel(f"{RESIDUAL_LABEL} [-]")
    ax.set_title(_title(title, f"{RESIDUAL_LABEL} per equation"), fontsize=11)
    fig.supxlabel("\n".join(textwrap.wrap(RESIDUAL_NORMALISATION, 120)), fontsize=6.5, color="0.3", ha="left",
                  x=0.01)  # below the axes, with room made by the constrained layout
    ax.grid(True, which="major", alpha=0.35)
    ax.grid(True, which="minor", axis="y", alpha=0.12)
    if len(it):
        ax.set_xlim(float(np.min(it)), float(max(np.max(it), np.min(it) + 1)))
    # the first iterations can hold round-off-sized values (e.g. a zero cross-flow start) that
    # would stretch the log axis over many empty decades: scale to the rest of the history
    later = np.stack(list(res.values()))[:, 2:] if len(it) > 5 else np.stack(list(res.values()))
    pos = later[np.isfinite(later) & (later > 0)]
    if len(pos):
        ax.set_ylim(bottom=float(pos.min()) / 3.0)
    if len(res) > 1:
        ax.legend(loc="best", fontsize=9)
    return fig


# ---------------------------------------------------------------------------------------------
def _choose_along(cols: Mapping[str, np.ndarray], along: str) -> str:
    if along in ("x", "s"):
        return along
    if along != "auto":
        raise CaseError(f"wall plot: along={along!r}; use 'x', 's' or 'auto'")
    tx = cols.get("tx")
    if tx is None or len(tx) == 0:
        return "x"
    # a wall with a good part running across the x direction (a vertical side) is plotted
    # against the arc length, otherwise its points pile up on a few x values
    return "s" if np.mean(np.abs(tx) < 0.5) > 0.2 else "x"


def _reference_curves(
    refs: Sequence[Reference], coord: np.ndarray, where: str
) -> list[tuple[str, np.ndarray, np.ndarray]]:
    out = []
    for k, ref in enumerate(refs):
        if not isinstance(ref, (tuple, list)) or len(ref) not in (2, 3):
            raise CaseError(f"{where}: reference {k} must be (label, x, y) or (label, function of x)")
        label = str(ref[0])
        if len(ref) == 2:
            f = ref[1]
            if not callable(f):
                raise CaseError(f"{where}: reference {label!r}: the second item must be a function of x")
            lo, hi = (float(np.nanmin(coord)), float(np.nanmax(coord))) if len(coord) else (0.0, 1.0)
            x = np.linspace(lo, hi, 400)
            with np.errstate(all="ignore"):
                y = np.broadcast_to(np.asarray(f(x), dtype=float), x.shape).copy()
        else:
            x = np.asarray(ref[1], dtype=float).ravel()
            y = np.asarray(ref[2], dtype=float).ravel()
            if len(x) != len(y):
                raise CaseError(f"{where}: reference {label!r} has {len(x)} x values and {len(y)} y values")
        ok = np.isfinite(x) & np.isfinite(y)
        out.append((label, x[ok], y[ok]))
    return out


def _wall_range(coord: np.ndarray, val: np.ndarray, axis: str = "x", scale: float = 1.0
                ) -> tuple[float, float, str]:
    """Vertical range of a wall plot and a note on what it leaves out.

    Singular points at the ends of a wall (a leading edge, a corner) can rise far above the rest
    and flatten everything else: when the values within 2 % of the wall's length from its ends
    reach more than 1.5 times the range of the rest, the range is that of the rest (plus half of
    it) and the note names the extreme value and where it is.
    """
    ok = np.isfinite(val) & np.isfinite(coord)
    c, v = coord[ok], val[ok]
    if not len(v):
        return 0.0, 1.0, ""
    lo, hi = float(v.min()), float(v.max())
    span = float(c.max() - c.min())
    inner = (c > c.min() + 0.02 * span) & (c < c.max() - 0.02 * span)
    if inner.sum() < 10 or span <= 0:
        return lo, hi, ""
    ilo, ihi = float(v[inner].min()), float(v[inner].max())
    ilo, ihi = min(ilo, 0.0) if lo < 0 <= ilo else ilo, ihi
    r = max(ihi - ilo, 1e-300)
    if hi - lo <= 1.5 * r:
        return lo, hi, ""
    new_lo = lo if lo >= ilo - 0.5 * r else ilo - 0.5 * r
    new_hi = hi if hi <= ihi + 0.5 * r else ihi + 0.5 * r
    notes = []
    if hi > new_hi:
        k = int(np.argmax(v))
        notes.append(f"max {v[k]:.3g} at {axis} = {c[k] * scale:.3g} (off scale)")
    if lo < new_lo:
        k = int(np.argmin(v))
        notes.append(f"min {v[k]:.3g} at {axis} = {c[k] * scale:.3g} (off scale)")
    return new_lo, new_hi, "; ".join(notes)


def wall_figure(
    wall: str | os.PathLike | Mapping[str, Any],
    quantity: str = "cf",
    *,
    title: str | None = None,
    patch: str | None = None,
    zero_shear: Sequence[float] = (),
    references: Sequence[Reference] = (),
    l_ref: float | None = None,
    along: str = "auto",
) -> Figure:
    """A wall quantity (``cf``, ``cp`` or another column of ``wall/<patch>.csv``) along a wall.

    The horizontal axis is x (or the arc length s when ``along="s"``, or with ``"auto"`` when a
    fifth or more of the wall runs across x), divided by ``l_ref`` when given. ``zero_shear``:
    positions (x, or s along s) of sign changes of the wall shear stress, drawn as vertical
    lines. ``references``: ``(label, x, y)`` arrays or ``(label, f)`` with ``y = f(x)``, x in
    the units of the wall table (the function is evaluated on 400 points over the wall).
    """
    if isinstance(wall, Mapping):
        cols = {str(k): np.asarray(v, dtype=float).ravel() for k, v in wall.items()}
        where = f"wall data {patch!r}" if patch else "wall data"
    else:
        where = str(wall)
        cols = read_csv_columns(wall)
        patch = patch or Path(wall).stem
    quantity = quantity.lower()
    along = _choose_along(cols, along)
    missing = [c for c in (along, quantity) if c not in cols]
    if missing:
        raise CaseError(f"{where}: column(s) {', '.join(missing)} missing; it has {', '.join(cols)}")
    coord, val = cols[along], cols[quantity]
    seg = cols.get("segment", np.zeros(len(coord)))
    scale = 1.0 / l_ref if l_ref else 1.0
    short, ylabel = _WALL_LABELS.get(quantity, (quantity, quantity))

    fig = new_figure()
    ax = fig.add_subplot()
    if quantity == "cf":
        ax.axhline(0.0, color="0.55", lw=0.8, zorder=1)
    first = True
    for sg in np.unique(seg):
        idx = np.nonzero(seg == sg)[0]
        ax.plot(coord[idx] * scale, val[idx], color="C0", lw=1.5, marker="." if len(coord) <= 60 else None,
                ms=4, label="computed" if first else None, zorder=3)
        first = False
    axis = ("x" if along == "x" else "s") + ("/L_ref" if l_ref else "")
    lo, hi, clipped = _wall_range(coord, val, axis, scale)
    for k, (label, x, y) in enumerate(_reference_curves(references, coord, where)):
        # dashed and on top: a reference the computation lies on stays visible
        ax.plot(x * scale, y, color=f"C{k + 1}", lw=1.4, ls=("--", "-.", ":")[k % 3], label=cap_text(label),
                zorder=4)
        if len(y) > 4:  # correlations can be singular at a leading edge: don't let that set the range
            lo, hi = min(lo, float(np.percentile(y, 2))), max(hi, float(np.percentile(y, 98)))
    if quantity == "cf":
        lo, hi = min(lo, 0.0), max(hi, 0.0)
    pad = 0.06 * (hi - lo) if hi > lo else max(abs(hi), 1.0) * 0.1
    ax.set_ylim(lo - pad, hi + pad)
    zs = sorted(float(v) * scale for v in zero_shear)
    for k, z in enumerate(zs):
        ax.axvline(z, color="0.25", ls=":", lw=1.2, label=_ZERO_SHEAR_LABEL if k == 0 else None, zorder=2)
    xlabel = _length_label("x" if along == "x" else "s (arc length along the wall)", l_ref)
    ax.set_xlabel(f"{xlabel}\n{clipped}" if clipped else xlabel)
    ax.set_ylabel(ylabel)
    ax.set_title(_title(title, f"{short} along {cap_text(patch)}" if patch else f"{short} along the wall"),
                 fontsize=11)
    ax.grid(True, alpha=0.3)
    _zero_shear_labels(ax, zs)
    if len(ax.get_legend_handles_labels()[1]) > 1:
        ax.legend(loc="best", fontsize=9)
    return fig


def _zero_shear_labels(ax: Any, positions: Sequence[float], rows: int = 3) -> None:
    """Write each zero-shear position at the top of the axes, beside its line. A label that would
    overlap one already written (measured in display units) goes one row lower; when ``rows``
    rows are taken there, it is left out (its line stays)."""
    if not positions:
        return
    fig = ax.figure
    ax.set_xlim(ax.get_xlim())  # freeze the limits the labels are placed against
    fig.draw_without_rendering()  # the constrained layout: the axes at their final size
    renderer = fig.canvas.get_renderer()
    taken: list[list[Any]] = [[] for _ in range(rows)]
    x0, x1 = ax.get_xlim()
    for z in positions:
        if not x0 <= z <= x1:
            continue
        for row in range(rows):
            text = ax.annotate(f"{z:.3g}", (z, 1.0), xycoords=("data", "axes fraction"),
                               xytext=(2, -10 - 10 * row), textcoords="offset points", fontsize=8, color="0.25")
            box = text.get_window_extent(renderer).expanded(1.15, 1.0)
            if not any(box.overlaps(b) for b in taken[row]):
                taken[row].append(box)
                break
            text.remove()


# ---------------------------------------------------------------------------------------------
def _field_values(fields: FieldData, quantity: str, reference: Mapping[str, Any] | None) -> tuple[np.ndarray, str, str]:
    """(values, colour-bar label, short name) of a field quantity, non-dimensional if possible."""
    ref = reference or {}
    u_ref = _num(ref.get("u_ref"), None)
    rho = _num(ref.get("rho"), None)
    p_ref = _num(ref.get("p_ref"), 0.0)
    if quantity in ("velocity", "velocity_magnitude"):
        u = _get(fields, "velocity")
        mag = np.hypot(u[:, 0], u[:, 1]) if u.ndim == 2 else np.abs(u)
        if u_ref:
            return mag / u_ref, "|U| / U_ref [-]", "velocity magnitude"
        return mag, "|U| (units of the case)", "velocity magnitude"
    if quantity == "pressure":
        p = _get(fields, "pressure")
        if u_ref and rho:
            return (p - p_ref) / (0.5 * rho * u_ref**2), "Cp = (p − p_ref) / (½ ρ U_ref²) [-]", "pressure"
        return p, "p (units of the case)", "pressure"
    if quantity == "eddy_viscosity_ratio":
        return _get(fields, "eddy_viscosity_ratio"), "ν_t / ν [-]", "eddy-viscosity ratio"
    a = _get(fields, quantity)
    if a.ndim == 2:
        return np.hypot(a[:, 0], a[:, 1]), f"|{quantity}|", quantity
    return a, quantity, quantity


def _get(fields: FieldData, name: str) -> np.ndarray:
    if name not in fields.data:
        raise CaseError(f"{fields.source}: no cell data {name!r}; it has {', '.join(fields.data) or 'none'}")
    a = np.asarray(fields.data[name], dtype=float)
    return a[:, 0] if a.ndim == 2 and a.shape[1] == 1 else a


#: colour limits: the area-weighted percentiles kept in colour, and how much wider the full range
#: must be for the map to be clipped to them (a singular point, a stagnation point)
COLOUR_PERCENTILES = (1.0, 99.0)
CLIP_WHEN_WIDER = 1.5


def _weighted_percentile(values: np.ndarray, weights: np.ndarray, q: float) -> float:
    order = np.argsort(values, kind="stable")
    v, w = values[order], weights[order]
    cw = np.cumsum(w)
    return float(np.interp(q / 100.0 * cw[-1], cw - 0.5 * w, v))


def _colour_limits(values: np.ndarray, weights: np.ndarray | None = None) -> tuple[float, float, str, str]:
    """Colour range, colour-bar ``extend`` mode and a note on what the colours leave out.

    The full range, unless a small part of the map holds values far outside the rest (a leading
    edge, a corner, a stagnation point) that would wash out everything else: when the full range
    exceeds :data:`CLIP_WHEN_WIDER` times the range between the :data:`COLOUR_PERCENTILES` of the
    values weighted by cell area (what the eye sees; clustered small cells at a singular point
    count little), the colours span those percentiles, the bar gets arrows and the note states
    both ranges.
    """
    ok = np.isfinite(values)
    finite = values[ok]
    if not len(finite):
        return 0.0, 1.0, "neither", ""
    lo, hi = float(finite.min()), float(finite.max())
    if len(finite) < 50:
        return lo, hi, "neither", ""
    w = np.ones(len(finite)) if weights is None else np.maximum(np.asarray(weights, float)[ok], 0.0)
    if not w.sum() > 0:
        w = np.ones(len(finite))
    plo, phi = (_weighted_percentile(finite, w, q) for q in COLOUR_PERCENTILES)
    if phi <= plo or hi - lo <= CLIP_WHEN_WIDER * (phi - plo):
        return lo, hi, "neither", ""
    pad = 0.05 * (phi - plo)
    clo, chi = max(lo, plo - pad), min(hi, phi + pad)
    extend = {(True, True): "both", (True, False): "min", (False, True): "max"}.get((lo < clo, hi > chi), "neither")
    p0, p1 = COLOUR_PERCENTILES
    note = (f"colours clipped to {clo:.3g} .. {chi:.3g} (area percentiles {p0:g}-{p1:g}); "
            f"values reach {lo:.3g} .. {hi:.3g}")
    return clo, chi, extend, note


def _field_layout(w: float, h: float) -> tuple[tuple[float, float], str, tuple[float, float]]:
    """Figure size, colour-bar location and approximate axes size (inches) for a w x h window."""
    a = h / w if w > 0 else 1.0
    if a < 0.6:  # wide: colour bar below, full width for the map
        ax_w = 6.3
        ax_h = ax_w * a
        if ax_h > 3.4:
            ax_h, ax_w = 3.4, 3.4 / a
        return (max(ax_w + 0.9, 5.0), ax_h + 1.45), "bottom", (ax_w, ax_h)
    ax_h = 4.6
    ax_w = ax_h / a
    if ax_w > 5.6:
        ax_w, ax_h = 5.6, 5.6 * a
    return (ax_w + 1.9, ax_h + 1.0), "right", (ax_w, ax_h)


def _vertex_values(fields: FieldData, values: np.ndarray) -> np.ndarray:
    """Cell values averaged to the mesh points, weighted by inverse distance to the cell
    centroids (common practice); points used by no cell get 0."""
    c = fields.centroids()
    cell_ids, point_ids = [], []
    start = 0
    for b in fields.blocks:
        m, k = b.shape
        cell_ids.append(np.repeat(np.arange(start, start + m), k))
        point_ids.append(b.ravel())
        start += m
    ci, pi = np.concatenate(cell_ids), np.concatenate(point_ids)
    d = np.hypot(*(fields.points[pi] - c[ci]).T)
    w = 1.0 / np.maximum(d, 1e-300)
    n = len(fields.points)
    wsum = np.bincount(pi, weights=w, minlength=n)
    out = np.zeros((n,) + values.shape[1:])
    for j in range(values.shape[1] if values.ndim == 2 else 1):
        v = values[:, j] if values.ndim == 2 else values
        acc = np.bincount(pi, weights=w * v[ci], minlength=n)
        col = np.divide(acc, wsum, out=np.zeros(n), where=wsum > 0)
        if values.ndim == 2:
            out[:, j] = col
        else:
            out[:] = col
    return out


def _stretch_factor(w: float, h: float) -> float:
    """1 for windows at least :data:`THIN_WINDOW` high per unit width; otherwise the factor, rounded
    to one significant digit, that shows the window about 0.35 times as high as wide."""
    if h >= THIN_WINDOW * w:
        return 1.0
    return float(f"{0.35 * w / h:.1g}")


def _draw_streamlines(ax: Any, fields: FieldData, window: tuple[float, float, float, float],
                      scale: float, axes_inches: tuple[float, float], stretch: float = 1.0) -> None:
    """Streamlines of the cell velocities on a regular grid over ``window``.

    The velocities are averaged to the mesh points and interpolated linearly on a fan
    triangulation of the cells (matplotlib.tri); grid points outside every cell are masked, so
    streamlines stop at walls and bodies. (scipy's griddata on the cell centroids was measured
    at several seconds for 4000 cells: its point location falls back to a search of all
    triangles for every grid point outside the centroids' hull, i.e. the whole wall band.)
    """
    from matplotlib.tri import LinearTriInterpolator, Triangulation

    u = _get(fields, "velocity")
    if u.ndim != 2:
        return
    x0, x1, y0, y1 = window
    w, h = x1 - x0, (y1 - y0) * stretch
    n_long = 260
    nx = max(int(n_long * min(1.0, w / h)), 24)
    ny = max(int(n_long * min(1.0, h / w)), 24)
    xs, ys = np.linspace(x0, x1, nx), np.linspace(y0, y1, ny)
    xg, yg = np.meshgrid(xs, ys)
    try:
        tri = Triangulation(fields.points[:, 0], fields.points[:, 1], fields.triangles())
        finder = tri.get_trifinder()
    except (RuntimeError, ValueError):  # overlapping triangles (non-convex cells): no streamlines
        return
    uv = _vertex_values(fields, u[:, :2])
    U = LinearTriInterpolator(tri, uv[:, 0], trifinder=finder)(xg, yg)
    V = LinearTriInterpolator(tri, uv[:, 1], trifinder=finder)(xg, yg)
    if not np.any(np.ma.filled(np.hypot(U, V), 0.0) > 0):
        return
    # streamplot puts about 30 * density lines across the axes: aim at ~0.13 in between lines,
    # and at least 6 lines across a slender domain
    spacing = 0.13
    density = (max(axes_inches[0] / (30 * spacing), 0.2), max(axes_inches[1] / (30 * spacing), 0.2))
    ax.streamplot(xs * scale, ys * scale, U, V, density=density, color="white", linewidth=0.6,
                  arrowsize=0.6, broken_streamlines=True, zorder=2)  # below the axes frame (2.5)


def field_figure(
    fields: str | os.PathLike | FieldData,
    quantity: str = "velocity",
    *,
    title: str | None = None,
    reference: Mapping[str, Any] | None = None,
    mesh_edges: bool = False,
    streamlines: bool = False,
    window: tuple[float, float, float, float] | None = None,
    cmap: str | None = None,
    label: tuple[str, str] | None = None,
) -> Figure:
    """A cell-data map on the mesh cells (flat colour per cell), equal aspect, with colour bar.

    Lengths are in the units of the case (as in the wall plots of a run and the overlays of
    ``fvrans compare``). ``quantity``: ``"velocity"`` (magnitude, over U_ref), ``"pressure"``
    (as Cp), ``"eddy_viscosity_ratio"`` or the name of any cell array (vectors as magnitudes).
    ``reference``: the ``reference`` block of summary.json (rho, u_ref, p_ref) for
    non-dimensional values; without it
    values are in the units of the case. ``window``: (xmin, xmax, ymin, ymax) in case units to
    zoom in; a window less high than :data:`THIN_WINDOW` times its width (a boundary layer) is
    drawn with y stretched by a round factor, named in the y label. ``streamlines``: cell
    velocities averaged to the mesh points, interpolated linearly on a regular grid (points
    outside the cells masked), drawn with ``streamplot``. ``label``: ``(colour-bar label, title name)``
    text for a quantity of another module (default: the quantity's name).
    """
    if not isinstance(fields, FieldData):
        fields = read_fields(fields)
    values, bar_label, name = _field_values(fields, quantity, reference)
    if label is not None:
        bar_label, name = label
    label = bar_label
    l_ref = None  # lengths in the units of the case, like the wall plots and the overlays of fvrans compare
    scale = 1.0
    x0, x1, y0, y1 = window if window is not None else fields.bounds()
    if not (x1 > x0 and y1 > y0):
        raise CaseError(f"{fields.source}: empty plot window {(x0, x1, y0, y1)}; give xmin < xmax, ymin < ymax")
    stretch = _stretch_factor(x1 - x0, y1 - y0)
    size, cbar_loc, ax_in = _field_layout(x1 - x0, (y1 - y0) * stretch)
    title_text = _title(title, name)
    c = fields.centroids()
    seen = (c[:, 0] >= x0) & (c[:, 0] <= x1) & (c[:, 1] >= y0) & (c[:, 1] <= y1)
    shown = seen if seen.any() else np.ones(len(values), dtype=bool)
    lo, hi, extend, clip_note = _colour_limits(values[shown], fields.areas()[shown])  # colours for what is shown
    if clip_note:  # under the colour bar, wrapped to its length
        clip_note = "\n".join(textwrap.wrap(clip_note, int(9.5 * size[0]) if cbar_loc == "bottom" else 34))
    extra_lines = title_text.count("\n") + (clip_note.count("\n") + 1 if clip_note and cbar_loc == "bottom" else 0)
    size = (size[0], size[1] + 0.25 * extra_lines)  # room for a wrapped title and the clipping note
    fig = new_figure(size)
    ax = fig.add_subplot()
    polys = [p * scale for p in fields.polygons()]
    if hi - lo <= 1e-9 * max(abs(lo), abs(hi)) or hi <= lo:  # a uniform field: a readable band around it
        half = max(0.05 * abs(lo), 1e-12)
        lo, hi, extend = lo - half, hi + half, "neither"
    if min(-lo, hi) > 0.1 * (hi - lo):  # clearly of both signs: diverging colours, white at zero
        norm: Any = TwoSlopeNorm(vcenter=0.0, vmin=lo, vmax=hi)
        default_cmap = "RdBu_r"
    else:
        norm = Normalize(vmin=lo, vmax=hi)
        default_cmap = "viridis"
    coll = PolyCollection(polys, array=values, cmap=cmap or default_cmap, norm=norm, antialiased=mesh_edges,
                          zorder=1)
    if mesh_edges:
        coll.set_edgecolor((0.5, 0.5, 0.5, 0.7))  # visible on dark and on light colours
        coll.set_linewidth(0.3)
    else:
        coll.set_edgecolor("face")
        coll.set_linewidth(0.0)
    ax.add_collection(coll)
    if streamlines and "velocity" in fields.data:
        _draw_streamlines(ax, fields, (x0, x1, y0, y1), scale, ax_in, stretch)
    ax.set_xlim(x0 * scale, x1 * scale)
    ax.set_ylim(y0 * scale, y1 * scale)
    ax.set_aspect(stretch)
    ax.set_xlabel(_length_label("x", l_ref))
    ylabel = _length_label("y", l_ref) if l_ref is None else "y / L_ref"
    ax.set_ylabel(ylabel if stretch == 1.0 else f"{ylabel}\n(y stretched {stretch:g}×)")
    ax.set_title(title_text, fontsize=11)
    if clip_note:
        label = f"{label}\n{clip_note}"
    kw: dict[str, Any] = {"location": cbar_loc, "label": label, "extend": extend}
    if cbar_loc == "bottom":
        kw.update(aspect=45, fraction=0.08, pad=0.02)
    else:
        kw.update(aspect=30, fraction=0.05, pad=0.02)
    cbar = fig.colorbar(coll, ax=ax, **kw)
    if hasattr(cbar.formatter, "set_useOffset"):
        cbar.formatter.set_useOffset(False)
    return fig


# ---------------------------------------------------------------------------------------------
def wall_profile_figure(
    y_plus: Any,
    u_plus: Any,
    *,
    label: str = "computed",
    title: str | None = None,
    kappa: float = KAPPA,
    b: float = B_LOG,
) -> Figure:
    """A velocity profile in wall units on a semilog axis with the law of the wall.

    Drawn: the profile, the viscous sublayer ``u+ = y+`` (up to y+ = 15) and the log law
    ``u+ = ln(y+) / kappa + b`` (from y+ = 5); kappa = 0.41, b = 5.0 (Coles 1956; common
    practice). Points with y+ <= 0 cannot be shown on the log axis and are left out.
    """
    yp = np.asarray(y_plus, dtype=float).ravel()
    up = np.asarray(u_plus, dtype=float).ravel()
    if len(yp) != len(up):
        raise CaseError(f"wall profile: {len(yp)} y+ values but {len(up)} u+ values")
    ok = np.isfinite(yp) & np.isfinite(up) & (yp > 0)
    yp, up = yp[ok], up[ok]
    order = np.argsort(yp)
    yp, up = yp[order], up[order]
    y_lo = min(float(yp.min()) if len(yp) else 1.0, 1.0) * 0.8
    y_hi = max(float(yp.max()) if len(yp) else 100.0, 100.0) * 1.25
    fig = new_figure()
    ax = fig.add_subplot()
    ax.plot(yp, up, color="C0", lw=1.5, marker="o" if len(yp) <= 40 else None, ms=3.5, label=cap_text(label),
            zorder=3)
    yl = np.geomspace(y_lo, min(15.0, y_hi), 100)
    ax.plot(yl, yl, color="C1", ls="--", lw=1.3, label="u+ = y+", zorder=2)
    yg = np.geomspace(max(5.0, y_lo), y_hi, 100)
    ax.plot(yg, np.log(yg) / kappa + b, color="C2", ls="-.", lw=1.3,
            label=f"u+ = ln(y+) / {kappa:g} + {b:g}", zorder=2)
    ax.set_xscale("log")
    ax.set_xlim(y_lo, y_hi)
    top = max(float(up.max()) if len(up) else 0.0, float(np.log(y_hi) / kappa + b))
    ax.set_ylim(0.0, 1.08 * top)
    ax.set_xlabel("y+ = y u_τ / ν [-]")
    ax.set_ylabel("u+ = u / u_τ [-]")
    ax.set_title(_title(title, "velocity profile in wall units"), fontsize=11)
    ax.grid(True, which="major", alpha=0.35)
    ax.grid(True, which="minor", axis="x", alpha=0.12)
    ax.legend(loc="upper left", fontsize=9)
    return fig


def plot_wall_profile(
    y_plus: Any, u_plus: Any, path: str | os.PathLike | None = None, **kwargs: Any
) -> Figure:
    """:func:`wall_profile_figure`, saved as PNG to ``path`` when given; returns the figure."""
    fig = wall_profile_figure(y_plus, u_plus, **kwargs)
    if path is not None:
        save_figure(fig, path)
    return fig


# ---------------------------------------------------------------------------------------------
def probe_figure(
    probe: str | os.PathLike | Mapping[str, Any],
    quantities: Sequence[str] = ("u", "v"),
    *,
    name: str | None = None,
    title: str | None = None,
    reference: Mapping[str, Any] | None = None,
) -> Figure:
    """Quantities along a line probe (``profiles/<name>.csv``: columns s, x, y, u, v, p, ...), one
    line each, labelled with the quantity and the probe's name; by default u and v.

    Drawn against s, the distance from the probe's start; a probe running more across y than
    along x gets s on the vertical axis (a profile across a layer reads bottom to top). With
    ``reference`` (summary.json's block) velocities are divided by U_ref.
    """
    if isinstance(quantities, str):
        quantities = (quantities,)
    if isinstance(probe, Mapping):
        cols = {str(k): np.asarray(v, dtype=float).ravel() for k, v in probe.items()}
        where = f"probe {name!r}" if name else "probe data"
    else:
        where = str(probe)
        cols = read_csv_columns(probe, required=("s", "x", "y"))
        name = name or Path(probe).stem
    missing = [q for q in ("s", "x", "y", *quantities) if q not in cols]
    if missing:
        raise CaseError(f"{where}: no column(s) {', '.join(missing)}; it has {', '.join(cols)}")
    s_, x, y = cols["s"], cols["x"], cols["y"]
    u_ref = _num((reference or {}).get("u_ref"), None)
    velocity = all(q in ("u", "v") for q in quantities)
    if velocity:
        label = "velocity / U_ref [-]" if u_ref else "velocity (units of the case)"
    elif len(quantities) == 1:
        q = quantities[0]
        label = {"eddy_viscosity_ratio": "ν_t / ν [-]", "p": "p (units of the case)",
                 "nu_tilde": "ν̃ (units of the case)"}.get(q, q)
    else:
        label = ", ".join(quantities)
    vertical = len(x) > 1 and abs(y[-1] - y[0]) > abs(x[-1] - x[0])
    where_text = f" from ({x[0]:.4g}, {y[0]:.4g}) to ({x[-1]:.4g}, {y[-1]:.4g})" if len(x) else ""
    s_label = f"s, distance along the probe{where_text}"
    fig = new_figure((5.4, 5.0) if vertical else FIGSIZE)
    ax = fig.add_subplot()
    marker = "." if len(s_) <= 60 else None
    for k, q in enumerate(quantities):
        val = cols[q] / u_ref if (velocity and u_ref) else cols[q]
        xy = (val, s_) if vertical else (s_, val)
        ax.plot(*xy, color=f"C{k}", lw=1.5, ls=("-", "--", "-.", ":")[k % 4], marker=marker, ms=4,
                label=f"{cap_text(q)}, probe {cap_text(name)}" if name else cap_text(q))
    if velocity or len(quantities) > 1:
        (ax.axvline if vertical else ax.axhline)(0.0, color="0.55", lw=0.8, zorder=1)
    lim = (float(s_.min()), float(s_.max())) if len(s_) > 1 else (0.0, 1.0)
    if vertical:
        ax.set_xlabel(label)
        ax.set_ylabel(s_label)
        ax.set_ylim(*lim)
    else:
        ax.set_xlabel(s_label)
        ax.set_ylabel(label)
        ax.set_xlim(*lim)
    what = ", ".join(quantities)
    what = cap_text(what, 2 * MAX_NAME_CHARS)
    ax.set_title(_title(title, f"{what} along probe {cap_text(name)!r}" if name else f"{what} along a probe",
                        width=int(10.5 * fig.get_figwidth())), fontsize=11)
    ax.grid(True, alpha=0.3)
    ax.legend(loc="best", fontsize=9)
    return fig


# ---------------------------------------------------------------------------------------------
def _check_references(references: Mapping[str, Any] | None, walls: Sequence[str], where: Path) -> None:
    for patch, by_q in (references or {}).items():
        if patch not in walls:
            raise CaseError(
                f"{where}: references given for {patch!r}, which is not a wall of this run; "
                f"walls: {', '.join(walls) or 'none'}"
            )
        if not isinstance(by_q, Mapping):
            raise CaseError(f"references[{patch!r}] must map 'cf'/'cp' to a list of reference curves")
        bad = [q for q in by_q if str(q).lower() not in ("cf", "cp")]
        if bad:
            raise CaseError(f"references[{patch!r}]: quantity {bad[0]!r}; use 'cf' or 'cp'")


def result_figures(
    result_dir: str | os.PathLike,
    references: Mapping[str, Mapping[str, Sequence[Reference]]] | None = None,
    *,
    mesh_edges: bool = False,
    streamlines: bool = True,
    window: Sequence[float] | None = None,
) -> Iterator[tuple[str, Figure]]:
    """Yield ``(file name, figure)`` for every plot the files of ``result_dir`` allow.

    ``window`` (xmin, xmax, ymin, ymax), or else the ``map_window`` of summary.json (the case's
    ``output.map_window``), adds zoomed maps ``field_<quantity>_zoom.png``.

    ``residuals.png``; ``monitored.png`` (:mod:`fvrans.post.monitor_plot`); ``wall_<patch>_cf.png``
    and ``wall_<patch>_cp.png`` per wall table, with the zero-shear points of summary.json and the
    curves of ``references[patch]["cf" | "cp"]`` (see :func:`wall_figure`); ``field_velocity.png``
    (with streamlines), ``field_pressure.png`` and ``field_eddy_viscosity_ratio.png`` (when
    present) from fields.vtu; ``profile_<name>.png`` for each ``profiles/<name>.csv`` with
    ``y_plus`` and ``u_plus`` columns, ``probe_<name>.png`` (u and v along the probe) for each
    line-probe table. Input problems are checked
    before the first figure is made.
    """
    rd = Path(result_dir)
    if not rd.is_dir():
        raise CaseError(f"{rd}: no such result directory; give the --out directory of a run")
    summary = read_summary(rd / "summary.json")
    title = summary.get("title") if isinstance(summary.get("title"), str) else None
    reference = summary.get("reference") if isinstance(summary.get("reference"), Mapping) else None
    l_ref = None  # x in the units of the case in every plot of a run, as in fvrans compare's overlays
    walls_info = summary.get("walls") if isinstance(summary.get("walls"), Mapping) else {}
    wall_files = sorted((rd / "wall").glob("*.csv")) if (rd / "wall").is_dir() else []
    names = _patch_of_file(walls_info)
    _check_references(references, [names.get(p.stem, p.stem) for p in wall_files], rd)
    profile_files = sorted((rd / "profiles").glob("*.csv")) if (rd / "profiles").is_dir() else []
    if window is None and summary.get("map_window") is not None:
        window = summary["map_window"]
    if window is not None:
        window = _check_window(window, rd)
    have_res = (rd / "residuals.csv").is_file()
    have_fields = (rd / "fields.vtu").is_file()
    if not (have_res or have_fields or wall_files or profile_files):
        raise CaseError(
            f"{rd}: no result files to plot (residuals.csv, fields.vtu, wall/*.csv, profiles/*.csv); "
            "give the --out directory of a run"
        )
    return _result_figures(rd, title, reference, l_ref, walls_info, wall_files, profile_files, have_res,
                           have_fields, references or {}, mesh_edges, streamlines, window)


def _patch_of_file(walls_info: Mapping[str, Any]) -> dict[str, str]:
    """File stem -> patch name of the walls of summary.json (a name mapped to a safe file name by
    :func:`fvrans.post.filenames.safe_file_name` is shown as given)."""
    return {safe_file_name(str(k)): str(k) for k in walls_info if str(k).strip()}


def _check_window(window: Any, where: Path) -> tuple[float, float, float, float]:
    try:
        w = [float(v) for v in window]
    except (TypeError, ValueError):
        w = []
    if len(w) != 4 or not all(np.isfinite(w)) or not (w[0] < w[1] and w[2] < w[3]):
        raise CaseError(f"{where}: map window {window!r}: give 4 numbers xmin xmax ymin ymax with xmin < xmax "
                        "and ymin < ymax")
    return (w[0], w[1], w[2], w[3])


def _result_figures(rd: Path, title: str | None, reference: Mapping[str, Any] | None, l_ref: float | None,
                    walls_info: Mapping[str, Any], wall_files: list[Path], profile_files: list[Path],
                    have_res: bool, have_fields: bool, references: Mapping[str, Any], mesh_edges: bool,
                    streamlines: bool, window: tuple[float, float, float, float] | None = None,
                    ) -> Iterator[tuple[str, Figure]]:
    if have_res:
        yield "residuals.png", residual_figure(rd / "residuals.csv", title=title)
    if (rd / "monitored.csv").is_file():
        from fvrans.post.monitor_plot import monitor_figure

        yield "monitored.png", monitor_figure(rd / "monitored.csv", title=title)
    names = _patch_of_file(walls_info)
    for wf in wall_files:
        patch = names.get(wf.stem, wf.stem)
        cols = read_csv_columns(wf)
        along = _choose_along(cols, "auto")
        info = walls_info.get(patch) if isinstance(walls_info.get(patch), Mapping) else {}
        zs = [z for z in (info.get(f"shear_sign_change_{along}") or []) if z is not None]
        refs = {str(k).lower(): v for k, v in (references.get(patch) or {}).items()}
        for q in ("cf", "cp"):
            if q in cols:
                yield f"wall_{wf.stem}_{q}.png", wall_figure(
                    cols, q, title=title, patch=patch, zero_shear=zs, references=refs.get(q, ()), l_ref=l_ref,
                    along=along)
    if have_fields:
        fields = read_fields(rd / "fields.vtu")
        for q in ("velocity", "pressure", "eddy_viscosity_ratio"):
            if q in fields.data:
                yield f"field_{q}.png", field_figure(fields, q, title=title, reference=reference,
                                                     mesh_edges=mesh_edges,
                                                     streamlines=streamlines and q == "velocity")
        for q in ("velocity", "pressure", "eddy_viscosity_ratio") if window is not None else ():
            if q in fields.data:
                yield f"field_{q}_zoom.png", field_figure(fields, q, title=title, reference=reference,
                                                          mesh_edges=mesh_edges, window=window,
                                                          streamlines=streamlines and q == "velocity")
    if have_fields:
        from fvrans.post.reference_plots import reference_figures

        yield from reference_figures(fields, title=title, window=window, mesh_edges=mesh_edges)
    for pf in profile_files:
        cols = read_csv_columns(pf)
        if "y_plus" in cols and "u_plus" in cols:
            yield f"profile_{pf.stem}.png", wall_profile_figure(cols["y_plus"], cols["u_plus"], title=title,
                                                                label=pf.stem)
        elif all(k in cols for k in ("s", "x", "y", "u")):
            yield f"probe_{pf.stem}.png", probe_figure(cols, name=pf.stem, title=title, reference=reference)


def make_plots(
    result_dir: str | os.PathLike,
    out_dir: str | os.PathLike | None = None,
    references: Mapping[str, Mapping[str, Sequence[Reference]]] | None = None,
    *,
    mesh_edges: bool = False,
    streamlines: bool = True,
    window: Sequence[float] | None = None,
    should_stop: Callable[[], bool] | None = None,
) -> list[Path]:
    """Save the figures of :func:`result_figures` as PNGs into ``out_dir``, each atomically, and
    return the paths written. By default into ``result_dir/plots`` as one set that replaces the
    previous plots there when the last is drawn (:func:`fvrans.post.outputs.output_set`).
    ``should_stop()``, asked before each figure, ends the drawing early (the figures drawn so far
    are kept)."""
    recover(result_dir)  # a set of outputs half put in place by a killed run is finished first
    figures = result_figures(result_dir, references, mesh_edges=mesh_edges, streamlines=streamlines, window=window)
    if out_dir is not None:
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        return _save_all(figures, out, should_stop)
    rd = Path(result_dir)
    drawn_from = (listed_outputs(rd) or {}).get("iteration")  # the iteration of the result drawn
    with output_set(rd, scope=PLOTS_DIR, iteration=drawn_from) as stage:
        saved = _save_all(figures, stage / PLOTS_DIR, should_stop)
    return [rd / PLOTS_DIR / p.name for p in saved]


def _save_all(figures: Iterator[tuple[str, Figure]], out: Path, should_stop: Callable[[], bool] | None) -> list[Path]:
    out.mkdir(parents=True, exist_ok=True)
    saved = []
    while should_stop is None or not should_stop():  # asked before each figure is drawn
        item = next(figures, None)
        if item is None:
            break
        saved.append(save_figure(item[1], out / item[0], within=out))
    return saved
