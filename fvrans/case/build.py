"""Building the mesh a case names, and checking the case against the mesh's patches."""

from __future__ import annotations

import importlib
import inspect
import os
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from fvrans.case.formula import values_at
from fvrans.case.schema import Case
from fvrans.case.validate import did_you_mean, format_key
from fvrans.errors import CaseError, MeshError

if TYPE_CHECKING:
    from fvrans.mesh.mesh import Mesh

GENERATOR_MODULE = "fvrans.mesh.generate"
#: a moving wall's velocity may have a normal component up to this fraction of its magnitude
WALL_NORMAL_TOLERANCE = 1e-4


def check_case_against_mesh(case: Case, mesh: Mesh | Sequence[str]) -> None:
    """Check that every mesh patch has a condition and every condition names a mesh patch.

    With a :class:`~fvrans.mesh.mesh.Mesh` (rather than a list of patch names) it also checks
    that moving walls move along themselves, that inlet profiles cover their patches and that
    Python inlet functions and formulas give finite values there (a nu_tilde_ratio formula also >= 0).
    Raises CaseError listing all problems.
    """
    is_mesh = hasattr(mesh, "patches")
    names = [p.name for p in mesh.patches] if is_mesh else [str(n) for n in mesh]
    where = f"the mesh {getattr(mesh, 'source', '')!s}".rstrip() if is_mesh else "the mesh"
    missing = [n for n in names if n not in case.boundaries]
    extra = [n for n in case.boundaries if n not in names]
    problems: list[str] = []
    if missing:
        snippet = "\n".join(_suggest_condition(n) for n in missing)
        problems.append(f"{where} has patch(es) with no boundary condition: "
                        f"{', '.join(repr(n) for n in missing)}; add a table for each, for example:\n"
                        f"{snippet}")
    for n in extra:
        problems.append(f"{format_key(('boundary', n))} names a patch {where} does not have"
                        f"{did_you_mean(n, missing or names)}; its patches are: "
                        f"{', '.join(repr(x) for x in names) or 'none'}")
    if problems:
        raise CaseError(f"{case.label}: " + "\n".join(problems).rstrip())
    if is_mesh:
        _check_values_on_mesh(case, mesh)
        check_probes(case, mesh)


def check_probes(case: Case, mesh: Mesh) -> None:
    """Every point probe and every sample point of every line probe must lie in a cell of the mesh
    (CaseError otherwise)."""
    if not case.probes:
        return
    from fvrans.case.schema import ProbePoint
    from fvrans.mesh.locate import CellLocator, line_points

    locator = CellLocator(mesh)
    for name, pr in case.probes.items():
        pts = np.array([pr.at]) if isinstance(pr, ProbePoint) else line_points(pr.start, pr.end, pr.points)
        outside = np.flatnonzero(locator.find(pts) < 0)
        if len(outside):
            x, y = pts[outside[0]]
            lo, hi = mesh.points.min(axis=0), mesh.points.max(axis=0)
            src = getattr(mesh, "source", "")
            if isinstance(pr, ProbePoint):
                what = f"the point ({x:.6g}, {y:.6g}) lies outside the mesh {src}; move it"
            else:
                what = (f"{len(outside)} of {pr.points} sample points lie outside the mesh {src}, the first at "
                        f"({x:.6g}, {y:.6g}); move start / end")
            raise CaseError(
                f"{case.label}: {format_key(('probes', name))}: {what} inside the flow domain (its bounding box is "
                f"x {lo[0]:.6g}..{hi[0]:.6g}, y {lo[1]:.6g}..{hi[1]:.6g})"
            )


def _suggest_condition(name: str) -> str:
    """A table for patch ``name`` (kind guessed from the name), indented, for error messages."""
    low = name.lower()
    if "inlet" in low or "inflow" in low:
        body = 'kind = "inflow-velocity"\nvelocity = [1.0, 0.0]   # the inflow velocity'
    elif "outlet" in low or "outflow" in low or "exit" in low:
        body = 'kind = "outflow-pressure"\npressure = 0.0'
    elif "sym" in low:
        body = 'kind = "symmetry"'
    elif "far" in low or "free" in low:
        body = 'kind = "outer-flow"\nvelocity = [1.0, 0.0]   # the free-stream velocity'
    else:
        body = 'kind = "wall"   # or: inflow-velocity, outflow-pressure, symmetry, outer-flow'
    lines = [f"[{format_key(('boundary', name))}]", *body.splitlines()]
    return "".join(f"  {line}\n" for line in lines)


def _check_values_on_mesh(case: Case, mesh: Mesh) -> None:
    for p in mesh.patches:
        spec = case.boundaries[p.name]
        label = f"{case.label}: {format_key(('boundary', p.name))}"
        fp = mesh.face_points[p.start : p.stop]
        a, b = mesh.points[fp[:, 0]], mesh.points[fp[:, 1]]
        if spec.kind == "wall" and spec.velocity is not None:
            c = 0.5 * (a + b)
            if callable(spec.velocity):  # a formula or a Python function: its values at the face centres
                u = np.stack(spec.velocity_at(c[:, 0], c[:, 1], label), axis=1)
                shown = "the wall velocity"
            else:
                u = np.broadcast_to(np.asarray(spec.velocity, dtype=np.float64), c.shape)
                shown = f"the wall velocity {list(map(float, u[0]))}"
            speed = float(np.hypot(u[:, 0], u[:, 1]).max(initial=0.0))
            if speed > 0:
                d = b - a
                length = np.hypot(d[:, 0], d[:, 1])
                un = (u[:, 0] * d[:, 1] - u[:, 1] * d[:, 0]) / length  # u . n with n = (dy, -dx) / |d|
                bad = np.abs(un) > WALL_NORMAL_TOLERANCE * speed
                if np.any(bad):
                    i = int(np.argmax(np.abs(un)))
                    raise CaseError(
                        f"{label}.velocity: {shown} crosses the wall: "
                        f"{int(bad.sum())} of {len(un)} faces have a normal component (up to {abs(un[i]):.4g}"
                        f" at ({c[i, 0]:.6g}, {c[i, 1]:.6g})); a wall can only move along itself — give a "
                        "velocity tangential to the wall, or use kind = \"inflow-velocity\" for flow "
                        "through it"
                    )
        if spec.kind == "inflow-velocity":
            # the profile range must cover the face end points; functions are tried on face centres
            if spec.profile is not None:
                pts = np.concatenate([a, b])
                spec.velocity_at(pts[:, 0], pts[:, 1], label)
                spec.nu_tilde_ratio_at(pts[:, 0], pts[:, 1], label)
            elif callable(spec.velocity):
                c = 0.5 * (a + b)
                spec.velocity_at(c[:, 0], c[:, 1], label)
        c = 0.5 * (a + b)
        if spec.nu_tilde_ratio is not None and spec.profile is None:
            spec.nu_tilde_ratio_at(c[:, 0], c[:, 1], label)
        if spec.pressure is not None:
            values_at(spec.pressure, c[:, 0], c[:, 1], "pressure")


def generator_names() -> list[str]:
    """Names of the mesh generators: public functions of ``fvrans.mesh.generate`` whose return
    annotation is ``Mesh`` (all public functions if none is annotated)."""
    mod = importlib.import_module(GENERATOR_MODULE)
    names = getattr(mod, "__all__", None) or [n for n in vars(mod) if not n.startswith("_")]
    funcs = {n: getattr(mod, n, None) for n in names}
    funcs = {n: f for n, f in funcs.items() if inspect.isfunction(f)}
    gens = [n for n, f in funcs.items() if _returns_mesh(f)]
    return sorted(gens or funcs)


def _returns_mesh(func) -> bool:
    ann = getattr(func, "__annotations__", {}).get("return")
    name = ann if isinstance(ann, str) else getattr(ann, "__name__", "")
    return name.rsplit(".", 1)[-1] == "Mesh"


def _generate(case: Case) -> Mesh:
    name = case.mesh.generator
    assert name is not None
    key = f"{case.label}: mesh.generator"
    try:
        mod = importlib.import_module(GENERATOR_MODULE)
    except ImportError as exc:
        raise CaseError(f"{key}: mesh generators are not available ({GENERATOR_MODULE} could not be "
                        f"imported: {exc}); use mesh.file instead") from exc
    names = generator_names()
    func = getattr(mod, name, None) if name in names else None
    if func is None:
        raise CaseError(f"{key}: no mesh generator named {name!r}{did_you_mean(name, names)}; "
                        f"available: {', '.join(repr(n) for n in names) or 'none'}")
    params = dict(case.mesh.parameters)
    try:
        sig = inspect.signature(func)
        sig.bind(**params)
    except TypeError as exc:
        accepted = [p.name for p in sig.parameters.values()
                    if p.kind in (p.POSITIONAL_OR_KEYWORD, p.KEYWORD_ONLY)]
        raise CaseError(f"{case.label}: mesh.parameters: {exc} (generator {name!r} takes: "
                        f"{', '.join(accepted) or 'no parameters'})") from None
    except ValueError:  # no signature available
        sig = None
    if sig is not None:
        params = _check_parameters(case, name, sig, params)
        _check_size(case, name, mod, params)
    try:
        mesh = func(**params)
    except MeshError as exc:  # invalid shape parameters: keep the type, name the case and the key
        raise MeshError(f"{case.label}: mesh.parameters: {exc}") from None
    if not hasattr(mesh, "patches"):
        raise CaseError(f"{key}: generator {name!r} returned {type(mesh).__name__}, not a Mesh")
    return mesh


#: memory a run needs per cell, measured: 3.1 kB (laminar) to 3.9 kB (Spalart-Allmaras) on a
#: 147 456-cell cavity, solve and outputs (maximum resident size); rounded up
BYTES_PER_CELL = 4096


def _kinds(annotation: object) -> set[str]:
    """The value kinds a generator parameter's annotation allows: int, float, bool, str, list."""
    text = annotation if isinstance(annotation, str) else getattr(annotation, "__name__", str(annotation))
    kinds = set()
    for token in str(text).replace(" ", "").split("|"):
        if token in ("int", "float", "bool", "str"):
            kinds.add(token)
        elif "ndarray" in token or token.startswith(("list", "Sequence", "tuple")):
            kinds.add("list")
    return kinds


def _need(kinds: set[str]) -> str:
    words = {"int": "an integer", "float": "a number", "bool": "true or false", "str": "a string",
             "list": "a list of numbers"}
    return " or ".join(words[k] for k in sorted(kinds))


def _check_parameters(case: Case, name: str, sig: inspect.Signature, params: dict) -> dict:
    """Types and finite values of the generator's parameters, from its annotations: a number where
    a number is meant (finite, at most 1e30 in magnitude; an integer for a count), true/false for
    a flag, text for a name; CaseError naming ``mesh.parameters.<key>`` otherwise."""
    from fvrans.case.validate import MAX_INTEGER, check_number, describe

    out = dict(params)
    for key, value in params.items():
        where = f"{case.label}: {format_key(('mesh', 'parameters', key))}"
        kinds = _kinds(sig.parameters[key].annotation) if key in sig.parameters else set()

        def fail(msg: str, where: str = where) -> CaseError:
            return CaseError(f"{where}: {msg} (generator {name!r})")

        if isinstance(value, dict):
            raise fail(f"must be a single value, got {describe(value)}")
        if isinstance(value, bool):
            if kinds and "bool" not in kinds:
                raise fail(f"must be {_need(kinds)}, got {describe(value)} (true/false is a flag)")
            continue
        if "bool" in kinds and not kinds & {"int", "float", "str", "list"}:
            raise fail(f"must be true or false, got {describe(value)}")
        if isinstance(value, str):
            if kinds and "str" not in kinds:
                raise fail(f"must be {_need(kinds)}, got {describe(value)}")
            continue
        if isinstance(value, list):
            if kinds and "list" not in kinds:
                raise fail(f"must be {_need(kinds)}, got {describe(value)}")
            out[key] = [check_number(v, lambda m, i=i: fail(f"item {i + 1} {m}")) for i, v in enumerate(value)]
            continue
        x = check_number(value, fail)  # finite, at most 1e30 in magnitude
        if "int" in kinds and "float" not in kinds:
            if not float(x).is_integer():
                raise fail(f"must be an integer (a count), got {describe(value)}")
            if abs(x) > MAX_INTEGER:
                raise fail(f"must be at most {MAX_INTEGER:.0e}, got {describe(value)[:40]}")
            out[key] = int(x)
        elif kinds and not kinds & {"int", "float"}:
            raise fail(f"must be {_need(kinds)}, got {describe(value)}")
    return out


def available_memory() -> int | None:
    """Bytes of memory available to a new computation (Linux: MemAvailable), or None if unknown."""
    try:
        with open("/proc/meminfo", encoding="ascii") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except (OSError, ValueError, IndexError):
        pass
    try:
        return int(os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_AVPHYS_PAGES"))
    except (ValueError, OSError, AttributeError):
        return None


def _check_size(case: Case, name: str, mod: object, params: dict) -> None:
    """Refuse a generated mesh that cannot fit in memory, with the estimate."""
    estimate = getattr(mod, "estimate_cells", None)
    cells = estimate(name, **params) if estimate is not None else None
    if cells is None:
        return
    need = cells * BYTES_PER_CELL
    have = available_memory()
    if have is not None and need > have:
        raise CaseError(
            f"{case.label}: mesh.parameters: generator {name!r} would build about {cells:.3g} cells, and a run "
            f"needs about {need / 2**30:.3g} GiB for them ({BYTES_PER_CELL // 1024} KiB per cell, measured), more "
            f"than the {have / 2**30:.3g} GiB of memory available; reduce the cell counts")


def _join_periodic(case: Case, mesh: Mesh) -> Mesh:
    from fvrans.mesh.periodic import join_periodic

    key = f"{case.label}: mesh.periodic_pairs"
    for pair in case.mesh.periodic_pairs:
        for name in pair:
            if name not in mesh.patch_names:
                raise CaseError(f"{key}: the mesh {mesh.source} has no patch {name!r}"
                                f"{did_you_mean(name, mesh.patch_names)}; its patches are: "
                                f"{', '.join(repr(x) for x in mesh.patch_names)}")
            if name in case.boundaries:
                raise CaseError(f"{case.label}: {format_key(('boundary', name))}: patch {name!r} is joined by "
                                "mesh.periodic_pairs and takes no boundary condition; remove the table")
    try:
        return join_periodic(mesh, case.mesh.periodic_pairs)
    except MeshError as exc:
        raise MeshError(f"{key}: {exc}") from None


def build_case_mesh(case: Case, check: bool = True) -> Mesh:
    """Read or generate the case's mesh, renumber its cells if asked (reverse Cuthill-McKee,
    :func:`fvrans.mesh.renumber.renumber_cells`), join its periodic pairs
    (:func:`fvrans.mesh.periodic.join_periodic`) and, by default, check the case against it with
    :func:`check_case_against_mesh`."""
    if case.mesh.file is not None:
        from fvrans.mesh.io import read_mesh

        m = case.mesh
        mesh = read_mesh(m.file, edge_tags=m.edge_tags, edge_tag_array=m.edge_tag_array, edge_boxes=m.edge_boxes,
                         unnamed_edges=m.unnamed_edges)
    else:
        mesh = _generate(case)
    if case.mesh.renumber:
        from fvrans.mesh.renumber import renumber_cells

        mesh, _ = renumber_cells(mesh)
    if case.mesh.periodic_pairs:
        mesh = _join_periodic(case, mesh)
    if check:
        check_case_against_mesh(case, mesh)
    return mesh
