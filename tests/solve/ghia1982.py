"""Lid-driven cavity, Re = 100: centreline velocities of Ghia, Ghia & Shin (1982),
J. Comput. Phys. 48, 387-411, Table I (u along the vertical centreline x = 0.5) and Table II
(v along the horizontal centreline y = 0.5), the Re = 100 columns (129 x 129 multigrid solution).

The table lives once, in cases/reference/ (with its source), read by the bundled check spec
cases/cavity_checks.toml and by these tests.
"""

from pathlib import Path

import numpy as np

_REF = Path(__file__).resolve().parents[2] / "cases" / "reference"
# Table I: y, u(0.5, y)
Y, U = np.loadtxt(_REF / "ghia1982_re100_u_vertical_centreline.csv", delimiter=",", comments="#", skiprows=4,
                  unpack=True)
# Table II: x, v(x, 0.5)
X, V = np.loadtxt(_REF / "ghia1982_re100_v_horizontal_centreline.csv", delimiter=",", comments="#", skiprows=4,
                  unpack=True)
