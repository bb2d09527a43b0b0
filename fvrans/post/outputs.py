"""The list of files a run wrote into its output folder, so that a later run into the same folder
removes exactly those (and never a file fvrans did not write).

``DIR/outputs.json`` holds ``{"written_by": "fvrans <version>", "files": [relative paths]}``. A
run into a folder that holds one first deletes the files it lists (regular files inside the
folder only), then empty ``wall/zero_shear/``, ``wall/``, ``profiles/`` and ``plots/`` folders; a folder without the
list is left as it is.
"""

from __future__ import annotations

import json
import logging
import os
from collections.abc import Iterable
from pathlib import Path

from fvrans.post.writers import write_json_atomic

log = logging.getLogger(__name__)

#: file name of the list of a run's outputs inside its folder
OUTPUTS_LIST = "outputs.json"
#: sub-folders of a result folder removed when a cleared run leaves them empty
OUTPUT_FOLDERS = ("wall/zero_shear", "wall", "profiles", "plots")


def record_outputs(out_dir: str | os.PathLike, files: Iterable[str | os.PathLike]) -> Path:
    """Write ``DIR/outputs.json`` listing ``files`` (paths inside ``out_dir``; missing ones are
    left out) and the list itself."""
    from fvrans import __version__

    out = Path(out_dir)
    names: list[str] = []
    for f in files:
        p = Path(f)
        try:
            rel = p.relative_to(out)
        except ValueError:
            rel = p
        if (out / rel).is_file() and rel.as_posix() not in names:
            names.append(rel.as_posix())
    names.append(OUTPUTS_LIST)
    target = out / OUTPUTS_LIST
    write_json_atomic(target, {"written_by": f"fvrans {__version__}", "files": sorted(names)}, within=out)
    return target


def clear_previous_outputs(out_dir: str | os.PathLike, keep: Iterable[str | os.PathLike] = ()) -> list[str]:
    """Delete the files listed in ``DIR/outputs.json`` by an earlier run (regular files inside
    ``out_dir`` only, no symbolic links followed, none of ``keep``) and then the empty output
    sub-folders; return the relative paths deleted. Files not in the list are never touched."""
    out = Path(out_dir)
    kept = {Path(k).resolve() for k in keep}
    listing = out / OUTPUTS_LIST
    if not listing.is_file():
        return []
    try:
        files = json.loads(listing.read_text(encoding="utf-8")).get("files", [])
    except (OSError, ValueError, AttributeError):
        log.warning("%s is not a readable list of outputs; the earlier outputs in %s are left as they are",
                    listing, out)
        return []
    root = out.resolve()
    removed: list[str] = []
    for name in files if isinstance(files, list) else []:
        if not isinstance(name, str) or not name or Path(name).is_absolute() or ".." in Path(name).parts:
            continue
        p = out / name
        if p.is_symlink() or not p.is_file() or root not in p.resolve().parents or p.resolve() in kept:
            continue
        p.unlink()
        removed.append(name)
    for sub in OUTPUT_FOLDERS:
        d = out / sub
        if d.is_dir() and not d.is_symlink() and not any(d.iterdir()):
            d.rmdir()
    return removed


__all__ = ["OUTPUTS_LIST", "clear_previous_outputs", "record_outputs"]
