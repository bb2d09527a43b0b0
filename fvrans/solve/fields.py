"""Kept for imports written before :class:`~fvrans.fields.Fields` moved below the solver."""

from fvrans.fields import Fields

__all__ = ["Fields"]
