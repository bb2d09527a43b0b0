"""Checkpoints: the state of a run in one ``.npz`` file, written atomically, read back to resume.

A checkpoint holds the :class:`~fvrans.fields.Fields` (cell velocity and pressure, face
mass fluxes, the turbulence model's variables by name), the cell pressure gradient of the last
iteration, the number of outer iterations done, the residual history so far, the velocity scale of the run (the largest
boundary or initial speed, against which the divergence guard measures speeds), and the
identity of the problem: a SHA-256 of the mesh (points, cells, faces, patches) and the physical
settings (fluid, model, boundary conditions). A restart with another mesh or other physics is
refused with a message naming what differs; solver settings (iterations, tolerance, relaxation,
...) may change between runs.

The file is written to a temporary file in the same folder and renamed onto the target
(:func:`fvrans.post.writers.atomic_write`), so an interrupted write leaves the previous
checkpoint intact.
"""

from __future__ import annotations

import hashlib
import json
import os
import zipfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import IO, Any

import numpy as np

from fvrans.case import Case
from fvrans.errors import CaseError
from fvrans.fields import Fields
from fvrans.files import input_file
from fvrans.mesh.mesh import Mesh
from fvrans.post.outputs import recover
from fvrans.post.writers import atomic_write

#: file name of the checkpoint inside a result folder
CHECKPOINT_NAME = "checkpoint.npz"
FORMAT_VERSION = 2
#: formats this version reads (1: the model variable stored under its own name)
READABLE_VERSIONS = (1, 2)
#: prefix of the arrays of the model variables (``variable.<name>``)
VARIABLE_PREFIX = "variable."
#: setting tables that define the problem (a restart must match them)
PHYSICS_TABLES = ("fluid", "model", "boundary", "formula_constants")


@dataclass
class Checkpoint:
    """A saved run state. ``history_rows`` is (iterations, len(history_names))."""

    fields: Fields
    iteration: int
    history_names: list[str]
    history_rows: np.ndarray
    history_seconds: np.ndarray
    velocity_scale: float
    mesh_hash: str
    physics: dict[str, Any] = field(default_factory=dict)
    source: str = "<in memory>"
    #: cell pressure gradient of the last iteration (the next iteration's pressure force)
    pressure_gradient: np.ndarray | None = None

    def check_matches(self, case: Case, mesh: Mesh) -> None:
        """Raise CaseError unless ``case`` and ``mesh`` are the problem this checkpoint was made for."""
        f = self.fields
        if len(f.pressure) != mesh.n_cells or len(f.face_flux) != mesh.n_faces:
            raise CaseError(
                f"{self.source}: the checkpoint was written for another mesh: it holds {len(f.pressure)} cells and "
                f"{len(f.face_flux)} faces, the mesh of {case.label} has {mesh.n_cells} and {mesh.n_faces}; restart "
                "with the case (and mesh) of that run")
        if mesh_hash(mesh) != self.mesh_hash:
            raise CaseError(
                f"{self.source}: the checkpoint was written for another mesh than the one of {case.label} "
                f"({mesh.n_cells} cells, {mesh.n_faces} faces, vs {len(self.fields.pressure)} cells, "
                f"{len(self.fields.face_flux)} faces in the checkpoint); restart with the case (and mesh) of "
                "that run, or start afresh without --restart"
            )
        now = physics_settings(case)
        differ = _differences(self.physics, now)
        if differ:
            shown = "; ".join(differ[:5]) + (f"; and {len(differ) - 5} more" if len(differ) > 5 else "")
            raise CaseError(
                f"{self.source}: the checkpoint was written for other physical settings than {case.label}: "
                f"{shown}; restart with the settings of that run (solver settings may change), or start "
                "afresh without --restart"
            )


def mesh_hash(mesh: Mesh) -> str:
    """SHA-256 of the mesh topology and coordinates (points, cells, faces, patches)."""
    h = hashlib.sha256()
    for a in (mesh.points, mesh.cell_points, mesh.cell_offsets, mesh.face_points, mesh.face_owner,
              mesh.face_neighbour):
        arr = np.ascontiguousarray(a)
        h.update(str(arr.dtype.str).encode())
        h.update(str(arr.shape).encode())
        h.update(arr.tobytes())
    for p in mesh.patches:
        h.update(f"{p.name}:{p.start}:{p.stop};".encode())
    for q in mesh.periodic:
        t = q.translation
        h.update(f"periodic {q.first}:{q.second}:{t[0]!r}:{t[1]!r}:{q.start}:{q.stop};".encode())
    return h.hexdigest()


def physics_settings(case: Case) -> dict[str, Any]:
    """The settings a restart must keep: the case's fluid, model and boundary tables and the
    constants of its boundary formulas, when it has any (an inlet
    profile file by its name and the SHA-256 of its content, so a moved case still matches)."""
    d = case.to_dict()
    out = json.loads(json.dumps({k: d[k] for k in PHYSICS_TABLES if k in d}, default=str))
    for b in out["boundary"].values():
        if "profile" in b:
            p = Path(b["profile"])
            digest = hashlib.sha256(p.read_bytes()).hexdigest() if p.is_file() else "missing"
            b["profile"] = f"{p.name} (sha256 {digest[:16]})"
    return out


def _differences(old: Any, new: Any, path: str = "") -> list[str]:
    if isinstance(old, dict) and isinstance(new, dict):
        out: list[str] = []
        for k in sorted(set(old) | set(new)):
            key = f"{path}.{k}" if path else str(k)
            if k not in old:
                out.append(f"{key} is new ({new[k]!r})")
            elif k not in new:
                out.append(f"{key} was {old[k]!r}, now absent")
            else:
                out.extend(_differences(old[k], new[k], key))
        return out
    if old != new:
        return [f"{path} was {old!r}, now {new!r}"]
    return []


def _serialise(f: IO[bytes], arrays: dict[str, np.ndarray]) -> None:
    """Write the arrays as an uncompressed npz archive to the open file ``f``."""
    np.savez(f, **arrays)


def write_checkpoint(
    path: str | os.PathLike,
    fields: Fields,
    iteration: int,
    history_names: list[str],
    history_rows: Any,
    history_seconds: Any,
    velocity_scale: float,
    case: Case,
    mesh: Mesh,
    pressure_gradient: np.ndarray | None = None,
) -> Path:
    """Write a checkpoint to ``path`` atomically (temporary file, fsync, rename); return the path."""
    names = [str(n) for n in history_names]
    rows = np.asarray(history_rows, dtype=float).reshape(-1, len(names))
    arrays: dict[str, np.ndarray] = {
        "format_version": np.array(FORMAT_VERSION),
        "velocity": np.asarray(fields.velocity, dtype=float),
        "pressure": np.asarray(fields.pressure, dtype=float),
        "face_flux": np.asarray(fields.face_flux, dtype=float),
        "iteration": np.array(int(iteration)),
        "history_names": np.array(names, dtype=str),
        "history_rows": rows,
        "history_seconds": np.asarray(history_seconds, dtype=float),
        "velocity_scale": np.array(float(velocity_scale)),
        "mesh_hash": np.array(mesh_hash(mesh)),
        "physics": np.array(json.dumps(physics_settings(case), sort_keys=True)),
    }
    for name, values in fields.variables.items():
        arrays[VARIABLE_PREFIX + name] = np.asarray(values, dtype=float)
    if pressure_gradient is not None:
        arrays["pressure_gradient"] = np.asarray(pressure_gradient, dtype=float)
    target = Path(path)
    atomic_write(target, lambda f: _serialise(f, arrays), binary=True)
    return target


def read_checkpoint(path: str | os.PathLike) -> Checkpoint:
    """Read a checkpoint file, or ``checkpoint.npz`` of a result folder; CaseError if missing or
    not a checkpoint."""
    p = Path(path)
    if p.is_dir():
        recover(p)  # a set of outputs half put in place by a killed run is finished first
        p = p / CHECKPOINT_NAME
        if not p.is_file():
            raise CaseError(
                f"{p.parent}: no {CHECKPOINT_NAME} in this folder; a run writes one when "
                "solver.checkpoint_every > 0 or when it stops before converging — give the --out folder of "
                "such a run"
            )
    if not p.exists():
        raise CaseError(f"{p}: no such checkpoint file; give a result folder or its {CHECKPOINT_NAME}")
    input_file(p, "checkpoint")  # a regular file (a pipe would block np.load)
    try:
        with np.load(p, allow_pickle=False) as z:
            data = {k: z[k] for k in z.files}
    except (OSError, ValueError, zipfile.BadZipFile, EOFError) as exc:
        raise CaseError(f"{p}: not a readable checkpoint ({exc}); restart from another checkpoint") from None
    need = ("format_version", "velocity", "pressure", "face_flux", "iteration", "history_names",
            "history_rows", "history_seconds", "velocity_scale", "mesh_hash", "physics")
    missing = [k for k in need if k not in data]
    if missing:
        raise CaseError(f"{p}: not an fvrans checkpoint (missing {', '.join(missing)})")
    version = _scalar(data, "format_version", p, "iu")
    if version not in READABLE_VERSIONS:
        raise CaseError(f"{p}: checkpoint format {version}, this fvrans reads "
                        f"{', '.join(map(str, READABLE_VERSIONS))}; restart with the fvrans version that wrote it")
    if version == 1:  # the model variable under its own name
        data = {k: v for k, v in data.items()}
        for k in [k for k in data if k not in need and k != "pressure_gradient"]:
            data[VARIABLE_PREFIX + k] = data.pop(k)
    return _checked(data, p)


#: the largest iteration count a checkpoint may hold
MAX_ITERATION = 10**9


def _scalar(data: dict[str, np.ndarray], key: str, p: Path, kinds: str) -> Any:
    a = data[key]
    if a.shape != () or a.dtype.kind not in kinds:
        raise CaseError(f"{p}: not a valid checkpoint: {key} is an array of shape {a.shape} and type {a.dtype}, not a "
                        "single value; restart from another checkpoint")
    return a.item()


def _checked(data: dict[str, np.ndarray], p: Path) -> Checkpoint:
    """A Checkpoint from the arrays of a file, every shape, type and range checked (a hand-edited or
    damaged file is refused with what is wrong, not a failure deep in the solver)."""

    def bad(msg: str) -> CaseError:
        return CaseError(f"{p}: not a valid checkpoint: {msg}; restart from another checkpoint or start afresh")

    def numbers(key: str, shape: tuple, finite: bool = True) -> np.ndarray:
        a = data[key]
        if a.dtype.kind not in "fiu":
            raise bad(f"{key} holds {a.dtype} values, not numbers")
        if a.ndim != len(shape) or any(s is not None and s != n for s, n in zip(shape, a.shape)):
            want = "(" + ", ".join("n" if s is None else str(s) for s in shape) + ")"
            raise bad(f"{key} has shape {a.shape}, expected {want}")
        a = a.astype(float)
        if finite and not np.all(np.isfinite(a)):
            raise bad(f"{key} holds non-finite values")
        return a

    velocity = numbers("velocity", (None, 2))
    nc = len(velocity)
    pressure = numbers("pressure", (nc,))
    face_flux = numbers("face_flux", (None,))
    variables = {k[len(VARIABLE_PREFIX):]: numbers(k, (nc,)) for k in data if k.startswith(VARIABLE_PREFIX)}
    grad_p = numbers("pressure_gradient", (nc, 2)) if "pressure_gradient" in data else None
    iteration = _scalar(data, "iteration", p, "iu")
    if not 0 <= iteration <= MAX_ITERATION:
        raise bad(f"iteration {iteration} is outside 0..{MAX_ITERATION}")
    names_a = data["history_names"]
    if names_a.ndim != 1 or names_a.dtype.kind != "U" or not 1 <= len(names_a) <= 16:
        raise bad(f"history_names has shape {names_a.shape} and type {names_a.dtype}, expected a few names")
    names = [str(n) for n in names_a.tolist()]
    rows = numbers("history_rows", (iteration, len(names)), finite=False) if data["history_rows"].ndim == 2 else None
    if rows is None:
        raise bad(f"history_rows has shape {data['history_rows'].shape}, expected ({iteration}, {len(names)})")
    seconds = data["history_seconds"]
    if seconds.dtype.kind not in "fiu" or seconds.shape != (iteration,):
        raise bad(f"history_seconds has shape {seconds.shape}, expected ({iteration},)")
    scale = _scalar(data, "velocity_scale", p, "fiu")
    if not (np.isfinite(scale) and scale > 0):
        raise bad(f"velocity_scale {scale!r} is not a positive finite number")
    try:
        physics = json.loads(str(_scalar(data, "physics", p, "U")))
    except (ValueError, RecursionError):
        raise bad("its physical settings are not readable JSON") from None
    if not isinstance(physics, dict):
        raise bad("its physical settings are not a table")
    return Checkpoint(
        fields=Fields(velocity, pressure, face_flux, variables),
        iteration=int(iteration),
        history_names=names,
        history_rows=rows,
        history_seconds=seconds.astype(float),
        velocity_scale=float(scale),
        mesh_hash=str(_scalar(data, "mesh_hash", p, "U")),
        physics=physics,
        source=str(p),
        pressure_gradient=grad_p,
    )


__all__ = ["CHECKPOINT_NAME", "Checkpoint", "mesh_hash", "physics_settings", "read_checkpoint", "write_checkpoint"]
