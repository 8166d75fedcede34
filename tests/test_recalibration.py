"""The recalibrated pool: forebrief.core.recalibration and the ``recalibrated_pool`` of build_ensemble.

The method is the beta-transformed linear pool F(y) = B_ab(F_pool(y)) (Ranjan & Gneiting 2010,
JRSS B 72:71; Gneiting & Ranjan 2013, Electron. J. Statist. 7:1747), with (a, b) the Beta
maximum-likelihood fit to the equal pool's PIT values. Outside checks, named beside each test:
``scipy.stats.beta.fit`` (the fit), ``scipy.stats.beta.ppf``/``cdf`` (B^-1 and B), the
piecewise-linear member CDF rebuilt with ``numpy.interp`` (Cooke 1991, ch. 12; Cooke &
Slijkhuis 2003, §15.3.2 for the 10% overshoot), and ``scipy.stats.binom.interval`` for the
coverage bands. The panels are invented and seeded.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from forebrief.core.distributions import pool_cdf
from forebrief.core.recalibration import PIT_CLIP, beta_levels, fit_beta, pool_pit
from forebrief.tables.ensemble import METHODS, EnsembleSettings, build_ensemble
from forebrief.tables.schema import CM_LEVELS

# check values: hand-computed with scipy.stats.beta.fit(u, floc=0, fscale=1) and beta.ppf
CHECK_U = (0.02, 0.05, 0.1, 0.5, 0.9, 0.95, 0.97, 0.99, 0.03, 0.6, 0.4, 0.98)
CHECK_AB = (0.507955, 0.437762)
CHECK_PPF = (0.008093, 0.569781, 0.997331)  # B^-1 at 0.05, 0.5, 0.95

MONDAY = pd.Timestamp("2026-01-05")
TAU = np.array(CM_LEVELS)
WIDE_LEVELS = np.array([0.01, 0.025, *np.round(np.arange(1, 20) * 0.05, 2), 0.975, 0.99])


def reference_pits(quantiles: np.ndarray, levels: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Equal-pool PIT values rebuilt with numpy.interp, one item at a time.

    Each member's CDF is piecewise linear through (L*, 0), (q_j, tau_j), (H*, 1), with L*, H*
    the lowest and highest quantile of any member of the item widened by 10% of their distance
    (Cooke 1991, ch. 12; Cooke & Slijkhuis 2003, §15.3.2); the pool is their mean over the
    members present; the values are clipped into [1e-6, 1 - 1e-6].
    """
    out = np.empty(len(y))
    for i in range(len(y)):
        given = [q for q in quantiles[i] if not np.isnan(q).all()]
        lo = min(float(np.nanmin(q)) for q in given)
        hi = max(float(np.nanmax(q)) for q in given)
        lo, hi = lo - 0.1 * (hi - lo), hi + 0.1 * (hi - lo)
        cdfs = [np.interp(y[i], [lo, *q, hi], [0.0, *levels, 1.0]) for q in given]
        out[i] = np.mean(cdfs)
    return np.clip(out, 1e-6, 1 - 1e-6)


# --------------------------------------------------------------------------------------------
# the Beta fit and its inverse


def test_fit_gives_the_check_values_and_scipy_agrees() -> None:
    # check values hand-computed with scipy.stats.beta.fit (method: Ranjan & Gneiting 2010)
    fit = fit_beta(np.array(CHECK_U))
    assert (fit.a, fit.b) == pytest.approx(CHECK_AB, abs=5e-7)
    a, b, loc, scale = stats.beta.fit(np.array(CHECK_U), floc=0, fscale=1)
    assert (loc, scale) == (0, 1)
    assert (fit.a, fit.b) == pytest.approx((a, b), rel=1e-6)
    assert fit.n == len(CHECK_U)
    assert fit.log_likelihood == pytest.approx(
        float(np.sum(stats.beta.logpdf(CHECK_U, fit.a, fit.b))), rel=1e-12
    )
    np.testing.assert_allclose(beta_levels([0.05, 0.5, 0.95], fit.a, fit.b), CHECK_PPF, atol=5e-7)


@pytest.mark.parametrize(("a", "b"), [(0.5, 2.0), (3.0, 3.0), (0.6, 0.35), (20.0, 5.0)])
def test_fit_matches_scipy_on_seeded_samples(a: float, b: float) -> None:
    # scipy.stats.beta.fit with the location and scale fixed is the same maximum-likelihood fit
    u = np.random.default_rng(17).beta(a, b, size=300)
    fit = fit_beta(u)
    ref = stats.beta.fit(u, floc=0, fscale=1)[:2]
    assert (fit.a, fit.b) == pytest.approx(ref, rel=1e-5)
    # the maximum: no nearby (a, b) has a higher likelihood
    best = np.sum(stats.beta.logpdf(u, fit.a, fit.b))
    for da, db in ((1.01, 1.0), (0.99, 1.0), (1.0, 1.01), (1.0, 0.99)):
        assert np.sum(stats.beta.logpdf(u, fit.a * da, fit.b * db)) < best
    assert not fit.at_bound


def test_fit_refuses_values_outside_the_open_interval_and_stops_on_equal_values() -> None:
    with pytest.raises(ValueError, match=r"strictly inside \(0, 1\); got 1\.0"):
        fit_beta([0.2, 0.5, 1.0])
    with pytest.raises(ValueError, match="at least 2 values"):
        fit_beta([0.5])
    # all values equal: the likelihood grows without bound along a ray; the fit stops there
    flat = fit_beta(np.full(12, 0.3))
    assert flat.at_bound
    assert flat.a / (flat.a + flat.b) == pytest.approx(0.3, abs=1e-3)


def test_beta_levels_against_scipy_and_the_identity() -> None:
    tau = np.array([0.01, 0.05, 0.25, 0.5, 0.75, 0.95, 0.99])
    for a, b in ((0.4, 0.4), (2.5, 1.5), (0.8, 3.0)):
        np.testing.assert_allclose(beta_levels(tau, a, b), stats.beta.ppf(tau, a, b), rtol=1e-10)
    # a = b = 1 is no recalibration: the levels come back exactly
    np.testing.assert_array_equal(beta_levels(tau, 1.0, 1.0), tau)
    # a = b < 1 widens the central intervals, a = b > 1 narrows them (B is symmetric about 1/2)
    wide, narrow = beta_levels(tau, 0.5, 0.5), beta_levels(tau, 3.0, 3.0)
    assert wide[1] < 0.05 < narrow[1]
    assert narrow[5] < 0.95 < wide[5]


def test_pool_pit_matches_the_interpolated_member_cdfs() -> None:
    # piecewise-linear member CDFs (Cooke 1991, ch. 12), rebuilt with numpy.interp
    rng = np.random.default_rng(5)
    n, m = 40, 3
    centre = rng.uniform(20, 200, size=(n, m, 1))
    q = centre * np.exp(0.2 * stats.norm.ppf(TAU))[None, None, :]
    q[::7, 1] = np.nan  # member 1 absent on some items
    y = np.exp(np.log(centre[:, 0, 0]) + 0.3 * rng.standard_normal(n))
    y[0] = -1e6  # far below every support: clipped
    got = pool_pit(q, TAU, y, overshoot=0.1)
    np.testing.assert_allclose(got, reference_pits(q, TAU, y), rtol=1e-10, atol=1e-12)
    assert got[0] == PIT_CLIP
    # a point forecast (all quantiles equal) and an item without members have no PIT value
    q[1] = 0.0
    q[2] = np.nan
    got = pool_pit(q, TAU, y, overshoot=0.1)
    assert np.isnan(got[1:3]).all()
    assert np.isfinite(np.delete(got, [1, 2])).all()


# --------------------------------------------------------------------------------------------
# in build_ensemble


def forecast_rows(
    model: str,
    values: Sequence[float],
    *,
    region: str,
    issued: pd.Timestamp,
    horizon: int,
    levels: Sequence[float] = CM_LEVELS,
) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "model": model,
            "region": region,
            "quantity": "admissions",
            "issued": issued,
            "week_ending": issued + pd.Timedelta(days=5 + 7 * (horizon - 1)),
            "level": np.asarray(levels, dtype=float),
            "value": np.asarray(values, dtype=float),
            "horizon": horizon,
        }
    )


def as_tables(fc: list[pd.DataFrame], obs: dict[tuple[str, pd.Timestamp], float]):  # type: ignore[no-untyped-def]
    forecasts = pd.concat(fc, ignore_index=True).astype(
        {"issued": "datetime64[ns]", "week_ending": "datetime64[ns]"}
    )
    observations = pd.DataFrame(
        {
            "region": [k[0] for k in obs],
            "quantity": "admissions",
            "week_ending": [k[1] for k in obs],
            "value": list(obs.values()),
            "reported": pd.NaT,
        }
    ).astype({"week_ending": "datetime64[ns]", "reported": "datetime64[ns]"})
    return forecasts, observations


def one_member_history(regions: int, past: int, seed: int):  # type: ignore[no-untyped-def]
    """One member 'solo' at horizons 1 and 2, issued weekly for ``past`` weeks before D."""
    rng = np.random.default_rng(seed)
    d = MONDAY + pd.Timedelta(weeks=past)
    fc, obs = [], {}
    for r in range(regions):
        region = f"r{r:02d}"
        for j in range(past + 1):
            issued = MONDAY + pd.Timedelta(weeks=j)
            for h in (1, 2):
                c = float(rng.uniform(40, 120))
                fc.append(
                    forecast_rows(
                        "solo",
                        c * np.exp(0.15 * stats.norm.ppf(TAU)),
                        region=region,
                        issued=issued,
                        horizon=h,
                    )
                )
        for j in range(past):
            week = MONDAY + pd.Timedelta(weeks=j, days=5)
            obs[(region, week)] = float(rng.uniform(40, 120))
    forecasts, observations = as_tables(fc, obs)
    return forecasts, observations, d


def window_reference(forecasts: pd.DataFrame, observations: pd.DataFrame, d: pd.Timestamp):  # type: ignore[no-untyped-def]
    """PIT values of the one member on every past item observed before ``d`` (all horizons)."""
    past = forecasts.loc[forecasts["issued"] < d]
    obs = observations.set_index(["region", "week_ending"])["value"]
    us = []
    for (_region, _week, _h), part in past.groupby(["region", "week_ending", "horizon"]):
        key = (part["region"].iloc[0], part["week_ending"].iloc[0])
        if key not in obs.index:
            continue
        q = part.sort_values("level")["value"].to_numpy()[None, None, :]
        us.append(reference_pits(q, TAU, np.array([obs[key]]))[0])
    return np.array(us)


def test_without_a_history_the_recalibrated_pool_is_the_equal_pool() -> None:
    fc, obs = as_tables(
        [
            forecast_rows(
                "solo", [3.0, 7.5, 9.0, 14.0, 22.0], region="r00", issued=MONDAY, horizon=1
            )
        ],
        {},
    )
    res = build_ensemble(fc, obs, issued=MONDAY)
    assert tuple(METHODS) == ("weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool")
    e = res.ensemble
    assert list(e["method"].unique()) == list(METHODS)
    recal = e.loc[e["method"] == "recalibrated_pool"].reset_index(drop=True)
    equal = e.loc[e["method"] == "equal_pool"].reset_index(drop=True)
    pd.testing.assert_frame_equal(recal.drop(columns="method"), equal.drop(columns="method"))
    (group,) = res.summary["groups"]
    assert group["recalibration"] == {
        "a": 1.0,
        "b": 1.0,
        "n_pit": 0,
        "horizons": "all horizons",
        "at_bound": False,
    }
    assert any("so the recalibrated pool is the equal pool" in n for n in res.notes)


def test_horizons_are_pooled_when_one_horizon_has_fewer_than_20_pit_values() -> None:
    # 3 regions: 15 observed targets at horizon 1 and 12 at horizon 2, both < 20 -> pooled (27)
    forecasts, observations, d = one_member_history(regions=3, past=5, seed=11)
    res = build_ensemble(forecasts, observations, issued=d)
    u = window_reference(forecasts, observations, d)
    assert u.size == 27
    a, b = stats.beta.fit(u, floc=0, fscale=1)[:2]  # scipy's Beta ML fit
    for group in res.summary["groups"]:
        rc = group["recalibration"]
        assert (rc["n_pit"], rc["horizons"]) == (27, "all horizons")
        assert (rc["a"], rc["b"]) == pytest.approx((a, b), rel=1e-5)
    # the quantiles: B_ab(F_pool(q_tau)) = tau at every level (scipy.stats.beta.cdf)
    e = res.ensemble
    pool = res.pool
    assert pool is not None
    for i, item in pool.items.iterrows():
        q = e.loc[
            (e["method"] == "recalibrated_pool")
            & (e["region"] == item["region"])
            & (e["horizon"] == item["horizon"]),
            "value",
        ].to_numpy()
        f = pool_cdf(
            q[None, :],
            pool.values[i : i + 1],
            pool.levels,
            np.ones((1, pool.models.size)),
            pool.lower[i : i + 1],
            pool.upper[i : i + 1],
        )[0]
        np.testing.assert_allclose(stats.beta.cdf(f, a, b), TAU, atol=1e-5)


def test_fewer_than_ten_pit_values_leave_the_equal_pool_unchanged() -> None:
    # 1 region: 4 observed targets at horizon 1 and 3 at horizon 2 -> 7 < 10
    forecasts, observations, d = one_member_history(regions=1, past=4, seed=3)
    res = build_ensemble(forecasts, observations, issued=d)
    for group in res.summary["groups"]:
        assert group["recalibration"]["n_pit"] == 7
        assert (group["recalibration"]["a"], group["recalibration"]["b"]) == (1.0, 1.0)
    e = res.ensemble
    np.testing.assert_array_equal(
        e.loc[e["method"] == "recalibrated_pool", "value"].to_numpy(),
        e.loc[e["method"] == "equal_pool", "value"].to_numpy(),
    )
    notes = [n for n in res.notes if "recalibrated pool is the equal pool" in n]
    assert len(notes) == 2
    assert "7 past forecast(s) of the equal pool" in notes[0]


# --------------------------------------------------------------------------------------------
# an overconfident panel: the recalibrated pool restores coverage out of sample


def overconfident_panel(seed: int = 6, regions: int = 60, weeks: int = 16):  # type: ignore[no-untyped-def]
    """Eight members whose quantiles are too narrow for a noisy truth (invented, seeded).

    Truth: log y = log mu + 0.10 Z. Member e: centre log mu + bias_e + 0.05 Z_e with biases
    evenly from -0.03 to 0.03; even members log-normal with log-sd 0.05, odd members normal with
    sd 5% of the centre. The equal pool is too narrow (its log-scale spread is about 0.07
    against the truth's 0.10), and the outcomes seldom leave the members' range.
    """
    rng = np.random.default_rng(seed)
    names = [f"r{i:02d}" for i in range(regions)]
    base = np.log(rng.uniform(50, 400, regions))
    z = stats.norm.ppf(WIDE_LEVELS)
    biases = np.linspace(-0.03, 0.03, 8)
    fc, obs = [], []
    issues = pd.date_range(MONDAY, periods=weeks, freq="7D")
    for t, d in enumerate(issues):
        week = d + pd.Timedelta(days=5)
        log_mu = base + 0.3 * np.sin(t / 4)
        y = np.exp(log_mu + 0.10 * rng.standard_normal(regions))
        obs.append(pd.DataFrame({"region": names, "week_ending": week, "value": np.round(y)}))
        for e, bias in enumerate(biases):
            c = log_mu + bias + 0.05 * rng.standard_normal(regions)
            if e % 2 == 0:
                q = np.exp(c[:, None] + 0.05 * z[None, :])
            else:
                q = np.exp(c)[:, None] * (1 + 0.05 * z[None, :])
            fc.append(
                pd.DataFrame(
                    {
                        "model": f"m{e}",
                        "region": np.repeat(names, WIDE_LEVELS.size),
                        "quantity": "admissions",
                        "issued": d,
                        "week_ending": week,
                        "level": np.tile(WIDE_LEVELS, regions),
                        "value": q.ravel(),
                        "horizon": 1,
                    }
                )
            )
    forecasts = pd.concat(fc, ignore_index=True).astype(
        {"issued": "datetime64[ns]", "week_ending": "datetime64[ns]"}
    )
    observations = pd.concat(obs, ignore_index=True).assign(quantity="admissions", reported=pd.NaT)
    observations = observations.astype(
        {"week_ending": "datetime64[ns]", "reported": "datetime64[ns]"}
    )
    return forecasts, observations, issues


def test_recalibration_restores_coverage_of_an_overconfident_panel_out_of_sample() -> None:
    forecasts, observations, issues = overconfident_panel()
    settings = EnsembleSettings(baseline=None)
    truth = observations.set_index(["region", "week_ending"])["value"]
    inside = {m: np.zeros(2, dtype=int) for m in ("equal_pool", "recalibrated_pool")}
    n = 0
    for d in issues[-4:]:  # each fitted on the 12 weeks before d, judged on d's targets
        res = build_ensemble(forecasts, observations, issued=d, settings=settings)
        (group,) = res.summary["groups"]
        assert group["recalibration"]["n_pit"] == 12 * 60
        # the fit is scipy's on the PIT values rebuilt by hand for the window's items
        past = forecasts.loc[
            (forecasts["issued"] < d) & (forecasts["week_ending"] > d - pd.Timedelta(weeks=12))
        ].sort_values(["region", "week_ending", "model", "level"])
        cube = past["value"].to_numpy().reshape(-1, 8, WIDE_LEVELS.size)
        keys = past.drop_duplicates(["region", "week_ending"])
        y = truth.loc[list(zip(keys["region"], keys["week_ending"], strict=True))].to_numpy()
        a, b = stats.beta.fit(reference_pits(cube, WIDE_LEVELS, y), floc=0, fscale=1)[:2]
        rc = group["recalibration"]
        assert (rc["a"], rc["b"]) == pytest.approx((a, b), rel=1e-5)
        assert max(a, b) < 1  # an overconfident pool: PIT values pile up at both ends
        e = res.ensemble
        for method in inside:
            wide = e.loc[e["method"] == method].pivot_table(
                index=["region", "week_ending"], columns="level", values="value"
            )
            obs = truth.loc[wide.index].to_numpy()
            for j, (lo, hi) in enumerate(((0.25, 0.75), (0.05, 0.95))):
                inside[method][j] += int(((obs >= wide[lo]) & (obs <= wide[hi])).sum())
        n += len(wide)
    assert n == 240
    for j, nominal in enumerate((0.5, 0.9)):
        low, high = stats.binom.interval(0.95, n, nominal)
        assert low <= inside["recalibrated_pool"][j] <= high, (nominal, inside)
        assert not low <= inside["equal_pool"][j] <= high, (nominal, inside)
        assert inside["equal_pool"][j] < low  # too narrow, as built
