"""Several result folders on the same plots: two models, two grids, the runs of a sweep.

From the files each run writes (``residuals.csv``, ``wall/<patch>.csv``, ``profiles/<probe>.csv``,
``summary.json``), one figure per quantity with one line per run, labelled by a name the user
gives, else the run's title, else its folder name (titles that repeat, as in a sweep, get the
folder name added):

* ``residuals.png``: the largest normalised imbalance of each iteration;
* ``wall_<patch>_cf.png``, ``wall_<patch>_cp.png``: along x for every wall patch of two or more runs;
* ``probe_<name>_<column>.png``: each line-probe column (u, v, p and the model columns) against the
  distance along the probe, for probes of the same name in two or more runs;
* ``probe_<name>_wall_units.png``: a probe that starts on a wall, in wall units (y+ = s u_tau / nu,
  u+ = |u_t| / u_tau with u_tau of the nearest wall face and u_t the velocity along the wall), with
  the law of the wall u+ = y+ and u+ = ln(y+) / 0.41 + 5.0 (common practice).

Only the files are read (post imports no solver); the runs may come from different meshes and
models. ``sweep_labels`` names the runs of a sweep folder by their parameter values.
"""

from __future__ import annotations

import json
import os
from collections.abc import Iterator, Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from fvrans.errors import CaseError
from fvrans.post._plot_data import read_csv_columns, read_summary
from fvrans.post.filenames import safe_file_name
from fvrans.post.plots import B_LOG, KAPPA, _title, new_figure, save_figure

__all__ = ["OverlayRun", "overlay_figures", "overlay_plots", "read_runs", "sweep_labels"]

_STYLES = ("-", "--", "-.", ":")
#: probe columns that are coordinates, not plotted against s
_COORDINATES = ("s", "x", "y")


class OverlayRun:
    """The files of one result folder and the label it is drawn with."""

    def __init__(self, folder: str | os.PathLike, label: str | None = None):
        self.folder = Path(folder)
        if not self.folder.is_dir():
            raise CaseError(f"{self.folder}: no such result folder; give the --out folders of runs")
        s = self.folder / "summary.json"
        self.summary: dict[str, Any] = read_summary(s) if s.is_file() else {}
        self.title = self.summary.get("title") if isinstance(self.summary.get("title"), str) else ""
        self.label = label or self.title or self.folder.name
        self.walls = {p.stem: p for p in sorted((self.folder / "wall").glob("*.csv"))}
        self.probes = {p.stem: p for p in sorted((self.folder / "profiles").glob("*.csv"))}
        self.residuals = self.folder / "residuals.csv" if (self.folder / "residuals.csv").is_file() else None
        if not (self.walls or self.probes or self.residuals):
            raise CaseError(f"{self.folder}: no result files (residuals.csv, wall/*.csv, profiles/*.csv); "
                            "give the --out folder of a run")

    @property
    def kinematic_viscosity(self) -> float | None:
        ref = self.summary.get("reference") or {}
        try:
            nu = float(ref["mu"]) / float(ref["rho"])
        except (KeyError, TypeError, ValueError, ZeroDivisionError):
            return None
        return nu if np.isfinite(nu) and nu > 0 else None


def sweep_labels(sweep_folder: str | os.PathLike) -> dict[Path, str]:
    """Run folder -> ``"name=value, ..."`` of its parameters, from a sweep's ``results.json``."""
    folder = Path(sweep_folder)
    table = folder / "results.json"
    if not table.is_file():
        raise CaseError(f"{folder}: no results.json; give the --out folder of `fvrans sweep`")
    try:
        data = json.loads(table.read_text())
        names = [str(n) for n in data["parameters"]]
        runs = data["runs"]
    except (ValueError, KeyError, TypeError) as exc:
        raise CaseError(f"{table}: not a sweep results table ({exc})") from None
    out: dict[Path, str] = {}
    for row in runs:
        if row.get("key"):
            out[folder / "runs" / str(row["key"])] = ", ".join(f"{n}={_short(row.get(n))}" for n in names)
    return out


def _short(v: Any) -> str:
    if isinstance(v, float):
        return f"{v:.4g}"
    return str(v)


def read_runs(folders: Sequence[str | os.PathLike], labels: Sequence[str] | None = None) -> list[OverlayRun]:
    """The runs to overlay (at least two); ``labels``, when given, one per folder."""
    if labels is not None and len(labels) not in (0, len(folders)):
        raise CaseError(f"give one label per result folder: {len(labels)} labels for {len(folders)} folders")
    if len(folders) < 2:
        raise CaseError("an overlay needs two or more result folders")
    runs = [OverlayRun(f, labels[i] if labels else None) for i, f in enumerate(folders)]
    seen: dict[str, int] = {}
    for r in runs:
        seen[r.label] = seen.get(r.label, 0) + 1
    for r in runs:  # repeated titles (a sweep): add the folder name
        if seen[r.label] > 1 and not labels:
            r.label = f"{r.label} ({r.folder.name})"
    return runs


def _style(k: int) -> dict[str, Any]:
    return {"color": f"C{k % 10}", "ls": _STYLES[(k // 10) % len(_STYLES)], "lw": 1.4}


def _common_title(runs: Sequence[OverlayRun]) -> str | None:
    titles = {r.title for r in runs}
    return titles.pop() if len(titles) == 1 and "" not in titles else None


def residual_overlay(runs: Sequence[OverlayRun]) -> Figure:
    """The largest normalised imbalance per iteration of each run."""
    fig = new_figure()
    ax = fig.add_subplot()
    for k, r in enumerate(runs):
        if r.residuals is None:
            continue
        cols = read_csv_columns(r.residuals)
        names = [n for n in cols if n not in ("iteration", "seconds")]
        if not names:
            continue
        worst = np.max(np.stack([cols[n] for n in names]), axis=0)
        it = cols.get("iteration", np.arange(1, len(worst) + 1))
        ax.plot(it, np.where(worst > 0, worst, np.nan), label=r.label, **_style(k))
    ax.set_yscale("log")
    ax.set_xlabel("outer iteration")
    ax.set_ylabel("largest normalised imbalance [-]")
    ax.set_title(_title(_common_title(runs), "residual histories"), fontsize=11)
    ax.grid(True, which="major", alpha=0.35)
    ax.legend(loc="best", fontsize=8)
    return fig


def wall_overlay(runs: Sequence[OverlayRun], patch: str, quantity: str) -> Figure:
    """``cf`` or ``cp`` of wall ``patch`` along x, one line per run that has it."""
    fig = new_figure()
    ax = fig.add_subplot()
    for k, r in enumerate(runs):
        if patch not in r.walls:
            continue
        cols = read_csv_columns(r.walls[patch])
        if quantity not in cols or "x" not in cols:
            continue
        o = np.argsort(cols["x"], kind="stable")
        ax.plot(cols["x"][o], cols[quantity][o], label=r.label, **_style(k))
    label = {"cf": "Cf = τ_w / (½ ρ U_ref²) [-]", "cp": "Cp = (p − p_ref) / (½ ρ U_ref²) [-]"}[quantity]
    ax.axhline(0.0, color="0.6", lw=0.8, zorder=1)
    ax.set_xlabel("x")
    ax.set_ylabel(label)
    ax.set_title(_title(_common_title(runs), f"{quantity.capitalize()} along {patch!r}"), fontsize=11)
    ax.grid(True, alpha=0.3)
    ax.legend(loc="best", fontsize=8)
    return fig


def probe_overlay(runs: Sequence[OverlayRun], probe: str, column: str) -> Figure:
    """Probe column against the distance s along the probe, one line per run that has it."""
    fig = new_figure()
    ax = fig.add_subplot()
    for k, r in enumerate(runs):
        if probe not in r.probes:
            continue
        cols = read_csv_columns(r.probes[probe])
        if column in cols and "s" in cols:
            ax.plot(cols["s"], cols[column], label=r.label, **_style(k))
    ax.set_xlabel(f"s, distance along probe {probe!r}")
    ax.set_ylabel(column)
    ax.set_title(_title(_common_title(runs), f"{column} along probe {probe!r}"), fontsize=11)
    ax.grid(True, alpha=0.3)
    ax.legend(loc="best", fontsize=8)
    return fig


def wall_units(run: OverlayRun, probe: str, tolerance: float = 1e-6) -> tuple[np.ndarray, np.ndarray] | None:
    """(y+, u+) of a probe that starts on a wall face of the run (within ``tolerance`` of the
    domain size), or None: u_tau of the nearest wall face, the velocity component along the wall."""
    nu = run.kinematic_viscosity
    if nu is None or probe not in run.probes:
        return None
    cols = read_csv_columns(run.probes[probe])
    if not all(c in cols for c in ("s", "x", "y", "u", "v")) or len(cols["s"]) < 2:
        return None
    start = np.array([cols["x"][0], cols["y"][0]])
    size = float(np.hypot(np.ptp(cols["x"]), np.ptp(cols["y"]))) or 1.0
    best = None
    for path in run.walls.values():
        w = read_csv_columns(path)
        if not all(c in w for c in ("x", "y", "u_tau", "tx", "ty")):
            continue
        d = np.hypot(w["x"] - start[0], w["y"] - start[1])
        i = int(np.argmin(d))
        if best is None or d[i] < best[0]:
            best = (float(d[i]), w, i)
    if best is None:
        return None
    d, w, i = best
    extent = float(np.max(np.hypot(np.diff(w["x"]), np.diff(w["y"])), initial=0.0))
    if d > max(extent, tolerance * size):  # the probe does not start on this wall
        return None
    u_tau = float(w["u_tau"][i])
    if not u_tau > 0:
        return None
    t = np.array([w["tx"][i], w["ty"][i]])
    ut = np.abs(cols["u"] * t[0] + cols["v"] * t[1])
    return cols["s"] * u_tau / nu, ut / u_tau


def wall_units_overlay(runs: Sequence[OverlayRun], probe: str) -> Figure | None:
    """Velocity profiles in wall units of a probe starting on a wall, with the law of the wall."""
    data = [(k, r, wall_units(r, probe)) for k, r in enumerate(runs)]
    data = [(k, r, d) for k, r, d in data if d is not None]
    if len(data) < 2:
        return None
    fig = new_figure()
    ax = fig.add_subplot()
    hi = 100.0
    for k, r, (yp, up) in data:
        ok = yp > 0
        ax.plot(yp[ok], up[ok], label=r.label, **_style(k))
        hi = max(hi, float(yp.max()))
    yl = np.geomspace(0.1, 15.0, 60)
    ax.plot(yl, yl, color="0.45", ls=":", lw=1.1, label="u+ = y+")
    yg = np.geomspace(5.0, hi, 80)
    ax.plot(yg, np.log(yg) / KAPPA + B_LOG, color="0.25", ls=":", lw=1.1,
            label=f"u+ = ln(y+) / {KAPPA:g} + {B_LOG:g}")
    ax.set_xscale("log")
    ax.set_xlim(0.1, hi * 1.2)
    ax.set_xlabel("y+ = y u_τ / ν [-]")
    ax.set_ylabel("u+ = u / u_τ [-]")
    ax.set_title(_title(_common_title(runs), f"probe {probe!r} in wall units"), fontsize=11)
    ax.grid(True, which="major", alpha=0.35)
    ax.legend(loc="upper left", fontsize=8)
    return fig


def overlay_figures(runs: Sequence[OverlayRun]) -> Iterator[tuple[str, Figure]]:
    """``(file name, figure)`` for every quantity two or more runs share (see the module docstring)."""
    if sum(r.residuals is not None for r in runs) >= 2:
        yield "residuals.png", residual_overlay(runs)
    for patch in sorted({p for r in runs for p in r.walls}):
        have = [r for r in runs if patch in r.walls]
        if len(have) < 2:
            continue
        cols = set.intersection(*(set(read_csv_columns(r.walls[patch])) for r in have))
        for q in ("cf", "cp"):
            if q in cols:
                yield f"wall_{patch}_{q}.png", wall_overlay(runs, patch, q)
    for probe in sorted({p for r in runs for p in r.probes}):
        have = [r for r in runs if probe in r.probes]
        if len(have) < 2:
            continue
        columns: list[str] = []
        for r in have:
            columns += [c for c in read_csv_columns(r.probes[probe]) if c not in _COORDINATES and c not in columns]
        for c in columns:
            if sum(c in read_csv_columns(r.probes[probe]) for r in have) >= 2:
                yield f"probe_{probe}_{safe_file_name(c, 'a probe column')}.png", probe_overlay(runs, probe, c)
        fig = wall_units_overlay(runs, probe)
        if fig is not None:
            yield f"probe_{probe}_wall_units.png", fig


def overlay_plots(folders: Sequence[str | os.PathLike], out_dir: str | os.PathLike,
                  labels: Sequence[str] | None = None) -> list[Path]:
    """Draw :func:`overlay_figures` of the result ``folders`` into ``out_dir`` (PNG, each written
    atomically); ``labels`` one per folder (default: run titles, else folder names)."""
    runs = read_runs(folders, labels)
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    # file stems of wall and probe files are safe names already (fvrans wrote them through
    # fvrans.post.filenames.output_file); probe columns pass safe_file_name
    paths = [save_figure(fig, out / name, within=out) for name, fig in overlay_figures(runs)]
    if not paths:
        raise CaseError(f"the folders {', '.join(str(r.folder) for r in runs)} share no quantity to overlay "
                        "(no common wall patch, probe or residual file)")
    return paths
