"""The bundled cases and meshes, wherever fvrans is installed, and copies of them to start from.

In the repository they live in ``cases/`` and ``meshes/`` at the root; a normal install
(``pip install .``) copies both into the package as ``fvrans/bundled_data/cases`` and
``fvrans/bundled_data/meshes`` (``setup.py``, ``build_py``), keeping their relative layout, so the
relative paths inside the case files (``../meshes/...``) hold in both places.

:func:`copy_case` copies a bundled case file (or comparison / sweep spec) into a folder together
with every file it refers to (mesh, inlet profile, reference data, the base case of a sweep and
its files), and rewrites those references so that the copy refers to its own files.
"""

from __future__ import annotations

import os
import shutil
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from fvrans.errors import CaseError

#: the two bundled folders, as named in the repository
CASES, MESHES = "cases", "meshes"
#: the folder of the installed package that holds them
DATA_DIR = "bundled_data"


def bundled_root() -> Path:
    """The folder holding the bundled ``cases/`` and ``meshes/`` (installed package or repository)."""
    here = Path(__file__).resolve().parent
    for root in (here / DATA_DIR, here.parent):
        if (root / CASES).is_dir() and any((root / CASES).glob("*.toml")):
            return root
    raise CaseError(f"the bundled cases are missing (looked in {here / DATA_DIR} and {here.parent}); "
                    "reinstall fvrans with pip install .")


def bundled_cases_dir() -> Path:
    """The folder of the bundled case files."""
    return bundled_root() / CASES


def bundled_case(name: str) -> Path:
    """The bundled file ``name`` (``cavity_re100``, ``cavity_re100.toml`` or ``sweeps/...``)."""
    folder = bundled_cases_dir()
    rel = name if name.endswith(".toml") else f"{name}.toml"
    p = (folder / rel).resolve()
    if folder.resolve() not in p.parents or not p.is_file():
        names = sorted(q.relative_to(folder).as_posix() for q in folder.rglob("*.toml"))
        raise CaseError(f"no bundled case {name!r}; the bundled cases are: {', '.join(names)} "
                        "(fvrans cases lists them with their descriptions)")
    return p


def _references(path: Path, data: dict[str, Any]) -> Iterator[str]:
    """The file paths a case, comparison spec or sweep spec writes (as written in the file)."""
    mesh = data.get("mesh")
    if isinstance(mesh, dict) and isinstance(mesh.get("file"), str):
        yield mesh["file"]
    boundary = data.get("boundary")
    for b in (boundary.values() if isinstance(boundary, dict) else ()):
        if isinstance(b, dict) and isinstance(b.get("profile"), str):
            yield b["profile"]
    reference = data.get("reference")
    if isinstance(reference, dict) and isinstance(reference.get("data"), str):
        yield reference["data"]  # a bundled case refers to a data file, not to a result folder
    for item in data.get("item", []) if isinstance(data.get("item"), list) else []:
        ref = item.get("reference") if isinstance(item, dict) else None
        if isinstance(ref, dict) and isinstance(ref.get("file"), str):
            yield ref["file"]
    if isinstance(data.get("case"), str):
        yield data["case"]


def _target(written: str) -> str:
    """Where a referenced file goes in the copy, relative to the copied file: a path into the
    folder keeps its place (``step_inflow.csv``, ``reference/x.csv``); one that leaves it goes to
    ``meshes/<name>`` for a mesh and ``<name>`` otherwise."""
    p = Path(written)
    if not p.is_absolute() and ".." not in p.parts:
        return p.as_posix()
    return (f"{MESHES}/{p.name}" if p.suffix in (".msh", ".vtu") else p.name)


def copy_case(name: str, dest: str | os.PathLike, overwrite: bool = False) -> list[Path]:
    """Copy the bundled case (or spec) ``name`` with every file it refers to into the folder
    ``dest`` (created if missing); return the files written, the case file first. An existing file
    is not overwritten unless ``overwrite``."""
    from fvrans.case.load import read_toml

    src = bundled_case(name)
    out = Path(dest)
    plan: list[tuple[Path, Path, str]] = []  # (source, target, rewritten text or "")
    _plan(src, out / src.name, plan, read_toml)
    clash = [t for _, t, _ in plan if t.exists()]
    if clash and not overwrite:
        raise CaseError(f"{dest}: {', '.join(str(c) for c in clash)} already exist(s); copy into another folder "
                        "or remove them (or pass --overwrite)")
    written: list[Path] = []
    for source, target, text in plan:
        target.parent.mkdir(parents=True, exist_ok=True)
        if text:
            target.write_text(text, encoding="utf-8")
        else:
            shutil.copyfile(source, target)
        written.append(target)
    return written


def _plan(src: Path, target: Path, plan: list[tuple[Path, Path, str]], read_toml) -> None:
    if any(t == target for _, t, _ in plan):
        return
    text = src.read_text(encoding="utf-8")
    index = len(plan)
    plan.append((src, target, text))
    for written in dict.fromkeys(_references(src, read_toml(src))):
        ref_src = (src.parent / written).resolve()
        new = _target(written)
        ref_target = target.parent / new
        if new != written:
            text = text.replace(f'"{written}"', f'"{new}"')
        if ref_src.suffix == ".toml":
            _plan(ref_src, ref_target, plan, read_toml)
        elif not any(t == ref_target for _, t, _ in plan):
            plan.append((ref_src, ref_target, ""))
    plan[index] = (src, target, text)


__all__ = ["bundled_case", "bundled_cases_dir", "bundled_root", "copy_case"]
