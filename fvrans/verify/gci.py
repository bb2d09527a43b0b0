"""Grid-convergence studies: observed order, Richardson extrapolation and the Grid Convergence Index.

The procedure of Celik et al. (2008), "Procedure for estimation and reporting of uncertainty due
to discretization in CFD applications", J. Fluids Eng. 130, 078001, with the GCI of Roache (1994):
grids 1 (fine), 2, 3 (coarse) with representative sizes h1 < h2 < h3,
r21 = h2/h1, r32 = h3/h2, eps21 = phi2 - phi1, eps32 = phi3 - phi2, s = sign(eps32/eps21), and

    p = |ln|eps32/eps21| + q(p)| / ln r21,  q(p) = ln((r21^p - s) / (r32^p - s))   (fixed point)
    phi_ext21 = (r21^p phi1 - phi2) / (r21^p - 1)
    e_a21 = |(phi1 - phi2)/phi1|,  e_ext21 = |(phi_ext21 - phi1)/phi_ext21|
    GCI_fine21 = Fs e_a21 / (r21^p - 1),  Fs = 1.25 (three or more grids).

Behaviour: the model phi = phi_ext + C h^p with p > 0 gives
eps32/eps21 = r21^p (r32^p - 1)/(r21^p - 1), which exceeds ln r32 / ln r21 (its limit as p -> 0).
So eps32/eps21 < 0 is *oscillatory*, 0 < eps32/eps21 <= ln r32/ln r21 is *divergent* (the change
does not shrink as the grid is refined), larger ratios are *monotone* convergence. (With equal
ratios the divergence test is the usual |eps21| >= |eps32|.)

Representative cell size in 2D: h = sqrt(total area / N).

Flags (exit status 1 of ``fvrans grid-study``): besides oscillatory, divergent or undetermined
behaviour, an observed order below :data:`ORDER_FRACTION` times the formal order of the scheme
(default :data:`FORMAL_ORDER`, fvrans's second-order discretisation), and a GCI_fine21 above
:data:`GCI_LIMIT`. The three-grid GCI with Fs = 1.25 presumes an observed order that confirms the
formal one (Roache 1998, Verification and Validation in Computational Science and Engineering,
from memory); how far below counts as "far" and which GCI is too large to report a number are
common practice, not published thresholds: half the formal order, and 10 %.
"""

from __future__ import annotations

import math
import os
import re
import sys
from collections.abc import Sequence
from dataclasses import asdict, dataclass, field, replace
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post._plot_data import cap_text
from fvrans.post.filenames import safe_file_name

SAFETY_FACTOR_THREE_GRIDS = 1.25  # Roache (1994) for three or more grids; 3.0 for two grids
FORMAL_ORDER = 2.0  # fvrans's discretisation (linear-upwind convection, central diffusion)
ORDER_FRACTION = 0.5  # an observed order below this times the formal one is flagged (common practice)
GCI_LIMIT = 0.10  # a GCI_fine21 above 10 % is flagged (common practice)
P_MAX = 20.0  # observed orders are searched in (0, P_MAX]


def representative_size(area: float, n_cells: int) -> float:
    """h = sqrt(A / N) for a 2D mesh of total area A and N cells (Celik et al. 2008, eq. 1)."""
    if not (area > 0 and n_cells > 0):
        raise CaseError(f"representative cell size needs a positive area and cell count (got {area}, {n_cells})")
    return math.sqrt(area / n_cells)


@dataclass(frozen=True)
class GciResult:
    """One three-grid evaluation (grid 1 finest). Relative quantities are fractions, not percent."""

    h: tuple[float, float, float]
    phi: tuple[float, float, float]
    r21: float
    r32: float
    eps21: float
    eps32: float
    behaviour: str  # "monotone", "oscillatory", "divergent", "grid-independent", "undetermined"
    p: float
    phi_ext21: float
    phi_ext32: float
    e_a21: float
    e_ext21: float
    gci_fine21: float
    e_a32: float
    e_ext32: float
    gci_fine32: float
    asymptotic_ratio: float  # GCI_fine32 / (r21^p GCI_fine21); near 1 in the asymptotic range
    safety_factor: float
    iterations: int
    notes: tuple[str, ...] = field(default_factory=tuple)
    formal_order: float = FORMAL_ORDER
    gci_limit: float = GCI_LIMIT

    @property
    def flags(self) -> tuple[str, ...]:
        """Why this estimate is not to be trusted (empty when it is): not a monotone convergence,
        no observed order, an order far below the formal one, or a GCI above the limit."""
        out = []
        if self.behaviour != "monotone":
            out.append(self.behaviour)
        if not math.isfinite(self.p):
            out.append("no observed order")
        elif self.p < ORDER_FRACTION * self.formal_order:
            out.append(f"order {self.p:.3g} far below the formal {self.formal_order:g}")
        if math.isfinite(self.gci_fine21) and self.gci_fine21 > self.gci_limit:
            out.append(f"GCI {100 * self.gci_fine21:.3g} % above {100 * self.gci_limit:g} %")
        return tuple(out)

    @property
    def flagged(self) -> bool:
        """True unless the three grids show monotone convergence with an order near the formal
        one and a GCI within the limit (see the module docstring)."""
        return bool(self.flags)

    def to_json(self) -> dict[str, Any]:
        d = asdict(self)
        d["flagged"] = self.flagged
        d["flags"] = list(self.flags)
        return d


def _observed_order(r21: float, r32: float, eps21: float, eps32: float, tol: float = 1e-12,
                    max_iter: int = 500) -> tuple[float, int, str]:
    """Fixed-point iteration of Celik et al. (2008) eq. 3a-c; scipy's brentq if it stalls."""
    ratio = eps32 / eps21
    s = 1.0 if ratio > 0 else -1.0
    lr = math.log(abs(ratio))
    ln21 = math.log(r21)

    ln32 = math.log(r32)

    def q(p: float) -> float:
        # ln((r21^p - s)/(r32^p - s)) written without overflow: ln(r^p - s) = p ln r + ln(1 - s r^-p)
        a, b = 1.0 - s * math.exp(-p * ln21), 1.0 - s * math.exp(-p * ln32)
        if a <= 0 or b <= 0:
            return float("nan")
        return p * (ln21 - ln32) + math.log(a) - math.log(b)

    p = abs(lr) / ln21  # q = 0 start
    for it in range(1, max_iter + 1):
        qp = q(p)
        if not math.isfinite(qp) or p > P_MAX:
            break
        p_new = abs(lr + qp) / ln21
        if abs(p_new - p) <= tol * max(1.0, abs(p_new)):
            return p_new, it, ""
        p = p_new
    # fall back to a bracketed root of g(p) = p ln r21 - |ln|eps32/eps21| + q(p)|
    from scipy.optimize import brentq

    def g(pp: float) -> float:
        return pp * ln21 - abs(lr + q(pp))

    grid = np.linspace(1e-6, P_MAX, 2001)
    vals = np.array([g(v) for v in grid])
    ok = np.isfinite(vals)
    sign = np.nonzero(ok[:-1] & ok[1:] & (np.sign(vals[:-1]) != np.sign(vals[1:])))[0]
    if len(sign):
        k = int(sign[0])
        return float(brentq(g, grid[k], grid[k + 1], xtol=1e-14)), max_iter, "order from a bracketed root"
    return float("nan"), max_iter, f"the equation for the observed order has no solution in (0, {P_MAX:g}]"


def gci_three(h: Sequence[float], phi: Sequence[float], safety_factor: float = SAFETY_FACTOR_THREE_GRIDS,
              formal_order: float = FORMAL_ORDER, gci_limit: float = GCI_LIMIT) -> GciResult:
    """Celik et al. (2008) for three grids; ``h`` and ``phi`` in any order (sorted fine to coarse).
    ``formal_order`` and ``gci_limit`` set the flags of :attr:`GciResult.flags`."""
    return replace(_gci_three(h, phi, safety_factor), formal_order=float(formal_order), gci_limit=float(gci_limit))


def _gci_three(h: Sequence[float], phi: Sequence[float], safety_factor: float) -> GciResult:
    if len(h) != 3 or len(phi) != 3:
        raise CaseError(f"three grids are needed, got {len(h)} sizes and {len(phi)} values")
    hs = np.asarray(h, dtype=np.float64)
    ph = np.asarray(phi, dtype=np.float64)
    if not (np.all(np.isfinite(hs)) and np.all(hs > 0)):
        raise CaseError(f"cell sizes must be positive numbers, got {list(h)}")
    if not np.all(np.isfinite(ph)):
        raise CaseError(f"values must be finite numbers, got {list(phi)}")
    order = np.argsort(hs)
    (h1, h2, h3), (p1, p2, p3) = hs[order].tolist(), ph[order].tolist()
    if not (h1 < h2 < h3):
        raise CaseError(f"the three grids need different cell sizes, got {sorted(hs.tolist())}")
    r21, r32 = h2 / h1, h3 / h2
    eps21, eps32 = p2 - p1, p3 - p2
    notes: list[str] = []
    if min(r21, r32) < 1.3:
        notes.append(f"refinement ratio {min(r21, r32):.3g} below 1.3 (Celik et al. 2008 recommend > 1.3)")
    nan = float("nan")
    scale = max(abs(p1), abs(p2), abs(p3), 1e-300)
    tiny = 1e-14 * scale
    if abs(eps21) <= tiny and abs(eps32) <= tiny:
        return GciResult((h1, h2, h3), (p1, p2, p3), r21, r32, eps21, eps32, "grid-independent", nan,
                         p1, p2, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, nan, safety_factor, 0,
                         tuple(notes + ["the three values agree; no order can be observed"]))
    if abs(eps21) <= tiny or abs(eps32) <= tiny:
        return GciResult((h1, h2, h3), (p1, p2, p3), r21, r32, eps21, eps32, "undetermined", nan,
                         nan, nan, abs(eps21 / p1) if p1 else nan, nan, nan, nan, nan, nan, nan, safety_factor, 0,
                         tuple(notes + ["one of the two differences is zero; the order cannot be observed"]))
    ratio = eps32 / eps21
    if ratio < 0:
        behaviour = "oscillatory"
        notes.append("oscillatory: the differences change sign (eps32/eps21 < 0)")
    elif ratio <= math.log(r32) / math.log(r21):
        behaviour = "divergent"
        notes.append("divergent: the change does not shrink with refinement (eps32/eps21 <= ln r32 / ln r21)")
    else:
        behaviour = "monotone"
    p, iters, note = _observed_order(r21, r32, eps21, eps32)
    if note:
        notes.append(note)
    if not math.isfinite(p) or p <= 0:
        return GciResult((h1, h2, h3), (p1, p2, p3), r21, r32, eps21, eps32, behaviour, p,
                         nan, nan, abs(eps21 / p1) if p1 else nan, nan, nan, nan, nan, nan, nan, safety_factor,
                         iters, tuple(notes))
    a21, a32 = r21**p, r32**p
    ext21 = (a21 * p1 - p2) / (a21 - 1.0)
    ext32 = (a32 * p2 - p3) / (a32 - 1.0)
    e_a21 = abs((p1 - p2) / p1) if p1 else nan
    e_a32 = abs((p2 - p3) / p2) if p2 else nan
    e_ext21 = abs((ext21 - p1) / ext21) if ext21 else nan
    e_ext32 = abs((ext32 - p2) / ext32) if ext32 else nan
    gci21 = safety_factor * e_a21 / (a21 - 1.0)
    gci32 = safety_factor * e_a32 / (a32 - 1.0)
    asym = gci32 / (a21 * gci21) if gci21 > 0 else nan
    return GciResult((h1, h2, h3), (p1, p2, p3), r21, r32, eps21, eps32, behaviour, p, ext21, ext32,
                     e_a21, e_ext21, gci21, e_a32, e_ext32, gci32, asym, safety_factor, iters, tuple(notes))


@dataclass(frozen=True)
class GridConvergence:
    """A quantity on three or more grids: the finest triplet, and every consecutive triplet."""

    name: str
    h: tuple[float, ...]  # fine to coarse
    phi: tuple[float, ...]
    finest: GciResult
    triplets: tuple[GciResult, ...]

    def to_json(self) -> dict[str, Any]:
        return {"name": self.name, "h": list(self.h), "phi": list(self.phi), "finest": self.finest.to_json(),
                "triplets": [t.to_json() for t in self.triplets]}


def grid_convergence(h: Sequence[float], phi: Sequence[float], name: str = "phi",
                     safety_factor: float = SAFETY_FACTOR_THREE_GRIDS, formal_order: float = FORMAL_ORDER,
                     gci_limit: float = GCI_LIMIT) -> GridConvergence:
    """Values ``phi`` on grids of representative size ``h`` (3 or more, any order)."""
    if len(h) != len(phi):
        raise CaseError(f"{name}: {len(h)} cell sizes but {len(phi)} values")
    if len(h) < 3:
        raise CaseError(f"{name}: a grid-convergence study needs at least 3 grids, got {len(h)}")
    order = np.argsort(np.asarray(h, dtype=np.float64))
    hs = tuple(float(h[i]) for i in order)
    ps = tuple(float(phi[i]) for i in order)
    triplets = tuple(gci_three(hs[k:k + 3], ps[k:k + 3], safety_factor, formal_order, gci_limit)
                     for k in range(len(hs) - 2))
    return GridConvergence(name, hs, ps, triplets[0], triplets)


# ---------------------------------------------------------------------------------------------
_STATION = re.compile(r"^wall\.(?P<patch>[^@]+)\.(?P<column>[^.@]+)@(?P<axis>[xys])=(?P<at>[-+0-9.eE]+)$")


def quantity_value(result_dir: Any, quantity: str) -> float:
    """The value of a grid-study quantity in a result directory.

    ``walls.<patch>.forces.Cd`` (any dotted path into summary.json), or a wall value at a station,
    ``wall.<patch>.<column>@x=<value>`` (also ``@y=``, ``@s=``): the column of ``wall/<patch>.csv``
    interpolated linearly between the two face centres around the station (never extrapolated).
    """
    from fvrans.verify.compare import Curve, ResultDir, _monotonic

    rd = result_dir if isinstance(result_dir, ResultDir) else ResultDir(result_dir)
    m = _STATION.match(quantity)
    if m is None:
        if quantity.startswith("wall.") or "@" in quantity:
            raise CaseError(f"quantity {quantity!r}: a wall station reads wall.<patch>.<column>@x=<number> "
                            "(or @y=, @s=), e.g. wall.plate.cf@x=0.97")
        return rd.scalar(quantity)
    try:
        at = float(m["at"])
    except ValueError:
        raise CaseError(f"quantity {quantity!r}: {m['at']!r} is not a number") from None
    table = rd.table(f"wall/{safe_file_name(m['patch'], 'the wall patch')}.csv")
    curve = _monotonic(Curve(table.column(m["axis"]), table.column(m["column"]), table.path, table.lines))
    if not curve.x[0] <= at <= curve.x[-1]:
        raise CaseError(f"{table.path}: {m['axis']} = {at:g} lies outside the wall faces "
                        f"({curve.x[0]:.6g} .. {curve.x[-1]:.6g}); choose a station on the wall")
    return float(np.interp(at, curve.x, curve.y))


def result_dir_size(result_dir: str | os.PathLike, area: float | None = None) -> tuple[int, float, float]:
    """(n_cells, area, h) of a run: n_cells from summary.json, the area from fields.vtu unless given."""
    from fvrans.verify.compare import ResultDir

    rd = ResultDir(result_dir)
    n = rd.summary().get("n_cells")
    if isinstance(n, bool) or not isinstance(n, int) or n <= 0:
        raise CaseError(f"{rd.path / 'summary.json'}: n_cells = {n!r} is not a positive integer")
    if area is None:
        area = float(rd.fields().cell_area.sum())
    return n, float(area), representative_size(area, n)


@dataclass(frozen=True)
class GridStudy:
    """Grid sizes of the runs and the convergence of each quantity."""

    result_dirs: tuple[str, ...]  # fine to coarse
    n_cells: tuple[int, ...]
    h: tuple[float, ...]
    quantities: dict[str, GridConvergence]
    runs: tuple[dict[str, Any], ...] = ()  # when the study ran the case: one entry per grid, fine to coarse

    def to_json(self) -> dict[str, Any]:
        d = {"result_dirs": list(self.result_dirs), "n_cells": list(self.n_cells), "h": list(self.h),
             "quantities": {k: v.to_json() for k, v in self.quantities.items()}}
        if self.runs:
            d["runs"] = [dict(r) for r in self.runs]
        return d


def grid_study(result_dirs: Sequence[str | os.PathLike], quantities: Sequence[str], area: float | None = None,
               safety_factor: float = SAFETY_FACTOR_THREE_GRIDS, formal_order: float = FORMAL_ORDER,
               gci_limit: float = GCI_LIMIT) -> GridStudy:
    """GCI of scalar quantities (dotted paths into summary.json) over existing result directories."""
    from fvrans.verify.compare import ResultDir

    if len(result_dirs) < 3:
        raise CaseError(f"a grid-convergence study needs at least 3 result directories, got {len(result_dirs)}")
    if not quantities:
        raise CaseError("name at least one quantity (a dotted path into summary.json, e.g. walls.lower_wall.forces.Cd)")
    if area is not None and not area > 0:
        raise CaseError(f"the domain area must be positive, got {area}")
    sizes = [result_dir_size(d, area) for d in result_dirs]
    order = np.argsort([s[2] for s in sizes])
    dirs = tuple(str(result_dirs[i]) for i in order)
    hs = [sizes[i][2] for i in order]
    for a, b, da, db in zip(hs[:-1], hs[1:], dirs[:-1], dirs[1:]):
        if a == b:
            raise CaseError(f"{da} and {db} have the same cell size h = {a:.6g}; each grid must differ")
    out: dict[str, GridConvergence] = {}
    for q in quantities:
        vals = [quantity_value(ResultDir(d), q) for d in dirs]
        out[q] = grid_convergence(hs, vals, q, safety_factor, formal_order, gci_limit)
    return GridStudy(dirs, tuple(sizes[i][0] for i in order), tuple(hs), out)


def plot_grid_convergence(gc: GridConvergence, path: str | os.PathLike) -> None:
    """phi against h^p (p of the finest triplet; p = 1 if undetermined) with the extrapolated value."""
    from matplotlib.figure import Figure

    from fvrans.verify.report import save_figure

    g = gc.finest
    p = g.p if math.isfinite(g.p) and g.p > 0 else 1.0
    hp = np.asarray(gc.h) ** p
    fig = Figure(figsize=(6.0, 4.2))
    ax = fig.add_subplot(1, 1, 1)
    ax.plot(hp, gc.phi, "o-", label="grids")
    if math.isfinite(g.phi_ext21) and not g.flagged:
        ax.plot([0.0], [g.phi_ext21], "s", color="C3", label=f"extrapolated {g.phi_ext21:.6g}")
        ax.plot([0.0, hp[0]], [g.phi_ext21, gc.phi[0]], "--", color="C3", lw=0.8)
        band = abs(g.gci_fine21 * gc.phi[0])
        ax.errorbar([hp[0]], [gc.phi[0]], yerr=[band], color="C2", capsize=4, label=f"GCI fine {g.gci_fine21:.2%}")
    ax.set_xlim(left=0.0)
    ax.set_xlabel(f"h^p (p = {p:.3g}{'' if math.isfinite(g.p) else ', assumed'})")
    ax.set_ylabel(cap_text(gc.name))
    ax.set_title(f"{cap_text(gc.name)}: {g.behaviour}", fontsize=10)
    ax.legend(fontsize=8)
    ax.grid(True, lw=0.3)
    fig.tight_layout()
    save_figure(fig, path)


def _fmt(x: float, pct: bool = False) -> str:
    if x is None or not math.isfinite(x):
        return "-"
    return f"{x:.3%}" if pct else f"{x:.6g}"


def grid_study_markdown(study: GridStudy) -> str:
    lines = ["# Grid-convergence study", "", "| grid | result | cells | h |", "|---|---|---:|---:|"]
    for k, (d, n, h) in enumerate(zip(study.result_dirs, study.n_cells, study.h)):
        lines.append(f"| {k + 1} | {d} | {n} | {h:.6g} |")
    if study.runs:
        lines += ["", "| grid | converged | iterations | seconds | final residuals |", "|---|---|---:|---:|---|"]
        for k, r in enumerate(study.runs):
            res = ", ".join(f"{n} {v:.2e}" for n, v in (r.get("final_residuals") or {}).items())
            ok = "yes" if r.get("converged") else "**no**"
            lines.append(f"| {k + 1} ({r.get('label', '')}) | {ok} | {r.get('iterations', '-')} | "
                         f"{r.get('wall_seconds', float('nan')):.1f} | {res} |")
    first = next(iter(study.quantities.values())).finest
    lines += ["", "Finest three grids (Celik et al. 2008; GCI with safety factor "
              f"{first.safety_factor:g}). Flagged: not monotone, an observed order below "
              f"{ORDER_FRACTION:g} x the formal order {first.formal_order:g}, or GCI_fine21 above "
              f"{100 * first.gci_limit:g} % (common practice):", "",
              "| quantity | phi1 | phi2 | phi3 | r21 | r32 | p | phi_ext21 | e_a21 | e_ext21 | GCI_fine21 "
              "| behaviour |",
              "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---|"]
    for name, gc in study.quantities.items():
        g = gc.finest
        beh = g.behaviour if not g.flagged else f"**{g.behaviour}; flagged: {', '.join(g.flags)}**"
        lines.append(f"| {name} | {_fmt(g.phi[0])} | {_fmt(g.phi[1])} | {_fmt(g.phi[2])} | {g.r21:.4g} | "
                     f"{g.r32:.4g} | {_fmt(g.p)} | {_fmt(g.phi_ext21)} | {_fmt(g.e_a21, True)} | "
                     f"{_fmt(g.e_ext21, True)} | {_fmt(g.gci_fine21, True)} | {beh} |")
    notes = [(n, note) for n, gc in study.quantities.items() for note in gc.finest.notes]
    if notes:
        lines += ["", "Notes:", ""] + [f"- {n}: {note}" for n, note in notes]
    return "\n".join(lines) + "\n"


def study_line(name: str, g: GciResult) -> str:
    """One line per quantity: order, extrapolated value, GCI, behaviour and the flags."""
    flags = f"; FLAGGED: {', '.join(g.flags)}" if g.flagged else ""
    return (f"{name}: p = {_fmt(g.p)}, extrapolated {_fmt(g.phi_ext21)}, GCI_fine = {_fmt(g.gci_fine21, True)} "
            f"({g.behaviour}{flags})")


def print_study(study: GridStudy, stream: Any) -> None:
    """The lines of :func:`study_line` for every quantity of a study."""
    for name, gc in study.quantities.items():
        print(study_line(name, gc.finest), file=stream)


def write_grid_study(study: GridStudy, report_dir: str | os.PathLike, plots: bool = True) -> None:
    """grid_study.json, grid_study.md and plots/<quantity>.png (atomic writes)."""
    from fvrans.post.writers import atomic_write, output_file, to_jsonable, write_json_atomic

    out = Path(report_dir)
    try:
        (out / "plots").mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CaseError(f"cannot create the report directory {out}: {exc.strerror}") from None
    write_json_atomic(out / "grid_study.json", to_jsonable(study.to_json()))
    md = grid_study_markdown(study)
    atomic_write(out / "grid_study.md", lambda f: f.write(md))
    if plots:
        for name, gc in study.quantities.items():
            plot_grid_convergence(gc, output_file(out, name, ".png", subfolder="plots", what=f"quantity {name!r}"))


def grid_study_command(result_dirs: Sequence[str | os.PathLike], quantities: Sequence[str],
                       report_dir: str | os.PathLike, area: float | None = None,
                       safety_factor: float = SAFETY_FACTOR_THREE_GRIDS, stream: Any = None,
                       formal_order: float = FORMAL_ORDER, gci_limit: float = GCI_LIMIT) -> int:
    """``fvrans grid-study``: exit 0 when every quantity converges monotonically with an order near
    the formal one and a GCI within the limit, 1 when any is flagged (:attr:`GciResult.flags`),
    2 for bad input."""
    out = stream if stream is not None else sys.stdout  # results to stdout, errors to stderr
    err = stream if stream is not None else sys.stderr
    try:
        study = grid_study(result_dirs, quantities, area, safety_factor, formal_order, gci_limit)
        write_grid_study(study, report_dir)
    except CaseError as exc:
        print(f"error: {exc}", file=err)
        return 2
    print_study(study, out)
    return 1 if any(gc.finest.flagged for gc in study.quantities.values()) else 0
