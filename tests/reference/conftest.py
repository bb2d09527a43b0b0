"""Make this folder's helpers importable (pytest runs with --import-mode=importlib)."""

import sys
from pathlib import Path

_here = str(Path(__file__).resolve().parent)
if _here not in sys.path:
    sys.path.insert(0, _here)
