"""Tests of forebrief.core.distributions: piecewise-linear members, exact linear pool, Vincentization.

Outside checks: the worked values of docs/methods.md §2 and §4 (Cooke 1991 ch. 12; Cooke &
Slijkhuis 2003 §15.3.2; Lichtendahl, Grushka-Cockayne & Winkler 2013, Management Science
59(7)), normal mixtures solved with scipy.optimize.brentq, and a slow scalar reference
written below.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.optimize import brentq
from scipy.stats import norm

from forebrief.core.distributions import (
    linear_pool_quantiles,
    member_cdf,
    pool_cdf,
    quantile_average,
    quantile_median,
    support_bounds,
)
from forebrief.errors import ConfigError
from forebrief.tables.schema import CM_LEVELS

TAU = np.array(CM_LEVELS)
# The two experts of docs/methods.md §2 (check I2) and the realization x = 112.
EXPERT_A = np.array([80.0, 95.0, 100.0, 108.0, 125.0])
EXPERT_B = np.array([60.0, 85.0, 100.0, 120.0, 150.0])
PAIR = np.stack([EXPERT_A, EXPERT_B])[None]  # (1 item, 2 members, 5 levels)
# 9999 midpoint levels (j - 1/2)/9999: a dense quantile representation of a continuous law.
DENSE = (np.arange(1, 10000) - 0.5) / 9999
MIDPOINTS_999 = (np.arange(1, 1000) - 0.5) / 999


# --------------------------------------------------------------------------- slow reference
def ref_knots(q_row, levels, lo, hi):
    """A member's knots from its non-NaN levels, as Python lists."""
    xs, ys = [lo], [0.0]
    for value, level in zip(q_row, levels, strict=True):
        if not math.isnan(value):
            xs.append(float(value))
            ys.append(float(level))
    return [*xs, hi], [*ys, 1.0]


def ref_cdf(x, xs, ys, *, left=False):
    """F(x) (right-continuous) or F(x-) of one member, by a linear scan of its knots."""
    if x < xs[0] or (left and x == xs[0]):
        return 0.0
    if x > xs[-1] or (not left and x == xs[-1]):
        return 1.0
    if left:
        j = max(i for i in range(len(xs)) if xs[i] < x)  # xs[j] < x <= xs[j+1]
    else:
        j = max(i for i in range(len(xs)) if xs[i] <= x)  # xs[j] <= x < xs[j+1]
    return ys[j] + (ys[j + 1] - ys[j]) * (x - xs[j]) / (xs[j + 1] - xs[j])


def ref_members(q_item, levels, w_item, lo, hi):
    """[(normalised weight, xs, ys)] of the present members, or [] if none / zero weight."""
    members = [
        (float(w), *ref_knots(row, levels, lo, hi))
        for row, w in zip(q_item, w_item, strict=True)
        if not np.all(np.isnan(row))
    ]
    total = sum(w for w, _, _ in members)
    if total <= 0:
        return []
    return [(w / total, xs, ys) for w, xs, ys in members]


def ref_pool_cdf(x, members, *, left=False):
    return sum(w * ref_cdf(x, xs, ys, left=left) for w, xs, ys in members)


def ref_pool_quantile(members, tau):
    """inf{x : F(x) >= tau} by walking the sorted union of knots, with jumps handled explicitly."""
    if not members:
        return math.nan
    union = sorted({x for _, xs, _ in members for x in xs})
    right = [ref_pool_cdf(u, members) for u in union]
    left = [ref_pool_cdf(u, members, left=True) for u in union]
    for i, u in enumerate(union):
        if right[i] >= tau - 1e-12:
            if i == 0 or left[i] < tau - 1e-12:
                return u  # tau falls at a knot or inside the jump at u
            # otherwise the pool reaches tau on the open segment (union[i-1], u), where it is
            # linear from right[i-1] (< tau) to left[i] (>= tau)
            frac = (tau - right[i - 1]) / (left[i] - right[i - 1])
            return union[i - 1] + frac * (u - union[i - 1])
    return union[-1]


def random_panel(rng, n, m, levels, *, absent=0.2, gaps=0.15):
    """Integer-valued quantiles with many ties, absent members and missing levels."""
    k = len(levels)
    base = rng.integers(0, 30, size=(n, m, 1))
    steps = rng.choice([0, 0, 1, 2, 5], size=(n, m, k))  # zeros make tied quantiles
    q = (base + np.cumsum(steps, axis=2)).astype(float)
    q[rng.random((n, m, k)) < gaps] = np.nan
    q[rng.random((n, m)) < absent] = np.nan
    return q


# ------------------------------------------------------------------- docs/methods.md §2 and §4
def test_support_bounds_two_experts():
    # Check I2, docs/methods.md §2 (Cooke & Slijkhuis 2003, §15.3.2, k = 10 %): range [51, 159].
    lo, hi = support_bounds(PAIR, extra=np.array([112.0]))
    np.testing.assert_allclose([lo[0], hi[0]], [51.0, 159.0], rtol=0, atol=1e-12)
    lo, hi = support_bounds(PAIR)  # the realization lies inside the quantiles
    np.testing.assert_allclose([lo[0], hi[0]], [51.0, 159.0], rtol=0, atol=1e-12)


def test_support_bounds_log_scale():
    # Check I3, docs/methods.md §2 (log-uniform background, Cooke 1991 ch. 12):
    # exp -> [54.7466, 164.3937].
    lo, hi = support_bounds(np.log(PAIR), extra=np.log([112.0]))
    np.testing.assert_allclose(np.exp([lo[0], hi[0]]), [54.7466, 164.3937], atol=1e-4)


def test_support_bounds_extra_widens_and_ignores_nan():
    # Definition (Cooke & Slijkhuis 2003, §15.3.2): L = 60, U = 200 -> 60 - 14, 200 + 14.
    q = np.concatenate([PAIR, PAIR, np.full((1, 2, 5), np.nan)])
    lo, hi = support_bounds(q, overshoot=0.1, extra=np.array([200.0, np.nan, 5.0]))
    np.testing.assert_allclose(lo, [46.0, 51.0, 5.0])
    np.testing.assert_allclose(hi, [214.0, 159.0, 5.0])
    lo, hi = support_bounds(np.full((2, 3, 5), np.nan), extra=np.array([np.nan, 7.0]))
    assert np.isnan(lo[0])
    assert np.isnan(hi[0])
    assert lo[1] == hi[1] == 7.0


def test_support_bounds_rejects_bad_overshoot():
    with pytest.raises(ConfigError, match="overshoot must be a finite number >= 0"):
        support_bounds(PAIR, overshoot=-0.1)


@pytest.mark.parametrize(
    ("weights", "expected"),
    [
        # Check P3, docs/methods.md §4 (Cooke 1991 ch. 12; values from np.interp on the knots).
        ((0.5, 0.5), (63.5461, 89.4444, 100.0, 114.1818, 145.4819)),
        ((0.7, 0.3), (66.6922, 91.5116, 100.0, 111.7546, 141.5049)),
    ],
)
def test_pool_of_two_experts(weights, expected):
    lo, hi = support_bounds(PAIR, extra=np.array([112.0]))
    out = linear_pool_quantiles(PAIR, TAU, weights, TAU, lower=lo, upper=hi)
    np.testing.assert_allclose(out[0], expected, atol=1e-4)


def test_pool_of_two_experts_hand_check_of_the_5_percent_point():
    # docs/methods.md §4 hand check: the 5 % point lies in [60, 80], where
    # 0.5*0.05(x - 51)/29 + 0.5*[0.05 + 0.2(x - 60)/25] = 0.05, a linear equation in x.
    slope = 0.5 * 0.05 / 29 + 0.5 * 0.2 / 25
    const = 0.5 * 0.05 * (-51) / 29 + 0.5 * (0.05 - 0.2 * 60 / 25)
    x = (0.05 - const) / slope
    assert x == pytest.approx(63.546, abs=1e-3)
    lo, hi = np.array([51.0]), np.array([159.0])
    out = linear_pool_quantiles(PAIR, TAU, [0.5, 0.5], [0.05], lower=lo, upper=hi)
    assert out[0, 0] == pytest.approx(x, abs=1e-9)
    assert pool_cdf([[x]], PAIR, TAU, [0.5, 0.5], lo, hi)[0, 0] == pytest.approx(0.05, abs=1e-12)


@pytest.mark.parametrize(
    ("weights", "expected"),
    [
        # Check P3, docs/methods.md §4, Vincent column (Lichtendahl et al. 2013: Q_V = sum w_e Q_e).
        ((0.5, 0.5), (70.0, 90.0, 100.0, 114.0, 137.5)),
        ((0.7, 0.3), (74.0, 92.0, 100.0, 111.6, 132.5)),
    ],
)
def test_quantile_average_of_two_experts(weights, expected):
    np.testing.assert_allclose(quantile_average(PAIR, weights)[0], expected, atol=1e-9)


def test_point_mass_hand_worked():
    # Hand-worked from the definition (docs/methods.md §4), this file: A = (0, 0, 0, 2, 5) has a
    # mass of 0.45 at 0; B = (1, 2, 3, 4, 6); L* = -0.6, H* = 6.6. Just below 0 the pool is
    # 0.5*0.05 + 0.5*0.05*0.6/1.6 = 0.034375, at 0 it is 0.259375, and on (0, 1) it is
    # 0.259375 + 0.078125 x. So q(0.1) = q(0.25) = 0 (inside the jump), q(0.3) = 0.52.
    q = np.array([[[0, 0, 0, 2, 5], [1, 2, 3, 4, 6]]], dtype=float)
    lo, hi = support_bounds(q)
    np.testing.assert_allclose([lo[0], hi[0]], [-0.6, 6.6])
    f = pool_cdf([[-1e-12, 0.0, 0.5]], q, TAU, [1, 1], lo, hi)
    np.testing.assert_allclose(f[0], [0.034375, 0.259375, 0.259375 + 0.078125 * 0.5], atol=1e-9)
    out = linear_pool_quantiles(q, TAU, [1, 1], [0.03, 0.1, 0.25, 0.3], lower=lo, upper=hi)
    expected_low = -0.6 + 0.6 * 0.03 / 0.034375  # linear from (-0.6, 0) to (0-, 0.034375)
    np.testing.assert_allclose(out[0], [expected_low, 0.0, 0.0, 0.52], atol=1e-9)


# --------------------------------------------------------------------------- normal mixtures
def mixture_quantile(tau, comps, weights):
    """docs/methods.md §4: quantile of a normal mixture solved with scipy.optimize.brentq."""

    def excess(v):
        return (
            sum(w * norm.cdf(v, mu, sd) for w, (mu, sd) in zip(weights, comps, strict=True)) - tau
        )

    return brentq(excess, -60, 60, xtol=1e-12)


def dense_normals(comps):
    return np.stack([mu + sd * norm.ppf(DENSE) for mu, sd in comps])[None]


@pytest.mark.parametrize(
    ("comps", "lop_expected", "vincent_expected"),
    [
        # Check P1, docs/methods.md §4 (Lichtendahl et al. 2013): N(0,1) & N(2,1), equal weights.
        (((0.0, 1.0), (2.0, 1.0)), (-1.2845, 3.2845), (-0.6449, 2.6449)),
        # Check P2, docs/methods.md §4: N(0,1) & N(0,2^2); 90 % widths 5.2296 (pool) and 4.9346
        # (Vincent).
        (((0.0, 1.0), (0.0, 2.0)), (-2.6148, 2.6148), (-2.4673, 2.4673)),
    ],
)
def test_dense_normal_members_converge_to_the_mixture(comps, lop_expected, vincent_expected):
    q = dense_normals(comps)
    lo, hi = np.array([-20.0]), np.array([20.0])  # far out: the tails beyond are negligible
    out_levels = np.array([0.05, 0.25, 0.5, 0.75, 0.95])
    lop = linear_pool_quantiles(q, DENSE, [1, 1], out_levels, lower=lo, upper=hi)[0]
    exact = [mixture_quantile(t, comps, [0.5, 0.5]) for t in out_levels]
    # Piecewise-linear in the far tail of one member: about 1e-5 here (1e-4 with 999 levels).
    np.testing.assert_allclose(lop, exact, atol=5e-5)
    np.testing.assert_allclose(lop[[0, -1]], lop_expected, atol=1e-4)  # check P1/P2: 4 decimals
    ends = np.array([0.05, 0.95])
    members_at_ends = np.stack([mu + sd * norm.ppf(ends) for mu, sd in comps])[None]
    vincent = quantile_average(members_at_ends, [1, 1])[0]
    np.testing.assert_allclose(vincent, vincent_expected, atol=1e-4)
    # Lichtendahl et al. (2013): the quantile average is sharper than the linear pool.
    assert lop[-1] - lop[0] > vincent[1] - vincent[0]


def test_p2_interval_widths():
    # Check P2, docs/methods.md §4: 90 % width 5.2296 for the pool, 4.9346 = 2 * 1.5 * 1.6449
    # for Vincent.
    comps = ((0.0, 1.0), (0.0, 2.0))
    q = dense_normals(comps)
    lop = linear_pool_quantiles(q, DENSE, [1, 1], [0.05, 0.95], lower=[-20.0], upper=[20.0])[0]
    exact = mixture_quantile(0.95, comps, [0.5, 0.5]) - mixture_quantile(0.05, comps, [0.5, 0.5])
    assert lop[1] - lop[0] == pytest.approx(exact, abs=5e-5)
    assert lop[1] - lop[0] == pytest.approx(5.2296, abs=1e-4)  # check P2: 4 decimals
    ends = np.array([0.05, 0.95])
    vincent = quantile_average(np.stack([norm.ppf(ends), 2 * norm.ppf(ends)])[None], [1, 1])[0]
    assert vincent[1] - vincent[0] == pytest.approx(4.9346, abs=1e-4)


def test_random_normal_members_pool_variance_exceeds_vincent_variance():
    # Lichtendahl et al. (2013); docs/methods.md §4: Var_LOP = sum w s^2 + sum w (mu - mubar)^2
    # >= (sum w s)^2 = Var_V, and both have the mean sum w mu. Seeded random normals.
    rng = np.random.default_rng(4021)
    for _ in range(5):
        m = int(rng.integers(2, 6))
        mu, sd, w = rng.uniform(-3, 3, m), rng.uniform(0.3, 3, m), rng.uniform(0.1, 1, m)
        w = w / w.sum()
        q = np.stack([a + b * norm.ppf(MIDPOINTS_999) for a, b in zip(mu, sd, strict=True)])[None]
        lop = linear_pool_quantiles(
            q, MIDPOINTS_999, w, MIDPOINTS_999, lower=[-60.0], upper=[60.0]
        )[0]
        vincent = quantile_average(q, w)[0]
        # Mean and variance by the midpoint rule over 999 levels: E = int_0^1 Q(t) dt.
        mean_lop, mean_v = lop.mean(), vincent.mean()
        var_lop, var_v = lop.var(), vincent.var()
        var_lop_exact = np.sum(w * sd**2) + np.sum(w * (mu - np.sum(w * mu)) ** 2)
        var_v_exact = np.sum(w * sd) ** 2
        assert mean_lop == pytest.approx(np.sum(w * mu), abs=2e-3)
        assert mean_v == pytest.approx(np.sum(w * mu), abs=2e-3)
        assert var_lop == pytest.approx(var_lop_exact, rel=0.02)
        assert var_v == pytest.approx(var_v_exact, rel=0.02)
        assert var_lop >= var_v
        # Lichtendahl et al. (2013): a location-scale family is kept, with averaged parameters.
        np.testing.assert_allclose(
            vincent, np.sum(w * mu) + np.sum(w * sd) * norm.ppf(MIDPOINTS_999)
        )


# --------------------------------------------------------------------------- slow reference
@pytest.mark.parametrize("overshoot", [0.1, 0.0])
def test_pool_matches_slow_reference_with_ties_and_absent_members(overshoot):
    # Seeded random data with ties, absent members, missing levels and zero weights, against
    # the slow per-item reference above.
    rng = np.random.default_rng(7)
    n, m = 60, 4
    q = random_panel(rng, n, m, TAU)
    q[0, 0] = [0, 0, 0, 2, 5]  # a point mass of 0.45 at 0
    q[0, 1] = [1, 2, 3, 4, 6]
    q[1, :2] = [3, 3, 3, 3, 3]  # two members with all their mass at one value
    w = rng.choice([0.0, 0.5, 1.0, 2.5], size=(n, m))
    w[0] = w[1] = 1.0
    lo, hi = support_bounds(q, overshoot=overshoot)
    out_levels = np.concatenate([[0.0, 0.01], TAU, np.linspace(0.02, 0.98, 25), [0.999, 1.0]])
    fast = linear_pool_quantiles(q, TAU, w, out_levels, lower=lo, upper=hi)
    for i in range(n):
        members = ref_members(q[i], TAU, w[i], lo[i], hi[i])
        slow = [ref_pool_quantile(members, t) for t in out_levels]
        np.testing.assert_allclose(fast[i], slow, rtol=0, atol=1e-9, err_msg=f"item {i}")
        if members:  # definition of the quantile: F(q) >= tau and F(x) < tau for x < q
            for t, value in zip(out_levels[1:-1], fast[i, 1:-1], strict=True):
                assert ref_pool_cdf(value, members) >= t - 1e-9
                assert ref_pool_cdf(value - 1e-6, members) < t + 1e-9


def test_member_and_pool_cdf_match_slow_reference():
    # Right-continuity at tied quantiles: evaluate exactly at the knots, and between them.
    rng = np.random.default_rng(11)
    n, m = 30, 3
    q = random_panel(rng, n, m, TAU)
    w = rng.choice([0.0, 1.0, 3.0], size=m)
    lo, hi = support_bounds(q)
    knots_x = np.where(np.isnan(q), 0.0, q).reshape(n, -1)
    x = np.concatenate(
        [knots_x, knots_x + 0.5, lo[:, None] - 1, hi[:, None], rng.uniform(-5, 60, (n, 7))],
        axis=1,
    )
    x = np.where(np.isnan(x), 0.0, x)
    f = member_cdf(x, q, TAU, lo, hi)
    pooled = pool_cdf(x, q, TAU, w, lo, hi)
    for i in range(n):
        for e in range(m):
            if np.all(np.isnan(q[i, e])):
                assert np.all(np.isnan(f[i, e]))
                continue
            xs, ys = ref_knots(q[i, e], TAU, lo[i], hi[i])
            np.testing.assert_allclose(f[i, e], [ref_cdf(v, xs, ys) for v in x[i]], atol=1e-12)
        members = ref_members(q[i], TAU, w, lo[i], hi[i])
        expected = [ref_pool_cdf(v, members) if members else np.nan for v in x[i]]
        np.testing.assert_allclose(pooled[i], expected, atol=1e-12)


def test_missing_level_is_the_same_as_not_giving_it():
    # Definition (issue): a member's CDF is built from its non-NaN levels only.
    q = PAIR.copy()
    q[0, 1, [1, 3]] = np.nan
    lo, hi = np.array([51.0]), np.array([159.0])
    x = np.linspace(40, 170, 261)[None]
    with_gaps = member_cdf(x, q, TAU, lo, hi)[0, 1]
    fewer_levels = member_cdf(x, q[:, :, [0, 2, 4]], TAU[[0, 2, 4]], lo, hi)[0, 1]
    np.testing.assert_allclose(with_gaps, fewer_levels, atol=1e-12)
    pooled = linear_pool_quantiles(q, TAU, [1, 1], TAU, lower=lo, upper=hi)[0]
    members = ref_members(q[0], TAU, [1, 1], 51.0, 159.0)
    np.testing.assert_allclose(pooled, [ref_pool_quantile(members, t) for t in TAU], atol=1e-9)


# --------------------------------------------------------------------------- edge cases
def test_degenerate_item_returns_its_value():
    # Issue definition: every quantile equal, so L* = H*; the value at every level.
    q = np.concatenate([np.full((1, 3, 5), 4.0), PAIR[:, [0, 1, 1]]])
    q[0, 2] = np.nan
    lo, hi = support_bounds(q)
    assert lo[0] == hi[0] == 4.0
    out = linear_pool_quantiles(q, TAU, [1, 2, 3], [0.0, 0.3, 0.5, 1.0], lower=lo, upper=hi)
    np.testing.assert_array_equal(out[0], [4.0, 4.0, 4.0, 4.0])
    f = member_cdf([[3.9, 4.0, 4.1], [0, 0, 0]], q, TAU, lo, hi)
    np.testing.assert_array_equal(f[0, :2], [[0, 1, 1], [0, 1, 1]])
    assert np.all(np.isnan(f[0, 2]))


def test_no_member_and_zero_weights_give_nan_for_that_item_only():
    q = np.concatenate([PAIR, np.full((1, 2, 5), np.nan), PAIR])
    w = np.array([[1.0, 1.0], [1.0, 1.0], [0.0, 0.0]])
    lo, hi = support_bounds(q)
    out = linear_pool_quantiles(q, TAU, w, TAU, lower=lo, upper=hi)
    np.testing.assert_allclose(out[0], (63.5461, 89.4444, 100.0, 114.1818, 145.4819), atol=1e-4)
    assert np.all(np.isnan(out[1:]))
    f = pool_cdf(np.full((3, 1), 100.0), q, TAU, w, lo, hi)
    assert f[0, 0] == pytest.approx(0.5)
    assert np.all(np.isnan(f[1:]))
    qa = quantile_average(q, w)
    assert np.all(np.isnan(qa[1:]))
    assert np.all(np.isfinite(qa[0]))
    qm = quantile_median(q)
    assert np.all(np.isnan(qm[1]))
    assert np.all(np.isfinite(qm[[0, 2]]))


def test_absent_member_weight_is_ignored():
    # Issue definition: weights are normalised over the members present.
    q = np.concatenate([PAIR, np.full((1, 1, 5), np.nan)], axis=1)
    lo, hi = support_bounds(q)
    out = linear_pool_quantiles(q, TAU, [1.0, 1.0, 50.0], TAU, lower=lo, upper=hi)
    np.testing.assert_allclose(out[0], (63.5461, 89.4444, 100.0, 114.1818, 145.4819), atol=1e-4)
    np.testing.assert_allclose(quantile_average(q, [1.0, 1.0, 50.0])[0], [70, 90, 100, 114, 137.5])


def test_quantile_median_against_numpy():
    # numpy.median / numpy.nanmedian as the reference (items with at least one value per level).
    rng = np.random.default_rng(3)
    q = random_panel(rng, 50, 5, TAU, absent=0.0, gaps=0.0)
    np.testing.assert_allclose(quantile_median(q), np.median(q, axis=1))
    q = random_panel(rng, 50, 6, TAU, absent=0.3, gaps=0.2)
    q[:, 0] = np.where(np.isnan(q[:, 0]), 1.0, q[:, 0])  # every level has one value at least
    np.testing.assert_allclose(quantile_median(q), np.nanmedian(q, axis=1))


def test_bad_arrays_are_refused_with_a_clear_message():
    lo, hi = np.array([51.0]), np.array([159.0])
    crossing = PAIR.copy()
    crossing[0, 1, 3] = 90.0
    with pytest.raises(ValueError, match=r"item 0, member 1: quantiles must not decrease"):
        linear_pool_quantiles(crossing, TAU, [1, 1], TAU, lower=lo, upper=hi)
    with pytest.raises(ValueError, match=r"lie within \[lower, upper\]"):
        member_cdf([[100.0]], PAIR, TAU, np.array([70.0]), hi)
    with pytest.raises(ValueError, match="weights must be finite and non-negative"):
        pool_cdf([[100.0]], PAIR, TAU, [1.0, -1.0], lo, hi)
    with pytest.raises(ValueError, match="levels must be strictly increasing"):
        member_cdf([[1.0]], PAIR, TAU[::-1], lo, hi)
    with pytest.raises(ValueError, match="out_levels must lie in"):
        linear_pool_quantiles(PAIR, TAU, [1, 1], [1.5], lower=lo, upper=hi)
    with pytest.raises(ValueError, match="quantiles must have shape"):
        quantile_median(PAIR[0])


# --------------------------------------------------------------------------- properties
LEVEL_CHOICES = (0.025, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95)
PROPERTY_SETTINGS = settings(
    max_examples=60,
    deadline=None,
    derandomize=True,  # deterministic: the same examples on every run
    database=None,
    suppress_health_check=[HealthCheck.too_slow],
)


@st.composite
def panels(draw, min_members=1):
    """(quantiles, levels, weights) with ties, absent members, gaps; >= 1 weighted member."""
    levels = sorted(
        draw(st.lists(st.sampled_from(LEVEL_CHOICES), min_size=1, max_size=5, unique=True))
    )
    n = draw(st.integers(1, 3))
    m = draw(st.integers(min_members, 4))
    k = len(levels)
    base = draw(st.lists(st.integers(-5, 40), min_size=n * m, max_size=n * m))
    steps = draw(
        st.lists(st.sampled_from([0, 0, 1, 3, 10]), min_size=n * m * k, max_size=n * m * k)
    )
    q = (np.reshape(base, (n, m, 1)) + np.cumsum(np.reshape(steps, (n, m, k)), axis=2)).astype(
        float
    )
    gaps = draw(st.lists(st.booleans(), min_size=n * m * k, max_size=n * m * k))
    q[np.reshape(gaps, (n, m, k)) & (np.arange(k) > 0)] = np.nan  # the first level stays
    weights = np.array(draw(st.lists(st.integers(0, 4), min_size=m, max_size=m)), dtype=float)
    weights[0] = max(weights[0], 1.0)
    return q, np.array(levels), weights


@pytest.mark.property
@PROPERTY_SETTINGS
@given(panels(min_members=1))
def test_property_single_member_pool_returns_its_quantiles(panel):
    # Definition: a pool of one member is that member (its piecewise-linear quantile function).
    q, levels, _ = panel
    one = q[:, :1]
    lo, hi = support_bounds(one)
    out = linear_pool_quantiles(one, levels, [1.0], levels, lower=lo, upper=hi)
    given_levels = ~np.isnan(one[:, 0])
    np.testing.assert_allclose(out[given_levels], one[:, 0][given_levels], atol=1e-9)


@pytest.mark.property
@PROPERTY_SETTINGS
@given(panels(), st.floats(1e-3, 1e3), st.randoms(use_true_random=False))
def test_property_weight_scale_and_member_order_do_not_matter(panel, scale, random):
    # Invariances of the linear pool (Cooke 1991 ch. 12): normalised weights, a symmetric sum.
    q, levels, w = panel
    lo, hi = support_bounds(q)
    out_levels = np.linspace(0.0, 1.0, 21)
    ref = linear_pool_quantiles(q, levels, w, out_levels, lower=lo, upper=hi)
    scaled = linear_pool_quantiles(q, levels, w * scale, out_levels, lower=lo, upper=hi)
    perm = list(range(q.shape[1]))
    random.shuffle(perm)
    permuted = linear_pool_quantiles(q[:, perm], levels, w[perm], out_levels, lower=lo, upper=hi)
    np.testing.assert_allclose(scaled, ref, atol=1e-9)
    np.testing.assert_allclose(permuted, ref, atol=1e-9)
    np.testing.assert_allclose(quantile_average(q, w * scale), quantile_average(q, w), atol=1e-9)
    np.testing.assert_allclose(
        quantile_median(q[:, perm]), quantile_median(q), atol=0, equal_nan=True
    )
    finite = ~np.isnan(ref)
    assert np.all(np.diff(np.where(finite, ref, 0.0), axis=1) >= -1e-9)  # quantiles non-decreasing


@pytest.mark.property
@PROPERTY_SETTINGS
@given(panels(min_members=2))
def test_property_pool_cdf_is_monotone_and_between_the_members(panel):
    # A mixture of CDFs is a CDF and lies between its components' smallest and largest values.
    q, levels, w = panel
    lo, hi = support_bounds(q)
    n = q.shape[0]
    x = np.linspace(lo - 1, hi + 1, 201).T
    x = np.concatenate([x, np.where(np.isnan(q), lo[:, None, None], q).reshape(n, -1)], axis=1)
    x = np.sort(x, axis=1)
    pooled = pool_cdf(x, q, levels, w, lo, hi)
    f = member_cdf(x, q, levels, lo, hi)
    present_weighted = ~np.all(np.isnan(q), axis=2) & (w > 0)
    for i in range(n):
        if not present_weighted[i].any():
            assert np.all(np.isnan(pooled[i]))
            continue
        fi = f[i, present_weighted[i]]
        assert np.all(np.diff(pooled[i]) >= -1e-12)
        assert np.all(pooled[i] >= fi.min(axis=0) - 1e-12)
        assert np.all(pooled[i] <= fi.max(axis=0) + 1e-12)
        # and its quantiles invert it: F(Q(tau)) = tau wherever F is continuous there
        tau = np.array([0.2, 0.5, 0.8])
        qq = linear_pool_quantiles(
            q[i : i + 1], levels, w, tau, lower=lo[i : i + 1], upper=hi[i : i + 1]
        )
        back = pool_cdf(qq, q[i : i + 1], levels, w, lo[i : i + 1], hi[i : i + 1])[0]
        assert np.all(back >= tau - 1e-9)
