"""numba kernels shared by the transport equations of the turbulence models."""

from __future__ import annotations

from numba import njit


@njit(cache=True)
def continuity_correction(owner, neighbour, nfi, flux, diag):
    """diag[c] -= sum of the face fluxes out of c: removes the mass-imbalance part of div(F phi)
    (zero at convergence); with upwind convection the diagonal stays the sum of the inflows."""
    nf = owner.shape[0]
    for f in range(nfi):
        diag[owner[f]] -= flux[f]
        diag[neighbour[f]] += flux[f]
    for f in range(nfi, nf):
        diag[owner[f]] -= flux[f]
