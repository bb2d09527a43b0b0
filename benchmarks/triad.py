"""The numpy triad every benchmark times beside its own figures, so that speed read on a shared
or different machine can be compared (run the benchmarks as scripts: ``python benchmarks/NAME.py``;
their folder is then on the import path)."""

from __future__ import annotations

import time

import numpy as np


def triad_seconds(n: int, repeats: int = 50) -> float:
    """Best time of ``a = b + s*c`` over arrays of length n (numpy, in place)."""
    b = np.random.default_rng(0).random(n)
    c = np.random.default_rng(1).random(n)
    a = np.empty(n)
    best = np.inf
    for _ in range(repeats):
        t0 = time.perf_counter()
        np.multiply(c, 1.0001, out=a)
        np.add(a, b, out=a)
        best = min(best, time.perf_counter() - t0)
    return best
