"""Rolling out-of-sample evaluation of the ensembles against their members and the baseline.

For every issue date in a period the three ensembles are built with only what was known on
that date (:func:`forebrief.tables.ensemble.build_ensemble`); afterwards everything is scored together
on the targets that have since been observed, with the latest data. This is the evidence behind
"has the combined forecast beaten 'same as last week'?".
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from forebrief.errors import ConfigError
from forebrief.tables.ensemble import EnsembleSettings, build_ensemble, settled_on, with_baseline
from forebrief.tables.observations import observations_as_of
from forebrief.tables.scoring import ScoreSettings, score_forecasts

__all__ = ["BacktestResult", "backtest", "issue_dates_between"]


@dataclass(frozen=True)
class BacktestResult:
    """Scores of ensembles, members and baseline over a period, and the weights used."""

    scores: pd.DataFrame  # one row per (model or method, quantity, horizon)
    by_item: pd.DataFrame  # every model x item scored
    weights_history: pd.DataFrame
    issue_dates: tuple[pd.Timestamp, ...]
    as_of: pd.Timestamp
    baseline: str | None
    notes: tuple[str, ...] = field(default_factory=tuple)
    ensembles: pd.DataFrame = field(default_factory=pd.DataFrame)


def issue_dates_between(
    forecasts: pd.DataFrame,
    start: pd.Timestamp,
    end: pd.Timestamp,
    *,
    exclude: set[str] | None = None,
) -> list[pd.Timestamp]:
    """The issue dates of member forecasts from ``start`` to ``end`` inclusive."""
    f = forecasts
    if exclude:
        f = f.loc[~f["model"].isin(exclude)]
    dates = f.loc[(f["issued"] >= start) & (f["issued"] <= end), "issued"].unique()
    return [pd.Timestamp(d) for d in sorted(dates)]


def backtest(
    forecasts: pd.DataFrame,
    observations: pd.DataFrame,
    *,
    start: pd.Timestamp,
    end: pd.Timestamp,
    settings: EnsembleSettings | None = None,
    progress: Callable[[int, int], None] | None = None,
    rating_date: pd.Timestamp | None = None,
) -> BacktestResult:
    """Back-test the ensembles for every issue date from ``start`` to ``end``.

    The baseline named in ``settings`` (default ``persistence``) is generated for each issue
    date from the data known then, unless the forecasts already contain it; a generated
    baseline is scored but, unless ``include_baseline``, not shown to the ensembles, so each
    date's ensemble is the one :func:`build_ensemble` gives on ``forecasts``. Scoring uses the
    latest vintage of every observation. Cost: one ensemble build per issue date plus one
    scoring run over the period.
    """
    settings = settings or EnsembleSettings()
    start, end = pd.Timestamp(start), pd.Timestamp(end)
    if end < start:
        raise ConfigError(
            f"--to {end:%Y-%m-%d} is before --from {start:%Y-%m-%d}; fix: swap the dates"
        )
    baseline = settings.baseline
    exclude = {baseline} if baseline and not settings.include_baseline else set()
    dates = issue_dates_between(forecasts, start, end, exclude=exclude)
    if not dates:
        raise ConfigError(
            f"no member forecast is issued between {start:%Y-%m-%d} and {end:%Y-%m-%d}; "
            "fix: choose dates inside the forecasts' issue dates"
        )
    notes: list[str] = []
    table = forecasts
    if baseline:
        # only the horizons the members forecast: a baseline alone at a horizon is no yardstick
        members = forecasts.loc[forecasts["issued"].isin(dates) & ~forecasts["model"].isin(exclude)]
        horizons = tuple(int(h) for h in sorted(members["horizon"].unique()))
        table, generated = with_baseline(
            forecasts,
            observations,
            issue_dates=dates,
            name=baseline,
            horizons=horizons,
            signed=settings.signed,
        )
        if generated:
            notes.append(
                f"baseline {baseline!r} generated for each issue date from the data "
                "known on that date"
            )
    # The ensembles see the forecasts exactly as `forebrief ensemble` would on each date: a
    # baseline generated here for scoring stays out of the members' scoring panel (it would
    # widen the intrinsic ranges and so change every information score), unless it is a member.
    pool_from = table if settings.include_baseline else forecasts
    ensembles, weights = [], []
    for i, d in enumerate(dates):
        ens = build_ensemble(pool_from, observations, issued=d, settings=settings)
        ensembles.append(ens.ensemble)
        weights.append(ens.weights)
        notes.extend(f"{d:%Y-%m-%d}: {n}" for n in ens.notes)
        if progress is not None:
            progress(i + 1, len(dates))
    pooled = pd.concat(ensembles, ignore_index=True).rename(columns={"method": "model"})
    period = table.loc[(table["issued"] >= start) & (table["issued"] <= end)]
    everything = pd.concat([period, pooled[period.columns]], ignore_index=True)
    latest = observations_as_of(observations, as_of=pd.Timestamp.max.normalize())
    latest = latest.assign(reported=pd.NaT).astype({"reported": "datetime64[ns]"})
    if latest.empty:
        raise ConfigError("the observations are empty: nothing can be back-tested")
    if settings.settle_weeks > 0:
        # only targets settled on the rating date are scored (default: the day after the
        # latest observed week, i.e. the next issue date)
        day = (
            pd.Timestamp(rating_date)
            if rating_date is not None
            else pd.Timestamp(latest["week_ending"].max()) + pd.Timedelta(days=2)
        )
        latest = settled_on(latest, day, settings.settle_weeks)
        if latest.empty:
            raise ConfigError(
                f"no observed week is settled ({settings.settle_weeks} weeks old) on "
                f"{day:%Y-%m-%d}: nothing can be back-tested; fix: use --settle-weeks 0 or "
                "a later date"
            )
    as_of = pd.Timestamp(latest["week_ending"].max())
    window = max(1, math.ceil((as_of - start).days / 7) + 1)
    scored = score_forecasts(
        everything,
        latest,
        as_of=as_of,
        settings=ScoreSettings(
            window=window,
            alpha=0.0,
            baseline=baseline,
            levels=settings.levels,
            overshoot=settings.overshoot,
            background=settings.background,
            power=settings.power,
        ),
    )
    methods = set(pooled["model"].unique())
    scores = scored.by_model.copy()
    kind = np.where(
        scores["model"].isin(methods),
        "ensemble",
        np.where(scores["model"] == baseline, "baseline", "member"),
    )
    scores.insert(3, "kind", kind)
    scores = scores.drop(columns=["weight", "passes_cutoff", "equal_weights"])
    history = pd.concat(weights, ignore_index=True)
    return BacktestResult(
        scores=scores.reset_index(drop=True),
        by_item=scored.by_item,
        weights_history=history,
        issue_dates=tuple(dates),
        as_of=as_of,
        baseline=baseline,
        notes=tuple(notes) + scored.notes,
        ensembles=pooled,
    )
