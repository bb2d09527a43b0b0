"""The repository root, for tests that read bundled files."""

from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
