"""The weekly run: validate -> score -> baseline -> ensembles -> back-test -> facts -> narrative.

Nothing here writes files: :func:`run_briefing` returns every table and text of the record,
and :mod:`forebrief.record.archive` writes them. The only observations used are those known on the
issue date D (weeks ending before D, vintages reported on or before D), so a record can be
rebuilt later and gives the same answer whatever data arrived afterwards.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from typing import Any

import pandas as pd

from forebrief.app.config import BriefingConfig
from forebrief.app.workflow import Inputs
from forebrief.errors import ConfigError
from forebrief.report.facts import BriefingFacts, build_facts
from forebrief.report.narrative import Narrative, build_narrative, narrative_text
from forebrief.tables.backtest import BacktestResult, backtest, issue_dates_between
from forebrief.tables.compare import choose_headline
from forebrief.tables.ensemble import (
    EnsembleResult,
    EnsembleSettings,
    build_ensemble,
    history_scores,
    with_baseline,
)
from forebrief.tables.nowcast import nowcast_table, settle_delay
from forebrief.tables.observations import revisions_between
from forebrief.tables.scoring import ScoreResult, ScoreSettings, score_forecasts
from forebrief.version import __version__

__all__ = ["STAGES", "BriefingRun", "known_by", "latest_issue_date", "run_briefing"]

STAGES: tuple[str, ...] = (
    "reading and checking inputs",
    "nowcast of the provisional weeks",
    "scoring the models",
    "persistence baseline",
    "building the ensembles",
    "back-testing",
    "facts and narrative",
    "rendering",
    "writing the record",
)


@dataclass(frozen=True)
class BriefingRun:
    """Everything one weekly run produced (tables, facts and text), ready to be written."""

    issued: pd.Timestamp
    config: BriefingConfig
    inputs: Inputs
    scores: ScoreResult | None
    ensemble: EnsembleResult
    backtest: BacktestResult | None
    facts: BriefingFacts
    narrative: Narrative
    text: str
    baseline: pd.DataFrame
    baseline_generated: bool
    nowcast: pd.DataFrame = field(default_factory=pd.DataFrame)
    settle: Mapping[str, Any] = field(default_factory=dict)
    headline: tuple[Mapping[str, Any], ...] = ()

    def tables(self) -> dict[str, pd.DataFrame]:
        """The record's tables, by file name."""
        empty = pd.DataFrame()
        out = {
            "scores_by_model.csv": self.scores.by_model if self.scores else empty,
            "scores_by_model_region.csv": self.scores.by_model_region if self.scores else empty,
            "scores_by_item.csv": self.scores.by_item if self.scores else empty,
            "ensemble.csv": self.ensemble.ensemble,
            "weights.csv": self.ensemble.weights,
            "robustness.csv": self.ensemble.robustness,
            "backtest_scores.csv": self.backtest.scores if self.backtest else empty,
            "weights_history.csv": self.backtest.weights_history if self.backtest else empty,
            "excluded.csv": self.inputs.excluded,
            "nowcast.csv": self.nowcast,
        }
        if self.baseline_generated:
            out["baseline.csv"] = self.baseline
        return out


def latest_issue_date(forecasts: pd.DataFrame, *, baseline: str | None) -> pd.Timestamp:
    """The latest issue date among the member forecasts."""
    f = forecasts if baseline is None else forecasts.loc[forecasts["model"] != baseline]
    if f.empty:
        raise ConfigError(
            "the forecasts hold no usable rows, so there is no issue date; fix: "
            "run forebrief check on them and correct the errors it lists"
        )
    return pd.Timestamp(f["issued"].max())


def known_by(observations: pd.DataFrame, issued: pd.Timestamp) -> pd.DataFrame:
    """Every vintage known on ``issued``: weeks ending before it, reported on or before it."""
    mask = observations["week_ending"] < issued
    if "reported" in observations and observations["reported"].notna().any():
        mask &= observations["reported"].isna() | (observations["reported"] <= issued)
    return observations.loc[mask].reset_index(drop=True)


def run_briefing(
    cfg: BriefingConfig,
    inputs: Inputs,
    *,
    issued: pd.Timestamp | None = None,
    previous: Mapping[str, Any] | None = None,
    stage: Callable[[str], None] | None = None,
) -> BriefingRun:
    """Run the whole weekly job on validated inputs; returns the record's contents."""
    step = stage or (lambda _name: None)
    forecasts = inputs.forecasts.table
    d = (
        pd.Timestamp(issued)
        if issued is not None
        else latest_issue_date(forecasts, baseline=cfg.baseline)
    )
    obs = known_by(inputs.observations.table, d)
    step("nowcast of the provisional weeks")
    settle = settle_info(obs, issued=d, setting=cfg.settle_weeks)
    nowcast = nowcast_table(obs, as_of=d, recent_weeks=cfg.nowcast_weeks)
    settings = EnsembleSettings(
        window=cfg.window,
        alpha=cfg.alpha,
        min_items=cfg.min_items,
        baseline=cfg.baseline,
        levels=cfg.levels,
        overshoot=cfg.overshoot,
        background=cfg.background,
        power=cfg.power,
        signed=cfg.signed,
        settle_weeks=int(settle["weeks"]),
    )
    step("persistence baseline")
    member_dates = issue_dates_between(forecasts, pd.Timestamp.min, d, exclude={cfg.baseline})
    table, generated = with_baseline(
        forecasts,
        obs,
        issue_dates=member_dates,
        name=cfg.baseline,
        horizons=cfg.horizons,
        signed=cfg.signed,
    )
    baseline = table.loc[(table["model"] == cfg.baseline) & (table["issued"] == d)]
    baseline = baseline.drop(columns=["horizon"], errors="ignore").reset_index(drop=True)
    step("scoring the models")
    # The members are scored (and the cutoff chosen) on a panel without the baseline, exactly
    # as `forebrief ensemble` does; the baseline joins only for relative WIS, which compares
    # weighted interval scores pairwise and does not depend on the panel.
    history = history_scores(forecasts, obs, issued=d, settings=settings)
    scores = None
    if history.as_of is not None:
        alpha = 0.05 if cfg.alpha == "auto" else float(cfg.alpha)
        score_settings = ScoreSettings(
            window=cfg.window,
            alpha=alpha,
            baseline=cfg.baseline,
            levels=cfg.levels,
            overshoot=cfg.overshoot,
            background=cfg.background,
            power=cfg.power,
        )
        members = forecasts.loc[(forecasts["issued"] < d) & (forecasts["model"] != cfg.baseline)]
        scores = score_forecasts(
            members, history.observations, as_of=history.as_of, settings=score_settings
        )
        with_base = score_forecasts(
            table.loc[table["issued"] < d],
            history.observations,
            as_of=history.as_of,
            settings=score_settings,
        )
    step("building the ensembles")
    ens = build_ensemble(forecasts, obs, issued=d, settings=settings, history=history)
    if scores is not None:
        scores = _with_relative(scores, with_base, cfg.baseline, weights=ens.weights)
    step("back-testing")
    start = d - pd.Timedelta(days=7 * cfg.backtest_weeks)
    end = d - pd.Timedelta(days=1)
    bt = None
    if issue_dates_between(forecasts, start, end, exclude={cfg.baseline}):
        bt = backtest(forecasts, obs, start=start, end=end, settings=settings, rating_date=d)
    headline = choose_headlines(cfg, ens, bt)
    step("facts and narrative")
    revisions = pd.DataFrame(
        columns=["region", "quantity", "week_ending", "value_then", "value_now", "change"]
    )
    if previous and previous.get("issued"):
        revisions = revisions_between(
            inputs.observations.table, earlier=pd.Timestamp(previous["issued"]), later=d
        )
        revisions = revisions.loc[revisions["week_ending"] < d]
    facts = build_facts(
        cfg=cfg,
        issued=d,
        tool_version=__version__,
        observations=obs,
        forecasts=table,
        scores=scores,
        ensemble=ens,
        backtest=bt,
        excluded=inputs.excluded,
        previous=previous,
        revisions=revisions,
        nowcast=nowcast,
        settle=settle,
        headline=headline,
    )
    narrative = build_narrative(facts)
    text = narrative_text(facts, narrative)
    return BriefingRun(
        d,
        cfg,
        inputs,
        scores,
        ens,
        bt,
        facts,
        narrative,
        text,
        baseline,
        generated,
        nowcast,
        settle,
        headline,
    )


def settle_info(
    observations: pd.DataFrame, *, issued: pd.Timestamp, setting: int | str
) -> dict[str, Any]:
    """The settle delay used for ratings on ``issued``, and where it came from.

    ``setting`` is the configuration's ``settle_weeks``: a number is used as given; ``"auto"``
    estimates it from the vintages known on ``issued`` (:func:`forebrief.tables.nowcast.
    settle_delay`). Without vintages the delay is 0 and revisions cannot be checked.
    """
    has_vintages = bool(
        "reported" in observations
        and observations["reported"].notna().any()
        and observations.duplicated(["region", "quantity", "week_ending"]).any()
    )
    if setting != "auto":
        weeks, source = int(setting), "configured"
    elif has_vintages:
        weeks, source = int(settle_delay(observations, as_of=issued)), "estimated"
    else:
        weeks, source = 0, "no vintages"
    return {"weeks": weeks, "source": source, "has_vintages": has_vintages}


def choose_headlines(
    cfg: BriefingConfig, ens: EnsembleResult, bt: BacktestResult | None
) -> tuple[dict[str, Any], ...]:
    """The headline combination of each quantity, chosen on its back-test record.

    ``[ensemble] headline = "auto"`` applies the rule of :func:`forebrief.tables.compare.
    choose_headline` (the median of the models unless another combination did clearly
    better); a method name forces that combination.
    """
    methods = [str(m) for m in dict.fromkeys(ens.ensemble["method"])]
    forced = None if cfg.headline == "auto" else cfg.headline
    quantities = sorted(set(ens.ensemble["quantity"]))
    out = []
    empty = pd.DataFrame(
        columns=["model", "region", "quantity", "week_ending", "horizon", "issued", "wis"]
    )
    for q in quantities:
        by_item = bt.by_item if bt is not None else empty
        entry = choose_headline(
            by_item,
            quantity=q,
            default="quantile_median",
            candidates=[m for m in methods if m != "quantile_median"],
            forced=forced,
        )
        out.append({"quantity": q, **entry})
    return tuple(out)


def _with_relative(
    scores: ScoreResult, with_base: ScoreResult, baseline: str, *, weights: pd.DataFrame
) -> ScoreResult:
    """Members' scores (panel without the baseline) with relative WIS against the baseline.

    The baseline's own row comes from the run that includes it (its Classical Model columns use
    that panel), so leadership can see it beside the models. The per-model table's ``weight``
    is the ensemble's (``weights``, the rows of weights.csv: optimised cutoff and the
    not-yet-rated rule), so scores_by_model.csv and weights.csv agree; a model without a row
    there (the baseline, a model not issuing this week) has weight nan.
    """
    from dataclasses import replace

    def merge(ours: pd.DataFrame, theirs: pd.DataFrame, keys: list[str]) -> pd.DataFrame:
        rel = theirs[[*keys, "relative_wis"]]
        out = ours.drop(columns=["relative_wis"]).merge(rel, on=keys, how="left")
        out = out[list(ours.columns)]
        base = theirs.loc[theirs["model"] == baseline, list(ours.columns)].assign(
            weight=float("nan")
        )  # the baseline is not a member: it has no weight
        return (
            pd.concat([out, base], ignore_index=True)
            .sort_values(keys, kind="stable")
            .reset_index(drop=True)
        )

    keys = ["quantity", "horizon", "model"]
    by_model = merge(scores.by_model, with_base.by_model, keys)
    used = weights.loc[weights["model"] != baseline, [*keys, "weight"]].astype(
        {"horizon": by_model["horizon"].dtype}
    )
    by_model = by_model.drop(columns=["weight"]).merge(
        used, on=keys, how="left", validate="one_to_one"
    )[list(by_model.columns)]
    return replace(
        scores,
        by_model=by_model,
        by_model_region=merge(
            scores.by_model_region,
            with_base.by_model_region,
            ["quantity", "horizon", "region", "model"],
        ),
        by_item=pd.concat(
            [scores.by_item, with_base.by_item.loc[with_base.by_item["model"] == baseline]],
            ignore_index=True,
        ),
    )
