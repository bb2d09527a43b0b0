"""A seeded fuzz test of `fvrans run` (issue 13, acceptance): case files and meshes mutated in type,
range, path, name and structure. For every input: no traceback (only fvrans's own errors leave
`main`), exit status 0, 1 or 2, a refusal names the case or mesh file, nothing is written outside
--out, and every number written (wall and probe tables, residuals, monitored quantities, fields,
checkpoint, forces) is finite.

The mutations are drawn from a fixed seed, so a failure is reproduced by its index; the message
lists the mutation. About 40 s on an idle core (300 inputs of a few iterations on small meshes).
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import os
import random
from pathlib import Path

import meshio
import numpy as np
import pytest
from hostile_cases import box_case_data, box_mesh, files_under

from fvrans.case.tomlwrite import dumps
from fvrans.checkpoint import read_checkpoint
from fvrans.cli import main
from fvrans.mesh.io import write_mesh
from fvrans.mesh.mesh import build_mesh
from fvrans.monitor import MONITOR_CSV

SEED = 13
N_INPUTS = 300
NAMES = ["../../escaped", "../../../../../../../../fuzz_escape",
         "/tmp/fvrans_fuzz_abs", "..", ".", "a\\b", "a/b", "x" * 300, "", " ", "wall\u00e9",
         "-rf", ".hidden", "con", "a b", "$HOME"]
PATHS = ["/dev/zero", "../../../etc/passwd", "pipe", "folder", "a\x00b.msh", "x" * 300 + ".msh", "loop",
         "missing.msh", "", "/"]


def _deep(depth: int):
    v: list = []
    for _ in range(depth):
        v = [v]
    return v


VALUES = ["", "x", "nan", True, False, 0, -1, 1, 3, 2**62, 10**9, 0.0, -0.5, 1e-300, 1e300, 5e-324,
          float("nan"), float("inf"), float("-inf"), [], [1.0], [1.0, 2.0], [1e300, 0.0], ["a", "b"],
          [float("nan"), 0.0], {}, {"a": 1}, _deep(40), "x" * 300, 1e31, -1e-31, 0.7, 2.0, [0.5, 0.5, 0.5]]


def _leaves(d, path=()):
    if isinstance(d, dict):
        for k, v in d.items():
            yield path + (k,), v
            yield from _leaves(v, path + (k,))


def _set(d, path, value):
    node = d
    for k in path[:-1]:
        node = node[k]
    if value is _DELETE:
        del node[path[-1]]
    else:
        node[path[-1]] = value


_DELETE = object()


class Inputs:
    """The inputs of one fuzz case in their own folder: a mesh file (maybe none) and a case file."""

    def __init__(self, folder: Path, rng: random.Random):
        self.folder = folder
        self.rng = rng
        self.notes: list[str] = []
        folder.mkdir()
        os.mkfifo(folder / "pipe")
        (folder / "folder").mkdir()
        (folder / "loop").symlink_to(folder / "loop")

    def mesh_file(self, names: list[str]) -> Path:
        rng = self.rng
        fmt = rng.choice(["gmsh22", "gmsh41", "vtu"])
        path = self.folder / ("box.vtu" if fmt == "vtu" else "box.msh")
        m = box_mesh(names, n=6)
        pts = m.points.copy()
        kind = rng.choice(["plain", "move", "far", "count", "cut", "bytes", "drop"])
        self.notes.append(f"mesh {fmt} {kind}")
        cells = [m.cell(c) for c in range(m.n_cells)]
        patches = {p.name: m.face_points[p.start:p.stop] for p in m.patches}
        if kind == "move":  # an interior node moved by up to 2 cells: folds or not
            i = rng.choice([k for k in range(len(pts)) if 0 < pts[k, 0] < 1 and 0 < pts[k, 1] < 1])
            pts[i] += np.array([rng.uniform(-2, 2), rng.uniform(-2, 2)]) / 6
        if kind == "drop":
            cells.pop(rng.randrange(len(cells)))
        if kind in ("move", "drop", "far"):
            try:
                m = build_mesh(pts, cells, patches, check_overlaps=False, quiet=True)
            except Exception:  # noqa: BLE001 - then the unmodified mesh, the case mutations still apply
                kind = "plain"
        write_mesh(m, path, file_format=fmt)
        if kind == "far" and fmt == "vtu":  # one unused node far away
            mm = meshio.read(path)
            mm.points = np.vstack([mm.points, [[1e300, -1e300, 0.0]]])
            meshio.write(path, mm)
        data = path.read_bytes()
        if kind == "count" and fmt == "gmsh41":
            data = data.replace(b"$Nodes\n1", b"$Nodes\n2", 1)
        elif kind == "cut":
            data = data[: rng.randrange(1, len(data))]
        elif kind == "bytes":
            b = bytearray(data)
            for _ in range(rng.randrange(1, 8)):
                b[rng.randrange(len(b))] = rng.randrange(256)
            data = bytes(b)
        path.write_bytes(data)
        return path

    def case_file(self) -> Path:
        rng = self.rng
        if rng.random() < 0.4:  # a generated mesh
            data = {"title": "fuzz", "mesh": {"generator": "cavity", "parameters": {"n": 6}},
                    "fluid": {"density": 1.0, "viscosity": 0.05},
                    "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
                    "solver": {"max_iterations": 3}}
            self.notes.append("generator")
        else:
            names = rng.sample(NAMES, rng.randrange(1, 4)) if rng.random() < 0.5 else ["floor"]
            names = [n for n in names if n.strip()] or ["floor"]
            mesh = self.mesh_file(names)
            data = box_case_data(mesh.name, names)
            self.notes.append(f"patches {names!r}")
        if rng.random() < 0.3:
            data["probes"] = {rng.choice(["mid", "a.b", "../p", "x" * 200]): {
                "start": [0.5, 0.1], "end": [0.5, 0.9], "points": rng.choice([5, 1, 10**5, 2**62])}}
        if rng.random() < 0.3:
            data["model"] = {"turbulence": "spalart-allmaras"}
        for _ in range(rng.choice([0, 0, 1, 1, 2])):  # a third unmutated: hostile names and meshes run
            self._mutate(data)
        text = dumps(data)
        if rng.random() < 0.05:  # broken TOML
            text = text[: rng.randrange(len(text))] + rng.choice(["[", "=", "\"", "]]]"])
        path = self.folder / "case.toml"
        path.write_text(text, encoding="utf-8")
        return path

    def _mutate(self, data: dict) -> None:
        rng = self.rng
        leaves = list(_leaves(data))
        kind = rng.choice(["value", "value", "value", "delete", "unknown", "rename", "path", "table"])
        path, _ = rng.choice(leaves)
        if kind == "value":
            value = copy.deepcopy(rng.choice(VALUES))
        elif kind == "delete":
            value = _DELETE
        elif kind == "unknown":
            path, value = path[:-1] + ("no_such_key",), 1
        elif kind == "rename" and isinstance(data.get("boundary"), dict) and data["boundary"]:
            old = rng.choice(list(data["boundary"]))
            data["boundary"][rng.choice(NAMES) or "q"] = data["boundary"].pop(old)
            self.notes.append(f"rename {old!r}")
            return
        elif kind == "path" and isinstance(data.get("mesh"), dict):
            path, value = ("mesh", "file"), rng.choice(PATHS)
            data["mesh"].pop("generator", None)
            data["mesh"].pop("parameters", None)
        else:
            path, value = (rng.choice(list(data)),), copy.deepcopy(rng.choice(VALUES))
        with contextlib.suppress(KeyError, TypeError, IndexError):
            _set(data, path, value)
            self.notes.append(f"{kind} {'.'.join(map(str, path))} = {str(value)[:40]!r}")


def _check_outputs(out: Path) -> list[str]:
    """Non-finite numbers in the outputs of a run (empty when all are finite). The one value
    allowed to be NaN: monitored.csv's velocity_change at the run's first iteration, which has
    no earlier iteration to differ from (README, monitored.csv)."""
    bad = []
    for csv in out.rglob("*.csv"):
        header, *lines = csv.read_text().splitlines()
        if lines:
            values = np.array([[float(v) for v in line.split(",")] for line in lines])
            if csv.name == MONITOR_CSV:
                values[0, header.split(",").index("velocity_change")] = 0.0
            if not np.all(np.isfinite(values)):
                bad.append(str(csv.relative_to(out)))
    if (out / "fields.vtu").exists():
        m = meshio.read(out / "fields.vtu")
        bad += [f"fields.vtu:{k}" for k, b in m.cell_data.items() if not all(np.all(np.isfinite(x)) for x in b)]
    if (out / "checkpoint.npz").exists():
        read_checkpoint(out)  # refuses non-finite fields and gradients
    summary = json.loads((out / "summary.json").read_text())
    for patch, w in (summary.get("walls") or {}).items():
        bad += [f"summary walls.{patch}.forces.{k}" for k, v in (w.get("forces") or {}).items() if v is None]
    return bad


@pytest.mark.slow
def test_fuzzed_cases_and_meshes(tmp_path, monkeypatch):
    rng = random.Random(SEED)
    monkeypatch.chdir(tmp_path)
    failures: list[str] = []
    codes = {0: 0, 1: 0, 2: 0}
    for k in range(N_INPUTS):
        inputs = Inputs(tmp_path / f"in{k}", rng)
        case = inputs.case_file()
        out = tmp_path / f"out{k}" / "deep"
        before = files_under(tmp_path)
        err = io.StringIO()
        what = f"input {k}: {'; '.join(inputs.notes)}"
        try:
            with contextlib.redirect_stderr(err):
                code = main(["run", str(case), "--out", str(out), "--quiet", "--no-plots",
                             "--set", "solver.max_iterations=3"])
        except BaseException as exc:  # noqa: BLE001 - any escape is a failure of the test
            failures.append(f"{what}: {type(exc).__name__}: {str(exc)[:200]}")
            continue
        text = err.getvalue()
        new = files_under(tmp_path) - before
        outside = [str(p) for p in new if out not in p.parents]
        if outside:
            failures.append(f"{what}: wrote outside --out: {outside[:3]}")
        if code not in codes or "Traceback" in text:
            failures.append(f"{what}: exit {code}: {text[-300:]}")
            continue
        codes[code] += 1
        if code == 2:
            first = next((line for line in text.splitlines() if line.startswith("error: ")), "")
            if not (str(case) in first or str(inputs.folder) in first or "box." in first):
                failures.append(f"{what}: a refusal that names no input file: {first[:200]!r}")
        else:
            try:
                bad = _check_outputs(out)
            except Exception as exc:  # noqa: BLE001
                bad = [f"{type(exc).__name__}: {exc}"]
            if bad:
                failures.append(f"{what}: non-finite outputs {bad[:5]}")
    assert not failures, f"{len(failures)} of {N_INPUTS} inputs failed:\n" + "\n".join(failures[:15])
    assert codes[2] > 50 and codes[0] + codes[1] > 50, codes  # both refusals and runs were exercised
