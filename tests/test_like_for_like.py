"""Like-for-like relative WIS: each pair of models is compared on the levels both give.

Outside references:

- WIS from its definition, written out here in plain numpy: WIS = (1 / (K + 1/2)) (1/2 |y - m|
  + sum_k (alpha_k / 2) IS_alpha_k), IS_alpha = (u - l) + (2 / alpha)(l - y)+ + (2 / alpha)(y -
  u)+ (Bracher, Ray, Gneiting & Reich 2021, PLOS Comput Biol 17(2): e1008618, eq. 2 and the
  WIS definition that follows it); each hand value is cross-checked with
  ``scoringrules.weighted_interval_score`` (numba backend, weights 1/2 and alpha_k / 2) and
  ``scoringrules.crps_quantile`` (twice the mean pinball loss, equal to WIS on a symmetric
  level set with the median, same paper).
- Relative skill (Cramer et al. 2022, PNAS 119(15): e2113561119, Methods): theta_ab = mean WIS
  of a / mean WIS of b over their common items, theta_a = geometric mean over b (theta_aa =
  1), scaled by the baseline's theta. Bracher et al. (2021) warn that WIS from different
  quantile sets are not comparable, hence each pair on its common levels.
- Check value R1 (Cramer et al. 2022, Methods, worked by hand in tests/test_relative.py):
  S = {A: [10, 20, 30, 40], B: [12, 18, -, -], base: [20, 20, 40, 40]} -> A 0.8046,
  B 0.7768, base 1.
- Cooke (1991), Experts in Uncertainty, ch. 12: weights C I 1{C >= alpha}, normalised.

The forecasts are invented for these checks.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import numpy.testing as npt
import pandas as pd
import pytest
import scoringrules as sr
from scipy.stats import norm

from forebrief.app.config import config_from_dict
from forebrief.app.workflow import load_inputs
from forebrief.cli import main
from forebrief.core import relative_skill, relative_skill_pairwise
from forebrief.tables.ensemble import with_baseline
from forebrief.tables.schema import STANDARD_LEVELS
from forebrief.tables.scoring import ScoreSettings, score_forecasts

SEVEN = (0.025, 0.1, 0.25, 0.5, 0.75, 0.9, 0.975)
NINE = (0.025, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.975)  # with the Classical Model levels
ELEVEN = (*NINE[:4], 0.4, 0.5, 0.6, *NINE[5:])
NO_MEDIAN = (0.05, 0.25, 0.75, 0.95)
ISSUED = pd.Timestamp("2031-03-03")  # a Monday
WEEK = pd.Timestamp("2031-03-08")  # the Saturday after: horizon 1
AS_OF = pd.Timestamp("2031-03-10")
BASE = "yardstick"


# --------------------------------------------------------------------------------------------
# the hand computation


def hand_wis(y: float, levels: tuple[float, ...], values: dict[float, float]) -> float:
    """WIS from its definition (Bracher et al. 2021): central intervals and the median."""
    lower = sorted(t for t in levels if t < 0.5 and any(abs(1 - t - u) < 1e-9 for u in levels))
    total = 0.0
    for t in lower:
        alpha = 2 * t
        lo, up = values[t], values[round(1 - t, 9)]
        interval = (up - lo) + 2 / alpha * max(lo - y, 0.0) + 2 / alpha * max(y - up, 0.0)
        total += alpha / 2 * interval
    total += 0.5 * abs(y - values[0.5])
    return total / (len(lower) + 0.5)


def hand_relative(
    forecasts: dict[tuple[str, str], dict[float, float]],
    observed: dict[str, float],
    baseline: str,
    *,
    common_levels: bool = True,
) -> dict[str, float]:
    """Relative WIS by the pairwise definition, every mean written out item by item.

    ``forecasts[(model, region)]`` maps level -> quantile. With ``common_levels`` each pair's
    WIS are taken on the levels both give (items without a common median are not compared);
    without it, on each model's own levels (the comparison this change replaces).
    """
    models = sorted({m for m, _ in forecasts})
    regions = sorted(observed)
    theta = {}
    for a in models:
        logs = []
        for b in models:
            sum_a = sum_b = 0.0
            n = 0
            for r in regions:
                if (a, r) not in forecasts or (b, r) not in forecasts:
                    continue
                qa, qb = forecasts[(a, r)], forecasts[(b, r)]
                if 0.5 not in qa or 0.5 not in qb:
                    continue  # no common median: not compared
                if common_levels:
                    both = tuple(sorted(set(qa) & set(qb)))
                    la = lb = both
                else:
                    la, lb = tuple(sorted(qa)), tuple(sorted(qb))
                sum_a += hand_wis(observed[r], la, qa)
                sum_b += hand_wis(observed[r], lb, qb)
                n += 1
            if n:
                logs.append(np.log((sum_a / n) / (sum_b / n)))
        theta[a] = float(np.exp(np.mean(logs)))
    return {m: theta[m] / theta[baseline] for m in models}


# --------------------------------------------------------------------------------------------
# the invented forecasts


def _rows(
    model: str,
    region: str,
    quantiles: dict[float, float],
    *,
    week_ending: pd.Timestamp = WEEK,
    issued: pd.Timestamp = ISSUED,
) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "model": model,
            "region": region,
            "quantity": "admissions",
            "issued": issued,
            "week_ending": week_ending,
            "level": list(quantiles),
            "value": list(quantiles.values()),
            "horizon": int(np.ceil((week_ending - issued).days / 7)),
        }
    )


def _quantiles(levels: tuple[float, ...], centre: float, spread: float) -> dict[float, float]:
    """Normal quantiles floored at 0 (counts)."""
    return {t: max(0.0, float(centre + spread * norm.ppf(t))) for t in levels}


def _obs(observed: dict[str, float]) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "region": list(observed),
            "quantity": "admissions",
            "week_ending": WEEK,
            "value": list(observed.values()),
            "reported": pd.NaT,
        }
    ).astype({"reported": "datetime64[ns]"})


def _panel(
    seed: int,
    *,
    teams: dict[str, tuple[float, ...]],
    n_regions: int = 8,
    base_levels: tuple[float, ...] = STANDARD_LEVELS,
) -> tuple[dict[tuple[str, str], dict[float, float]], dict[str, float]]:
    """Teams on their own level sets and a baseline; a team skips some regions."""
    rng = np.random.default_rng(seed)
    forecasts: dict[tuple[str, str], dict[float, float]] = {}
    observed = {}
    for i in range(n_regions):
        region = f"dale-{i:02d}"
        y = float(rng.integers(30, 300))
        observed[region] = y
        forecasts[(BASE, region)] = _quantiles(base_levels, y * rng.uniform(0.7, 1.3), 0.4 * y)
        for k, (team, levels) in enumerate(teams.items()):
            if k == 1 and i % 3 == 0:
                continue  # missing items make the pairwise definition matter
            centre = y * np.exp(rng.normal(0.1 * k, 0.15))
            forecasts[(team, region)] = _quantiles(levels, centre, (0.1 + 0.1 * k) * y)
    return forecasts, observed


def _table(forecasts: dict[tuple[str, str], dict[float, float]]) -> pd.DataFrame:
    return pd.concat([_rows(m, r, q) for (m, r), q in forecasts.items()], ignore_index=True)


def _engine_relative(
    forecasts: dict[tuple[str, str], dict[float, float]], observed: dict[str, float]
) -> pd.Series:
    res = score_forecasts(
        _table(forecasts), _obs(observed), as_of=AS_OF, settings=ScoreSettings(baseline=BASE)
    )
    return res.by_model.set_index("model")["relative_wis"]


TEAMS = {
    "team-ash": SEVEN,
    "team-birch": SEVEN,
    "team-cedar": SEVEN,
    "team-dogwood": STANDARD_LEVELS,
}


# --------------------------------------------------------------------------------------------
# checks


def test_hand_wis_matches_scoringrules() -> None:
    # Bracher et al. (2021) WIS, written out by hand, against scoringrules' two forms.
    rng = np.random.default_rng(3)
    for levels in (SEVEN, STANDARD_LEVELS):
        ci_lower = [t for t in levels if t < 0.5]
        alpha = np.array([2 * t for t in ci_lower])
        for _ in range(5):
            y = float(rng.uniform(0, 200))
            q = _quantiles(levels, float(rng.uniform(20, 180)), float(rng.uniform(5, 50)))
            got = hand_wis(y, levels, q)
            lower = np.array([q[t] for t in ci_lower])
            upper = np.array([q[round(1 - t, 9)] for t in ci_lower])
            ref = sr.weighted_interval_score(y, q[0.5], lower, upper, alpha, backend="numba")
            assert got == pytest.approx(float(ref), rel=1e-12)
            pinball = sr.crps_quantile(y, np.array(list(q.values())), np.array(levels))
            assert got == pytest.approx(float(pinball), rel=1e-12)


def test_teams_on_seven_levels_and_a_baseline_on_23_match_the_hand_computation() -> None:
    forecasts, observed = _panel(11, teams=TEAMS)
    got = _engine_relative(forecasts, observed)
    want = hand_relative(forecasts, observed, BASE)
    for model, value in want.items():
        assert got[model] == pytest.approx(value, rel=1e-9, abs=1e-9), model
    assert got[BASE] == pytest.approx(1.0)
    # the comparison on each model's own levels gives other numbers: the check has teeth
    old = hand_relative(forecasts, observed, BASE, common_levels=False)
    assert max(abs(old[m] - want[m]) for m in want) > 1e-3
    # a single common-level WIS by hand against scoringrules (numba backend)
    y, q = observed["dale-01"], forecasts[(BASE, "dale-01")]
    ci = [t for t in SEVEN if t < 0.5]
    ref = sr.weighted_interval_score(
        y,
        q[0.5],
        np.array([q[t] for t in ci]),
        np.array([q[round(1 - t, 9)] for t in ci]),
        np.array([2 * t for t in ci]),
        backend="numba",
    )
    assert hand_wis(y, SEVEN, q) == pytest.approx(float(ref), rel=1e-12)


def test_own_levels_scores_are_unchanged_in_the_item_table() -> None:
    # scores_by_item keeps each forecast's WIS on its own levels (Bracher et al. 2021)
    forecasts, observed = _panel(12, teams=TEAMS)
    res = score_forecasts(
        _table(forecasts), _obs(observed), as_of=AS_OF, settings=ScoreSettings(baseline=BASE)
    )
    for row in res.by_item.itertuples(index=False):
        q = forecasts[(row.model, row.region)]
        assert row.wis == pytest.approx(
            hand_wis(observed[row.region], tuple(sorted(q)), q), rel=1e-12
        )


def test_identical_level_sets_reduce_to_the_old_result() -> None:
    # Every model on the same 7 levels: relative WIS is the pairwise definition on own WIS
    # (relative_skill, the old computation) and the hand value.
    forecasts, observed = _panel(
        13, teams={"team-ash": SEVEN, "team-birch": SEVEN}, base_levels=SEVEN
    )
    res = score_forecasts(
        _table(forecasts), _obs(observed), as_of=AS_OF, settings=ScoreSettings(baseline=BASE)
    )
    wis = res.by_item.pivot(index="region", columns="model", values="wis")
    models = list(wis.columns)
    old = relative_skill(wis.to_numpy().T, baseline=models.index(BASE)).relative
    got = res.by_model.set_index("model")["relative_wis"]
    npt.assert_allclose(got[models].to_numpy(), old, rtol=1e-12)
    want = hand_relative(forecasts, observed, BASE)
    npt.assert_allclose(got[models].to_numpy(), [want[m] for m in models], rtol=1e-9)


def test_pairwise_core_gives_the_r1_check_value() -> None:
    # R1 (Cramer et al. 2022, Methods): sums over each pair's common items by hand.
    s = np.array([[10, 20, 30, 40.0], [12, 18, np.nan, np.nan], [20, 20, 40, 40.0]])
    ok = ~np.isnan(s)
    own = np.array([[np.nansum(s[a][ok[a] & ok[b]]) for b in range(3)] for a in range(3)])
    common = np.array([[float((ok[a] & ok[b]).sum()) for b in range(3)] for a in range(3)])
    got = relative_skill_pairwise(own, own.T, common, baseline=2)
    npt.assert_allclose(got.relative, [0.8046, 0.7768, 1.0], atol=5e-5)
    npt.assert_allclose(got.relative, relative_skill(s, baseline=2).relative, rtol=1e-12)


def test_pairwise_core_leaves_out_a_pair_not_compared() -> None:
    # common = 0 for (A, B): theta_A is the geometric mean over A and base only.
    own = np.array([[2.0, 5.0, 3.0], [7.0, 4.0, 8.0], [6.0, 9.0, 6.0]])
    common = np.array([[2.0, 0.0, 2.0], [0.0, 3.0, 3.0], [2.0, 3.0, 4.0]])
    got = relative_skill_pairwise(own, own.T, common, baseline=2)
    theta_a = np.exp((0 + np.log(3 / 6)) / 2)
    theta_b = np.exp((0 + np.log(8 / 9)) / 2)
    theta_base = np.exp((np.log(6 / 3) + np.log(9 / 8) + 0) / 3)
    npt.assert_allclose(got.theta, [theta_a, theta_b, theta_base], rtol=1e-12)
    npt.assert_allclose(got.relative, got.theta / theta_base, rtol=1e-12)


def test_a_pair_with_no_common_median_is_left_out() -> None:
    # A team without the median is compared with no one: its relative WIS is empty and the
    # others' equal those of the panel without it (left out of both geometric means).
    forecasts, observed = _panel(14, teams={"team-ash": SEVEN, "team-birch": SEVEN})
    with_it = dict(forecasts)
    for r in observed:
        with_it[("team-elm", r)] = _quantiles(NO_MEDIAN, observed[r], 10.0)
    got = _engine_relative(with_it, observed)
    without = _engine_relative(forecasts, observed)
    assert np.isnan(got["team-elm"])
    for m in without.index:
        assert got[m] == pytest.approx(without[m], rel=1e-12)
    # A team with the median on some items only is compared on those items.
    mixed = dict(forecasts)
    for i, r in enumerate(observed):
        mixed[("team-fir", r)] = _quantiles(SEVEN if i < 5 else NO_MEDIAN, observed[r], 12.0)
    got = _engine_relative(mixed, observed)
    want = hand_relative(mixed, observed, BASE)
    for model, value in want.items():
        assert got[model] == pytest.approx(value, rel=1e-9), model


def test_the_generated_baseline_gives_the_members_levels() -> None:
    d1, d2, d3 = ISSUED, ISSUED + pd.Timedelta(days=7), ISSUED + pd.Timedelta(days=14)
    members = pd.concat(
        [
            _rows(
                "team-ash",
                "dale-00",
                _quantiles(SEVEN, 50, 5),
                issued=d1,
                week_ending=d1 + pd.Timedelta(days=5),
            ),
            _rows(
                "team-ash",
                "dale-00",
                _quantiles(SEVEN, 50, 5),
                issued=d2,
                week_ending=d2 + pd.Timedelta(days=5),
            ),
            _rows(
                "team-birch",
                "dale-00",
                _quantiles(NO_MEDIAN, 50, 5),
                issued=d2,
                week_ending=d2 + pd.Timedelta(days=5),
            ),
        ],
        ignore_index=True,
    )
    weeks = pd.date_range(WEEK - pd.Timedelta(days=7 * 10), d3 - pd.Timedelta(days=2), freq="7D")
    obs = pd.DataFrame(
        {
            "region": "dale-00",
            "quantity": "admissions",
            "week_ending": weeks,
            "value": 40.0 + np.arange(weeks.size) % 4,
            "reported": pd.NaT,
        }
    ).astype({"reported": "datetime64[ns]"})
    table, generated = with_baseline(
        members, obs, issue_dates=[d1, d2, d3], name=BASE, horizons=(1,)
    )
    assert generated
    base = table.loc[table["model"] == BASE]
    levels = {d: sorted(part["level"].round(9).unique()) for d, part in base.groupby("issued")}
    assert levels[d1] == sorted(SEVEN)
    assert levels[d2] == sorted(set(SEVEN) | set(NO_MEDIAN))
    assert levels[d3] == sorted(STANDARD_LEVELS)  # no member that day: the standard levels
    fixed, _ = with_baseline(
        members, obs, issue_dates=[d1], name=BASE, horizons=(1,), levels=(0.1, 0.5, 0.9)
    )
    assert sorted(fixed.loc[fixed["model"] == BASE, "level"].round(9).unique()) == [0.1, 0.5, 0.9]


def test_a_named_baseline_takes_no_weight() -> None:
    # Cooke (1991) ch. 12: w = C I 1{C >= alpha} / sum over the members; the baseline is
    # scored (relative WIS 1) but its weight is nan.
    forecasts, observed = _panel(
        15, teams={"team-ash": NINE, "team-birch": NINE, "team-dogwood": STANDARD_LEVELS}
    )
    res = score_forecasts(
        _table(forecasts),
        _obs(observed),
        as_of=AS_OF,
        settings=ScoreSettings(baseline=BASE, alpha=0.0),
    )
    s = res.by_model.set_index("model")
    assert np.isnan(s.loc[BASE, "weight"])
    assert s.loc[BASE, "relative_wis"] == pytest.approx(1.0)
    members = s.drop(index=BASE)
    raw = members["calibration"] * members["information"]
    npt.assert_allclose(members["weight"], raw / raw.sum(), rtol=1e-12)
    # and per region: the baseline's weight is nan, the members' sum to one
    r = res.by_model_region
    assert r.loc[r["model"] == BASE, "weight"].isna().all()
    sums = r.loc[r["model"] != BASE].groupby("region")["weight"].sum()
    npt.assert_allclose(sums, 1.0, rtol=1e-12)


def test_score_command_leaves_the_baseline_weight_empty(tmp_path: Path) -> None:
    forecasts, observed = _panel(16, teams=TEAMS)
    table = _table(forecasts).drop(columns="horizon")
    for col in ("issued", "week_ending"):
        table[col] = table[col].dt.strftime("%Y-%m-%d")
    table.to_csv(tmp_path / "forecasts.csv", index=False)
    obs = _obs(observed).drop(columns="reported")
    obs["week_ending"] = obs["week_ending"].dt.strftime("%Y-%m-%d")
    obs.to_csv(tmp_path / "observations.csv", index=False)
    code = main(
        [
            "score",
            "--forecasts",
            str(tmp_path / "forecasts.csv"),
            "--observations",
            str(tmp_path / "observations.csv"),
            "--as-of",
            f"{AS_OF:%Y-%m-%d}",
            "--out",
            str(tmp_path / "out"),
            "--baseline",
            BASE,
            "--alpha",
            "0",
            "-q",
        ]
    )
    assert code == 0
    s = pd.read_csv(tmp_path / "out" / "scores_by_model.csv").set_index("model")
    assert np.isnan(s.loc[BASE, "weight"])
    assert s.drop(index=BASE)["weight"].sum() == pytest.approx(1.0)
    want = hand_relative(forecasts, observed, BASE)
    npt.assert_allclose(s.loc[list(want), "relative_wis"], list(want.values()), rtol=1e-6)


# --------------------------------------------------------------------------------------------
# the weekly run: scores_by_model.csv and weights.csv agree


def _season(folder: Path) -> Path:
    """An invented season: two valleys, three teams (on 9 and 11 levels), 1-2 weeks ahead."""
    rng = np.random.default_rng(21)
    first = pd.Timestamp("2031-01-06")  # a Monday
    weeks = pd.date_range(first - pd.Timedelta(days=7 * 12 - 5), periods=30, freq="7D")
    wave = {
        r: 60 + 40 * np.sin(np.arange(weeks.size) / 4 + k)
        for k, r in enumerate(("vale-north", "vale-south"))
    }
    obs = pd.concat(
        [
            pd.DataFrame(
                {
                    "region": r,
                    "quantity": "admissions",
                    "week_ending": weeks.strftime("%Y-%m-%d"),
                    "value": np.round(v),
                }
            )
            for r, v in wave.items()
        ]
    )
    obs.to_csv(folder / "observations.csv", index=False)
    teams = {"team-ash": NINE, "team-birch": NINE, "team-dogwood": ELEVEN}
    rows = []
    for i in range(10):
        issued = first + pd.Timedelta(days=7 * i)
        for r, values in wave.items():
            last = values[weeks < issued][-1]
            for h in (1, 2):
                target = issued + pd.Timedelta(days=7 * h - 2)
                for k, (team, levels) in enumerate(teams.items()):
                    q = _quantiles(levels, last * np.exp(rng.normal(0, 0.1)), 6.0 + 4 * k)
                    rows.append(
                        pd.DataFrame(
                            {
                                "model": team,
                                "region": r,
                                "quantity": "admissions",
                                "issued": f"{issued:%Y-%m-%d}",
                                "week_ending": f"{target:%Y-%m-%d}",
                                "level": list(q),
                                "value": np.round(list(q.values()), 3),
                            }
                        )
                    )
    pd.concat(rows).to_csv(folder / "forecasts.csv", index=False)
    return folder


def test_weekly_scores_by_model_weight_equals_weights_csv(tmp_path: Path) -> None:
    from forebrief.app.weekly import run_briefing

    folder = _season(tmp_path)
    cfg = config_from_dict(
        {
            "forecasts": [str(folder / "forecasts.csv")],
            "observations": [str(folder / "observations.csv")],
            "archive": str(folder / "archive"),
            "horizons": [1, 2],
            "window": 6,
            "min_items": 2,
            "backtest_weeks": 2,
        }
    )
    inputs = load_inputs(cfg.forecasts, cfg.observations)
    run = run_briefing(cfg, inputs)
    tables = run.tables()
    by_model = tables["scores_by_model.csv"]
    weights = tables["weights.csv"]
    keys = ["quantity", "horizon", "model"]
    merged = by_model.merge(weights[[*keys, "weight"]], on=keys, how="left", suffixes=("", "_used"))
    assert len(merged) == len(by_model)
    members = merged["model"] != cfg.baseline
    assert members.any()
    assert (~members).any()
    npt.assert_array_equal(merged.loc[members, "weight"], merged.loc[members, "weight_used"])
    assert merged.loc[~members, "weight"].isna().all()
    # the generated baseline gave the members' levels (the union of 9 and 11 levels)
    assert sorted(run.baseline["level"].round(9).unique()) == list(ELEVEN)


def test_baseline_command_takes_levels(tmp_path: Path) -> None:
    weeks = pd.date_range(WEEK - pd.Timedelta(days=7 * 8), WEEK, freq="7D")
    pd.DataFrame(
        {
            "region": "dale-00",
            "quantity": "admissions",
            "week_ending": weeks.strftime("%Y-%m-%d"),
            "value": 40.0 + np.arange(weeks.size) % 3,
        }
    ).to_csv(tmp_path / "obs.csv", index=False)
    args = [
        "baseline",
        "--observations",
        str(tmp_path / "obs.csv"),
        "--issued",
        f"{WEEK + pd.Timedelta(days=2):%Y-%m-%d}",
        "-q",
    ]
    assert main([*args, "--out", str(tmp_path / "seven.csv"), "--levels", *map(str, SEVEN)]) == 0
    assert sorted(pd.read_csv(tmp_path / "seven.csv")["level"].unique()) == list(SEVEN)
    assert main([*args, "--out", str(tmp_path / "standard.csv")]) == 0
    got = sorted(pd.read_csv(tmp_path / "standard.csv")["level"].round(9).unique())
    assert got == sorted(STANDARD_LEVELS)
