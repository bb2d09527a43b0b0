"""Mesh quality summary: sizes, cell kinds, areas, aspect ratio, non-orthogonality, skewness.

Definitions follow :mod:`fvrans.mesh.geometry`:

* non-orthogonality of an internal face: the angle between d = x_N - x_O and the face normal n;
  a cell's value is the largest over its internal faces;
* skewness of an internal face: |x_f - x_ip| / |d|, x_ip where the segment O-N crosses the face
  line; a cell's value is the largest over its internal faces;
* aspect ratio of a cell: L_max^2 / (k A), k = 2 for triangles, 1 otherwise.

Warnings mark what lies beyond fvrans's own tests (the largest value on a mesh that a test of
the suite solves and checks), not a customary checker's limits:

* non-orthogonality above 63.5 deg: ``tests/solve/test_poiseuille.py`` (triangles) solves the
  channel on right triangles of 63.4 deg and checks the developed profile and dp/dx;
* skewness above 0.71: ``tests/solve/test_bump_robustness.py`` converges the turbulent bump on a
  mesh of skewness 0.709 (accuracy against a published table is checked up to 0.25, the skewed
  triangles of ``tests/solve/test_cavity.py``);
* aspect ratio above 2.0e4: ``tests/verification/test_flat_plate.py`` checks Cf and drag on the
  medium flat-plate grid, whose wall cells reach 1.97e4.

Values below round-off (skewness under 1e-8, non-orthogonality under 1e-6 deg, from coordinates
in double precision) are reported as 0.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from fvrans.mesh.geometry import Geometry
from fvrans.mesh.mesh import Mesh

NONORTH_WARN_DEG = 63.5  # tests/solve/test_poiseuille.py, triangles (63.4 deg); see the module docstring
SKEWNESS_WARN = 0.71  # tests/solve/test_bump_robustness.py (0.709)
ASPECT_WARN = 2.0e4  # tests/verification/test_flat_plate.py, medium grid (1.97e4)
SKEWNESS_ROUNDOFF = 1e-8  # below: reported as 0
NONORTH_ROUNDOFF_DEG = 1e-6  # below: reported as 0
N_WORST = 5


@dataclass(frozen=True)
class WorstCell:
    """A cell with one of the largest values of a quality measure."""

    cell: int
    x: float
    y: float
    value: float


@dataclass(frozen=True)
class MeshQuality:
    """Summary of a mesh's size and quality (see the module docstring for the measures)."""

    n_cells: int
    n_faces: int
    n_internal_faces: int
    n_points: int
    n_triangles: int
    n_quads: int
    n_polygons: int
    min_area: float
    max_area: float
    total_area: float
    max_aspect_ratio: float
    max_nonorth_deg: float
    mean_nonorth_deg: float
    max_skewness: float
    patch_faces: dict[str, int]
    patch_length: dict[str, float]
    worst_aspect: tuple[WorstCell, ...]
    worst_nonorth: tuple[WorstCell, ...]
    worst_skewness: tuple[WorstCell, ...]
    warnings: tuple[str, ...] = field(default_factory=tuple)
    notes: tuple[str, ...] = field(default_factory=tuple)
    #: joined periodic pairs, one sentence each
    periodic: tuple[str, ...] = ()


def cell_max_over_faces(mesh: Mesh, face_values: np.ndarray) -> np.ndarray:
    """Per cell, the largest value over its internal faces (0 for a cell with none)."""
    ni = mesh.n_internal_faces
    out = np.zeros(mesh.n_cells)
    v = np.asarray(face_values, dtype=np.float64)[:ni]
    np.maximum.at(out, mesh.face_owner[:ni], v)
    np.maximum.at(out, mesh.face_neighbour[:ni], v)
    return out


def _worst(values: np.ndarray, centre: np.ndarray, n: int) -> tuple[WorstCell, ...]:
    k = min(n, len(values))
    idx = np.argsort(-values, kind="stable")[:k]
    return tuple(WorstCell(int(c), float(centre[c, 0]), float(centre[c, 1]), float(values[c])) for c in idx)


def mesh_quality(mesh: Mesh, geom: Geometry, n_worst: int = N_WORST) -> MeshQuality:
    """Compute the :class:`MeshQuality` summary of ``mesh`` from its geometry ``geom``."""
    ni = mesh.n_internal_faces
    sizes = mesh.cell_sizes()
    area = geom.cell_area
    nonorth_f = geom.face_nonorth_deg[:ni]
    skew_f = geom.face_skewness[:ni]
    nonorth_f = np.where(nonorth_f < NONORTH_ROUNDOFF_DEG, 0.0, nonorth_f)
    skew_f = np.where(skew_f < SKEWNESS_ROUNDOFF, 0.0, skew_f)
    cell_no = cell_max_over_faces(mesh, nonorth_f)
    cell_sk = cell_max_over_faces(mesh, skew_f)
    ar = geom.cell_aspect_ratio
    centre = geom.cell_centre

    q_max_no = float(nonorth_f.max()) if ni else 0.0
    q_max_sk = float(skew_f.max()) if ni else 0.0
    warn: list[str] = []
    n_bad = int(np.count_nonzero(nonorth_f > NONORTH_WARN_DEG))
    if n_bad:
        c = int(np.argmax(cell_no))
        warn.append(
            f"{n_bad} internal face(s) are more than {NONORTH_WARN_DEG:g} degrees non-orthogonal "
            f"(worst {q_max_no:.1f} degrees at cell {c} near ({centre[c, 0]:.6g}, {centre[c, 1]:.6g})); "
            "beyond what fvrans's tests cover (63.4 deg); expect slow convergence — smooth or re-mesh that region"
        )
    n_bad = int(np.count_nonzero(skew_f > SKEWNESS_WARN))
    if n_bad:
        c = int(np.argmax(cell_sk))
        warn.append(
            f"{n_bad} internal face(s) have skewness above {SKEWNESS_WARN:g} (worst {q_max_sk:.3g} at "
            f"cell {c} near ({centre[c, 0]:.6g}, {centre[c, 1]:.6g})), beyond what fvrans's tests cover (0.709); "
            "face values there are interpolated poorly"
        )
    n_bad = int(np.count_nonzero(ar > ASPECT_WARN))
    if n_bad:
        c = int(np.argmax(ar))
        warn.append(
            f"{n_bad} cell(s) have aspect ratio above {ASPECT_WARN:g} (worst {float(ar[c]):.3g} at cell {c} "
            f"near ({centre[c, 0]:.6g}, {centre[c, 1]:.6g})), beyond what fvrans's tests cover (1.97e4); check that "
            "this stretching is intended"
        )

    return MeshQuality(
        n_cells=mesh.n_cells,
        n_faces=mesh.n_faces,
        n_internal_faces=ni,
        n_points=mesh.n_points,
        n_triangles=int(np.count_nonzero(sizes == 3)),
        n_quads=int(np.count_nonzero(sizes == 4)),
        n_polygons=int(np.count_nonzero(sizes > 4)),
        min_area=float(area.min()),
        max_area=float(area.max()),
        total_area=float(area.sum()),
        max_aspect_ratio=float(ar.max()),
        max_nonorth_deg=q_max_no,
        mean_nonorth_deg=float(nonorth_f.mean()) if ni else 0.0,
        max_skewness=q_max_sk,
        patch_faces={p.name: p.size for p in mesh.patches},
        patch_length={p.name: float(geom.face_length[p.start : p.stop].sum()) for p in mesh.patches},
        worst_aspect=_worst(ar, centre, n_worst),
        worst_nonorth=_worst(cell_no, centre, n_worst),
        worst_skewness=_worst(cell_sk, centre, n_worst),
        warnings=tuple(warn),
        notes=tuple(mesh.notes),
        periodic=tuple(f"{p.first} <-> {p.second}: {p.size} faces joined, translation "
                       f"({p.translation[0]:.6g}, {p.translation[1]:.6g})" for p in mesh.periodic),
    )


def format_report(quality: MeshQuality, source: str = "") -> str:
    """A plain-text report of ``quality`` for printing or a log file."""
    q = quality
    lines = [f"Mesh report{': ' + source if source else ''}", ""]
    rows = [
        ("cells", f"{q.n_cells} ({q.n_triangles} triangles, {q.n_quads} quads, {q.n_polygons} polygons)"),
        (
            "faces",
            f"{q.n_faces} ({q.n_internal_faces} between cells, "
            f"{q.n_faces - q.n_internal_faces} on the boundary)",
        ),
        ("points", f"{q.n_points}"),
        ("cell area", f"smallest {q.min_area:.4g}, largest {q.max_area:.4g}, total {q.total_area:.6g}"),
        ("aspect ratio", f"largest {q.max_aspect_ratio:.4g}"),
        ("non-orthogonality", f"largest {q.max_nonorth_deg:.2f} deg, mean {q.mean_nonorth_deg:.2f} deg"),
        ("skewness", f"largest {q.max_skewness:.4g}"),
    ]
    lines.extend(f"  {k:<19}{v}" for k, v in rows)
    lines.append("")
    lines.append("  boundary patches:")
    width = max((len(n) for n in q.patch_faces), default=0)
    for name, n in q.patch_faces.items():
        lines.append(f"    {name:<{width}}  {n:>8d} faces, length {q.patch_length[name]:.6g}")
    if q.periodic:
        lines.append("  periodic pairs:")
        lines.extend(f"    {text}" for text in q.periodic)
    for title, worst, fmt in (
        ("largest aspect ratio", q.worst_aspect, ".4g"),
        ("largest non-orthogonality (deg)", q.worst_nonorth, ".2f"),
        ("largest skewness", q.worst_skewness, ".4g"),
    ):
        lines.append("")
        if worst and worst[0].value == 0.0:
            lines.append(f"  {title}: 0 in every cell")
            continue
        lines.append(f"  cells with the {title}:")
        for w in worst:
            lines.append(f"    cell {w.cell:>8d} at ({w.x:.6g}, {w.y:.6g}): {w.value:{fmt}}")
    if q.notes:
        lines.append("")
        lines.append("  repairs made while reading:")
        lines.extend(f"    {n}" for n in q.notes)
    lines.append("")
    if q.warnings:
        lines.append("  WARNINGS:")
        lines.extend(f"    {w}" for w in q.warnings)
    else:
        lines.append("  no quality warnings")
    return "\n".join(lines) + "\n"
