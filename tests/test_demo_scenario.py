"""The invented demo scenario: shipped files, determinism, reporting vintages, faults, behaviours.

The scenario is invented data for the demo only, so these tests check it against the
project's own file formats (FORECAST_COLUMNS, the observation columns, horizon =
ceil(days / 7)) and against what the scenario promises: that the reporting, the wave and the
teams behave as described. Each team's designed behaviour is checked against the complete
counts (the truth) over the rated weeks, the calibrated team with a binomial band from
scipy.stats (reference library). No scoring results are hard-coded.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from collections import Counter
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.stats import binom

import forebrief.demo
from forebrief.demo import (
    DEFAULT_SEED,
    generate_scenario,
    regenerate_example_inputs,
    scenario_files,
    write_scenario,
)
from forebrief.demo.__main__ import main as demo_main
from forebrief.demo.scenario import LEVELS, RATING_WEEKS, REGIONS, TEAMS
from forebrief.report.facts import VERDICTS
from forebrief.tables.schema import CM_LEVELS, FORECAST_COLUMNS

EXAMPLE_INPUTS = Path(__file__).resolve().parents[1] / "example_inputs"
LAST_WEEK = pd.Timestamp("2026-11-28")
LAST_ISSUED = pd.Timestamp("2026-11-30")
ID_PATTERN = re.compile(r"^[a-z0-9]+(-[a-z0-9]+)*$")


@pytest.fixture(scope="module")
def scenario() -> forebrief.demo.Scenario:
    return generate_scenario()


@pytest.fixture(scope="module")
def scored(scenario: forebrief.demo.Scenario) -> pd.DataFrame:
    """Clean forecasts with observed targets, one row per forecast, levels as columns, + truth."""
    sub = scenario.submissions[scenario.submissions["week_ending"] <= LAST_WEEK]
    wide = sub.pivot_table(
        index=["model", "region", "quantity", "issued", "week_ending"],
        columns="level",
        values="value",
    ).reset_index()
    truth = scenario.truth.rename(columns={"value": "truth"})
    return wide.merge(truth, on=["region", "quantity", "week_ending"], validate="many_to_one")


def _tree(root: Path) -> dict[str, bytes]:
    return {
        p.relative_to(root).as_posix(): p.read_bytes()
        for p in sorted(root.rglob("*"))
        if p.is_file() and "__pycache__" not in p.parts
    }


def _team(behaviour_start: str) -> str:
    return next(t.id for t in TEAMS if t.behaviour.startswith(behaviour_start))


# --- shipped files and determinism ---------------------------------------------------------------


def test_shipped_example_inputs_are_reproduced_byte_for_byte(tmp_path: Path) -> None:
    written = write_scenario(generate_scenario(seed=DEFAULT_SEED), tmp_path)
    fresh = _tree(tmp_path)
    shipped = _tree(EXAMPLE_INPUTS)
    assert sorted(shipped) == sorted(fresh), (
        "regenerate with: python -m forebrief.demo example_inputs"
    )
    changed = [name for name in fresh if fresh[name] != shipped[name]]
    assert changed == []
    assert sorted(p.relative_to(tmp_path).as_posix() for p in written) == sorted(fresh)


def test_shipped_example_inputs_are_under_5_mb() -> None:
    total = sum(len(data) for data in _tree(EXAMPLE_INPUTS).values())
    assert 0 < total < 5 * 1024 * 1024


def test_same_seed_same_bytes_other_seed_other_data(scenario: forebrief.demo.Scenario) -> None:
    again = scenario_files(generate_scenario(seed=DEFAULT_SEED))
    assert scenario_files(scenario) == again
    other = generate_scenario(seed=DEFAULT_SEED + 1)
    assert not other.truth["value"].equals(scenario.truth["value"])


def test_files_use_newline_endings_and_exact_headers(scenario: forebrief.demo.Scenario) -> None:
    files = scenario_files(scenario)
    for name, data in files.items():
        assert b"\r" not in data, name
        assert data.endswith(b"\n"), name
        if name.startswith("submissions/"):
            assert data.split(b"\n", 1)[0].decode() == ",".join(FORECAST_COLUMNS), name
    header = files["observations.csv"].split(b"\n", 1)[0].decode()
    assert header == "region,quantity,week_ending,value,reported"
    assert json.loads(files["scenario.json"]) == scenario.meta


def test_regenerate_removes_stale_submissions_and_cli_reports(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    first, again = tmp_path / "first", tmp_path / "again"
    stale = first / "submissions" / "gone-team" / "2026-01-05.csv"
    stale.parent.mkdir(parents=True)
    stale.write_text("old\n")
    written = regenerate_example_inputs(first)
    assert not stale.exists()
    assert not stale.parent.exists()
    assert len(written) == len(_tree(first))
    assert demo_main([str(again)]) == 0
    out = capsys.readouterr().out
    assert out.startswith(f"wrote {len(written)} files (")
    assert str(again) in out
    assert _tree(again) == _tree(first)


def test_public_names_resolve() -> None:
    for name in forebrief.demo.__all__:
        assert getattr(forebrief.demo, name) is not None


# --- the invented setting ------------------------------------------------------------------------


def test_meta_describes_an_invented_jurisdiction(scenario: forebrief.demo.Scenario) -> None:
    meta = scenario.meta
    regions = {r["id"]: r for r in meta["regions"]}
    total = meta["total_region"]
    assert 6 <= len(regions) - 1 <= 10
    assert total in regions
    assert regions[total]["population"] == sum(
        r["population"] for rid, r in regions.items() if rid != total
    )
    teams = [t["id"] for t in meta["teams"]]
    assert 8 <= len(teams) <= 12
    assert len(set(teams)) == len(teams)
    for item in [*meta["regions"], *meta["quantities"], *meta["teams"]]:
        assert ID_PATTERN.match(item["id"]), item["id"]
        assert item["name"][:1].isupper(), item["name"]  # display names start capitalised
    assert all(t["description"] for t in meta["teams"])
    assert [q["id"] for q in meta["quantities"]] == ["admissions", "deaths"]
    assert all(q["unit"] for q in meta["quantities"])
    pairs = {(t["region"], t["quantity"]) for t in meta["thresholds"]}
    assert pairs == {(r, q["id"]) for r in regions for q in meta["quantities"]}
    assert meta["levels"] == ["0.025", "0.05", "0.1", "0.25", "0.5", "0.75", "0.9", "0.95", "0.975"]
    assert set(CM_LEVELS) <= {float(x) for x in meta["levels"]}
    # every team in the metadata submits something, and nobody else does
    submitted = set(scenario.submissions["model"]) | {m for m, _ in scenario.malformed}
    assert submitted == set(teams)


def test_some_regions_come_close_to_their_admissions_line(
    scenario: forebrief.demo.Scenario,
) -> None:
    peaks = scenario.truth.groupby(["region", "quantity"])["value"].max()
    ratios = [
        peaks[(t["region"], t["quantity"])] / t["value"]
        for t in scenario.meta["thresholds"]
        if t["quantity"] == "admissions"
    ]
    assert sum(r >= 0.85 for r in ratios) >= 2  # close to or above the line
    assert sum(r < 0.85 for r in ratios) >= 1  # and some stay well clear


def test_season_weeks_end_on_saturdays(scenario: forebrief.demo.Scenario) -> None:
    weeks = pd.DatetimeIndex(sorted(scenario.truth["week_ending"].unique()))
    assert len(weeks) >= 30
    assert weeks[-1] == LAST_WEEK
    assert set(weeks.day_of_week) == {5}
    assert set(np.diff(weeks.values).astype("timedelta64[D]").astype(int)) == {7}
    assert pd.Timestamp(scenario.meta["season"]["last_week_ending"]) == LAST_WEEK


def test_whole_jurisdiction_is_the_sum_of_the_regions(scenario: forebrief.demo.Scenario) -> None:
    total = scenario.meta["total_region"]
    truth = scenario.truth
    summed = truth[truth["region"] != total].groupby(["quantity", "week_ending"])["value"].sum()
    own = truth[truth["region"] == total].set_index(["quantity", "week_ending"])["value"]
    pd.testing.assert_series_equal(own.sort_index(), summed.sort_index(), check_names=False)
    # and as published: on every report date, the total as-of equals the sum of regions as-of
    obs = scenario.observations
    for day in pd.to_datetime(["2026-10-12", "2026-10-19", "2026-11-30"]):
        seen = obs[obs["reported"] <= day].sort_values("reported")
        latest = seen.groupby(["region", "quantity", "week_ending"])["value"].last().reset_index()
        parts = latest[latest["region"] != total].groupby(["quantity", "week_ending"])["value"]
        whole = latest[latest["region"] == total].set_index(["quantity", "week_ending"])["value"]
        pd.testing.assert_series_equal(
            whole.sort_index(), parts.sum().sort_index(), check_names=False
        )


# --- reporting vintages --------------------------------------------------------------------------


def test_vintages_rise_and_settle_on_the_truth(scenario: forebrief.demo.Scenario) -> None:
    obs = scenario.observations
    assert set(obs["reported"].dt.day_of_week) == {0}  # published on Mondays
    assert obs["reported"].max() == LAST_ISSUED
    assert not obs.duplicated(["region", "quantity", "week_ending", "reported"]).any()
    truth = scenario.truth.set_index(["region", "quantity", "week_ending"])["value"]
    n_settled = 0
    for key, group in obs.groupby(["region", "quantity", "week_ending"]):
        group = group.sort_values("reported")
        values = group["value"].to_numpy()
        assert (np.diff(values) >= 0).all(), key  # later reports are never lower
        assert values.max() <= truth[key], key
        first = group["reported"].iloc[0]
        assert first == key[2] + pd.Timedelta(days=2), key  # first report on the next Monday
        assert len(group) <= 4, key  # completed within 1-3 further reports
        if key[2] <= LAST_WEEK - pd.Timedelta(weeks=3):
            assert values[-1] == truth[key], key  # settled weeks end on the truth
            n_settled += 1
    assert n_settled > 0.8 * len(truth)


def test_first_reports_are_incomplete_and_the_holiday_week_more_so(
    scenario: forebrief.demo.Scenario,
) -> None:
    obs = scenario.observations
    holiday = pd.Timestamp(scenario.meta["holiday"]["week_ending"])
    first = obs.sort_values("reported").groupby(["region", "quantity", "week_ending"]).first()
    truth = scenario.truth.set_index(["region", "quantity", "week_ending"])["value"]
    share = (first["value"] / truth.reindex(first.index)).where(truth.reindex(first.index) >= 100)
    share = share.dropna()
    weeks = share.index.get_level_values("week_ending")
    ordinary, at_holiday = share[weeks != holiday], share[weeks == holiday]
    assert len(ordinary) > 50
    assert len(at_holiday) >= 3
    # common practice, no source: first reports 75-90 % complete (floor rounding takes a little)
    assert ordinary.between(0.74, 0.90).all()
    assert at_holiday.between(0.48, 0.63).all()
    assert at_holiday.max() < ordinary.min()
    # the holiday week is revised up later
    later = obs[obs["week_ending"] == holiday].groupby(["region", "quantity"])["value"].max()
    earliest = obs[obs["week_ending"] == holiday].groupby(["region", "quantity"])["value"].min()
    assert (later > earliest).all()


# --- submissions ---------------------------------------------------------------------------------


def test_every_clean_submission_is_complete_and_ordered(scenario: forebrief.demo.Scenario) -> None:
    sub = scenario.submissions
    assert list(sub.columns) == list(FORECAST_COLUMNS)
    regions = {r["id"] for r in scenario.meta["regions"]}
    assert set(sub["issued"].dt.day_of_week) == {0}
    assert set(sub["week_ending"].dt.day_of_week) == {5}
    assert sub["issued"].max() == LAST_ISSUED
    assert (sub["value"] >= 0).all()
    assert np.allclose(sub["value"], sub["value"].round(1))
    days = (sub["week_ending"] - sub["issued"]).dt.days.to_numpy()
    horizon = np.ceil(days / 7).astype(int)
    per_file = len(regions) * 2 * 4 * len(LEVELS)
    for (model, issued), group in sub.groupby(["model", "issued"]):
        assert set(horizon[group.index]) == {1, 2, 3, 4}, (model, issued)
        assert set(group["region"]) == regions
        assert set(group["quantity"]) == {"admissions", "deaths"}
        assert len(group) == per_file, (model, issued)
        assert not group.duplicated(["region", "quantity", "week_ending", "level"]).any()
    # rows are sorted by forecast then level, so each block of 9 rows is one forecast
    key = sub[["model", "issued", "region", "quantity", "week_ending"]]
    blocks = key.to_numpy().reshape(-1, len(LEVELS), key.shape[1])
    assert (blocks == blocks[:, :1, :]).all()
    levels = sub["level"].to_numpy().reshape(-1, len(LEVELS))
    assert (levels == np.array(LEVELS)).all()
    values = sub["value"].to_numpy().reshape(-1, len(LEVELS))
    assert (np.diff(values, axis=1) >= 0).all()  # quantiles never cross
    assert (np.diff(values, axis=1) > 0).any(axis=1).mean() > 0.99  # and are not flat
    # the final issue date's targets are all in the future
    final = sub[sub["issued"] == LAST_ISSUED]
    assert (final["week_ending"] > LAST_WEEK).all()


def test_issue_plans_skipper_and_new_entrant(scenario: forebrief.demo.Scenario) -> None:
    issued = scenario.submissions.groupby("model")["issued"].unique()
    all_dates = pd.DatetimeIndex(sorted(scenario.submissions["issued"].unique()))
    assert len(all_dates) >= 16
    assert all_dates[-1] == LAST_ISSUED
    steady = _team("well calibrated")
    assert len(issued[steady]) == len(all_dates)
    skipper = pd.DatetimeIndex(issued[_team("skips")])
    assert 2 <= len(all_dates) - len(skipper) <= 6
    assert skipper.min() == all_dates[0]
    assert skipper.max() == all_dates[-1]
    newcomer = pd.DatetimeIndex(issued[_team("new entrant")])
    assert 2 <= len(newcomer) <= 3
    assert newcomer.min() >= LAST_ISSUED - pd.Timedelta(weeks=2)


def test_malformed_file_has_each_fault_and_nothing_else_wrong(
    scenario: forebrief.demo.Scenario,
) -> None:
    assert len(scenario.malformed) == 1
    (model, issued), text = next(iter(scenario.malformed.items()))
    assert model == _team("one malformed")
    rows = list(csv.reader(io.StringIO(text)))
    assert rows[0] == list(FORECAST_COLUMNS)
    body = rows[1:]
    assert {r[0] for r in body} == {model}
    assert {r[3] for r in body} == {issued}

    def number(x: str) -> float | None:
        try:
            return float(x)
        except ValueError:
            return None

    words = [(n + 2, r) for n, r in enumerate(body) if number(r[6]) is None]
    assert [r[6] for _, r in words] == ["twelve"]
    duplicated = [line for line, k in Counter(map(tuple, body)).items() if k > 1]
    assert len(duplicated) == 1
    forecasts: dict[tuple[str, str, str], list[tuple[float, float | None]]] = {}
    for r in body:
        forecasts.setdefault((r[1], r[2], r[4]), []).append((float(r[5]), number(r[6])))
    missing = [k for k, v in forecasts.items() if {lv for lv, _ in v} != set(LEVELS)]
    crossing = [
        k
        for k, v in forecasts.items()
        if all(x is not None for _, x in v)
        and any(b < a for (_, a), (_, b) in zip(sorted(v), sorted(v)[1:], strict=False))
    ]
    assert len(missing) == 1
    assert len(crossing) == 1
    faulty = {missing[0], crossing[0], tuple(duplicated[0][i] for i in (1, 2, 4))}
    faulty.add(tuple(words[0][1][i] for i in (1, 2, 4)))
    assert len(faulty) == 4  # four different forecasts
    # the metadata's line numbers point at the faults (line 1 is the header)
    notes = {f["fault"]: f for f in scenario.meta["malformed_files"][0]["faults"]}
    assert notes["value is text"]["lines"] == [words[0][0]]
    for line in notes["duplicated row"]["lines"]:
        assert tuple(rows[line - 1]) == duplicated[0]
    assert (notes["missing level"]["region"], notes["missing level"]["quantity"]) == missing[0][:2]
    # every other forecast in the file is clean, and the team's other weeks are clean files
    clean = [k for k in forecasts if k not in faulty]
    assert len(clean) == len(forecasts) - 4
    for k in clean:
        values = [x for _, x in sorted(forecasts[k])]
        assert len(values) == len(LEVELS)
        assert values == sorted(values)
    others = scenario.submissions[scenario.submissions["model"] == model]["issued"].unique()
    assert pd.Timestamp(issued) not in set(others)
    assert len(others) == scenario.submissions["issued"].nunique() - 1


# --- the wave's shape ----------------------------------------------------------------------------


def _series(frame: pd.DataFrame, region: str, quantity: str) -> pd.Series:
    rows = frame[(frame["region"] == region) & (frame["quantity"] == quantity)]
    return rows.set_index("week_ending")["value"].sort_index()


def test_the_wave_rises_and_falls_inside_the_rated_weeks(
    scenario: forebrief.demo.Scenario,
) -> None:
    total = scenario.meta["total_region"]
    first_rated = LAST_WEEK - pd.Timedelta(weeks=RATING_WEEKS - 1)
    assert pd.Timestamp(scenario.meta["season"]["rated_weeks"]["first_week_ending"]) == first_rated
    for region in [r["id"] for r in scenario.meta["regions"]]:
        for quantity in ("admissions", "deaths"):
            truth = _series(scenario.truth, region, quantity)
            peak = truth.idxmax()
            # rises into the peak and falls after it, all inside the rated weeks
            assert first_rated < peak <= LAST_WEEK - pd.Timedelta(weeks=4), (region, quantity)
            assert truth[first_rated] < 0.8 * truth[peak], (region, quantity)
            assert truth[LAST_WEEK] < 0.8 * truth[peak], (region, quantity)
            meta_peak = scenario.meta["wave"]["peak_week_ending"][quantity][region]
            assert pd.Timestamp(meta_peak) == peak
    # the whole jurisdiction's admissions peak 5-8 weeks before the last week and are falling
    # by about 10-20 % a week at the last issue date, next week included
    adm = _series(scenario.truth, total, "admissions")
    ahead = _series(scenario.truth_ahead, total, "admissions")
    weeks_before = (LAST_WEEK - adm.idxmax()).days // 7
    assert 5 <= weeks_before <= 8
    weekly = (adm[LAST_WEEK] / adm[LAST_WEEK - pd.Timedelta(weeks=3)]) ** (1 / 3) - 1
    assert -0.22 < weekly < -0.08
    assert adm[LAST_WEEK] < adm[LAST_WEEK - pd.Timedelta(weeks=1)]
    next_week = LAST_WEEK + pd.Timedelta(weeks=1)
    assert ahead[next_week] < adm[LAST_WEEK]
    assert (
        _series(scenario.truth_ahead, total, "deaths")[next_week]
        < _series(scenario.truth, total, "deaths")[LAST_WEEK]
    )
    # and in most regions
    falling = [
        _series(scenario.truth_ahead, r.id, "admissions")[next_week]
        < _series(scenario.truth, r.id, "admissions")[LAST_WEEK]
        for r in REGIONS
    ]
    assert sum(falling) >= len(REGIONS) - 2


def test_weeks_ahead_are_the_last_issue_targets_and_add_up(
    scenario: forebrief.demo.Scenario,
) -> None:
    ahead = scenario.truth_ahead
    final = scenario.submissions[scenario.submissions["issued"] == LAST_ISSUED]
    assert set(ahead["week_ending"]) == set(final["week_ending"])
    total = scenario.meta["total_region"]
    summed = ahead[ahead["region"] != total].groupby(["quantity", "week_ending"])["value"].sum()
    own = ahead[ahead["region"] == total].set_index(["quantity", "week_ending"])["value"]
    pd.testing.assert_series_equal(own.sort_index(), summed.sort_index(), check_names=False)


# --- the teams' designed behaviours are real properties against the complete counts -------------


@pytest.fixture(scope="module")
def rated(scenario: forebrief.demo.Scenario, scored: pd.DataFrame) -> pd.DataFrame:
    """Forecasts of the rated weeks' targets (the last 12), regions only, all horizons."""
    first_rated = LAST_WEEK - pd.Timedelta(weeks=RATING_WEEKS - 1)
    keep = (scored["week_ending"] >= first_rated) & (
        scored["region"] != scenario.meta["total_region"]
    )
    return scored[keep]


def _coverage(frame: pd.DataFrame, lo: float, hi: float) -> float:
    return float(((frame["truth"] >= frame[lo]) & (frame["truth"] <= frame[hi])).mean())


def _below_median(frame: pd.DataFrame) -> float:
    return float((frame["truth"] < frame[0.5]).mean())


def test_meta_names_each_teams_designed_verdict(scenario: forebrief.demo.Scenario) -> None:
    verdicts = {t["id"]: t["expected_verdict"] for t in scenario.meta["teams"]}
    assert set(verdicts.values()) <= {*VERDICTS, "lags"}
    assert verdicts[_team("well calibrated")] == "reliable"
    assert verdicts[_team("overconfident")] == "overconfident"
    assert verdicts[_team("underconfident")] == "underconfident"
    assert verdicts[_team("biased high")] == "biased high"
    assert verdicts[_team("lags")] == "lags"
    assert verdicts[_team("new entrant")] == "not yet rated"


def test_the_calibrated_team_covers_the_nominal_share(rated: pd.DataFrame) -> None:
    honest = rated[rated["model"] == _team("well calibrated")]
    # Count each outcome (target week x region x quantity) once: the four horizons' forecasts of
    # one outcome share it, so they are not independent evidence.
    n = len(honest.drop_duplicates(["week_ending", "region", "quantity"]))
    assert n == RATING_WEEKS * len(REGIONS) * 2
    for (lo, hi), nominal in (((0.25, 0.75), 0.5), ((0.05, 0.95), 0.9)):
        # 95 % binomial band for n outcomes (scipy.stats.binom, reference library)
        low, high = binom.interval(0.95, n, nominal)
        assert low / n <= _coverage(honest, lo, hi) <= high / n, (lo, hi)
    low, high = binom.interval(0.95, n, 0.5)
    assert low / n <= _below_median(honest) <= high / n


def test_spread_teams_are_over_and_underconfident(rated: pd.DataFrame) -> None:
    by = dict(tuple(rated.groupby("model")))
    narrow, honest, wide = (
        by[_team("overconfident")],
        by[_team("well calibrated")],
        by[_team("underconfident")],
    )

    def rel_width(f: pd.DataFrame) -> float:
        return float(((f[0.95] - f[0.05]) / (f[0.5] + 1.0)).median())

    assert rel_width(narrow) < rel_width(honest) < rel_width(wide)
    assert _coverage(narrow, 0.05, 0.95) < 0.7
    assert _coverage(wide, 0.25, 0.75) > 0.75


def test_biased_team_sits_high(rated: pd.DataFrame) -> None:
    by = dict(tuple(rated.groupby("model")))
    assert _below_median(by[_team("biased high")]) > 0.75
    assert _below_median(by[_team("biased high")]) > _below_median(by[_team("well calibrated")])


def test_lagging_team_is_low_on_the_rise_and_high_on_the_fall(
    scenario: forebrief.demo.Scenario, rated: pd.DataFrame
) -> None:
    # the wave's direction at each target: weeks at least 2 before / after the series' peak
    truth = scenario.truth
    peaks = truth.loc[truth.groupby(["region", "quantity"])["value"].idxmax()]
    peak = peaks.set_index(["region", "quantity"])["week_ending"].rename("peak")
    frame = rated.join(peak, on=["region", "quantity"])
    weeks_from_peak = (frame["week_ending"] - frame["peak"]).dt.days // 7
    direction = np.where(weeks_from_peak <= -2, "rising", "")
    direction = np.where(weeks_from_peak >= 2, "falling", direction)
    log_err = np.log1p(frame[0.5]) - np.log1p(frame["truth"])
    mean_err = log_err.groupby([frame["model"], direction]).mean()
    late, honest = _team("lags"), _team("well calibrated")
    assert mean_err[(late, "rising")] < mean_err[(honest, "rising")] - 0.1
    assert mean_err[(late, "falling")] > mean_err[(honest, "falling")] + 0.1
    # and its median error moves against the wave's direction, target by target
    lagging = frame["model"] == late
    signed = np.where(direction == "rising", 1.0, np.where(direction == "falling", -1.0, np.nan))
    keep = lagging & ~np.isnan(signed)
    assert np.corrcoef(log_err[keep], signed[keep])[0, 1] < -0.5


def test_targets_are_the_four_saturdays_after_each_monday(
    scenario: forebrief.demo.Scenario,
) -> None:
    # issued on Monday D, targets end on D+5, D+12, D+19, D+26: horizons ceil(days / 7) = 1..4
    pairs = scenario.submissions.drop_duplicates(["issued", "week_ending"])
    for issued, week in zip(pairs["issued"], pairs["week_ending"], strict=True):
        horizon = math.ceil((week - issued).days / 7)
        assert 1 <= horizon <= 4
        assert week == issued + pd.Timedelta(days=7 * horizon - 2)
    assert len(pairs) == 4 * pairs["issued"].nunique()
