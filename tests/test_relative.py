"""Checks of pairwise relative skill (Cramer et al. 2022, PNAS, Methods; Bracher et al. 2021).

Check value R1 is from docs/methods.md §6; the rest are invariances and a
slow loop reference written straight from the definition.
"""

from __future__ import annotations

import numpy as np
import numpy.testing as npt
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from forebrief.core import RelativeSkill, relative_skill
from forebrief.errors import ConfigError

R1_SCORES = np.array(
    [
        [10, 20, 30, 40.0],  # A
        [12, 18, np.nan, np.nan],  # B
        [20, 20, 40, 40.0],  # baseline
    ]
)


def slow_relative_skill(scores, baseline):
    """Loop reference from the definition, with the zero-mean conventions of relative_skill."""
    m = scores.shape[0]
    theta = np.full(m, np.nan)
    for a in range(m):
        logs = []
        for b in range(m):
            ok = ~np.isnan(scores[a]) & ~np.isnan(scores[b])
            if not ok.any():
                continue
            mean_a, mean_b = scores[a, ok].mean(), scores[b, ok].mean()
            if mean_a == 0 and mean_b == 0:
                logs.append(0.0)
            elif mean_a > 0 and mean_b > 0:
                logs.append(np.log(mean_a / mean_b))
        if logs:
            theta[a] = np.exp(np.mean(logs))
    return theta, theta / theta[baseline]


def _random_scores(m, n, missing, seed):
    rng = np.random.default_rng(seed)
    s = rng.gamma(2.0, 10.0, (m, n)) * rng.uniform(0.5, 2.0, (m, 1))
    s[rng.uniform(size=(m, n)) < missing] = np.nan
    return s


def test_r1_check_value():
    # Check R1, docs/methods.md §6 (Cramer et al. 2022): theta_AB = 1, theta_A,base = 25/30,
    # theta_B,base = 15/20; geometric mean over all three models: scaled A 0.8046, B 0.7768,
    # base 1.
    got = relative_skill(R1_SCORES, baseline=2)
    assert isinstance(got, RelativeSkill)
    npt.assert_allclose(got.theta, [0.9410, 0.9086, 1.1696], atol=5e-5)
    npt.assert_allclose(got.relative, [0.8046, 0.7768, 1.0], atol=5e-5)
    # The same from the pairwise ratios by hand.
    a = (1.0 * 1.0 * 25 / 30) ** (1 / 3)
    b = (1.0 * 1.0 * 15 / 20) ** (1 / 3)
    base = (30 / 25 * 20 / 15 * 1.0) ** (1 / 3)
    npt.assert_allclose(got.theta, [a, b, base], rtol=1e-12)


def test_without_baseline_relative_is_nan():
    got = relative_skill(R1_SCORES)
    assert np.isnan(got.relative).all()
    assert np.isfinite(got.theta).all()


def test_complete_data_reduces_to_ratio_of_means():
    # Cramer et al. (2022), Methods: with every model on every item theta_a / theta_base =
    # mean_a / mean_base exactly.
    s = _random_scores(6, 400, 0.0, 3)
    got = relative_skill(s, baseline=4)
    means = s.mean(axis=1)
    npt.assert_allclose(got.relative, means / means[4], rtol=1e-10)


def test_matches_the_slow_reference_with_missing_data():
    s = _random_scores(12, 300, 0.4, 5)
    s[3, :250] = np.nan  # a model that joined late
    got = relative_skill(s, baseline=0)
    theta, rel = slow_relative_skill(s, 0)
    npt.assert_allclose(got.theta, theta, rtol=1e-10)
    npt.assert_allclose(got.relative, rel, rtol=1e-10)


def test_invariant_to_reordering_models_and_items():
    s = _random_scores(8, 200, 0.3, 9)
    got = relative_skill(s, baseline=2)
    rng = np.random.default_rng(10)
    order = rng.permutation(8)
    items = rng.permutation(200)
    moved = relative_skill(s[order][:, items], baseline=int(np.flatnonzero(order == 2)[0]))
    npt.assert_allclose(moved.theta, got.theta[order], rtol=1e-10)
    npt.assert_allclose(moved.relative, got.relative[order], rtol=1e-10)


def test_scaling_all_scores_changes_nothing():
    s = _random_scores(5, 100, 0.25, 12)
    got = relative_skill(s, baseline=1)
    scaled = relative_skill(1e-3 * s, baseline=1)
    npt.assert_allclose(scaled.theta, got.theta, rtol=1e-10)
    npt.assert_allclose(scaled.relative, got.relative, rtol=1e-10)


def test_zero_means():
    # Our convention: 0/0 -> theta_ab = 1; exactly one zero mean -> pair left out.
    s = np.array(
        [
            [0.0, 0.0, np.nan],  # perfect on its items
            [0.0, 0.0, 5.0],  # perfect on the items it shares with row 0
            [2.0, 4.0, 5.0],
        ]
    )
    with np.errstate(all="raise"):
        got = relative_skill(s, baseline=2)
    theta, rel = slow_relative_skill(s, 2)
    npt.assert_allclose(got.theta, theta, rtol=1e-12)
    npt.assert_allclose(got.relative, rel, rtol=1e-12)
    # Row 0: pairs (0, 0) and (0, 1) count, (0, 2) is 0/3 and is left out -> theta 1.
    assert got.theta[0] == pytest.approx(1.0)
    # Row 1 vs row 2 on all three items: 5/3 / 11/3.
    assert got.theta[1] == pytest.approx(np.exp(np.log(5 / 11) / 3))


def test_model_without_items_has_nan_theta():
    s = _random_scores(3, 20, 0.0, 4)
    s[1] = np.nan
    got = relative_skill(s, baseline=0)
    assert np.isnan(got.theta[1])
    assert np.isfinite(got.theta[[0, 2]]).all()
    means = np.nanmean(s[[0, 2]], axis=1)
    npt.assert_allclose(got.relative[2], means[1] / means[0], rtol=1e-10)


@pytest.mark.parametrize("baseline", [3, -1, 1.0, "base"])
def test_bad_baseline_is_refused(baseline):
    with pytest.raises(ConfigError, match=r"baseline must be a model row index in 0\.\.2"):
        relative_skill(R1_SCORES, baseline=baseline)


def test_negative_scores_are_refused():
    s = R1_SCORES.copy()
    s[1, 0] = -1.0
    with pytest.raises(ValueError, match="model row 1, item 0"):
        relative_skill(s)


@pytest.mark.property
@settings(max_examples=60, deadline=None)
@given(
    st.integers(2, 6),
    st.integers(1, 12),
    st.floats(0.0, 0.6),
    st.integers(0, 2**32 - 1),
    st.floats(1e-3, 1e3),
)
def test_fast_path_equals_reference_and_is_scale_free(m, n, missing, seed, factor):
    s = _random_scores(m, n, missing, seed)
    s[0, 0] = 1.0  # the baseline forecast at least one item
    got = relative_skill(s, baseline=0)
    theta, rel = slow_relative_skill(s, 0)
    npt.assert_allclose(got.theta, theta, rtol=1e-9)
    npt.assert_allclose(got.relative, rel, rtol=1e-9)
    npt.assert_allclose(relative_skill(factor * s, baseline=0).relative, rel, rtol=1e-9)
