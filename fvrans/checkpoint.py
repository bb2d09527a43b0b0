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
from fvrans.mesh.mesh import Mesh
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
        p = p / CHECKPOINT_NAME
        if not p.is_file():
            raise CaseError(
                f"{p.parent}: no {CHECKPOINT_NAME} in this folder; a run writes one when "
                "solver.checkpoint_every > 0 or when it stops before converging — give the --out folder of "
                "such a run"
            )
    if not p.is_file():
        raise CaseError(f"{p}: no such checkpoint file; give a result folder or its {CHECKPOINT_NAME}")
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
    if int(data["format_version"]) not in READABLE_VERSIONS:
        raise CaseError(f"{p}: checkpoint format {int(data['format_version'])}, this fvrans reads "
                        f"{', '.join(map(str, READABLE_VERSIONS))}; restart with the fvrans version that wrote it")
    names = [str(n) for n in data["history_names"].tolist()]
    variables = {k[len(VARIABLE_PREFIX):]: v for k, v in data.items() if k.startswith(VARIABLE_PREFIX)}
    if int(data["format_version"]) == 1:  # the model variable under its own name
        variables = {k: v for k, v in data.items() if k not in need and k != "pressure_gradient"}
    fields = Fields(data["velocity"], data["pressure"], data["face_flux"], variables)
    return Checkpoint(
        fields=fields,
        iteration=int(data["iteration"]),
        history_names=names,
        history_rows=np.asarray(data["history_rows"], dtype=float).reshape(-1, len(names)),
        history_seconds=np.asarray(data["history_seconds"], dtype=float),
        velocity_scale=float(data["velocity_scale"]),
        mesh_hash=str(data["mesh_hash"]),
        physics=json.loads(str(data["physics"])),
        source=str(p),
        pressure_gradient=data.get("pressure_gradient"),
    )


__all__ = ["CHECKPOINT_NAME", "Checkpoint", "mesh_hash", "physics_settings", "read_checkpoint", "write_checkpoint"]
