"""The Diebold-Mariano test and the headline rule (forebrief.tables.compare).

Outside checks, named beside each test: the check values below, hand-computed with scipy from
the formulas of Diebold & Mariano (1995, J. Bus. Econ. Statist. 13:253: DM = dbar / sqrt(V/n))
and Harvey, Leybourne & Newbold (1997, Int. J. Forecasting 13:281: the factor
sqrt((n + 1 - 2h + h(h - 1)/n) / n) and Student t on n - 1 degrees of freedom); the one-sample
t-test of ``scipy.stats.ttest_1samp``, which the corrected statistic equals at h = 1; Newey-West
(1987, Econometrica 55:703) long-run variances written out with explicit loops; and the test's
size under the null, judged with ``scipy.stats.binom.interval``. The back-test tables of the
headline rule are invented and seeded.
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from forebrief.errors import ConfigError
from forebrief.tables.compare import METHOD_NAMES, choose_headline, diebold_mariano
from forebrief.tables.ensemble import METHODS

# check values (h = 1): hand-computed with scipy (norm.sf, t.sf) from the DM and HLN formulas
CHECK_D = (1.2, 0.4, -0.3, 0.8, 1.1, 0.2, 0.9, -0.1, 0.5, 0.7)
CHECK_DM, CHECK_P = 3.620982, 0.000147
CHECK_HLN, CHECK_P_HLN = 3.435165, 0.003724


def test_diebold_mariano_gives_the_check_values() -> None:
    r = diebold_mariano(np.array(CHECK_D))
    assert r.n == 10
    assert r.mean == pytest.approx(0.54, abs=1e-12)
    assert r.statistic == pytest.approx(CHECK_DM, abs=5e-7)
    assert r.p_value == pytest.approx(CHECK_P, abs=5e-7)
    assert r.hln_statistic == pytest.approx(CHECK_HLN, abs=5e-7)
    assert r.hln_p_value == pytest.approx(CHECK_P_HLN, abs=5e-7)
    # one-sided in the other direction: A better than B gives a large p
    flipped = diebold_mariano(-np.array(CHECK_D))
    assert flipped.hln_p_value == pytest.approx(1 - CHECK_P_HLN, abs=5e-7)


def test_at_one_week_ahead_the_corrected_statistic_is_the_one_sample_t_test() -> None:
    # HLN at h = 1 is dbar / (s / sqrt(n)) with s the n - 1 sample deviation: scipy's t-test
    rng = np.random.default_rng(8)
    for n in (5, 12, 40):
        d = rng.normal(0.3, 1.0, n)
        r = diebold_mariano(d, horizon=1)
        ref = stats.ttest_1samp(d, 0.0, alternative="greater")
        assert r.hln_statistic == pytest.approx(ref.statistic, rel=1e-12)
        assert r.hln_p_value == pytest.approx(ref.pvalue, rel=1e-10)


def newey_west_by_hand(d: list[float], h: int, *, bartlett: bool) -> float:
    """gamma_0 + 2 sum_{k<h} w_k gamma_k with explicit loops (Newey & West 1987 weights)."""
    n = len(d)
    mean = sum(d) / n
    total = 0.0
    for k in range(h):
        gamma = 0.0
        for t in range(k, n):
            gamma += (d[t] - mean) * (d[t - k] - mean)
        gamma /= n
        weight = (1.0 - k / h) if bartlett else 1.0
        total += gamma if k == 0 else 2.0 * weight * gamma
    return total


@pytest.mark.parametrize("h", [2, 3, 4])
def test_long_run_variance_matches_loops_written_out(h: int) -> None:
    rng = np.random.default_rng(h)
    e = rng.standard_normal(31)
    d = (0.2 + e[1:] + 0.6 * e[:-1]).tolist()  # MA(1): dependent at lag 1
    n = len(d)
    for kernel, bartlett in (("bartlett", True), ("rectangular", False)):
        v = newey_west_by_hand(d, h, bartlett=bartlett)
        assert v > 0
        r = diebold_mariano(np.array(d), horizon=h, kernel=kernel)  # type: ignore[arg-type]
        assert r.kernel == kernel
        assert r.long_run_variance == pytest.approx(v, rel=1e-12)
        dm = (sum(d) / n) / (v / n) ** 0.5
        assert r.statistic == pytest.approx(dm, rel=1e-12)
        hln = dm * ((n + 1 - 2 * h + h * (h - 1) / n) / n) ** 0.5
        assert r.hln_statistic == pytest.approx(hln, rel=1e-12)
        assert r.hln_p_value == pytest.approx(stats.t.sf(hln, n - 1), rel=1e-10)


@pytest.mark.parametrize("h", [1, 2])
def test_size_under_the_null_is_the_nominal_ten_percent(h: int) -> None:
    # iid d with mean 0: the one-sided HLN test at 0.10 rejects about 10% of the time
    rng = np.random.default_rng(2024 + h)
    reps, n = 2000, 30
    rejected = sum(
        diebold_mariano(rng.standard_normal(n), horizon=h).hln_p_value < 0.10 for _ in range(reps)
    )
    low, high = stats.binom.interval(0.95, reps, 0.10)
    assert low <= rejected <= high, rejected


def test_degenerate_and_bad_series() -> None:
    same = diebold_mariano(np.zeros(10), horizon=2)
    assert (same.statistic, same.hln_p_value) == (0.0, 0.5)
    worse = diebold_mariano(np.full(10, 0.3), horizon=2)
    assert worse.statistic == np.inf
    assert worse.hln_p_value == 0.0
    with pytest.raises(ValueError, match="at least 2"):
        diebold_mariano(np.array([1.0]))
    with pytest.raises(ValueError, match="must be finite; position 1"):
        diebold_mariano(np.array([1.0, np.nan, 2.0]))
    with pytest.raises(ValueError, match="too few for a 2-week-ahead"):
        diebold_mariano(np.array([1.0, 2.0]), horizon=2)
    with pytest.raises(ConfigError, match="horizon must be a whole number"):
        diebold_mariano(np.array(CHECK_D), horizon=0)
    with pytest.raises(ConfigError, match="kernel must be one of"):
        diebold_mariano(np.array(CHECK_D), kernel="parzen")  # type: ignore[arg-type]


def test_a_negative_rectangular_variance_falls_back_to_newey_west() -> None:
    d = np.array([1.0, -1.0] * 6) + 0.1  # alternating: gamma_1 = -gamma_0 nearly
    r = diebold_mariano(d, horizon=2, kernel="rectangular")
    assert r.kernel == "bartlett"
    assert r.long_run_variance == pytest.approx(
        newey_west_by_hand(d.tolist(), 2, bartlett=True), rel=1e-12
    )


# --------------------------------------------------------------------------------------------
# the headline rule on invented back-test tables

REGIONS = ("fenwold", "marrowby", "quillstead", "tarnhollow", "kestrelmark")
FIRST = pd.Timestamp("2026-09-07")


def back_test_items(
    effects: dict[str, Callable[[np.random.Generator, int], np.ndarray]],
    *,
    dates: int = 11,
    seed: int = 1,
    horizons: tuple[int, ...] = (1, 2, 3),
) -> pd.DataFrame:
    """A by_item table: every method x region x horizon x issue date, WIS = base x effect.

    The base WIS of an item is shared by all methods (how hard the item was); each method's
    effect is a function (rng, number of dates) -> one factor per date, times item noise.
    """
    rng = np.random.default_rng(seed)
    rows = []
    for t in range(dates):
        issued = FIRST + pd.Timedelta(weeks=t)
        for h in horizons:
            for region in REGIONS:
                base = float(np.exp(rng.normal(np.log(10.0 * h), 0.5)))
                rows.append((issued, region, h, base))
    items = pd.DataFrame(rows, columns=["issued", "region", "horizon", "base"])
    parts = []
    for model, effect in effects.items():
        per_date = effect(rng, dates)
        date_no = ((items["issued"] - FIRST).dt.days // 7).to_numpy()
        noise = np.exp(rng.normal(0.0, 0.05, len(items)))
        parts.append(
            items.assign(model=model, wis=items["base"].to_numpy() * per_date[date_no] * noise)
        )
    out = pd.concat(parts, ignore_index=True)
    out["quantity"] = "admissions"
    out["week_ending"] = out["issued"] + pd.to_timedelta(5 + 7 * (out["horizon"] - 1), unit="D")
    out["observed"] = 100.0
    return out[
        ["model", "region", "quantity", "week_ending", "horizon", "issued", "observed", "wis"]
    ]


def steady(factor: float) -> Callable[[np.random.Generator, int], np.ndarray]:
    return lambda rng, n: factor * np.exp(rng.normal(0.0, 0.03, n))


def noisy(factor: float) -> Callable[[np.random.Generator, int], np.ndarray]:
    return lambda rng, n: factor * np.exp(rng.normal(0.0, 0.35, n))


CANDIDATES = ("weighted_pool", "equal_pool", "recalibrated_pool")


def by_hand(table: pd.DataFrame, method: str) -> tuple[float, float, int]:
    """(WIS ratio to the median, HLN p-value, dates) on the items both scored at h = 1, 2."""
    t = table.loc[table["horizon"].isin([1, 2])]
    w = t.pivot_table(index=["issued", "region", "horizon"], columns="model", values="wis").dropna(
        subset=["quantile_median", method]
    )
    ok = w.reset_index().groupby("issued")["horizon"].nunique() == 2
    w = w.loc[w.index.get_level_values("issued").isin(ok.index[ok])]
    ratio = float(w[method].mean() / w["quantile_median"].mean())
    daily = w.groupby(level="issued")[["quantile_median", method]].mean()
    d = (daily["quantile_median"] - daily[method]).to_numpy()
    return ratio, diebold_mariano(d, horizon=2).hln_p_value, len(d)


def test_a_clearly_better_combination_takes_the_headline() -> None:
    table = back_test_items(
        {"quantile_median": steady(1.0), "equal_pool": steady(0.85), "persistence": steady(1.4)}
    )
    got = choose_headline(table, quantity="admissions", candidates=CANDIDATES)
    ratio, p, n = by_hand(table, "equal_pool")
    assert n == 11
    assert got["method"] == "equal_pool"
    assert got["relative_to_default"]["equal_pool"] == pytest.approx(ratio, abs=5e-4)
    assert got["dm_p"]["equal_pool"] == pytest.approx(p, rel=1e-2)
    assert p < 0.10
    p_text = "p < 0.001" if p < 0.001 else f"p = {p:.2g}"
    assert got["reason"] == (
        f"the equal-weight combination had {(1 - ratio) * 100:.0f}% lower error than the median "
        f"of the models over the last 11 issue dates ({p_text})"
    )
    assert got["n_dates"] == 11
    assert got["challenger"] == "equal_pool"
    assert got["qualified"] == ["equal_pool"]
    # methods absent from the table are reported without figures; the baseline is ignored
    assert got["mean_wis"]["weighted_pool"] is None
    assert got["n_dates_compared"]["weighted_pool"] == 0
    assert "persistence" not in got["mean_wis"]


def test_a_slightly_better_but_noisy_combination_does_not() -> None:
    table = back_test_items({"quantile_median": steady(1.0), "weighted_pool": noisy(0.95)}, seed=1)
    ratio, p, _ = by_hand(table, "weighted_pool")
    assert ratio < 1  # lower mean WIS ...
    assert p >= 0.10  # ... but not clearly
    got = choose_headline(table, quantity="admissions", candidates=CANDIDATES)
    assert got["method"] == "quantile_median"
    assert got["reason"] == (
        "the median of the models is used unless another combination does clearly better; "
        "none did over the last 11 issue dates"
    )
    assert got["challenger"] == "weighted_pool"
    assert got["qualified"] == []
    assert got["dm_p"]["weighted_pool"] == pytest.approx(p, rel=1e-2)


def test_fewer_than_eight_settled_dates_keep_the_default() -> None:
    table = back_test_items(
        {"quantile_median": steady(1.0), "equal_pool": steady(0.7)}, dates=7, seed=2
    )
    got = choose_headline(table, quantity="admissions", candidates=CANDIDATES)
    assert got["method"] == "quantile_median"
    assert got["n_dates"] == 7
    assert got["dm_p"]["equal_pool"] is None
    assert got["reason"] == (
        "the median of the models is used: only 7 issue date(s) have been scored 1 and 2 weeks "
        "ahead so far, and another combination needs at least 8 to replace it"
    )


def test_only_settled_dates_and_shared_items_count() -> None:
    table = back_test_items(
        {"quantile_median": steady(1.0), "equal_pool": steady(0.85)}, dates=9, seed=5
    )
    last = table["issued"].max()
    # the last date is not settled at 2 weeks ahead; one region is missing for the challenger
    table = table.loc[~((table["issued"] == last) & (table["horizon"] == 2))]
    gone = (table["model"] == "equal_pool") & (table["region"] == "fenwold")
    table = table.loc[~gone]
    got = choose_headline(table, quantity="admissions", candidates=CANDIDATES)
    ratio, p, n = by_hand(table, "equal_pool")
    assert got["n_dates"] == 8
    assert got["n_dates_compared"]["equal_pool"] == n == 8
    assert got["relative_to_default"]["equal_pool"] == pytest.approx(ratio, abs=5e-4)
    assert got["dm_p"]["equal_pool"] == pytest.approx(p, rel=1e-2)
    # the default's mean WIS is on its own settled items, fenwold included
    mine = table.loc[
        (table["model"] == "quantile_median")
        & table["horizon"].isin([1, 2])
        & (table["issued"] != last)
    ]
    assert got["mean_wis"]["quantile_median"] == pytest.approx(mine["wis"].mean(), rel=1e-3)


def test_several_qualify_and_the_lowest_error_wins() -> None:
    table = back_test_items(
        {
            "quantile_median": steady(1.0),
            "equal_pool": steady(0.85),
            "recalibrated_pool": steady(0.78),
        },
        seed=6,
    )
    got = choose_headline(table, quantity="admissions", candidates=CANDIDATES)
    assert got["method"] == "recalibrated_pool"
    assert sorted(got["qualified"]) == ["equal_pool", "recalibrated_pool"]
    assert got["reason"].startswith("the recalibrated equal-weight combination had ")
    assert got["reason"].endswith(
        ", the lowest error of the 2 combinations that did clearly better"
    )


def test_a_forced_choice_overrides_the_rule_and_keeps_the_figures() -> None:
    table = back_test_items(
        {"quantile_median": steady(1.0), "weighted_pool": steady(1.1), "equal_pool": steady(0.8)},
        seed=7,
    )
    got = choose_headline(
        table, quantity="admissions", candidates=CANDIDATES, forced="weighted_pool"
    )
    ratio, p, _ = by_hand(table, "weighted_pool")
    assert got["method"] == "weighted_pool"
    assert got["forced"] is True
    assert got["reason"] == (
        "the reliability-weighted combination is used because it was chosen in the "
        f"configuration; over the last 11 issue dates it had {(ratio - 1) * 100:.0f}% higher "
        f"error than the median of the models (p = {p:.2g})"
    )
    assert got["qualified"] == ["equal_pool"]  # what the rule would have chosen
    forced_default = choose_headline(
        table, quantity="admissions", candidates=CANDIDATES, forced="quantile_median"
    )
    assert forced_default["method"] == "quantile_median"
    assert forced_default["reason"] == (
        "the median of the models is used because it was chosen in the configuration"
    )


def test_unknown_names_and_options_are_refused_with_the_valid_ones() -> None:
    table = back_test_items({"quantile_median": steady(1.0)}, dates=3)
    listed = ", ".join(METHODS)
    for kwargs in (
        {"candidates": ("equal_pool", "mixture")},
        {"candidates": CANDIDATES, "forced": "best"},
        {"candidates": CANDIDATES, "default": "median"},
    ):
        with pytest.raises(ConfigError, match="the valid ones are " + listed):
            choose_headline(table, quantity="admissions", **kwargs)  # type: ignore[arg-type]
    with pytest.raises(ConfigError, match="min_dates must be a whole number >= 3"):
        choose_headline(table, quantity="admissions", candidates=CANDIDATES, min_dates=1)
    with pytest.raises(ConfigError, match="p_threshold"):
        choose_headline(table, quantity="admissions", candidates=CANDIDATES, p_threshold=1.5)
    assert set(METHOD_NAMES) == set(METHODS)


def test_nothing_scored_yet() -> None:
    empty = back_test_items({"quantile_median": steady(1.0)}, dates=3).iloc[0:0]
    got = choose_headline(empty, quantity="admissions", candidates=CANDIDATES)
    assert got["method"] == "quantile_median"
    assert got["n_dates"] == 0
    assert got["mean_wis"]["quantile_median"] is None
    assert got["reason"].startswith("the median of the models is used: no issue date has been")
