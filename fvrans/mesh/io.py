"""Reading 2D meshes with meshio (Gmsh 2.2/4.1 ASCII or binary, VTU, ...) and writing them back.

Cells: linear triangles, quads and general polygons, in any mix. Higher-order and 3D cells
are refused with a message saying what to export instead.

Boundary patches come from line elements:

* Gmsh physical groups: the per-element tag ``cell_data["gmsh:physical"]`` named through
  ``field_data = {name: [tag, dim]}`` (only groups of dimension 1 name patches);
* meshio ``cell_sets`` (``name -> one index array per cell block``), restricted to line blocks;
* indicator arrays ``cell_data["patch:<name>"]`` (non-zero on the line elements of the patch),
  which is how :func:`write_mesh` stores patch names in VTU files, whose meshio writer keeps
  neither field data nor cell sets.

Vertex (dimension 0) and surface (dimension 2) groups are ignored. Line elements without any
group are ignored too, so a boundary edge that ends up in no patch is reported by
:func:`fvrans.mesh.mesh.build_mesh`, with the file name in the message.

A file without names (another tool's VTU, fvrans's own ``fields.vtu``, meshio's conversion of a
Gmsh file to VTU, which keeps the tags but drops their names) can still be read: ``edge_tags``
names the integer tags of the line elements (array ``edge_tag_array``, by default
``gmsh:physical``), ``edge_boxes`` puts the boundary edges no group names, whose two ends lie in a
box ``[xmin, xmax, ymin, ymax]``, into a patch, and ``unnamed_edges`` names a patch for every such
edge left (:func:`unnamed_edge_rule`).
"""

from __future__ import annotations

import io
import logging
import warnings
from collections.abc import Mapping
from contextlib import redirect_stderr, redirect_stdout
from pathlib import Path

import meshio
import numpy as np

from fvrans.errors import MeshError
from fvrans.files import input_file
from fvrans.mesh.mesh import Mesh, build_mesh

log = logging.getLogger(__name__)

#: meshio cell types read as 2D cells.
LINEAR_2D_TYPES = ("triangle", "quad", "polygon")
#: prefix of the VTU/VTK cell-data arrays that mark the line elements of a patch.
PATCH_ARRAY_PREFIX = "patch:"

#: ``file_format`` values accepted by :func:`write_mesh`, and the format used for each suffix.
WRITE_FORMATS = {
    "gmsh": "Gmsh 4.1",
    "gmsh41": "Gmsh 4.1",
    "gmsh22": "Gmsh 2.2",
    "vtu": "VTK XML unstructured grid",
}
_SUFFIX_FORMAT = {".msh": "gmsh", ".vtu": "vtu"}


# ----------------------------------------------------------------------------------------
# reading
# ----------------------------------------------------------------------------------------
#: the per-element tag array read by default
DEFAULT_TAG_ARRAY = "gmsh:physical"


def read_mesh(
    path: str | Path,
    file_format: str | None = None,
    *,
    edge_tags: Mapping[int, str] | None = None,
    edge_tag_array: str | None = None,
    edge_boxes: Mapping[str, tuple[float, float, float, float]] | None = None,
    unnamed_edges: str | None = None,
) -> Mesh:
    """Read a planar 2D mesh file and build a :class:`Mesh` with named boundary patches.

    ``file_format`` is a meshio format name (e.g. ``"gmsh"``, ``"vtu"``); by default the file
    suffix decides. ``edge_tags``, ``edge_tag_array``, ``edge_boxes`` and ``unnamed_edges`` name
    the patches of a file whose boundary lines carry no names (module docstring). Every problem is
    raised as :class:`MeshError` naming the file.
    """
    p = input_file(path, "mesh file", MeshError)  # a regular file: no pipe, device, link loop
    src = str(p)
    if file_format is None and p.suffix.lower() == ".msh":
        file_format = "gmsh"  # meshio would try another format first and print its failure
    if file_format in (None, "gmsh"):
        check_gmsh41_node_count(p)  # meshio trusts the declared count (uninitialised memory beyond it)
    out = io.StringIO()
    try:
        # meshio prints read failures and may call sys.exit: keep both away from the caller
        with warnings.catch_warnings(), redirect_stdout(out), redirect_stderr(out):
            warnings.simplefilter("ignore")
            mm = meshio.read(p, file_format=file_format)
    except (Exception, SystemExit) as exc:  # meshio raises many kinds (ReadError, ValueError, ...)
        printed = " ".join(out.getvalue().split())
        if isinstance(exc, SystemExit):
            detail = printed or "the reader gave up"
        else:
            detail = f"{type(exc).__name__}: {' '.join(str(exc).split()) or printed or 'no detail'}"
        raise MeshError(
            f"{src}: could not read the mesh file ({detail}); "
            "write it as a Gmsh .msh (version 2.2 or 4.1, ASCII or binary) or a .vtu file, "
            "or pass file_format= if the suffix does not say the format"
        ) from exc
    return from_meshio(mm, source=src, edge_tags=edge_tags, edge_tag_array=edge_tag_array, edge_boxes=edge_boxes,
                       unnamed_edges=unnamed_edges)


def _token_count(data: bytes) -> int:
    """Whitespace-separated tokens of ``data`` (counted without splitting: starts of non-blank runs)."""
    a = np.frombuffer(data, dtype=np.uint8)
    blank = (a == 32) | ((a >= 9) & (a <= 13))
    return int(np.count_nonzero(~blank[1:] & blank[:-1])) + int(len(a) > 0 and not blank[0])


def check_gmsh41_node_count(path: Path) -> None:
    """Refuse a Gmsh 4.1 file whose ``$Nodes`` header declares another number of nodes than its
    blocks hold (meshio allocates the declared number and leaves the rest uninitialised). ASCII:
    the section holds 4 + 4 (blocks) + 4 (nodes) numbers; binary: its length follows from the
    counts. Other formats and versions pass untouched."""
    with open(path, "rb") as f:
        head = f.read(64)
        if not head.startswith(b"$MeshFormat"):
            return
        lines = head.split(b"\n")
        fmt = lines[1].split() if len(lines) > 1 else []
        if len(fmt) < 3 or not fmt[0].startswith(b"4.1"):
            return
        data = head + f.read()
    src = str(path)
    start = data.find(b"\n$Nodes")
    if start < 0:
        return
    start += len(b"\n$Nodes")
    start = data.index(b"\n", start) + 1
    binary = fmt[1] == b"1"
    if not binary:
        end = data.find(b"$EndNodes", start)
        if end < 0:
            raise MeshError(f"{src}: the $Nodes section has no $EndNodes; the file is cut short — write it again")
        section = data[start:end]
        head_tokens = section.split(None, 4)[:4]
        try:
            n_blocks, n_nodes = int(head_tokens[0]), int(head_tokens[1])
        except (ValueError, IndexError):
            raise MeshError(f"{src}: the $Nodes section does not start with its counts") from None
        held = (_token_count(section) - 4 - 4 * n_blocks) / 4
    else:
        size = int(fmt[2]) if fmt[2].isdigit() else 8
        import struct

        code = {4: "i", 8: "q"}.get(size)
        if code is None or len(data) < start + 4 * size:
            raise MeshError(f"{src}: the $Nodes section is cut short or has an unknown data size {size}")
        n_blocks, n_nodes = struct.unpack_from(f"<2{code}", data, start)
        if not (0 <= n_blocks <= len(data) and 0 <= n_nodes <= len(data)):
            raise MeshError(f"{src}: the $Nodes section declares {n_nodes} nodes in {n_blocks} blocks, more than a "
                            f"file of {len(data)} bytes can hold")
        end = start + 4 * size + n_blocks * (12 + size) + n_nodes * (size + 24)
        held = n_nodes if data[end:end + 12].lstrip().startswith(b"$EndNodes") else None
    if held != n_nodes:
        what = f"its blocks hold {held:g}" if held is not None else "the section's length does not match"
        raise MeshError(f"{src}: the $Nodes section declares {n_nodes} nodes but {what}; the file is damaged or "
                        "was edited by hand — write it again from the mesher")


def unnamed_edge_rule(edge_boxes: Mapping[str, tuple[float, float, float, float]] | None = None,
                      unnamed_edges: str | None = None):
    """The rule :func:`fvrans.mesh.mesh.build_mesh` asks about boundary edges no group names:
    an edge goes to the first patch of ``edge_boxes`` whose box holds both its ends (to 1e-9 of
    the mesh's extent), else to ``unnamed_edges`` (when given)."""
    boxes = dict(edge_boxes or {})

    def rule(points, edges):
        span = float(np.ptp(points, axis=0).max()) or 1.0
        tol = 1e-9 * span
        free = np.ones(len(edges), dtype=bool)
        out = {}
        for name, (x0, x1, y0, y1) in boxes.items():
            inside = np.ones(len(edges), dtype=bool)
            for k in (0, 1):
                p = points[edges[:, k]]
                inside &= (p[:, 0] >= x0 - tol) & (p[:, 0] <= x1 + tol) & (p[:, 1] >= y0 - tol) & (p[:, 1] <= y1 + tol)
            out[name] = inside & free
            free &= ~inside
        if unnamed_edges:
            out[unnamed_edges] = free
        return out

    return rule if (boxes or unnamed_edges) else None


def from_meshio(
    mm: meshio.Mesh,
    source: str = "<meshio mesh>",
    *,
    edge_tags: Mapping[int, str] | None = None,
    edge_tag_array: str | None = None,
    edge_boxes: Mapping[str, tuple[float, float, float, float]] | None = None,
    unnamed_edges: str | None = None,
) -> Mesh:
    """Turn a ``meshio.Mesh`` into a :class:`Mesh` (see the module docstring for the rules)."""
    pts = np.asarray(mm.points, dtype=np.float64)
    if pts.ndim != 2 or pts.shape[1] not in (2, 3) or len(pts) == 0:
        raise MeshError(f"{source}: the file holds no usable points (array of shape {pts.shape})")

    cells: list[np.ndarray] = []
    line_blocks: list[tuple[int, np.ndarray]] = []  # (block index, (n, 2) point pairs)
    found_types: list[str] = []
    for k, block in enumerate(mm.cells):
        t = block.type
        found_types.append(t)
        dim = getattr(block, "dim", None)
        if t in LINEAR_2D_TYPES:
            cells.extend(np.asarray(c, dtype=np.int64) for c in block.data)
        elif t == "line":
            line_blocks.append((k, np.asarray(block.data, dtype=np.int64).reshape(-1, 2)))
        elif t == "vertex" or dim == 0:
            continue
        elif dim == 3 or t.startswith("polyhedron"):
            raise MeshError(
                f"{source}: the file holds 3D cells of type '{t}'; fvrans solves on 2D meshes — "
                "export a planar surface mesh (triangles, quads or polygons) instead"
            )
        elif dim in (1, 2):
            raise MeshError(
                f"{source}: cells of type '{t}' are higher-order (curved) elements, which fvrans "
                "does not read; export the mesh with first-order (linear) elements: "
                "lines, triangles, quads or polygons"
            )
        else:
            raise MeshError(f"{source}: cells of unknown type '{t}'; export linear 2D elements instead")
    if not cells:
        kinds = ", ".join(sorted(set(found_types))) or "no elements at all"
        raise MeshError(
            f"{source}: the mesh has no 2D cells (found: {kinds}); export the surface elements "
            "(triangles, quads or polygons) together with the boundary lines"
        )

    if pts.shape[1] == 3:
        used = np.unique(np.concatenate(cells + [e.ravel() for _, e in line_blocks]))
        _check_planar(pts, used, source)
    boundary = _patches_from_meshio(mm, line_blocks, source, edge_tags, edge_tag_array)
    sizes = {len(c) for c in cells}
    cell_arg = np.stack(cells) if len(sizes) == 1 else cells
    return build_mesh(pts, cell_arg, boundary, source=source, unnamed=unnamed_edge_rule(edge_boxes, unnamed_edges))


def _check_planar(pts: np.ndarray, used: np.ndarray, source: str) -> None:
    """The points used by cells and lines must share one z (to 1e-9 of the x-y extent)."""
    used = used[(used >= 0) & (used < len(pts))]  # bad indices are reported by build_mesh
    if not len(used):
        return
    z = pts[used, 2]
    zmin, zmax = float(z.min()), float(z.max())
    span = float(np.ptp(pts[used, :2], axis=0).max()) or 1.0
    if zmax - zmin > 1e-9 * span:
        i = int(used[np.argmax(np.abs(z - np.median(z)))])
        raise MeshError(
            f"{source}: the mesh is not planar: point {i} at ({pts[i, 0]:.6g}, {pts[i, 1]:.6g}) has "
            f"z = {pts[i, 2]:.6g} while z ranges over [{zmin:.6g}, {zmax:.6g}]; fvrans needs a 2D mesh in "
            "a plane z = constant (x-y coordinates)"
        )


def _as_int_tags(values) -> np.ndarray:
    return np.asarray(values).astype(np.int64).ravel()


def _patches_from_meshio(
    mm: meshio.Mesh, line_blocks: list[tuple[int, np.ndarray]], source: str,
    edge_tags: Mapping[int, str] | None = None, edge_tag_array: str | None = None,
) -> dict[str, np.ndarray]:
    """Named edge lists ``{patch: (m, 2) point pairs}`` from physical tags, cell sets and patch arrays."""
    parts: dict[str, list[np.ndarray]] = {}

    def add(name: str, edges: np.ndarray) -> None:
        if len(edges):
            parts.setdefault(str(name), []).append(edges)

    field = {str(k): _as_int_tags(v) for k, v in (mm.field_data or {}).items()}
    line_names: dict[int, str] = {}
    for name, v in field.items():
        if len(v) >= 2 and v[1] == 1:
            line_names[int(v[0])] = name

    for tag, name in (edge_tags or {}).items():
        line_names[int(tag)] = str(name)
    # -- physical tags per element, in tag order --
    array = edge_tag_array or DEFAULT_TAG_ARRAY
    phys = (mm.cell_data or {}).get(array)
    if edge_tag_array and phys is None:
        have = ", ".join(repr(str(k)) for k in (mm.cell_data or {})) or "none"
        raise MeshError(f"{source}: no cell-data array {edge_tag_array!r} to read edge tags from (edge_tag_array); "
                        f"the file's cell-data arrays: {have}")
    if phys is not None:
        tagged: dict[int, list[np.ndarray]] = {}
        for k, edges in line_blocks:
            tags = _as_int_tags(phys[k])
            for tag in np.unique(tags):
                if tag <= 0:  # 0: the element is in no physical group
                    continue
                tagged.setdefault(int(tag), []).append(edges[tags == tag])
        for tag in sorted(tagged):
            if tag not in line_names:
                n = sum(len(e) for e in tagged[tag])
                known = ", ".join(f"{t} = {nm!r}" for t, nm in sorted(line_names.items())) or "none"
                raise MeshError(
                    f"{source}: {n} line element(s) carry physical tag {tag}"
                    f"{'' if array == DEFAULT_TAG_ARRAY else f' (array {array!r})'}, which has no name "
                    f"(named line groups: {known}); give physical line group {tag} a name in the "
                    f"mesh file, or name the tags in the case file: [mesh] edge_tags = {{ {tag} = \"<patch>\" }} "
                    "(README, [mesh])"
                )
            for e in tagged[tag]:
                add(line_names[tag], e)

    # -- cell sets (index arrays per block) --
    line_of_block = dict(line_blocks)
    for name, per_block in (mm.cell_sets or {}).items():
        name = str(name)
        if name.startswith("gmsh:"):
            continue
        if name in field and len(field[name]) >= 2 and field[name][1] != 1:
            continue  # a vertex or surface group
        for k, idx in enumerate(per_block):
            if idx is None or k not in line_of_block:
                continue
            idx = np.asarray(idx, dtype=np.int64).ravel()
            if idx.size:
                add(name, line_of_block[k][idx])

    # -- indicator arrays written by write_mesh for formats without field data --
    for key, per_block in (mm.cell_data or {}).items():
        if not str(key).startswith(PATCH_ARRAY_PREFIX):
            continue
        name = str(key)[len(PATCH_ARRAY_PREFIX) :]
        for k, edges in line_blocks:
            flag = np.asarray(per_block[k]).ravel() != 0
            add(name, edges[flag])

    return {name: np.unique(np.sort(np.concatenate(e), axis=1), axis=0) for name, e in parts.items()}


# ----------------------------------------------------------------------------------------
# writing
# ----------------------------------------------------------------------------------------
def to_meshio(mesh: Mesh, file_format: str = "gmsh") -> meshio.Mesh:
    """A ``meshio.Mesh`` holding the cells and the patches as named line groups.

    For Gmsh formats the patches are physical line groups (``gmsh:physical`` + ``field_data``)
    and the cells one physical surface group; for other formats each patch gets an indicator
    array ``patch:<name>``. Cells go in blocks by number of sides (triangles, quads, then
    polygons, which Gmsh cannot hold), keeping their order within a block, so a mesh of one
    kind of cell keeps its cell numbering through a write/read cycle, and so do the points.
    """
    gmsh = file_format.startswith("gmsh")
    sizes = mesh.cell_sizes()
    pts3 = np.zeros((mesh.n_points, 3))
    pts3[:, :2] = mesh.points
    blocks: list[meshio.CellBlock] = []
    for k in np.unique(sizes):
        ids = np.nonzero(sizes == k)[0]
        if gmsh and k > 4:
            raise MeshError(
                f"{mesh.source}: {len(ids)} cell(s) have {k} sides (e.g. cell {int(ids[0])}); the Gmsh "
                "format holds only triangles and quads — write a .vtu file instead"
            )
        conn = mesh.cell_points[mesh.cell_offsets[ids][:, None] + np.arange(k)]
        ctype = {3: "triangle", 4: "quad"}.get(int(k), "polygon")
        blocks.append(meshio.CellBlock(ctype, conn))
    n2d = len(blocks)
    for p in mesh.patches:
        blocks.append(meshio.CellBlock("line", mesh.face_points[p.start : p.stop].copy()))

    if not gmsh:
        cell_data = {}
        for i, p in enumerate(mesh.patches):
            cell_data[PATCH_ARRAY_PREFIX + p.name] = [
                np.full(len(b.data), 1 if j == n2d + i else 0, dtype=np.int32) for j, b in enumerate(blocks)
            ]
        return meshio.Mesh(pts3, blocks, cell_data=cell_data)

    domain = "domain"
    while domain in mesh.patch_names:
        domain += "_cells"
    field_data = {p.name: np.array([i + 1, 1]) for i, p in enumerate(mesh.patches)}
    field_data[domain] = np.array([1, 2])
    # entity tags: surfaces 1..n2d, curves 1..n_patches; physical: surfaces 1, curve i+1
    phys = [np.full(len(b.data), 1, dtype=np.int32) for b in blocks[:n2d]]
    geo = [np.full(len(b.data), j + 1, dtype=np.int32) for j, b in enumerate(blocks[:n2d])]
    for i, p in enumerate(mesh.patches):
        phys.append(np.full(p.size, i + 1, dtype=np.int32))
        geo.append(np.full(p.size, i + 1, dtype=np.int32))
    point_data = {} if file_format == "gmsh22" else {"gmsh:dim_tags": _node_entities(mesh, n2d)}
    return meshio.Mesh(
        pts3,
        blocks,
        cell_data={"gmsh:physical": phys, "gmsh:geometrical": geo},
        field_data=field_data,
        point_data=point_data,
    )


def _node_entities(mesh: Mesh, n2d: int) -> np.ndarray:
    """(dim, entity tag) of every node for Gmsh 4.1, in non-decreasing order of point index.

    Gmsh 4.1 lists nodes entity by entity and each entity must own a node to be listed. Giving
    entity k (curves 1..n_patches, then surfaces 1..n2d) the point k and the last one all the
    remaining points keeps the point order through a write/read cycle. The files carry no
    geometry, so which entity a node sits on has no further meaning.
    """
    ents = [(1, i + 1) for i in range(len(mesh.patches))] + [(2, j + 1) for j in range(n2d)]
    if mesh.n_points < len(ents):
        raise MeshError(
            f"{mesh.source}: {mesh.n_points} points are too few for the {len(ents)} Gmsh 4.1 entities "
            "(one per patch and cell kind); write Gmsh 2.2 (file_format='gmsh22') or .vtu instead"
        )
    idx = np.minimum(np.arange(mesh.n_points), len(ents) - 1)
    return np.asarray(ents, dtype=np.int64)[idx]


def write_mesh(mesh: Mesh, path: str | Path, file_format: str | None = None, binary: bool = False) -> None:
    """Write ``mesh`` with its patches as named line groups, so :func:`read_mesh` gets them back.

    ``file_format``: ``"gmsh"``/``"gmsh41"`` (Gmsh 4.1), ``"gmsh22"`` (Gmsh 2.2) or ``"vtu"``;
    by default ``.msh`` gives Gmsh 4.1 and ``.vtu`` VTU. ``binary`` selects binary Gmsh files.
    """
    p = Path(path)
    fmt = file_format or _SUFFIX_FORMAT.get(p.suffix.lower())
    if fmt not in WRITE_FORMATS:
        choices = ", ".join(f"{k!r} ({v})" for k, v in WRITE_FORMATS.items())
        what = f"file_format {file_format!r}" if file_format else f"the suffix {p.suffix!r}"
        raise MeshError(f"{p}: cannot write {what}; use .msh or .vtu, or file_format one of {choices}")
    mm = to_meshio(mesh, fmt)
    kwargs: dict = {}
    if fmt.startswith("gmsh"):
        kwargs["binary"] = binary
    meshio_fmt = "gmsh" if fmt == "gmsh41" else fmt
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            meshio.write(p, mm, file_format=meshio_fmt, **kwargs)
    except (OSError, meshio.WriteError, ValueError) as exc:
        raise MeshError(
            f"{p}: could not write the mesh file ({exc}); check the folder exists and is writable"
        ) from exc
