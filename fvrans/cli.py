"""The command line: parses, calls the API, prints. Exit status 0 = done/converged,
1 = ran but did not converge (or diverged; outputs of the last good state are written),
2 = bad input (case, mesh or option)."""

from __future__ import annotations

import argparse
import logging
import sys
from pathlib import Path

from fvrans.errors import FvransError

log = logging.getLogger(__name__)


def _cmd_run(args: argparse.Namespace) -> int:
    from fvrans import api
    from fvrans.checkpoint import CHECKPOINT_NAME, read_checkpoint
    from fvrans.progress import RunProgress, StopRequest

    case = api.load_case(args.case)
    if args.set:
        case = api.apply_overrides(case, args.set)
    problem = api.prepare(case)
    log.info("%s: %d cells, %d faces, patches %s", case.label, problem.mesh.n_cells, problem.mesh.n_faces,
             ", ".join(problem.mesh.patch_names))
    restart = None
    if args.restart:
        restart = read_checkpoint(args.restart)
        restart.check_matches(case, problem.mesh)
    out = Path(args.out)
    out.mkdir(parents=True, exist_ok=True)
    checkpoint = out / CHECKPOINT_NAME
    names = api.residual_names(case)
    monitor = api.build_monitor(problem, restart.fields if restart else None)
    progress = RunProgress(names, case.solver.max_iterations, case.solver.tolerance,
                           first_iteration=restart.iteration if restart else 0, quiet=args.quiet,
                           watch=monitor.progress_text)
    stop = StopRequest()

    def callback(it, res):
        progress(it, res)
        return stop(it, res)

    stop.install()
    try:
        result = api.solve(problem, callback=callback, restart=restart, checkpoint=checkpoint, monitor=monitor)
    finally:
        stop.restore()
        progress.close()
    if stop.signal_name is not None and result.interrupted:
        result.message = (f"interrupted by {stop.signal_name} at iteration {result.iterations}; continue with: "
                          f"fvrans run {args.case} --out DIR --restart {out}")
        result.extra["summary"] = {"interrupted_by": stop.signal_name}
    if not result.converged or case.solver.checkpoint_every > 0 or checkpoint.exists():
        result.write_checkpoint(checkpoint)
    result.write(out)
    if not args.no_plots:
        _plots(out)
    state = "converged" if result.converged else ("DIVERGED" if result.diverged else (
        "interrupted" if result.interrupted else "not converged"))
    print(
        f"{state} after {result.iterations} iterations in {result.wall_seconds:.1f} s; results in {out}",
        file=sys.stderr,
    )
    if result.message:
        print(result.message, file=sys.stderr)
    return 0 if result.converged else 1


def _plots(out: Path) -> None:
    """Plots of a result folder; a failure to plot is reported but does not fail the run."""
    from fvrans.post.plots import make_plots

    try:
        make_plots(out)
    except Exception as exc:  # noqa: BLE001 - the results are written; plotting is a convenience
        log.warning("plots of %s could not be made: %s", out, exc)


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
    from fvrans.case import load_case

    folder = Path(args.dir)
    files = sorted(folder.glob("*.toml"))
    if not files:
        print(f"no case files (*.toml) in {folder.resolve()}; pass the folder with --dir", file=sys.stderr)
        return 2
    width = max(len(f.name) for f in files)
    for f in files:
        try:
            c = load_case(f)
            text = c.description or c.title
        except FvransError as exc:
            text = _spec_title(f) or f"(cannot be loaded: {exc})"
        print(f"{f.name:<{width}}  {text}")
    return 0


def _spec_title(path: Path) -> str | None:
    """'comparison spec: <title>' for a file 'fvrans compare' reads, None for anything else."""
    from fvrans.verify import load_spec

    try:
        spec = load_spec(path)
    except FvransError:
        return None
    return f"comparison spec: {spec.title}"


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
            args.result_dirs, args.quantity, args.report, area=args.area, safety_factor=args.safety_factor
        )
    if args.result_dirs or (args.meshes is None) == (args.family is None):
        print("error: with --case give the grids either as --meshes M1 M2 M3 or as --family NAME "
              "(and no result folders)", file=sys.stderr)
        return 2
    return run_grid_study_command(
        args.case, args.quantity, args.report, meshes=args.meshes, family=args.family, levels=args.levels,
        overrides=args.set, safety_factor=args.safety_factor,
    )


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
        help="override a setting, value in TOML syntax, e.g. --set solver.max_iterations=200 (repeatable)",
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

    c = sub.add_parser("cases", help="list the case files of a folder with their descriptions")
    c.add_argument("--dir", default="cases", help="folder of case files (default: ./cases)")
    c.set_defaults(func=_cmd_cases)
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
                   help="with --case: override a setting on every grid (repeatable)")
    g.add_argument("--report", required=True, help="output folder")
    g.add_argument("--area", type=float, default=None, help="domain area for h = sqrt(area / N)")
    g.add_argument("--safety-factor", type=float, default=1.25, help="GCI safety factor (default 1.25)")
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
    args = build_parser().parse_args(argv)
    _setup_logging(logging.DEBUG if args.verbose else logging.WARNING if getattr(args, "quiet", False)
                   else logging.INFO)
    try:
        return int(args.func(args))
    except FvransError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
