"""Checks of Cooke's Classical Model core against published formulas and scipy.

Check values C1-C6, I2, I3 and D1 are from docs/methods.md §1-§3 (hand-computed with
scipy 1.17); each is also recomputed here with scipy.special.rel_entr / scipy.stats.chi2.
"""

from __future__ import annotations

import numpy as np
import numpy.testing as npt
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import rel_entr
from scipy.stats import chi2, norm

from forebrief.core import (
    Weights,
    bin_counts,
    bin_index,
    calibration_score,
    information_score,
    intrinsic_range,
    performance_weights,
    relative_entropy,
)
from forebrief.errors import ConfigError
from forebrief.tables.schema import CM_LEVELS, cm_probabilities

P5 = cm_probabilities(CM_LEVELS)  # (.05, .20, .25, .25, .20, .05)
P3 = cm_probabilities((0.05, 0.5, 0.95))  # (.05, .45, .45, .05)


def scipy_calibration(counts, p, power=1.0):
    """Direct scipy recomputation of Cooke (1991, ch. 12): chi2.sf(2 N c I(s, p), R - 1)."""
    c = np.asarray(counts, dtype=float)
    n = c.sum()
    info = rel_entr(c / n, p).sum()
    return info, chi2.sf(2 * n * power * info, len(p) - 1)


# ---------------------------------------------------------------------------------------
# bins


def test_bin_index_ties_go_to_the_lower_bin():
    # Cooke (1991, ch. 12) bin definitions B_j = (q_{j-1}, q_j]: a value equal to a quantile
    # belongs to the lower bin (docs/methods.md §1, "Ties").
    q = np.array([[2.0, 4, 5, 7, 10]] * 7)
    y = np.array([1.0, 2, 4, 4.0001, 7, 10, 10.5])
    npt.assert_array_equal(bin_index(q, y), [0, 0, 1, 2, 3, 4, 5])


def test_bin_index_tied_quantiles():
    # Tied quantiles make empty bins; a value equal to the tie is in the lowest of them.
    q = np.array([[3.0, 3, 3, 7, 10]] * 3)
    npt.assert_array_equal(bin_index(q, np.array([3.0, 3.5, 2.0])), [0, 3, 0])


def test_bin_index_rejects_missing_values():
    q = np.array([[1.0, 2, 3]] * 2)
    with pytest.raises(ValueError, match="missing value"):
        bin_index(q, np.array([1.5, np.nan]))


def test_bin_counts_overall_and_grouped_match_a_loop():
    rng = np.random.default_rng(20240611)
    bins = rng.integers(0, 6, size=500)
    groups = rng.integers(0, 4, size=500)
    npt.assert_array_equal(bin_counts(bins, n_bins=6), [np.sum(bins == j) for j in range(6)])
    expected = np.array([[np.sum((bins == j) & (groups == g)) for j in range(6)] for g in range(5)])
    got = bin_counts(bins, n_bins=6, groups=groups, n_groups=5)
    assert got.shape == (5, 6)
    assert got.dtype == np.int64
    npt.assert_array_equal(got, expected)
    npt.assert_array_equal(bin_counts(bins, n_bins=6, groups=groups), expected[:4])


def test_bin_counts_rejects_out_of_range_bins():
    with pytest.raises(ValueError, match=r"outside 0\.\.5"):
        bin_counts(np.array([0, 6]), n_bins=6)


# ---------------------------------------------------------------------------------------
# calibration

# (name, counts, p, power, expected I, expected C) -- docs/methods.md §1, Cooke (1991, ch. 12)
CALIBRATION_CASES = [
    ("C1 three quantiles", [1, 2, 5, 2], P3, 1.0, 0.2370678, 0.191746),
    ("C2 perfect", [1, 4, 5, 5, 4, 1], P5, 1.0, 0.0, 1.0),
    ("C3 overconfident", [4, 2, 4, 4, 2, 4], P5, 1.0, 0.326631, 0.022775),
    ("C4 empty bins, 0 ln 0 = 0", [0, 3, 7, 6, 4, 0], P5, 1.0, 0.129309, 0.395207),
    ("C5 large N", [40, 20, 40, 40, 20, 40], P5, 1.0, 0.326631, 1.73e-26),
    ("C6 power 0.1", [40, 20, 40, 40, 20, 40], P5, 0.1, 0.326631, 0.022775),
]


@pytest.mark.parametrize(
    ("counts", "p", "power", "info", "cal"),
    [case[1:] for case in CALIBRATION_CASES],
    ids=[case[0] for case in CALIBRATION_CASES],
)
def test_calibration_check_values(counts, p, power, info, cal):
    counts = np.array(counts)
    npt.assert_allclose(relative_entropy(counts, p), info, rtol=1e-5, atol=1e-12)
    got = calibration_score(counts, p, power=power)
    npt.assert_allclose(got, cal, rtol=2e-3)
    # Same numbers straight from scipy (rel_entr + chi2.sf, df = R - 1).
    ref_info, ref_cal = scipy_calibration(counts, p, power)
    npt.assert_allclose(relative_entropy(counts, p), ref_info, rtol=1e-12, atol=1e-15)
    npt.assert_allclose(got, ref_cal, rtol=1e-12)


def test_c1_statistic():
    # Check C1, docs/methods.md §1: 2 N I = 4.741356 with N = 10 (Cooke 1991, ch. 12).
    assert 2 * 10 * float(relative_entropy(np.array([1, 2, 5, 2]), P3)) == pytest.approx(
        4.741356, rel=1e-6
    )


def test_counts_proportional_to_p_give_one():
    # Definition (Cooke 1991, ch. 12): s = p gives I = 0, so C = chi2.sf(0) = 1 for any N.
    counts = np.stack([20 * P5, 200 * P5, 2000 * P5])
    npt.assert_allclose(calibration_score(counts, P5), 1.0)


def test_all_observations_in_one_outer_bin():
    # s = (1, 0, ..., 0): I = ln(1 / p_1) = ln 20; C from scipy.stats.chi2.sf with df 5.
    counts = np.array([10, 0, 0, 0, 0, 0])
    npt.assert_allclose(relative_entropy(counts, P5), np.log(20.0), rtol=1e-12)
    npt.assert_allclose(
        calibration_score(counts, P5), chi2.sf(2 * 10 * np.log(20.0), 5), rtol=1e-12
    )
    flipped = counts[::-1].copy()
    npt.assert_allclose(calibration_score(flipped, P5), calibration_score(counts, P5))


def test_calibration_is_vectorised_over_leading_axes_and_n0_is_nan():
    rows = np.array([case[1] for case in CALIBRATION_CASES[1:5]] + [[0] * 6])
    got = calibration_score(rows.reshape(5, 6), P5)
    assert got.shape == (5,)
    for r in range(4):
        npt.assert_allclose(got[r], scipy_calibration(rows[r], P5)[1], rtol=1e-12)
    assert np.isnan(got[4])
    assert np.isnan(relative_entropy(np.zeros((2, 3, 6)), P5)).all()
    assert calibration_score(rows.reshape(5, 1, 6), P5).shape == (5, 1)


@pytest.mark.parametrize("power", [0.0, -0.5, 1.5, float("nan"), True, "1"])
def test_calibration_power_outside_unit_interval_is_refused(power):
    with pytest.raises(ConfigError, match="calibration power must be a number in"):
        calibration_score(np.array([1, 4, 5, 5, 4, 1]), P5, power=power)


def test_calibration_power_matches_fewer_items():
    # Cooke (1991, ch. 12) calibration power: c N replaces N, so 10x the counts at c = 0.1
    # equals the original counts (checks C5/C6, docs/methods.md §1).
    base = np.array([4, 2, 4, 4, 2, 4])
    npt.assert_allclose(
        calibration_score(10 * base, P5, power=0.1), calibration_score(base, P5), rtol=1e-12
    )


def test_bad_probabilities_are_refused():
    with pytest.raises(ConfigError, match="sum to 1"):
        calibration_score(np.array([1, 2, 3]), np.array([0.2, 0.2, 0.2]))
    with pytest.raises(ConfigError, match="> 0"):
        calibration_score(np.array([1, 2, 3]), np.array([0.5, 0.5, 0.0]))


# ---------------------------------------------------------------------------------------
# information

EXPERT_A = np.array([80, 95, 100, 108, 125.0])
EXPERT_B = np.array([60, 85, 100, 120, 150.0])
REALIZATION = 112.0


def _two_expert_item(transform=lambda v: v):
    q = transform(np.stack([EXPERT_A, EXPERT_B]))
    x = transform(np.array([REALIZATION, REALIZATION]))
    lowest = np.minimum(q.min(), x)
    highest = np.maximum(q.max(), x)
    lo, hi = intrinsic_range(lowest, highest, overshoot=0.1)
    return q, lo, hi


def test_i2_two_experts_uniform_background():
    # Check I2, docs/methods.md §2 (Cooke & Slijkhuis 2003, section 15.3.2): range [51, 159],
    # I_A = 0.670480, I_B = 0.075953.
    q, lo, hi = _two_expert_item()
    npt.assert_allclose(lo, 51.0)
    npt.assert_allclose(hi, 159.0)
    npt.assert_allclose(information_score(q, lo, hi, P5), [0.670480, 0.075953], atol=5e-7)
    # Hand check (docs/methods.md §2): A's bin widths 29, 15, 5, 8, 17, 34 on a range of 108.
    widths = np.array([29, 15, 5, 8, 17, 34.0])
    hand = np.sum(P5 * np.log(108 * P5 / widths))
    npt.assert_allclose(information_score(q, lo, hi, P5)[0], hand, rtol=1e-12)


def test_i3_two_experts_log_uniform_background():
    # Check I3, docs/methods.md §2 (Cooke 1991, ch. 12): log-uniform background = take logs
    # of everything first; range exp -> [54.7466, 164.3937], I_A = 0.692084, I_B = 0.088063.
    q, lo, hi = _two_expert_item(np.log)
    npt.assert_allclose(np.exp([lo[0], hi[0]]), [54.7466, 164.3937], atol=5e-5)
    npt.assert_allclose(information_score(q, lo, hi, P5), [0.692084, 0.088063], atol=5e-7)


def test_tied_quantiles_stay_finite_thanks_to_the_floor():
    q = np.array([[100.0, 100, 100, 108, 125]])
    lo, hi = np.array([51.0]), np.array([159.0])
    with np.errstate(all="raise"):
        got = information_score(q, lo, hi, P5, floor=1e-3)
    assert np.isfinite(got).all()
    # Two bins of width 0 get the floor 1e-3 (Cooke 1991, ch. 12 formula with floored widths).
    widths = np.maximum(np.diff(np.r_[51.0, q[0], 159.0]) / 108.0, 1e-3)
    npt.assert_allclose(got, np.sum(P5 * np.log(P5 / widths)), rtol=1e-12)
    assert got[0] > information_score(np.array([EXPERT_A]), lo, hi, P5)[0]


def test_empty_range_gives_nan_without_warning():
    q = np.array([[5.0, 5, 5, 5, 5], [1.0, 2, 3, 4, 5]])
    lo = np.array([5.0, 0.0])
    hi = np.array([5.0, 6.0])
    got = information_score(q, lo, hi, P5)
    assert np.isnan(got[0])
    assert np.isfinite(got[1])


@pytest.mark.parametrize("floor", [0.0, -1e-3, 1.0, True])
def test_bad_floor_is_refused(floor):
    with pytest.raises(ConfigError, match="information floor"):
        information_score(
            np.array([EXPERT_A]), np.array([51.0]), np.array([159.0]), P5, floor=floor
        )


def test_bad_overshoot_is_refused():
    with pytest.raises(ConfigError, match="overshoot must be"):
        intrinsic_range(np.array([1.0]), np.array([2.0]), overshoot=-0.1)


@pytest.mark.property
@settings(max_examples=200, deadline=None)
@given(
    st.lists(st.integers(0, 60), min_size=5, max_size=5),
    st.integers(0, 60),
    st.sampled_from([0.0, 0.1, 0.5]),
)
def test_information_is_never_negative(values, observed, overshoot):
    # Gibbs' inequality: sum p ln(p / w) >= 0 for relative widths w summing to 1; integer
    # quantiles make ties (floored bins) common, which must not break it for the CM levels.
    q = np.sort(np.array(values, dtype=float))[None, :]
    lowest = np.minimum(q.min(), observed)
    highest = np.maximum(q.max(), observed)
    lo, hi = intrinsic_range(np.array([lowest]), np.array([highest]), overshoot=overshoot)
    got = information_score(q, lo, hi, P5)
    if hi[0] > lo[0]:
        assert got[0] >= -1e-12
    else:
        assert np.isnan(got[0])


# ---------------------------------------------------------------------------------------
# the three-model regression example of docs/methods.md §3 (our own construction)

TAU = np.array(CM_LEVELS)
X = np.array([12, 30, 45, 80, 150, 220, 400, 650, 900, 1500.0])
SIG = np.array([0.3, 0.2, 0.6])
DL = np.array(
    [
        [0.10, -0.20, 0.30, -0.40, 0.05, 0.20, -0.10, 0.50, -0.30, 0.00],
        [0.10, 0.20, -0.20, 0.30, 0.15, 0.05, 0.25, -0.15, 0.20, 0.30],
        [-0.30, 0.50, 0.20, -0.60, 0.10, -0.20, 0.40, 0.30, -0.10, 0.70],
    ]
)
# Q[e, i, :] = x_i exp(dl[e, i] + sig[e] Phi^-1(tau)), lognormal-shaped quantiles.
Q = X[None, :, None] * np.exp(DL[:, :, None] + SIG[:, None, None] * norm.ppf(TAU)[None, None, :])


def _d1_scores():
    models, items = Q.shape[:2]
    flat_q = Q.reshape(models * items, 5)
    flat_x = np.tile(X, models)
    codes = np.repeat(np.arange(models), items)
    counts = bin_counts(bin_index(flat_q, flat_x), n_bins=6, groups=codes, n_groups=models)
    cal = calibration_score(counts, P5)
    lo, hi = intrinsic_range(np.minimum(Q.min(axis=(0, 2)), X), np.maximum(Q.max(axis=(0, 2)), X))
    info_items = information_score(flat_q, np.tile(lo, models), np.tile(hi, models), P5)
    info = info_items.reshape(models, items).mean(axis=1)
    return counts, cal, info


def test_d1_calibration_and_information():
    # Check D1, docs/methods.md §3 (Cooke & Goossens 2008): C = (0.7204, 0.0310, 0.6283),
    # I = (0.8150, 1.0683, 0.2109); model 1 bin counts [1, 1, 4, 2, 2, 0] (check V1, §9).
    counts, cal, info = _d1_scores()
    npt.assert_array_equal(counts[0], [1, 1, 4, 2, 2, 0])
    npt.assert_allclose(cal, [0.7204, 0.0310, 0.6283], atol=5e-5)
    npt.assert_allclose(info, [0.8150, 1.0683, 0.2109], atol=5e-5)


@pytest.mark.parametrize(
    ("alpha", "expected", "passed"),
    [
        # Check D1 weights, docs/methods.md §3 (Cooke & Goossens 2008; brute force over {0}
        # and the C(e)).
        (0.0, [0.780, 0.044, 0.176], [True, True, True]),
        ("C3", [0.8159, 0.0, 0.1841], [True, False, True]),
        ("C1", [1.0, 0.0, 0.0], [True, False, False]),
    ],
)
def test_d1_weights_and_alpha_cutoff(alpha, expected, passed):
    _, cal, info = _d1_scores()
    # alpha equal to a model's own calibration keeps that model (the test is >=).
    a = {"C1": cal[0], "C3": cal[2]}.get(alpha, alpha)
    w = performance_weights(cal, info, alpha=float(a))
    assert isinstance(w, Weights)
    npt.assert_allclose(w.weight, expected, atol=5e-4)
    npt.assert_array_equal(w.passed, passed)
    npt.assert_array_equal(w.equal_fallback, [False])


def test_weights_follow_the_formula_and_sum_to_one():
    cal = np.array([0.5, 0.02, 0.3, 0.9])
    info = np.array([1.2, 3.0, 0.4, 0.1])
    w = performance_weights(cal, info, alpha=0.05)
    raw = cal * info * (cal >= 0.05)  # Cooke (1991, ch. 12): C I 1{C >= alpha}
    npt.assert_allclose(w.weight, raw / raw.sum(), rtol=1e-12)
    assert w.weight.sum() == pytest.approx(1.0)


def test_equal_fallback_when_no_model_passes():
    w = performance_weights(np.array([0.01, 0.02, 0.03]), np.array([1.0, 2, 3]), alpha=0.5)
    npt.assert_allclose(w.weight, [1 / 3] * 3)
    assert not w.passed.any()
    npt.assert_array_equal(w.equal_fallback, [True])
    assert w.equal_fallback.shape == (1,)


def test_nan_scores_do_not_pass():
    w = performance_weights(np.array([np.nan, 0.4, 0.6]), np.array([1.0, np.nan, 2.0]), alpha=0.0)
    npt.assert_array_equal(w.passed, [False, False, True])
    npt.assert_allclose(w.weight, [0.0, 0.0, 1.0])


def test_grouped_weights():
    cal = np.array([0.5, 0.3, 0.01, 0.02, 0.8, 0.4])
    info = np.array([1.0, 2.0, 1.0, 1.0, 0.5, 0.5])
    groups = np.array([0, 0, 1, 1, 2, 2])
    w = performance_weights(cal, info, alpha=0.1, groups=groups)
    npt.assert_allclose(w.weight, [0.5 / 1.1, 0.6 / 1.1, 0.5, 0.5, 2 / 3, 1 / 3], rtol=1e-12)
    npt.assert_array_equal(w.equal_fallback, [False, True, False])
    npt.assert_allclose(np.bincount(groups, weights=w.weight), 1.0)
    # Each group on its own gives the same weights as the grouped call.
    for g in range(3):
        alone = performance_weights(cal[groups == g], info[groups == g], alpha=0.1)
        npt.assert_allclose(w.weight[groups == g], alone.weight, rtol=1e-12)


def test_weights_are_invariant_to_scaling_and_reordering():
    rng = np.random.default_rng(7)
    cal = rng.uniform(0, 1, 8)
    info = rng.uniform(0.1, 2, 8)
    w = performance_weights(cal, info, alpha=0.2).weight
    npt.assert_allclose(performance_weights(cal, 13.5 * info, alpha=0.2).weight, w, rtol=1e-12)
    order = rng.permutation(8)
    npt.assert_allclose(performance_weights(cal[order], info[order], alpha=0.2).weight, w[order])


@pytest.mark.parametrize("alpha", [-0.1, 1.1, float("nan")])
def test_bad_alpha_is_refused(alpha):
    with pytest.raises(ConfigError, match="significance level alpha"):
        performance_weights(np.array([0.5]), np.array([1.0]), alpha=alpha)


@pytest.mark.property
@settings(max_examples=100, deadline=None)
@given(
    st.lists(st.integers(0, 30), min_size=6, max_size=6).filter(lambda c: sum(c) > 0),
    st.floats(0.01, 1.0),
)
def test_calibration_lies_in_unit_interval_and_matches_scipy(counts, power):
    counts = np.array(counts)
    got = float(calibration_score(counts, P5, power=power))
    assert 0.0 <= got <= 1.0
    npt.assert_allclose(got, scipy_calibration(counts, P5, power)[1], rtol=1e-10, atol=1e-300)
