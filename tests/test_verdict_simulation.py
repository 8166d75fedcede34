"""Simulation study of the model verdicts: size and power on simulated seasons.

Each season has 6 regions x 12 target weeks x 4 horizons, plus the jurisdiction total (the sum
of the regions) as a seventh series that every team also forecasts. The truth, per region, is
a log-scale AR(1) process (coefficient 0.9) around a seasonal wave that everyone knows, with
weekly surprises whose variance is 30% common to all regions in that week (a moderate shared
shock) and 70% the region's own; counts are the truth rounded to whole numbers. A forecast made
h weeks ahead knows the truth up to its issue week, so its predictive log-scale sd grows with
h, and the forecasts of one target week made 1..4 weeks ahead have correlated errors. The
calibrated team forecasts the exact quantiles of the conditional (predictive) distribution of
the rounded count; its total forecast is the lognormal with the mean and variance of the
correlated sum (Fenton 1960, IRE Trans. Commun. Syst. 8:57-67; pages from memory). The other teams distort the
same forecasts on the log scale: a third of the spread, 2.5 times the spread, and the level
times 1.35 or divided by 1.35.

The verdicts come from :func:`forebrief.core.verdict.rate_record` on the items kept by
:func:`forebrief.core.verdict.evidence_units` (the total dropped), at test level 0.05.
Requirements (from the issue): the calibrated team is "reliable" in >= 90% of seasons; the
others are named "overconfident", "underconfident", "biased high" and "biased low" in >= 95%.

Share of seasons per verdict, 300 seasons, seed 20260601 (``python
tests/test_verdict_simulation.py`` prints the table again; measured when this was written):

===================  ========  =====  =====  =====  =====  ======  ======
team                 reliable  over   under  b.hi   b.lo   unrel.  n.y.r.
===================  ========  =====  =====  =====  =====  ======  ======
calibrated           0.923     0.007  0.010  0.020  0.013  0.027   0
a third of spread    0         0.970  0      0.017  0.013  0       0
2.5 x spread         0.013     0      0.987  0      0      0       0
level x 1.35         0         0      0      1.000  0      0       0
level / 1.35         0.003     0      0      0      0.997  0       0
===================  ========  =====  =====  =====  =====  ======  ======

For comparison, the counting this replaces (all 336 items of a season pooled over the 4
horizons and the total, Cooke's chi-square test at power 1, the clearest p-value naming the
failure) called the calibrated team "reliable" in 14% of these seasons and the team 35% too
high "overconfident" in 59%; at power 0.25 the calibrated team was "reliable" in 64%.
:func:`test_pooling_every_item_would_fail_the_calibrated_team` keeps the first of these.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass

import numpy as np
import pytest
from scipy.stats import chi2, norm, power_divergence

from forebrief.core.verdict import VERDICT_NAMES, Verdict, evidence_units, rate_record
from forebrief.tables.schema import CM_LEVELS, cm_probabilities

P = cm_probabilities(CM_LEVELS)  # (.05, .20, .25, .25, .20, .05), Cooke 1991 ch. 12
Z = norm.ppf(CM_LEVELS)
N_REGIONS, N_WEEKS, N_HORIZONS = 6, 12, 4
TOTAL = N_REGIONS  # region code of the jurisdiction total
N_SEASONS = 300
SEED = 20260601
PHI = 0.9  # AR(1) coefficient of the log-scale deviations from the wave
COMMON = 0.3  # share of each week's surprise variance common to all regions
SIGMA = np.array([0.20, 0.18, 0.16, 0.15, 0.13, 0.12])  # weekly log-scale surprise sd
START = np.array([30.0, 60.0, 90.0, 150.0, 250.0, 400.0])  # counts at the wave's base

#: (log-scale spread factor, log-scale shift) of each team's distortion
TEAMS: dict[str, tuple[float, float]] = {
    "calibrated": (1.0, 0.0),
    "a third of spread": (1.0 / 3.0, 0.0),
    "2.5 x spread": (2.5, 0.0),
    "level x 1.35": (1.0, math.log(1.35)),
    "level / 1.35": (1.0, -math.log(1.35)),
}
EXPECTED = {
    "a third of spread": "overconfident",
    "2.5 x spread": "underconfident",
    "level x 1.35": "biased high",
    "level / 1.35": "biased low",
}


@dataclass(frozen=True)
class Seasons:
    """Simulated bins (season, region incl. total, week, horizon) per team, and the log-scale
    errors and PITs of the calibrated team's regional forecasts (season, region, week,
    horizon)."""

    bins: dict[str, np.ndarray]
    error: np.ndarray
    pit: np.ndarray


def simulate(rng: np.random.Generator, n_seasons: int) -> Seasons:
    """The seasons of the module docstring, vectorised over seasons."""
    r, t_weeks, n_h = N_REGIONS, N_WEEKS, N_HORIZONS
    span = t_weeks + n_h  # the first n_h weeks are history before the first target week
    sigma = SIGMA[None, :, None]
    phase = rng.uniform(-0.6, 0.6, size=(n_seasons, 1, 1))
    weeks = np.arange(span)[None, None, :]
    wave = np.log(START)[None, :, None] + 1.6 * np.sin(np.pi * (weeks / (span - 1) + phase))
    shock = sigma * (
        math.sqrt(COMMON) * rng.standard_normal((n_seasons, 1, span))
        + math.sqrt(1 - COMMON) * rng.standard_normal((n_seasons, r, span))
    )
    dev = np.zeros((n_seasons, r, span))
    dev[..., 0] = shock[..., 0] / math.sqrt(1 - PHI**2) if PHI < 1 else shock[..., 0]
    for t in range(1, span):
        dev[..., t] = PHI * dev[..., t - 1] + shock[..., t]
    counts = np.round(np.exp(wave + dev))
    total = counts.sum(axis=1)
    targets = np.arange(n_h, span)
    corr = np.where(np.eye(r, dtype=bool), 1.0, COMMON)[None, :, :, None]
    bins = {name: np.empty((n_seasons, r + 1, t_weeks, n_h), dtype=np.int64) for name in TEAMS}
    pit = np.empty((n_seasons, r, t_weeks, n_h))
    error = np.empty((n_seasons, r, t_weeks, n_h))
    for h in range(1, n_h + 1):
        mean = wave[..., targets] + PHI**h * dev[..., targets - h]  # (season, region, week)
        sd = np.broadcast_to(
            SIGMA[None, :, None] * math.sqrt(np.sum(PHI ** (2 * np.arange(h)))), mean.shape
        )
        observed = counts[..., targets]
        error[..., h - 1] = np.log(observed) - mean
        pit[..., h - 1] = norm.cdf(error[..., h - 1] / sd)
        # Fenton-Wilkinson: lognormal with the mean and variance of the correlated sum
        m = np.exp(mean + sd**2 / 2)
        cov = m[:, :, None] * m[:, None, :] * np.expm1(corr * sd[:, :, None] * sd[:, None, :])
        mt, vt = m.sum(axis=1), cov.sum(axis=(1, 2))
        st = np.sqrt(np.log1p(vt / mt**2))
        lt = np.log(mt) - st**2 / 2
        for name, (scale, shift) in TEAMS.items():
            # exact quantiles of the rounded count: rounding is monotone
            q = np.round(np.exp(mean[..., None] + shift + scale * sd[..., None] * Z))
            bins[name][:, :r, :, h - 1] = (q < observed[..., None]).sum(axis=-1)
            qt = np.round(np.exp(lt[..., None] + shift + scale * st[..., None] * Z))
            bins[name][:, r, :, h - 1] = (qt < total[..., targets, None]).sum(axis=-1)
    return Seasons(bins, error, pit)


def _layout() -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(region, week, horizon) of each item of one season, in the order of ``bins[s].ravel()``."""
    shape = (N_REGIONS + 1, N_WEEKS, N_HORIZONS)
    region = np.broadcast_to(np.arange(shape[0])[:, None, None], shape).ravel()
    week = np.broadcast_to(np.arange(shape[1])[None, :, None], shape).ravel()
    horizon = np.broadcast_to(np.arange(1, shape[2] + 1)[None, None, :], shape).ravel()
    return region, week, horizon


def rate_seasons(bins: np.ndarray, *, with_total: bool = False) -> list[Verdict]:
    """Verdict of every season: the total dropped by :func:`evidence_units`, or (with_total)
    counted as if it were a seventh region."""
    region, week, horizon = _layout()
    units = evidence_units(region, week, total=None if with_total else TOTAL)
    k = units.keep
    return [
        rate_record(
            b.ravel()[k],
            target=units.target[k],
            week=units.week[k],
            horizon=horizon[k],
            probabilities=P,
            rated=True,
            test_level=0.05,
        )
        for b in bins
    ]


def size_power_table(seasons: Seasons) -> dict[str, dict[str, float]]:
    """Share of seasons per verdict, per team."""
    out: dict[str, dict[str, float]] = {}
    for name, bins in seasons.bins.items():
        got = Counter(v.verdict for v in rate_seasons(bins))
        out[name] = {v: got[v] / len(bins) for v in VERDICT_NAMES}
    return out


@pytest.fixture(scope="module")
def seasons() -> Seasons:
    return simulate(np.random.default_rng(SEED), N_SEASONS)


@pytest.fixture(scope="module")
def table(seasons: Seasons) -> dict[str, dict[str, float]]:
    return size_power_table(seasons)


# --------------------------------------------------------------------------------------------
# the simulation is what it claims to be


def test_the_calibrated_team_is_calibrated_by_construction(seasons: Seasons) -> None:
    # Over 200 seasons x 288 regional forecasts the bin shares match p within 0.01 (a share's
    # binomial sd is below 0.002 even with the dependence inflating it several times).
    b = seasons.bins["calibrated"][:, :N_REGIONS]
    shares = np.bincount(b.ravel(), minlength=P.size) / b.size
    np.testing.assert_allclose(shares, P, atol=0.01)
    # the lognormal total is only approximately calibrated (Fenton-Wilkinson), within 0.03
    t = seasons.bins["calibrated"][:, TOTAL]
    np.testing.assert_allclose(np.bincount(t.ravel(), minlength=P.size) / t.size, P, atol=0.03)


def test_horizons_of_one_target_and_regions_of_one_week_are_dependent(seasons: Seasons) -> None:
    # the dependence the verdicts must allow for: PITs of one target week forecast 1 and 4
    # weeks ahead, and PITs of two regions in the same week (4-week-ahead) are correlated
    z = norm.ppf(np.clip(seasons.pit, 1e-9, 1 - 1e-9))
    across_h = np.corrcoef(z[..., 0].ravel(), z[..., 3].ravel())[0, 1]
    across_r = np.corrcoef(z[:, 0, :, 3].ravel(), z[:, 1, :, 3].ravel())[0, 1]
    # AR(1) theory: the 4-week error is e_t + 0.9 e_(t-1) + 0.81 e_(t-2) + 0.729 e_(t-3) and
    # the 1-week error is e_t, so their correlation is 1 / sqrt(sum 0.9^(2k)) = 0.58
    ar = math.sqrt(sum(PHI ** (2 * k) for k in range(4)))
    assert across_h == pytest.approx(1 / ar, abs=0.05)
    # two regions' errors share COMMON = 0.3 of their variance (rounding adds a little noise)
    assert across_r == pytest.approx(COMMON, abs=0.05)
    # the forecast errors spread more the further ahead: AR(1) theory gives the sd ratio
    # sqrt(1 + 0.9^2 + 0.9^4 + 0.9^6) = 1.73 between 4 and 1 weeks ahead
    sd = seasons.error.std(axis=(0, 1, 2))
    assert np.all(np.diff(sd) > 0)
    assert sd[3] / sd[0] == pytest.approx(ar, rel=0.02)


# --------------------------------------------------------------------------------------------
# size and power


def test_the_calibrated_team_is_reliable_in_at_least_90_percent_of_seasons(
    table: dict[str, dict[str, float]],
) -> None:
    assert table["calibrated"]["reliable"] >= 0.90, table["calibrated"]
    # and the test is not so timid that it never fails (its nominal level is 5%)
    assert table["calibrated"]["reliable"] < 1.0


@pytest.mark.parametrize("team", list(EXPECTED))
def test_each_miscalibrated_team_is_named_in_at_least_95_percent_of_seasons(
    team: str, table: dict[str, dict[str, float]]
) -> None:
    assert table[team][EXPECTED[team]] >= 0.95, table[team]


def test_the_total_adds_no_evidence(seasons: Seasons) -> None:
    # With the total's items in the input, evidence_units drops them: the verdicts and their
    # numbers equal those from the regional items alone.
    region, week, horizon = _layout()
    regional = region != TOTAL
    units = evidence_units(region[regional], week[regional], total=None)
    for name in ("calibrated", "level x 1.35"):
        bins = seasons.bins[name][:40]
        with_total = rate_seasons(bins)
        alone = [
            rate_record(
                b.ravel()[regional],
                target=units.target,
                week=units.week,
                horizon=horizon[regional],
                probabilities=P,
                rated=True,
            )
            for b in bins
        ]
        assert with_total == alone
        assert {v.n_evidence for v in with_total} == {N_REGIONS * N_WEEKS}
        assert {v.n_items for v in with_total} == {N_REGIONS * N_WEEKS * N_HORIZONS}


def test_counting_the_total_as_a_region_adds_a_unit_per_week(seasons: Seasons) -> None:
    # the contrast: without the exclusion the total becomes 12 more target weeks of evidence
    v = rate_seasons(seasons.bins["calibrated"][:5], with_total=True)
    assert {x.n_evidence for x in v} == {(N_REGIONS + 1) * N_WEEKS}


def test_pooling_every_item_would_fail_the_calibrated_team(seasons: Seasons) -> None:
    # The defect this design fixes: pooling the 4 horizons and the total as 336 independent
    # items, Cooke's test (chi2.sf(G, 5), G from scipy's power_divergence) rejects the
    # calibrated team far more often than its 5% level.
    b = seasons.bins["calibrated"].reshape(N_SEASONS, -1)
    counts = np.stack([np.bincount(row, minlength=P.size) for row in b])
    g = power_divergence(
        counts, P * counts.sum(axis=1, keepdims=True), axis=1, lambda_="log-likelihood"
    ).statistic
    passed = float(np.mean(chi2.sf(g, df=P.size - 1) >= 0.05))
    assert passed < 0.5  # 14% when this was written


if __name__ == "__main__":  # print the size/power table of the module docstring
    result = size_power_table(simulate(np.random.default_rng(SEED), N_SEASONS))
    print(f"{'team':20s}" + "".join(f"{v[:13]:>15s}" for v in VERDICT_NAMES))
    for team, row in result.items():
        print(f"{team:20s}" + "".join(f"{row[v]:15.3f}" for v in VERDICT_NAMES))
