"""Scalars derived from probes: differences of point values, recirculation lengths along lines."""

from __future__ import annotations

import numpy as np

from fvrans.post.wall import _crossings


def first_rise_through_zero(s, values) -> float:
    """The position s where ``values`` (sampled at increasing ``s``) first turns from negative to
    positive, linear between samples (an exact zero between a negative and a positive sample is
    the zero itself); NaN when it never does.

    Along a line starting at a step's foot and running downstream near the floor, u is negative
    in the recirculation and turns positive at reattachment, so this is the recirculation length
    measured from the line's start (a corner eddy at the start, where u > 0, turns negative first
    and does not count).

    >>> first_rise_through_zero([0.0, 1.0, 2.0, 3.0, 4.0], [0.1, -0.2, -0.4, 0.2, 0.5])
    2.6666666666666665
    >>> first_rise_through_zero([0.0, 1.0], [1.0, 2.0])
    nan
    """
    s = np.asarray(s, dtype=float)
    v = np.asarray(values, dtype=float)
    for i, j, frac in _crossings(v):
        if v[i] < 0.0:
            if j > i + 1:  # zeros between: the middle of the zero run
                return float(0.5 * (s[i + 1] + s[j - 1]))
            return float(s[i] + frac * (s[j] - s[i]))
    return float("nan")


__all__ = ["first_rise_through_zero"]
