"""Reading case files (TOML) and applying ``key=value`` overrides."""

from __future__ import annotations

import re
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from fvrans.case.schema import Case
from fvrans.case.validate import case_from_dict, format_key, parse_dotted_key
from fvrans.errors import CaseError
from fvrans.files import MAX_NESTING, nesting_depth, read_text

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover
    import tomli as tomllib

_POSITION = re.compile(r"line (\d+), column (\d+)")
#: largest case or spec file read (a case file is a few kilobytes)
MAX_CASE_BYTES = 16 * 2**20


def read_toml(path: str | Path) -> dict[str, Any]:
    """Parse a TOML file; syntax errors become CaseError with the file, line and column."""
    text = read_text(path, "case file", max_bytes=MAX_CASE_BYTES)
    data = parse_toml_text(text, str(path))
    if nesting_depth(data) > MAX_NESTING:
        raise CaseError(f"{path}: tables and lists are nested more than {MAX_NESTING} deep; a case or spec "
                        "file nests a few levels")
    return data


def parse_toml_text(text: str, p: str) -> dict[str, Any]:
    """TOML text to data; syntax errors become CaseError naming ``p`` with the line and column."""
    try:
        return tomllib.loads(text)
    except RecursionError:
        raise CaseError(f"{p}: tables or lists are nested too deeply to read; a case or spec file nests a few "
                        "levels") from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        detail = ""
        m = _POSITION.search(msg)
        if m:
            lineno, col = int(m.group(1)), int(m.group(2))
            lines = text.splitlines()
            if 1 <= lineno <= len(lines):
                detail = f"\n  {lineno:>4} | {lines[lineno - 1]}\n         {' ' * (col - 1)}^"
        hint = ""
        if msg.startswith("Invalid value"):
            hint = ('\n(strings need quotes, e.g. kind = "wall"; lists are written [1.0, 0.0]; '
                    "true/false are lower case)")
        elif "overwrite" in msg or "declare" in msg.lower():
            hint = "\n(a key or table is given twice; keep one of them)"
        raise CaseError(f"{p}: not valid TOML: {msg}{detail}{hint}") from None


def load_case(path: str | Path) -> Case:
    """Read and validate a case file; relative paths in it start from its directory.

    Raises CaseError naming the file, the dotted key and what would fix it.
    """
    return case_from_dict(read_toml(path), source=Path(path))


#: the rule for ``--set`` (shown by ``fvrans run --help`` and in the README)
OVERRIDE_RULE = (
    "KEY=VALUE sets a dotted key, the value read as TOML (a bare word that is not TOML is a string); "
    "KEY= (nothing after '=') removes the key so that its default applies; relative paths in a value "
    "(mesh.file, boundary.<patch>.profile) start from the current directory, not from the case file"
)
#: dotted keys whose values are file paths (``*`` stands for any patch name)
PATH_KEYS = (("mesh", "file"), ("boundary", "*", "profile"))


def parse_override(item: str, label: str = "<in memory>") -> tuple[str, Any]:
    """Split ``"dotted.key=value"``; the value is read as TOML, and a bare word that is not
    valid TOML is taken as a string. An empty value (``"key="``) gives None: the key is removed.
    Relative paths in path keys (:data:`PATH_KEYS`, also inside a table value) are made absolute
    against the current directory.

    >>> parse_override("solver.max_iterations=100")
    ('solver.max_iterations', 100)
    >>> parse_override("boundary.lid.velocity=[2.0, 0.0]")
    ('boundary.lid.velocity', [2.0, 0.0])
    >>> parse_override("model.turbulence=spalart-allmaras")
    ('model.turbulence', 'spalart-allmaras')
    >>> parse_override("solver.relax_velocity=")
    ('solver.relax_velocity', None)
    """
    if not isinstance(item, str) or "=" not in item:
        raise CaseError(f"{label}: override {item!r} must look like key=value, "
                        "e.g. solver.max_iterations=100")
    # the first '=' that ends a valid key (a quoted key may itself contain '=')
    for i, ch in enumerate(item):
        if ch != "=":
            continue
        try:
            path = parse_dotted_key(item[:i], label)
        except CaseError:
            continue
        break
    else:
        raise CaseError(f"{label}: override {item!r}: {item.split('=', 1)[0].strip()!r} is not a valid "
                        'dotted key; write e.g. solver.relax_velocity=0.5 or boundary."patch name".kind=wall')
    text = item[i + 1 :].strip()
    key = format_key(path)
    if not text:
        return key, None
    try:
        value = tomllib.loads(f"v = {text}")["v"]
    except tomllib.TOMLDecodeError as exc:
        if text[0] in "[{\"'":
            raise CaseError(f"{label}: override {item!r}: the value is not valid TOML ({exc}); "
                            'write lists as [2.0, 0.0], tables as { n = 64 }, strings as "text"') from None
        value = text
    return key, _absolute_paths(path, value)


def _absolute_paths(path: tuple[str, ...], value: Any) -> Any:
    """``value`` with relative paths of :data:`PATH_KEYS` below ``path`` made absolute (cwd)."""
    for pattern in PATH_KEYS:
        if len(path) > len(pattern) or any(p != q and q != "*" for p, q in zip(path, pattern)):
            continue
        if len(path) == len(pattern):
            if isinstance(value, str) and value.strip() and not Path(value).expanduser().is_absolute():
                return str(Path.cwd() / Path(value).expanduser())
            return value
        if isinstance(value, dict):
            return {k: _absolute_paths((*path, str(k)), v) for k, v in value.items()}
    return value


def apply_overrides(case: Case, overrides: Sequence[str]) -> Case:
    """A new case with ``key=value`` overrides applied (and validated) together.

    >>> from fvrans.case import case_from_dict
    >>> c = case_from_dict({"mesh": {"generator": "cavity"},
    ...                     "fluid": {"density": 1.0, "viscosity": 0.01},
    ...                     "boundary": {"walls": {"kind": "wall"}}})
    >>> c2 = apply_overrides(c, ["solver.max_iterations=100", "model.turbulence=spalart-allmaras"])
    >>> c2.solver.max_iterations, c2.model.turbulence
    (100, 'spalart-allmaras')
    """
    if isinstance(overrides, str):
        overrides = [overrides]
    changes = dict(parse_override(o, case.label) for o in overrides)
    try:
        return case.replace(changes)
    except CaseError as exc:
        given = ", ".join(repr(o) for o in overrides)
        raise CaseError(f"{exc}\n(after applying the override(s) {given})") from None
