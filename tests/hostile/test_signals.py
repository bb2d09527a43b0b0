"""Stop requests and kills (issue 13, item 2): a signal at start-up, while solving, while the
outputs are written and while plotting; `kill -9` at every rename of a set of outputs.

Signals are sent by the process to itself from inside the step under test (deterministic; the
handlers are those `fvrans run` installs), so each phase is hit exactly. A converged run is never
lost, exit statuses are those README documents, and no temporary file is left.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import time
import warnings
from pathlib import Path

import numpy as np
import pytest
from hostile_cases import write_cavity

import fvrans.api as fa
import fvrans.post.plots as plots
from fvrans.checkpoint import read_checkpoint
from fvrans.cli import main
from fvrans.post import outputs
from fvrans.post.outputs import MANIFEST, STAGING, recover
from fvrans.post.writers import TMP_PREFIX

SIGNALS = [signal.SIGINT, signal.SIGTERM]
IDS = ["SIGINT", "SIGTERM"]

def _case(tmp_path: Path, n: int = 8, tol: float = 1e-4, max_it: int = 400) -> Path:
    return write_cavity(tmp_path / "case.toml", n=n, tolerance=tol, max_iterations=max_it)


def _leftovers(root: Path) -> list[Path]:
    return [p for p in root.rglob("*") if p.name.startswith((TMP_PREFIX, STAGING))]


def _send(sig):
    os.kill(os.getpid(), sig)
    time.sleep(0.01)  # the handler runs at the next bytecode boundary of the main thread


def _consistent(out: Path) -> dict:
    """The outputs of one run and iteration: summary, residuals, fields and checkpoint agree."""
    summary = json.loads((out / "summary.json").read_text())
    res = np.genfromtxt(out / "residuals.csv", delimiter=",", names=True)
    assert len(np.atleast_1d(res)) == summary["iterations"]
    assert (out / "fields.vtu").is_file()
    listed = outputs.listed_outputs(out)
    assert listed is not None and listed["iteration"] == summary["iterations"]
    assert sorted(listed["files"]) == sorted(p.relative_to(out).as_posix() for p in out.rglob("*")
                                             if p.is_file() and p.name != MANIFEST)
    if (out / "checkpoint.npz").exists():
        assert read_checkpoint(out).iteration == summary["iterations"]
    return summary


@pytest.mark.parametrize("sig", SIGNALS, ids=IDS)
def test_a_stop_during_start_up_ends_at_once_writing_nothing(tmp_path, monkeypatch, capsys, sig):
    real = fa.prepare

    def prepare(*a, **k):
        _send(sig)
        return real(*a, **k)

    monkeypatch.setattr(fa, "prepare", prepare)
    out = tmp_path / "out"
    handler = signal.getsignal(signal.SIGINT)
    assert main(["run", str(_case(tmp_path)), "--out", str(out), "--quiet"]) == 128 + sig
    assert "during start-up" in capsys.readouterr().err
    assert not out.exists() and not _leftovers(tmp_path)
    assert signal.getsignal(signal.SIGINT) is handler  # handlers given back


@pytest.mark.parametrize("sig", SIGNALS, ids=IDS)
def test_a_stop_while_solving_writes_the_last_state(tmp_path, monkeypatch, sig):
    from fvrans.progress import RunProgress

    real = RunProgress.__call__

    def progress(self, it, res):
        real(self, it, res)
        if it == 5:
            _send(sig)

    monkeypatch.setattr(RunProgress, "__call__", progress)
    out = tmp_path / "out"
    assert main(["run", str(_case(tmp_path, tol=1e-12)), "--out", str(out), "--quiet", "--no-plots"]) == 1
    s = _consistent(out)
    assert s["interrupted"] and s["interrupted_by"] == sig.name and s["iterations"] == 5
    assert read_checkpoint(out).iteration == 5 and not _leftovers(tmp_path)


def test_a_second_stop_while_solving_ends_at_once(tmp_path, monkeypatch, capsys):
    from fvrans.progress import RunProgress

    real = RunProgress.__call__

    def progress(self, it, res):
        real(self, it, res)
        if it == 3:
            _send(signal.SIGINT)
            _send(signal.SIGINT)

    monkeypatch.setattr(RunProgress, "__call__", progress)
    out = tmp_path / "out"
    code = main(["run", str(_case(tmp_path, tol=1e-12)), "--out", str(out), "--quiet", "--no-plots",
                 "--set", "solver.checkpoint_every=1"])
    assert code == 130 and "during solving" in capsys.readouterr().err
    assert [p.name for p in out.iterdir()] == ["checkpoint.npz"]  # the periodic one, whole
    assert read_checkpoint(out).iteration in (2, 3) and not _leftovers(tmp_path)


@pytest.mark.parametrize("sig", SIGNALS, ids=IDS)
@pytest.mark.parametrize("where", ["write_vtu_atomic", "write_json_atomic"])
def test_a_stop_while_writing_waits_for_the_whole_set(tmp_path, monkeypatch, capsys, sig, where):
    """The signal arrives as the first file (fields.vtu) or the last (summary.json) is written:
    the converged run is written whole and the exit status stays 0."""
    real = getattr(fa, where)
    sent = []

    def writer(*a, **k):
        if not sent:
            sent.append(1)
            _send(sig)
        return real(*a, **k)

    monkeypatch.setattr(fa, where, writer)
    out = tmp_path / "out"
    assert main(["run", str(_case(tmp_path)), "--out", str(out), "--quiet", "--no-plots"]) == 0
    assert sent and "written whole" in capsys.readouterr().err
    s = _consistent(out)
    assert s["converged"] and not s["interrupted"] and not _leftovers(tmp_path)


@pytest.mark.parametrize("sig", SIGNALS, ids=IDS)
def test_a_stop_while_plotting_keeps_the_converged_run(tmp_path, monkeypatch, capsys, sig):
    real = plots.save_figure

    def save(*a, **k):
        path = real(*a, **k)
        _send(sig)
        return path

    monkeypatch.setattr(plots, "save_figure", save)
    out = tmp_path / "out"
    assert main(["run", str(_case(tmp_path)), "--out", str(out), "--quiet"]) == 0
    assert "plots were cut short" in capsys.readouterr().err
    assert _consistent(out)["converged"]
    assert len(list((out / "plots").glob("*.png"))) == 1 and not _leftovers(tmp_path)


def test_a_stop_in_fvrans_plot_keeps_the_previous_plots(tmp_path, monkeypatch):
    out = tmp_path / "out"
    assert main(["run", str(_case(tmp_path)), "--out", str(out), "--quiet"]) == 0
    before = {p.name: p.read_bytes() for p in (out / "plots").iterdir()}
    real = plots.save_figure

    def save(*a, **k):
        path = real(*a, **k)
        _send(signal.SIGTERM)
        return path

    monkeypatch.setattr(plots, "save_figure", save)
    assert main(["plot", str(out)]) == 143
    assert {p.name: p.read_bytes() for p in (out / "plots").iterdir()} == before
    assert not _leftovers(tmp_path)


def _snapshot(folder: Path) -> dict[str, bytes]:
    return {p.relative_to(folder).as_posix(): p.read_bytes() for p in sorted(folder.rglob("*"))
            if p.is_file() and p.name != MANIFEST}


def _kill_at(n_replace: int, write) -> int:
    """Run ``write()`` in a forked child that kills itself (SIGKILL) at its n-th os.replace;
    returns the child's end status."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DeprecationWarning)  # fork of a threaded process
        pid = os.fork()
    if pid == 0:  # the child: no clean-up of any kind runs after the kill
        try:
            count = [0]
            real = os.replace

            def replace(a, b):
                count[0] += 1
                if count[0] == n_replace:
                    os.kill(os.getpid(), signal.SIGKILL)
                return real(a, b)

            os.replace = replace
            write()
        finally:
            os._exit(0)
    deadline = time.monotonic() + 60
    while True:
        done, status = os.waitpid(pid, os.WNOHANG)
        if done:
            return status
        if time.monotonic() > deadline:
            os.kill(pid, signal.SIGKILL)
        time.sleep(0.01)


def test_kill_9_at_any_rename_leaves_one_consistent_set(tmp_path):
    """Set A (a converged run with plots) is replaced by set B (3 iterations from rest, with a
    checkpoint); the writer is killed at each of its renames in turn. After recovery the folder
    holds exactly A's files or exactly B's, never a mix; a user's own file is left alone."""
    case = fa.load_case(_case(tmp_path))
    a_dir, b_dir, out = tmp_path / "a", tmp_path / "b", tmp_path / "out"
    result_a = fa.solve(case)
    result_a.write(a_dir)
    plots.make_plots(a_dir)
    (a_dir / "notes.txt").write_text("the user's own file")
    result_b = fa.solve(case.set("solver.max_iterations", 3))
    result_b.write(b_dir, checkpoint=True)
    set_a, set_b = _snapshot(a_dir), _snapshot(b_dir)
    set_b["notes.txt"] = set_a["notes.txt"]
    assert set_a.keys() != set_b.keys()
    seen = set()
    for k in range(1, 40):
        shutil.rmtree(out, ignore_errors=True)
        shutil.copytree(a_dir, out)
        status = _kill_at(k, lambda: result_b.write(out, checkpoint=True))
        killed = os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
        recover(out)
        got = _snapshot(out)
        assert got in (set_a, set_b), f"mixed set after a kill at rename {k}"
        assert not _leftovers(out)
        seen.add("A" if got == set_a else "B")
        if not killed:  # k is past the last rename: the write completed
            assert got == set_b
            break
    assert seen == {"A", "B"} and k > 5
