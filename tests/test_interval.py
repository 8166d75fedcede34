"""Checks of the quantile, interval and weighted interval scores.

Outside references: the worked examples W1, W2, L1, K2 of docs/methods.md (Bracher
et al. 2021; Bosse et al. 2023; Gneiting & Raftery 2007) and the scoringrules library
(`crps_quantile`, `interval_score`, `quantile_score`, `weighted_interval_score`) called here.
"""

from __future__ import annotations

from importlib.metadata import version

import numpy as np
import numpy.testing as npt
import pytest
import scoringrules as sr
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import norm

from forebrief.core import (
    CentralIntervals,
    WISParts,
    absolute_error,
    central_intervals,
    interval_coverage,
    interval_score,
    quantile_score,
    sign_bias,
    wis_parts,
)
from forebrief.errors import ConfigError
from forebrief.tables.schema import CM_LEVELS, STANDARD_LEVELS

TAU5 = np.array(CM_LEVELS)
TAU23 = np.array(STANDARD_LEVELS)
Q_W = np.array([2, 4, 5, 7, 10.0])

SR_VERSION = version("scoringrules")


def _sr_args(observed, quantiles, levels):
    """Split quantiles into scoringrules' (median, lower, upper, alpha) arguments."""
    ci = central_intervals(levels)
    return (
        observed,
        quantiles[:, ci.median],
        quantiles[:, ci.lower],
        quantiles[:, ci.upper],
        ci.alpha,
    )


def _random_forecasts(levels, n, seed):
    rng = np.random.default_rng(seed)
    centre = rng.gamma(2.0, 50.0, n)
    spread = rng.uniform(1.0, 40.0, n)
    q = centre[:, None] + spread[:, None] * norm.ppf(levels)[None, :]
    q = np.sort(q + rng.normal(0, 0.5, q.shape), axis=1)  # not exactly normal, still sorted
    y = centre + rng.normal(0, 1.5, n) * spread
    return y, q


# ---------------------------------------------------------------------------------------
# worked examples


@pytest.mark.parametrize(
    ("y", "wis", "dispersion", "over", "under"),
    [
        # Checks W1 and W2 (docs/methods.md §5), Bracher et al. (2021), WIS formula and
        # decomposition
        (12.0, 4.66, 0.46, 0.0, 4.20),
        (6.0, 0.66, 0.46, 0.0, 0.20),
        (1.0, 2.86, 0.46, 2.40, 0.0),
    ],
)
def test_worked_examples(y, wis, dispersion, over, under):
    parts = wis_parts(np.array([y]), Q_W[None, :], TAU5)
    assert isinstance(parts, WISParts)
    npt.assert_allclose(parts.wis, wis, rtol=1e-12)
    npt.assert_allclose(parts.dispersion, dispersion, rtol=1e-12)
    npt.assert_allclose(parts.overprediction, over, atol=1e-12)
    npt.assert_allclose(parts.underprediction, under, atol=1e-12)


def test_w1_interval_scores():
    # Check W1, docs/methods.md §5 (Gneiting & Raftery 2007, section 6.2): IS_0.1 = 48,
    # IS_0.5 = 23 for y = 12.
    got = interval_score(np.array([12.0]), np.array([[2.0, 4]]), np.array([[10.0, 7]]), [0.1, 0.5])
    npt.assert_allclose(got, [[48.0, 23.0]])
    npt.assert_allclose(got[0], sr.interval_score(12.0, [2.0, 4], [10.0, 7], [0.1, 0.5]))


def test_l1_log_scale():
    # Check L1, docs/methods.md §8 (Bosse et al. 2023, PLOS Comput Biol): log1p-transformed
    # W1 inputs give WIS 0.4886 = 0.0730 + 0 + 0.4157.
    parts = wis_parts(np.log1p(np.array([12.0])), np.log1p(Q_W)[None, :], TAU5)
    npt.assert_allclose(parts.wis, 0.4886, atol=5e-5)
    npt.assert_allclose(parts.dispersion, 0.0730, atol=5e-5)
    npt.assert_allclose(parts.overprediction, 0.0, atol=1e-12)
    npt.assert_allclose(parts.underprediction, 0.4157, atol=5e-5)


@pytest.mark.parametrize(
    ("n_levels", "expected", "tol"),
    [
        # Check K2, docs/methods.md §9 (Bracher et al. 2021: WIS -> CRPS as the levels fill
        # (0, 1)).
        (99, 0.826860, 5e-7),
        (999, 0.826867, 5e-7),
    ],
)
def test_k2_midpoint_levels_converge_to_the_normal_crps(n_levels, expected, tol):
    levels = (np.arange(1, n_levels + 1) - 0.5) / n_levels
    got = wis_parts(np.array([1.3]), norm.ppf(levels)[None, :], levels).wis[0]
    npt.assert_allclose(got, expected, atol=tol)
    # CRPS of N(0, 1) at 1.3 (Gneiting & Raftery 2007, section 4.2), from scoringrules.
    crps = float(sr.crps_normal(1.3, 0.0, 1.0))
    assert abs(got - crps) < 1e-5 * 1000 / n_levels


def test_k2_the_23_standard_levels_do_not_converge():
    # Check K2, docs/methods.md §9: the 23-level set gives 0.728474, well below the CRPS 0.826866.
    got = wis_parts(np.array([1.3]), norm.ppf(TAU23)[None, :], TAU23).wis[0]
    npt.assert_allclose(got, 0.728474, atol=5e-7)
    assert got < float(sr.crps_normal(1.3, 0.0, 1.0)) - 0.09


# ---------------------------------------------------------------------------------------
# against scoringrules


def _edge_cases():
    q = np.array(
        [
            [2, 4, 5, 7, 10.0],  # observation equal to a quantile (below)
            [2, 4, 5, 7, 10.0],  # observation equal to the median
            [3, 3, 3, 3, 3.0],  # all quantiles tied
            [0, 0, 1, 1, 4.0],  # partial ties
            [2, 4, 5, 7, 10.0],  # observation far above
            [2, 4, 5, 7, 10.0],  # observation far below
        ]
    )
    y = np.array([4.0, 5.0, 3.0, 1.0, 1e6, -1e6])
    return y, q


CASES = {
    "random 5 levels": (*_random_forecasts(TAU5, 300, 11), TAU5),
    "random 23 levels": (*_random_forecasts(TAU23, 300, 12), TAU23),
    "edge cases": (*_edge_cases(), TAU5),
}


@pytest.mark.parametrize("case", CASES)
def test_wis_equals_scoringrules_crps_quantile(case):
    # scoringrules crps_quantile (mean of twice the pinball loss) equals WIS exactly for a
    # symmetric level set with 0.5 (Bracher et al. 2021, quantile form).
    y, q, levels = CASES[case]
    npt.assert_allclose(
        wis_parts(y, q, levels).wis, sr.crps_quantile(y, q, levels), rtol=1e-12, atol=1e-9
    )


@pytest.mark.parametrize("case", CASES)
def test_wis_equals_scoringrules_weighted_interval_score_numba(case):
    # scoringrules weighted_interval_score, numba backend, default weights w0 = 1/2,
    # w_k = alpha_k / 2 (the paper's WIS; docs/methods.md §5).
    y, q, levels = CASES[case]
    ref = sr.weighted_interval_score(*_sr_args(y, q, levels), backend="numba")
    npt.assert_allclose(wis_parts(y, q, levels).wis, ref, rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("case", CASES)
def test_interval_score_equals_scoringrules(case):
    y, q, levels = CASES[case]
    ci = central_intervals(levels)
    ours = interval_score(y, q[:, ci.lower], q[:, ci.upper], ci.alpha)
    ref = sr.interval_score(y, q[:, ci.lower], q[:, ci.upper], ci.alpha)
    npt.assert_allclose(ours, ref, rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("case", CASES)
def test_quantile_score_is_twice_scoringrules_pinball(case):
    # scoringrules 0.10 quantile_score is the plain pinball loss (Koenker & Bassett 1978),
    # without the factor 2 of Bracher et al. (2021); ours has the factor.
    y, q, levels = CASES[case]
    ref = sr.quantile_score(y[:, None], q, levels[None, :])
    npt.assert_allclose(quantile_score(y, q, levels), 2 * ref, rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("case", CASES)
def test_wis_is_the_mean_quantile_score(case):
    # Bracher et al. (2021): WIS = (1 / (2K + 1)) sum_j QS_tau_j for 2K + 1 symmetric levels.
    y, q, levels = CASES[case]
    npt.assert_allclose(
        wis_parts(y, q, levels).wis, quantile_score(y, q, levels).mean(axis=1), rtol=1e-12
    )


def test_scoringrules_numpy_backend_median_term():
    """Document the numpy-backend defect of scoringrules 0.10.0 (W3, our own; docs/methods.md §5).

    Its numpy backend adds w_median * median where the paper has w_median * |y - median|,
    giving 4.26 instead of 4.66 on W1. If a later release fixes it, the result agrees with
    ours and the first branch asserts that agreement instead.
    """
    y = np.array([12.0, 6.0, 1.0])
    q = np.tile(Q_W, (3, 1))
    ours = wis_parts(y, q, TAU5).wis
    obs, median, lower, upper, alpha = _sr_args(y, q, TAU5)
    got = np.asarray(sr.weighted_interval_score(obs, median, lower, upper, alpha, backend="numpy"))
    is_sum = (interval_score(obs, lower, upper, alpha) * (alpha / 2)).sum(axis=1)
    defective = (is_sum + 0.5 * median) / 2.5
    assert not np.allclose(defective, ours)  # the inputs tell the two formulas apart
    if np.allclose(got, ours, rtol=1e-12):
        # Fixed release: numpy backend agrees with the paper's WIS.
        npt.assert_allclose(got, ours, rtol=1e-12)
    else:
        # Defect present (seen in scoringrules 0.10.0): check W3's 4.26, 1.46, 3.06.
        npt.assert_allclose(
            got, defective, rtol=1e-12, err_msg=f"scoringrules {SR_VERSION}: neither formula"
        )
        npt.assert_allclose(got, [4.26, 1.46, 3.06], rtol=1e-12)


# ---------------------------------------------------------------------------------------
# decomposition, level sets, missing values


@pytest.mark.parametrize("case", CASES)
def test_parts_are_nonnegative_and_sum_to_wis(case):
    y, q, levels = CASES[case]
    p = wis_parts(y, q, levels)
    for part in (p.dispersion, p.overprediction, p.underprediction):
        assert (part >= 0).all()
    npt.assert_allclose(p.dispersion + p.overprediction + p.underprediction, p.wis, rtol=1e-12)
    # Dispersion does not depend on the observation: with the observation at the median
    # nothing is over- or underpredicted and WIS is the dispersion alone.
    at_median = wis_parts(q[:, levels.size // 2], q, levels)
    npt.assert_allclose(at_median.wis, p.dispersion, rtol=1e-12, atol=1e-12)


def test_no_median_drops_the_median_term_and_normalises_by_k():
    # Common practice, no source: WIS without the median is sum_k w_k IS_k / K. Checked with
    # scoringrules (numba) with w_median = 0, which divides by K + 1/2 instead of K.
    levels = np.array([0.05, 0.25, 0.75, 0.95])
    y, q5 = _random_forecasts(TAU5, 50, 21)
    q = q5[:, [0, 1, 3, 4]]
    ref = sr.weighted_interval_score(
        y, q5[:, 2], q[:, :2], q[:, [3, 2]], np.array([0.1, 0.5]), w_median=0.0, backend="numba"
    )
    npt.assert_allclose(wis_parts(y, q, levels).wis, np.asarray(ref) * 2.5 / 2, rtol=1e-12)


def test_median_only_is_the_absolute_error():
    # With K = 0 the WIS is (1/2 |y - m|) / (1/2) = |y - m| (Bracher et al. 2021).
    y, q5 = _random_forecasts(TAU5, 40, 31)
    parts = wis_parts(y, q5[:, [2]], np.array([0.5]))
    npt.assert_allclose(parts.wis, absolute_error(q5[:, 2], y), rtol=1e-12)
    npt.assert_allclose(parts.dispersion, 0.0)


@pytest.mark.parametrize("levels", [[0.3], [0.2, 0.3], [0.1, 0.8]])
def test_no_interval_and_no_median_is_refused(levels):
    with pytest.raises(ConfigError, match="no median and no central interval"):
        wis_parts(np.array([1.0]), np.zeros((1, len(levels))), np.array(levels))


def test_bad_levels_are_refused():
    with pytest.raises(ConfigError, match="strictly between 0 and 1"):
        wis_parts(np.array([1.0]), np.zeros((1, 2)), np.array([0.0, 0.5]))


def test_nan_observation_propagates():
    y = np.array([np.nan, 6.0])
    parts = wis_parts(y, np.tile(Q_W, (2, 1)), TAU5)
    for part in (parts.wis, parts.dispersion, parts.overprediction, parts.underprediction):
        assert np.isnan(part[0])
        assert np.isfinite(part[1])
    assert np.isnan(quantile_score(y, np.tile(Q_W, (2, 1)), TAU5)[0]).all()


def test_central_intervals_pairs_levels_with_tolerance():
    # 1 - 0.95 is 0.050000000000000044 in floating point: still the partner of 0.05.
    levels = np.array([0.95, 0.5, 0.05, 0.25, 0.75, 0.4])
    ci = central_intervals(levels)
    assert isinstance(ci, CentralIntervals)
    npt.assert_array_equal(ci.lower, [2, 3])  # 0.05 then 0.25; 0.4 has no partner
    npt.assert_array_equal(ci.upper, [0, 4])
    npt.assert_allclose(ci.alpha, [0.1, 0.5])
    assert ci.median == 1
    assert central_intervals(np.array([0.25, 0.75])).median is None
    k23 = central_intervals(TAU23)
    assert k23.lower.size == 11
    npt.assert_allclose(TAU23[k23.lower] + TAU23[k23.upper], 1.0)


def test_coverage_counts_ties_as_covered():
    # docs/methods.md §5 "Coverage ties": covered when l <= y <= u.
    y = np.array([2.0, 10.0, 1.999, 10.001, 6.0])
    got = interval_coverage(y, np.full(5, 2.0), np.full(5, 10.0))
    npt.assert_array_equal(got, [True, True, False, False, True])
    two = interval_coverage(y, np.tile([2.0, 4.0], (5, 1)), np.tile([10.0, 7.0], (5, 1)))
    assert two.shape == (5, 2)
    npt.assert_array_equal(two[:, 1], [False, False, False, False, True])


def test_v1_coverage_of_the_regression_model():
    # Check V1, docs/methods.md §9 (Gneiting et al. 2007): model 1 of §3 there covers 6 of 10
    # items with its 50 % interval and 9 of 10 with its 90 % interval.
    x = np.array([12, 30, 45, 80, 150, 220, 400, 650, 900, 1500.0])
    dl = np.array([0.10, -0.20, 0.30, -0.40, 0.05, 0.20, -0.10, 0.50, -0.30, 0.00])
    q = x[:, None] * np.exp(dl[:, None] + 0.3 * norm.ppf(TAU5)[None, :])
    cov = interval_coverage(x, q[:, [0, 1]], q[:, [4, 3]])
    npt.assert_allclose(cov.mean(axis=0), [0.9, 0.6])


def test_point_errors():
    median = np.array([5.0, 3.0, 4.0, np.nan])
    y = np.array([3.0, 5.0, 4.0, 1.0])
    npt.assert_array_equal(absolute_error(median, y)[:3], [2.0, 2.0, 0.0])
    npt.assert_array_equal(sign_bias(median, y)[:3], [1.0, -1.0, 0.0])  # +1: too high
    assert np.isnan(absolute_error(median, y)[3])
    assert np.isnan(sign_bias(median, y)[3])


# ---------------------------------------------------------------------------------------
# properties


@pytest.mark.property
@settings(max_examples=150, deadline=None)
@given(
    st.lists(st.integers(-50, 200), min_size=5, max_size=5),
    st.integers(-100, 300),
)
def test_wis_properties_on_integer_forecasts(values, observed):
    # Integer values make ties between quantiles and with the observation common.
    q = np.sort(np.array(values, dtype=float))[None, :]
    y = np.array([float(observed)])
    p = wis_parts(y, q, TAU5)
    assert min(p.dispersion[0], p.overprediction[0], p.underprediction[0]) >= 0
    npt.assert_allclose(p.dispersion + p.overprediction + p.underprediction, p.wis, rtol=1e-12)
    npt.assert_allclose(p.wis, quantile_score(y, q, TAU5).mean(axis=1), rtol=1e-12, atol=1e-12)
    npt.assert_allclose(p.wis, sr.crps_quantile(y, q, TAU5), rtol=1e-12, atol=1e-12)
    # Only one of over- and underprediction can be positive.
    assert p.overprediction[0] == 0 or p.underprediction[0] == 0


@pytest.mark.property
@settings(max_examples=100, deadline=None)
@given(st.floats(-1e3, 1e3), st.floats(0.01, 100.0), st.floats(-5.0, 5.0))
def test_wis_is_equivariant_under_shift_and_scale(shift, scale, z):
    # From the WIS formula (Bracher et al. 2021): WIS(a + b q, a + b y) = b WIS(q, y), b > 0.
    q = norm.ppf(TAU23)[None, :]
    y = np.array([z])
    base = wis_parts(y, q, TAU23).wis
    moved = wis_parts(shift + scale * y, shift + scale * q, TAU23).wis
    npt.assert_allclose(moved, scale * base, rtol=1e-9, atol=1e-9 * (abs(shift) + scale))
