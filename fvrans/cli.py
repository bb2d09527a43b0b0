"""The command line: parses, calls the API, prints. Exit status 0 = done/converged,
1 = ran but did not converge (or diverged; outputs of the last good state are written),
2 = bad input (case, mesh or option), 130 / 143 = stopped by SIGINT / SIGTERM before the
command's work was done (see :mod:`fvrans.stop` and README)."""

from __future__ import annotations

import argparse
import logging
import os
import shlex
import sys
from pathlib import Path

from fvrans.case.load import OVERRIDE_RULE
from fvrans.errors import FvransError

log = logging.getLogger(__name__)


def _cmd_run(args: argparse.Namespace) -> int:
    """``fvrans run``. Phases of a stop request (SIGINT, SIGTERM; :mod:`fvrans.stop`): during
    start-up it ends the command at once (nothing written, status 128 + signal number); while
    solving it stops the run after the current iteration (outputs written, status 1); while the
    outputs are written it waits for them; while plotting it skips the remaining plots (the
    status stays that of the run)."""
    from fvrans import api
    from fvrans.checkpoint import CHECKPOINT_NAME, read_checkpoint
    from fvrans.jit import COMPILE_MESSAGE, CompileWatch
    from fvrans.post.outputs import listed_outputs, open_folder, recover
    from fvrans.progress import RunProgress
    from fvrans.stop import StopRequest, active

    stop = active() or StopRequest()  # main() installs it; without main, flags only
    stop.enter("start-up")
    case = api.load_case(args.case)
    if args.set:
        case = api.apply_overrides(case, args.set)
    progress: RunProgress | None = None

    def compiling() -> None:  # once, when numba starts compiling (a cold cache)
        if not args.quiet:
            if progress is not None:
                progress.note(COMPILE_MESSAGE)
            else:
                print(COMPILE_MESSAGE, file=sys.stderr, flush=True)

    watch = CompileWatch(on_first=compiling)
    with watch:
        problem = api.prepare(case)
    log.info("%s: %d cells, %d faces, patches %s", case.label, problem.mesh.n_cells, problem.mesh.n_faces,
             ", ".join(problem.mesh.patch_names))
    if log.isEnabledFor(logging.DEBUG):
        _log_details(case, problem)
    out = Path(args.out)
    restart = None
    if args.restart:
        recover(args.restart)  # a set of outputs half put in place by a killed run is finished first
        restart = read_checkpoint(args.restart)
        restart.check_matches(case, problem.mesh)
    open_folder(out)  # created, and a set of outputs half put in place by a killed run finished first
    checkpoint = out / CHECKPOINT_NAME
    names = api.residual_names(case)
    monitor = api.build_monitor(problem, restart.fields if restart else None)
    progress = RunProgress(names, case.solver.max_iterations, case.solver.tolerance,
                           first_iteration=restart.iteration if restart else 0, quiet=args.quiet,
                           watch=monitor.progress_text)

    def callback(it, res):
        progress(it, res)
        return stop(it, res)

    try:
        stop.enter("solving")
        with watch:
            result = api.solve(problem, callback=callback, restart=restart, checkpoint=checkpoint, monitor=monitor)
        stop.enter("writing")
    finally:
        progress.close()
    if watch.count:
        log.info("compiled %d kernels in %.1f s (kept out of the solve time: summary.json's compile_seconds)",
                 watch.count, watch.seconds)
    again = " ".join(shlex.quote(str(a)) for a in ("fvrans", "run", out / api.RESOLVED_CASE, "--out", out,
                                                    "--restart", out))
    if stop.signal_name is not None and result.interrupted:
        result.message = f"interrupted by {stop.signal_name} at iteration {result.iterations}; continue with: {again}"
        result.extra.setdefault("summary", {})["interrupted_by"] = stop.signal_name
    elif not result.converged and not result.diverged:
        result.message += f"; continue with: {again} (--set solver.max_iterations=N for N more)"
    # one set of outputs (fvrans.post.outputs): it replaces the previous run's set in a reused folder
    restarted_here = restart is not None and Path(restart.source).resolve() == checkpoint.resolve()
    keep_checkpoint = not result.converged or case.solver.checkpoint_every > 0 or restarted_here
    result.write(out, checkpoint=keep_checkpoint, resolved_case=True)
    plots_note = ""
    if not args.no_plots:
        stop.enter("plotting")
        plots_note = _plots(out, stop.requested)
    log.debug("wrote %s", ", ".join((listed_outputs(out) or {}).get("files", [])))
    log.debug("solve %.2f s, of which compiling kernels %.2f s", result.wall_seconds, result.compile_seconds)
    state = "converged" if result.converged else ("DIVERGED" if result.diverged else (
        "interrupted" if result.interrupted else "not converged"))
    print(f"{state} after {result.iterations} iterations in {result.wall_seconds:.1f} s; results in {out}")
    if result.message:
        print(result.message, file=sys.stderr)
    if stop.signal_name is not None and stop.signal_phase in ("writing", "plotting"):
        print(f"{stop.signal_name} arrived while {stop.signal_phase}: the results were written whole{plots_note}",
              file=sys.stderr)
    return 0 if result.converged else 1


def _log_details(case, problem) -> None:
    """What ``-v`` adds before a run: the boundary conditions, the model, the solver settings and
    the mesh's quality figures."""
    from fvrans.mesh.quality import mesh_quality

    for name, b in case.boundaries.items():
        keys = {k: v for k, v in vars(b).items() if v is not None and k != "kind"}
        log.debug("boundary %s: %s %s", name, b.kind, keys or "")
    log.debug("model: %s%s", case.model.turbulence,
              f" ({case.model.sa_variant})" if case.turbulent else "")
    s = case.solver
    log.debug("solver: %s, relax u %g p %g turbulence %g, %s convection, %s gradient, limiter %s, tolerance %g, "
              "at most %d iterations, momentum solver %s", s.coupling, s.relax_velocity, s.relax_pressure,
              s.relax_turbulence, s.convection, s.gradient, s.limiter, s.tolerance, s.max_iterations,
              s.momentum_solver)
    q = mesh_quality(problem.mesh, problem.geom)
    log.debug("mesh: %d triangles, %d quads, %d polygons; largest non-orthogonality %.1f deg, skewness %.3g, "
              "aspect ratio %.3g%s", q.n_triangles, q.n_quads, q.n_polygons, q.max_nonorth_deg, q.max_skewness,
              q.max_aspect_ratio, "".join(f"; warning: {w}" for w in q.warnings))


def _plots(out: Path, should_stop=None) -> str:
    """Plots of a result folder; a failure to plot is reported but does not fail the run. Returns
    a note when a stop request cut the plots short."""
    from fvrans.post.plots import make_plots

    try:
        make_plots(out, should_stop=should_stop)
    except Exception as exc:  # noqa: BLE001 - the results are written; plotting is a convenience
        log.warning("plots of %s could not be made: %s", out, exc)
    if should_stop is not None and should_stop():
        return f"; the plots were cut short (draw them with: fvrans plot {out})"
    return ""


def _cmd_plot(args: argparse.Namespace) -> int:
    from fvrans.post.plots import make_plots

    paths = make_plots(args.result_dir, mesh_edges=args.mesh_edges, streamlines=not args.no_streamlines,
                       window=args.window)
    for path in paths:
        print(path)
    return 0


def _cmd_info(args: argparse.Namespace) -> int:
    from fvrans.mesh import compute_geometry, read_mesh
    from fvrans.mesh.quality import format_report, mesh_quality

    path = Path(args.path)
    if path.suffix == ".toml":
        from fvrans.case import load_case
        from fvrans.case.build import build_case_mesh

        spec = _spec_kind(path)
        if spec is not None:
            print(_spec_description(path, spec))
            return 0
        case = load_case(path)
        print(f"# {case.label}: resolved settings (every default filled in)")
        print(case.to_toml())
        mesh = build_case_mesh(case)
    else:
        mesh = read_mesh(path)
    geom = compute_geometry(mesh)
    print(format_report(mesh_quality(mesh, geom), mesh.source))
    return 0


def _cmd_cases(args: argparse.Namespace) -> int:
    from fvrans.bundled import bundled_cases_dir
    from fvrans.case import load_case

    folder = Path(args.dir) if args.dir is not None else bundled_cases_dir()
    files = sorted(folder.glob("*.toml"))
    if args.dir is None:
        files += sorted(folder.glob("*/*.toml"))
    if not files:
        print(f"no case files (*.toml) in {folder.resolve()}; pass the folder with --dir", file=sys.stderr)
        return 2
    if args.dir is None:
        print(f"# the bundled cases ({folder}); copy one to start from: fvrans copy-case NAME DIR", file=sys.stderr)
    names = {f: f.relative_to(folder).as_posix() for f in files}
    width = max(len(n) for n in names.values())
    for f in files:
        try:
            c = load_case(f)
            text = c.description or c.title
        except FvransError as exc:
            text = _spec_title(f) or f"(cannot be loaded: {exc})"
        print(f"{names[f]:<{width}}  {text}")
    return 0


def _cmd_copy_case(args: argparse.Namespace) -> int:
    from fvrans.bundled import copy_case

    written = copy_case(args.name, args.dir, overwrite=args.overwrite)
    for p in written:
        print(p)
    first, out = shlex.quote(str(written[0])), shlex.quote(str(Path(args.dir) / "run"))
    kind = _spec_kind(written[0])
    hint = {"comparison": f"compare a result folder with it: fvrans compare RESULT_DIR {first} --report OUT",
            "sweep": f"run it with: fvrans sweep {first} --out {out}"}.get(kind or "",
                                                                         f"run it with: fvrans run {first} --out {out}")
    print(hint, file=sys.stderr)
    return 0


def _spec_title(path: Path) -> str | None:
    """'comparison spec: <title>' or 'sweep spec: <title>' for a spec file, None for anything else."""
    kind = _spec_kind(path)
    if kind is None:
        return None
    try:
        loaded = _load_spec(path, kind)
    except FvransError as exc:
        return f"{kind} spec (cannot be loaded: {exc})"
    return f"{kind} spec: {loaded.title}"


#: top-level tables that mark a spec file: comparison specs list [[item]], sweep specs [[parameter]]
_SPEC_MARKS = {"comparison": ("item",), "sweep": ("parameter", "plan", "output")}


def _spec_kind(path: Path) -> str | None:
    """``"comparison"`` or ``"sweep"`` when the TOML file at ``path`` is a spec rather than a case
    (told by its top-level tables), else None."""
    from fvrans.case.load import read_toml

    try:
        data = read_toml(path)
    except FvransError:
        return None
    for kind, marks in _SPEC_MARKS.items():
        if any(m in data for m in marks) and "mesh" not in data:
            return kind
    return None


def _load_spec(path: Path, kind: str):
    if kind == "comparison":
        from fvrans.verify import load_spec

        return load_spec(path)
    from fvrans.sweep import load_sweep

    return load_sweep(path)


def _spec_description(path: Path, kind: str) -> str:
    """What ``fvrans info`` says about a spec file: what it is, what it holds, which command takes it."""
    spec = _load_spec(path, kind)
    if kind == "comparison":
        names = ", ".join(i.name for i in spec.items)
        return (f"{path}: a comparison spec, not a case file: {spec.title or '(no title)'}; {len(spec.items)} "
                f"item(s): {names}\ncompare a result folder with it: fvrans compare RESULT_DIR {path} --report OUT")
    from fvrans.sweep import design_points

    runs = len(design_points(spec))
    params = ", ".join(p.name for p in spec.parameters)
    base = spec.case if not hasattr(spec.case, "label") else spec.case.label
    return (f"{path}: a sweep spec, not a case file: {spec.title or '(no title)'}; base case {base}; "
            f"{runs} run(s) varying {params}; {len(spec.outputs)} output(s)\n"
            f"run it with: fvrans sweep {path} --out DIR")


def _cmd_compare(args: argparse.Namespace) -> int:
    from fvrans.verify import compare_command

    return compare_command(args.result_dir, args.spec, args.report)


def _cmd_grid_study(args: argparse.Namespace) -> int:
    from fvrans.verify import grid_study_command
    from fvrans.verify.grid_runs import run_grid_study_command

    if args.case is None:
        if args.meshes or args.family or args.set:
            print("error: --meshes, --family and --set need --case CASE.toml", file=sys.stderr)
            return 2
        return grid_study_command(
            args.result_dirs, args.quantity, args.report, area=args.area, safety_factor=args.safety_factor,
            formal_order=args.formal_order, gci_limit=args.gci_limit / 100.0,
        )
    if args.result_dirs or (args.meshes is None) == (args.family is None):
        print("error: with --case give the grids either as --meshes M1 M2 M3 or as --family NAME "
              "(and no result folders)", file=sys.stderr)
        return 2
    return run_grid_study_command(
        args.case, args.quantity, args.report, meshes=args.meshes, family=args.family, levels=args.levels,
        overrides=args.set, safety_factor=args.safety_factor, formal_order=args.formal_order,
        gci_limit=args.gci_limit / 100.0,
    )


def _cmd_overlay(args: argparse.Namespace) -> int:
    from fvrans.post.overlay import overlay_plots, sweep_labels

    folders = [Path(f) for f in args.result_dirs]
    labels = list(args.label)
    if args.sweep:
        if folders or labels:
            print("error: give result folders (with --label) or --sweep SWEEP_DIR, not both", file=sys.stderr)
            return 2
        named = sweep_labels(args.sweep)
        folders, labels = list(named), list(named.values())
    for path in overlay_plots(folders, args.out, labels or None):
        print(path)
    return 0


def _cmd_sweep(args: argparse.Namespace) -> int:
    from fvrans.sweep import sweep_command

    return sweep_command(args.spec, args.out, workers=args.workers, scheduler=args.scheduler, quiet=args.quiet)


def build_parser() -> argparse.ArgumentParser:
    p = argparse.ArgumentParser(
        prog="fvrans",
        description="Steady incompressible RANS on unstructured 2D meshes (cell-centred finite volumes).",
    )
    p.add_argument("-v", "--verbose", action="store_true", help="log debugging detail")
    sub = p.add_subparsers(dest="command", required=True)

    r = sub.add_parser("run", help="solve a case file and write the results into a folder")
    r.add_argument("case", help="case file (TOML)")
    r.add_argument("--out", required=True, help="output folder (created if missing)")
    r.add_argument(
        "--set", action="append", default=[], metavar="KEY=VALUE",
        help=f"override a setting (repeatable), e.g. --set solver.max_iterations=200: {OVERRIDE_RULE}",
    )
    r.add_argument("--quiet", action="store_true", help="no progress bar, only errors and the final line")
    r.add_argument("--restart", metavar="DIR",
                   help="continue from the checkpoint of an earlier run (its --out folder or checkpoint.npz)")
    r.add_argument("--no-plots", action="store_true", help="skip the plots in OUT/plots")
    r.set_defaults(func=_cmd_run)

    pl = sub.add_parser("plot", help="(re)draw the plots of a result folder into DIR/plots")
    pl.add_argument("result_dir", help="folder written by 'fvrans run'")
    pl.add_argument("--mesh-edges", action="store_true", help="draw the cell edges on the field maps")
    pl.add_argument("--no-streamlines", action="store_true", help="no streamlines on the velocity map")
    pl.add_argument("--window", nargs=4, type=float, metavar=("XMIN", "XMAX", "YMIN", "YMAX"),
                    help="also draw zoomed maps of this window (default: the case's output.map_window)")
    pl.set_defaults(func=_cmd_plot)

    i = sub.add_parser("info", help="mesh report of a mesh file, or resolved settings and mesh report of a case")
    i.add_argument("path", help="mesh file (any format meshio reads) or case file (.toml)")
    i.set_defaults(func=_cmd_info)

    c = sub.add_parser("cases", help="list the bundled case files (or those of a folder) with their descriptions")
    c.add_argument("--dir", default=None, help="folder of case files (default: the cases bundled with fvrans)")
    c.set_defaults(func=_cmd_cases)
    cc = sub.add_parser("copy-case", help="copy a bundled case with its mesh and the files it refers to into a "
                                          "folder, to start from")
    cc.add_argument("name", help="a bundled case or spec as 'fvrans cases' lists it, e.g. cavity_re100")
    cc.add_argument("dir", help="folder to copy into (created if missing)")
    cc.add_argument("--overwrite", action="store_true", help="replace files of the same name in DIR")
    cc.set_defaults(func=_cmd_copy_case)
    k = sub.add_parser("compare", help="compare a result folder with reference data as a TOML spec describes")
    k.add_argument("result_dir", help="folder written by 'fvrans run'")
    k.add_argument("spec", help="comparison spec (TOML)")
    k.add_argument("--report", required=True, help="folder for report.json, junit.xml, summary.md and plots")
    k.set_defaults(func=_cmd_compare)

    g = sub.add_parser("grid-study", help="observed order, Richardson extrapolation and GCI on 3+ grids "
                                          "(existing result folders, or runs of a case)")
    g.add_argument("result_dirs", nargs="*", help="result folders of one case on systematically refined grids")
    g.add_argument(
        "--quantity", action="append", required=True, metavar="QUANTITY",
        help="a scalar of summary.json (walls.plate.forces.Cd) or a wall value at a station "
             "(wall.plate.cf@x=0.97) (repeatable)",
    )
    g.add_argument("--case", default=None, help="run this case file on each grid (results in REPORT/runs/<grid>)")
    g.add_argument("--meshes", nargs="+", default=None, metavar="MESH", help="with --case: the mesh files")
    g.add_argument("--family", default=None,
                   help="with --case: a generator family of fvrans.mesh.generate, e.g. flat_plate_family")
    g.add_argument("--levels", nargs="+", default=["coarse", "medium", "fine"], help="levels of --family")
    g.add_argument("--set", action="append", default=[], metavar="KEY=VALUE",
                   help=f"with --case: override a setting on every grid (repeatable); {OVERRIDE_RULE}")
    g.add_argument("--report", required=True, help="output folder")
    g.add_argument("--area", type=float, default=None, help="domain area for h = sqrt(area / N)")
    g.add_argument("--safety-factor", type=float, default=1.25, help="GCI safety factor (default 1.25)")
    g.add_argument("--formal-order", type=float, default=2.0,
                   help="formal order of the scheme (default 2); an observed order below half of it is flagged")
    g.add_argument("--gci-limit", type=float, default=10.0, metavar="PERCENT",
                   help="a GCI_fine above this is flagged (default 10 %%, common practice)")
    g.set_defaults(func=_cmd_grid_study)

    s = sub.add_parser("sweep", help="run a parameter sweep (a spec file) and write a results table")
    s.add_argument("spec", help="sweep spec (TOML)")
    s.add_argument("--out", required=True, help="output folder: runs/<key>/ per run, results.csv, results.json")
    s.add_argument("--workers", type=int, default=None, metavar="N",
                   help="worker processes of a local dask cluster on 127.0.0.1 (default: one per CPU); "
                        "1 runs in this process without dask")
    s.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run on an existing dask cluster, e.g. tcp://10.0.0.5:8786")
    s.add_argument("--quiet", action="store_true", help="no progress bar or summary")
    s.set_defaults(func=_cmd_sweep)

    o = sub.add_parser("overlay", help="draw several result folders on the same plots (walls, probes, "
                                       "profiles in wall units, residuals)")
    o.add_argument("result_dirs", nargs="*", help="folders written by 'fvrans run' (two or more)")
    o.add_argument("--label", action="append", default=[], metavar="NAME",
                   help="legend name of each folder, in order (default: the run's title, else the folder name)")
    o.add_argument("--sweep", default=None, metavar="SWEEP_DIR",
                   help="overlay every run of a sweep folder, named by its parameter values")
    o.add_argument("--out", required=True, help="folder for the PNG files")
    o.set_defaults(func=_cmd_overlay)
    return p


class _MessageFormatter(logging.Formatter):
    """INFO lines as the bare message; warnings and errors with their level and logger."""

    def format(self, record: logging.LogRecord) -> str:
        if record.levelno == logging.INFO:
            return record.getMessage()
        return f"{record.levelname.lower()} {record.name}: {record.getMessage()}"


class _StderrHandler(logging.StreamHandler):
    """Writes to the current ``sys.stderr`` (which tests and progress bars may replace)."""

    def __init__(self) -> None:
        super().__init__()

    @property
    def stream(self):  # type: ignore[override]
        return sys.stderr

    @stream.setter
    def stream(self, value) -> None:
        pass


def _setup_logging(level: int) -> None:
    """The command line's logging: the ``fvrans`` loggers at ``level`` to stderr."""
    root = logging.getLogger("fvrans")
    for h in list(root.handlers):
        if isinstance(h, _StderrHandler):
            root.removeHandler(h)
    handler = _StderrHandler()
    handler.setFormatter(_MessageFormatter())
    root.addHandler(handler)
    root.setLevel(level)


def main(argv: list[str] | None = None) -> int:
    """Exit status: see the module docstring; a stop request (SIGINT, SIGTERM) that ends a command
    before its work is done gives 128 + the signal number (130, 143), as a shell reports it."""
    from fvrans.stop import Stopped, StopRequest

    args = build_parser().parse_args(argv)
    _setup_logging(logging.DEBUG if args.verbose else logging.WARNING if getattr(args, "quiet", False)
                   else logging.INFO)
    stop = StopRequest("start-up").install()
    try:
        return int(args.func(args))
    except FvransError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except Stopped as exc:
        print(f"stopped by {exc.signal_name} during {exc.phase}; nothing more was written", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:  # the reader went away (fvrans info ... | head): no traceback
        os.dup2(os.open(os.devnull, os.O_WRONLY), sys.stdout.fileno())
        return 0
    finally:
        stop.restore()


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
