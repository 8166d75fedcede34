"""The verdict core (forebrief.core.verdict) on hand-worked bin cases.

Outside references:

- Cooke's calibration statistic 2 N I(s, p) (Cooke 1991, *Experts in Uncertainty*, ch. 12) is
  the G statistic of the multinomial goodness-of-fit test: recomputed with
  ``scipy.stats.power_divergence(lambda_="log-likelihood")`` and referred to
  ``scipy.stats.chi2`` or, after the Rao & Scott (1981, JASA 76:221-230) design-effect
  correction, to ``scipy.stats.f``.
- Exact binomial tests: ``scipy.stats.binomtest`` and, for two hand-worked values, the
  binomial formula P(X = k) = C(n, k) / 2^n at p = 1/2.
- The one-way analysis-of-variance intraclass correlation (Donner 1986, Int. Stat. Rev.
  54:67-82): rho = (F - 1) / (F + m0 - 1) with F = MSB / MSW from ``scipy.stats.f_oneway``;
  Kish's design effect 1 + (b - 1) rho (Kish 1965, *Survey Sampling*).
- Bin shares of the 5/25/50/75/95% quantiles: p = (.05, .20, .25, .25, .20, .05).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import binomtest, chi2, f, f_oneway, power_divergence

from forebrief.core.classical import calibration_score
from forebrief.core.verdict import (
    VERDICT_NAMES,
    binomial_p,
    design_effect,
    evidence_units,
    rate_record,
)
from forebrief.tables.schema import CM_LEVELS, cm_probabilities

P = cm_probabilities(CM_LEVELS)


def _g(counts: np.ndarray) -> float:
    c = np.asarray(counts, dtype=float)
    return float(power_divergence(c, P * c.sum(), lambda_="log-likelihood").statistic)


def _one_region(
    counts: list[int], *, rated: bool = True, horizons: int = 1, passes: bool | None = None
):
    """One region, one target week per observation, each forecast at ``horizons`` horizons
    that all fell in the same bin."""
    b = np.repeat(np.arange(P.size), counts)
    n = b.size
    return rate_record(
        np.repeat(b, horizons),
        target=np.repeat(np.arange(n), horizons),
        week=np.repeat(np.arange(n), horizons),
        horizon=np.tile(np.arange(1, horizons + 1), n),
        probabilities=P,
        rated=rated,
        passes=passes,
    )


# --------------------------------------------------------------------------------------------
# exact binomial tests


def test_binomial_p_hand_worked_values() -> None:
    # n = 10, p = 1/2: P(X >= 8) = (C(10,8) + C(10,9) + C(10,10)) / 2^10 = 56 / 1024
    assert binomial_p(8, 10, 0.5, alternative="greater") == pytest.approx(56 / 1024, rel=1e-12)
    # two-sided at k = 2: the outcomes no likelier than 2 are 0, 1, 2, 8, 9, 10 -> 112 / 1024
    assert binomial_p(2, 10, 0.5, alternative="two-sided") == pytest.approx(112 / 1024, rel=1e-12)
    assert binomial_p(0, 10, 0.5, alternative="greater") == 1.0
    assert math.isnan(binomial_p(0, 0, 0.5, alternative="less"))


def test_binomial_p_matches_scipy_binomtest() -> None:
    rng = np.random.default_rng(20260602)
    for _ in range(400):
        n = int(rng.integers(1, 150))
        k = int(rng.integers(0, n + 1))
        p = float(rng.uniform(0.02, 0.98))
        for alt in ("two-sided", "greater", "less"):
            want = binomtest(k, n, p, alternative=alt).pvalue
            assert binomial_p(k, n, p, alternative=alt) == pytest.approx(want, rel=1e-9, abs=1e-300)


# --------------------------------------------------------------------------------------------
# design effect


def test_design_effect_hand_worked() -> None:
    # 3 weeks x 2 units, indicator (1, 1), (0, 0), (1, 0): grand mean 1/2, week means 1, 0,
    # 1/2; MSB = 2 (1/4 + 1/4 + 0) / 2 = 1/2, MSW = (1/4 + 1/4) / 3 = 1/6, m0 = 2, so
    # rho = (1/2 - 1/6) / (1/2 + 1/6) = 1/2 and deff = 1 + (2 - 1) x 1/2 = 3/2.
    x = np.array([1.0, 1, 0, 0, 1, 0])
    week = np.array([0, 0, 1, 1, 2, 2])
    got = design_effect(np.stack([x, 1 - x], axis=1), week, probabilities=np.array([0.5, 0.5]))
    assert got == pytest.approx(1.5, rel=1e-12)
    # the same rho from scipy's one-way ANOVA: F = MSB / MSW = 3, rho = (F - 1) / (F + m0 - 1)
    fstat = f_oneway(x[:2], x[2:4], x[4:]).statistic
    assert 1 + (fstat - 1) / (fstat + 2 - 1) == pytest.approx(got, rel=1e-12)


def test_design_effect_matches_scipy_anova_with_unequal_weeks() -> None:
    rng = np.random.default_rng(7)
    sizes = np.array([2, 5, 3, 6, 4, 4, 1, 5])
    week = np.repeat(np.arange(sizes.size), sizes)
    x = (rng.random(week.size) < 0.3 + 0.05 * week).astype(float)  # weeks differ
    got = design_effect(np.stack([x, 1 - x], axis=1), week, probabilities=np.array([0.3, 0.7]))
    n, w = week.size, sizes.size
    m0 = (n - (sizes**2).sum() / n) / (w - 1)
    fstat = f_oneway(*[x[week == k] for k in range(w)]).statistic
    rho = min(max((fstat - 1) / (fstat + m0 - 1), 0.0), 1.0)
    assert got == pytest.approx(1 + ((sizes**2).sum() / n - 1) * rho, rel=1e-10)


def test_design_effect_limits() -> None:
    # identical units within each week: rho = 1, deff = b = units per week
    shares = np.eye(P.size)[[0, 0, 0, 3, 3, 3, 5, 5, 5]]
    assert design_effect(shares, np.repeat([0, 1, 2], 3), probabilities=P) == pytest.approx(3)
    # one unit per week, or one week: nothing to estimate
    assert design_effect(shares, np.arange(9), probabilities=P) == 1.0
    assert design_effect(shares, np.zeros(9, dtype=int), probabilities=P) == 1.0
    # more spread within weeks than between: rho < 0 is clipped, deff = 1
    alternating = np.eye(P.size)[[0, 5, 0, 5, 0, 5]]
    assert design_effect(alternating, np.repeat([0, 1, 2], 2), probabilities=P) == 1.0


# --------------------------------------------------------------------------------------------
# evidence units and the jurisdiction total


def test_the_total_counts_only_for_weeks_without_regions() -> None:
    # regions 0 and 1, total 2; week 10 has both regions and the total, week 11 only the total
    region = np.array([0, 1, 2, 0, 1, 2, 2])
    week = np.array([10, 10, 10, 10, 10, 10, 11])
    units = evidence_units(region, week, total=2)
    assert units.keep.tolist() == [True, True, False, True, True, False, True]
    # one unit per (region, week): items 0 and 3 share one, 1 and 4 another
    t = units.target
    assert t[0] == t[3]
    assert t[1] == t[4]
    assert len({t[0], t[1], t[2], t[6]}) == 4
    assert units.week.tolist() == [0, 0, 0, 0, 0, 0, 1]
    assert evidence_units(region, week, total=None).keep.all()


# --------------------------------------------------------------------------------------------
# the calibration test counts target weeks


def test_one_forecast_per_week_is_cooke_s_test() -> None:
    counts = [8, 30, 52, 45, 45, 20]
    v = _one_region(counts)
    assert v.calibration_p == pytest.approx(chi2.sf(_g(np.array(counts)), df=5), rel=1e-10)
    assert v.calibration_p == pytest.approx(
        float(calibration_score(np.array(counts), P)), rel=1e-12
    )
    assert (v.n_evidence, v.n_items, v.design_effect) == (200, 200, 1.0)


def test_a_target_week_is_one_piece_of_evidence_however_many_horizons() -> None:
    counts = [15, 38, 47, 45, 40, 15]  # 30 of 200 outside the 90% range: passes (p = 0.40)
    once, four = _one_region(counts), _one_region(counts, horizons=4)
    assert four.n_items == 4 * once.n_items
    assert four.n_evidence == once.n_evidence == 200
    assert four.calibration_p == pytest.approx(once.calibration_p, rel=1e-12)
    assert four.verdict == once.verdict
    # pooling the 800 forecasts as independent would have quadrupled G
    pooled = chi2.sf(4 * _g(np.array(counts)), df=5)
    assert pooled < 0.05 <= four.calibration_p


def test_a_unit_shares_its_weight_among_its_horizons() -> None:
    # one unit forecast 4 times, in bins 0, 5, 2, 2: shares 1/4, 0, 1/2, 0, 0, 1/4
    v = rate_record(
        np.array([0, 5, 2, 2]),
        target=np.zeros(4, dtype=int),
        week=np.zeros(4, dtype=int),
        horizon=np.arange(1, 5),
        probabilities=P,
        rated=True,
    )
    assert v.shares == pytest.approx((0.25, 0, 0.5, 0, 0, 0.25))
    # the pattern tests use the 1-week-ahead forecast only (bin 0: a miss below)
    assert (v.pattern_horizon, v.n_pattern, v.misses_below, v.below) == (1, 1, 1, 1)


def test_regions_that_move_together_count_once() -> None:
    # two regions with the same bin every week: deff = 2; G doubles, G / deff does not
    counts = [8, 30, 52, 45, 45, 20]
    b = np.repeat(np.arange(P.size), counts)
    n = b.size
    v = rate_record(
        np.tile(b, 2),
        target=np.arange(2 * n),
        week=np.tile(np.arange(n), 2),
        horizon=np.ones(2 * n, dtype=int),
        probabilities=P,
        rated=True,
    )
    alone = _one_region(counts)
    assert v.design_effect == pytest.approx(2.0)
    assert v.n_effective == pytest.approx(n)
    g2 = _g(2 * np.array(counts))
    assert v.calibration_p == pytest.approx(f.sf(g2 / 2 / 5, 5, n - 1), rel=1e-9)
    # the pattern tests count the pair once as well
    for name in ("bias_p", "narrow_p", "wide_p", "misses_side_p"):
        assert getattr(v, name) == pytest.approx(getattr(alone, name), rel=1e-9), name
    assert "regions moved together" in v.explanation
    assert "about 200 independent target weeks" in v.explanation


def test_pattern_p_values_are_binomial_tests_on_the_counts() -> None:
    counts = [30, 15, 20, 15, 20, 0]
    v = _one_region(counts)
    n = sum(counts)
    assert v.bias_p == pytest.approx(binomtest(65, n, 0.5).pvalue, rel=1e-9)
    assert v.narrow_p == pytest.approx(
        binomtest(30, n, 0.1, alternative="greater").pvalue, rel=1e-9
    )
    wide = min(
        binomtest(30, n, 0.1, alternative="less").pvalue,
        binomtest(35, n, 0.5, alternative="greater").pvalue,
    )
    assert v.wide_p == pytest.approx(wide, rel=1e-9)
    assert v.misses_side_p == pytest.approx(binomtest(30, 30, 0.5).pvalue, rel=1e-9)


# --------------------------------------------------------------------------------------------
# verdict rules


@pytest.mark.parametrize(
    ("counts", "verdict"),
    [
        # proportional to p
        pytest.param([10, 40, 50, 50, 40, 10], "reliable", id="proportional"),
        # 30 of 100 outside the 90% range, all below it, 65 of 100 below the median: a shift.
        # The outside test (p = 2e-8) is clearer than the median test (p = 0.004), which made
        # the old rule say "overconfident"; the one-sided misses make it a bias.
        pytest.param([30, 15, 20, 15, 20, 0], "biased high", id="shift up"),
        pytest.param([0, 20, 15, 20, 15, 30], "biased low", id="shift down"),
        # the same excess of misses and of observations below the median, but the misses are
        # split evenly: the ranges are too narrow
        pytest.param([15, 5, 45, 15, 5, 15], "overconfident", id="narrow, even misses"),
        pytest.param([50, 0, 0, 0, 0, 50], "overconfident", id="all outside"),
        pytest.param([0, 10, 40, 40, 10, 0], "underconfident", id="too wide"),
        # fails Cooke's test, but 10% outside, half below, none in the 50% range: no pattern
        pytest.param([5, 45, 0, 0, 45, 5], "unreliable", id="no clear pattern"),
    ],
)
def test_verdict_rules(counts: list[int], verdict: str) -> None:
    v = _one_region(counts)
    assert v.verdict == verdict
    assert (v.calibration_p >= 0.05) == (verdict == "reliable")
    assert v.explanation[0].islower()


def test_bias_is_named_before_overconfidence_only_with_one_sided_misses() -> None:
    shifted, narrow = _one_region([30, 15, 20, 15, 20, 0]), _one_region([15, 5, 45, 15, 5, 15])
    for v in (shifted, narrow):
        assert v.bias_p < 0.05
        assert v.narrow_p < v.bias_p
    assert shifted.misses_side_p < 0.05 <= narrow.misses_side_p


def test_not_yet_rated() -> None:
    assert _one_region([10, 40, 50, 50, 40, 10], rated=False).verdict == "not yet rated"
    empty = rate_record(
        np.zeros(0, dtype=int),
        target=np.zeros(0, dtype=int),
        week=np.zeros(0, dtype=int),
        horizon=np.zeros(0, dtype=int),
        probabilities=P,
        rated=True,
    )
    assert empty.verdict == "not yet rated"
    assert empty.explanation == "too little history to judge yet"
    assert set(VERDICT_NAMES) >= {empty.verdict, "reliable", "biased low"}


def test_the_callers_decision_overrides_the_test() -> None:
    assert _one_region([50, 0, 0, 0, 0, 50], passes=True).verdict == "reliable"
    assert _one_region([10, 40, 50, 50, 40, 10], passes=False).verdict == "unreliable"


# --------------------------------------------------------------------------------------------
# explanations cite counts a reader can check


def test_explanations_quote_target_week_counts() -> None:
    v = _one_region([10, 40, 50, 50, 40, 10])
    assert v.explanation == (
        "its ranges held about as often as they should: for 20 of 200 target weeks the "
        "observation fell outside its 1-week-ahead 90% range (about 20 expected)"
    )
    v = _one_region([50, 0, 0, 0, 0, 50])
    assert "for 100 of 100 target weeks" in v.explanation
    assert "about 10 expected" in v.explanation
    v = _one_region([30, 15, 20, 15, 20, 0])
    assert v.explanation == (
        "its forecasts sat too high: for 65 of 100 target weeks the observation fell below its "
        "1-week-ahead median (about 50 expected), and all its 30 misses of the 90% range were "
        "below it"
    )
    assert (v.below, v.outside, v.misses_below, v.misses_above) == (65, 30, 30, 0)
    v = _one_region([0, 10, 40, 40, 10, 0])
    assert (
        "for 80 of 100 target weeks the observation fell inside its 1-week-ahead 50% range"
        " (about 50 expected)" in v.explanation
    )
    assert v.inside_central == 80


def test_fractional_target_weeks_round_half_up() -> None:
    # 2 units; unit 0 forecast twice (bins 0 and 2), unit 1 once (bin 5): outside shares
    # 1/2 + 1 = 1.5 target weeks -> cited as 2 at the calibration level; the pattern
    # horizon (1) has bins 0 and 5: 2 misses
    v = rate_record(
        np.array([0, 2, 5]),
        target=np.array([0, 0, 1]),
        week=np.array([0, 0, 1]),
        horizon=np.array([1, 2, 1]),
        probabilities=P,
        rated=True,
    )
    assert v.shares[0] + v.shares[-1] == pytest.approx(1.5)
    assert (v.outside, v.misses_below, v.misses_above) == (2, 1, 1)


# --------------------------------------------------------------------------------------------
# bad input


def test_bad_arrays_get_clear_messages() -> None:
    one = np.ones(3, dtype=int)
    with pytest.raises(ValueError, match="target has 2 entries but there are 3 items"):
        rate_record(
            one, target=np.ones(2, dtype=int), week=one, horizon=one, probabilities=P, rated=True
        )
    with pytest.raises(ValueError, match=r"bin 6 is outside 0\.\.5"):
        rate_record(
            np.array([0, 6, 1]),
            target=np.arange(3),
            week=np.arange(3),
            horizon=one,
            probabilities=P,
            rated=True,
        )
    with pytest.raises(ValueError, match="more than one week"):
        rate_record(
            one,
            target=np.zeros(3, dtype=int),
            week=np.arange(3),
            horizon=one,
            probabilities=P,
            rated=True,
        )
    with pytest.raises(ValueError, match="integer codes"):
        rate_record(
            one, target=np.arange(3.0), week=np.arange(3), horizon=one, probabilities=P, rated=True
        )
    with pytest.raises(ValueError, match="summing to 1"):
        rate_record(
            one,
            target=np.arange(3),
            week=np.arange(3),
            horizon=one,
            probabilities=np.array([0.5, 0.6]),
            rated=True,
        )
