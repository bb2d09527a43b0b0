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

That lag costs little where the iteration contracts slowly (r^(1-m) = 1.3 at r = 0.985) and a
great deal where it contracts fast: at r = 0.55 (the step with Newton's convection on the
simultaneous path) D1 is the change of 19 iterations back, 8e4 times the last one, and the run
went on for those 19 iterations. So where both the two windows of ``m`` and two short windows of
``SHORT_WINDOW`` iterations show a contraction below ``FAST_RATIO``, the short windows' D1 with the
larger (slower) of the two ratios is taken when it gives the smaller error: a steady fast decay
then stops at most ``SHORT_WINDOW - 1`` iterations late. A slow mode that has emerged shows in the
long windows' ratio (above ``FAST_RATIO``: their estimate stays). On sums of a fast and a slow
geometric decay (rates 0.3-0.7 and 0.75-0.97, the slow one 1e-1 to 1e-6 of the fast; stopping
thresholds 1e-3 to 1e-11) the true error where this rule stops is at most 22 times the threshold,
as with the long windows alone (a slow mode still hidden under the fast one fools both), and it
stops 5 iterations earlier on average.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: fewest iterations per window: below 2 x this many changes nothing is estimated (``inf``)
MIN_WINDOW = 3
#: changes below this fraction of the quantity's scale are round-off: no decay needed
ROUND_OFF = 1e-13
#: contraction per iteration below which a decay counts as fast, and the length of the short windows
#: whose estimate is then also taken (module docstring). Bundled and family runs to the default stop,
#: error against the same run continued to round-off (max over cells / U): coarse step 45 -> 30
#: iterations, 2.6e-11 -> 3.3e-7; laminar bump 30 -> 20, 4.7e-10 -> 2.4e-7; laminar plate 18 -> 15,
#: 1.2e-7 -> 1.8e-7; cavity 64^2 14 -> 13; SIMPLEC runs (r > 0.9) unchanged
FAST_RATIO = 0.8
SHORT_WINDOW = 5


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

    >>> d = 0.9 ** np.arange(40)                 # changes falling by 0.9 every iteration
    >>> e = iteration_error(d, 10)
    >>> round(e.ratio, 12), bool(np.isclose(e.error, 9 * d[30]))   # D1 r / (1 - r), D1 = d[30]
    (0.9, True)
    >>> d = 0.5 ** np.arange(40)                 # halving: fast, the short windows' D1 = d[35]
    >>> bool(np.isclose(iteration_error(d, 10).error, d[35]))
    True
    >>> iteration_error(np.ones(40), 10).error   # no decay: unbounded
    inf
    """
    est = _estimate(changes, window, scale)
    if est.ratio < FAST_RATIO and int(window) > SHORT_WINDOW:  # (False for nan)
        short = _estimate(changes, SHORT_WINDOW, scale)
        if short.ratio < FAST_RATIO and math.isfinite(short.error):
            # the short windows' D1 with the slower of the two contractions
            r = max(short.ratio, est.ratio)
            d1 = short.error * (1.0 - short.ratio) / short.ratio if short.ratio > 0.0 else short.error
            error = d1 * r / (1.0 - r) if short.ratio > 0.0 else short.error
            if error < est.error:
                return ErrorEstimate(error, r)
    return est


def _estimate(changes, window: int, scale: float) -> ErrorEstimate:
    """D1 r / (1 - r) over two windows of ``min(window, len(changes) // 2)`` (module docstring)."""
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


__all__ = ["FAST_RATIO", "MIN_WINDOW", "ROUND_OFF", "SHORT_WINDOW", "ErrorEstimate", "iteration_error"]
