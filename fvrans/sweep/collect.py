"""Collecting a sweep's outputs from one run folder (``summary.json``, ``wall/<patch>.csv``).

Outputs are read back from the files a run wrote, so a resumed sweep (or one whose outputs
changed) gets its values without solving again.
"""

from __future__ import annotations

import json
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np

from fvrans.errors import CaseError
from fvrans.post.filenames import output_file
from fvrans.post.summary import summary_value
from fvrans.sweep.spec import Output

#: largest wall table read back (a wall/<patch>.csv of a run is far smaller)
MAX_TABLE_BYTES = 256 * 1024 * 1024


def read_wall_table(path: Path) -> dict[str, np.ndarray]:
    """The columns of a ``wall/<patch>.csv`` file by name. A file that is not such a table raises
    CaseError naming the file and line only: none of its content goes into messages (they end up
    in results tables)."""
    try:
        if not path.is_file() or path.stat().st_size > MAX_TABLE_BYTES:
            raise CaseError(f"{path}: not a regular file of at most {MAX_TABLE_BYTES >> 20} MiB")
        with open(path, encoding="utf-8") as f:
            lines = f.read().splitlines()
    except UnicodeDecodeError:
        raise CaseError(f"{path}: not UTF-8 text") from None
    names = lines[0].split(",") if lines else []
    if not names or not all(n.strip() for n in names):
        raise CaseError(f"{path} line 1: not a header of column names")
    rows = []
    for lineno, line in enumerate(lines[1:], 2):
        cells = line.split(",")
        if len(cells) != len(names):
            raise CaseError(f"{path} line {lineno}: {len(cells)} values for {len(names)} columns")
        try:
            rows.append([float(c) for c in cells])
        except ValueError:
            raise CaseError(f"{path} line {lineno}: a value is not a number") from None
    data = np.array(rows, dtype=float).reshape(-1, len(names))
    return {n: data[:, j] for j, n in enumerate(names)}


def value_at_station(x: np.ndarray, q: np.ndarray, segment: np.ndarray, x0: float, where: str) -> float:
    """q interpolated linearly at x = x0 between the first pair of neighbouring faces (along the
    walk, within one segment) whose centres enclose x0.

    >>> value_at_station(np.array([0.5, 1.5, 2.5]), np.array([1.0, 3.0, 5.0]), np.zeros(3), 2.0, "w")
    4.0
    """
    for i in range(len(x) - 1):
        if segment[i] != segment[i + 1]:
            continue
        a, b = x[i] - x0, x[i + 1] - x0
        if a == 0.0:
            return float(q[i])
        if a * b <= 0.0 and x[i + 1] != x[i]:
            t = (x0 - x[i]) / (x[i + 1] - x[i])
            return float(q[i] + t * (q[i + 1] - q[i]))
    if len(x) and x[-1] == x0:
        return float(q[-1])
    lo, hi = (float(np.min(x)), float(np.max(x))) if len(x) else (math.nan, math.nan)
    raise CaseError(f"{where}: the station x = {x0!r} lies outside the face centres of the patch "
                    f"(x from {lo:.6g} to {hi:.6g}); choose a station inside")


def collect_outputs(run_dir: str | Path, outputs: Sequence[Output]) -> tuple[dict[str, float | None], list[str]]:
    """The outputs of one run folder: values by name (None where an output could not be
    collected) and the error text of each output that could not."""
    run = Path(run_dir)
    values: dict[str, float | None] = {}
    errors: list[str] = []
    summary: Any = None
    walls: dict[str, dict[str, np.ndarray]] = {}
    for o in outputs:
        where = f"output {o.name!r}"
        try:
            if o.summary is not None:
                if summary is None:
                    summary = json.loads((run / "summary.json").read_text(encoding="utf-8"))
                v = summary_value(summary, o.summary, f"{where}: {run / 'summary.json'}", none_as_nan=True)
            else:
                path = output_file(run, o.wall, ".csv", subfolder="wall", what=f"{where}: wall")
                if o.wall not in walls:
                    if not path.is_file():
                        raise CaseError(f"{where}: {path} does not exist; is {o.wall!r} a wall patch of "
                                        "output.wall_patches of the case?")
                    walls[o.wall] = read_wall_table(path)
                cols = walls[o.wall]
                if o.quantity not in cols:
                    raise CaseError(f"{where}: {path} line 1 names no column {o.quantity!r}")
                seg = cols.get("segment", np.zeros(len(cols["x"])))
                v = value_at_station(cols["x"], cols[o.quantity], seg, float(o.x), f"{where}: {path}")
            values[o.name] = v if math.isfinite(v) else None
        except (OSError, ValueError) as exc:  # CaseError is a ValueError
            values[o.name] = None
            errors.append(str(exc) if isinstance(exc, CaseError) else f"{where}: {exc}")
    return values, errors
