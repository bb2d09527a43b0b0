"""Running a sweep: one solve per design point, in-process or on a dask.distributed cluster.

Each run writes its folder ``OUT/runs/<key>/`` (the usual result files, ``case.toml`` with the
resolved case and ``run.json`` with its record, written last); ``key`` is a short hash of the
resolved case (base case with the parameter values applied, every default filled in) and the
fvrans version. A run whose ``run.json`` records a finished solve (converged, not converged or
diverged) is not run again: its row is rebuilt from its folder. Runs that raised are retried.
Every exception of a run is caught and recorded in its row; the other runs go on.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import logging
import os
import platform
import sys
import time
import uuid
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.case import Case
from fvrans.errors import CaseError, FvransError
from fvrans.post.outputs import recover
from fvrans.post.writers import atomic_write, to_jsonable, write_json_atomic
from fvrans.stop import Stopped, holding_stops
from fvrans.sweep.collect import collect_outputs
from fvrans.sweep.plan import DesignPoint, design_points
from fvrans.sweep.spec import Output, Sweep, check_against_case, check_sweep, load_sweep
from fvrans.sweep.table import ResultsTable, table_columns, write_table

log = logging.getLogger(__name__)

RUNS = "runs"
RECORD = "run.json"
FINISHED = ("converged", "not-converged", "diverged")
#: seconds to wait for a connection to a scheduler (and for a local cluster to start)
CONNECT_TIMEOUT = 60.0


def _version() -> str:
    from fvrans import __version__

    return __version__


def _hash(data: Any) -> str:
    text = json.dumps(to_jsonable(data), sort_keys=True, separators=(",", ":"))
    return hashlib.sha256(text.encode("utf-8")).hexdigest()[:12]


def run_key(case: Case) -> str:
    """Short hash of a resolved case (every setting, defaults filled in) and the fvrans version."""
    return _hash({"case": case.to_dict(), "fvrans": _version()})


@dataclass(frozen=True)
class RunTask:
    """What a worker needs for one run (plain data, picklable)."""

    key: str
    changes: dict[str, Any]
    case_data: dict[str, Any]
    case_source: str | None
    run_dir: str
    outputs: tuple[Output, ...]


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="microseconds")


def _error_text(exc: BaseException) -> str:
    return f"{type(exc).__name__}: {exc}"


def _same_topology(a: Any, b: Any) -> bool:
    """Same cells and faces (a warm start between them is valid); points may differ."""
    return (
        a.n_cells == b.n_cells and a.n_faces == b.n_faces and a.n_internal_faces == b.n_internal_faces
        and np.array_equal(a.face_owner, b.face_owner) and np.array_equal(a.face_neighbour, b.face_neighbour)
    )


def _execute(task: RunTask, previous: Any = None) -> tuple[dict[str, Any], Any]:
    """One run; ``previous`` (a Result or None) warm-starts it when its mesh has the same topology.
    Returns the record (outputs included) and the Result (None for a failed run)."""
    from fvrans import api
    from fvrans.case import case_from_dict

    run_dir = Path(task.run_dir)
    record: dict[str, Any] = {"key": task.key, "parameters": task.changes, "started": _now(),
                              "fvrans": _version(), "host": platform.node(), "pid": os.getpid(),
                              "warm_start_from": ""}
    t0 = time.perf_counter()
    result = None
    try:
        run_dir.mkdir(parents=True, exist_ok=True)
        case = case_from_dict(task.case_data, task.case_source)
        text = case.to_toml()
        atomic_write(run_dir / "case.toml", lambda f: f.write(text))
        problem = api.prepare(case)
        initial = None
        if previous is not None and _same_topology(previous.mesh, problem.mesh):
            initial = previous
            record["warm_start_from"] = previous.extra.get("sweep_key", "")
        result = api.solve(problem, initial=initial)
        result.extra["sweep_key"] = task.key
        result.write(run_dir)
        status = "converged" if result.converged else ("diverged" if result.diverged else "not-converged")
        record.update(status=status, converged=bool(result.converged), iterations=int(result.iterations),
                      error="" if result.converged else result.message)
    except Exception as exc:  # noqa: BLE001 - a failing run is recorded, the sweep goes on
        log.debug("run %s failed", task.key, exc_info=True)
        record.update(status="failed", converged=False, iterations=None, error=_error_text(exc))
        result = None
    record["wall_seconds"] = time.perf_counter() - t0
    record["finished"] = _now()
    try:
        write_json_atomic(run_dir / RECORD, to_jsonable(record))
    except (OSError, FvransError) as exc:
        record["error"] = (record["error"] + "; " if record["error"] else "") + f"run record not written: {exc}"
    return _with_outputs(record, run_dir, task.outputs), result


def execute_run(task: RunTask) -> dict[str, Any]:
    """Solve one design point from the case's initial state, write its folder and return its
    record (never raises for a failing run: the exception text goes into the record)."""
    return _execute(task)[0]


def execute_chain(tasks: Sequence[RunTask]) -> list[dict[str, Any]]:
    """Solve design points one after the other, each warm-started from the last converged one
    (when the meshes have the same topology); returns their records."""
    records = []
    previous = None
    for t in tasks:
        rec, result = _execute(t, previous)
        if result is not None and result.converged:
            previous = result
        records.append(rec)
    return records


def _with_outputs(record: dict[str, Any], run_dir: Path, outputs: Sequence[Output]) -> dict[str, Any]:
    out = dict(record)
    if out["status"] in FINISHED:
        values, errors = collect_outputs(run_dir, outputs)
        out["outputs"] = values
        out["output_errors"] = errors
    else:
        out["outputs"] = {o.name: None for o in outputs}
        out["output_errors"] = []
    return out


def _finished_record(run_dir: Path) -> dict[str, Any] | None:
    """The record of a finished run in ``run_dir`` (None when there is none to reuse)."""
    path = run_dir / RECORD
    if not path.is_file():
        return None
    recover(run_dir)  # outputs half put in place by a killed worker are finished first
    try:
        rec = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    if not isinstance(rec, dict) or rec.get("status") not in FINISHED or not (run_dir / "summary.json").is_file():
        return None
    return rec


def _failed_record(key: str, changes: dict[str, Any], error: str, status: str = "failed") -> dict[str, Any]:
    return {"key": key, "parameters": changes, "status": status, "converged": False, "iterations": None,
            "wall_seconds": None, "error": error, "outputs": {}, "output_errors": []}


# ------------------------------------------------------------------------------------------
# executors
# ------------------------------------------------------------------------------------------
Done = Callable[[RunTask, dict[str, Any]], None]


def _run_in_process(tasks: Sequence[RunTask], done: Done, warm_start: bool) -> None:
    previous = None
    for t in tasks:
        rec, result = _execute(t, previous)
        if warm_start and result is not None and result.converged:
            previous = result
        done(t, rec)


def chains(tasks: Sequence[RunTask], n_workers: int, longest: int = 8) -> list[list[RunTask]]:
    """Consecutive design points in chains for warm starts: one chain per worker, or chains of
    ``longest`` runs when there are more runs (many chains balance the load).

    >>> [len(c) for c in chains(list(range(10)), 2)], [len(c) for c in chains(list(range(20)), 2)]
    ([5, 5], [8, 8, 4])
    """
    n = len(tasks)
    size = max(1, min(longest, -(-n // max(1, n_workers))))
    return [list(tasks[i : i + size]) for i in range(0, n, size)]


def default_workers() -> int:
    """The number of CPUs this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except AttributeError:  # not on Linux
        return max(1, os.cpu_count() or 1)


def _run_on_dask(tasks: Sequence[RunTask], done: Done, client: Any, timeout: float | None,
                 warm_start: bool) -> None:
    from distributed import as_completed

    tag = uuid.uuid4().hex[:8]  # task names unique to this sweep, even on a shared cluster
    futures = {}
    if warm_start:
        n_workers = max(1, len(client.scheduler_info().get("workers", {})))
        for i, chain in enumerate(chains(tasks, n_workers)):
            futures[client.submit(execute_chain, chain, key=f"fvrans-chain-{tag}-{i}", pure=False)] = chain
    else:
        for t in tasks:
            futures[client.submit(execute_run, t, key=f"fvrans-run-{tag}-{t.key}", pure=False)] = [t]
    try:
        for fut in as_completed(list(futures), timeout=timeout):
            group = futures[fut]
            try:
                recs = fut.result()
                recs = recs if warm_start else [recs]
            except Exception as exc:  # noqa: BLE001 - e.g. the workers running it kept dying
                text = f"the run was lost on the cluster: {_error_text(exc)}"
                recs = [_failed_record(t.key, t.changes, text) for t in group]
            fut.release()
            for task, rec in zip(group, recs):
                done(task, rec)
    finally:
        for fut in futures:
            if not fut.done():
                fut.cancel()


def _local_cluster(n_workers: int) -> tuple[Any, Any]:
    """A local dask cluster on the loopback interface only (processes, one thread each, no
    dashboard; the scheduler's small HTTP server on a free loopback port) and a client of it.

    Its connections use TLS with mutual authentication by temporary credentials made for this
    cluster alone (``distributed.security.Security.temporary``, held in memory): another local
    user can reach the loopback port but cannot connect without them, so cannot run code in the
    workers."""
    from distributed import Client, LocalCluster
    from distributed.security import Security

    security = Security.temporary()
    cluster = LocalCluster(
        n_workers=n_workers, threads_per_worker=1, processes=True, host="127.0.0.1",
        dashboard_address=None, scheduler_kwargs={"dashboard_address": "127.0.0.1:0"},
        silence_logs=logging.ERROR, security=security,
    )
    try:
        client = Client(cluster, timeout=CONNECT_TIMEOUT, security=security)
    except BaseException:
        cluster.close()
        raise
    return cluster, client


def _connect(address: str) -> Any:
    """A client of the scheduler at ``address``; TLS credentials come from the dask configuration
    (README: securing a cluster)."""
    from distributed import Client

    host = address.split("://", 1)[-1].rsplit(":", 1)[0].strip("[]")
    if not address.startswith("tls://") and host not in ("127.0.0.1", "localhost", "::1"):
        log.warning("the scheduler at %s is reached without TLS: anyone who can reach it can run code on its "
                    "workers; see README, 'Securing a cluster'", address)
    try:
        return Client(address, timeout=CONNECT_TIMEOUT)
    except (OSError, TimeoutError) as exc:
        raise CaseError(f"cannot reach the dask scheduler at {address!r} ({exc}); check the address "
                        "(e.g. tcp://10.0.0.5:8786) and that the scheduler is running") from None


# ------------------------------------------------------------------------------------------
# the sweep
# ------------------------------------------------------------------------------------------
class _Bar:
    """A progress bar over runs (rich, on stderr); silent when ``enabled`` is False."""

    def __init__(self, total: int, enabled: bool):
        self.enabled = enabled and total > 0
        self.failed = 0
        if self.enabled:
            from rich.console import Console
            from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

            self.progress = Progress(
                TextColumn("sweep"), BarColumn(), MofNCompleteColumn(), TextColumn("{task.fields[note]}"),
                TimeElapsedColumn(), console=Console(stderr=True),
            )
            self.task = self.progress.add_task("runs", total=total, note="")
            self.progress.start()

    def advance(self, ok: bool) -> None:
        self.failed += 0 if ok else 1
        if self.enabled:
            note = f"{self.failed} not ok" if self.failed else ""
            self.progress.update(self.task, advance=1, note=note)

    def close(self) -> None:
        if self.enabled:
            self.progress.stop()


def _order_key(v: Any) -> tuple:
    """Sort key of parameter values: numbers by value, lists item by item, other values as text."""
    if isinstance(v, (list, tuple)):
        return tuple(_order_key(x) for x in v)
    if isinstance(v, (int, float)) and not isinstance(v, bool):
        return (0, float(v))
    return (1, str(v))


def _row(point: DesignPoint, sweep: Sweep, rec: dict[str, Any]) -> dict[str, Any]:
    row: dict[str, Any] = {"run": point.index, "key": rec["key"]}
    for p in sweep.parameters:
        row[p.name] = point.changes[p.key]
    outputs = rec.get("outputs") or {}
    for o in sweep.outputs:
        row[o.name] = outputs.get(o.name)
    errors = [rec.get("error") or "", *rec.get("output_errors", [])]
    row.update(status=rec["status"], converged=bool(rec.get("converged")), iterations=rec.get("iterations"),
               wall_seconds=rec.get("wall_seconds"), error="; ".join(e for e in errors if e))
    return row


def _ok(rec: dict[str, Any]) -> bool:
    return rec["status"] == "converged" and not rec.get("error") and not rec.get("output_errors")


def run_sweep(
    sweep: Sweep,
    out_dir: str | Path,
    workers: int | None = None,
    scheduler: str | Any | None = None,
    progress: bool = False,
    timeout: float | None = None,
) -> ResultsTable:
    """Run every design point of ``sweep`` (skipping finished runs already in ``out_dir``) and
    write ``out_dir/results.csv`` and ``results.json``; returns the table.

    ``workers``: ``1`` runs in this process (no dask); ``N > 1`` starts a local dask cluster of N
    worker processes on 127.0.0.1; ``None`` sizes it to this machine's CPUs (both capped at the
    number of runs to do). ``scheduler``: the address of a running dask scheduler, or a
    ``distributed.Client``, to run on instead. ``timeout``: seconds after which a sweep on dask
    stops waiting (``TimeoutError``; finished runs are kept for a rerun).
    """
    check_sweep(sweep)
    if scheduler is not None and workers is not None:
        raise CaseError("give either workers (a local cluster of this size) or scheduler (a running cluster), "
                        "not both")
    if workers is not None and (isinstance(workers, bool) or not isinstance(workers, int) or workers < 1):
        raise CaseError(f"workers must be an integer >= 1, got {workers!r}")
    base = sweep.base_case()
    check_against_case(sweep, base)
    out = Path(out_dir).absolute()
    (out / RUNS).mkdir(parents=True, exist_ok=True)
    points = design_points(sweep)

    records: dict[str, dict[str, Any]] = {}
    refused = 0
    point_keys: list[str] = []
    tasks: dict[str, RunTask] = {}
    for point in points:
        try:
            case = base.replace(point.changes)
        except CaseError as exc:  # a value the case refuses: this run fails, the others go on
            key = _hash({"base": base.to_dict(), "changes": point.changes, "fvrans": _version()})
            records[key] = _failed_record(key, point.changes, _error_text(exc))
            refused += 1
            point_keys.append(key)
            continue
        key = run_key(case)
        point_keys.append(key)
        if key in records or key in tasks:
            continue  # the same resolved case twice in the plan: one run
        run_dir = out / RUNS / key
        rec = _finished_record(run_dir)
        if rec is not None:
            records[key] = _with_outputs(rec, run_dir, sweep.outputs)
        else:
            tasks[key] = RunTask(key, point.changes, case.to_dict(), case.label if case.source else None,
                                 str(run_dir), tuple(sweep.outputs))
    reused = len(records) - refused
    bar = _Bar(len(records) + len(tasks), progress)
    for rec in records.values():
        bar.advance(_ok(rec))

    def done(task: RunTask, rec: dict[str, Any]) -> None:
        records[task.key] = rec
        bar.advance(_ok(rec))

    todo = list(tasks.values())
    if sweep.warm_start and sweep.sampling != "factorial":
        todo.sort(key=lambda t: _order_key(list(t.changes.values())))
    t0 = time.perf_counter()
    stopped: BaseException | None = None
    try:
        n = default_workers() if workers is None else workers
        if not todo:
            pass
        elif scheduler is None and min(n, len(todo)) == 1:
            _run_in_process(todo, done, sweep.warm_start)
        elif scheduler is None:
            cluster, client = _local_cluster(min(n, len(todo)))
            try:
                _run_on_dask(todo, done, client, timeout, sweep.warm_start)
            finally:
                client.close()
                cluster.close()
        elif isinstance(scheduler, str):
            client = _connect(scheduler)
            try:
                _run_on_dask(todo, done, client, timeout, sweep.warm_start)
            finally:
                client.close()
        else:
            _run_on_dask(todo, done, scheduler, timeout, sweep.warm_start)
    except (Stopped, KeyboardInterrupt) as exc:  # write the table of the runs done, then stop
        stopped = exc
    finally:
        bar.close()
    if stopped is not None:
        why = f"the sweep was stopped by {getattr(stopped, 'signal_name', 'SIGINT')} before this run finished; " \
              "rerun the command to continue"
        for p, k in zip(points, point_keys):
            if k not in records:
                records[k] = _failed_record(k, p.changes, why, status="not-run")
    rows = [_row(p, sweep, records[k]) for p, k in zip(points, point_keys) if k in records]
    table = ResultsTable(
        table_columns([p.name for p in sweep.parameters], [o.name for o in sweep.outputs]), rows,
        meta={"title": sweep.title, "spec": sweep.label, "base_case": base.label, "fvrans": _version(),
              "parameters": [p.name for p in sweep.parameters],
              "sampling": sweep.sampling, "runs_done": len(todo), "runs_reused": reused, "runs_refused": refused,
              "seconds": time.perf_counter() - t0, "stopped": stopped is not None},
    )
    with holding_stops():  # the table is written whole, even when a stop arrives meanwhile
        write_table(out, table)
    if stopped is not None:
        raise stopped
    return table


def sweep_command(spec: str | Path, out_dir: str | Path, workers: int | None = None,
                  scheduler: str | None = None, quiet: bool = False) -> int:
    """``fvrans sweep``: run a spec file; exit status 0 all runs fine, 1 any failed or did not
    converge (or an output is missing), 2 bad spec (raised as CaseError), 130 / 143 stopped by
    SIGINT / SIGTERM (the table of the runs done so far is written)."""
    sweep = load_sweep(spec)
    if workers != 1 or scheduler is not None:
        import distributed  # noqa: F401 - its import sets its loggers' levels; quieten them after
    dask_log = logging.getLogger("distributed")
    if not log.isEnabledFor(logging.DEBUG) and dask_log.getEffectiveLevel() < logging.WARNING:
        dask_log.setLevel(logging.WARNING)  # the cluster's start/stop messages
    try:
        table = run_sweep(sweep, out_dir, workers=workers, scheduler=scheduler, progress=not quiet)
    except Stopped as exc:
        print(f"stopped by {exc.signal_name}: the results table of the runs done so far is in "
              f"{Path(out_dir) / 'results.csv'} (the others are marked not-run); rerun the same command to "
              "continue", file=sys.stderr)
        return exc.exit_status
    bad = table.failed()
    if not quiet:
        meta = table.meta
        refused = f", {meta['runs_refused']} refused by the case" if meta["runs_refused"] else ""
        print(f"{len(table)} runs ({meta['runs_done']} run now, {meta['runs_reused']} from earlier{refused}), "
              f"{len(bad)} not ok; table in {Path(out_dir) / 'results.csv'}")
        for r in bad[:10]:
            print(f"  run {r['run']} ({r['key']}): {r['status']}: {r['error']}", file=sys.stderr)
        if len(bad) > 10:
            print(f"  ... and {len(bad) - 10} more (see the error column)", file=sys.stderr)
    return 0 if not bad else 1
