"""Score every model's record: the table-level front over the pure score functions.

Takes validated forecast and observation tables, reshapes them once into arrays (one row per
forecast, one column per level) and calls :mod:`.classical`, :mod:`.interval`,
:mod:`.point` and :mod:`.relative`. No file is touched here. Every step is vectorised over
rows and items; the only Python loops run over level patterns and (quantity, horizon) groups.

Definitions (checked exactly elsewhere):

- An *item* is (region, quantity, week_ending, horizon); the window holds items with
  ``as_of - 7 W < week_ending <= as_of`` that have an observation as of ``as_of``.
- When a model issued several forecasts for one item, the latest issued is scored.
- Information uses, per item, the intrinsic range over every model scored for that item
  plus the observation (Cooke & Slijkhuis 2003, section 15.3.2).
- Performance weights are normalised over the models of a (quantity, horizon) group
  (and of a (quantity, horizon, region) group in the per-region table).
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
import pandas as pd

from forebrief.core.classical import (
    bin_index,
    calibration_score,
    information_score,
    intrinsic_range,
    performance_weights,
)
from forebrief.core.interval import interval_coverage, wis_parts
from forebrief.core.relative import relative_skill_pairwise
from forebrief.errors import ConfigError
from forebrief.tables.keys import group_codes
from forebrief.tables.observations import observations_as_of
from forebrief.tables.schema import CM_LEVELS, Background, Scale, check_choice, cm_probabilities

__all__ = [
    "BY_ITEM_COLUMNS",
    "BY_MODEL_COLUMNS",
    "ClassicalArrays",
    "ScoreResult",
    "ScoreSettings",
    "WindowTable",
    "build_window",
    "classical_arrays",
    "score_forecasts",
    "window_items",
]

_TOL = 1e-6

BY_MODEL_COLUMNS: tuple[str, ...] = (
    "quantity",
    "horizon",
    "model",
    "n_items",
    "calibration",
    "information",
    "combined",
    "weight",
    "wis",
    "dispersion",
    "overprediction",
    "underprediction",
    "relative_wis",
    "within_50",
    "within_90",
    "abs_error",
    "bias",
    "n_cm_items",
    "passes_cutoff",
    "equal_weights",
)

BY_ITEM_COLUMNS: tuple[str, ...] = (
    "model",
    "region",
    "quantity",
    "week_ending",
    "horizon",
    "issued",
    "observed",
    "bin",
    "information",
    "wis",
    "dispersion",
    "overprediction",
    "underprediction",
    "in_50",
    "in_90",
    "abs_error",
    "bias",
    "median",
)


@dataclass(frozen=True)
class ScoreSettings:
    """Options of a scoring run (the command line's flags, with their defaults)."""

    window: int = 12
    alpha: float = 0.05
    baseline: str | None = None
    levels: tuple[float, ...] = CM_LEVELS
    overshoot: float = 0.10
    background: Background = "uniform"
    scale: Scale = "natural"
    power: float = 1.0
    floor: float = 1e-3

    def __post_init__(self) -> None:
        check_choice("background", self.background, Background)
        check_choice("scale", self.scale, Scale)
        if not isinstance(self.window, int) or self.window < 1:
            raise ConfigError(f"window must be a whole number of weeks >= 1; got {self.window!r}")
        if not (0.0 <= float(self.alpha) <= 1.0):
            raise ConfigError(f"alpha must lie in [0, 1]; got {self.alpha!r}")
        if not (0.0 < float(self.power) <= 1.0):
            raise ConfigError(f"power must lie in (0, 1]; got {self.power!r}")
        if float(self.overshoot) < 0:
            raise ConfigError(f"overshoot must be >= 0; got {self.overshoot!r}")
        lv = np.asarray(self.levels, dtype=float)
        if lv.size < 1 or np.any(np.diff(lv) <= 0) or lv[0] <= 0 or lv[-1] >= 1:
            raise ConfigError(
                "levels must be increasing probabilities strictly between 0 and 1; "
                f"got {tuple(self.levels)!r}"
            )


@dataclass(frozen=True)
class ScoreResult:
    """The three score tables and the notes a reader needs to interpret them."""

    by_model: pd.DataFrame
    by_model_region: pd.DataFrame
    by_item: pd.DataFrame
    as_of: pd.Timestamp
    settings: ScoreSettings
    notes: tuple[str, ...] = ()
    n_degenerate: int = 0
    info: dict[str, Any] = field(default_factory=dict)


def window_items(forecasts: pd.DataFrame, *, as_of: pd.Timestamp, window: int) -> pd.DataFrame:
    """Forecast rows whose target week lies in the window ``as_of - 7 W < week_ending <= as_of``."""
    start = as_of - pd.Timedelta(days=7 * window)
    w = forecasts["week_ending"]
    mask = (w > start) & (w <= as_of) & (forecasts["issued"] <= as_of)
    return forecasts.loc[mask]


@dataclass(frozen=True)
class WindowTable:
    """One row per forecast: keys, observation and quantiles at the union of levels."""

    heads: pd.DataFrame  # model, region, quantity, issued, week_ending, horizon, observed
    levels: np.ndarray  # (L,)
    values: np.ndarray  # (n, L), nan where a forecast lacks a level


def _to_wide(rows: pd.DataFrame) -> tuple[pd.DataFrame, np.ndarray, np.ndarray]:
    """Reshape long quantile rows into (heads, levels, matrix) without a pandas pivot."""
    fc, n_fc = group_codes(
        [rows[k] for k in ("model", "region", "quantity", "issued", "week_ending")]
    )
    lv = rows["level"].to_numpy(dtype=float)
    # the sorted distinct levels and each row's position among them (as np.unique with
    # return_inverse gives them, without sorting every row: a hash pass and a binary search)
    rounded = np.round(lv, 9)
    levels = np.sort(pd.unique(rounded))
    if levels.size > 1:
        levels = levels[np.r_[True, levels[1:] != levels[:-1]]]
    lcode = np.searchsorted(levels, rounded)
    values = np.full((n_fc, levels.size), np.nan)
    values[fc, lcode] = rows["value"].to_numpy(dtype=float)
    first = np.full(n_fc, -1, dtype=np.int64)
    first[fc[::-1]] = np.arange(len(rows) - 1, -1, -1)
    heads = rows.iloc[first][
        ["model", "region", "quantity", "issued", "week_ending", "horizon"]
    ].reset_index(drop=True)
    return heads, levels, values


def _latest_only(heads: pd.DataFrame) -> np.ndarray:
    """Positions of the latest-issued forecast of each (model, item)."""
    order = heads.sort_values(
        ["model", "region", "quantity", "week_ending", "horizon", "issued"], kind="stable"
    )
    keep = ~order.duplicated(["model", "region", "quantity", "week_ending", "horizon"], keep="last")
    return np.sort(order.index.to_numpy()[keep.to_numpy()])


def build_window(
    forecasts: pd.DataFrame, observations: pd.DataFrame, *, as_of: pd.Timestamp, window: int
) -> tuple[WindowTable, int]:
    rows = window_items(forecasts, as_of=as_of, window=window)
    heads, levels, values = _to_wide(rows)
    keep = _latest_only(heads)
    n_superseded = len(heads) - keep.size
    heads, values = heads.iloc[keep].reset_index(drop=True), values[keep]
    obs = observations_as_of(observations, as_of=as_of)
    merged = heads.merge(
        obs[["region", "quantity", "week_ending", "value"]].rename(columns={"value": "observed"}),
        on=["region", "quantity", "week_ending"],
        how="left",
        validate="many_to_one",
    )
    has_obs = merged["observed"].notna().to_numpy()
    return WindowTable(
        merged.loc[has_obs].reset_index(drop=True), levels, values[has_obs]
    ), n_superseded


def transform_scale(x: np.ndarray, how: str, what: str) -> np.ndarray:
    """Identity, or ln(x + 1) for the log scale (Bosse et al. 2023, PLOS Comput Biol 19(8))."""
    if how in ("natural", "uniform"):
        return x
    if np.nanmin(x, initial=0.0) <= -1:
        raise ConfigError(
            f"{what} on the log scale needs values > -1 (it uses ln(x + 1)); a value of "
            f"{np.nanmin(x):g} was found; fix: use the natural scale for this quantity"
        )
    return np.log1p(x)


def level_index(levels: np.ndarray, wanted: float) -> int | None:
    hit = np.flatnonzero(np.abs(levels - wanted) < _TOL)
    return int(hit[0]) if hit.size else None


def _level_patterns(present: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The distinct rows of a boolean (n, L) matrix and each row's pattern number.

    Rows are packed to bytes and grouped by those (``np.unique(axis=0)`` sorts rows as
    structured values, which costs about a second for 50,000 forecasts). Patterns come in
    order of first appearance. O(n L).
    """
    packed = np.packbits(present, axis=1)
    if packed.shape[1] == 0:
        return present[:1], np.zeros(len(present), dtype=np.int64)
    inverse, n_patterns = group_codes([packed[:, j] for j in range(packed.shape[1])])
    first = np.full(n_patterns, -1, dtype=np.int64)
    first[inverse[::-1]] = np.arange(len(present) - 1, -1, -1)
    return present[first], inverse


def _interval_scores(wide: WindowTable, scale: str) -> dict[str, np.ndarray]:
    """WIS and its parts per forecast, on the levels each forecast gives (grouped by pattern)."""
    n = len(wide.heads)
    y_raw = wide.heads["observed"].to_numpy(dtype=float)
    y = transform_scale(y_raw, scale, "the weighted interval score")
    q = transform_scale(wide.values, scale, "the weighted interval score")
    out = {
        k: np.full(n, np.nan) for k in ("wis", "dispersion", "overprediction", "underprediction")
    }
    present = ~np.isnan(wide.values)
    if n:
        patterns, inverse = _level_patterns(present)
        for p, pattern in enumerate(patterns):
            cols = np.flatnonzero(pattern)
            sel = np.flatnonzero(inverse == p)
            lv = wide.levels[cols]
            has_median = np.any(np.abs(lv - 0.5) < _TOL)
            has_pair = any(np.any(np.abs(lv - (1 - t)) < _TOL) for t in lv[lv < 0.5])
            if not (has_median or has_pair):
                continue
            parts = wis_parts(y[sel], q[np.ix_(sel, cols)], lv)
            out["wis"][sel] = parts.wis
            out["dispersion"][sel] = parts.dispersion
            out["overprediction"][sel] = parts.overprediction
            out["underprediction"][sel] = parts.underprediction
    # coverage and point error on the natural scale (coverage is unchanged by ln(x + 1))
    for name, lo_t, hi_t in (("in_50", 0.25, 0.75), ("in_90", 0.05, 0.95)):
        lo, hi = level_index(wide.levels, lo_t), level_index(wide.levels, hi_t)
        if lo is None or hi is None:
            out[name] = np.full(n, np.nan)
            continue
        ql, qh = wide.values[:, lo], wide.values[:, hi]
        ok = ~(np.isnan(ql) | np.isnan(qh))
        cov = interval_coverage(y_raw, np.where(ok, ql, 0.0), np.where(ok, qh, 0.0))
        out[name] = np.where(ok, cov.astype(float), np.nan)
    mid = level_index(wide.levels, 0.5)
    median = wide.values[:, mid] if mid is not None else np.full(n, np.nan)
    out["median"] = median
    med_t = transform_scale(median, scale, "the absolute error")
    out["abs_error"] = np.abs(med_t - y)
    with np.errstate(invalid="ignore"):
        out["bias"] = np.sign(median - y_raw)
    return out


class _CommonLevels:
    """WIS of each forecast on the levels it shares with another level pattern.

    Rows are aligned with the by-item table; ``pattern`` numbers each row's level set and
    ``median`` says which patterns include 0.5. :meth:`on_common` gives, for the rows of
    pattern ``p``, the WIS on levels(p) & levels(r) (Bracher et al. 2021, PLOS Comput Biol
    17(2): e1008618: WIS from different quantile sets are not comparable, so a pair is
    compared on the levels both give). Each (p, r) is computed once for all rows of p and
    cached; when levels(p) lie inside levels(r) it is the rows' own WIS. Cost per (p, r):
    O(rows of p x common levels).
    """

    def __init__(self, wide: WindowTable, scale: str, order: np.ndarray, wis: np.ndarray) -> None:
        values = wide.values[order]
        self.levels = wide.levels
        self.y = transform_scale(
            wide.heads["observed"].to_numpy(dtype=float)[order],
            scale,
            "the weighted interval score",
        )
        self.q = transform_scale(values, scale, "the weighted interval score")
        self.wis = wis
        present = ~np.isnan(values)
        if len(values):
            self.patterns, self.pattern = _level_patterns(present)
        else:
            self.patterns = np.zeros((0, self.levels.size), dtype=bool)
            self.pattern = np.zeros(0, dtype=np.int64)
        mid = level_index(self.levels, 0.5)
        self.median = (
            self.patterns[:, mid] if mid is not None else np.zeros(len(self.patterns), dtype=bool)
        )
        order_p = np.argsort(self.pattern, kind="stable")
        counts = np.bincount(self.pattern, minlength=len(self.patterns))
        starts = np.cumsum(counts) - counts
        self.rows = np.split(order_p, starts[1:])
        # each row's place among the rows of its pattern
        self.position = np.empty(len(self.pattern), dtype=np.int64)
        self.position[order_p] = np.arange(order_p.size) - starts[self.pattern[order_p]]
        self._cache: dict[tuple[int, int], np.ndarray] = {}

    def on_common(self, p: int, r: int) -> np.ndarray:
        """WIS of the rows of pattern p (in :attr:`rows` order) on levels(p) & levels(r)."""
        key = (p, r)
        if key not in self._cache:
            rows = self.rows[p]
            both = self.patterns[p] & self.patterns[r]
            if np.array_equal(both, self.patterns[p]):
                self._cache[key] = self.wis[rows]
            else:
                cols = np.flatnonzero(both)
                parts = wis_parts(self.y[rows], self.q[np.ix_(rows, cols)], self.levels[cols])
                self._cache[key] = parts.wis
        return self._cache[key]


@dataclass(frozen=True)
class ClassicalArrays:
    """The Classical Model view of a window: CM quantiles and each item's intrinsic range.

    ``quantiles`` and ``observed`` are on the background's scale (ln(x + 1) for the log
    background); ``lower`` / ``upper`` are the intrinsic range L*, H* of each forecast's item
    over every model scored for that item plus the observation (Cooke & Slijkhuis 2003,
    section 15.3.2); ``use`` marks forecasts that are CM-scored (all CM levels present, item
    not degenerate). ``item`` holds the integer item codes.
    """

    quantiles: np.ndarray
    raw_quantiles: np.ndarray
    observed: np.ndarray
    raw_observed: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    use: np.ndarray
    item: np.ndarray
    n_degenerate: int


def classical_arrays(wide: WindowTable, settings: ScoreSettings) -> ClassicalArrays | None:
    """Extract the CM quantiles and intrinsic ranges of a window (None if a CM level is absent)."""
    n = len(wide.heads)
    cols = [level_index(wide.levels, t) for t in settings.levels]
    if n == 0 or any(c is None for c in cols):
        return None
    qcm = wide.values[:, [c for c in cols if c is not None]]
    scored = ~np.isnan(qcm).any(axis=1)
    y_raw = wide.heads["observed"].to_numpy(dtype=float)
    q_t = transform_scale(qcm, settings.background, "the log background")
    y_t = transform_scale(y_raw, settings.background, "the log background")
    item, n_item = group_codes(
        [wide.heads[k] for k in ("region", "quantity", "week_ending", "horizon")]
    )
    lo = np.full(n_item, np.inf)
    hi = np.full(n_item, -np.inf)
    idx = np.flatnonzero(scored)
    np.minimum.at(lo, item[idx], np.minimum(q_t[idx, 0], y_t[idx]))
    np.maximum.at(hi, item[idx], np.maximum(q_t[idx, -1], y_t[idx]))
    degenerate_item = np.isfinite(lo) & (hi <= lo)
    use = scored & ~degenerate_item[item]
    lower = np.full(n, np.nan)
    upper = np.full(n, np.nan)
    idx = np.flatnonzero(use)
    if idx.size:
        lower[idx], upper[idx] = intrinsic_range(
            lo[item[idx]], hi[item[idx]], overshoot=settings.overshoot
        )
    return ClassicalArrays(
        q_t, qcm, y_t, y_raw, lower, upper, use, item, int(degenerate_item.sum())
    )


def _classical(
    wide: WindowTable, settings: ScoreSettings
) -> tuple[np.ndarray, np.ndarray, np.ndarray, int]:
    """Bin and information per forecast (nan / -1 where not CM-scored); count degenerate items."""
    n = len(wide.heads)
    bins = np.full(n, -1, dtype=np.int64)
    info = np.full(n, np.nan)
    ca = classical_arrays(wide, settings)
    if ca is None:
        return bins, info, np.zeros(n, dtype=bool), 0
    idx = np.flatnonzero(ca.use)
    if idx.size:
        info[idx] = information_score(
            ca.quantiles[idx],
            ca.lower[idx],
            ca.upper[idx],
            cm_probabilities(settings.levels),
            floor=settings.floor,
        )
        bins[idx] = bin_index(ca.raw_quantiles[idx], ca.raw_observed[idx])
    return bins, info, ca.use, ca.n_degenerate


def _aggregate(
    items: pd.DataFrame,
    keys: list[str],
    settings: ScoreSettings,
    weight_keys: list[str],
    *,
    common: _CommonLevels,
) -> pd.DataFrame:
    """Pool item scores into one row per group of ``keys`` (which end with 'model').

    A named baseline is scored but takes no weight: its ``weight`` is nan and the other
    models' weights are normalised without it (it is the yardstick, not a member).
    """
    n_bins = len(settings.levels) + 1
    g_codes, n_g = group_codes([items[k] for k in keys])
    first = np.full(n_g, -1, dtype=np.int64)
    first[g_codes[::-1]] = np.arange(len(items) - 1, -1, -1)
    out = items.iloc[first][keys].reset_index(drop=True)
    counts = np.bincount(g_codes, minlength=n_g)
    out["n_items"] = counts
    cm = items["bin"].to_numpy() >= 0
    cm_counts = np.zeros((n_g, n_bins), dtype=np.int64)
    np.add.at(cm_counts, (g_codes[cm], items["bin"].to_numpy()[cm]), 1)
    out["n_cm_items"] = cm_counts.sum(axis=1)
    out["calibration"] = calibration_score(
        cm_counts, cm_probabilities(settings.levels), power=settings.power
    )

    def mean_of(col: str) -> np.ndarray:
        v = items[col].to_numpy(dtype=float)
        ok = ~np.isnan(v)
        s = np.bincount(g_codes[ok], weights=v[ok], minlength=n_g)
        c = np.bincount(g_codes[ok], minlength=n_g)
        return np.divide(s, c, out=np.full(n_g, np.nan), where=c > 0)

    out["information"] = mean_of("information")
    out["combined"] = out["calibration"] * out["information"]
    for col in ("wis", "dispersion", "overprediction", "underprediction", "abs_error", "bias"):
        out[col] = mean_of(col)
    out["within_50"] = mean_of("in_50")
    out["within_90"] = mean_of("in_90")
    wg, n_wg = group_codes([out[k] for k in weight_keys])
    member = (out["model"] != settings.baseline).to_numpy()
    # weights over the members only: the baseline's row gets a group of its own, and the
    # weight it would get there is dropped
    w = performance_weights(
        out["calibration"].to_numpy(),
        out["information"].to_numpy(),
        alpha=settings.alpha,
        groups=np.where(member, 2 * wg, 2 * wg + 1),
    )
    has_member = np.bincount(wg[member], minlength=n_wg) > 0
    fallback = w.equal_fallback[2 * wg] & has_member[wg]
    out["weight"] = np.where(member, w.weight, np.nan)
    out["passes_cutoff"] = w.passed
    out["equal_weights"] = fallback
    out["relative_wis"] = _relative(
        items, keys, weight_keys, out, settings.baseline, out_rows=g_codes, common=common
    )
    for j in range(n_bins):
        out[f"bin_{j}"] = cm_counts[:, j]
    cols = [*keys[:-1], "model"]
    ordered = [c for c in BY_MODEL_COLUMNS if c not in cols]
    extra = [c for c in out.columns if c not in cols and c not in ordered]
    out = out[[*cols, *ordered, *extra]]
    return out.sort_values(keys, kind="stable").reset_index(drop=True)


def _relative(
    items: pd.DataFrame,
    keys: list[str],
    group_keys: list[str],
    out: pd.DataFrame,
    baseline: str | None,
    *,
    out_rows: np.ndarray,
    common: _CommonLevels,
) -> np.ndarray:
    """Relative WIS per model within each group (Cramer et al. 2022, PNAS, Methods).

    Like for like: on each common item a pair (a, b) is compared on the levels both give,
    so theta_ab = mean WIS of a / mean WIS of b over their common items, each WIS on the
    common levels (Bracher et al. 2021, PLOS Comput Biol 17(2): e1008618, warn that WIS on
    different quantile sets are not comparable). An item where the pair has no common
    median is not compared (a pair with no such item is left out of both geometric means).
    Pairs on the same level pattern reuse each model's own WIS; with several patterns in a
    group, one (m x i) @ (i x m) product per pattern pair (p, r) sums a's WIS on the common
    levels over the items where a gives p and b gives r. ``keys`` are ``group_keys`` plus
    'model'; ``out_rows`` gives the row of ``out`` that pools each item row. The loop runs
    over groups and pattern pairs only.
    O(rows log rows + sum over groups of (1 + pattern pairs) m^2 i).
    """
    rel = np.full(len(out), np.nan)
    if baseline is None:
        return rel
    # only forecasts with a median take part: a pair's common levels hold 0.5 iff both do
    scored = items["wis"].notna().to_numpy() & common.median[common.pattern]
    if not scored.any():
        return rel
    idx = np.flatnonzero(scored)
    sub = items.loc[scored]
    gcode, _ = group_codes([sub[k] for k in group_keys])
    item_code, _ = group_codes([sub[k] for k in ("region", "quantity", "week_ending", "horizon")])
    model_text = sub["model"].to_numpy().astype(str)
    wis = sub["wis"].to_numpy(dtype=float)
    pattern = common.pattern[idx]
    rows_out = out_rows[scored]
    # the rows of each group, in table order
    order = np.argsort(gcode, kind="stable")
    starts = np.flatnonzero(np.r_[True, gcode[order][1:] != gcode[order][:-1]])
    for sel in np.split(order, starts[1:]):
        models, mcode = np.unique(model_text[sel], return_inverse=True)
        if baseline not in models:
            continue
        # items numbered by first appearance within the group
        uniq, first_at, icode = np.unique(item_code[sel], return_index=True, return_inverse=True)
        rank = np.empty(uniq.size, dtype=np.int64)
        rank[np.argsort(first_at, kind="stable")] = np.arange(uniq.size)
        col = rank[icode]
        shape = (models.size, uniq.size)
        mask = np.zeros(shape)
        mask[mcode, col] = 1.0
        n_common = mask @ mask.T  # common[a, b]: the number of items a and b share
        here = pattern[sel]
        kinds = np.unique(here)
        if kinds.size == 1:
            # own[a, b]: a's WIS summed over the items a and b share
            filled = np.zeros(shape)
            filled[mcode, col] = wis[sel]
            own = filled @ mask.T
        else:
            on = []
            for p in kinds:
                hit = np.zeros(shape)
                hit[mcode[here == p], col[here == p]] = 1.0
                on.append(hit)
            own = np.zeros((models.size, models.size))
            for p in kinds:
                of_p = here == p
                at = common.position[idx[sel[of_p]]]
                for j, r in enumerate(kinds):
                    filled = np.zeros(shape)
                    filled[mcode[of_p], col[of_p]] = common.on_common(int(p), int(r))[at]
                    own += filled @ on[j].T
        b = int(np.flatnonzero(models == baseline)[0])
        skill = relative_skill_pairwise(own, own.T, n_common, baseline=b)
        rel[rows_out[sel]] = skill.relative[mcode]
    return rel


def score_forecasts(
    forecasts: pd.DataFrame,
    observations: pd.DataFrame,
    *,
    as_of: pd.Timestamp,
    settings: ScoreSettings | None = None,
) -> ScoreResult:
    """Score every model on the window's items as of ``as_of``.

    ``forecasts``: the clean table of :func:`forebrief.tables.validate.validate_forecasts`;
    ``observations``: the clean table of :func:`forebrief.tables.validate.validate_observations`.
    Cost: O(rows) for the reshaping plus O(forecasts x levels) for the scores.
    """
    settings = settings or ScoreSettings()
    as_of = pd.Timestamp(as_of)
    wide, n_superseded = build_window(forecasts, observations, as_of=as_of, window=settings.window)
    scores = _interval_scores(wide, settings.scale)
    bins, info, cm_scored, n_degenerate = _classical(wide, settings)
    items = wide.heads.copy()
    items["bin"] = bins
    items["information"] = info
    for k, v in scores.items():
        items[k] = v
    items = items[list(BY_ITEM_COLUMNS)].sort_values(
        ["quantity", "horizon", "region", "week_ending", "model"], kind="stable"
    )
    common = _CommonLevels(
        wide, settings.scale, items.index.to_numpy(), items["wis"].to_numpy(dtype=float)
    )
    items = items.reset_index(drop=True)
    notes: list[str] = []
    if n_superseded:
        notes.append(
            f"{n_superseded} earlier forecast(s) superseded by a later one for the "
            "same item were not scored"
        )
    if n_degenerate:
        notes.append(
            f"{n_degenerate} item(s) where every quantile equals the observation "
            "(no range) were skipped for the Classical Model"
        )
    n_no_cm = int((~cm_scored).sum()) - 0
    if len(items) and n_no_cm:
        notes.append(
            f"{n_no_cm} forecast(s) lacked a Classical Model level or had no range "
            "and were interval-scored only"
        )
    if items.empty:
        empty = pd.DataFrame(columns=list(BY_MODEL_COLUMNS))
        notes.append(
            "no forecast in the window has an observation as of "
            f"{as_of:%Y-%m-%d}: nothing could be scored"
        )
        return ScoreResult(
            empty,
            empty.assign(region=pd.Series(dtype=object)),
            items,
            as_of,
            settings,
            tuple(notes),
            n_degenerate,
        )
    bins_sorted = items["bin"].to_numpy().copy()
    by_model = _aggregate(
        items,
        ["quantity", "horizon", "model"],
        settings,
        ["quantity", "horizon"],
        common=common,
    )
    by_region = _aggregate(
        items,
        ["quantity", "horizon", "region", "model"],
        settings,
        ["quantity", "horizon", "region"],
        common=common,
    )
    fallback = by_model.loc[by_model["equal_weights"], ["quantity", "horizon"]].drop_duplicates()
    for q, h in fallback.itertuples(index=False, name=None):
        notes.append(
            f"{q}, {h} week(s) ahead: no model passes the calibration cutoff "
            f"alpha = {settings.alpha:g}, so the models get equal weights"
        )
    if settings.baseline is not None and settings.baseline not in set(by_model["model"]):
        notes.append(
            f"baseline {settings.baseline!r} has no scored forecasts: relative WIS is left empty"
        )
    items["bin"] = pd.array(np.where(bins_sorted >= 0, bins_sorted, 0), dtype="Int64")
    items.loc[bins_sorted < 0, "bin"] = pd.NA
    return ScoreResult(
        by_model,
        by_region,
        items,
        as_of,
        settings,
        tuple(notes),
        n_degenerate,
        {"n_items": len(items)},
    )


def with_settings(result: ScoreResult, **changes: Any) -> ScoreSettings:
    """A copy of the result's settings with some fields changed."""
    return replace(result.settings, **changes)
