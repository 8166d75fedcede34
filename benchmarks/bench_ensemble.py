"""Benchmark of the ensembles and the back-test on seeded synthetic data (a script, not a test).

The data are invented: a log-scale random walk per region for the observed weekly counts, and
members whose quantiles are lognormal-shaped around a noisy median, each with its own bias and
spread factor, so that their calibration and information differ. Sizes follow the issue: 50
regions x 4 horizons x 30 members x 23 levels per issue date, with a 12-week history.

Run ``python benchmarks/bench_ensemble.py`` (all parts), or with ``--part build``,
``--part backtest --weeks 8`` or ``--profile`` to see where the time goes (cProfile).
Targets: one ``build_ensemble`` under 5 s; a 52-week back-test in minutes, not hours.
"""

from __future__ import annotations

import argparse
import cProfile
import pstats
import time

import numpy as np
import pandas as pd
from scipy.stats import norm

from forebrief.tables.backtest import backtest
from forebrief.tables.ensemble import EnsembleSettings, build_ensemble
from forebrief.tables.schema import STANDARD_LEVELS

FIRST_ISSUE = pd.Timestamp("2027-01-04")  # a Monday; targets end on Saturdays


def synthetic(
    *,
    n_regions: int = 50,
    n_horizons: int = 4,
    n_members: int = 30,
    n_issues: int = 13,
    seed: int = 20270104,
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Seeded forecasts (validated-table layout, with ``horizon``) and observations.

    ``n_issues`` weekly issue dates from :data:`FIRST_ISSUE`; observations cover every target
    week up to the last issue date's last horizon. O(rows) with numpy.
    """
    rng = np.random.default_rng(seed)
    levels = np.array(STANDARD_LEVELS)
    n_weeks = n_issues + n_horizons + 1
    first_week = FIRST_ISSUE - pd.Timedelta(days=2)  # the Saturday before the first issue
    weeks = first_week + pd.to_timedelta(7 * np.arange(n_weeks), unit="D")
    level0 = rng.uniform(np.log(20), np.log(2000), n_regions)
    steps = rng.normal(0.0, 0.15, (n_regions, n_weeks))
    truth = np.exp(level0[:, None] + np.cumsum(steps, axis=1))  # (regions, weeks)
    observed = np.round(truth)
    bias = rng.normal(0.0, 0.1, n_members)
    spread = rng.uniform(0.5, 2.0, n_members)
    z = norm.ppf(levels)

    issue_idx, region_idx, h_idx, m_idx = np.meshgrid(
        np.arange(n_issues),
        np.arange(n_regions),
        np.arange(1, n_horizons + 1),
        np.arange(n_members),
        indexing="ij",
    )
    issue_idx, region_idx, h_idx, m_idx = (a.ravel() for a in (issue_idx, region_idx, h_idx, m_idx))
    target_week = issue_idx + h_idx  # index into weeks: the Saturday h weeks after issue - 2 d
    sd = 0.12 * np.sqrt(h_idx) * spread[m_idx]
    centre = (
        np.log(truth[region_idx, target_week])
        + bias[m_idx] * h_idx
        + rng.normal(0.0, 0.12 * np.sqrt(h_idx))
    )
    values = np.round(np.exp(centre[:, None] + sd[:, None] * z[None, :]), 1)
    values = np.maximum.accumulate(values, axis=1)  # rounding must not make them cross
    k = levels.size
    issued = FIRST_ISSUE + pd.to_timedelta(7 * issue_idx, unit="D")
    forecasts = pd.DataFrame(
        {
            "model": np.repeat(np.array([f"team{j:02d}" for j in range(n_members)])[m_idx], k),
            "region": np.repeat(
                np.array([f"zone{r:02d}" for r in range(n_regions)])[region_idx], k
            ),
            "quantity": "admissions",
            "issued": np.repeat(issued.to_numpy(), k),
            "week_ending": np.repeat(weeks[target_week].to_numpy(), k),
            "level": np.tile(levels, issue_idx.size),
            "value": values.ravel(),
            "horizon": np.repeat(h_idx, k).astype(np.int64),
        }
    )
    rr, ww = np.meshgrid(np.arange(n_regions), np.arange(n_weeks), indexing="ij")
    observations = pd.DataFrame(
        {
            "region": np.array([f"zone{r:02d}" for r in range(n_regions)])[rr.ravel()],
            "quantity": "admissions",
            "week_ending": weeks[ww.ravel()].to_numpy(),
            "value": observed.ravel(),
            "reported": pd.NaT,
        }
    ).astype({"reported": "datetime64[ns]"})
    return forecasts, observations


def _timed(label: str, fn, *args, **kwargs):  # type: ignore[no-untyped-def]
    start = time.perf_counter()
    out = fn(*args, **kwargs)
    seconds = time.perf_counter() - start
    print(f"{label}: {seconds:.2f} s", flush=True)
    return out, seconds


def bench_build(*, profile: bool = False) -> float:
    """One issue date with a 12-week history; returns the seconds of ``build_ensemble``."""
    forecasts, observations = synthetic(n_issues=13)
    issued = FIRST_ISSUE + pd.Timedelta(weeks=12)
    today = int((forecasts["issued"] == issued).sum())
    print(
        f"build: {len(forecasts):,} forecast rows ({today:,} issued on {issued:%Y-%m-%d}), "
        f"{len(observations):,} observations"
    )
    settings = EnsembleSettings()
    if profile:
        with cProfile.Profile() as prof:
            result, seconds = _timed(
                "build_ensemble (profiled)",
                build_ensemble,
                forecasts,
                observations,
                issued=issued,
                settings=settings,
            )
        pstats.Stats(prof).sort_stats("cumulative").print_stats(25)
    else:
        build_ensemble(forecasts, observations, issued=issued, settings=settings)  # warm-up
        result, seconds = _timed(
            "build_ensemble",
            build_ensemble,
            forecasts,
            observations,
            issued=issued,
            settings=settings,
        )
    print(
        f"  {len(result.ensemble):,} ensemble rows, {len(result.robustness):,} robustness "
        f"rows, alpha per horizon {[g['alpha'] for g in result.summary['groups']]}"
    )
    return seconds


def bench_backtest(weeks: int, *, profile: bool = False) -> float:
    """A back-test over ``weeks`` issue dates, each with a 12-week history before it."""
    forecasts, observations = synthetic(n_issues=12 + weeks)
    start = FIRST_ISSUE + pd.Timedelta(weeks=12)
    end = start + pd.Timedelta(weeks=weeks - 1)
    print(f"backtest: {weeks} issue dates, {len(forecasts):,} forecast rows")
    if profile:
        with cProfile.Profile() as prof:
            result, seconds = _timed(
                f"backtest {weeks} weeks (profiled)",
                backtest,
                forecasts,
                observations,
                start=start,
                end=end,
            )
        pstats.Stats(prof).sort_stats("cumulative").print_stats(30)
    else:
        result, seconds = _timed(
            f"backtest {weeks} weeks", backtest, forecasts, observations, start=start, end=end
        )
    print(
        f"  {seconds / weeks:.2f} s per issue date; {len(result.scores)} score rows, "
        f"{len(result.weights_history):,} weight rows"
    )
    return seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--part", choices=("all", "build", "backtest"), default="all")
    parser.add_argument("--weeks", type=int, default=52, help="back-test issue dates (52)")
    parser.add_argument("--profile", action="store_true", help="print a cProfile summary")
    args = parser.parse_args()
    if args.part in ("all", "build"):
        seconds = bench_build(profile=args.profile)
        print(f"  target < 5 s: {'met' if seconds < 5 else 'NOT met'}")
    if args.part in ("all", "backtest"):
        bench_backtest(args.weeks, profile=args.profile)


if __name__ == "__main__":
    main()
