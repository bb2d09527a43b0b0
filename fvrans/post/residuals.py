"""The residual history of a run as a CSV table (one row per outer iteration)."""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import Protocol

import numpy as np

from fvrans.fv.residual import RESIDUAL_DESCRIPTION
from fvrans.post.writers import write_csv_atomic

#: what fvrans calls the per-equation convergence measure on plots and in messages; the one
#: place that names it (a change of its definition in the solver updates RESIDUAL_NORMALISATION)
RESIDUAL_LABEL = "normalised imbalance"
#: how every equation's imbalance is normalised (defined once in fvrans/fv/residual.py)
RESIDUAL_NORMALISATION = RESIDUAL_DESCRIPTION


class HistoryLike(Protocol):
    """What is read from a solver history: column names, residual rows, seconds per iteration."""

    names: Sequence[str]
    rows: Sequence[Sequence[float]]
    seconds: Sequence[float]


def residual_columns(history: HistoryLike, first_iteration: int = 1) -> tuple[list[str], list[np.ndarray]]:
    """Header and columns: ``iteration``, one column per residual name, ``seconds``.

    Iterations are numbered from ``first_iteration`` (e.g. continuing a restarted run). Missing
    timings (a history shorter in ``seconds`` than in ``rows``) are written as nan.
    """
    names = [str(n) for n in history.names]
    rows = np.asarray(history.rows, dtype=float).reshape(-1, len(names)) if len(history.rows) else \
        np.zeros((0, len(names)))
    n = len(rows)
    sec = np.full(n, np.nan)
    given = np.asarray(history.seconds, dtype=float)[:n]
    sec[: len(given)] = given
    reserved = {"iteration", "seconds"} & set(names)
    if reserved:
        raise ValueError(f"residual name {sorted(reserved)[0]!r} clashes with a column of the residual table")
    header = ["iteration", *names, "seconds"]
    cols = [np.arange(first_iteration, first_iteration + n, dtype=np.int64)]
    cols += [rows[:, k] for k in range(len(names))]
    cols.append(sec)
    return header, cols


def write_residuals_csv(path: str | os.PathLike, history: HistoryLike, first_iteration: int = 1,
                        within: str | os.PathLike | None = None) -> None:
    """Write ``history`` to ``path`` (normally ``residuals.csv``) atomically; see
    :func:`residual_columns` for the columns."""
    header, cols = residual_columns(history, first_iteration)
    write_csv_atomic(path, header, cols, within=within)
