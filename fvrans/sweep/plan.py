"""The sampling plan: the list of design points (parameter values per run) of a sweep.

Factorial: every combination of the parameters' values, the first parameter varying slowest.
Latin hypercube and Sobol: ``count`` points of ``scipy.stats.qmc`` (scrambled, seeded) in the unit
cube, each coordinate u mapped onto its parameter: start + u (stop - start) for a linear range,
start (stop / start)^u for a log range, values[floor(u n)] for a list of n values. A range whose
start and stop are integers gives integers (rounded; each integer of a linear range equally likely).

>>> from fvrans.sweep.spec import Parameter, Sweep
>>> sweep = Sweep("base.toml", [Parameter("fluid.viscosity", start=0.01, stop=1.0, count=3, spacing="log"),
...                             Parameter("mesh.parameters.nx", values=[10, 20])])
>>> [tuple(round(v, 6) for v in p.values()) for p in design_points(sweep)]
[(0.01, 10), (0.01, 20), (0.1, 10), (0.1, 20), (1.0, 10), (1.0, 20)]
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass
from typing import Any

import numpy as np

from fvrans.sweep.spec import Parameter, Sweep, check_sweep


@dataclass(frozen=True)
class DesignPoint:
    """One planned run: its position in the plan and the value of each parameter by key."""

    index: int
    changes: dict[str, Any]

    def values(self) -> tuple[Any, ...]:
        return tuple(self.changes.values())


def _plain(v: Any) -> Any:
    """Python numbers and lists (no numpy types) so that values hash and print plainly."""
    if hasattr(v, "tolist"):
        return v.tolist()
    if isinstance(v, (list, tuple)):
        return [_plain(x) for x in v]
    return v


def range_values(p: Parameter) -> list[Any]:
    """The values of one parameter in a factorial plan.

    >>> range_values(Parameter("a", start=1.0, stop=3.0, count=3))
    [1.0, 2.0, 3.0]
    >>> range_values(Parameter("mesh.parameters.ny", start=8, stop=32, count=4))
    [8, 16, 24, 32]
    """
    if p.values is not None:
        return [_plain(v) for v in p.values]
    n = int(p.count or 1)
    if p.spacing == "log":
        vals = np.geomspace(p.start, p.stop, n)
    else:
        vals = np.linspace(p.start, p.stop, n)
    vals[0], vals[-1] = p.start, p.stop  # exact ends
    return _typed(p, vals)


def _integer_range(p: Parameter) -> bool:
    return all(isinstance(v, (int, np.integer)) and not isinstance(v, bool) for v in (p.start, p.stop))


def _typed(p: Parameter, vals: np.ndarray) -> list[Any]:
    """Floats, or the nearest integers for a range whose start and stop are integers."""
    if _integer_range(p):
        return [int(v) for v in np.rint(vals)]
    return [float(v) for v in vals]


def map_unit(p: Parameter, u: np.ndarray) -> list[Any]:
    """Map unit-interval samples onto one parameter (see the module docstring).

    >>> map_unit(Parameter("a", start=1.0, stop=100.0, spacing="log"), np.array([0.0, 0.5]))
    [1.0, 10.0]
    >>> map_unit(Parameter("a", values=["x", "y", "z"]), np.array([0.1, 0.5, 0.99]))
    ['x', 'y', 'z']
    >>> map_unit(Parameter("n", start=2, stop=4), np.array([0.0, 0.34, 0.99]))
    [2, 3, 4]
    """
    if p.values is not None:
        idx = np.minimum((u * len(p.values)).astype(np.int64), len(p.values) - 1)
        return [_plain(p.values[i]) for i in idx]
    a, b = float(p.start), float(p.stop)
    if p.spacing == "log":
        vals = a * (b / a) ** u
    elif _integer_range(p):  # every integer from start to stop with the same chance
        lo, hi = min(a, b), max(a, b)
        vals = np.minimum(lo + np.floor(u * (hi - lo + 1)), hi)
    else:
        vals = a + u * (b - a)
    return _typed(p, vals)


def unit_samples(sampling: str, count: int, dim: int, seed: int) -> np.ndarray:
    """(count, dim) points in [0, 1)^dim from ``scipy.stats.qmc`` (scrambled, seeded)."""
    from scipy.stats import qmc

    cls = qmc.LatinHypercube if sampling == "latin-hypercube" else qmc.Sobol
    try:
        engine = cls(dim, scramble=True, rng=np.random.default_rng(seed))
    except TypeError:  # scipy < 1.15 takes seed=
        engine = cls(dim, scramble=True, seed=np.random.default_rng(seed))
    if sampling == "sobol":
        return engine.random_base2(int(count).bit_length() - 1)
    return engine.random(count)


def design_points(sweep: Sweep) -> list[DesignPoint]:
    """Every run of the sweep's plan, in plan order."""
    check_sweep(sweep)
    keys = [p.key for p in sweep.parameters]
    if sweep.sampling == "factorial":
        combos = itertools.product(*(range_values(p) for p in sweep.parameters))
        return [DesignPoint(i, dict(zip(keys, c))) for i, c in enumerate(combos)]
    u = unit_samples(sweep.sampling, int(sweep.count), len(keys), int(sweep.seed))
    columns = [map_unit(p, u[:, j]) for j, p in enumerate(sweep.parameters)]
    return [DesignPoint(i, dict(zip(keys, row))) for i, row in enumerate(zip(*columns))]
