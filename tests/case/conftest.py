"""Shared helpers for the case-file tests: a minimal valid case and a small square mesh."""

from __future__ import annotations

import numpy as np
import pytest

from fvrans.errors import CaseError
from fvrans.mesh.mesh import Mesh


def minimal_case() -> dict:
    """The smallest valid case: generated mesh, fluid properties, two wall patches."""
    return {
        "mesh": {"generator": "cavity", "parameters": {"n": 8}},
        "fluid": {"density": 1.0, "viscosity": 0.01},
        "boundary": {"lid": {"kind": "wall", "velocity": [1.0, 0.0]}, "walls": {"kind": "wall"}},
    }


def square_mesh(
    n: int = 4, names=("bottom", "right", "top", "left"), shuffle_seed: int | None = None
) -> Mesh:
    """n x n quads on the unit square; patches bottom (y=0), right (x=1), top (y=1), left (x=0)."""
    xs = np.linspace(0.0, 1.0, n + 1)
    X, Y = np.meshgrid(xs, xs, indexing="xy")
    pts = np.column_stack([X.ravel(), Y.ravel()])

    def pid(i, j):
        return j * (n + 1) + i

    cells = [[pid(i, j), pid(i + 1, j), pid(i + 1, j + 1), pid(i, j + 1)] for j in range(n) for i in range(n)]
    if shuffle_seed is not None:
        rng = np.random.default_rng(shuffle_seed)
        cells = [cells[k] for k in rng.permutation(len(cells))]
    b, r, t, l = names
    boundary = {
        b: [[pid(i, 0), pid(i + 1, 0)] for i in range(n)],
        r: [[pid(n, j), pid(n, j + 1)] for j in range(n)],
        t: [[pid(i, n), pid(i + 1, n)] for i in range(n)],
        l: [[pid(0, j), pid(0, j + 1)] for j in range(n)],
    }
    return Mesh.from_arrays(pts, cells, boundary, source="square-test-mesh")


def error_of(func, *args, **kwargs) -> str:
    """The CaseError message raised by ``func(*args)`` (fails the test if none is raised)."""
    with pytest.raises(CaseError) as info:
        func(*args, **kwargs)
    return str(info.value)


@pytest.fixture
def base() -> dict:
    """A fresh minimal valid case dict."""
    return minimal_case()


@pytest.fixture
def make_mesh():
    """The :func:`square_mesh` factory."""
    return square_mesh


@pytest.fixture
def err():
    """The :func:`error_of` helper."""
    return error_of
