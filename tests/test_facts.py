"""The briefing's facts: verdict rules, the jurisdiction total, exceedance probabilities.

Outside references:

- Linear pool = mixture of the members' CDFs, F(x) = sum_e w_e F_e(x) (Cooke 1991, *Experts in
  Uncertainty*, ch. 12; Stone 1961, Ann. Math. Stat. 32:1339-1342). A member given by many
  quantiles of a normal law approximates that normal law, so the pool's exceedance
  probability approximates 1 - sum_e w_e Phi((t - mu_e) / sigma_e), with Phi from
  ``scipy.stats.norm``.
- Calibration (Cooke 1991, ch. 12): C = 1 - F_chi2(R - 1)(2 N' I(s, p)); 2 N I(s, p) is the
  G statistic of the multinomial goodness-of-fit test, computed here with
  ``scipy.stats.power_divergence(lambda_="log-likelihood")``.
- The verdict tests are binomial tests (``scipy.stats.binomtest``) against the bin shares of the
  5/25/50/75/95% quantiles: p = (.05, .20, .25, .25, .20, .05).
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest
from scipy.stats import chi2, norm, power_divergence

from forebrief.app.config import BriefingConfig, Threshold, load_config
from forebrief.app.weekly import BriefingRun, known_by, run_briefing
from forebrief.app.workflow import load_inputs
from forebrief.core.distributions import pool_cdf
from forebrief.demo import generate_scenario, write_scenario
from forebrief.report.facts import (
    CAUTIONS,
    BriefingFacts,
    build_facts,
    chance_text,
    format_count,
    round_count,
    verdict_from_bins,
)

P_CM = np.array([0.05, 0.20, 0.25, 0.25, 0.20, 0.05])  # Cooke 1991 ch. 12, 5/25/50/75/95%


def _passes(bins: list[int], *, power: float = 1.0, level: float = 0.05) -> bool:
    """Cooke's calibration test, from scipy's G statistic (see the module docstring)."""
    counts = np.asarray(bins, dtype=float)
    if counts.sum() == 0:
        return False  # nothing to test
    g = power_divergence(counts, P_CM * counts.sum(), lambda_="log-likelihood").statistic
    return bool(chi2.sf(power * g, df=P_CM.size - 1) >= level)


# --------------------------------------------------------------------------------------------
# verdict rules on hand-built bin counts


@pytest.mark.parametrize(
    ("bins", "rated", "verdict"),
    [
        # proportional to p (n = 200): passes the calibration test
        pytest.param([10, 40, 50, 50, 40, 10], True, "reliable", id="proportional"),
        # every observation outside the 90% range: ranges too narrow
        pytest.param([50, 0, 0, 0, 0, 50], True, "overconfident", id="all outer"),
        # every observation inside the 50% range: ranges too wide
        pytest.param([0, 0, 50, 50, 0, 0], True, "underconfident", id="all central"),
        # 90% range and 50% range hold their shares, but all below the median
        pytest.param([20, 80, 100, 0, 0, 0], True, "biased high", id="all below median"),
        pytest.param([0, 0, 0, 100, 80, 20], True, "biased low", id="all above median"),
        # too few scored targets
        pytest.param([1, 4, 5, 5, 4, 1], False, "not yet rated", id="too few"),
        pytest.param([0, 0, 0, 0, 0, 0], True, "not yet rated", id="none"),
        # fails the test, but no binomial pattern: 10% outside, half below, 0 in the 50% range
        pytest.param([5, 45, 0, 0, 45, 5], True, "unreliable", id="no clear pattern"),
    ],
)
def test_verdict_rules(bins: list[int], rated: bool, verdict: str) -> None:
    got, why = verdict_from_bins(bins, passes=_passes(bins), rated=rated)
    assert got == verdict
    assert why
    assert why[0].islower()


def test_the_hand_built_cases_pass_or_fail_cooke_s_test_as_intended() -> None:
    assert _passes([10, 40, 50, 50, 40, 10])
    for bins in (
        [50, 0, 0, 0, 0, 50],
        [0, 0, 50, 50, 0, 0],
        [20, 80, 100, 0, 0, 0],
        [5, 45, 0, 0, 45, 5],
    ):
        assert not _passes(bins)


def test_verdict_explanations_quote_the_counts() -> None:
    _, why = verdict_from_bins([50, 0, 0, 0, 0, 50], passes=False, rated=True)
    assert "100 of 100" in why
    assert "about 10 expected" in why
    _, why = verdict_from_bins([20, 80, 100, 0, 0, 0], passes=False, rated=True)
    assert "for 200 of 200 target weeks the observation fell below its median" in why
    _, why = verdict_from_bins([10, 40, 50, 50, 40, 10], passes=True, rated=True)
    assert "20 of 200" in why


def test_a_pass_is_reliable_and_too_little_history_wins_over_everything() -> None:
    assert verdict_from_bins([50, 0, 0, 0, 0, 50], passes=True, rated=True)[0] == "reliable"
    assert (
        verdict_from_bins([10, 40, 50, 50, 40, 10], passes=True, rated=False)[0] == "not yet rated"
    )


def test_reordering_within_the_lower_half_keeps_the_bias_verdict() -> None:
    # the rule counts observations below the median, not where below it
    for bins in ([20, 80, 100, 0, 0, 0], [60, 60, 80, 0, 0, 0]):
        assert verdict_from_bins(bins, passes=False, rated=True)[0] == "biased high"


# --------------------------------------------------------------------------------------------
# the demo's facts


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> BriefingRun:
    folder = tmp_path_factory.mktemp("demo")
    write_scenario(generate_scenario(), folder)
    cfg = load_config(folder / "forebrief.toml")
    inputs = load_inputs(cfg.forecasts, cfg.observations, columns=cfg.columns, signed=cfg.signed)
    return run_briefing(cfg, inputs)


def _weighted_pool(run: BriefingRun) -> pd.DataFrame:
    e = run.ensemble.ensemble
    wp = e.loc[e["method"] == "weighted_pool"]
    return wp.pivot_table(
        index=["region", "quantity", "horizon"], columns="level", values="value", aggfunc="first"
    )


def _headline_rows(run: BriefingRun) -> pd.DataFrame:
    """The rows of each quantity's headline combination (the outlook's source)."""
    chosen = {h["quantity"]: h["method"] for h in run.facts.headline}
    assert set(chosen) == set(run.config.quantities)
    e = run.ensemble.ensemble
    wp = e.loc[e["method"] == e["quantity"].map(chosen)]
    return wp.pivot_table(
        index=["region", "quantity", "horizon"], columns="level", values="value", aggfunc="first"
    )


def _level(wide: pd.DataFrame, tau: float) -> float:
    return next(c for c in wide.columns if abs(c - tau) < 1e-9)


@pytest.mark.slow
def test_the_total_comes_from_the_total_region_s_own_forecasts(demo_run: BriefingRun) -> None:
    facts, cfg = demo_run.facts, demo_run.config
    assert cfg.total_region is not None
    assert facts.total_available
    assert cfg.region_name(cfg.total_region) in facts.total_note
    wide = _headline_rows(demo_run)
    totals = [o for o in facts.outlook if o.is_total]
    assert {(o.quantity, o.horizon) for o in totals} == {
        (q, h) for q in cfg.quantities for h in cfg.horizons
    }
    regions = [r for r in cfg.regions if r != cfg.total_region]
    differs = 0
    for o in totals:
        assert o.region == cfg.total_region
        row = wide.loc[(o.region, o.quantity, o.horizon)]
        q = {t: float(row[_level(wide, t)]) for t in (0.05, 0.25, 0.5, 0.75, 0.95)}
        assert o.median == round_count(q[0.5])
        assert o.range50 == (round_count(q[0.25]), round_count(q[0.75]))
        assert o.range90 == (round_count(q[0.05]), round_count(q[0.95]))
        # what adding up the regions would have given: quantiles do not add
        summed = {
            t: sum(float(wide.loc[(r, o.quantity, o.horizon)][_level(wide, t)]) for r in regions)
            for t in q
        }
        summed_row = tuple(round_count(summed[t]) for t in (0.05, 0.25, 0.5, 0.75, 0.95))
        own_row = (o.range90[0], o.range50[0], o.median, o.range50[1], o.range90[1])
        differs += own_row != summed_row
    assert differs == len(totals)


@pytest.mark.slow
def test_the_total_s_median_is_the_pooled_cdf_s_half_point(demo_run: BriefingRun) -> None:
    # the weighted pool's median solves F_pool(x) = 1/2 (Cooke 1991 ch. 12)
    pool = demo_run.ensemble.pool
    assert pool is not None
    wide = _weighted_pool(demo_run)
    cfg = demo_run.config
    items = pool.items.reset_index(drop=True)
    for i in np.flatnonzero((items["region"] == cfg.total_region).to_numpy()):
        key = (cfg.total_region, items.loc[i, "quantity"], int(items.loc[i, "horizon"]))
        median = float(wide.loc[key][_level(wide, 0.5)])
        f = pool_cdf(
            [[median]],
            pool.values[i : i + 1],
            pool.levels,
            pool.weights[i : i + 1],
            pool.lower[i : i + 1],
            pool.upper[i : i + 1],
        )
        assert f[0, 0] == pytest.approx(0.5, abs=1e-6)


def _facts_with(run: BriefingRun, cfg: BriefingConfig) -> BriefingFacts:
    """The run's facts rebuilt under another configuration (the same tables)."""
    forecasts = pd.concat([run.inputs.forecasts.table, run.baseline], ignore_index=True)
    return build_facts(
        cfg=cfg,
        issued=run.issued,
        tool_version=run.facts.tool_version,
        observations=known_by(run.inputs.observations.table, run.issued),
        forecasts=forecasts,
        scores=run.scores,
        ensemble=run.ensemble,
        backtest=run.backtest,
        excluded=run.inputs.excluded,
        previous=None,
        revisions=pd.DataFrame(
            columns=["region", "quantity", "week_ending", "value_then", "value_now", "change"]
        ),
        nowcast=run.nowcast,
        settle=run.settle,
        headline=run.headline,
    )


@pytest.mark.slow
def test_the_rebuilt_facts_match_the_run(demo_run: BriefingRun) -> None:
    # guards the helper below: same configuration, same facts
    assert _facts_with(demo_run, demo_run.config) == demo_run.facts


@pytest.mark.slow
def test_without_a_total_region_no_total_is_available(demo_run: BriefingRun) -> None:
    from forebrief.report.narrative import narrative_text

    cfg = dataclasses.replace(demo_run.config, total_region=None)
    facts = _facts_with(demo_run, cfg)
    assert facts.total_available is False
    assert facts.total_region is None
    assert facts.total_note.startswith("No jurisdiction-wide total is available")
    assert not any(o.is_total for o in facts.outlook)
    assert not any(r["is_total"] for r in facts.regions)
    assert facts.track_total == ()
    text = " ".join(narrative_text(facts).split())
    assert facts.total_note in text
    assert f"Across {facts.jurisdiction}" not in text


@pytest.mark.slow
def test_rates_per_100000_use_the_configured_population(demo_run: BriefingRun) -> None:
    wide = _headline_rows(demo_run)
    for o in demo_run.facts.outlook:
        pop = demo_run.config.regions[o.region].population
        assert pop is not None
        q50 = float(wide.loc[(o.region, o.quantity, o.horizon)][_level(wide, 0.5)])
        assert o.median_rate_text == f"{q50 / pop * 100_000:,.1f}"


@pytest.mark.slow
def test_change_from_the_last_observation(demo_run: BriefingRun) -> None:
    known = known_by(demo_run.inputs.observations.table, demo_run.issued)
    latest = (
        known.sort_values(["week_ending", "reported"])
        .groupby(["region", "quantity", "week_ending"])
        .tail(1)
    )
    last = latest.sort_values("week_ending").groupby(["region", "quantity"]).tail(1)
    lookup = {
        (r.region, r.quantity): (float(r.value), r.week_ending)
        for r in last.itertuples(index=False)
    }
    for o in demo_run.facts.outlook:
        value, week = lookup[(o.region, o.quantity)]
        assert o.last_value == round_count(value)
        assert o.last_week == f"{week:%Y-%m-%d}"
        assert pd.Timestamp(o.last_week) < demo_run.issued
        # the change and direction compare with last week's nowcast when it is provisional
        reference = o.last_value if o.last_value_nowcast is None else o.last_value_nowcast
        assert o.change == o.median - reference
        assert o.change_text == format_count(abs(o.change))
        if abs(o.change) >= 0.05 * reference and reference > 0:
            assert o.direction == ("up" if o.change > 0 else "down")
        else:
            assert o.direction == "about the same"


@pytest.mark.slow
def test_every_verdict_follows_from_its_items(demo_run: BriefingRun) -> None:
    # Each verdict counts the model's scored items of the horizons shown, one unit per region
    # and target week, without the jurisdiction total (every demo team forecasts the regions);
    # its explanation counts the 1-week-ahead forecasts (forebrief.core.verdict).
    cfg, facts = demo_run.config, demo_run.facts
    assert demo_run.scores is not None
    by_model, by_item = demo_run.scores.by_model, demo_run.scores.by_item
    shown = by_model.loc[by_model["horizon"].isin(cfg.horizons)]
    items = by_item.loc[by_item["horizon"].isin(cfg.horizons) & by_item["bin"].notna()]
    assert facts.verdicts
    for v in facts.verdicts:
        part = shown.loc[(shown["model"] == v.model) & (shown["quantity"] == v.quantity)]
        mine = items.loc[(items["model"] == v.model) & (items["quantity"] == v.quantity)]
        regional = mine.loc[mine["region"] != cfg.total_region]
        bins = np.bincount(regional["bin"].astype(int), minlength=P_CM.size).tolist()
        assert list(v.bins) == bins
        assert v.n_items == len(regional) == sum(bins)
        assert v.n_evidence == len(regional[["region", "week_ending"]].drop_duplicates())
        first = regional.loc[regional["horizon"] == v.pattern_horizon, "bin"].astype(int)
        assert v.pattern_horizon == min(cfg.horizons)
        assert v.outside_90 == int(((first == 0) | (first == P_CM.size - 1)).sum())
        assert v.below_median == int((first < 3).sum())
        assert v.expected_outside_90 == pytest.approx(0.1 * len(first), abs=0.05)
        rated = len(part) > 0 and part[
            [f"bin_{j}" for j in range(P_CM.size)]
        ].to_numpy().sum() >= cfg.min_items * len(
            part
        )  # a team with no settled target is not rated
        assert (v.verdict == "not yet rated") == (not rated), v.model
        if rated and v.calibration is not None:
            assert (v.verdict == "reliable") == (v.calibration >= 0.05), v.model


@pytest.mark.slow
def test_the_demo_teams_earn_the_verdicts_they_were_designed_for(demo_run: BriefingRun) -> None:
    # the scenario's teams (forebrief.demo.scenario.TEAMS) declare the verdict their design
    # should earn; a lagging team has no single verdict of its own
    from forebrief.demo.scenario import TEAMS

    got = {(v.model, v.quantity): v.verdict for v in demo_run.facts.verdicts}
    quantities = {v.quantity for v in demo_run.facts.verdicts}
    checked = 0
    for team in TEAMS:
        for q in quantities:
            if team.expected_verdict != "lags" and (team.id, q) in got:
                assert got[(team.id, q)] == team.expected_verdict, (team.id, q, got[(team.id, q)])
                checked += 1
    # the calibrated, too narrow, too wide and biased teams are rated for every quantity
    assert checked >= 4 * len(quantities)


@pytest.mark.slow
def test_the_headline_direction_agrees_with_the_scenario_s_next_week(
    demo_run: BriefingRun,
) -> None:
    # the scenario's truth is known: the complete count of the last week and of the week
    # after it (never published); the briefing's direction for each series must agree with it
    # wherever the true change is outside the 5% "about the same" band
    from forebrief.report.facts import DIRECTION_BAND

    scenario = generate_scenario()
    truth = scenario.truth.set_index(["region", "quantity", "week_ending"])["value"]
    ahead = scenario.truth_ahead.set_index(["region", "quantity", "week_ending"])["value"]
    checked = agreed = 0
    for o in demo_run.facts.outlook:
        if o.horizon != 1:
            continue
        last = float(truth[(o.region, o.quantity, pd.Timestamp(o.last_week))])
        nxt = float(ahead[(o.region, o.quantity, pd.Timestamp(o.week_ending))])
        if abs(nxt - last) < 2 * DIRECTION_BAND * last:
            continue  # a small true change: either word could be fair
        checked += 1
        agreed += o.direction == ("up" if nxt > last else "down")
        # the nowcast of the last week is close to its complete count
        if o.last_value_nowcast is not None and o.is_total:
            assert abs(o.last_value_nowcast - last) <= 0.10 * last
    assert checked >= 6
    assert agreed == checked
    summary = demo_run.facts.summary["focus"]
    focus = next(
        o
        for o in demo_run.facts.outlook
        if (o.region, o.quantity, o.horizon)
        == (summary["region"], summary["quantity"], summary["horizon"])
    )
    assert focus.is_total
    assert focus.direction == "down"  # the wave falls, and the text says so
    assert "down from about" in demo_run.narrative.headline[0]


@pytest.mark.slow
def test_the_cautions_are_the_standard_ones(demo_run: BriefingRun) -> None:
    assert demo_run.facts.cautions == CAUTIONS
    joined = " ".join(CAUTIONS)
    # docs/conventions.md §4: horizon limits, provisional data, model disagreement, misses,
    # and deference to local judgment (Funk et al. 2019; WHO ERC 2017)
    for phrase in (
        "weeks ahead",
        "provisional",
        "do not always agree",
        "1 week in 10",
        "professional judgment",
    ):
        assert phrase in joined


# --------------------------------------------------------------------------------------------
# exceedance probabilities against a normal mixture

MEMBERS = {"alder-team": (110.0, 20.0), "birch-team": (130.0, 20.0), "cedar-team": (150.0, 25.0)}
LEVELS = np.round(np.arange(0.005, 0.99501, 0.005), 3)  # 199 levels
LAST, THRESHOLD = 118.0, 146.0  # inside every member's 0.5%-99.5% range


def _mixture_sf(t: float, weights: np.ndarray) -> float:
    """1 - sum_e w_e Phi((t - mu_e) / sigma_e): the exact mixture (scipy.stats.norm)."""
    mu = np.array([m for m, _ in MEMBERS.values()])
    sd = np.array([s for _, s in MEMBERS.values()])
    return float(1.0 - np.sum(weights * norm.cdf((t - mu) / sd)))


@pytest.fixture(scope="module")
def mixture_run(tmp_path_factory: pytest.TempPathFactory) -> BriefingRun:
    folder = tmp_path_factory.mktemp("mixture")
    rows = [
        (model, "larchfield", "cases", "2026-03-02", "2026-03-07", lv, mu + sd * norm.ppf(lv))
        for model, (mu, sd) in MEMBERS.items()
        for lv in LEVELS
    ]
    pd.DataFrame(
        rows, columns=["model", "region", "quantity", "issued", "week_ending", "level", "value"]
    ).to_csv(folder / "forecasts.csv", index=False)
    pd.DataFrame(
        {
            "region": ["larchfield"],
            "quantity": ["cases"],
            "week_ending": ["2026-02-28"],
            "value": [LAST],
        }
    ).to_csv(folder / "observations.csv", index=False)
    cfg = BriefingConfig(
        forecasts=(folder / "forecasts.csv",),
        observations=(folder / "observations.csv",),
        horizons=(1,),
        thresholds=(Threshold("larchfield", "cases", THRESHOLD),),
        headline="weighted_pool",  # these tests check the pool's mixture arithmetic
    )
    inputs = load_inputs(cfg.forecasts, cfg.observations)
    assert not inputs.problems
    return run_briefing(cfg, inputs)


def test_the_median_of_the_models_gives_its_own_exceedance(mixture_run: BriefingRun) -> None:
    # with the quantile median as headline, P(Y > t) comes from its own quantiles as a
    # piecewise-linear CDF (checked with numpy.interp between the 199 levels)
    from forebrief.report.facts import round_probability

    cfg = dataclasses.replace(mixture_run.config, headline="quantile_median")
    inputs = load_inputs(cfg.forecasts, cfg.observations)
    run = run_briefing(cfg, inputs)
    (row,) = run.facts.outlook
    assert row.method == "quantile_median"
    e = run.ensemble.ensemble
    qm = e.loc[e["method"] == "quantile_median"].sort_values("level")
    expected = 1.0 - float(np.interp(LAST, qm["value"], qm["level"]))
    assert row.p_above_last == round_probability(expected)
    assert row.median == round_count(float(qm.loc[np.isclose(qm["level"], 0.5), "value"].iloc[0]))


def _pool_sf(
    run: BriefingRun, points: list[float], weights: np.ndarray | None = None
) -> np.ndarray:
    pool = run.ensemble.pool
    assert pool is not None
    assert pool.values.shape[0] == 1
    w = pool.weights if weights is None else weights[None, :]
    return 1.0 - pool_cdf([points], pool.values, pool.levels, w, pool.lower, pool.upper)[0]


def test_no_history_gives_equal_weights(mixture_run: BriefingRun) -> None:
    pool = mixture_run.ensemble.pool
    assert pool is not None
    assert list(pool.models) == list(MEMBERS)
    w = pool.weights[0] / pool.weights[0].sum()
    np.testing.assert_allclose(w, np.full(3, 1 / 3))


def test_pooled_exceedance_matches_the_normal_mixture(mixture_run: BriefingRun) -> None:
    # 199 levels: the piecewise-linear member CDFs are within ~1e-5 of Phi inside the
    # members' 0.5%-99.5% ranges, so 1e-4 bounds the discretisation error
    equal = np.full(3, 1 / 3)
    got = _pool_sf(mixture_run, [LAST, THRESHOLD])
    np.testing.assert_allclose(
        got, [_mixture_sf(LAST, equal), _mixture_sf(THRESHOLD, equal)], atol=1e-4
    )


@pytest.mark.parametrize(
    "weights",
    [
        pytest.param([0.5, 0.3, 0.2], id="three members"),
        pytest.param([0.7, 0.0, 0.3], id="two members"),
    ],
)
def test_pool_cdf_matches_a_weighted_normal_mixture(
    mixture_run: BriefingRun, weights: list[float]
) -> None:
    w = np.array(weights)
    points = [100.0, LAST, 130.0, THRESHOLD]
    got = _pool_sf(mixture_run, points, weights=w)
    np.testing.assert_allclose(got, [_mixture_sf(t, w) for t in points], atol=1e-4)


def test_the_facts_report_the_rounded_pool_probability(mixture_run: BriefingRun) -> None:
    (row,) = mixture_run.facts.outlook
    p_last, p_thr = _pool_sf(mixture_run, [LAST, THRESHOLD])
    for p in (p_last, p_thr):
        # far from a rounding edge, so the rounding is unambiguous
        assert abs(p * 20 - math.floor(p * 20) - 0.5) > 0.05
    assert row.last_value == LAST
    assert row.threshold == THRESHOLD
    assert row.p_above_last == round(p_last * 20) / 20  # nearest 5 percentage points
    assert row.p_above_threshold == round(p_thr * 20) / 20
    assert row.p_above_last_text == chance_text(p_last)
    assert row.p_above_threshold_text == chance_text(p_thr)
    # and the same against scipy directly, one step removed from the pool code
    equal = np.full(3, 1 / 3)
    assert row.p_above_threshold == round(_mixture_sf(THRESHOLD, equal) * 20) / 20
    assert row.p_above_last == round(_mixture_sf(LAST, equal) * 20) / 20


def test_the_pooled_median_matches_the_mixture_median(mixture_run: BriefingRun) -> None:
    from scipy.optimize import brentq

    equal = np.full(3, 1 / 3)
    median = brentq(lambda x: _mixture_sf(x, equal) - 0.5, 50, 250)
    (row,) = mixture_run.facts.outlook
    assert row.median == round(median)
    assert row.median_rate is None  # no population configured
    assert row.is_total is False
    assert mixture_run.facts.total_available is False


@pytest.mark.parametrize(
    ("p", "text"),
    [
        # tenths as frequencies (Spiegelhalter 2017), with the ends said in words
        (0.0, "less than 1 in 20"),
        (0.049, "less than 1 in 20"),
        (0.06, "about 1 in 20"),
        (0.1, "about 1 in 10"),
        (0.24, "about 2 in 10"),
        (0.5, "about 5 in 10"),
        (0.9, "about 9 in 10"),
        (0.94, "about 19 in 20"),
        (0.96, "more than 19 in 20"),
        (1.0, "more than 19 in 20"),
        (float("nan"), "unknown"),
    ],
)
def test_chance_text(p: float, text: str) -> None:
    assert chance_text(p) == text


@pytest.mark.parametrize(
    ("x", "text"),
    [
        (0.4, "0"),
        (12.5, "12"),
        (13.5, "14"),
        (999.4, "999"),
        (1234.0, "1,230"),
        (1235.0, "1,240"),
        (98765.0, "98,760"),
        (float("nan"), "n/a"),
    ],
)
def test_format_count(x: float, text: str) -> None:
    # whole numbers, from 1,000 up to the nearest 10 (common practice, no source); halves go
    # to the even neighbour, as Python's round does (12.5 -> 12, 13.5 -> 14, 1235 -> 1240)
    assert format_count(x) == text
