"""Ensembles of one issue date (forebrief.tables.ensemble) on small hand-built tables.

Outside checks, each named beside its test: the worked Classical Model example of
docs/methods.md §3 (check D1; Cooke 1991, ch. 12; Cooke & Goossens 2008), recomputed here by
a brute-force loop that scores with scipy directly; normal mixtures solved with
``scipy.optimize.brentq`` and the values of docs/methods.md §4 (checks P1, P2; Lichtendahl,
Grushka-Cockayne & Winkler 2013, Management Science 59(7)); and the definition of the linear
pool as a convex combination of CDFs (Cooke 1991, ch. 12). The array-level pool is tested in
tests/test_distributions.py; these tests go through :func:`build_ensemble` and the
``forebrief ensemble`` command.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy.optimize import brentq
from scipy.special import rel_entr
from scipy.stats import chi2, norm

from forebrief.core.distributions import (
    linear_pool_quantiles,
    member_cdf,
    pool_cdf,
    support_bounds,
)
from forebrief.errors import ConfigError
from forebrief.tables.ensemble import (
    ENSEMBLE_COLUMNS,
    METHODS,
    ROBUSTNESS_COLUMNS,
    WEIGHT_COLUMNS,
    EnsembleSettings,
    build_ensemble,
    history_scores,
)
from forebrief.tables.schema import CM_LEVELS
from forebrief.tables.scoring import score_forecasts

TAU = np.array(CM_LEVELS)
P5 = np.diff(np.r_[0.0, TAU, 1.0])  # (0.05, 0.20, 0.25, 0.25, 0.20, 0.05), docs/methods.md §1
PAST = pd.Timestamp("2026-10-05")  # a Monday: the past issue date
PAST_WEEK = pd.Timestamp("2026-10-10")  # its target week (Saturday), horizon 1
D = pd.Timestamp("2026-10-12")  # the issue date of the ensemble
TARGET = pd.Timestamp("2026-10-17")  # D's horizon-1 target week
FORECAST_HEADER = "model,region,quantity,issued,week_ending,level,value"
OBS_HEADER = "region,quantity,week_ending,value,reported"


# --------------------------------------------------------------------------------------------
# table builders (the validated-table layout: one row per quantile, with ``horizon``)


def rows(
    model: str,
    values: Sequence[float],
    *,
    region: str = "r00",
    quantity: str = "admissions",
    issued: pd.Timestamp = D,
    week_ending: pd.Timestamp = TARGET,
    levels: Sequence[float] = CM_LEVELS,
) -> pd.DataFrame:
    days = (week_ending - issued).days
    return pd.DataFrame(
        {
            "model": model,
            "region": region,
            "quantity": quantity,
            "issued": issued,
            "week_ending": week_ending,
            "level": np.asarray(levels, dtype=float),
            "value": np.asarray(values, dtype=float),
            "horizon": int(np.ceil(days / 7)),
        }
    )


def table(parts: Sequence[pd.DataFrame]) -> pd.DataFrame:
    out = pd.concat(parts, ignore_index=True)
    return out.astype({"issued": "datetime64[ns]", "week_ending": "datetime64[ns]"})


def observations(
    values: dict[tuple[str, pd.Timestamp], float],
    *,
    quantity: str = "admissions",
    reported: pd.Timestamp | None = None,
) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "region": [k[0] for k in values],
            "quantity": quantity,
            "week_ending": [k[1] for k in values],
            "value": [float(v) for v in values.values()],
            "reported": reported if reported is not None else pd.NaT,
        }
    ).astype({"week_ending": "datetime64[ns]", "reported": "datetime64[ns]"})


NO_OBS = observations({}).iloc[0:0]


def pooled(result, method: str, *, region: str = "r00") -> pd.Series:  # type: ignore[no-untyped-def]
    e = result.ensemble
    part = e.loc[(e["method"] == method) & (e["region"] == region)]
    return part.set_index("level")["value"]


# --------------------------------------------------------------------------------------------
# docs/methods.md §3: 3 models, 10 items, lognormal-shaped quantiles (our own construction there)

S3_X = np.array([12, 30, 45, 80, 150, 220, 400, 650, 900, 1500], dtype=float)
S3_SIG = [0.3, 0.2, 0.6]
S3_DL = [
    [0.10, -0.20, 0.30, -0.40, 0.05, 0.20, -0.10, 0.50, -0.30, 0.00],
    [0.10, 0.20, -0.20, 0.30, 0.15, 0.05, 0.25, -0.15, 0.20, 0.30],
    [-0.30, 0.50, 0.20, -0.60, 0.10, -0.20, 0.40, 0.30, -0.10, 0.70],
]
S3_REGIONS = [f"r{i:02d}" for i in range(10)]


def section3_history() -> np.ndarray:
    """Q[e, i, :] = x_i exp(dl[e][i] + sig[e] Phi^-1(tau)) (docs/methods.md §3)."""
    return np.array(
        [
            [S3_X[i] * np.exp(S3_DL[e][i] + S3_SIG[e] * norm.ppf(TAU)) for i in range(10)]
            for e in range(3)
        ]
    )


def section3_tables() -> tuple[pd.DataFrame, pd.DataFrame]:
    """The docs/methods.md §3 example as the history (issued PAST for PAST_WEEK, one item per
    region), plus forecasts of the same three models issued on D for the week after (the
    targets)."""
    q = section3_history()
    parts = []
    for e in range(3):
        for i, region in enumerate(S3_REGIONS):
            parts.append(
                rows(f"m{e + 1}", q[e, i], region=region, issued=PAST, week_ending=PAST_WEEK)
            )
            parts.append(
                rows(f"m{e + 1}", S3_X[i] * np.exp(S3_SIG[e] * norm.ppf(TAU)), region=region)
            )
    obs = observations({(r, PAST_WEEK): x for r, x in zip(S3_REGIONS, S3_X, strict=True)})
    return table(parts), obs


def scipy_calibration(quantiles: np.ndarray, x: np.ndarray) -> float:
    """C = chi2.sf(2 N I(s, p), 5); a realisation equal to a quantile goes in the lower bin
    (Cooke 1991, ch. 12; docs/methods.md §1)."""
    bins = np.array(
        [np.searchsorted(q, xi, side="left") for q, xi in zip(quantiles, x, strict=True)]
    )
    counts = np.bincount(bins, minlength=P5.size)
    n = counts.sum()
    return float(chi2.sf(2 * n * rel_entr(counts / n, P5).sum(), P5.size - 1))


def scipy_information(quantiles: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> float:
    """Mean over items of sum_j p_j ln(p_j / r_j) on the intrinsic range (docs/methods.md §2)."""
    widths = np.diff(np.column_stack([lo, quantiles, hi]), axis=1) / (hi - lo)[:, None]
    return float(np.mean(np.sum(P5 * np.log(P5 / widths), axis=1)))


def brute_force_alpha(q: np.ndarray, x: np.ndarray) -> list[tuple[float, float, float, float]]:
    """(alpha, C(DM), I(DM), combined) for alpha in {0} and every C(e) (docs/methods.md §3).

    Global weights C I 1{C >= alpha}; the DM is the linear pool on each item's intrinsic
    range L* = L - 0.1 (U - L), U* = U + 0.1 (U - L) over all models and the realisation.
    """
    lo = np.minimum(q.min(axis=(0, 2)), x)
    hi = np.maximum(q.max(axis=(0, 2)), x)
    lo, hi = lo - 0.1 * (hi - lo), hi + 0.1 * (hi - lo)
    cal = np.array([scipy_calibration(q[e], x) for e in range(q.shape[0])])
    info = np.array([scipy_information(q[e], lo, hi) for e in range(q.shape[0])])
    out = []
    for alpha in sorted({0.0, *cal.tolist()}):
        w = cal * info * (cal >= alpha)
        if w.sum() <= 0:
            continue
        dm = linear_pool_quantiles(q.transpose(1, 0, 2), TAU, w / w.sum(), TAU, lower=lo, upper=hi)
        c, i = scipy_calibration(dm, x), scipy_information(dm, lo, hi)
        out.append((alpha, c, i, c * i))
    return out


def best_of(scored: list[tuple[float, float, float, float]]) -> tuple[float, float]:
    """The argmax of the combined score; ties (within 1e-12) go to the smaller alpha."""
    best = scored[0]
    for row in scored[1:]:
        if row[3] > best[3] + 1e-12:
            best = row
    return best[0], best[3]


def test_section3_model_scores_and_weights() -> None:
    # Check D1, docs/methods.md §3 (Cooke & Goossens 2008): C = (0.7204, 0.0310, 0.6283),
    # I = (0.8150, 1.0683, 0.2109); at alpha = 0, w = (0.780, 0.044, 0.176).
    fc, obs = section3_tables()
    res = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=0.0))
    w = res.weights.set_index("model")
    np.testing.assert_allclose(w["calibration"], [0.7204, 0.0310, 0.6283], atol=5e-5)
    np.testing.assert_allclose(w["information"], [0.8150, 1.0683, 0.2109], atol=5e-5)
    np.testing.assert_allclose(w["weight"], [0.780, 0.044, 0.176], atol=5e-4)
    assert w["rated"].all()
    assert (w["n_items"] == 10).all()


def test_optimised_alpha_matches_section3_and_a_brute_force_search() -> None:
    # Check D1, docs/methods.md §3: alpha* = C(model 1) = 0.7204 with combined 0.5871 (Cooke
    # 1991 ch. 12; Cooke & Goossens 2008); the brute force below scores with scipy directly.
    fc, obs = section3_tables()
    res = build_ensemble(fc, obs, issued=D)
    (group,) = res.summary["groups"]
    scored = brute_force_alpha(section3_history(), S3_X)
    alpha, combined = best_of(scored)
    assert group["alpha_mode"] == "auto"
    assert group["alpha"] == pytest.approx(0.7204, abs=5e-5)
    assert group["alpha"] == pytest.approx(alpha, rel=1e-12)
    assert group["pool_combined"] == pytest.approx(0.5871, abs=5e-5)
    assert group["pool_combined"] == pytest.approx(combined, rel=1e-9)
    assert group["candidates"] == len(scored) == 4
    assert group["pool_items"] == 10
    # with alpha* only model 1 keeps weight (docs/methods.md §3: w = (1, 0, 0))
    assert res.weights.set_index("model")["weight"].tolist() == [1.0, 0.0, 0.0]


def test_section3_documented_values_at_fixed_alpha() -> None:
    # docs/methods.md §3: alpha = 0 -> DM C 0.6283, I 0.4827, combined 0.3033; alpha = C(model 3)
    # = 0.6283 -> w = (0.8159, 0, 0.1841), combined 0.3580; equal-weight DM C 0.033, I 0.3544.
    fc, obs = section3_tables()
    c3 = scipy_calibration(section3_history()[2], S3_X)
    at0 = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=0.0))
    (g0,) = at0.summary["groups"]
    assert g0["pool_calibration"] == pytest.approx(0.6283, abs=5e-5)
    assert g0["pool_information"] == pytest.approx(0.4827, abs=5e-5)
    assert g0["pool_combined"] == pytest.approx(0.3033, abs=5e-5)
    assert g0["equal_pool_calibration"] == pytest.approx(0.033, abs=5e-4)
    assert g0["equal_pool_information"] == pytest.approx(0.3544, abs=5e-5)
    # alpha = C(e) keeps model e, because the test is C >= alpha (docs/methods.md §3)
    c3_code = float(at0.weights.set_index("model").loc["m3", "calibration"])
    assert c3_code == pytest.approx(c3, rel=1e-12)
    at3 = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=c3_code))
    (g3,) = at3.summary["groups"]
    np.testing.assert_allclose(at3.weights["weight"], [0.8159, 0.0, 0.1841], atol=5e-5)
    assert g3["pool_combined"] == pytest.approx(0.3580, abs=5e-5)
    assert g3["alpha_mode"] == "fixed"
    brute = {round(a, 12): comb for a, _, _, comb in brute_force_alpha(section3_history(), S3_X)}
    assert g0["pool_combined"] == pytest.approx(brute[0.0], rel=1e-9)
    assert g3["pool_combined"] == pytest.approx(brute[round(c3, 12)], rel=1e-9)


def test_alpha_ties_go_to_the_smaller_cutoff() -> None:
    # Cooke 1991 ch. 12 / docs/methods.md §3: candidates {0} and the C(e). Built tie: one
    # biased-low and one biased-high member whose pool beats both; alpha = 0 and alpha =
    # min C(e) then keep the same members and give the same pool, and the smaller alpha (0)
    # must win.
    x = np.array([100.0, 120, 90, 150, 80, 110, 130, 95, 105, 140])
    z = norm.ppf(TAU)
    low = np.array([xi * np.exp(-0.25 + 0.08 * z) for xi in x])
    high = np.array([xi * np.exp(0.22 + 0.07 * z) for xi in x])
    regions = [f"r{i:02d}" for i in range(x.size)]
    parts = []
    for name, q in (("low", low), ("high", high)):
        for i, region in enumerate(regions):
            parts.append(rows(name, q[i], region=region, issued=PAST, week_ending=PAST_WEEK))
            parts.append(rows(name, q[i], region=region))
    obs = observations({(r, PAST_WEEK): v for r, v in zip(regions, x, strict=True)})
    scored = brute_force_alpha(np.stack([low, high]), x)
    (a0, *_, best0), (a1, *_, best1) = scored[0], scored[1]
    assert a0 == 0.0 < a1
    assert best0 == pytest.approx(best1, rel=1e-12)  # the tie, by construction
    assert best0 > max(row[3] for row in scored[2:])  # and it is the maximum
    res = build_ensemble(table(parts), obs, issued=D)
    (group,) = res.summary["groups"]
    assert group["alpha"] == 0.0
    assert group["pool_combined"] == pytest.approx(best0, rel=1e-9)


# --------------------------------------------------------------------------------------------
# the pool at the ensemble level


def test_a_pool_of_one_member_returns_that_member() -> None:
    # A linear pool of one distribution is that distribution (Cooke 1991, ch. 12), and the
    # median of one number is the number: every method returns the member's quantiles.
    q = [3.0, 7.5, 9.0, 14.0, 22.0]
    res = build_ensemble(table([rows("solo", q)]), NO_OBS, issued=D)
    for method in ("weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool"):
        got = pooled(res, method)
        np.testing.assert_allclose(got.index, TAU)
        np.testing.assert_allclose(got.to_numpy(), q, rtol=1e-12)


def history_two_rated(*, regions: int = 8) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Three members rated on ``regions`` past items, with different quality; targets on D."""
    rng = np.random.default_rng(11)
    x = rng.uniform(50, 150, regions)
    z = norm.ppf(TAU)
    shape = {"sharp": (0.05, 0.10), "wide": (0.0, 0.45), "biased": (0.3, 0.15)}
    parts = []
    for name, (bias, sd) in shape.items():
        for i in range(regions):
            region = f"r{i:02d}"
            parts.append(
                rows(
                    name,
                    x[i] * np.exp(bias + sd * z + rng.normal(0, 0.05)),
                    region=region,
                    issued=PAST,
                    week_ending=PAST_WEEK,
                )
            )
            parts.append(rows(name, 100 * np.exp(bias + sd * z), region=region))
    obs = observations({(f"r{i:02d}", PAST_WEEK): v for i, v in enumerate(x)})
    return table(parts), obs


def test_weights_csv_weights_reproduce_the_weighted_pool_and_their_scale_does_not_matter() -> None:
    # The weighted pool is sum_e w_e F_e (Cooke 1991 ch. 12); normalisation makes any positive
    # multiple of the weights give the same pool. Recompute it from weights.csv x 7.3.
    fc, obs = history_two_rated()
    res = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=0.0))
    w = res.weights.set_index("model")["weight"]
    assert (w > 0).sum() >= 2
    today = fc.loc[(fc["issued"] == D) & (fc["region"] == "r00")].sort_values(["model", "level"])
    cube = today["value"].to_numpy().reshape(1, 3, TAU.size)
    lo, hi = support_bounds(cube, overshoot=0.1)
    for scale in (1.0, 7.3, 1e-3):
        again = linear_pool_quantiles(
            cube, TAU, w.sort_index().to_numpy() * scale, TAU, lower=lo, upper=hi
        )[0]
        np.testing.assert_allclose(pooled(res, "weighted_pool").to_numpy(), again, rtol=1e-12)


def test_scaling_every_value_scales_the_ensembles_and_keeps_the_weights() -> None:
    # Calibration uses bin counts only, and the information score on the intrinsic range with
    # a uniform background is unchanged by x -> c x (its widths r_j are ratios; docs/methods.md §2
    # formula); so weights and alpha stay, and every pooled quantile scales by c.
    fc, obs = history_two_rated()
    base = build_ensemble(fc, obs, issued=D)
    c = 3.5
    big = build_ensemble(
        fc.assign(value=fc["value"] * c), obs.assign(value=obs["value"] * c), issued=D
    )
    np.testing.assert_allclose(big.weights["weight"], base.weights["weight"], rtol=1e-9, atol=1e-12)
    assert big.summary["groups"][0]["alpha"] == pytest.approx(base.summary["groups"][0]["alpha"])
    np.testing.assert_allclose(big.ensemble["value"], c * base.ensemble["value"], rtol=1e-9)


def test_pooled_cdf_is_monotone_and_between_the_members() -> None:
    # F_pool = sum_e w_e F_e is a convex combination of the members' CDFs (Cooke 1991 ch. 12;
    # docs/methods.md §4), so at the pool's quantiles it is non-decreasing, equals the level,
    # and lies between the smallest and largest member CDF.
    fc, obs = history_two_rated()
    res = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=0.0))
    w = res.weights.sort_values("model")["weight"].to_numpy()
    for region in ("r00", "r03"):
        today = fc.loc[(fc["issued"] == D) & (fc["region"] == region)].sort_values(
            ["model", "level"]
        )
        cube = today["value"].to_numpy().reshape(1, 3, TAU.size)
        lo, hi = support_bounds(cube, overshoot=0.1)
        for method, weights in (("weighted_pool", w), ("equal_pool", np.ones(3))):
            x = pooled(res, method, region=region).to_numpy()[None, :]
            f = pool_cdf(x, cube, TAU, weights, lo, hi)[0]
            members = member_cdf(x, cube, TAU, lo, hi)[0]
            assert np.all(np.diff(f) >= 0)
            np.testing.assert_allclose(f, TAU, atol=1e-9)
            assert np.all(members.min(axis=0) <= f + 1e-12)
            assert np.all(f <= members.max(axis=0) + 1e-12)


# 999 levels 0.001 ... 0.999. Beyond its extreme levels each member's tail mass is spread
# linearly out to L* = L - 0.1 (H - L) (the contract's member distribution), and L*, H* come
# from the widest member; so where one member's thin tail overlaps the other's bulk the pool
# departs from the normal mixture. With 99 levels (0.01 ... 0.99) this moves the 5% point of
# N(0,1) & N(2,1) by 0.034 (-1.3187 against -1.2845); with 999 levels the error is below
# 0.0025 for levels 0.05 ... 0.95 (and up to 0.03 at 0.01 for N(0,1) & N(0,4)), so the
# comparison is made there: a property of the tails, not of the pooling.
DENSE = np.round(np.arange(1, 1000) / 1000, 3)


def mixture_quantile(t: float, comps: Sequence[tuple[float, float]]) -> float:
    """Quantile of the equal-weight normal mixture (docs/methods.md §4, scipy brentq)."""
    return brentq(lambda v: np.mean([norm.cdf(v, m, s) for m, s in comps]) - t, -50, 50)


@pytest.mark.parametrize(
    ("comps", "q05_q50_q95", "vincent"),
    [
        # Check P1, docs/methods.md §4 (Lichtendahl et al. 2013): N(0,1) & N(2,1), w = 1/2
        (((0.0, 1.0), (2.0, 1.0)), (-1.2845, 1.0, 3.2845), (-0.6449, 1.0, 2.6449)),
        # Check P2, docs/methods.md §4: N(0,1) & N(0,2^2): 90% widths 5.2296 (pool), 4.9346
        # (Vincent)
        (((0.0, 1.0), (0.0, 2.0)), (-2.6148, 0.0, 2.6148), (-2.4673, 0.0, 2.4673)),
    ],
)
def test_dense_normal_members_give_the_mixture_and_the_median_is_sharper(
    comps: tuple[tuple[float, float], ...],
    q05_q50_q95: tuple[float, float, float],
    vincent: tuple[float, float, float],
) -> None:
    # Two normal members given by 999 quantiles; a signed quantity, so nothing is floored.
    # With no history, the weighted pool falls back to equal weights.
    parts = [
        rows(f"n{j}", norm.ppf(DENSE, m, s), quantity="growth", levels=DENSE)
        for j, (m, s) in enumerate(comps)
    ]
    res = build_ensemble(
        table(parts), NO_OBS, issued=D, settings=EnsembleSettings(signed=("growth",))
    )
    truth = np.array([mixture_quantile(t, comps) for t in DENSE])
    inner = (DENSE >= 0.05) & (DENSE <= 0.95)
    for method in ("weighted_pool", "equal_pool"):
        got = pooled(res, method)
        np.testing.assert_allclose(got.to_numpy()[inner], truth[inner], atol=3e-3)
        np.testing.assert_allclose(got.loc[[0.05, 0.5, 0.95]], q05_q50_q95, atol=3e-3)
    # the median of two members is their average: Vincentization, N(mean mu, mean sigma)
    qmed = pooled(res, "quantile_median")
    np.testing.assert_allclose(qmed.loc[[0.05, 0.5, 0.95]], vincent, atol=1e-4)
    # quantile averaging is sharper than the linear pool (Lichtendahl et al. 2013): a narrower
    # 90% interval here (docs/methods.md §4, P1: 3.2898 against 4.5690; P2: 4.9346 against
    # 5.2296)
    lop = pooled(res, "equal_pool")
    np.testing.assert_allclose(lop[0.95] - lop[0.05], q05_q50_q95[2] - q05_q50_q95[0], atol=5e-3)
    assert qmed[0.95] - qmed[0.05] < lop[0.95] - lop[0.05]


# --------------------------------------------------------------------------------------------
# ratings, fallbacks, members, floors, levels


def test_not_yet_rated_members_get_no_weight_and_say_why() -> None:
    # contract: fewer than --min-items scored items -> "not yet rated", weight 0
    fc, obs = history_two_rated(regions=8)
    newcomer = [
        rows(
            "newcomer",
            [90, 95, 100, 105, 110],
            region=f"r{i:02d}",
            issued=PAST,
            week_ending=PAST_WEEK,
        )
        for i in range(3)
    ]
    newcomer += [rows("newcomer", [90, 95, 100, 105, 110], region=f"r{i:02d}") for i in range(8)]
    res = build_ensemble(
        table([fc, *newcomer]), obs, issued=D, settings=EnsembleSettings(alpha=0.0)
    )
    w = res.weights.set_index("model")
    assert not w.loc["newcomer", "rated"]
    assert w.loc["newcomer", "weight"] == 0.0
    assert w.loc["newcomer", "n_items"] == 3
    assert w.loc["newcomer", "status"] == "not yet rated (3 scored items, 6 needed)"
    assert w.drop(index="newcomer")["rated"].all()
    assert w["weight"].sum() == pytest.approx(1.0)
    # with min_items 3 the newcomer is rated
    again = build_ensemble(
        table([fc, *newcomer]), obs, issued=D, settings=EnsembleSettings(alpha=0.0, min_items=3)
    )
    assert again.weights.set_index("model").loc["newcomer", "rated"]


def test_all_zero_weights_fall_back_to_equal_weights_with_a_note() -> None:
    # contract: every member with zero weight -> the weighted pool uses equal weights, says so
    fc, obs = history_two_rated(regions=4)  # 4 scored items < min_items 6
    res = build_ensemble(fc, obs, issued=D)
    assert not res.weights["rated"].any()
    np.testing.assert_allclose(res.weights["weight"], 1 / 3)
    (group,) = res.summary["groups"]
    assert group["equal_weight_fallback"] is True
    assert any(
        "no member is rated and above the cutoff" in n and "equal weights" in n for n in res.notes
    )
    for region in ("r00", "r02"):
        np.testing.assert_array_equal(
            pooled(res, "weighted_pool", region=region), pooled(res, "equal_pool", region=region)
        )
    # nothing known at all: the note names the reason
    none = build_ensemble(fc.loc[fc["issued"] == D], NO_OBS, issued=D)
    assert any(n.startswith("no observations are known before 2026-10-12") for n in none.notes)


def test_baseline_is_not_a_member_unless_included() -> None:
    # contract: a baseline is never an ensemble member unless include_baseline
    parts = [
        rows("team", [10, 12, 14, 16, 18]),
        rows("persistence", [1, 2, 3, 4, 5]),
        rows("naive", [30, 31, 32, 33, 34]),
    ]
    fc = table(parts)
    default = build_ensemble(fc, NO_OBS, issued=D)
    assert default.members == ("naive", "team")
    assert set(default.weights["model"]) == {"naive", "team"}
    included = build_ensemble(
        fc, NO_OBS, issued=D, settings=EnsembleSettings(include_baseline=True)
    )
    assert included.members == ("naive", "persistence", "team")
    assert included.summary["baseline_included"] is True
    named = build_ensemble(fc, NO_OBS, issued=D, settings=EnsembleSettings(baseline="naive"))
    assert named.members == ("persistence", "team")
    # a date where only the baseline forecasts has no members
    only = table([rows("persistence", [1, 2, 3, 4, 5], issued=PAST, week_ending=PAST_WEEK)])
    with pytest.raises(ConfigError, match="no member forecast is issued on 2026-10-05"):
        build_ensemble(only, NO_OBS, issued=PAST)


def test_counts_are_floored_at_zero_and_signed_quantities_are_not() -> None:
    # contract: pool quantiles floored at 0 for non-negative quantities
    q = [-4.0, -1.0, 2.0, 5.0, 9.0]
    fc = table([rows("a", q), rows("a", q, quantity="growth")])
    res = build_ensemble(fc, NO_OBS, issued=D, settings=EnsembleSettings(signed=("growth",)))
    e = res.ensemble
    for method in ("weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool"):
        counts = e.loc[(e["method"] == method) & (e["quantity"] == "admissions"), "value"]
        growth = e.loc[(e["method"] == method) & (e["quantity"] == "growth"), "value"]
        np.testing.assert_allclose(counts, np.maximum(q, 0.0))
        np.testing.assert_allclose(growth, q)


def test_pools_use_the_levels_every_member_gives() -> None:
    # contract: pool quantiles at the members' common levels
    wide_levels = [0.025, 0.05, 0.1, 0.25, 0.5, 0.75, 0.9, 0.95, 0.975]
    parts = [
        rows("wide", np.linspace(5, 45, 9), levels=wide_levels),
        rows("cm", [8, 15, 22, 30, 41]),
        rows("wide", np.linspace(5, 45, 9), levels=wide_levels, region="r01"),
    ]
    res = build_ensemble(table(parts), NO_OBS, issued=D)
    e = res.ensemble
    for method in ("weighted_pool", "equal_pool", "quantile_median", "recalibrated_pool"):
        both = e.loc[(e["method"] == method) & (e["region"] == "r00"), "level"]
        alone = e.loc[(e["method"] == method) & (e["region"] == "r01"), "level"]
        np.testing.assert_allclose(both, TAU)
        np.testing.assert_allclose(alone, wide_levels)
    # the quantile median of two members at a common level is their mean
    np.testing.assert_allclose(
        pooled(res, "quantile_median").loc[[0.05, 0.5, 0.95]],
        [(10 + 8) / 2, (25 + 22) / 2, (40 + 41) / 2],
    )


def test_history_ratings_are_those_of_the_scoring_engine() -> None:
    # contract: the weights come from `forebrief score` as of the last week before D on the
    # data known then; history_scores computes them without the interval scores, so compare.
    fc, obs = history_two_rated()
    h = history_scores(fc, obs, issued=D, settings=EnsembleSettings())
    ref = score_forecasts(
        fc.loc[fc["issued"] < D], obs, as_of=PAST_WEEK, settings=EnsembleSettings().score_settings()
    ).by_model
    assert h.as_of == PAST_WEEK
    assert h.ratings is not None
    mine = h.ratings.set_index(["quantity", "horizon", "model"]).sort_index()
    ref = ref.set_index(["quantity", "horizon", "model"]).sort_index()
    pd.testing.assert_frame_equal(
        mine[["n_cm_items", "calibration", "information"]],
        ref[["n_cm_items", "calibration", "information"]],
        check_exact=True,
        check_dtype=False,
    )


def test_history_without_an_observed_item_rates_nobody() -> None:
    fc, _ = history_two_rated()
    elsewhere = observations({("nowhere", PAST_WEEK): 5.0})
    res = build_ensemble(fc, elsewhere, issued=D)
    assert not res.weights["rated"].any()
    assert res.summary["groups"][0]["equal_weight_fallback"] is True


# --------------------------------------------------------------------------------------------
# robustness (leave one out)


def robustness_case() -> tuple[pd.DataFrame, pd.DataFrame]:
    """'rated' is scored on 8 past items, 'fresh' on 2 (not yet rated, weight 0)."""
    z = norm.ppf(TAU)
    x = np.linspace(60, 140, 8)
    parts = []
    for i in range(8):
        region = f"r{i:02d}"
        parts.append(
            rows("rated", x[i] * np.exp(0.2 * z), region=region, issued=PAST, week_ending=PAST_WEEK)
        )
        parts.append(rows("rated", 100 * np.exp(0.3 * z), region=region))
        if i < 2:
            parts.append(
                rows(
                    "fresh",
                    x[i] * np.exp(0.1 * z),
                    region=region,
                    issued=PAST,
                    week_ending=PAST_WEEK,
                )
            )
        # inside the rated member's range, so the support [L*, H*] does not move without it
        parts.append(rows("fresh", 120 * np.exp(0.05 * z), region=region))
    obs = observations({(f"r{i:02d}", PAST_WEEK): v for i, v in enumerate(x)})
    return table(parts), obs


def test_robustness_leave_one_out() -> None:
    fc, obs = robustness_case()
    res = build_ensemble(fc, obs, issued=D, settings=EnsembleSettings(alpha=0.0))
    w = res.weights.set_index("model")["weight"]
    assert w["rated"] == 1.0
    assert w["fresh"] == 0.0
    rob = res.robustness
    assert tuple(rob.columns) == ROBUSTNESS_COLUMNS
    assert len(rob) == 8 * 2  # every item x every member
    fresh = rob.loc[rob["left_out"] == "fresh"]
    rated = rob.loc[rob["left_out"] == "rated"]
    # leaving out a zero-weight member changes nothing
    assert (fresh["weight"] == 0.0).all()
    np.testing.assert_array_equal(fresh["median_change"], 0.0)
    np.testing.assert_array_equal(fresh["width_90_change"], 0.0)
    # leaving out the only weighted member leaves 'fresh' alone, with its own median
    assert (rated["weight"] == 1.0).all()
    np.testing.assert_allclose(rated["median"], 100.0)
    np.testing.assert_allclose(rated["median_without"], 120.0)
    np.testing.assert_allclose(rated["median_change"], 20.0)
    # the full pool's median is the weighted pool's median in ensemble.csv
    np.testing.assert_allclose(rob["median"].to_numpy()[:1], pooled(res, "weighted_pool")[0.5])
    np.testing.assert_allclose(rob["width_90"] + rob["width_90_change"], rob["width_90_without"])


# --------------------------------------------------------------------------------------------
# the command line


def write_season(
    root: Path,
    *,
    seed: int = 5,
    weeks: int = 10,
    scale_from: pd.Timestamp | None = None,
    factor: float = 1.0,
) -> tuple[Path, Path]:
    """An invented seeded season: four teams, five regions, horizons 1-2, weekly issue dates,
    observations first reported on the Monday after the week and revised a week later.

    ``scale_from`` / ``factor``: multiply every observation dated on or after that day.
    """
    rng = np.random.default_rng(seed)
    issues = pd.date_range("2026-09-07", periods=weeks, freq="7D")
    obs_weeks = pd.date_range("2026-08-01", periods=weeks + 7, freq="7D")
    regions = ["alderhook", "brackenmere", "cindervale", "dunmoss", "eskerfold"]
    truth = {
        r: dict(
            zip(
                obs_weeks,
                60 + 4 * np.arange(obs_weeks.size) + rng.normal(0, 5, obs_weeks.size),
                strict=True,
            )
        )
        for r in regions
    }
    teams = {
        "lanternfox": (0.0, 0.15),
        "mossgrove": (0.1, 0.3),
        "tidewick": (-0.08, 0.08),
        "emberlark": (0.0, 0.5),
    }
    z = norm.ppf(CM_LEVELS)
    folder = root / "forecasts"
    for team, (bias, sd) in teams.items():
        for j, issued in enumerate(issues):
            if team == "emberlark" and j < weeks - 3:
                continue  # a late joiner: not yet rated at first
            lines = []
            for region in regions:
                for h in (1, 2):
                    week = issued + pd.Timedelta(days=5 + 7 * (h - 1))
                    centre = truth[region][week] * np.exp(bias + rng.normal(0, 0.05))
                    q = np.round(centre * np.exp(sd * np.sqrt(h) * z), 1)
                    lines += [
                        f"{team},{region},admissions,{issued:%Y-%m-%d},{week:%Y-%m-%d},{lv},{v}"
                        for lv, v in zip(CM_LEVELS, q, strict=True)
                    ]
            path = folder / team / f"{issued:%Y-%m-%d}.csv"
            path.parent.mkdir(parents=True, exist_ok=True)
            path.write_text("\n".join([FORECAST_HEADER, *lines]) + "\n", encoding="utf-8")
    lines = []
    for region in regions:
        for week in obs_weeks:
            value = truth[region][week]
            if scale_from is not None and week >= scale_from:
                value *= factor
            first = week + pd.Timedelta(days=2)
            lines.append(
                f"{region},admissions,{week:%Y-%m-%d},{round(0.9 * value)},{first:%Y-%m-%d}"
            )
            lines.append(
                f"{region},admissions,{week:%Y-%m-%d},{round(value)},"
                f"{first + pd.Timedelta(days=7):%Y-%m-%d}"
            )
    obs = root / "observations.csv"
    obs.write_text("\n".join([OBS_HEADER, *lines]) + "\n", encoding="utf-8")
    return folder, obs


Run = Callable[..., tuple[int, str, str]]


ISSUE = pd.Timestamp("2026-10-26")  # the 8th issue date of write_season
OUTPUTS = ("ensemble.csv", "weights.csv", "robustness.csv", "ensemble_summary.json")


def ensemble_cli(
    run: Run, forecasts: Path, obs: Path, out: Path, *extra: object, issued: pd.Timestamp = ISSUE
) -> tuple[int, str, str]:
    return run(
        "ensemble",
        "--forecasts",
        forecasts,
        "--observations",
        obs,
        "--issued",
        f"{issued:%Y-%m-%d}",
        "--out",
        out,
        *extra,
    )


def test_ensemble_command_writes_the_documented_files(tmp_path: Path, run: Run) -> None:
    forecasts, obs = write_season(tmp_path)
    code, out, err = ensemble_cli(run, forecasts, obs, tmp_path / "out")
    assert code == 0, err
    for name in (*OUTPUTS, "excluded.csv"):
        assert (tmp_path / "out" / name).is_file()
    head = (tmp_path / "out" / "ensemble.csv").read_text(encoding="utf-8").splitlines()[0]
    assert head == ",".join(ENSEMBLE_COLUMNS)
    assert ENSEMBLE_COLUMNS == (
        "method",
        "region",
        "quantity",
        "issued",
        "week_ending",
        "horizon",
        "level",
        "value",
    )
    weights = pd.read_csv(tmp_path / "out" / "weights.csv")
    assert tuple(weights.columns) == WEIGHT_COLUMNS
    assert {
        "model",
        "quantity",
        "horizon",
        "calibration",
        "information",
        "combined",
        "weight",
        "rated",
        "status",
    } <= set(weights.columns)
    # the late joiner has fewer than 6 scored items on 2026-10-26
    late = weights.loc[weights["model"] == "emberlark"]
    assert (~late["rated"]).all()
    assert (late["weight"] == 0).all()
    assert late["status"].str.startswith("not yet rated").all()
    ens = pd.read_csv(tmp_path / "out" / "ensemble.csv")
    assert set(ens["method"]) == set(METHODS)
    assert (ens["issued"] == "2026-10-26").all()
    summary = json.loads((tmp_path / "out" / "ensemble_summary.json").read_text())
    assert summary["issued"] == "2026-10-26"
    assert summary["history_as_of"] == "2026-10-24"
    assert {g["horizon"] for g in summary["groups"]} == {1, 2}
    for g in summary["groups"]:
        assert {"alpha", "pool_calibration", "pool_information", "recalibration"} <= set(g)
    assert "Weighted-pool weights, issued 2026-10-26" in out
    assert "wrote ensemble.csv" in err


def test_fixed_alpha_and_auto(tmp_path: Path, run: Run) -> None:
    forecasts, obs = write_season(tmp_path)
    assert ensemble_cli(run, forecasts, obs, tmp_path / "fixed", "--alpha", "0.05")[0] == 0
    assert ensemble_cli(run, forecasts, obs, tmp_path / "auto")[0] == 0
    fixed = pd.read_csv(tmp_path / "fixed" / "weights.csv")
    assert (fixed["alpha"] == 0.05).all()
    passed = fixed["rated"] & (fixed["calibration"] >= 0.05)
    assert ((fixed["weight"] > 0) == passed).all() or not passed.any()
    summary = json.loads((tmp_path / "auto" / "ensemble_summary.json").read_text())
    for g in summary["groups"]:
        # the auto cutoff is 0 or one of the rated members' calibration scores
        auto = pd.read_csv(tmp_path / "auto" / "weights.csv")
        part = auto.loc[(auto["horizon"] == g["horizon"]) & auto["rated"], "calibration"]
        assert g["alpha_mode"] == "auto"
        assert g["alpha"] == 0.0 or np.isclose(part, g["alpha"], rtol=1e-9).any()
    fixed_summary = json.loads((tmp_path / "fixed" / "ensemble_summary.json").read_text())
    assert {g["alpha_mode"] for g in fixed_summary["groups"]} == {"fixed"}


@pytest.mark.parametrize("alpha", ["abc", "1.5", "-0.1"])
def test_a_bad_alpha_is_a_usage_error(tmp_path: Path, run: Run, alpha: str) -> None:
    forecasts, obs = write_season(tmp_path)
    code, _, err = ensemble_cli(run, forecasts, obs, tmp_path / "out", "--alpha", alpha)
    assert code == 2
    assert "--alpha must be 'auto' or a number in [0, 1]" in err
    assert alpha in err
    assert "Traceback" not in err
    assert not (tmp_path / "out" / "ensemble.csv").exists()


def test_an_issue_date_without_members_is_an_error(tmp_path: Path, run: Run) -> None:
    forecasts, obs = write_season(tmp_path)
    code, _, err = ensemble_cli(
        run, forecasts, obs, tmp_path / "out", issued=pd.Timestamp("2026-10-27")
    )
    assert code == 2
    assert "no member forecast is issued on 2026-10-27" in err
    assert "2026-10-26" in err  # the nearest issue date is named
    assert "Traceback" not in err


def test_baseline_command_and_include_baseline(tmp_path: Path, run: Run) -> None:
    forecasts, obs = write_season(tmp_path)
    target = forecasts / "persistence" / "2026-10-26.csv"
    code, _, err = run("baseline", "--observations", obs, "--issued", "2026-10-26", "--out", target)
    assert code == 0, err
    base = pd.read_csv(target)
    assert set(base["model"]) == {"persistence"}
    assert (base["issued"] == "2026-10-26").all()
    assert pd.to_datetime(base["week_ending"]).min() > pd.Timestamp("2026-10-26")
    assert (base["value"] >= 0).all()
    assert ensemble_cli(run, forecasts, obs, tmp_path / "without")[0] == 0
    assert ensemble_cli(run, forecasts, obs, tmp_path / "with", "--include-baseline")[0] == 0
    without = pd.read_csv(tmp_path / "without" / "weights.csv")
    with_ = pd.read_csv(tmp_path / "with" / "weights.csv")
    assert "persistence" not in set(without["model"])
    assert "persistence" in set(with_["model"])
    # before any observation there is nothing to persist
    code, _, err = run(
        "baseline", "--observations", obs, "--issued", "2026-07-01", "--out", tmp_path / "early.csv"
    )
    assert code == 2
    assert "no observation is known before 2026-07-01" in err


# --------------------------------------------------------------------------------------------
# the information barrier (the issue's wording)


def test_observations_on_or_after_the_issue_date_do_not_change_the_ensemble(
    tmp_path: Path, run: Run
) -> None:
    # multiplying every observation dated on or after D by 3 leaves ensemble.csv byte-identical
    f1, o1 = write_season(tmp_path / "a")
    f2, o2 = write_season(tmp_path / "b", scale_from=ISSUE, factor=3.0)
    assert o1.read_bytes() != o2.read_bytes()
    assert ensemble_cli(run, f1, o1, tmp_path / "out_a")[0] == 0
    assert ensemble_cli(run, f2, o2, tmp_path / "out_b")[0] == 0
    for name in OUTPUTS:
        assert (tmp_path / "out_a" / name).read_bytes() == (tmp_path / "out_b" / name).read_bytes()


def test_a_vintage_reported_after_the_issue_date_is_never_used(tmp_path: Path, run: Run) -> None:
    # the week ending 2026-10-24 is first reported on 2026-10-26 (= D, used) and revised on
    # 2026-11-02 (after D): change the revision wildly, and add one more late revision
    forecasts, obs = write_season(tmp_path)
    assert ensemble_cli(run, forecasts, obs, tmp_path / "before")[0] == 0
    text = obs.read_text(encoding="utf-8").splitlines()
    late = [
        i for i, line in enumerate(text) if line.endswith(",2026-11-02") and ",2026-10-24," in line
    ]
    assert late
    for i in late:
        region, quantity, week, _, reported = text[i].split(",")
        text[i] = f"{region},{quantity},{week},987654,{reported}"
    text.append("alderhook,admissions,2026-10-17,55555,2026-10-27")
    obs.write_text("\n".join(text) + "\n", encoding="utf-8")
    assert ensemble_cli(run, forecasts, obs, tmp_path / "after")[0] == 0
    for name in OUTPUTS:
        assert (tmp_path / "before" / name).read_bytes() == (tmp_path / "after" / name).read_bytes()
    # and the vintage reported on D itself is used: changing it changes the weights
    on_d = text.index(
        next(
            line
            for line in text
            if line.startswith("alderhook,admissions,2026-10-24,") and line.endswith(",2026-10-26")
        )
    )
    text[on_d] = "alderhook,admissions,2026-10-24,1,2026-10-26"
    obs.write_text("\n".join(text) + "\n", encoding="utf-8")
    ensemble_cli(run, forecasts, obs, tmp_path / "on_d")
    assert (tmp_path / "before" / "weights.csv").read_bytes() != (
        tmp_path / "on_d" / "weights.csv"
    ).read_bytes()
