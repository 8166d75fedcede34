"""Tests of the persistence baseline (forebrief.tables.baseline).

Reference values come from docs/methods.md §7 and its check table (rows B1, B2),
which follow the published description in Cramer et al. (2022), PNAS 119(15):e2113561119,
Methods (baseline model), with the [design choice] details of docs/methods.md §7. The fast quantile
path is checked against numpy's ``np.quantile`` (method 'linear', Hyndman & Fan 1996
definition 7) on the explicit multiset, and against an exact integer (Python int) convolution.
Series, regions and dates are invented.
"""

from __future__ import annotations

from fractions import Fraction

import numpy as np
import pandas as pd
import pytest

import forebrief.tables.baseline as baseline
from forebrief.errors import ConfigError, InputError
from forebrief.tables.baseline import multiset_quantile, persistence_forecast, sum_quantiles
from forebrief.tables.schema import CM_LEVELS, FORECAST_COLUMNS, STANDARD_LEVELS

TAU5 = np.array(CM_LEVELS)
SAT = pd.Timestamp("2031-02-22")  # a Saturday
MON = SAT + pd.Timedelta(days=2)  # the Monday after it
DAY = pd.Timedelta(days=1)
WEEK = pd.Timedelta(days=7)


def series_frame(values, *, last: pd.Timestamp = SAT, region="Avel", quantity="admissions"):
    """One weekly series whose last week ends on ``last``."""
    values = np.asarray(values, dtype=float)
    weeks = pd.date_range(end=last, periods=values.size, freq="7D")
    return pd.DataFrame(
        {"region": region, "quantity": quantity, "week_ending": weeks, "value": values}
    )


def explicit_sums(changes: np.ndarray, s: int) -> np.ndarray:
    """The full multiset of the (2m)^s ordered s-fold sums of the symmetrised changes."""
    sym = np.concatenate([changes, -changes])
    acc = np.zeros(1)
    for _ in range(s):
        acc = (acc[:, None] + sym[None, :]).ravel()
    return acc


def values_at(fc: pd.DataFrame, week: pd.Timestamp, **where) -> np.ndarray:
    mask = fc["week_ending"] == week
    for col, val in where.items():
        mask &= fc[col] == val
    return fc.loc[mask].sort_values("level")["value"].to_numpy()


# --------------------------------------------------------- reference values (docs/methods.md)

# docs/methods.md §7, check table row B1 (Cramer et al. 2022, PNAS, Methods: baseline model, plus
# the [d] choices): y = (50, 54, 61, 58, 66, 73, 70, 80), np.quantile type 7 of the
# symmetrised differences (h=1) and of the full multiset of their pairwise sums (h=2).
B1_Y = [50, 54, 61, 58, 66, 73, 70, 80]
B1_H1 = [71.3, 73.75, 80, 86.25, 88.7]
B1_H2 = [65, 73.75, 80, 86.25, 95]
# docs/methods.md §7, check table row B2 (same source): y = (3, 1, 0, 2, 1), h=1, floored at 0;
# the untruncated values are printed beside it in §7.
B2_Y = [3, 1, 0, 2, 1]
B2_FLOORED = [0, 0, 1, 2.25, 3]
B2_RAW = [-1, -0.25, 1, 2.25, 3]


def test_methods_b1_horizons_one_and_two():
    fc = persistence_forecast(series_frame(B1_Y), issued=MON, horizons=(1, 2), levels=CM_LEVELS)
    np.testing.assert_allclose(values_at(fc, SAT + WEEK), B1_H1, rtol=0, atol=1e-12)
    np.testing.assert_allclose(values_at(fc, SAT + 2 * WEEK), B1_H2, rtol=0, atol=1e-12)


def test_methods_b1_core_equals_numpy_on_the_multiset():
    # docs/methods.md §7, check B1: np.quantile(D) and np.quantile(D[:,None] + D[None,:]).
    d = np.diff(np.array(B1_Y, dtype=float))
    got = sum_quantiles(d, steps=[1, 2], levels=TAU5)
    np.testing.assert_array_equal(got[0], np.quantile(explicit_sums(d, 1), TAU5))
    np.testing.assert_array_equal(got[1], np.quantile(explicit_sums(d, 2), TAU5))


def test_methods_b2_truncation_at_zero():
    obs = series_frame(B2_Y)
    floored = persistence_forecast(obs, issued=MON, horizons=(1,), levels=CM_LEVELS)
    raw = persistence_forecast(obs, issued=MON, horizons=(1,), levels=CM_LEVELS, nonnegative=False)
    np.testing.assert_allclose(floored["value"], B2_FLOORED, rtol=0, atol=1e-12)
    np.testing.assert_allclose(raw["value"], B2_RAW, rtol=0, atol=1e-12)


# ----------------------------------------------------------------- fast path vs slow reference


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_multiset_quantile_equals_numpy_on_expanded_multiset(seed):
    # Reference: np.quantile (Hyndman & Fan 1996, definition 7) on np.repeat(values, counts).
    rng = np.random.default_rng(seed)
    values = np.unique(rng.normal(size=30).round(2))
    counts = rng.integers(1, 9, size=values.size)
    tau = np.r_[np.array(STANDARD_LEVELS), 0.0, 1.0, 0.333]
    expected = np.quantile(np.repeat(values, counts), tau)
    np.testing.assert_array_equal(multiset_quantile(values, counts, tau), expected)


@pytest.mark.parametrize("kind", ["integer", "non-integer"])
@pytest.mark.parametrize("seed", [3, 4])
@pytest.mark.parametrize("s", [1, 2, 3, 4])
def test_sum_quantiles_equals_numpy_on_explicit_s_fold_sums(kind, seed, s):
    # Reference: np.quantile on the explicit multiset of all (2m)^s s-fold sums.
    rng = np.random.default_rng(seed)
    m = int(rng.integers(3, 7))
    changes = rng.integers(-20, 21, size=m).astype(float)
    if kind == "non-integer":
        changes = rng.normal(0.0, 7.3, size=m)
    got = sum_quantiles(changes, steps=[s], levels=np.array(STANDARD_LEVELS))[0]
    expected = np.quantile(explicit_sums(changes, s), STANDARD_LEVELS)
    np.testing.assert_allclose(got, expected, rtol=1e-13, atol=1e-10)


def test_sum_quantiles_several_steps_in_any_order():
    rng = np.random.default_rng(5)
    changes = rng.integers(-9, 10, size=5).astype(float)
    got = sum_quantiles(changes, steps=[3, 1, 2], levels=TAU5)
    for row, s in zip(got, [3, 1, 2], strict=True):
        np.testing.assert_allclose(row, np.quantile(explicit_sums(changes, s), TAU5), atol=1e-12)


def test_sum_quantiles_no_changes_is_zero():
    np.testing.assert_array_equal(sum_quantiles(np.array([]), steps=[1, 4], levels=TAU5), 0.0)


def test_integer_lattice_path_is_exact(monkeypatch):
    # Force the grid path; integer changes with a small span use the integer lattice, which
    # must agree with np.quantile on the explicit multiset exactly.
    monkeypatch.setattr(baseline, "_MAX_SUPPORT", 1)
    rng = np.random.default_rng(6)
    changes = rng.integers(-15, 16, size=6).astype(float)
    got = sum_quantiles(changes, steps=[1, 2, 3, 4], levels=np.array(STANDARD_LEVELS))
    for s in range(1, 5):
        expected = np.quantile(explicit_sums(changes, s), STANDARD_LEVELS)
        np.testing.assert_allclose(got[s - 1], expected, rtol=0, atol=1e-9)


def test_grid_path_within_documented_error_bound(monkeypatch):
    # Documented bound of the grid approximation: |error| <= s * delta / 2 with
    # delta = 2 max|d| S / 2**16 (S = largest step).
    monkeypatch.setattr(baseline, "_MAX_SUPPORT", 1)
    rng = np.random.default_rng(7)
    changes = rng.normal(0.0, 11.0, size=6)
    steps = [1, 2, 3, 4]
    got = sum_quantiles(changes, steps=steps, levels=np.array(STANDARD_LEVELS))
    delta = 2 * np.max(np.abs(changes)) * max(steps) / baseline._GRID_CELLS
    for s in steps:
        expected = np.quantile(explicit_sums(changes, s), STANDARD_LEVELS)
        assert np.max(np.abs(got[s - 1] - expected)) <= s * delta / 2 + 1e-12
        assert got[s - 1][STANDARD_LEVELS.index(0.5)] == 0.0  # centred grid keeps symmetry


def _exact_type7(changes_int: list[int], s: int, tau: float) -> float:
    """Slow reference: exact Python-int counts of the s-fold sum, type-7 quantile by rank."""
    sym = [*changes_int, *(-c for c in changes_int)]
    lo_v, hi_v = -s * max(abs(c) for c in sym), s * max(abs(c) for c in sym)
    counts = {0: 1}
    for _ in range(s):
        nxt: dict[int, int] = {}
        for v, c in counts.items():
            for d in sym:
                nxt[v + d] = nxt.get(v + d, 0) + c
        counts = nxt
    support = [v for v in range(lo_v, hi_v + 1) if v in counts]
    n = sum(counts.values())
    pos = (n - 1) * Fraction(tau)
    lo = pos.numerator // pos.denominator
    g = pos - lo

    def order_stat(i: int) -> int:
        run = 0
        for v in support:
            run += counts[v]
            if run > i:
                return v
        return support[-1]

    a, b = order_stat(lo), order_stat(min(lo + 1, n - 1))
    return float(a + g * (b - a))


def test_counts_beyond_exact_float_range():
    # (2 * 60)^9 ~ 5e18 > 2**53 ordered sums: counts are carried as proportions. Reference: the
    # exact integer computation above.
    rng = np.random.default_rng(8)
    changes = rng.integers(-2, 3, size=60)
    got = sum_quantiles(changes.astype(float), steps=[9], levels=TAU5)[0]
    expected = [_exact_type7(changes.tolist(), 9, t) for t in TAU5]
    np.testing.assert_allclose(got, expected, rtol=1e-9, atol=1e-9)


# ----------------------------------------------------------------- invariants of the forecast


def _panel(seed: int = 9) -> pd.DataFrame:
    """Seeded weekly series for several invented regions and two quantities."""
    rng = np.random.default_rng(seed)
    frames = []
    for r, region in enumerate(["Avel", "Brenmoor", "Cask Valley", "Dunmere"]):
        for quantity, scale in (("admissions", 80.0), ("deaths", 3.0)):
            level = scale * (1 + r) * np.exp(np.cumsum(rng.normal(0, 0.2, size=30)))
            values = np.round(level)
            if r == 3:
                values = level  # one non-integer series per quantity
            frames.append(series_frame(values, region=region, quantity=quantity))
    return pd.concat(frames, ignore_index=True)


def test_median_is_the_last_observation_at_every_horizon():
    # Symmetry of D (Cramer et al. 2022, Methods): the median of the s-fold sum is 0.
    obs = _panel()
    fc = persistence_forecast(obs, issued=MON, nonnegative=False, changes_window=None)
    last = obs.sort_values("week_ending").groupby(["region", "quantity"])["value"].last()
    med = fc[fc["level"] == 0.5].set_index(["region", "quantity", "week_ending"])["value"]
    for (region, quantity, _), value in med.items():
        assert value == last[(region, quantity)]
    assert len(med) == len(last) * 4


def test_quantiles_ordered_and_width_grows_with_horizon():
    obs = _panel()
    fc = persistence_forecast(obs, issued=MON)
    # 50 %, 80 %, 90 %, 95 % and 98 % central intervals. (For inner levels of a discrete
    # distribution the s-fold width need not grow: D = {-1, 1} has a 45 % quantile of -0.1 at
    # s = 1 and 0 at s = 2; worked by hand, our own check.)
    pairs = [(0.25, 0.75), (0.1, 0.9), (0.05, 0.95), (0.025, 0.975), (0.01, 0.99)]
    for (_region, _quantity), g in fc.groupby(["region", "quantity"]):
        table = g.pivot(index="week_ending", columns="level", values="value").sort_index()
        assert np.all(np.diff(table.to_numpy(), axis=1) >= 0)  # non-decreasing in level
        for lo, hi in pairs:
            width = (table[hi] - table[lo]).to_numpy()
            assert np.all(np.diff(width) >= -1e-9), (lo, hi, width)
        if _quantity == "admissions":  # these series all move, so their spread is not 0
            assert table[0.99].iloc[-1] - table[0.01].iloc[-1] > 0


def test_floor_at_zero_and_which_quantities_are_floored():
    low = series_frame([3, 0, 4, 1, 0, 2], quantity="deaths")
    also = series_frame([3, 0, 4, 1, 0, 2], quantity="growth")
    obs = pd.concat([low, also], ignore_index=True)
    every = persistence_forecast(obs, issued=MON)
    assert (every["value"] >= 0).all()
    raw = persistence_forecast(obs, issued=MON, nonnegative=False)
    assert (raw["value"] < 0).any()
    for chosen in ({"deaths"}, ["deaths"], "deaths"):
        part = persistence_forecast(obs, issued=MON, nonnegative=chosen)
        assert (part.loc[part["quantity"] == "deaths", "value"] >= 0).all()
        growth = part.loc[part["quantity"] == "growth", "value"].to_numpy()
        np.testing.assert_array_equal(growth, raw.loc[raw["quantity"] == "growth", "value"])
    # Flooring is max(0, .) of the unfloored quantile (docs/methods.md §7).
    np.testing.assert_array_equal(every["value"], np.maximum(raw["value"], 0))


# ----------------------------------------------------------------- horizon and week arithmetic


def test_monday_issue_with_saturday_weeks():
    fc = persistence_forecast(series_frame(B1_Y), issued=MON)
    weeks = np.sort(fc["week_ending"].unique())
    expected = [SAT + h * WEEK for h in (1, 2, 3, 4)]
    assert list(pd.to_datetime(weeks)) == expected
    horizon = np.ceil((pd.to_datetime(weeks) - MON) / WEEK)
    assert list(horizon) == [1, 2, 3, 4]
    assert all(w.day_of_week == 5 for w in pd.to_datetime(weeks))


def test_stale_series_gets_the_same_target_weeks_and_a_wider_spread():
    # A series whose last value is two weeks old: horizon h is 2 + h weeks after its last
    # observation, so its spread is the (h+2)-fold one.
    y = [40, 44, 39, 47, 52, 50, 58, 61, 57, 66]
    fresh = series_frame(y, region="Avel")
    stale = series_frame(y, region="Brenmoor", last=SAT - 2 * WEEK)
    fc = persistence_forecast(pd.concat([fresh, stale]), issued=MON)
    fresh_weeks = sorted(fc.loc[fc["region"] == "Avel", "week_ending"].unique())
    stale_weeks = sorted(fc.loc[fc["region"] == "Brenmoor", "week_ending"].unique())
    assert stale_weeks == fresh_weeks
    steps = sum_quantiles(np.diff(np.array(y, float)), steps=[3, 4, 5, 6], levels=STANDARD_LEVELS)
    for h, week in enumerate(stale_weeks, start=1):
        np.testing.assert_allclose(
            values_at(fc, week, region="Brenmoor"), np.maximum(y[-1] + steps[h - 1], 0)
        )
    for h in (1, 2):  # stale at h == fresh at h + 2 (same changes, same number of steps)
        np.testing.assert_allclose(
            values_at(fc, stale_weeks[h - 1], region="Brenmoor"),
            values_at(fc, fresh_weeks[h + 1], region="Avel"),
        )
    h1_fresh = values_at(fc, fresh_weeks[0], region="Avel")
    h1_stale = values_at(fc, stale_weeks[0], region="Brenmoor")
    assert h1_stale[-1] - h1_stale[0] > h1_fresh[-1] - h1_fresh[0]


def test_issue_day_on_the_week_ending_weekday():
    # Issued on a Saturday, last week ending the Saturday before: the week ending on D is
    # horizon 0 (not produced), and horizon 1 lies two steps after the last observation, so it
    # takes check B1's two-fold values (docs/methods.md §7).
    obs = series_frame(B1_Y, last=SAT - WEEK)
    fc = persistence_forecast(obs, issued=SAT, horizons=(1, 2), levels=CM_LEVELS)
    assert sorted(fc["week_ending"].unique()) == [SAT + WEEK, SAT + 2 * WEEK]
    np.testing.assert_allclose(values_at(fc, SAT + WEEK), B1_H2, rtol=0, atol=1e-12)


def test_rows_on_or_after_the_issue_date_are_ignored():
    obs = series_frame(B1_Y)
    later = series_frame([500.0, 900.0], last=MON + 5 * DAY)  # weeks ending MON-2, MON+5
    later = later[later["week_ending"] >= MON]
    with_later = persistence_forecast(pd.concat([obs, later]), issued=MON)
    pd.testing.assert_frame_equal(with_later, persistence_forecast(obs, issued=MON))
    same_day = obs.assign(week_ending=obs["week_ending"] + 2 * DAY)  # last week ends on D
    fc = persistence_forecast(same_day, issued=MON, horizons=(1,), levels=CM_LEVELS)
    assert fc["week_ending"].iloc[0] == MON + 7 * DAY
    np.testing.assert_allclose(fc.loc[fc["level"] == 0.5, "value"], [B1_Y[-2]])


# ----------------------------------------------------------------- which changes are used


def test_only_changes_seven_days_apart_are_used():
    # Weeks 1-3 consecutive, then a gap of two weeks, then weeks 6-7: the 14-day jump (+100)
    # must not be a change. Reference: np.quantile of the remaining symmetrised changes.
    obs = series_frame([10, 12, 15, 115, 113, 120, 118], last=SAT)
    obs = obs.drop(index=3).reset_index(drop=True)  # values 10, 12, 15, _, 113, 120, 118
    fc = persistence_forecast(obs, issued=MON, horizons=(1,), levels=CM_LEVELS)
    d = np.array([2.0, 3.0, 7.0, -2.0])
    np.testing.assert_allclose(fc["value"], 118 + np.quantile(np.r_[d, -d], TAU5))


def test_changes_window_counts_calendar_weeks():
    y = [10, 50, 20, 60, 61, 63, 62]
    obs = series_frame(y)
    fc = persistence_forecast(obs, issued=MON, horizons=(1,), levels=CM_LEVELS, changes_window=4)
    d = np.diff(np.array(y[-4:], float))  # the last 4 weeks give 3 changes
    np.testing.assert_allclose(fc["value"], 62 + np.quantile(np.r_[d, -d], TAU5))
    whole = persistence_forecast(
        obs, issued=MON, horizons=(1,), levels=CM_LEVELS, changes_window=None
    )
    d = np.diff(np.array(y, float))
    np.testing.assert_allclose(whole["value"], 62 + np.quantile(np.r_[d, -d], TAU5))


def test_one_observation_gives_a_point_forecast():
    fc = persistence_forecast(series_frame([17.0]), issued=MON)
    assert len(fc) == 4 * len(STANDARD_LEVELS)
    assert (fc["value"] == 17.0).all()


def test_one_change_is_used_as_it_is():
    fc = persistence_forecast(series_frame([20.0, 26.0]), issued=MON, horizons=(1,))
    np.testing.assert_allclose(fc["value"], 26 + np.quantile([6.0, -6.0], STANDARD_LEVELS))


def test_missing_values_are_missing_weeks():
    obs = series_frame([10.0, 14.0, 11.0, np.nan])
    fc = persistence_forecast(obs, issued=MON, horizons=(1,), levels=CM_LEVELS)
    # The last usable week is SAT - 7 days; horizon 1 (ceil(5 days / 7) = 1) is SAT + 7 days,
    # two steps after it.
    assert (fc["week_ending"] == SAT + WEEK).all()
    d = np.array([4.0, -3.0])
    np.testing.assert_allclose(fc["value"], 11 + np.quantile(explicit_sums(d, 2), TAU5))


# ----------------------------------------------------------------- output format


def test_output_columns_dtypes_and_order():
    obs = _panel().sample(frac=1.0, random_state=1)  # shuffled input
    fc = persistence_forecast(obs, issued=MON, name="flat")
    assert list(fc.columns) == list(FORECAST_COLUMNS)
    for col in ("model", "region", "quantity"):
        assert pd.api.types.is_string_dtype(fc[col])
    assert fc["issued"].dtype == obs["week_ending"].dtype
    assert fc["week_ending"].dtype == obs["week_ending"].dtype
    assert fc["issued"].dtype.kind == "M"
    assert fc["level"].dtype == np.float64
    assert fc["value"].dtype == np.float64
    assert (fc["model"] == "flat").all()
    assert (fc["issued"] == MON).all()
    assert list(fc.index) == list(range(len(fc)))
    ordered = fc.sort_values(["region", "quantity", "week_ending", "level"], kind="stable")
    pd.testing.assert_frame_equal(fc, ordered.reset_index(drop=True))
    assert len(fc) == 8 * 4 * len(STANDARD_LEVELS)
    np.testing.assert_array_equal(np.unique(fc["level"]), np.array(STANDARD_LEVELS))


def test_nothing_to_forecast_gives_an_empty_table():
    obs = series_frame(B1_Y, last=MON + 5 * DAY)
    obs = obs[obs["week_ending"] >= MON]  # only a week ending after D remains
    fc = persistence_forecast(obs, issued=MON)
    assert fc.empty
    assert list(fc.columns) == list(FORECAST_COLUMNS)
    assert fc["week_ending"].dtype.kind == "M"
    assert fc["value"].dtype == np.float64


# ----------------------------------------------------------------- bad input, clear messages


def test_missing_column_names_it():
    with pytest.raises(InputError, match="lacks column\\(s\\) value"):
        persistence_forecast(series_frame(B1_Y).drop(columns="value"), issued=MON)


def test_duplicate_week_names_the_key_and_rows():
    obs = series_frame(B1_Y)
    obs = pd.concat([obs, obs.iloc[[-1]]], ignore_index=True)
    with pytest.raises(InputError, match=r"'Avel'.*admissions.*2031-02-22.*rows 7, 8.*fix"):
        persistence_forecast(obs, issued=MON)


def test_week_ending_must_be_dates():
    obs = series_frame(B1_Y)
    obs["week_ending"] = obs["week_ending"].dt.strftime("%Y-%m-%d")
    with pytest.raises(InputError, match=r"pd\.to_datetime"):
        persistence_forecast(obs, issued=MON)


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [
        ("horizons", (0, 1), "horizons must be distinct whole numbers"),
        ("horizons", (1, 1), "horizons must be distinct whole numbers"),
        ("horizons", (1.5,), "horizons must be distinct whole numbers"),
        ("levels", (0.5, 1.0), "strictly between 0 and 1"),
        ("levels", (0.5, 0.5), "levels must be distinct"),
        ("changes_window", 1, "changes_window must be a whole number of weeks, 2 or more"),
        ("changes_window", 4.0, "changes_window must be a whole number of weeks, 2 or more"),
        ("nonnegative", 3, "nonnegative must be True"),
        ("name", "", "name must be a non-empty model name"),
    ],
)
def test_bad_options_say_what_is_allowed(option, value, message):
    with pytest.raises(ConfigError, match=message):
        persistence_forecast(series_frame(B1_Y), issued=MON, **{option: value})


def test_bad_issue_date():
    with pytest.raises(ConfigError, match="issued must be a date"):
        persistence_forecast(series_frame(B1_Y), issued="not a date")
