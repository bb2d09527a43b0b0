"""The iteration-error estimate against sequences whose limits are known exactly (geometric
series: the error after n terms of sum r^k is r^(n+1) / (1 - r)), including the oscillating
decay of a complex pair of eigenvalues, and the stopping rule's edge cases."""

from __future__ import annotations

import math

import numpy as np
import pytest

from fvrans.monitor.estimate import FAST_RATIO, ROUND_OFF, SHORT_WINDOW, iteration_error
from fvrans.monitor.monitor import _changes


@pytest.mark.parametrize("r", [0.5, 0.9, 0.985])
def test_geometric_sequence_estimate_bounds_the_error_within_the_window_factor(r):
    # q_n = sum_{k=0..n} r^k -> 1 / (1 - r): changes r^k (k = 1..n), error after n r^(n+1) / (1 - r)
    n, m = int(np.log(1e-9) / np.log(r)), 20  # the last changes about 1e-9, above round-off
    changes = r ** np.arange(1, n + 1)
    true_error = r ** (n + 1) / (1.0 - r)
    est = iteration_error(changes, m)
    assert est.ratio == pytest.approx(r, rel=1e-9)
    # D1 is the change m - 1 iterations back: the estimate exceeds the true error by r^(1-m), where
    # a fast decay (r < FAST_RATIO) takes the short windows' D1
    m = min(m, n // 2)  # windows shrink to the changes known
    if r < FAST_RATIO:
        m = SHORT_WINDOW
    assert est.error == pytest.approx(true_error * r ** (1 - m), rel=1e-9)
    assert est.error >= true_error


def test_fast_decay_settles_within_the_short_window_and_slow_decay_keeps_the_long_one():
    # r = 0.55 (a Newton-type outer iteration): the long windows' D1 is 0.55^-19 = 8e4 times the last
    # change; the estimate stays within 0.55^-4 = 11 of the true error, as it settles 15 iterations earlier
    r, m = 0.55, 20
    changes = 1e6 * r ** np.arange(1, 61)  # (the last above round-off)
    true_error = 1e6 * r ** 61 / (1.0 - r)
    est = iteration_error(changes, m)
    assert true_error <= est.error <= true_error * r ** (1 - SHORT_WINDOW) * (1 + 1e-9)
    # the long windows' D1 r / (1 - r) (the change m - 1 back) reaches each value m - SHORT_WINDOW = 15
    # iterations after this estimate does
    long_rule = np.array([changes[n - m] * r / (1 - r) for n in range(2 * m, 61)])
    new_rule = np.array([iteration_error(changes[:n], m).error for n in range(2 * m, 61)])
    lag = m - SHORT_WINDOW
    np.testing.assert_allclose(new_rule[:-lag], long_rule[lag:], rtol=1e-9)


def test_a_slow_mode_under_a_fast_one_takes_over_the_estimate():
    # a fast mode (0.4) over a slow one (0.95) 1e-4 its size: once the slow one dominates the short
    # windows' contraction is above FAST_RATIO and the estimate bounds the true error again
    k = np.arange(1, 400)
    changes = 0.4 ** k + 1e-4 * 0.95 ** k
    tail = np.cumsum(changes[::-1])[::-1]
    for n in range(60, 300, 10):
        est = iteration_error(changes[:n], 20)
        assert est.ratio == pytest.approx(0.95, abs=0.01)
        assert est.error >= tail[n]


def test_the_short_windows_take_the_slower_of_the_two_contractions():
    # 20 changes falling by 0.7, then 10 by 0.3: the short windows see 0.3, the long ones ~0.5;
    # the error is the short windows' D1 with the long windows' (slower) ratio
    changes = np.concatenate([0.7 ** np.arange(30), 0.7 ** 29 * 0.3 ** np.arange(1, 11)])
    est = iteration_error(changes, 20)
    long_ratio = (changes[-20:].max() / changes[-40:-20].max()) ** (1 / 20)
    assert est.ratio == pytest.approx(long_ratio)
    assert est.error == pytest.approx(changes[-5:].max() * long_ratio / (1 - long_ratio))


def test_oscillating_decay_is_bounded_by_the_envelope():
    # a complex pair rho e^{+-i theta}: q_n = rho^n cos(n theta) + q_inf
    rho, theta = 0.97, 0.7
    k = np.arange(300)
    q = 2.0 + rho**k * np.cos(theta * k)
    est = iteration_error(np.abs(np.diff(q)), 20)
    true_error = abs(q[-1] - 2.0)
    # the future changes are bounded by the envelope (rho^n (1 + rho) per step at most)
    assert est.ratio == pytest.approx(rho, abs=0.01)
    assert est.error >= true_error
    assert est.error < 200 * rho ** k[-1]  # not absurdly pessimistic


def test_no_decay_is_unbounded_and_round_off_is_settled():
    assert iteration_error(np.full(60, 1e-3), 20).error == math.inf  # a limit cycle
    noise = np.abs(np.random.default_rng(0).normal(0.0, 0.1 * ROUND_OFF, 60))
    est = iteration_error(noise, 20, scale=1.0)
    assert est.error <= ROUND_OFF
    assert iteration_error(np.full(5, 1e-3), 20).error == math.inf  # too few changes: unknown
    assert iteration_error(np.zeros(10), 20).error == 0.0  # nothing moves


def test_window_shrinks_to_the_changes_known():
    d = 0.9 ** np.arange(12)  # 12 changes: windows of 6
    est = iteration_error(d, 20)
    assert est.ratio == pytest.approx(0.9)
    assert est.error == pytest.approx(d[6] * 9)


def test_undefined_values_do_not_change_and_becoming_defined_is_a_jump():
    col = np.array([np.nan, np.nan, 1.0, 1.5, np.nan])
    np.testing.assert_array_equal(_changes(col), [0.0, np.inf, 0.5, np.inf])
