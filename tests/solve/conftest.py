"""Make this folder's helpers and the unit-square meshes of tests/fv importable (pytest runs
with --import-mode=importlib)."""

import sys
from pathlib import Path

_here = Path(__file__).resolve().parent
for _p in (str(_here), str(_here.parent / "fv")):
    if _p not in sys.path:
        sys.path.insert(0, _p)
