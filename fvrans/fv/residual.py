"""The normalised imbalance of a discretised equation: its imbalance as a fraction of its terms.

For every equation the loop solves (momentum, continuity, turbulence)::

    R = sum_cells |imbalance of the cell's equation| / sum_cells (sum of the magnitudes of its terms)

evaluated at the current state, each term with its own sign removed: for a linear(ised) scalar
equation a_P phi_P + sum_nb a_nb phi_nb = b that is sum |b - A phi| / sum (|a_P phi_P| +
sum_nb |a_nb phi_nb| + |b|); for the momentum equations the terms are vectors (both components
share the magnitudes |a_nb| |u_nb|, |b|, V |grad p|, V |f_body|, so that a velocity component that
is zero in the answer is measured against the flow, not against its own round-off); for the
continuity equation sum_f F_f = 0 the terms are the face mass fluxes, sum_P |sum_f F_f| /
sum_P sum_f |F_f|.

Why this reference (#13, false convergence on thin cells): it is a ratio of like quantities of one
equation, so it does not change when the mesh and the fluid are scaled (absolute cell size) or when
cells are stretched (aspect ratio). The former reference, U sum a_P for momentum and
rho U sum (perimeter / 2) for continuity, was dominated in cells of aspect ratio R by the long
faces, which carry R times the area and R times the diffusion coefficient of the short faces the
flow actually passes: a channel of cells of aspect ratio 3e5 started from rest showed 3e-7 after
one iteration and stopped as converged with the fluid still at rest. With the terms as reference
a start from rest reads R = 1 (only the boundary terms act) and a run cannot stop before its
equations balance; a start that is the answer reads R ~ 0. No constant is borrowed from a reference
velocity or length, and none from the first iterations (a warm start that is already the answer
stays converged). At convergence the reference does not depend on the relaxation factors.

Floor: the residual cannot fall below the round-off of the equation's terms. In cells of aspect
ratio R the pressure differences across the long faces, which double precision resolves to about
1e-16 of the pressure level, drive flux errors ~R^2 times larger (channel of 25 x 8 cells, Re_h 50:
continuity floor about 1e-6 at R = 3e5, 1e-5 at R = 1e6, 1e-4 at R = 3e6; tests/solve/test_normalised_imbalance.py).
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from fvrans.fv import _assembly_kernels as _k

#: one line describing the normalised imbalance for outputs (plots, README, summary)
RESIDUAL_DESCRIPTION = (
    "each equation's summed imbalance over the summed magnitudes of its terms (1 = nothing balanced)"
)


def normalised_imbalance(A: sp.csr_matrix, b: np.ndarray, x: np.ndarray) -> float:
    """sum |b - A x| / sum (|A| |x| + |b|) of a scalar system (0 when both vanish)."""
    r, m = _k.residual_and_terms(A.indptr, A.indices, A.data, np.ascontiguousarray(b, dtype=float),
                                 np.ascontiguousarray(x, dtype=float))
    return r / m if m > 0.0 else 0.0
