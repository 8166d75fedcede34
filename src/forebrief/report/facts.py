"""BriefingFacts: everything a reader will see, computed, rounded and labelled here.

The narrative and the templates only place these values; they do no arithmetic. Every number
is stored both as a number (for tables and charts) and, where a sentence uses it, as the exact
text that the sentence prints, so a test can check each sentence's numbers against the facts.

Wording follows published guidance on communicating uncertainty: give the probability as a
number or a frequency ("a 9 in 10 chance"), not a bare verbal term (Spiegelhalter 2017, Annu.
Rev. Stat. Appl. 4:31-60; Budescu et al. 2014, Nat. Clim. Change 4:508-512); where a verbal term
is used it follows the IPCC calibrated scale with its number beside it (Mastrandrea et al. 2010,
IPCC AR5 guidance note). A 50% range is never called "likely" (IPCC: likely means >= 66%).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import asdict, dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from forebrief.core.classical import calibration_score
from forebrief.core.distributions import pool_cdf
from forebrief.core.verdict import evidence_units, rate_record
from forebrief.report.settings import BriefingConfig
from forebrief.tables.schema import CM_LEVELS, cm_probabilities

__all__ = [
    "CAUTIONS",
    "BriefingFacts",
    "ModelVerdict",
    "OutlookRow",
    "build_facts",
    "chance_text",
    "format_count",
    "verdict_from_bins",
]

#: The standard cautions printed in every briefing (sources in docs/conventions.md §4).
CAUTIONS: tuple[str, ...] = (
    "Forecasts more than one or two weeks ahead are much less reliable than near-term ones; "
    "treat the three- and four-week outlook as a rough guide only.",
    "A forecast assumes that current conditions continue; it is not a scenario of what a "
    "policy change would do.",
    "The latest weeks of data are provisional: reporting delays mean they are often revised "
    "upward, so the most recent counts may rise.",
    "The models do not always agree; where they disagree the combined range is wider, and "
    "where one model carries most of the weight the combined forecast depends on it.",
    "A well-calibrated 90% range still misses about 1 week in 10.",
    "This briefing informs decisions; it does not make them. Local public-health authority "
    "and professional judgment come first.",
)


# --------------------------------------------------------------------------------------------
# formatting (every number a reader sees is formatted here)


def round_count(x: float) -> float:
    """Weekly counts: whole numbers; from 1,000 up, the nearest 10 (common practice, no source)."""
    if not math.isfinite(x):
        return x
    return float(round(x, -1) if abs(x) >= 1000 else round(x))


def format_count(x: float) -> str:
    """A rounded count with a thousands separator, e.g. 1,240."""
    if not math.isfinite(x):
        return "n/a"
    return f"{round_count(x):,.0f}"


def format_rate(x: float) -> str:
    """A rate per 100,000 with one decimal."""
    return "n/a" if not math.isfinite(x) else f"{x:,.1f}"


def round_probability(p: float) -> float:
    """Probabilities to the nearest 5 percentage points, kept inside [0.01, 0.99]."""
    if not math.isfinite(p):
        return p
    r = round(p * 20) / 20
    return min(max(r, 0.01), 0.99) if 0 < p < 1 else r


def chance_text(p: float) -> str:
    """A probability as a frequency a lay reader can use: 'about 7 in 10'.

    Tenths, as in Spiegelhalter (2017); below 1 in 20 and above 19 in 20 the text says so
    rather than rounding to "0 in 10" or "10 in 10".
    """
    if not math.isfinite(p):
        return "unknown"
    if p < 0.05:
        return "less than 1 in 20"
    if p > 0.95:
        return "more than 19 in 20"
    if p < 0.15:
        return "about 1 in 10" if p >= 0.075 else "about 1 in 20"
    if p > 0.85:
        return "about 9 in 10" if p <= 0.925 else "about 19 in 20"
    return f"about {_tenths(p)} in 10"  # half up: 0.25 -> 3 in 10, not round()'s 2


def percent_text(p: float) -> str:
    if not math.isfinite(p):
        return "n/a"
    if p < 0.05:
        return "under 5%"
    if p > 0.95:
        return "over 95%"
    return f"{round_probability(p) * 100:.0f}%"


# --------------------------------------------------------------------------------------------
# the facts


@dataclass(frozen=True)
class OutlookRow:
    """The weighted pool's outlook for one region, quantity and horizon."""

    region: str
    region_name: str
    is_total: bool
    quantity: str
    quantity_name: str
    unit: str
    horizon: int
    week_ending: str
    week_ending_text: str
    median: float
    median_text: str
    range50: tuple[float, float]
    range50_text: str
    range50_low_text: str
    range50_high_text: str
    range90: tuple[float, float]
    range90_text: str
    range90_low_text: str
    range90_high_text: str
    below_text: str
    above_text: str
    last_value: float
    last_value_text: str
    last_week: str
    last_week_text: str
    last_provisional: bool
    change: float
    change_text: str
    change_percent: float | None
    direction: str
    p_above_last: float
    p_above_last_text: str
    threshold: float | None
    threshold_text: str | None
    threshold_label: str | None
    p_above_threshold: float | None
    p_above_threshold_text: str | None
    median_rate: float | None
    median_rate_text: str | None
    range90_rate_text: str | None
    width90_relative: float
    width90_relative_text: str
    member_spread_ratio: float | None
    agreement: str
    dominant_model: str | None
    n_members: int
    baseline_median: float | None
    #: expected complete count of the last week once late reports are in (None if complete)
    last_value_nowcast: float | None = None
    last_value_nowcast_range90: tuple[float, float] | None = None
    last_value_nowcast_text: str | None = None
    last_value_nowcast_range90_text: str | None = None
    #: the value ``direction`` and ``p_above_last`` compare with: the nowcast, else the report
    reference_text: str = "n/a"
    method: str = "weighted_pool"
    method_label: str = ""


@dataclass(frozen=True)
class ModelVerdict:
    """A plain verdict on one model for one quantity, with the numbers behind it.

    ``n_items`` and ``bins`` count the scored forecasts used as evidence (every horizon shown;
    the total's dropped where its regions were rated); ``calibration`` is the verdict's
    calibration test p-value; ``outside_90``, ``expected_outside_90`` and ``below_median`` are
    the target-week counts the explanation cites (forecasts ``pattern_horizon`` weeks ahead).
    See :mod:`forebrief.core.verdict`.
    """

    model: str
    quantity: str
    quantity_name: str
    verdict: str
    explanation: str
    n_items: int
    calibration: float | None
    information: float | None
    weight: float
    weight_text: str
    relative_wis: float | None
    relative_wis_text: str
    outside_90: int
    expected_outside_90: float
    below_median: int
    bins: tuple[int, ...]
    #: target weeks of evidence (region and week; the total only where no region was rated)
    n_evidence: int = 0
    #: what the calibration test counts: n_evidence / the design effect of regions moving together
    n_effective: float = 0.0
    #: the horizon of the forecasts the explanation and the pattern tests count
    pattern_horizon: int = 0


@dataclass(frozen=True)
class TrackRow:
    """How one method did over the back-test, for one quantity and horizon."""

    method: str
    label: str
    quantity: str
    horizon: int
    n_items: int
    relative_wis: float | None
    relative_wis_text: str
    vs_baseline_text: str
    in_50: int
    in_90: int
    in_50_text: str
    in_90_text: str
    expected_in_90: int = 0


@dataclass(frozen=True)
class BriefingFacts:
    """Everything the briefing shows, as computed, rounded and labelled values."""

    title: str
    audience: str
    jurisdiction: str
    contact: str
    issued: str
    issued_text: str
    data_as_of: str
    data_as_of_text: str
    history_as_of: str | None
    tool_version: str
    horizons: tuple[int, ...]
    quantities: tuple[Mapping[str, str], ...]
    regions: tuple[Mapping[str, Any], ...]
    total_region: str | None
    total_available: bool
    total_note: str
    outlook: tuple[OutlookRow, ...]
    verdicts: tuple[ModelVerdict, ...]
    track: tuple[TrackRow, ...]
    track_weeks: int
    track_total: tuple[Mapping[str, Any], ...]
    calibration_by_region: tuple[Mapping[str, Any], ...]
    weights: tuple[Mapping[str, Any], ...]
    alpha: tuple[Mapping[str, Any], ...]
    changes: Mapping[str, Any]
    data_notes: Mapping[str, Any]
    summary: Mapping[str, Any] = field(default_factory=dict)
    #: one entry per quantity: the combination the outlook uses, why, and the figures
    headline: tuple[Mapping[str, Any], ...] = ()
    #: target weeks not yet scored because they may still be revised
    settle: Mapping[str, Any] = field(default_factory=dict)
    cautions: tuple[str, ...] = CAUTIONS
    methods: Mapping[str, Any] = field(default_factory=dict)
    history: Mapping[str, Any] = field(default_factory=dict)

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


# --------------------------------------------------------------------------------------------
# verdicts


VERDICTS = (
    "reliable",
    "overconfident",
    "underconfident",
    "biased high",
    "biased low",
    "unreliable",
    "not yet rated",
)


def verdict_from_bins(
    bins: Sequence[int], *, passes: bool, rated: bool, test_level: float = 0.05
) -> tuple[str, str]:
    """A plain verdict from pooled Classical Model bin counts and the caller's calibration test.

    For counts that are already independent evidence (one observation per target week): each
    count becomes its own target week and the rules of :mod:`forebrief.core.verdict` name
    the pattern (a bias before overconfidence when the misses fall on one side), with
    ``passes`` deciding "reliable". Counts pooled over horizons or over a total and its
    regions are not independent; the briefing rates per-item bins with
    :func:`forebrief.core.verdict.rate_record` instead.
    """
    b = np.asarray(bins, dtype=np.int64)
    p = cm_probabilities(CM_LEVELS)
    if b.shape != p.shape:
        raise ValueError(
            f"verdict_from_bins needs the {p.size} bin counts of the "
            f"5/25/50/75/95% quantiles; got {b.size}"
        )
    items = np.repeat(np.arange(b.size), b)
    codes = np.arange(items.size)
    # horizon 0: not known, so the explanation names none
    v = rate_record(
        items,
        target=codes,
        week=codes,
        horizon=np.zeros(items.size, dtype=np.int64),
        probabilities=p,
        rated=rated,
        test_level=test_level,
        passes=passes,
    )
    return v.verdict, v.explanation


# --------------------------------------------------------------------------------------------
# building


def _date(d: Any) -> str:
    return "" if d is None or pd.isna(d) else pd.Timestamp(d).strftime("%Y-%m-%d")


def date_text(d: Any) -> str:
    """A date as a reader says it: '5 December 2026'."""
    if d is None or (not isinstance(d, str) and pd.isna(d)) or d == "":
        return ""
    t = pd.Timestamp(d)
    return f"{t.day} {t:%B %Y}"


def _range_text(lo: float, hi: float) -> str:
    return f"{format_count(lo)} to {format_count(hi)}"


def _levels_text(levels: Sequence[float]) -> str:
    """(0.05, 0.25, 0.5) -> '5, 25 and 50%'."""
    pcts = [f"{lv * 100:g}" for lv in levels]
    return (", ".join(pcts[:-1]) + " and " + pcts[-1] + "%") if len(pcts) > 1 else f"{pcts[0]}%"


def _pct_off(value: float, centre: float, side: str) -> str:
    if centre <= 0 or not math.isfinite(value):
        return "n/a"
    return f"{abs(value - centre) / centre * 100:.0f}% {side}"


def _nowcast_map(nowcast: pd.DataFrame | None) -> dict[tuple[str, str, pd.Timestamp], int]:
    """Row position of each incomplete week's nowcast, by (region, quantity, week_ending)."""
    if nowcast is None or nowcast.empty:
        return {}
    out = {}
    for pos, r in enumerate(nowcast.itertuples(index=False)):
        if not bool(r.complete) and math.isfinite(float(r.nowcast)):
            out[(str(r.region), str(r.quantity), pd.Timestamp(r.week_ending))] = pos
    return out


#: Levels at which the nowcast distribution is sampled to integrate P(next week > last week):
#: the midpoints of 40 equal-probability slices (midpoint rule; common practice, no source).
_NOWCAST_GRID = (np.arange(40) + 0.5) / 40

#: "about the same": the forecast median within 5% of last week's (nowcast) value (our
#: convention; common practice, no source). Outside that band the direction is up or down.
DIRECTION_BAND = 0.05


def direction_of(median: float, reference: float) -> str:
    """'up', 'down' or 'about the same' (within :data:`DIRECTION_BAND` of the reference)."""
    if not (math.isfinite(median) and math.isfinite(reference)):
        return "unknown"
    change = median - reference
    if change == 0 or (reference > 0 and abs(change) / reference < DIRECTION_BAND):
        return "about the same"
    return "up" if change > 0 else "down"


def _method_cdf(
    ensemble: Any, method: str, rows: pd.DataFrame, pool_idx: np.ndarray, x: np.ndarray
) -> np.ndarray:
    """CDF of ``method``'s forecast for each row at the points ``x`` (rows, p).

    The reliability-weighted pool uses its exact mixture of the members; every other
    combination uses its own quantiles as a piecewise-linear distribution with the members'
    support (the same construction, one member with weight 1).
    """
    pool = ensemble.pool
    if len(rows) == 0:
        return np.zeros((0, x.shape[1]))
    if method == "weighted_pool":
        return pool_cdf(
            x,
            pool.values[pool_idx],
            pool.levels,
            pool.weights[pool_idx],
            pool.lower[pool_idx],
            pool.upper[pool_idx],
        )
    levels = np.array(sorted(c for c in rows.columns if isinstance(c, float)))
    q = rows[list(levels)].to_numpy(dtype=float)[:, None, :]
    q = np.maximum.accumulate(np.nan_to_num(q, nan=-np.inf), axis=2)  # guard rounding
    q = np.where(np.isfinite(q), q, np.nan)
    lower = np.minimum(pool.lower[pool_idx], np.nanmin(q[:, 0, :], axis=1))
    upper = np.maximum(pool.upper[pool_idx], np.nanmax(q[:, 0, :], axis=1))
    return pool_cdf(x, q, levels, np.ones((len(rows), 1)), lower, upper)


def _outlook(
    cfg: BriefingConfig,
    ensemble: Any,
    last_obs: pd.DataFrame,
    provisional_weeks: set[tuple[str, str, pd.Timestamp]],
    baseline_medians: Mapping[tuple[str, str, pd.Timestamp], float],
    *,
    nowcast: pd.DataFrame | None = None,
    methods: Mapping[str, str] | None = None,
) -> list[OutlookRow]:
    """One row per region, quantity and horizon, from each quantity's headline combination."""
    from forebrief.tables.nowcast import nowcast_quantiles

    methods = dict(methods or {})
    e = ensemble.ensemble
    chosen = e["quantity"].map(lambda q: methods.get(q, "weighted_pool"))
    sel = e.loc[e["method"] == chosen]
    wide = sel.pivot_table(
        index=["region", "quantity", "week_ending", "horizon"],
        columns="level",
        values="value",
        aggfunc="first",
    )
    need = [0.05, 0.25, 0.5, 0.75, 0.95]
    cols = {t: next((c for c in wide.columns if abs(c - t) < 1e-6), None) for t in need}
    if any(v is None for v in cols.values()):
        return []
    wide.columns = [float(c) for c in wide.columns]
    wide = wide.reset_index()
    wide = wide.loc[wide["horizon"].isin(cfg.horizons)].reset_index(drop=True)
    pool = ensemble.pool
    key = {
        tuple(r): i
        for i, r in enumerate(
            pool.items[["region", "quantity", "week_ending", "horizon"]].itertuples(
                index=False, name=None
            )
        )
    }
    idx = np.array(
        [
            key[(r.region, r.quantity, r.week_ending, r.horizon)]
            for r in wide.itertuples(index=False)
        ],
        dtype=np.int64,
    )
    last_map = {
        (r.region, r.quantity): (float(r.value), pd.Timestamp(r.week_ending))
        for r in last_obs.itertuples(index=False)
    }
    now_pos = _nowcast_map(nowcast)
    now_q = (
        nowcast_quantiles(nowcast, _NOWCAST_GRID)
        if now_pos and nowcast is not None
        else np.zeros((0, _NOWCAST_GRID.size))
    )
    n = len(wide)
    last_vals = np.full(n, np.nan)
    grid = np.zeros((n, _NOWCAST_GRID.size))
    has_now = np.zeros(n, dtype=bool)
    now_rows: list[int | None] = []
    for j, r in enumerate(wide.itertuples(index=False)):
        last, week = last_map.get((r.region, r.quantity), (math.nan, None))
        last_vals[j] = last
        pos = now_pos.get((r.region, r.quantity, week)) if week is not None else None
        now_rows.append(pos)
        if pos is not None:
            grid[j] = now_q[pos]
            has_now[j] = np.isfinite(now_q[pos]).all()
    thr = [cfg.threshold(r.region, r.quantity) for r in wide.itertuples(index=False)]
    thr_vals = np.array([t.value if t else np.nan for t in thr])
    f = np.zeros((n, 2))
    f_grid = np.zeros((n, _NOWCAST_GRID.size))
    method_of = wide["quantity"].map(lambda q: methods.get(q, "weighted_pool")).to_numpy()
    for method in sorted(set(method_of)):
        m_rows = np.flatnonzero(method_of == method)
        x = np.column_stack(
            [np.nan_to_num(last_vals[m_rows], nan=0.0), np.nan_to_num(thr_vals[m_rows], nan=0.0)]
        )
        part = wide.iloc[m_rows]
        f[m_rows] = _method_cdf(ensemble, method, part, idx[m_rows], x)
        if has_now[m_rows].any():
            f_grid[m_rows] = _method_cdf(
                ensemble, method, part, idx[m_rows], np.nan_to_num(grid[m_rows], nan=0.0)
            )
    members = ~np.isnan(pool.values).all(axis=2)
    rob = ensemble.robustness
    rows = []
    for j, r in enumerate(wide.itertuples(index=False)):
        method = str(method_of[j])
        q = {t: float(wide.iloc[j][cols[t]]) for t in need}
        med = round_count(q[0.5])
        lo50, hi50 = round_count(q[0.25]), round_count(q[0.75])
        lo90, hi90 = round_count(q[0.05]), round_count(q[0.95])
        last, last_week = last_map.get((r.region, r.quantity), (math.nan, None))
        pos = now_rows[j]
        now_v: float | None = None
        now_lo = now_hi = math.nan
        if pos is not None and nowcast is not None:
            nr = nowcast.iloc[pos]
            now_v = round_count(float(nr["nowcast"]))
            now_lo = round_count(float(nr["nowcast_low90"]))
            now_hi = round_count(float(nr["nowcast_high90"]))
        reference = (
            now_v if now_v is not None else (round_count(last) if math.isfinite(last) else math.nan)
        )
        change = med - reference if math.isfinite(reference) else math.nan
        pct = (change / reference * 100) if math.isfinite(reference) and reference > 0 else None
        direction = direction_of(med, reference)
        if has_now[j]:
            # P(next week > last week's complete count): average over the nowcast distribution
            p_last = float(np.mean(1.0 - f_grid[j]))
        else:
            p_last = 1.0 - float(f[j, 0]) if math.isfinite(last) else math.nan
        t = thr[j]
        p_thr = (1.0 - float(f[j, 1])) if t is not None else None
        info = cfg.quantity_info(r.quantity)
        region_info = cfg.regions.get(r.region)
        pop = region_info.population if region_info else None
        rate = (q[0.5] / pop * 1e5) if pop else None
        width_rel = (q[0.95] - q[0.05]) / q[0.5] if q[0.5] > 0 else math.inf
        i = idx[j]
        present = members[i]
        med_members = pool.values[i][present][:, _level_col(pool.levels, 0.5)]
        spread = (
            float(np.nanmax(med_members) - np.nanmin(med_members)) if med_members.size > 1 else 0.0
        )
        width = q[0.95] - q[0.05]
        ratio = spread / width if width > 0 else None
        agreement = (
            "the models broadly agree"
            if ratio is None or ratio <= 0.5
            else "the models disagree"
            if ratio > 1.0
            else "the models differ somewhat"
        )
        dominant = None
        if method == "weighted_pool":
            sub = rob.loc[
                (rob["region"] == r.region)
                & (rob["quantity"] == r.quantity)
                & (rob["week_ending"] == r.week_ending)
                & (rob["horizon"] == r.horizon)
            ]
            if not sub.empty:
                top = sub.sort_values("weight", ascending=False).iloc[0]
                shift = abs(top["median_change"]) / q[0.5] if q[0.5] > 0 else 0.0
                if top["weight"] >= 0.5 and shift >= 0.10:
                    dominant = str(top["left_out"])
        rows.append(
            OutlookRow(
                region=r.region,
                region_name=cfg.region_name(r.region),
                is_total=(r.region == cfg.total_region),
                quantity=r.quantity,
                quantity_name=info.name,
                unit=info.unit,
                horizon=int(r.horizon),
                week_ending=_date(r.week_ending),
                week_ending_text=date_text(r.week_ending),
                median=med,
                median_text=format_count(med),
                range50=(lo50, hi50),
                range50_text=_range_text(lo50, hi50),
                range50_low_text=format_count(lo50),
                range50_high_text=format_count(hi50),
                range90=(lo90, hi90),
                range90_text=_range_text(lo90, hi90),
                range90_low_text=format_count(lo90),
                range90_high_text=format_count(hi90),
                below_text=_pct_off(lo90, med, "below"),
                above_text=_pct_off(hi90, med, "above"),
                last_value=round_count(last) if math.isfinite(last) else math.nan,
                last_value_text=format_count(last),
                last_week=_date(last_week),
                last_week_text=date_text(last_week),
                last_provisional=(r.region, r.quantity, last_week) in provisional_weeks,
                change=change,
                change_text=format_count(abs(change)) if math.isfinite(change) else "n/a",
                change_percent=None if pct is None else round(pct),
                direction=direction,
                p_above_last=round_probability(p_last),
                p_above_last_text=chance_text(p_last),
                threshold=None if t is None else t.value,
                threshold_text=None if t is None else format_count(t.value),
                threshold_label=None if t is None else t.label,
                p_above_threshold=None if p_thr is None else round_probability(p_thr),
                p_above_threshold_text=None if p_thr is None else chance_text(p_thr),
                median_rate=None if rate is None else round(rate, 1),
                median_rate_text=None if rate is None else format_rate(rate),
                range90_rate_text=None
                if not pop
                else f"{format_rate(q[0.05] / pop * 1e5)} to {format_rate(q[0.95] / pop * 1e5)}",
                width90_relative=round(width_rel, 2) if math.isfinite(width_rel) else width_rel,
                width90_relative_text=f"{width_rel * 100:.0f}%"
                if math.isfinite(width_rel)
                else "n/a",
                member_spread_ratio=None if ratio is None else round(ratio, 2),
                agreement=agreement,
                dominant_model=dominant,
                n_members=int(present.sum()),
                baseline_median=baseline_medians.get((r.region, r.quantity, r.week_ending)),
                last_value_nowcast=now_v,
                last_value_nowcast_range90=None if now_v is None else (now_lo, now_hi),
                last_value_nowcast_text=None if now_v is None else format_count(now_v),
                last_value_nowcast_range90_text=None
                if now_v is None
                else _range_text(now_lo, now_hi),
                reference_text=format_count(reference),
                method=method,
                method_label=METHOD_LABELS.get(method, method),
            )
        )
    rows.sort(key=lambda o: (not o.is_total, o.quantity, o.region_name, o.horizon))
    return rows


def _level_col(levels: np.ndarray, t: float) -> int:
    return int(np.flatnonzero(np.abs(levels - t) < 1e-6)[0])


def _verdicts(
    cfg: BriefingConfig,
    scores: pd.DataFrame,
    weights: pd.DataFrame,
    relative: pd.DataFrame,
    *,
    test_level: float,
    items: pd.DataFrame | None,
) -> list[ModelVerdict]:
    """One verdict per (model, quantity), from the per-item bins of the horizons shown.

    ``items`` is the scores' ``by_item`` table. Evidence is counted by
    :func:`forebrief.core.verdict.rate_record`: one unit per region and target week (the
    total's items dropped for weeks in which the model's regions were scored), regions of a
    week clustered. The history rule is unchanged: a model is rated when its scored items over
    the horizons shown (its total's included) number at least ``cfg.min_items`` per horizon
    of ``scores``. ``cfg.power``, the calibration power of the weights, is not applied: the
    verdict counts its evidence itself.
    """
    if scores.empty or items is None or items.empty:
        return []
    s = scores.loc[scores["horizon"].isin(cfg.horizons)]
    bins_cols = [c for c in s.columns if c.startswith("bin_")]
    scored = items.loc[items["horizon"].isin(cfg.horizons) & items["bin"].notna()]
    by_record = dict(iter(scored.groupby(["model", "quantity"], sort=False)))
    p = cm_probabilities(cfg.levels)
    out = []
    members = set(weights["model"])
    for (model, quantity), part in s.groupby(["model", "quantity"], sort=True):
        if model not in members:
            continue
        n_scored = int(part[bins_cols].to_numpy(dtype=float).sum())
        rated = n_scored >= cfg.min_items * len(part)
        rows = by_record.get((model, quantity), scored.iloc[:0])
        region, region_names = pd.factorize(rows["region"])
        week, _ = pd.factorize(rows["week_ending"])
        total = (
            int(np.flatnonzero(region_names == cfg.total_region)[0])
            if cfg.total_region is not None and cfg.total_region in set(region_names)
            else None
        )
        units = evidence_units(region.astype(np.int64), week.astype(np.int64), total=total)
        keep = units.keep
        bins = rows["bin"].to_numpy(dtype=np.int64)[keep]
        v = rate_record(
            bins,
            target=units.target[keep],
            week=units.week[keep],
            horizon=rows["horizon"].to_numpy(dtype=np.int64)[keep],
            probabilities=p,
            rated=rated,
            test_level=test_level,
        )
        counts = np.bincount(bins, minlength=p.size)
        cal = v.calibration_p
        w = weights.loc[
            (weights["model"] == model)
            & (weights["quantity"] == quantity)
            & (weights["horizon"] == min(cfg.horizons)),
            "weight",
        ]
        weight = float(w.iloc[0]) if len(w) else 0.0
        rel = relative.loc[
            (relative["model"] == model)
            & (relative["quantity"] == quantity)
            & (relative["horizon"] == min(cfg.horizons)),
            "relative_wis",
        ]
        rel_v = float(rel.iloc[0]) if len(rel) and pd.notna(rel.iloc[0]) else None
        info = part["information"].mean()
        out.append(
            ModelVerdict(
                model=str(model),
                quantity=str(quantity),
                quantity_name=cfg.quantity_info(quantity).name,
                verdict=v.verdict,
                explanation=v.explanation,
                n_items=v.n_items,
                calibration=None if not math.isfinite(cal) else float(f"{cal:.3g}"),
                information=None if pd.isna(info) else round(float(info), 2),
                weight=round(weight, 2),
                weight_text=f"{weight:.2f}",
                relative_wis=None if rel_v is None else round(rel_v, 2),
                relative_wis_text="n/a" if rel_v is None else f"{rel_v:.2f}",
                outside_90=v.outside,
                expected_outside_90=round(v.expected_outside, 1),
                below_median=v.below,
                bins=tuple(int(c) for c in counts),
                n_evidence=v.n_evidence,
                n_effective=round(v.n_effective, 1),
                pattern_horizon=v.pattern_horizon,
            )
        )
    # members with no scored (settled) item yet still appear, as not yet rated
    seen = {(v.model, v.quantity) for v in out}
    for r in weights.drop_duplicates(["model", "quantity"]).itertuples(index=False):
        if (r.model, r.quantity) in seen or r.quantity not in set(s["quantity"]):
            continue
        out.append(
            ModelVerdict(
                model=str(r.model),
                quantity=str(r.quantity),
                quantity_name=cfg.quantity_info(str(r.quantity)).name,
                verdict="not yet rated",
                explanation="none of its forecasts has a settled target week to judge yet",
                n_items=0,
                calibration=None,
                information=None,
                weight=0.0,
                weight_text="0.00",
                relative_wis=None,
                relative_wis_text="n/a",
                outside_90=0,
                expected_outside_90=0.0,
                below_median=0,
                bins=tuple(0 for _ in p),
                pattern_horizon=min(cfg.horizons),
            )
        )
    order = {v: i for i, v in enumerate(VERDICTS)}
    out.sort(key=lambda v: (v.quantity, order[v.verdict], -v.weight, v.model))
    return out


METHOD_LABELS = {
    "weighted_pool": "combined forecast (reliability-weighted)",
    "equal_pool": "combined forecast (equal weights)",
    "quantile_median": "median of the models",
    "recalibrated_pool": "combined forecast (recalibrated)",
}


def _track(
    cfg: BriefingConfig,
    backtest: Any,
    methods: Mapping[str, str] | None = None,
) -> tuple[list[TrackRow], list[dict[str, Any]], list[dict[str, Any]]]:
    """The back-test's record per method and horizon; the headline method's total and regions."""
    methods = dict(methods or {})
    if backtest is None:
        return [], [], []
    s = backtest.scores
    items = backtest.by_item
    rows = []
    base = backtest.baseline
    for r in s.loc[
        s["kind"].isin(["ensemble", "baseline"]) & s["horizon"].isin(cfg.horizons)
    ].itertuples(index=False):
        sub = items.loc[
            (items["model"] == r.model)
            & (items["quantity"] == r.quantity)
            & (items["horizon"] == r.horizon)
        ]
        n50 = int(sub["in_50"].sum()) if "in_50" in sub else 0
        n90 = int(sub["in_90"].sum()) if "in_90" in sub else 0
        n = int(sub["in_90"].notna().sum())
        rel = None if pd.isna(r.relative_wis) else float(r.relative_wis)
        if rel is None:
            vs = "could not be compared with the baseline"
        elif abs(rel - 1) < 0.005:
            vs = "about as accurate as the baseline"
        elif rel < 1:
            vs = f"{(1 - rel) * 100:.0f}% smaller error than the baseline"
        else:
            vs = f"{(rel - 1) * 100:.0f}% larger error than the baseline"
        rows.append(
            TrackRow(
                method=str(r.model),
                label=METHOD_LABELS.get(
                    str(r.model),
                    "same as last week (baseline)" if r.model == base else str(r.model),
                ),
                quantity=str(r.quantity),
                horizon=int(r.horizon),
                n_items=n,
                relative_wis=None if rel is None else round(rel, 2),
                relative_wis_text="n/a" if rel is None else f"{rel:.2f}",
                vs_baseline_text=vs,
                expected_in_90=round(0.9 * n),
                in_50=n50,
                in_90=n90,
                in_50_text=f"{n50} of {n}",
                in_90_text=f"{n90} of {n}",
            )
        )
    # the jurisdiction total, week by week, for the weighted pool one week ahead
    total_rows: list[dict[str, Any]] = []
    h1 = min(cfg.horizons)
    head = items["quantity"].map(lambda q: methods.get(q, "weighted_pool"))
    if cfg.total_region:
        sub = items.loc[
            (items["model"] == head)
            & (items["region"] == cfg.total_region)
            & (items["horizon"] == h1)
        ]
        for q, part in sub.groupby("quantity", sort=True):
            n = int(part["in_90"].notna().sum())
            total_rows.append(
                {
                    "quantity": q,
                    "quantity_name": cfg.quantity_info(q).name,
                    "horizon": h1,
                    "weeks": n,
                    "in_90": int(part["in_90"].sum()),
                    "in_50": int(part["in_50"].sum()),
                    "in_90_text": f"in {int(part['in_90'].sum())} of the last {n} weeks",
                    "in_50_text": f"in {int(part['in_50'].sum())} of the last {n} weeks",
                }
            )
    # calibration of the weighted pool by region (bins pooled over the horizons shown)
    by_region: list[dict[str, Any]] = []
    wp = items.loc[
        (items["model"] == head) & items["horizon"].isin(cfg.horizons) & items["bin"].notna()
    ]
    p = cm_probabilities(cfg.levels)
    for (q, region), part in wp.groupby(["quantity", "region"], sort=True):
        passed = 0
        horizons = sorted(part["horizon"].unique())
        for _, hp in part.groupby("horizon"):
            counts = np.bincount(hp["bin"].astype(int).to_numpy(), minlength=p.size)
            if float(calibration_score(counts, p, power=cfg.power)) >= 0.05:
                passed += 1
        by_region.append(
            {
                "quantity": q,
                "region": region,
                "region_name": cfg.region_name(region),
                "horizons_passed": passed,
                "horizons": len(horizons),
                "text": f"passes at {passed} of {len(horizons)} horizons",
            }
        )
    return rows, total_rows, by_region


def build_facts(
    *,
    cfg: BriefingConfig,
    issued: pd.Timestamp,
    tool_version: str,
    observations: pd.DataFrame,
    forecasts: pd.DataFrame,
    scores: Any,
    ensemble: Any,
    backtest: Any,
    excluded: pd.DataFrame,
    previous: Mapping[str, Any] | None,
    revisions: pd.DataFrame,
    test_level: float = 0.05,
    nowcast: pd.DataFrame | None = None,
    settle: Mapping[str, Any] | None = None,
    headline: Sequence[Mapping[str, Any]] = (),
) -> BriefingFacts:
    """Compute every fact of the briefing for issue date ``issued``.

    ``observations`` are the validated observations (all vintages); only those known on the
    issue date are used. ``scores`` is the history scoring behind the weights (with the
    baseline, for relative WIS), ``ensemble`` the result of
    :func:`forebrief.tables.ensemble.build_ensemble`, ``backtest`` that of
    :func:`forebrief.tables.backtest.backtest` (or None), ``previous`` the last record's facts.
    """
    from forebrief.tables.ensemble import known_on

    known = known_on(observations, issued)
    last_obs = known.sort_values("week_ending").groupby(["region", "quantity"]).tail(1)
    # provisional: weeks whose latest known value was first reported within 3 weeks of D
    provisional: set[tuple[str, str, pd.Timestamp]] = set()
    if "reported" in observations and observations["reported"].notna().any():
        recent = observations.loc[
            (observations["reported"] <= issued)
            & (observations["week_ending"] >= issued - pd.Timedelta(days=21))
        ]
        provisional = {
            (r.region, r.quantity, pd.Timestamp(r.week_ending))
            for r in recent.itertuples(index=False)
        }
    base = forecasts.loc[
        (forecasts["model"] == cfg.baseline)
        & (forecasts["issued"] == issued)
        & (np.abs(forecasts["level"] - 0.5) < 1e-6)
    ]
    baseline_medians = {
        (r.region, r.quantity, r.week_ending): round_count(float(r.value))
        for r in base.itertuples(index=False)
    }
    available = set(ensemble.ensemble["method"].unique())
    methods = {
        str(h["quantity"]): str(h["method"]) for h in headline if h.get("method") in available
    }
    outlook = _outlook(
        cfg, ensemble, last_obs, provisional, baseline_medians, nowcast=nowcast, methods=methods
    )
    total_available = bool(cfg.total_region) and any(o.is_total for o in outlook)
    if total_available:
        total_note = (
            f"The jurisdiction-wide figures are the models' own forecasts for "
            f"{cfg.region_name(cfg.total_region or '')}; regional forecasts are "
            "not added up, because ranges of forecasts do not add."
        )
    else:
        total_note = (
            "No jurisdiction-wide total is available: no region is configured as the "
            "whole jurisdiction (or it has no forecasts), and regional ranges cannot "
            "simply be added up."
        )
    by_model = scores.by_model if scores is not None else pd.DataFrame()
    verdicts = _verdicts(
        cfg,
        by_model,
        ensemble.weights,
        by_model,
        test_level=test_level,
        items=scores.by_item if scores is not None else None,
    )
    track, track_total, cal_region = _track(cfg, backtest, methods)

    def _sig(x: Any) -> float | None:
        return None if x is None or pd.isna(x) else float(f"{float(x):.4g}")

    weights = [
        {
            "model": r.model,
            "quantity": r.quantity,
            "horizon": int(r.horizon),
            "weight": round(float(r.weight), 3),
            "rated": bool(r.rated),
            "status": r.status,
            "calibration": _sig(r.calibration),
            "information": _sig(r.information),
        }
        for r in ensemble.weights.itertuples(index=False)
    ]
    alpha = [
        {
            "quantity": g["quantity"],
            "horizon": g["horizon"],
            "alpha": g["alpha"],
            "mode": g["alpha_mode"],
            "fallback": g["equal_weight_fallback"],
            "pool_calibration": g["pool_calibration"],
            "pool_information": g["pool_information"],
            "equal_pool_calibration": g.get("equal_pool_calibration"),
            "equal_pool_information": g.get("equal_pool_information"),
        }
        for g in ensemble.summary["groups"]
    ]
    changes = _changes(outlook, verdicts, weights, previous, cfg)
    data_notes = _data_notes(cfg, issued, forecasts, excluded, revisions, known)
    data_as_of = _date(known["week_ending"].max()) if not known.empty else ""
    summary = _summary(cfg, outlook, verdicts, track, methods)
    history = _history(cfg, known, provisional, weeks=max(cfg.window, 16), nowcast=nowcast)
    settle_facts = _settle_facts(settle, issued, known)
    headline_facts = tuple(_headline_entry(cfg, h, track) for h in headline)
    return BriefingFacts(
        title=cfg.title,
        audience=cfg.audience,
        jurisdiction=cfg.jurisdiction,
        contact=cfg.contact,
        issued=_date(issued),
        issued_text=date_text(issued),
        data_as_of=data_as_of,
        data_as_of_text=date_text(data_as_of),
        history_as_of=ensemble.summary.get("history_as_of"),
        tool_version=tool_version,
        horizons=tuple(cfg.horizons),
        quantities=tuple(
            {"id": q, "name": cfg.quantity_info(q).name, "unit": cfg.quantity_info(q).unit}
            for q in sorted({o.quantity for o in outlook})
        ),
        regions=tuple(
            {"id": r, "name": cfg.region_name(r), "is_total": r == cfg.total_region}
            for r in sorted(
                {o.region for o in outlook},
                key=lambda x: (x != cfg.total_region, cfg.region_name(x)),
            )
        ),
        total_region=cfg.total_region,
        total_available=total_available,
        total_note=total_note,
        outlook=tuple(outlook),
        verdicts=tuple(verdicts),
        track=tuple(track),
        track_weeks=len(backtest.issue_dates) if backtest is not None else 0,
        track_total=tuple(track_total),
        calibration_by_region=tuple(cal_region),
        weights=tuple(weights),
        alpha=tuple(alpha),
        changes=changes,
        data_notes=data_notes,
        summary=summary,
        history=history,
        headline=headline_facts,
        settle=settle_facts,
        methods={
            "window_weeks": cfg.window,
            "alpha": cfg.alpha,
            "levels": list(cfg.levels),
            "levels_text": _levels_text(cfg.levels),
            "overshoot": cfg.overshoot,
            "min_items": cfg.min_items,
            "power": cfg.power,
            "background": cfg.background,
            "baseline": cfg.baseline,
            "verdict_test_level": test_level,
            "headline_rule_text": HEADLINE_RULE_TEXT,
            "nowcast_text": NOWCAST_TEXT,
        },
    )


#: The headline rule in plain words (forebrief.tables.compare.choose_headline; Diebold & Mariano
#: 1995 with the Harvey, Leybourne & Newbold 1997 correction).
HEADLINE_RULE_TEXT = (
    "The headline figures come from the median of the models' quantiles unless another "
    "combination had a lower error over the trailing back-test one and two weeks ahead, on at "
    "least 8 settled issue dates, with a one-sided Diebold-Mariano test (Diebold and Mariano "
    "1995) giving p < 0.10."
)
#: The nowcast and the settled-data rule in plain words (forebrief.tables.nowcast).
NOWCAST_TEXT = (
    "Provisional weeks are completed with a chain-ladder nowcast (Mack 1993) from how "
    "complete past weeks were at the same reporting delay, and models are rated only on weeks "
    "that late reports no longer change."
)


def _changes(
    outlook: Sequence[OutlookRow],
    verdicts: Sequence[ModelVerdict],
    weights: Sequence[Mapping[str, Any]],
    previous: Mapping[str, Any] | None,
    cfg: BriefingConfig,
) -> dict[str, Any]:
    """What changed since the last record: outlook revisions, verdicts, weights."""

    def cfg_name(q: str) -> str:
        return cfg.quantity_info(q).name

    if not previous:
        return {"previous_issued": None, "outlook": [], "verdicts": [], "weights": []}
    prev_rows = {
        (o["region"], o["quantity"], o["week_ending"]): o for o in previous.get("outlook", [])
    }
    outlook_changes = []
    first = min((o.horizon for o in outlook), default=1)
    for o in outlook:
        p = prev_rows.get((o.region, o.quantity, o.week_ending))
        if p is None or o.horizon != first:
            continue
        diff = o.median - float(p["median"])
        if p["median"] and abs(diff) / max(float(p["median"]), 1.0) >= 0.05:
            outlook_changes.append(
                {
                    "region": o.region,
                    "region_name": o.region_name,
                    "quantity": o.quantity,
                    "quantity_name": o.quantity_name,
                    "week_ending": o.week_ending,
                    "week_ending_text": o.week_ending_text,
                    "horizon": o.horizon,
                    "before": float(p["median"]),
                    "before_text": format_count(float(p["median"])),
                    "now": o.median,
                    "now_text": o.median_text,
                    "direction": "up" if diff > 0 else "down",
                }
            )
    prev_verdicts = {
        (v["model"], v["quantity"]): v["verdict"] for v in previous.get("verdicts", [])
    }
    verdict_changes = []
    for v in verdicts:
        before = prev_verdicts.get((v.model, v.quantity))
        if before is not None and (before == "reliable") != (v.verdict == "reliable"):
            verdict_changes.append(
                {
                    "model": v.model,
                    "quantity": v.quantity,
                    "quantity_name": v.quantity_name,
                    "before": before,
                    "now": v.verdict,
                }
            )
    prev_w = {
        (w["model"], w["quantity"], w["horizon"]): w["weight"] for w in previous.get("weights", [])
    }
    moves = []
    for w in weights:
        before = prev_w.get((w["model"], w["quantity"], w["horizon"]), 0.0)
        delta = w["weight"] - before
        if abs(delta) >= 0.1:
            moves.append(
                {
                    **w,
                    "quantity_name": cfg_name(w["quantity"]),
                    "before": before,
                    "change": round(delta, 2),
                    "before_text": f"{before:.2f}",
                    "now_text": f"{w['weight']:.2f}",
                }
            )
    moves.sort(key=lambda m: -abs(m["change"]))
    return {
        "previous_issued": previous.get("issued"),
        "previous_issued_text": date_text(previous.get("issued")),
        "outlook": outlook_changes,
        "verdicts": verdict_changes,
        "weights": moves[:6],
    }


def _data_notes(
    cfg: BriefingConfig,
    issued: pd.Timestamp,
    forecasts: pd.DataFrame,
    excluded: pd.DataFrame,
    revisions: pd.DataFrame,
    known: pd.DataFrame,
) -> dict[str, Any]:
    quarantined = []
    if not excluded.empty:
        for (kind, file, model), part in excluded.groupby(["kind", "file", "model"], sort=True):
            reasons = sorted({r.split(" (")[0] for r in part["reason"]})
            short_file = "/".join(str(file).replace("\\", "/").split("/")[-2:])
            quarantined.append(
                {
                    "kind": kind,
                    "file": short_file,
                    "model": model,
                    "count": len(part),
                    "reasons": reasons,
                }
            )
    members = forecasts.loc[forecasts["model"] != cfg.baseline]
    recent_dates = sorted(d for d in members["issued"].unique() if d < issued)[-4:]
    recent = set(members.loc[members["issued"].isin(recent_dates), "model"])
    today = set(members.loc[members["issued"] == issued, "model"])
    missing = sorted(recent - today)
    new = sorted(today - set(members.loc[members["issued"] < issued, "model"]))
    revised = []
    if not revisions.empty:
        for r in revisions.itertuples(index=False):
            revised.append(
                {
                    "region": r.region,
                    "region_name": cfg.region_name(r.region),
                    "quantity": r.quantity,
                    "week_ending": _date(r.week_ending),
                    "before": float(r.value_then),
                    "now": float(r.value_now),
                    "before_text": format_count(float(r.value_then)),
                    "now_text": format_count(float(r.value_now)),
                    "direction": "up" if r.change > 0 else "down",
                }
            )
    weeks = known.groupby(["region", "quantity"]).size()
    short = [
        {
            "region": str(key[0]),
            "region_name": cfg.region_name(str(key[0])),
            "quantity": str(key[1]),
            "weeks": int(n),
        }
        for key, n in weeks.items()
        if n < cfg.window
    ]
    return {
        "quarantined": quarantined,
        "missing_teams": missing,
        "new_teams": new,
        "revised": revised,
        "short_history": short,
        "n_revised": len(revised),
        "n_revised_up": sum(1 for r in revised if r["direction"] == "up"),
    }


def _summary(
    cfg: BriefingConfig,
    outlook: Sequence[OutlookRow],
    verdicts: Sequence[ModelVerdict],
    track: Sequence[TrackRow],
    methods: Mapping[str, str] | None = None,
) -> dict[str, Any]:
    """The few facts the headline needs, chosen and counted here (not in the narrative)."""
    methods = dict(methods or {})
    quantities = [q for q in cfg.quantities if any(o.quantity == q for o in outlook)] or sorted(
        {o.quantity for o in outlook}
    )
    lead_q = quantities[0] if quantities else None
    h1 = min(cfg.horizons)
    lead = [o for o in outlook if o.quantity == lead_q and o.horizon == h1]
    total = next((o for o in lead if o.is_total), None)
    focus = total
    if focus is None and lead:
        focus = max(lead, key=lambda o: o.median)
    # the alert-line sentence looks one and two weeks ahead only (beyond that the forecasts
    # are too uncertain to headline) and names the week
    near = sorted(cfg.horizons)[:2]
    risk = [
        o
        for o in outlook
        if o.quantity == lead_q
        and o.p_above_threshold is not None
        and not o.is_total
        and o.horizon in near
    ]
    top_risk = max(risk, key=lambda o: (o.p_above_threshold or 0.0, -o.horizon), default=None)
    per_q = {}
    for q in quantities:
        vs = [v for v in verdicts if v.quantity == q]
        per_q[q] = {
            "n_models": len(vs),
            "n_reliable": sum(v.verdict == "reliable" for v in vs),
            "reliable": [v.model for v in vs if v.verdict == "reliable"],
            "n_not_rated": sum(v.verdict == "not yet rated" for v in vs),
        }
    track_h1 = {}
    worse: dict[str, list[int]] = {}
    for q in quantities:
        method = methods.get(q, "weighted_pool")
        rows = {t.method: t for t in track if t.quantity == q and t.horizon == h1}
        wp = rows.get(method)
        track_h1[q] = (
            None
            if wp is None
            else {
                "method": method,
                "label": wp.label,
                "relative_wis": wp.relative_wis,
                "vs_baseline_text": wp.vs_baseline_text,
                "beats_baseline": wp.relative_wis is not None and wp.relative_wis < 1,
                "in_90_text": wp.in_90_text,
                "in_50_text": wp.in_50_text,
                "coverage_warning": coverage_warning(wp.in_50, wp.in_90, wp.n_items),
            }
        )
        worse[q] = sorted(
            t.horizon
            for t in track
            if t.quantity == q
            and t.method == method
            and t.relative_wis is not None
            and t.relative_wis > 1
        )
    dominance: dict[tuple[str, str], list[str]] = {}
    for o in outlook:
        if o.dominant_model and o.horizon == h1:
            dominance.setdefault((o.dominant_model, o.quantity), []).append(o.region_name)
    dominant = [
        {
            "model": m,
            "quantity": q,
            "quantity_name": cfg.quantity_info(q).name,
            "regions": sorted(rs),
            "n_regions": len(rs),
        }
        for (m, q), rs in sorted(dominance.items())
    ]
    up = [o for o in lead if o.direction == "up" and not o.is_total]
    down = [o for o in lead if o.direction == "down" and not o.is_total]
    return {
        "lead_quantity": lead_q,
        "horizon": h1,
        "focus": None
        if focus is None
        else {"region": focus.region, "quantity": focus.quantity, "horizon": focus.horizon},
        "top_risk": None
        if top_risk is None
        else {
            "region": top_risk.region,
            "quantity": top_risk.quantity,
            "horizon": top_risk.horizon,
        },
        "models": per_q,
        "track": track_h1,
        "worse_than_baseline_horizons": worse,
        "dominant": dominant,
        "n_regions_up": len(up),
        "n_regions_down": len(down),
        "n_regions": len([o for o in lead if not o.is_total]),
    }


def coverage_warning(in_50: int, in_90: int, n: int) -> str | None:
    """A plain warning when recent 50% or 90% coverage fell outside the binomial 95% band.

    The band is the central 95% of Binomial(n, 0.5) or Binomial(n, 0.9) counts (Gneiting,
    Balabdaoui & Raftery 2007 for calibration as coverage; the band is common practice, no
    source). Returns e.g. "its 9 in 10 ranges held 7 in 10 times lately", or None.
    """
    from scipy.stats import binom

    if n <= 0:
        return None
    parts = []
    lo, hi = binom.interval(0.95, n, 0.9)
    if not lo <= in_90 <= hi:
        parts.append(f"its 9 in 10 ranges held {_tenths(in_90 / n)} in 10 times lately")
    lo, hi = binom.interval(0.95, n, 0.5)
    if not lo <= in_50 <= hi:
        parts.append(f"its even-chance ranges held {_tenths(in_50 / n)} in 10 times lately")
    return " and ".join(parts) if parts else None


def _tenths(share: float) -> int:
    """A share in tenths, half up (0.25 -> 3)."""
    return math.floor(share * 10 + 0.5 + 1e-9)


def _settle_facts(
    settle: Mapping[str, Any] | None, issued: pd.Timestamp, known: pd.DataFrame
) -> dict[str, Any]:
    """How many recent weeks are not yet scored, and why (plain text included)."""
    s = dict(settle or {"weeks": 0, "source": "configured", "has_vintages": False})
    weeks = int(s.get("weeks", 0))
    source = str(s.get("source", "configured"))
    if not s.get("has_vintages", False):
        text = (
            "The observations carry no reporting history (no vintages), so revisions "
            "cannot be checked; every observed week is scored as it stands."
        )
    elif weeks == 0:
        text = (
            "Every observed week is scored, including the latest ones, which may still be revised."
        )
    else:
        why = (
            "estimated from past revisions: after that many weeks, values moved by less "
            "than 2% in 9 of 10 weeks"
            if source == "estimated"
            else "as configured"
        )
        text = (
            f"The {weeks} most recent week(s) are not yet scored, because late reports "
            f"may still change them ({why})."
        )
    return {
        "weeks": weeks,
        "source": source,
        "has_vintages": bool(s.get("has_vintages")),
        "text": text,
    }


def _headline_entry(
    cfg: BriefingConfig, h: Mapping[str, Any], track: Sequence[TrackRow]
) -> dict[str, Any]:
    """The headline choice of one quantity, with its label and a sentence naming it."""
    method = str(h.get("method"))
    label = METHOD_LABELS.get(method, method)
    out = dict(h)
    out["label"] = label
    out["quantity_name"] = cfg.quantity_info(str(h.get("quantity"))).name
    reason = str(h.get("reason") or f"the {label} is used").strip().rstrip(".")
    out["sentence"] = f"{out['quantity_name']}: {reason}."
    return out


def _history(
    cfg: BriefingConfig,
    known: pd.DataFrame,
    provisional: set[tuple[str, str, pd.Timestamp]],
    *,
    weeks: int,
    nowcast: pd.DataFrame | None = None,
) -> dict[str, Any]:
    """Recent observed weeks per region and quantity, for the charts (as known on the date).

    Provisional weeks with a nowcast carry its central value and 90% range (else None).
    """
    out: dict[str, Any] = {}
    if known.empty:
        return out
    now = {}
    for key, pos in _nowcast_map(nowcast).items():
        r = nowcast.iloc[pos] if nowcast is not None else None
        if r is not None:
            now[key] = (
                round_count(float(r["nowcast"])),
                round_count(float(r["nowcast_low90"])),
                round_count(float(r["nowcast_high90"])),
            )
    start = known["week_ending"].max() - pd.Timedelta(days=7 * (weeks - 1))
    recent = known.loc[known["week_ending"] >= start].sort_values("week_ending")
    for (region, quantity), part in recent.groupby(["region", "quantity"], sort=True):
        out[f"{region}|{quantity}"] = {
            "region": region,
            "quantity": quantity,
            "week_ending": [_date(w) for w in part["week_ending"]],
            "value": [round_count(float(v)) for v in part["value"]],
            "provisional": [
                (region, quantity, pd.Timestamp(w)) in provisional for w in part["week_ending"]
            ],
            "nowcast": [now.get((region, quantity, pd.Timestamp(w))) for w in part["week_ending"]],
        }
    return out
