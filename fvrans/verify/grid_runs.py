"""Grid-convergence studies that run the case: one run per grid, then the GCI of each quantity.

The grids are mesh files, or the levels of a bundled generator family (``flat_plate_family``,
``step_family``: coarse, medium, fine), or any set of case changes per grid. Each run is written
into ``<out>/runs/<label>/`` (the usual result folder), the quantities are read back from those
folders exactly as :func:`fvrans.verify.gci.grid_study` reads existing ones, and the report goes
into ``<out>`` (``grid_study.json``, ``grid_study.md``, ``plots/<quantity>.png``).

This is the one module of ``fvrans.verify`` that drives the solver (through :mod:`fvrans.api`);
the rest of the package only reads result files.
"""

from __future__ import annotations

import math
import os
from collections.abc import Callable, Mapping, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post.filenames import output_file
from fvrans.verify.gci import (
    FORMAL_ORDER,
    GCI_LIMIT,
    SAFETY_FACTOR_THREE_GRIDS,
    GridStudy,
    grid_study,
    write_grid_study,
)

FAMILY_LEVELS = ("coarse", "medium", "fine")
RUNS_DIR = "runs"


def grid_changes(
    meshes: Sequence[str | os.PathLike] | None = None,
    family: str | None = None,
    levels: Sequence[str] = FAMILY_LEVELS,
    grids: Mapping[str, Mapping[str, Any]] | None = None,
) -> dict[str, dict[str, Any]]:
    """Label -> case changes (dotted keys) of each grid; exactly one of the three ways is given."""
    given = [x is not None for x in (meshes, family, grids)]
    if sum(given) != 1:
        raise CaseError("name the grids one way: mesh files, a generator family with its levels, or case changes "
                        "per grid")
    out: dict[str, dict[str, Any]] = {}
    if meshes is not None:
        for m in meshes:
            p = Path(m).resolve()
            if not p.is_file():
                raise CaseError(f"mesh file {m} does not exist")
            label = p.stem
            if label in out:
                raise CaseError(f"two mesh files are named {label!r}; each grid needs its own file name")
            out[label] = {"mesh.generator": None, "mesh.parameters": None, "mesh.file": str(p)}
    elif family is not None:
        for lv in levels:
            if lv in out:
                raise CaseError(f"level {lv!r} is given twice")
            out[str(lv)] = {"mesh.file": None, "mesh.generator": family, "mesh.parameters": {"level": lv}}
    else:
        assert grids is not None
        out = {str(k): dict(v) for k, v in grids.items()}
    for label in out:
        if not label or any(c in label for c in '/\\:*?"<>|') or label.startswith("."):
            raise CaseError(f"grid label {label!r} is used as a folder name; use letters, digits, '-', '_' or '.'")
    if len(out) < 3:
        raise CaseError(f"a grid-convergence study needs at least 3 grids, got {len(out)}")
    return out


#: relative difference of the grids' areas accepted as one domain (curved boundaries are polygons)
AREA_TOLERANCE = 0.05


def run_grid_study(
    case: Any,
    quantities: Sequence[str],
    out_dir: str | os.PathLike,
    *,
    meshes: Sequence[str | os.PathLike] | None = None,
    family: str | None = None,
    levels: Sequence[str] = FAMILY_LEVELS,
    grids: Mapping[str, Mapping[str, Any]] | None = None,
    safety_factor: float = SAFETY_FACTOR_THREE_GRIDS,
    formal_order: float = FORMAL_ORDER,
    gci_limit: float = GCI_LIMIT,
    plots: bool = True,
    log: Callable[[str], None] | None = None,
) -> GridStudy:
    """Run ``case`` (a Case or a case-file path) on each grid, coarsest first, and evaluate the
    grid convergence of ``quantities`` (dotted paths into summary.json, or wall stations such as
    ``wall.plate.cf@x=0.97``; see :func:`fvrans.verify.gci.quantity_value`).

    Returns the :class:`GridStudy` with one entry per run in ``runs`` (label, folder, cells,
    converged, iterations, seconds, final residuals). Runs that do not converge are kept and marked;
    the Celik et al. (2008) procedure assumes iteratively converged solutions, so check them.
    """
    import fvrans.api as fa

    if isinstance(case, (str, os.PathLike)):
        case = fa.load_case(case)
    if not quantities:
        raise CaseError("name at least one quantity, e.g. walls.plate.forces.Cd or wall.plate.cf@x=0.97")
    changes = grid_changes(meshes, family, levels, grids)
    say = log or (lambda _msg: None)
    out = Path(out_dir)
    problems = {}
    for label, ch in changes.items():
        problems[label] = fa.prepare(case.replace(ch))
    # one domain: the areas agree, up to the polygon approximation of curved boundaries (a circle on
    # 16 points lacks 2.6 % of its area, so the coarse annulus of a cylinder study differs by 2 %)
    areas = {k: float(np.sum(p.geom.cell_area)) for k, p in problems.items()}
    a0 = next(iter(areas.values()))
    for k, a in areas.items():
        if not math.isclose(a, a0, rel_tol=AREA_TOLERANCE):
            raise CaseError(f"the grids cover different domains (area {a:.9g} for {k!r}, {a0:.9g} for "
                            f"{next(iter(areas))!r}, more than {AREA_TOLERANCE:.0%} apart); a grid study "
                            "refines one domain")
    runs: dict[str, dict[str, Any]] = {}
    for label in sorted(problems, key=lambda k: problems[k].mesh.n_cells):
        prob = problems[label]
        say(f"grid {label}: {prob.mesh.n_cells} cells ...")
        result = fa.solve(prob)
        folder = result.write(output_file(out, label, subfolder=RUNS_DIR, what=f"grid label {label!r}"))
        state = "converged" if result.converged else ("DIVERGED" if result.diverged else "NOT converged")
        say(f"grid {label}: {state} after {result.iterations} iterations in {result.wall_seconds:.1f} s -> {folder}")
        res_last = result.history.rows[-1] if len(result.history.rows) else []
        runs[str(folder)] = {
            "label": label, "result_dir": str(folder), "n_cells": prob.mesh.n_cells,
            "converged": bool(result.converged), "diverged": bool(result.diverged),
            "iterations": int(result.iterations), "wall_seconds": float(result.wall_seconds),
            "final_residuals": {str(n): float(v) for n, v in zip(result.history.names, res_last)},
        }
        del result
    study = grid_study(list(runs), quantities, area=a0, safety_factor=safety_factor, formal_order=formal_order,
                       gci_limit=gci_limit)
    study = GridStudy(study.result_dirs, study.n_cells, study.h, study.quantities,
                      tuple(runs[d] for d in study.result_dirs))
    write_grid_study(study, out, plots=plots)
    return study


def run_grid_study_command(case_path: str | os.PathLike, quantities: Sequence[str], report_dir: str | os.PathLike,
                           *, meshes: Sequence[str] | None = None, family: str | None = None,
                           levels: Sequence[str] = FAMILY_LEVELS, overrides: Sequence[str] = (),
                           safety_factor: float = SAFETY_FACTOR_THREE_GRIDS, stream: Any = None,
                           formal_order: float = FORMAL_ORDER, gci_limit: float = GCI_LIMIT) -> int:
    """``fvrans grid-study --case``: exit 0 when every run converged and every quantity converges
    monotonically, 1 when a run did not converge or a quantity is oscillatory, divergent or
    undetermined, 2 for bad input."""
    import sys

    import fvrans.api as fa
    from fvrans.verify.gci import print_study

    out = stream if stream is not None else sys.stdout  # results to stdout, progress and errors to stderr
    err = stream if stream is not None else sys.stderr
    try:
        case = fa.load_case(case_path)
        if overrides:
            case = fa.apply_overrides(case, list(overrides))
        study = run_grid_study(case, quantities, report_dir, meshes=meshes, family=family, levels=levels,
                               safety_factor=safety_factor, formal_order=formal_order, gci_limit=gci_limit,
                               log=lambda m: print(m, file=err, flush=True))
    except CaseError as exc:
        print(f"error: {exc}", file=err)
        return 2
    print_study(study, out)
    print(f"report in {Path(report_dir) / 'grid_study.md'}", file=out)
    bad_runs = [r["label"] for r in study.runs if not r["converged"]]
    if bad_runs:
        print(f"not converged: {', '.join(bad_runs)} (the estimate assumes converged runs)", file=out)
    return 1 if bad_runs or any(gc.finest.flagged for gc in study.quantities.values()) else 0
