"""The back-test (forebrief.tables.backtest) and the ``forebrief backtest`` command.

Checks: relative WIS of the baseline is 1 by definition (Cramer et al. 2022, PNAS 119(15),
Methods: skill scaled by the baseline's); the information barrier (each date's ensemble uses
only what was known then, the issue's wording); each date's ensemble is the one
:func:`build_ensemble` gives for that date; and the documented tables. The data are the seeded
invented season of tests/test_ensemble.py (four teams, five regions, horizons 1-2, vintages).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from forebrief.app.workflow import load_inputs
from forebrief.errors import ConfigError
from forebrief.tables.backtest import backtest
from forebrief.tables.ensemble import EnsembleSettings, build_ensemble
from test_ensemble import Run, write_season

START = pd.Timestamp("2026-09-21")
END = pd.Timestamp("2026-11-09")
ISSUES = tuple(pd.date_range(START, END, freq="7D"))  # write_season issues weekly on Mondays
TEAMS = {"lanternfox", "mossgrove", "tidewick", "emberlark"}
METHODS = {"weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool"}


def season_tables(root: Path, **kwargs: object) -> tuple[pd.DataFrame, pd.DataFrame]:
    forecasts, obs = write_season(root, **kwargs)  # type: ignore[arg-type]
    inputs = load_inputs(forecasts, obs)
    assert not [p for p in inputs.problems if p.severity == "error"]
    return inputs.forecasts.table, inputs.observations.table


@pytest.fixture(scope="module")
def season(tmp_path_factory: pytest.TempPathFactory) -> tuple[pd.DataFrame, pd.DataFrame]:
    return season_tables(tmp_path_factory.mktemp("season"))


@pytest.fixture(scope="module")
def result(season: tuple[pd.DataFrame, pd.DataFrame]):  # type: ignore[no-untyped-def]
    forecasts, obs = season
    return backtest(forecasts, obs, start=START, end=END)


def test_every_issue_date_in_the_period_is_covered(result) -> None:  # type: ignore[no-untyped-def]
    assert result.issue_dates == ISSUES
    assert set(result.ensembles["issued"]) == set(ISSUES)
    assert set(result.weights_history["issued"]) == set(ISSUES)
    assert set(result.ensembles["model"]) == METHODS


def test_kinds_and_the_generated_baseline(result) -> None:  # type: ignore[no-untyped-def]
    s = result.scores
    kinds = s.groupby("model")["kind"].unique().map(tuple).to_dict()
    assert kinds == {
        **dict.fromkeys(METHODS, ("ensemble",)),
        **dict.fromkeys(TEAMS, ("member",)),
        "persistence": ("baseline",),
    }
    assert result.baseline == "persistence"
    assert any("baseline 'persistence' generated" in n for n in result.notes)
    assert set(s["horizon"]) == {1, 2}
    # Cramer et al. 2022 (Methods): skill scaled by the baseline's, so the baseline's is 1
    base = s.loc[s["kind"] == "baseline", "relative_wis"]
    assert len(base) == 2
    np.testing.assert_allclose(base, 1.0, rtol=1e-12)
    assert s["relative_wis"].notna().all()
    assert {
        "model",
        "quantity",
        "horizon",
        "kind",
        "wis",
        "relative_wis",
        "calibration",
        "information",
        "within_50",
        "within_90",
    } <= set(s.columns)
    assert "weight" not in s.columns


def test_weights_history_has_one_row_per_date_member_quantity_horizon(
    result,
    season: tuple[pd.DataFrame, pd.DataFrame],  # type: ignore[no-untyped-def]
) -> None:
    forecasts, _ = season
    w = result.weights_history
    assert not w.duplicated(["issued", "model", "quantity", "horizon"]).any()
    assert {"issued", "model", "weight", "alpha"} <= set(w.columns)
    assert "persistence" not in set(w["model"])
    expected = forecasts.loc[forecasts["issued"].isin(ISSUES)].drop_duplicates(
        ["issued", "model", "quantity", "horizon"]
    )
    assert len(w) == len(expected)
    sums = w.groupby(["issued", "quantity", "horizon"])["weight"].sum()
    np.testing.assert_allclose(sums, 1.0)


def test_each_date_is_the_ensemble_of_that_date(
    result,
    season: tuple[pd.DataFrame, pd.DataFrame],  # type: ignore[no-untyped-def]
) -> None:
    # what the back-test scores for D is what `forebrief ensemble --issued D` would have given
    forecasts, obs = season
    for d in (ISSUES[0], ISSUES[4], ISSUES[-1]):
        alone = build_ensemble(forecasts, obs, issued=d)
        got = (
            result.ensembles.loc[result.ensembles["issued"] == d]
            .rename(columns={"model": "method"})
            .reset_index(drop=True)
        )
        pd.testing.assert_frame_equal(got[alone.ensemble.columns], alone.ensemble, check_exact=True)
        wh = result.weights_history
        pd.testing.assert_frame_equal(
            wh.loc[wh["issued"] == d].reset_index(drop=True), alone.weights, check_exact=True
        )


def test_scored_on_the_items_observed_with_the_latest_vintage(
    result,
    season: tuple[pd.DataFrame, pd.DataFrame],  # type: ignore[no-untyped-def]
) -> None:
    _, obs = season
    latest = obs.sort_values("reported").drop_duplicates(
        ["region", "quantity", "week_ending"], keep="last"
    )
    items = result.by_item.merge(latest, on=["region", "quantity", "week_ending"])
    assert len(items) == len(result.by_item)
    np.testing.assert_array_equal(items["observed"], items["value"])
    ens = result.by_item.loc[result.by_item["model"].isin(METHODS)]
    # every target of every issue date that has been observed, once per method
    n_targets = len(
        result.ensembles.drop_duplicates(
            ["model", "region", "quantity", "week_ending", "horizon"]
        ).merge(latest[["region", "quantity", "week_ending"]])
    )
    assert len(ens) == n_targets


def test_later_data_does_not_change_earlier_ensembles(
    tmp_path: Path,
    result,  # type: ignore[no-untyped-def]
) -> None:
    # the issue's wording: changing data after an issue date does not change that date's rows.
    # Every observation dated on or after the cut is tripled, and a wild revision reported
    # after the cut is added for a week before it.
    cut = ISSUES[3]
    forecasts, obs = season_tables(tmp_path, scale_from=cut, factor=3.0)
    wild = pd.DataFrame(
        {
            "region": ["alderhook"],
            "quantity": ["admissions"],
            "week_ending": [cut - pd.Timedelta(days=2)],
            "value": [4321.0],
            "reported": [cut + pd.Timedelta(days=1)],
        }
    ).astype({"week_ending": "datetime64[ns]", "reported": "datetime64[ns]"})
    obs = pd.concat([obs, wild.astype(obs.dtypes.to_dict())], ignore_index=True)
    changed = backtest(forecasts, obs, start=START, end=END)
    for name in ("ensembles", "weights_history"):
        a, b = getattr(result, name), getattr(changed, name)
        early_a = a.loc[a["issued"] <= cut].reset_index(drop=True)
        early_b = b.loc[b["issued"] <= cut].reset_index(drop=True)
        pd.testing.assert_frame_equal(early_a, early_b, check_exact=True)
        late_a = a.loc[a["issued"] > cut, "value" if name == "ensembles" else "weight"]
        late_b = b.loc[b["issued"] > cut, "value" if name == "ensembles" else "weight"]
        assert not np.array_equal(late_a.to_numpy(), late_b.to_numpy())


def test_include_baseline_makes_it_a_member(season: tuple[pd.DataFrame, pd.DataFrame]) -> None:
    forecasts, obs = season
    res = backtest(
        forecasts, obs, start=ISSUES[-2], end=END, settings=EnsembleSettings(include_baseline=True)
    )
    assert "persistence" in set(res.weights_history["model"])
    s = res.scores
    assert set(s.loc[s["model"] == "persistence", "kind"]) == {"baseline"}
    # a member now, so each date's ensemble is build_ensemble's with the generated baseline
    assert set(res.ensembles["issued"]) == set(ISSUES[-2:])


def test_bad_periods_are_refused(season: tuple[pd.DataFrame, pd.DataFrame]) -> None:
    forecasts, obs = season
    with pytest.raises(ConfigError, match="--to 2026-09-01 is before --from 2026-10-01"):
        backtest(forecasts, obs, start=pd.Timestamp("2026-10-01"), end=pd.Timestamp("2026-09-01"))
    with pytest.raises(ConfigError, match="no member forecast is issued between 2027-01-04"):
        backtest(forecasts, obs, start=pd.Timestamp("2027-01-04"), end=pd.Timestamp("2027-02-01"))


# --------------------------------------------------------------------------------------------
# the command line


def test_backtest_command(tmp_path: Path, run: Run) -> None:
    forecasts, obs = write_season(tmp_path)
    code, out, err = run(
        "backtest",
        "--forecasts",
        forecasts,
        "--observations",
        obs,
        "--from",
        "2026-10-19",
        "--to",
        "2026-11-09",
        "--out",
        tmp_path / "out",
    )
    assert code == 0, err
    for name in (
        "backtest_scores.csv",
        "weights_history.csv",
        "backtest_by_item.csv",
        "excluded.csv",
    ):
        assert (tmp_path / "out" / name).is_file()
    scores = pd.read_csv(tmp_path / "out" / "backtest_scores.csv")
    assert list(scores.columns[:4]) == ["quantity", "horizon", "model", "kind"]
    assert set(scores["kind"]) == {"ensemble", "member", "baseline"}
    np.testing.assert_allclose(scores.loc[scores["kind"] == "baseline", "relative_wis"], 1.0)
    history = pd.read_csv(tmp_path / "out" / "weights_history.csv")
    assert set(history["issued"]) == {"2026-10-19", "2026-10-26", "2026-11-02", "2026-11-09"}
    assert "Back-test: ensembles against the baseline" in out
    assert "back-tested 4 issue date(s)" in err


@pytest.mark.parametrize(
    ("start", "end", "message"),
    [
        ("2026-11-09", "2026-10-19", "--to 2026-10-19 is before --from 2026-11-09"),
        ("2027-03-01", "2027-04-01", "no member forecast is issued between 2027-03-01"),
    ],
)
def test_backtest_command_refuses_bad_periods(
    tmp_path: Path,
    run: Run,
    start: str,
    end: str,
    message: str,
) -> None:
    forecasts, obs = write_season(tmp_path)
    code, _, err = run(
        "backtest",
        "--forecasts",
        forecasts,
        "--observations",
        obs,
        "--from",
        start,
        "--to",
        end,
        "--out",
        tmp_path / "out",
    )
    assert code == 2
    assert message in err
    assert "Traceback" not in err
