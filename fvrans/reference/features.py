"""Per-cell inputs and targets for data-driven turbulence models: the two-dimensional form of Pope's
effective-viscosity expansion (Pope 1975, J. Fluid Mech. 72, 331-340).

With a time scale tau, the normalised strain-rate and rotation tensors are S^ = tau S and
W^ = tau W (3x3, zero third row and column). In a two-dimensional mean flow the normalised
anisotropy b = R / (2k) - I/3 is a combination of three tensors,

    b = g_1 T_1 + g_2 T_2 + g_3 T_3,  T_1 = S^,  T_2 = S^ W^ - W^ S^,  T_3 = S^ S^ - 1/3 tr(S^ S^) I,

with coefficients g_n that are functions of the two invariants lambda_1 = tr(S^ S^) and
lambda_2 = tr(W^ W^) (Pope 1975, section on two-dimensional flows; from memory). The three tensors
are mutually orthogonal (T_m : T_n = 0 for m != n) and span the anisotropies of a 2D mean flow (xx,
xy, yy, zz with zero trace) wherever S and W are non-zero, so each g_n is the projection
b : T_n / T_n : T_n; ``basis_residual`` |b - sum g_n T_n| / |b| shows where the basis is incomplete
(S or W zero).

The time scale: ``k / epsilon`` when the data give both, otherwise 1 / |grad u| (then
lambda_1 - lambda_2 = 1 and only one invariant is independent; pass ``time_scale`` for another).
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from fvrans.errors import CaseError
from fvrans.reference.interpolate import Interpolated
from fvrans.reference.stress import _grad, _stress, optimal_eddy_viscosity, rotation_rate, strain_rate

#: the basis tensors' components written per cell
COMPONENTS = ("xx", "xy", "yy", "zz")
_IDX = ((0, 0), (0, 1), (1, 1), (2, 2))


def _as3(t2: np.ndarray) -> np.ndarray:
    out = np.zeros((len(t2), 3, 3))
    out[:, :2, :2] = t2
    return out


def anisotropy(stress: np.ndarray, k: np.ndarray) -> np.ndarray:
    """b = R / (2k) - I/3 as (n, 3, 3), with R_zz = 2k - R_xx - R_yy; NaN where k <= 0."""
    r = _stress(stress)
    k = np.broadcast_to(np.asarray(k, dtype=np.float64), (len(r),))
    R = np.zeros((len(r), 3, 3))
    R[:, 0, 0], R[:, 0, 1], R[:, 1, 0], R[:, 1, 1] = r[:, 0], r[:, 1], r[:, 1], r[:, 2]
    R[:, 2, 2] = 2 * k - r[:, 0] - r[:, 2]
    with np.errstate(divide="ignore", invalid="ignore"):
        b = R / (2 * k)[:, None, None] - np.eye(3) / 3.0
    b[~(k > 0)] = np.nan
    return b


def default_time_scale(grad_u: np.ndarray) -> np.ndarray:
    """tau = 1 / |grad u| (Frobenius norm); NaN where the gradient vanishes."""
    g = _grad(grad_u)
    n = np.sqrt(np.einsum("ijk,ijk->i", g, g))
    with np.errstate(divide="ignore"):
        return np.where(n > 0, 1.0 / n, np.nan)


def tensor_basis(grad_u: np.ndarray, time_scale: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(lambda_1, lambda_2, T) with T (n, 3, 3, 3): T[:, m] the basis tensor T_{m+1} (see the module).

    S is taken without its in-plane trace (the divergence of interpolated data), as Pope's
    expansion assumes a divergence-free velocity."""
    g = _grad(grad_u)
    tau = np.broadcast_to(np.asarray(time_scale, dtype=np.float64), (len(g),))[:, None, None]
    S2 = strain_rate(g)
    S2 -= 0.5 * (S2[:, 0, 0] + S2[:, 1, 1])[:, None, None] * np.eye(2)  # in-plane deviator (divergence-free part)
    S = _as3(S2) * tau
    W = _as3(rotation_rate(g)) * tau
    SS = S @ S
    lam1 = np.einsum("ijj->i", SS)
    lam2 = np.einsum("ijj->i", W @ W)
    T = np.empty((len(g), 3, 3, 3))
    T[:, 0] = S
    T[:, 1] = S @ W - W @ S
    T[:, 2] = SS - lam1[:, None, None] / 3.0 * np.eye(3)
    return lam1, lam2, T


def basis_coefficients(b: np.ndarray, T: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(g, residual): g (n, 3) the projections b : T_n / T_n : T_n (0 where T_n = 0) and the relative
    residual |b - sum g_n T_n| / |b| (NaN where b = 0)."""
    tt = np.einsum("inkl,inkl->in", T, T)
    bt = np.einsum("ikl,inkl->in", b, T)
    big = tt.max(initial=0.0)
    ok = tt > 1e-14 * big if big > 0 else np.zeros_like(tt, dtype=bool)
    with np.errstate(divide="ignore", invalid="ignore"):
        g = np.where(ok, bt / tt, 0.0)
    rest = b - np.einsum("in,inkl->ikl", g, T)
    bb = np.einsum("ikl,ikl->i", b, b)
    with np.errstate(divide="ignore", invalid="ignore"):
        res = np.sqrt(np.einsum("ikl,ikl->i", rest, rest) / bb)
    res[~(bb > 0)] = np.nan
    return g, res


def feature_table(
    centres: np.ndarray,
    wall_distance: np.ndarray,
    grad_u: np.ndarray,
    stress: np.ndarray,
    k: np.ndarray,
    time_scale: np.ndarray | None = None,
    epsilon: np.ndarray | None = None,
) -> dict[str, np.ndarray]:
    """One row per cell, one column per variable (a tidy table):

    ``x, y, wall_distance, time_scale, lambda_1, lambda_2`` (inputs), ``T1_xx .. T3_zz`` (the basis
    tensors), ``g_1, g_2, g_3, basis_residual`` (coefficients of the reference anisotropy),
    ``b_xx, b_xy, b_yy, b_zz`` (the target: reference anisotropy), ``R_xx, R_xy, R_yy, k`` (the
    reference stresses) and ``nu_t_optimal`` (:func:`fvrans.reference.stress.optimal_eddy_viscosity`).
    ``time_scale``: per cell; by default k / epsilon when ``epsilon`` is given, else 1 / |grad u|.
    """
    g = _grad(grad_u)
    n = len(g)
    r = _stress(stress, n)
    c = np.asarray(centres, dtype=np.float64)
    wd = np.asarray(wall_distance, dtype=np.float64)
    kk = np.broadcast_to(np.asarray(k, dtype=np.float64), (n,))
    if c.shape != (n, 2) or wd.shape != (n,):
        raise CaseError(f"feature table: centres {c.shape} and wall distances {wd.shape} do not match "
                        f"{n} cells (shapes ({n}, 2) and ({n},) needed)")
    if time_scale is None:
        if epsilon is not None:
            eps = np.broadcast_to(np.asarray(epsilon, dtype=np.float64), (n,))
            with np.errstate(divide="ignore", invalid="ignore"):
                time_scale = np.where(eps > 0, kk / eps, np.nan)
        else:
            time_scale = default_time_scale(g)
    tau = np.broadcast_to(np.asarray(time_scale, dtype=np.float64), (n,)).copy()
    lam1, lam2, T = tensor_basis(g, np.nan_to_num(tau))
    b = anisotropy(r, kk)
    coef, res = basis_coefficients(np.nan_to_num(b), T)
    bad = ~np.isfinite(tau) | ~np.isfinite(b).all(axis=(1, 2))
    coef[bad], res[bad] = np.nan, np.nan
    lam1[~np.isfinite(tau)] = np.nan
    lam2[~np.isfinite(tau)] = np.nan
    out: dict[str, np.ndarray] = {
        "x": c[:, 0].copy(), "y": c[:, 1].copy(), "wall_distance": wd.copy(), "time_scale": tau,
        "lambda_1": lam1, "lambda_2": lam2,
    }
    for m in range(3):
        for name, (i, j) in zip(COMPONENTS, _IDX):
            out[f"T{m + 1}_{name}"] = T[:, m, i, j].copy()
    for m in range(3):
        out[f"g_{m + 1}"] = coef[:, m].copy()
    out["basis_residual"] = res
    for name, (i, j) in zip(COMPONENTS, _IDX):
        out[f"b_{name}"] = b[:, i, j].copy()
    out.update({"R_xx": r[:, 0].copy(), "R_xy": r[:, 1].copy(), "R_yy": r[:, 2].copy(), "k": kk.copy(),
                "nu_t_optimal": optimal_eddy_viscosity(g, r)})
    return out


def write_feature_table(table: dict[str, np.ndarray], folder: str | os.PathLike,
                        name: str = "features") -> tuple[Path, Path]:
    """Write ``<folder>/<name>.csv`` (a header line, one row per cell) and ``<folder>/<name>.npz``
    (one array per column), each atomically; NaN is written as ``nan``."""
    from fvrans.post.writers import atomic_write, write_csv_atomic

    d = Path(folder)
    d.mkdir(parents=True, exist_ok=True)
    csv_path, npz_path = d / f"{name}.csv", d / f"{name}.npz"
    write_csv_atomic(csv_path, list(table), [np.asarray(v) for v in table.values()])
    atomic_write(npz_path, lambda f: np.savez(f, **{k: np.asarray(v) for k, v in table.items()}), binary=True)
    return csv_path, npz_path


def velocity_gradient(mesh, geom, cell_velocity: np.ndarray, boundary_velocity: np.ndarray) -> np.ndarray:
    """grad u (n_cells, 2, 2), ``[c, i, j] = d u_i / d x_j``, by least squares over the face neighbours
    and the boundary face values (:class:`fvrans.fv.gradient.LeastSquaresGradient`)."""
    from fvrans.fv.gradient import gradient_operator

    return gradient_operator(mesh, geom, "least_squares")(cell_velocity, boundary_velocity)


def reference_features(source, mesh, wall_patches, geom=None, outside: str = "nearest",
                       time_scale: np.ndarray | None = None) -> tuple[dict[str, np.ndarray], Interpolated]:
    """The feature table (:func:`feature_table`) of a reference field on the cells of ``mesh``.

    ``source`` (a :class:`~fvrans.reference.source.FieldSource`) must give u, v, R_xx, R_xy, R_yy
    and k (and may give epsilon). The velocity is interpolated to the cell centres and the boundary
    face centres and differentiated on the mesh; the wall distance is measured to the faces of
    ``wall_patches``. Returns the table and the interpolation with its coverage report.
    """
    from fvrans.mesh.geometry import compute_geometry
    from fvrans.physics.wall_distance import cell_wall_distance

    geom = compute_geometry(mesh) if geom is None else geom
    wanted = ["u", "v", "R_xx", "R_xy", "R_yy", "k"] + (["epsilon"] if "epsilon" in source else [])
    cells = source.interpolate(geom.cell_centre, wanted, outside=outside, target_label="cell")
    faces = source.interpolate(geom.face_centre[mesh.n_internal_faces:], ["u", "v"], outside="nearest",
                               estimate_error=False, target_label="boundary face")
    g = velocity_gradient(mesh, geom, np.column_stack([cells["u"], cells["v"]]),
                          np.column_stack([faces["u"], faces["v"]]))
    stress = np.column_stack([cells["R_xx"], cells["R_xy"], cells["R_yy"]])
    table = feature_table(geom.cell_centre, cell_wall_distance(mesh, geom, wall_patches), g, stress, cells["k"],
                          time_scale=time_scale, epsilon=cells.values.get("epsilon"))
    return table, cells
