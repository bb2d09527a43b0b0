"""The output files of a run as one set: written aside, then put in place together.

A result folder holds one consistent set of outputs: every file of it belongs to the same run
and iteration, also after the writing process was killed (``kill -9``, power loss) at any
instant. The set is written in three steps:

1. every file is written into the staging folder ``DIR/.fvrans-staging/`` (each file fsynced);
2. the list of the set's files and its iteration is written (atomically) to
   ``.fvrans-staging/.fvrans-outputs.json`` — the commit point;
3. each file is renamed into place, the files of the previous set that the new one lacks are
   removed, the new list replaces ``DIR/.fvrans-outputs.json`` and the staging folder goes.

:func:`recover` (called before any fvrans command reads or writes a result folder) finishes a
set killed after its commit point (step 3 again: renames are idempotent) and throws away one
killed before it (the previous set is untouched), together with temporary files of a killed
atomic write. So a reader sees the previous set or the new one, never a mix. Only files listed
in ``.fvrans-outputs.json`` are ever removed (regular files inside the folder; no link to
elsewhere is followed), and then the sub-folders they leave empty; other files in the folder are
left alone, so a reused output folder holds the new run's files and the user's own, nothing of
the earlier run.

A set may be a part of the folder (``scope="plots"``: the plots, drawn after the results):
then only the previous set's files within that part are replaced.
"""

from __future__ import annotations

import contextlib
import json
import logging
import os
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from fvrans.errors import CaseError
from fvrans.post.writers import TMP_PREFIX, fsync_dir, write_json_atomic
from fvrans.stop import holding_stops

log = logging.getLogger(__name__)

STAGING = ".fvrans-staging"
MANIFEST = ".fvrans-outputs.json"
MANIFEST_VERSION = 1


def _read_manifest(path: Path) -> dict[str, Any] | None:
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError):
        return None
    files = data.get("files") if isinstance(data, dict) else None
    if not isinstance(files, list) or not all(isinstance(f, str) for f in files):
        return None
    return data


def _safe_rel(rel: str) -> bool:
    """A manifest entry is a relative path below the folder (a hand-edited list cannot reach out)."""
    p = Path(rel)
    return bool(rel) and not p.is_absolute() and ".." not in p.parts and "\\" not in rel


def _in_scope(rel: str, scope: str | None) -> bool:
    return scope is None or rel == scope or rel.startswith(scope + "/")


def _files_below(stage: Path) -> list[str]:
    out = []
    for p in sorted(stage.rglob("*")):
        if p.is_file() and not p.name.startswith(TMP_PREFIX) and p.name != MANIFEST:
            out.append(p.relative_to(stage).as_posix())
    return out


def _remove_temporaries(folder: Path) -> None:
    """Temporary files of atomic writes killed before their rename (fvrans's own prefix only)."""
    for d in [folder, *[p for p in folder.iterdir() if p.is_dir() and not p.is_symlink()]]:
        for p in d.glob(TMP_PREFIX + "*"):
            with contextlib.suppress(OSError):
                p.unlink()


def recover(folder: str | os.PathLike) -> None:
    """Finish or undo a set of outputs left half-written in ``folder`` (see the module docstring)."""
    out = Path(folder)
    if not out.is_dir():
        return
    stage = out / STAGING
    try:
        if stage.is_dir():
            new = _read_manifest(stage / MANIFEST)
            if new is None:  # killed before the commit point: the previous set stands
                shutil.rmtree(stage, ignore_errors=True)
            else:  # killed after it: put the rest in place
                log.info("%s: finishing the outputs of an earlier run that was stopped while writing", out)
                _put_in_place(out, stage, new)
        _remove_temporaries(out)
    except OSError as exc:
        log.warning("%s: could not tidy up a half-written set of outputs (%s)", out, exc)


def _put_in_place(out: Path, stage: Path, new: dict[str, Any]) -> None:
    """Step 3 of the module docstring; every part may be repeated after a kill."""
    scope = new.get("scope")
    old = _read_manifest(out / MANIFEST) or {"files": []}
    root = out.resolve()
    new_files = [f for f in new["files"] if _safe_rel(f)]
    for rel in new_files:
        src = stage / rel
        dst = out / rel
        if not _lands_inside(dst, root):
            log.warning("%s: not put in place: %s leads out of the folder", out, dst.parent)
            continue
        if src.is_file():
            dst.parent.mkdir(parents=True, exist_ok=True)
            os.replace(src, dst)
    keep = set(new_files)
    for rel in old["files"]:
        if _safe_rel(rel) and _in_scope(rel, scope) and rel not in keep:
            _remove_listed(out / rel, root)
    for d in {(out / rel).parent for rel in new_files} | {out}:
        fsync_dir(d)
    # the folder's list: the new set, plus the previous files outside the scope of a partial set
    others = [rel for rel in old["files"] if _safe_rel(rel) and not _in_scope(rel, scope)
              and (out / rel).is_file()]
    listing = {k: v for k, v in new.items() if k not in ("files", "scope")}
    if scope is not None:
        listing = {k: v for k, v in old.items() if k not in ("files", "scope")} | {f"{scope}_iteration":
                                                                                  new.get("iteration")}
    listing["files"] = sorted(set(others) | keep)
    listing["version"] = MANIFEST_VERSION
    write_json_atomic(out / MANIFEST, listing)
    shutil.rmtree(stage, ignore_errors=True)
    fsync_dir(out)


def _remove_listed(path: Path, root: Path) -> None:
    """Remove a file of the previous set: a regular file whose folder lies inside ``root`` (a
    folder replaced by a link to elsewhere is not followed); then its folders below ``root`` that
    this leaves empty (``wall/``, ``profiles/``, ``plots/`` of a run that has none now)."""
    try:
        if path.is_symlink() or not path.is_file() or root not in path.resolve().parents:
            return
        path.unlink()
    except OSError:
        return
    d = path.parent
    while d.resolve() != root and root in d.resolve().parents and not d.is_symlink():
        try:
            d.rmdir()  # only an empty folder goes
        except OSError:
            break
        d = d.parent


def _lands_inside(target: Path, root: Path) -> bool:
    """Whether ``target``'s folder (after symbolic links) lies inside ``root`` (a folder of the
    set that is a link to elsewhere would carry the file out of the output folder)."""
    d = target.parent
    while not d.exists() and d != d.parent:
        d = d.parent  # a folder still to be made: judge by the nearest one that exists
    real = d.resolve()
    return real == root or root in real.parents


def open_folder(folder: str | os.PathLike) -> Path:
    """Create the result folder ``folder`` if missing (a :class:`CaseError` naming it when it
    cannot be) and :func:`recover` it; return it as a Path."""
    out = Path(folder)
    try:
        out.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise CaseError(f"cannot create the output folder {out}: {exc.strerror or exc}") from None
    recover(out)
    return out


@contextlib.contextmanager
def output_set(folder: str | os.PathLike, scope: str | None = None,
               iteration: int | None = None) -> Iterator[Path]:
    """Yield a staging folder to write a set of outputs into; when the block ends normally, put
    the set in place as one (see the module docstring). An exception (or a stop) inside the block
    leaves the folder's previous set as it was and removes the staging folder.

    ``scope``: a sub-folder name (e.g. ``"plots"``) when the set replaces only that part of the
    previous set. ``iteration``: recorded in ``.fvrans-outputs.json``.
    """
    out = open_folder(folder)
    stage = out / STAGING
    shutil.rmtree(stage, ignore_errors=True)
    stage.mkdir()
    try:
        yield stage
        files = _files_below(stage)
        root = out.resolve()
        for rel in files:
            if not _lands_inside(out / rel, root):
                raise CaseError(f"refusing to write {out / rel}: {(out / rel).parent} leads out of the output "
                                f"folder {root} (a symbolic link?); remove it or choose another --out")
        new = {"files": files, "iteration": iteration, "scope": scope}
        with holding_stops():  # from the commit point on, the set is put in place whole
            write_json_atomic(stage / MANIFEST, new)
            fsync_dir(stage)
            _put_in_place(out, stage, new)
    except BaseException:
        if not (stage / MANIFEST).is_file():
            shutil.rmtree(stage, ignore_errors=True)
        raise


def listed_outputs(folder: str | os.PathLike) -> dict[str, Any] | None:
    """The content of ``folder/.fvrans-outputs.json`` (files of the current set, iteration), or None."""
    return _read_manifest(Path(folder) / MANIFEST)


__all__ = ["MANIFEST", "STAGING", "listed_outputs", "open_folder", "output_set", "recover"]
