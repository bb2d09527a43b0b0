"""A small TOML writer for case settings (plain values, arrays, inline and nested tables).

>>> print(dumps({"title": "a", "solver": {"tolerance": 1e-06, "limiter": "none"}}))
title = "a"
<BLANKLINE>
[solver]
tolerance = 1e-06
limiter = "none"
<BLANKLINE>
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping
from typing import Any

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def key(k: str) -> str:
    """A TOML key, quoted when it is not a bare key."""
    return k if _BARE.match(k) else _string(k)


def _string(s: str) -> str:
    return json.dumps(s, ensure_ascii=False).replace("\x7f", "\\u007f")


def value(v: Any) -> str:
    """A TOML value: string, bool, int, float, array or inline table."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return _string(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(value(x) for x in v) + "]"
    if isinstance(v, Mapping):
        return "{ " + ", ".join(f"{key(k)} = {value(x)}" for k, x in v.items()) + " }" if v else "{}"
    if hasattr(v, "tolist"):  # numpy scalars and arrays
        return value(v.tolist())
    raise TypeError(f"cannot write {type(v).__name__} {v!r} as TOML")


def dumps(data: Mapping[str, Any]) -> str:
    """TOML text of nested data: top-level tables and members of tables of tables become
    ``[a.b]`` sections, other tables (e.g. generator parameters) inline tables."""
    lines: list[str] = []
    _section(data, (), lines)
    return "\n".join(lines).lstrip("\n") + "\n"


def _section(data: Mapping[str, Any], path: tuple[str, ...], lines: list[str]) -> None:
    # top-level tables and the members of a table of tables (like ``boundary``) get their own
    # [section]; any other table is written inline
    table_of_tables = bool(data) and all(isinstance(v, Mapping) for v in data.values())
    as_section = not path or table_of_tables
    plain = {k: v for k, v in data.items() if not (as_section and isinstance(v, Mapping))}
    subs = {k: v for k, v in data.items() if as_section and isinstance(v, Mapping)}
    if path and (plain or not subs):
        lines.append("")
        lines.append("[" + ".".join(key(p) for p in path) + "]")
    for k, v in plain.items():
        lines.append(f"{key(k)} = {value(v)}")
    for k, v in subs.items():
        _section(v, path + (k,), lines)
