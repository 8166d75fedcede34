"""The scoring front end to end on hand-built tables, against published worked examples.

Check values come from docs/methods.md, where they are hand-computed with scipy 1.17 from the
formulas of Cooke (1991, ch. 12), Cooke & Slijkhuis (2003, section 15.3.2), Bracher et al.
(2021) and Cramer et al. (2022); each test names its source.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.special import rel_entr
from scipy.stats import chi2, norm

from forebrief.tables.schema import CM_LEVELS
from forebrief.tables.scoring import ScoreSettings, score_forecasts

TAU = np.array(CM_LEVELS)
P5 = np.array([0.05, 0.20, 0.25, 0.25, 0.20, 0.05])
ISSUED = pd.Timestamp("2026-10-05")  # a Monday
WEEK = pd.Timestamp("2026-10-10")  # the Saturday after: horizon 1


def _forecast_rows(
    model: str,
    quantiles: np.ndarray,
    *,
    region: str = "r1",
    quantity: str = "admissions",
    issued: pd.Timestamp = ISSUED,
    week_ending: pd.Timestamp = WEEK,
    levels: np.ndarray = TAU,
) -> pd.DataFrame:
    days = (week_ending - issued).days
    return pd.DataFrame(
        {
            "model": model,
            "region": region,
            "quantity": quantity,
            "issued": issued,
            "week_ending": week_ending,
            "level": levels,
            "value": np.asarray(quantiles, dtype=float),
            "horizon": int(np.ceil(days / 7)),
        }
    )


def _obs(
    values: dict[tuple[str, pd.Timestamp], float],
    quantity: str = "admissions",
    reported: pd.Timestamp | None = None,
) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "region": [k[0] for k in values],
            "quantity": quantity,
            "week_ending": [k[1] for k in values],
            "value": list(values.values()),
            "reported": reported if reported is not None else pd.NaT,
        }
    ).astype({"reported": "datetime64[ns]"})


# --- Cooke & Slijkhuis (2003) section 15.3.2: two experts, one item (docs/methods.md §2, I2, I3)

A = np.array([80, 95, 100, 108, 125.0])
B = np.array([60, 85, 100, 120, 150.0])


def test_two_expert_information_uniform_background() -> None:
    # Check I2, docs/methods.md §2: intrinsic range [51, 159]; I_A = 0.670480, I_B = 0.075953
    fc = pd.concat([_forecast_rows("A", A), _forecast_rows("B", B)], ignore_index=True)
    res = score_forecasts(fc, _obs({("r1", WEEK): 112.0}), as_of=pd.Timestamp("2026-10-12"))
    info = res.by_item.set_index("model")["information"]
    assert info["A"] == pytest.approx(0.670480, abs=1e-6)
    assert info["B"] == pytest.approx(0.075953, abs=1e-6)


def test_two_expert_information_log_background() -> None:
    # Check I3 (docs/methods.md §2) applies logs; forebrief's log background is ln(x + 1), so
    # recompute I3's construction on ln(x + 1) with plain numpy (Cooke 1991 ch. 12,
    # log-uniform background).
    fc = pd.concat([_forecast_rows("A", A), _forecast_rows("B", B)], ignore_index=True)
    res = score_forecasts(
        fc,
        _obs({("r1", WEEK): 112.0}),
        as_of=pd.Timestamp("2026-10-12"),
        settings=ScoreSettings(background="log"),
    )
    qa, qb, x = np.log1p(A), np.log1p(B), np.log1p(112.0)
    lo, hi = min(qa.min(), qb.min(), x), max(qa.max(), qb.max(), x)
    lo, hi = lo - 0.1 * (hi - lo), hi + 0.1 * (hi - lo)

    def info(q: np.ndarray) -> float:
        r = np.diff(np.r_[lo, q, hi]) / (hi - lo)
        return float(np.sum(P5 * np.log(P5 / r)))

    got = res.by_item.set_index("model")["information"]
    assert got["A"] == pytest.approx(info(qa), abs=1e-9)
    assert got["B"] == pytest.approx(info(qb), abs=1e-9)
    # and the published log-uniform values of I3 (plain logs) are close to these
    assert got["A"] == pytest.approx(0.692084, abs=0.01)


# --- Cooke & Goossens (2008) style regression example, docs/methods.md §3 (check D1) ---

X3 = np.array([12, 30, 45, 80, 150, 220, 400, 650, 900, 1500.0])
SIG = [0.3, 0.2, 0.6]
DL = [
    [0.10, -0.20, 0.30, -0.40, 0.05, 0.20, -0.10, 0.50, -0.30, 0.00],
    [0.10, 0.20, -0.20, 0.30, 0.15, 0.05, 0.25, -0.15, 0.20, 0.30],
    [-0.30, 0.50, 0.20, -0.60, 0.10, -0.20, 0.40, 0.30, -0.10, 0.70],
]


def _three_models() -> tuple[pd.DataFrame, pd.DataFrame]:
    rows, obs = [], {}
    for i, x in enumerate(X3):
        region = f"r{i:02d}"
        obs[(region, WEEK)] = x
        for e in range(3):
            q = x * np.exp(DL[e][i] + SIG[e] * norm.ppf(TAU))
            rows.append(_forecast_rows(f"m{e + 1}", q, region=region))
    return pd.concat(rows, ignore_index=True), _obs(obs)


def test_classical_model_regression_example() -> None:
    # Check D1, docs/methods.md §3: C = (0.7204, 0.0310, 0.6283); I = (0.8150, 1.0683, 0.2109)
    fc, obs = _three_models()
    res = score_forecasts(
        fc, obs, as_of=pd.Timestamp("2026-10-12"), settings=ScoreSettings(alpha=0.0)
    )
    t = res.by_model.set_index("model")
    np.testing.assert_allclose(
        t.loc[["m1", "m2", "m3"], "calibration"], [0.7204, 0.0310, 0.6283], atol=5e-5
    )
    np.testing.assert_allclose(
        t.loc[["m1", "m2", "m3"], "information"], [0.8150, 1.0683, 0.2109], atol=5e-5
    )
    # alpha = 0: w = (0.780, 0.044, 0.176)
    np.testing.assert_allclose(
        t.loc[["m1", "m2", "m3"], "weight"], [0.780, 0.044, 0.176], atol=5e-4
    )
    assert t["n_items"].tolist() == [10, 10, 10]
    # calibration recomputed from the reported bin counts with scipy directly (Cooke 1991)
    counts = t.loc["m1", [f"bin_{j}" for j in range(6)]].to_numpy(dtype=float)
    n = counts.sum()
    stat = 2 * n * rel_entr(counts / n, P5).sum()
    assert t.loc["m1", "calibration"] == pytest.approx(chi2.sf(stat, 5), abs=1e-12)


@pytest.mark.parametrize(
    ("cut_at", "weights"),
    [("m3", [0.8159, 0.0, 0.1841]), ("m1", [1.0, 0.0, 0.0])],  # check D1, docs/methods.md §3
)
def test_cutoff_removes_models(cut_at: str, weights: list[float]) -> None:
    # alpha set exactly to a model's calibration keeps that model (the test is >=)
    fc, obs = _three_models()
    as_of = pd.Timestamp("2026-10-12")
    first = score_forecasts(fc, obs, as_of=as_of, settings=ScoreSettings(alpha=0.0))
    alpha = float(first.by_model.set_index("model").loc[cut_at, "calibration"])
    res = score_forecasts(fc, obs, as_of=as_of, settings=ScoreSettings(alpha=alpha))
    t = res.by_model.set_index("model")
    np.testing.assert_allclose(t.loc[["m1", "m2", "m3"], "weight"], weights, atol=5e-4)
    assert not t["equal_weights"].any()


def test_no_model_passes_gives_equal_weights_and_says_so() -> None:
    fc, obs = _three_models()
    res = score_forecasts(
        fc, obs, as_of=pd.Timestamp("2026-10-12"), settings=ScoreSettings(alpha=0.99)
    )
    assert res.by_model["weight"].tolist() == pytest.approx([1 / 3] * 3)
    assert res.by_model["equal_weights"].all()
    assert any("equal weights" in n for n in res.notes)


# --- Bracher et al. (2021), docs/methods.md §5, check W1: q = (2, 4, 5, 7, 10), y = 12 ----------


def test_wis_and_decomposition_through_the_engine() -> None:
    fc = _forecast_rows("m", np.array([2, 4, 5, 7, 10.0]))
    res = score_forecasts(fc, _obs({("r1", WEEK): 12.0}), as_of=pd.Timestamp("2026-10-12"))
    row = res.by_model.iloc[0]
    assert row["wis"] == pytest.approx(4.66)
    assert row["dispersion"] == pytest.approx(0.46)
    assert row["overprediction"] == pytest.approx(0.0)
    assert row["underprediction"] == pytest.approx(4.20)
    assert row["within_50"] == 0
    assert row["within_90"] == 0
    assert row["abs_error"] == pytest.approx(7.0)
    assert row["bias"] == -1  # the median 5 is below the observation 12


def test_log_scale_wis() -> None:
    # Bosse et al. (2023): WIS of ln(x + 1); check L1 (docs/methods.md §8) gives 0.4886
    # (0.0730 / 0 / 0.4157)
    fc = _forecast_rows("m", np.array([2, 4, 5, 7, 10.0]))
    res = score_forecasts(
        fc,
        _obs({("r1", WEEK): 12.0}),
        as_of=pd.Timestamp("2026-10-12"),
        settings=ScoreSettings(scale="log"),
    )
    row = res.by_model.iloc[0]
    assert row["wis"] == pytest.approx(0.4886, abs=5e-5)
    assert row["dispersion"] == pytest.approx(0.0730, abs=5e-5)
    assert row["underprediction"] == pytest.approx(0.4157, abs=5e-5)


# --- definitions of the window, the as-of date and the bins (the issue's contract) -----------


def test_window_bounds_and_observation_requirement() -> None:
    as_of = pd.Timestamp("2026-11-28")
    weeks = [as_of - pd.Timedelta(days=7 * k) for k in range(4)]  # 0, 1, 2, 3 weeks back
    rows = [
        _forecast_rows(
            "m", np.array([1, 2, 3, 4, 5.0]), issued=w - pd.Timedelta(days=5), week_ending=w
        )
        for w in weeks
    ]
    fc = pd.concat(rows, ignore_index=True)
    obs = _obs({("r1", w): 3.0 for w in weeks[1:]})  # the latest week has no observation yet
    res = score_forecasts(fc, obs, as_of=as_of, settings=ScoreSettings(window=2))
    # window 2: as_of - 14 days < week_ending <= as_of, with an observation: only weeks[1]
    assert res.by_item["week_ending"].tolist() == [weeks[1]]


def test_vintage_reported_after_as_of_is_not_used() -> None:
    fc = _forecast_rows("m", np.array([1, 2, 3, 4, 5.0]))
    obs = pd.concat(
        [
            _obs({("r1", WEEK): 2.0}, reported=pd.Timestamp("2026-10-12")),
            _obs({("r1", WEEK): 9.0}, reported=pd.Timestamp("2026-10-19")),
        ],
        ignore_index=True,
    )
    early = score_forecasts(fc, obs, as_of=pd.Timestamp("2026-10-12"))
    late = score_forecasts(fc, obs, as_of=pd.Timestamp("2026-10-19"))
    assert early.by_item["observed"].tolist() == [2.0]
    assert late.by_item["observed"].tolist() == [9.0]


def test_observation_on_a_quantile_goes_in_the_lower_bin() -> None:
    # Cooke (1991) bins are right-closed: y = q_j counts in (q_{j-1}, q_j]
    fc = _forecast_rows("m", np.array([1, 2, 3, 4, 5.0]))
    res = score_forecasts(fc, _obs({("r1", WEEK): 3.0}), as_of=pd.Timestamp("2026-10-12"))
    assert res.by_item["bin"].tolist() == [2]


def test_latest_issued_forecast_of_an_item_is_scored() -> None:
    early = _forecast_rows("m", np.array([1, 2, 3, 4, 5.0]), issued=pd.Timestamp("2026-10-04"))
    later = _forecast_rows("m", np.array([10, 20, 30, 40, 50.0]))
    res = score_forecasts(
        pd.concat([early, later], ignore_index=True),
        _obs({("r1", WEEK): 3.0}),
        as_of=pd.Timestamp("2026-10-12"),
    )
    assert res.by_item["median"].tolist() == [30.0]
    assert any("superseded" in n for n in res.notes)


def test_degenerate_item_is_skipped_and_counted() -> None:
    fc = pd.concat(
        [_forecast_rows("a", np.zeros(5)), _forecast_rows("b", np.zeros(5))], ignore_index=True
    )
    res = score_forecasts(fc, _obs({("r1", WEEK): 0.0}), as_of=pd.Timestamp("2026-10-12"))
    assert res.n_degenerate == 1
    assert res.by_item["information"].isna().all()
    assert res.by_item["wis"].tolist() == [0.0, 0.0]


def test_relative_wis_against_pairwise_definition() -> None:
    # Cramer et al. (2022), PNAS, Methods: theta_a = geometric mean of pairwise ratios of mean
    # WIS over common items; relative = theta_a / theta_base. Recomputed here from by_item.
    rng = np.random.default_rng(7)
    rows, obs = [], {}
    for i in range(12):
        region = f"r{i:02d}"
        y = float(rng.integers(20, 200))
        obs[(region, WEEK)] = y
        for m, (bias, sd) in {"base": (0.0, 0.5), "good": (0.0, 0.2), "off": (0.4, 0.2)}.items():
            if m == "off" and i % 3 == 0:
                continue  # missing items make the pairwise definition matter
            q = y * np.exp(bias + rng.normal(0, 0.1) + sd * norm.ppf(TAU))
            rows.append(_forecast_rows(m, q, region=region))
    res = score_forecasts(
        pd.concat(rows, ignore_index=True),
        _obs(obs),
        as_of=pd.Timestamp("2026-10-12"),
        settings=ScoreSettings(baseline="base"),
    )
    wis = res.by_item.pivot(index="region", columns="model", values="wis")
    models = list(wis.columns)

    def theta(a: str, b: str) -> float:
        ok = wis[a].notna() & wis[b].notna()
        return wis.loc[ok, a].mean() / wis.loc[ok, b].mean()

    geo = {a: np.exp(np.mean([np.log(theta(a, b)) for b in models])) for a in models}
    got = res.by_model.set_index("model")["relative_wis"]
    for m in models:
        assert got[m] == pytest.approx(geo[m] / geo["base"], rel=1e-12)
    assert got["base"] == pytest.approx(1.0)


def test_weights_normalised_per_quantity_horizon_and_region() -> None:
    fc, obs = _three_models()
    res = score_forecasts(fc, obs, as_of=pd.Timestamp("2026-10-12"))
    sums = res.by_model.groupby(["quantity", "horizon"])["weight"].sum()
    assert np.allclose(sums, 1.0)
    sums_r = res.by_model_region.groupby(["quantity", "horizon", "region"])["weight"].sum()
    assert np.allclose(sums_r, 1.0)
    assert set(res.by_model_region["region"]) == {f"r{i:02d}" for i in range(10)}
