"""Shared fixtures of the sweep tests: a short laminar channel case file and a 2-worker dask
cluster on the loopback interface (closed by the fixture's finaliser)."""

from __future__ import annotations

import logging
from pathlib import Path

import pytest

#: a short, coarse channel: 8 h long, 32 x 24 cells; developed well before x = 4.8 for Re_Dh <= 100
CHANNEL = """
title = "short channel"

[mesh]
generator = "channel"
parameters = {{ length = {length}, height = 1.0, nx = 32, ny = 24 }}

[fluid]
density = 1.0
viscosity = 0.02

[boundary.inlet]
kind = "inflow-velocity"
velocity = [1.0, 0.0]

[boundary.outlet]
kind = "outflow-pressure"

[boundary.lower_wall]
kind = "wall"

[boundary.upper_wall]
kind = "wall"

[solver]
tolerance = 1e-7

[output]
write_fields = false
"""


#: a coarse laminar channel with a bump (bump_channel generator, 42 x 12 = 504 cells), Re_h = 50
BUMP = """
title = "coarse bump"

[mesh]
generator = "bump_channel"

[mesh.parameters]
bump_height = 0.1
bump_length = 1.0
nx_bump = 16
nx_up = 6
nx_down = 20
ny = 12
wall_spacing = 0.03

[fluid]
density = 1.0
viscosity = 0.02

[initial]
velocity = [1.0, 0.0]

[boundary.inlet]
kind = "inflow-velocity"
velocity = [1.0, 0.0]

[boundary.outlet]
kind = "outflow-pressure"

[boundary.lower_wall]
kind = "wall"

[boundary.upper_wall]
kind = "wall"

[solver]
tolerance = 1e-7

[output]
wall_patches = ["lower_wall"]
write_fields = false
"""


def write_channel(folder: Path, length: float = 8.0) -> Path:
    path = folder / "channel.toml"
    path.write_text(CHANNEL.format(length=length), encoding="utf-8")
    return path


@pytest.fixture
def channel_case(tmp_path: Path) -> Path:
    return write_channel(tmp_path)


@pytest.fixture
def bump_case(tmp_path: Path) -> Path:
    path = tmp_path / "bump.toml"
    path.write_text(BUMP, encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def dask_client():
    """A LocalCluster of 2 single-thread worker processes on 127.0.0.1 (no dashboard) and a
    client with a connection timeout; both closed when the module's tests are done."""
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None,
        scheduler_kwargs={"dashboard_address": "127.0.0.1:0"}, silence_logs=logging.ERROR,
    )
    try:
        client = distributed.Client(cluster, timeout=60)
    except BaseException:
        cluster.close(timeout=30)
        raise
    try:
        yield client
    finally:
        client.close(timeout=30)
        cluster.close(timeout=30)
