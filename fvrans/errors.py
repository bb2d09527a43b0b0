"""Error types raised for bad input; each message names the source and the fix."""

from __future__ import annotations


class FvransError(Exception):
    """Base class of every error fvrans raises on purpose."""


class MeshError(FvransError, ValueError):
    """A mesh that cannot be used: names the file, cell, edge or tag and what would fix it."""


class CaseError(FvransError, ValueError):
    """A case file or setting that cannot be used: names the file, the key and the fix."""


class DivergenceError(FvransError, RuntimeError):
    """A run that diverged; the last good state is kept on the exception as ``fields``."""

    def __init__(self, message: str, fields=None, iteration: int | None = None):
        super().__init__(message)
        self.fields = fields
        self.iteration = iteration
