"""The iteration error of a monitored quantity, estimated from the decay of its changes.

A fixed-point iteration phi^{n+1} = G(phi^n) near its solution converges linearly: the change
delta^n = phi^n - phi^{n-1} shrinks by the spectral radius r of the linearised iteration each
iteration, delta^{n+k} ~ r^k delta^n, and the error left after iteration n is the sum of the
changes still to come,

    phi^inf - phi^n = sum_{k >= 1} delta^{n+k} ~ delta^n r / (1 - r).

This is the estimate of Ferziger & Peric, Computational Methods for Fluid Dynamics (3rd ed.
2002), sec. 5.7, with r estimated from the ratio of successive change norms (from memory).
SIMPLE-type iterations often converge with a complex pair of dominant eigenvalues, so single
changes oscillate; here both the size of the changes and r come from their envelope over two
consecutive windows of ``m`` iterations:

    D1 = max |delta| over the last m iterations,  D0 = the same over the m before,
    r = (D1 / D0)^(1/m),  error ~ D1 r / (1 - r).

Taking D1 for |delta^n| errs on the safe side: for a steady decay it is the estimate for the
iterate m - 1 iterations back, larger by r^(1-m) than the current one (1.3 at r = 0.985, m = 20),
so a run that settles stops at most m - 1 iterations late. The safety matters early in a run,
where fast modes decay first and the observed r is smaller than the final, slowest one:
extrapolating D1 to the last iteration (D1 r^(m-1)) declared a channel flow settled at 1e-5 when
its error was still 2e-3. When the changes do not decay (r >= 1) the error is unbounded (``inf``)
unless the changes are at round-off level, where the estimate is D1.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: fewest iterations per window: below 2 x this many changes nothing is estimated (``inf``)
MIN_WINDOW = 3
#: changes below this fraction of the quantity's scale are round-off: no decay needed
ROUND_OFF = 1e-13


@dataclass(frozen=True)
class ErrorEstimate:
    """Estimated iteration error (same units as the changes) and the contraction ratio r per
    iteration it rests on (``nan`` when too few changes are known)."""

    error: float
    ratio: float


def iteration_error(changes, window: int, scale: float = 1.0) -> ErrorEstimate:
    """Estimate the error left after the last of ``changes`` (|delta^n|, oldest first) from their
    decay over two windows of ``min(window, len(changes) // 2)`` iterations (module docstring).
    ``scale`` sets the round-off level (``ROUND_OFF * scale``).

    >>> d = 0.5 ** np.arange(40)                 # changes halving every iteration
    >>> e = iteration_error(d, 10)
    >>> round(e.ratio, 12), bool(np.isclose(e.error, d[30]))   # D1 r / (1 - r), D1 = d[30]
    (0.5, True)
    >>> iteration_error(np.ones(40), 10).error   # no decay: unbounded
    inf
    """
    d = np.abs(np.asarray(changes, dtype=float))
    m = min(int(window), len(d) // 2)
    if m < MIN_WINDOW or not np.all(np.isfinite(d[-2 * m:])):
        return ErrorEstimate(math.inf, math.nan)
    d1 = float(np.max(d[-m:]))
    d0 = float(np.max(d[-2 * m:-m]))
    if d1 == 0.0 or d1 <= ROUND_OFF * abs(scale):
        return ErrorEstimate(d1, d1 / d0 if d0 > 0 else 0.0)
    if d0 <= 0.0:
        return ErrorEstimate(math.inf, math.inf)
    r = (d1 / d0) ** (1.0 / m)
    if r >= 1.0:
        return ErrorEstimate(math.inf, r)
    return ErrorEstimate(d1 * r / (1.0 - r), r)


__all__ = ["MIN_WINDOW", "ROUND_OFF", "ErrorEstimate", "iteration_error"]
