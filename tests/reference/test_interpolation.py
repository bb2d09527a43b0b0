"""The interpolation core (fvrans.reference.interpolate): the error estimate against the true error."""

from __future__ import annotations

import numpy as np

from fvrans.reference.interpolate import DataSet, holdout_error, stencil


def test_holdout_estimate_bounds_the_error_of_a_quadratic_field():
    """f = x^2 + y^2 on a regular grid of spacing h. For any linear interpolation with weights w_i at
    sites x_i (sum w_i x_i = p) the error is exactly sum w_i |x_i - p|^2 (expand |x_i|^2 about p), so
    on the grid's right triangles it is at most h^2 / 2 (hypotenuse midpoint), while a left-out site
    is interpolated from neighbours at least h away: error >= h^2. The estimate must therefore lie
    above the true error at the targets, and within a small factor of it."""
    h = 0.025
    g = np.arange(0.0, 1.0 + h / 2, h)
    X, Y = np.meshgrid(g, g, indexing="ij")
    sites = np.column_stack([X.ravel(), Y.ravel()])
    f = sites[:, 0] ** 2 + sites[:, 1] ** 2
    ds = DataSet("grid", "cloud", sites, {"f": f})
    targets = np.random.default_rng(0).uniform(0.0, 1.0, (4000, 2))
    st = stencil(ds, targets)
    true = np.abs(st.apply(f) - (targets[:, 0] ** 2 + targets[:, 1] ** 2))
    assert true.max() <= h * h / 2 * (1 + 1e-9)
    est = holdout_error(ds)["f"]
    assert est.held_out > 50
    assert est.max >= true.max() and est.rms >= np.sqrt(np.mean(true**2))
    assert est.max <= 8 * true.max()
    assert est.range == 2.0


def test_holdout_estimate_needs_enough_sites():
    ds = DataSet("few", "cloud", np.random.default_rng(1).uniform(size=(20, 2)), {"f": np.ones(20)})
    assert np.isnan(holdout_error(ds)["f"].rms)
