"""Ensembles for one issue date, with weights from what was known on that date.

Four methods, each giving quantiles in the forecast format:

- ``weighted_pool``: the linear pool (mixture of CDFs) with Classical-Model performance weights
  combined x [calibration >= alpha] (Cooke 1991, ch. 12), scored on past items only;
- ``equal_pool``: the linear pool with equal weights;
- ``quantile_median``: at each level, the median of the members' quantiles;
- ``recalibrated_pool``: the beta-transformed equal-weight pool B_ab(F_pool(y)) (Ranjan &
  Gneiting 2010, JRSS B 72:71; Gneiting & Ranjan 2013, Electron. J. Statist. 7:1747), with
  (a, b) the Beta maximum-likelihood fit to the equal pool's PIT values on the history
  window's items (:mod:`forebrief.core.recalibration`). The equal pool is recalibrated, not the
  weighted one: recalibrating the equal-weight pool is the published construction, and the
  weighted pool's weights change from week to week, so last month's PIT values would describe
  a different pool. The fit is per (quantity, horizon) when the window has at least 20 PIT
  values at that horizon, else on all horizons of the quantity together; with fewer than 10
  PIT values a = b = 1 (the equal pool itself) and a note says so. Each group of the summary
  reports ``recalibration = {a, b, n_pit, horizons, at_bound}``. The recalibrated quantiles
  stay inside the pool's support [L*, H*], so outcomes beyond every member's range cannot be
  reached by recalibration either.

Information barrier: the weights are the Classical Model scores that
:func:`forebrief.tables.scoring.score_forecasts` gives as of the last observed week before the
issue date D (same window, same arithmetic; :func:`history_scores` skips the interval scores),
on observations with ``week_ending < D`` and, when vintages exist, ``reported <= D``. Nothing
later is read.

The cutoff alpha is fixed or optimised (``"auto"``): among 0 and the members' calibration
scores, the one that gives the weighted pool, scored as a virtual expert on the window's items,
the highest combined score (Cooke 1991, ch. 12; Cooke & Goossens 2008, RESS 93). Ties go to the
smaller alpha. This in-sample choice is optimistic; the back-test measures it out of sample.
"""

from __future__ import annotations

from collections.abc import Collection, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from forebrief.core.classical import bin_index, calibration_score, information_score
from forebrief.core.distributions import (
    linear_pool_quantiles,
    quantile_median,
    support_bounds,
)
from forebrief.core.recalibration import beta_levels, fit_beta, pool_pit
from forebrief.errors import ConfigError
from forebrief.tables.keys import group_codes
from forebrief.tables.observations import observations_as_of
from forebrief.tables.schema import (
    CM_LEVELS,
    COMBINATIONS,
    Background,
    check_choice,
    cm_probabilities,
)
from forebrief.tables.scoring import (
    ClassicalArrays,
    ScoreSettings,
    WindowTable,
    build_window,
    classical_arrays,
)

__all__ = [
    "ENSEMBLE_COLUMNS",
    "METHODS",
    "WEIGHT_COLUMNS",
    "EnsembleResult",
    "EnsembleSettings",
    "build_ensemble",
    "history_scores",
]

METHODS: tuple[str, ...] = COMBINATIONS
ENSEMBLE_COLUMNS: tuple[str, ...] = (
    "method",
    "region",
    "quantity",
    "issued",
    "week_ending",
    "horizon",
    "level",
    "value",
)
WEIGHT_COLUMNS: tuple[str, ...] = (
    "issued",
    "model",
    "quantity",
    "horizon",
    "n_items",
    "calibration",
    "information",
    "combined",
    "weight",
    "rated",
    "status",
    "alpha",
)
ROBUSTNESS_COLUMNS: tuple[str, ...] = (
    "region",
    "quantity",
    "week_ending",
    "horizon",
    "left_out",
    "weight",
    "median",
    "median_without",
    "median_change",
    "width_90",
    "width_90_without",
    "width_90_change",
)
_TOL = 1e-6
#: fewer PIT values than this: no recalibration (a = b = 1)
MIN_PIT = 10
#: fewer PIT values at one horizon than this: fit on all horizons of the quantity together
MIN_PIT_HORIZON = 20


@dataclass(frozen=True)
class EnsembleSettings:
    """Options of an ensemble build."""

    window: int = 12
    alpha: float | Literal["auto"] = "auto"
    min_items: int = 6
    baseline: str | None = "persistence"
    include_baseline: bool = False
    levels: tuple[float, ...] = CM_LEVELS
    overshoot: float = 0.10
    background: Background = "uniform"
    power: float = 1.0
    signed: tuple[str, ...] = ()
    #: weeks a target must have aged on the rating date before it is scored (0: every week)
    settle_weeks: int = 0

    def __post_init__(self) -> None:
        check_choice("background", self.background, Background)
        if not isinstance(self.settle_weeks, int) or self.settle_weeks < 0:
            raise ConfigError(
                f"settle_weeks must be a whole number of weeks >= 0; got {self.settle_weeks!r}"
            )
        if self.alpha != "auto" and (
            isinstance(self.alpha, str) or not 0.0 <= float(self.alpha) <= 1.0
        ):
            raise ConfigError(f"alpha must be 'auto' or a number in [0, 1]; got {self.alpha!r}")
        if not isinstance(self.min_items, int) or self.min_items < 0:
            raise ConfigError(f"min_items must be a whole number >= 0; got {self.min_items!r}")

    def score_settings(self) -> ScoreSettings:
        return ScoreSettings(
            window=self.window,
            alpha=0.0,
            levels=self.levels,
            overshoot=self.overshoot,
            background=self.background,
            power=self.power,
        )


@dataclass(frozen=True)
class PoolData:
    """The weighted pool's ingredients on each target item, for evaluating its CDF.

    ``values`` (items, members, levels) with nan where absent, per-item ``weights`` (items,
    members), and the support ``lower``/``upper``; see :func:`forebrief.core.distributions.pool_cdf`.
    """

    items: pd.DataFrame
    models: np.ndarray
    levels: np.ndarray
    values: np.ndarray
    weights: np.ndarray
    lower: np.ndarray
    upper: np.ndarray


@dataclass(frozen=True)
class EnsembleResult:
    """The pooled forecasts of one issue date, the weights used, and how they were chosen."""

    issued: pd.Timestamp
    ensemble: pd.DataFrame
    weights: pd.DataFrame
    robustness: pd.DataFrame
    summary: dict[str, Any]
    notes: tuple[str, ...] = ()
    members: tuple[str, ...] = field(default_factory=tuple)
    pool: PoolData | None = None


# --------------------------------------------------------------------------------------------
# history: what was known on the issue date


@dataclass(frozen=True)
class History:
    """What the past window tells about each model, as known on the issue date.

    ``ratings`` holds one row per (quantity, horizon, model) with ``n_cm_items``,
    ``calibration`` and ``information``: the values :func:`forebrief.tables.scoring.
    score_forecasts` gives on the same window (the tests check this). ``window`` and
    ``classical`` are the window's forecasts and their Classical Model arrays, used again to
    score the weighted pool as a virtual expert. All but ``observations`` are None when nothing
    is known yet.
    """

    as_of: pd.Timestamp | None
    observations: pd.DataFrame
    ratings: pd.DataFrame | None
    window: WindowTable | None
    classical: ClassicalArrays | None = None


def known_on(observations: pd.DataFrame, issued: pd.Timestamp) -> pd.DataFrame:
    """Observations known on ``issued``: weeks ending before it, latest vintage reported by it.

    The ``reported`` column is cleared afterwards: the vintage has been chosen, and a scoring
    run as of an earlier week must not drop a revision that was published by ``issued``.
    """
    known = observations_as_of(observations, as_of=issued, weeks_before=issued)
    return known.assign(reported=pd.NaT).astype({"reported": "datetime64[ns]"})


def settled_on(known: pd.DataFrame, day: pd.Timestamp, settle_weeks: int) -> pd.DataFrame:
    """The weeks of ``known`` that are settled on ``day``: at least ``settle_weeks`` old.

    A week's reporting delay on ``day`` is floor((day - week_ending) / 7 days); a week is
    settled once that delay reaches the settle delay (see :func:`forebrief.tables.nowcast.
    settle_delay`). With ``settle_weeks = 0`` every known week is kept.
    """
    if settle_weeks <= 0 or known.empty:
        return known
    delay = (pd.Timestamp(day) - known["week_ending"]).dt.days // 7
    return known.loc[(delay >= settle_weeks).to_numpy()].reset_index(drop=True)


_RATING_KEYS = ["quantity", "horizon", "model"]


def _ratings(
    window: WindowTable, ca: ClassicalArrays | None, settings: ScoreSettings
) -> pd.DataFrame:
    """Calibration and information per (quantity, horizon, model) of a window.

    The same arithmetic as the ``by_model`` table of
    :func:`forebrief.tables.scoring.score_forecasts` (Cooke 1991, ch. 12: bin counts ->
    calibration; mean information over the CM-scored items), in the same order of summation,
    so the values are identical, without the interval scores the weights do not need.
    O(forecasts x levels).
    """
    heads = window.heads
    n = len(heads)
    bins = np.full(n, -1, dtype=np.int64)
    info = np.full(n, np.nan)
    if ca is not None:
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
    # the scoring engine aggregates items in this order; keep it for identical sums
    order = heads.sort_values(
        ["quantity", "horizon", "region", "week_ending", "model"], kind="stable"
    ).index.to_numpy()
    keys = heads.iloc[order][_RATING_KEYS].reset_index(drop=True)
    bins, info = bins[order], info[order]
    code, n_g = group_codes([keys[k] for k in _RATING_KEYS])
    first = np.full(n_g, -1, dtype=np.int64)
    first[code[::-1]] = np.arange(n - 1, -1, -1)
    out = keys.iloc[first].reset_index(drop=True)
    cm = bins >= 0
    counts = np.zeros((n_g, len(settings.levels) + 1), dtype=np.int64)
    np.add.at(counts, (code[cm], bins[cm]), 1)
    out["n_cm_items"] = counts.sum(axis=1)
    out["calibration"] = calibration_score(
        counts, cm_probabilities(settings.levels), power=settings.power
    )
    ok = ~np.isnan(info)
    total = np.bincount(code[ok], weights=info[ok], minlength=n_g)
    many = np.bincount(code[ok], minlength=n_g)
    out["information"] = np.divide(total, many, out=np.full(n_g, np.nan), where=many > 0)
    return out


def history_scores(
    forecasts: pd.DataFrame,
    observations: pd.DataFrame,
    *,
    issued: pd.Timestamp,
    settings: EnsembleSettings,
) -> History:
    """Rate every model on the window before ``issued`` with only what was known then.

    The window is the scoring engine's: target weeks ``as_of - 7 W < week_ending <= as_of``
    of forecasts issued before ``issued`` (and by ``as_of``), with ``as_of`` the last week
    observed before ``issued``. It is built once and reused for the virtual-expert scores.
    O(forecast rows) for the selection plus O(window rows) for the scores.
    """
    known = settled_on(known_on(observations, issued), issued, settings.settle_weeks)
    issued_col = forecasts["issued"]
    before = (issued_col < issued).to_numpy()
    if known.empty or not before.any():
        return History(None, known, None, None)
    as_of = pd.Timestamp(known["week_ending"].max())
    week = forecasts["week_ending"]
    start = as_of - pd.Timedelta(days=7 * settings.window)
    # the engine's window_items on the past forecasts, without copying all of them first
    rows = forecasts.loc[
        before
        & (week > start).to_numpy()
        & (week <= as_of).to_numpy()
        & (issued_col <= as_of).to_numpy()
    ]
    score_settings = settings.score_settings()
    window, _ = build_window(rows, known, as_of=as_of, window=settings.window)
    ca = classical_arrays(window, score_settings)
    return History(as_of, known, _ratings(window, ca, score_settings), window, ca)


# --------------------------------------------------------------------------------------------
# arrays for one issue date


@dataclass(frozen=True)
class _Cube:
    """Members' quantiles per item: (items, members, levels) with nan where absent."""

    items: pd.DataFrame  # region, quantity, week_ending, horizon
    models: np.ndarray  # (m,)
    levels: np.ndarray  # (k,)
    values: np.ndarray  # (n, m, k)


def _cube(
    rows: pd.DataFrame,
    *,
    item_cols: Sequence[str] = ("region", "quantity", "week_ending", "horizon"),
) -> _Cube:
    icode, n_items = group_codes([rows[c] for c in item_cols])
    models, mcode = np.unique(rows["model"].to_numpy().astype(str), return_inverse=True)
    levels, lcode = np.unique(np.round(rows["level"].to_numpy(dtype=float), 9), return_inverse=True)
    values = np.full((n_items, models.size, levels.size), np.nan)
    values[icode, mcode, lcode] = rows["value"].to_numpy(dtype=float)
    first = np.full(n_items, -1, dtype=np.int64)
    first[icode[::-1]] = np.arange(len(rows) - 1, -1, -1)
    items = rows.iloc[first][list(item_cols)].reset_index(drop=True)
    return _Cube(items, models, levels, values)


def _rated_weights(
    history: History,
    members: np.ndarray,
    quantity: str,
    horizon: int,
    *,
    settings: EnsembleSettings,
) -> pd.DataFrame:
    """Calibration, information and rating of each member for one (quantity, horizon)."""
    rows = pd.DataFrame({"model": members})
    rows["quantity"] = quantity
    rows["horizon"] = horizon
    if history.ratings is not None and not history.ratings.empty:
        bm = history.ratings
        bm = bm.loc[
            (bm["quantity"] == quantity) & (bm["horizon"] == horizon),
            ["model", "n_cm_items", "calibration", "information"],
        ]
        rows = rows.merge(bm, on="model", how="left")
    else:
        rows["n_cm_items"] = 0
        rows["calibration"] = np.nan
        rows["information"] = np.nan
    rows["n_cm_items"] = rows["n_cm_items"].fillna(0).astype(int)
    rows = rows.rename(columns={"n_cm_items": "n_items"})
    rows["rated"] = (
        (rows["n_items"] >= settings.min_items)
        & rows["calibration"].notna()
        & rows["information"].notna()
    )
    rows["combined"] = rows["calibration"] * rows["information"]
    return rows


def _status(rated: pd.DataFrame, alpha: float, min_items: int) -> list[str]:
    """Why each member has the weight it has: rated, below the cutoff, or not yet rated."""
    below = f"below the calibration cutoff {alpha:.3g}"
    return [
        "rated"
        if ok and not cal < alpha
        else below
        if ok
        else f"not yet rated ({n} scored items, {min_items} needed)"
        for ok, cal, n in zip(
            rated["rated"].to_numpy(dtype=bool),
            rated["calibration"].to_numpy(dtype=float),
            rated["n_items"].to_numpy(dtype=np.int64),
            strict=True,
        )
    ]


def _cutoff_weights(rated: pd.DataFrame, alpha: float) -> np.ndarray:
    """Unnormalised weights combined x [calibration >= alpha], zero for unrated members."""
    cal = rated["calibration"].to_numpy(dtype=float)
    comb = rated["combined"].to_numpy(dtype=float)
    ok = rated["rated"].to_numpy(dtype=bool) & np.isfinite(comb)
    with np.errstate(invalid="ignore"):
        passed = ok & (cal >= alpha)
    return np.where(passed, comb, 0.0)


@dataclass(frozen=True)
class _VirtualExpert:
    calibration: float
    information: float
    n_items: int

    @property
    def combined(self) -> float:
        return self.calibration * self.information


def _dm_history_cube(
    history: History, models: np.ndarray, quantity: str, horizon: int, settings: EnsembleSettings
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray] | None:
    """Members' CM quantiles on the past window's items (background scale), with ranges.

    ``models`` is sorted (it comes from ``np.unique``). O(window forecasts).
    """
    ca = history.classical
    if history.window is None or ca is None:
        return None
    heads = history.window.heads
    names = heads["model"].to_numpy().astype(str)
    pos = np.minimum(np.searchsorted(models, names), max(models.size - 1, 0))
    member = (models[pos] == names) if models.size else np.zeros(names.size, dtype=bool)
    sel = (
        ca.use
        & (heads["quantity"] == quantity).to_numpy()
        & (heads["horizon"] == horizon).to_numpy()
        & member
    )
    idx = np.flatnonzero(sel)
    if idx.size == 0:
        return None
    icode, n_items = group_codes([ca.item[idx]])
    mcode = pos[idx]
    cube = np.full((n_items, models.size, len(settings.levels)), np.nan)
    cube[icode, mcode] = ca.quantiles[idx]
    lower = np.empty(n_items)
    upper = np.empty(n_items)
    y = np.empty(n_items)
    lower[icode] = ca.lower[idx]
    upper[icode] = ca.upper[idx]
    y[icode] = ca.observed[idx]
    return cube, lower, upper, y


def _score_virtual_expert(
    cube: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    y: np.ndarray,
    weights: np.ndarray,
    settings: EnsembleSettings,
) -> _VirtualExpert:
    """Calibration and information of the pool of ``cube`` with member ``weights``."""
    levels = np.asarray(settings.levels)
    w = np.broadcast_to(weights, cube.shape[:2]).copy()
    present = ~np.isnan(cube).all(axis=2)
    w = np.where(present, w, 0.0)
    ok = w.sum(axis=1) > 0
    if not ok.any():
        return _VirtualExpert(np.nan, np.nan, 0)
    dm = linear_pool_quantiles(cube[ok], levels, w[ok], levels, lower=lower[ok], upper=upper[ok])
    p = cm_probabilities(settings.levels)
    bins = bin_index(dm, y[ok])
    counts = np.bincount(bins, minlength=p.size)
    cal = float(calibration_score(counts, p, power=settings.power))
    info = float(np.nanmean(information_score(dm, lower[ok], upper[ok], p)))
    return _VirtualExpert(cal, info, int(ok.sum()))


def _choose_alpha(
    rated: pd.DataFrame, dm_data: tuple[np.ndarray, ...] | None, settings: EnsembleSettings
) -> tuple[float, _VirtualExpert | None, int]:
    """Optimised cutoff over {0} and the rated members' calibration scores; ties to the smaller."""
    candidates = [0.0]
    if settings.alpha == "auto":
        cal = rated.loc[rated["rated"], "calibration"].to_numpy(dtype=float)
        candidates = sorted({0.0, *[float(c) for c in cal if np.isfinite(c)]})
    else:
        candidates = [float(settings.alpha)]
    if dm_data is None:
        return candidates[0] if settings.alpha != "auto" else 0.0, None, len(candidates)
    cube, lower, upper, y = dm_data
    best_alpha, best = candidates[0], None
    for alpha in candidates:
        w = _cutoff_weights(rated, alpha)
        if not (w > 0).any():
            continue
        ve = _score_virtual_expert(cube, lower, upper, y, w, settings)
        if not np.isfinite(ve.combined):
            continue
        if best is None or ve.combined > best.combined + 1e-12:
            best_alpha, best = alpha, ve
    return best_alpha, best, len(candidates)


def _window_pits(
    window: WindowTable,
    members: np.ndarray,
    quantity: str,
    horizon: int | None,
    overshoot: float,
) -> np.ndarray:
    """PIT values of the equal pool of ``members`` on the window's items (all horizons if None).

    Items are (region, week_ending, horizon) of ``quantity``; each is pooled over the members
    that forecast it. O(window forecasts x levels).
    """
    heads = window.heads
    sel = (heads["quantity"] == quantity).to_numpy() & heads["model"].isin(members).to_numpy()
    if horizon is not None:
        sel &= (heads["horizon"] == horizon).to_numpy()
    idx = np.flatnonzero(sel)
    if idx.size == 0:
        return np.empty(0)
    part = heads.iloc[idx]
    icode, n_items = group_codes([part[c] for c in ("region", "week_ending", "horizon")])
    models, mcode = np.unique(part["model"].to_numpy().astype(str), return_inverse=True)
    cube = np.full((n_items, models.size, window.levels.size), np.nan)
    cube[icode, mcode] = window.values[idx]
    y = np.empty(n_items)
    y[icode] = part["observed"].to_numpy(dtype=float)
    u = pool_pit(cube, window.levels, y, overshoot=overshoot)
    return u[~np.isnan(u)]


def _recalibration(
    history: History,
    members: np.ndarray,
    quantity: str,
    horizon: int,
    settings: EnsembleSettings,
) -> tuple[float, float, dict[str, Any], str | None]:
    """Beta (a, b) of the recalibrated pool for one (quantity, horizon), its summary and note.

    The rule of the module docstring: this horizon's PIT values if there are at least
    ``MIN_PIT_HORIZON``, else all horizons' of the quantity; fewer than ``MIN_PIT``: a = b = 1.
    """
    u = np.empty(0)
    scope = "all horizons"  # the widest set tried
    if history.window is not None:
        u = _window_pits(history.window, members, quantity, horizon, settings.overshoot)
        if u.size >= MIN_PIT_HORIZON:
            scope = "this horizon"
        else:
            u = _window_pits(history.window, members, quantity, None, settings.overshoot)
    if u.size < MIN_PIT:
        info = {"a": 1.0, "b": 1.0, "n_pit": int(u.size), "horizons": scope, "at_bound": False}
        note = (
            f"{quantity}, {horizon} week(s) ahead: {u.size} past forecast(s) of the equal pool "
            f"can be checked against observations, {MIN_PIT} needed, so the recalibrated pool "
            "is the equal pool"
        )
        return 1.0, 1.0, info, note
    fit = fit_beta(u)
    info = {
        "a": round(float(fit.a), 6),
        "b": round(float(fit.b), 6),
        "n_pit": int(u.size),
        "horizons": scope,
        "at_bound": bool(fit.at_bound),
    }
    return float(fit.a), float(fit.b), info, None


# --------------------------------------------------------------------------------------------
# pooling


def _common_levels(values: np.ndarray, levels: np.ndarray) -> np.ndarray:
    """(n, k) mask of levels every present member gives for each item."""
    present_member = ~np.isnan(values).all(axis=2)  # (n, m)
    has_level = ~np.isnan(values)  # (n, m, k)
    return (
        np.all(has_level | ~present_member[:, :, None], axis=1)
        & present_member.any(axis=1)[:, None]
    )


def _pool_all(
    values: np.ndarray,
    levels: np.ndarray,
    weights: np.ndarray,
    out_mask: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    *,
    out_levels: np.ndarray | None = None,
) -> np.ndarray:
    """Linear-pool quantiles at each item's common levels (nan elsewhere).

    ``out_levels`` (k,): the pool levels to invert at instead of ``levels`` (the recalibrated
    pool's B^-1(tau)); the output stays on the grid of ``levels``.
    """
    targets = levels if out_levels is None else out_levels
    out = np.full(out_mask.shape, np.nan)
    patterns, inverse = np.unique(out_mask, axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    for p, pattern in enumerate(patterns):
        if not pattern.any():
            continue
        sel = np.flatnonzero(inverse == p)
        cols = np.flatnonzero(pattern)
        out[np.ix_(sel, cols)] = linear_pool_quantiles(
            values[sel], levels, weights[sel], targets[cols], lower=lower[sel], upper=upper[sel]
        )
    return out


def _long(
    items: pd.DataFrame, method: str, issued: pd.Timestamp, levels: np.ndarray, values: np.ndarray
) -> pd.DataFrame:
    ok = ~np.isnan(values)
    ii, kk = np.nonzero(ok)
    out = items.iloc[ii].reset_index(drop=True)
    out.insert(0, "method", method)
    out["issued"] = issued
    out["level"] = levels[kk]
    out["value"] = values[ii, kk]
    return out


def build_ensemble(
    forecasts: pd.DataFrame,
    observations: pd.DataFrame,
    *,
    issued: pd.Timestamp,
    settings: EnsembleSettings | None = None,
    history: History | None = None,
) -> EnsembleResult:
    """Build the four ensembles (``METHODS``) for the forecasts issued on ``issued``.

    ``forecasts`` and ``observations`` are validated tables; only observations known on the
    issue date are used (see the module docstring). Cost: one scoring run of the window, one
    pooling pass per candidate alpha over the window's items, one over the targets, and for
    the recalibrated pool one CDF evaluation of the window's items and one more pooling pass.
    """
    settings = settings or EnsembleSettings()
    issued = pd.Timestamp(issued).as_unit("ns")  # the tables' resolution, whatever the caller's
    notes: list[str] = []
    baseline = settings.baseline
    excluded_models = set() if settings.include_baseline or baseline is None else {baseline}
    today = forecasts.loc[
        (forecasts["issued"] == issued) & ~forecasts["model"].isin(excluded_models)
    ]
    if today.empty:
        dates = sorted(
            pd.Timestamp(d)
            for d in forecasts.loc[~forecasts["model"].isin(excluded_models), "issued"].unique()
        )
        near = sorted(dates, key=lambda d: abs((d - issued).days))[:3]
        listed = ", ".join(f"{d:%Y-%m-%d}" for d in sorted(near)) or "none"
        raise ConfigError(
            f"no member forecast is issued on {issued:%Y-%m-%d}; the nearest issue dates in "
            f"the forecasts are {listed}; fix: pass one of them as the issue date"
        )
    if history is None:
        history = history_scores(forecasts, observations, issued=issued, settings=settings)
    if history.as_of is None:
        why = (
            "no observations are known" if history.observations.empty else "no model has forecasts"
        )
        notes.append(
            f"{why} before {issued:%Y-%m-%d}: no model can be rated yet, so the "
            "weighted pool uses equal weights"
        )
    cube = _cube(today)
    n, m, _ = cube.values.shape
    lower, upper = support_bounds(cube.values, overshoot=settings.overshoot)
    common = _common_levels(cube.values, cube.levels)
    member_present = ~np.isnan(cube.values).all(axis=2)

    weight_rows = []
    pool_w = np.zeros((n, m))
    summary_groups = []
    recal_groups = []
    groups = (
        cube.items[["quantity", "horizon"]].drop_duplicates().sort_values(["quantity", "horizon"])
    )
    for quantity, horizon in groups.itertuples(index=False, name=None):
        in_group = (
            (cube.items["quantity"] == quantity) & (cube.items["horizon"] == horizon)
        ).to_numpy()
        gm = np.flatnonzero(member_present[in_group].any(axis=0))
        members = cube.models[gm]
        rated = _rated_weights(history, members, quantity, int(horizon), settings=settings)
        dm_data = _dm_history_cube(history, members, quantity, int(horizon), settings)
        alpha, ve, n_candidates = _choose_alpha(rated, dm_data, settings)
        raw = _cutoff_weights(rated, alpha)
        fallback = not (raw > 0).any()
        total = raw.sum()
        norm_w = raw / total if total > 0 else np.full(raw.size, 1.0 / max(raw.size, 1))
        status = _status(rated, alpha, settings.min_items)
        table = rated.assign(weight=norm_w, status=status, alpha=alpha, issued=issued)
        weight_rows.append(table)
        # per item: the group's unnormalised weights, renormalised over the members present
        w_members = np.zeros(m)
        w_members[gm] = raw if not fallback else 1.0
        rows_idx = np.flatnonzero(in_group)
        w_items = np.where(member_present[rows_idx], w_members[None, :], 0.0)
        zero = w_items.sum(axis=1) <= 0
        if zero.any():
            w_items[zero] = member_present[rows_idx][zero].astype(float)
            if not fallback:
                notes.append(
                    f"{quantity}, {horizon} week(s) ahead: on {int(zero.sum())} "
                    "target(s) no member present has weight; equal weights used there"
                )
        pool_w[rows_idx] = w_items
        if fallback:
            notes.append(
                f"{quantity}, {horizon} week(s) ahead: no member is rated and above "
                "the cutoff, so the weighted pool uses equal weights"
            )
        eq = None
        if dm_data is not None:
            eq = _score_virtual_expert(*dm_data, np.ones(members.size), settings)
        beta_a, beta_b, recal_info, recal_note = _recalibration(
            history, members, quantity, int(horizon), settings
        )
        recal_groups.append((rows_idx, beta_a, beta_b))
        if recal_note is not None:
            notes.append(recal_note)
        summary_groups.append(
            {
                "quantity": quantity,
                "horizon": int(horizon),
                "alpha": alpha,
                "alpha_mode": "auto" if settings.alpha == "auto" else "fixed",
                "candidates": n_candidates,
                "equal_weight_fallback": bool(fallback),
                "pool_calibration": None if ve is None else ve.calibration,
                "pool_information": None if ve is None else ve.information,
                "pool_combined": None if ve is None else ve.combined,
                "pool_items": 0 if ve is None else ve.n_items,
                "equal_pool_calibration": None if eq is None else eq.calibration,
                "equal_pool_information": None if eq is None else eq.information,
                "members": [str(x) for x in members],
                "rated": [str(x) for x in rated.loc[rated["rated"], "model"]],
                "recalibration": recal_info,
            }
        )

    weighted = _pool_all(cube.values, cube.levels, pool_w, common, lower, upper)
    equal = _pool_all(cube.values, cube.levels, member_present.astype(float), common, lower, upper)
    qmed = np.where(common, quantile_median(cube.values), np.nan)
    recal = equal.copy()
    for rows_idx, beta_a, beta_b in recal_groups:
        if beta_a == 1.0 and beta_b == 1.0:
            continue
        recal[rows_idx] = _pool_all(
            cube.values[rows_idx],
            cube.levels,
            member_present[rows_idx].astype(float),
            common[rows_idx],
            lower[rows_idx],
            upper[rows_idx],
            out_levels=beta_levels(cube.levels, beta_a, beta_b),
        )
    floor = ~cube.items["quantity"].isin(list(settings.signed)).to_numpy()[:, None]
    parts = []
    for method, vals in (
        ("weighted_pool", weighted),
        ("equal_pool", equal),
        ("quantile_median", qmed),
        ("recalibrated_pool", recal),
    ):
        vals = np.where(floor & ~np.isnan(vals), np.maximum(vals, 0.0), vals)
        parts.append(_long(cube.items, method, issued, cube.levels, vals))
    ensemble = pd.concat(parts, ignore_index=True)[list(ENSEMBLE_COLUMNS)]
    ensemble["method"] = pd.Categorical(ensemble["method"], categories=list(METHODS))
    ensemble = ensemble.sort_values(
        ["method", "quantity", "region", "horizon", "week_ending", "level"], kind="stable"
    ).reset_index(drop=True)
    ensemble["method"] = ensemble["method"].astype(str)
    weights = pd.concat(weight_rows, ignore_index=True)[list(WEIGHT_COLUMNS)]
    robustness = _robustness(cube, pool_w, lower, upper, settings)
    summary = {
        "issued": f"{issued:%Y-%m-%d}",
        "history_as_of": None if history.as_of is None else f"{history.as_of:%Y-%m-%d}",
        "window_weeks": settings.window,
        "min_items": settings.min_items,
        "baseline": baseline,
        "baseline_included": settings.include_baseline,
        "groups": summary_groups,
        "notes": notes,
    }
    pool = PoolData(cube.items, cube.models, cube.levels, cube.values, pool_w, lower, upper)
    return EnsembleResult(
        issued,
        ensemble,
        weights,
        robustness,
        summary,
        tuple(notes),
        tuple(str(x) for x in cube.models),
        pool,
    )


def _robustness(
    cube: _Cube,
    pool_w: np.ndarray,
    lower: np.ndarray,
    upper: np.ndarray,
    settings: EnsembleSettings,
) -> pd.DataFrame:
    """Leave-one-out change of the weighted pool's median and 90% width, per item and member."""
    lv = cube.levels
    need = [np.flatnonzero(np.abs(lv - t) < _TOL) for t in (0.05, 0.5, 0.95)]
    if any(x.size == 0 for x in need):
        return pd.DataFrame(columns=list(ROBUSTNESS_COLUMNS))
    out_levels = np.array([0.05, 0.5, 0.95])
    full = linear_pool_quantiles(cube.values, lv, pool_w, out_levels, lower=lower, upper=upper)
    present = ~np.isnan(cube.values).all(axis=2)
    wsum = pool_w.sum(axis=1, keepdims=True)
    share = np.divide(pool_w, wsum, out=np.zeros_like(pool_w), where=wsum > 0)
    rows = []
    for j, model in enumerate(cube.models):
        sel = np.flatnonzero(present[:, j] & (present.sum(axis=1) > 1))
        if sel.size == 0:
            continue
        vals = cube.values[sel].copy()
        vals[:, j, :] = np.nan
        w = pool_w[sel].copy()
        w[:, j] = 0.0
        left = np.where(~np.isnan(vals).all(axis=2), 1.0, 0.0)
        w = np.where(w.sum(axis=1, keepdims=True) > 0, w, left)
        lo, hi = support_bounds(vals, overshoot=settings.overshoot)
        without = linear_pool_quantiles(vals, lv, w, out_levels, lower=lo, upper=hi)
        part = cube.items.iloc[sel].reset_index(drop=True)
        part["left_out"] = model
        part["weight"] = share[sel, j]
        part["median"] = full[sel, 1]
        part["median_without"] = without[:, 1]
        part["median_change"] = without[:, 1] - full[sel, 1]
        part["width_90"] = full[sel, 2] - full[sel, 0]
        part["width_90_without"] = without[:, 2] - without[:, 0]
        part["width_90_change"] = part["width_90_without"] - part["width_90"]
        rows.append(part)
    if not rows:
        return pd.DataFrame(columns=list(ROBUSTNESS_COLUMNS))
    out = pd.concat(rows, ignore_index=True)[list(ROBUSTNESS_COLUMNS)]
    return out.sort_values(
        ["quantity", "region", "horizon", "week_ending", "left_out"], kind="stable"
    ).reset_index(drop=True)


def with_baseline(
    forecasts: pd.DataFrame,
    observations: pd.DataFrame,
    *,
    issue_dates: Collection[pd.Timestamp],
    name: str,
    horizons: Sequence[int] = (1, 2, 3, 4),
    signed: Collection[str] = (),
    levels: Sequence[float] | None = None,
) -> tuple[pd.DataFrame, bool]:
    """Add persistence forecasts named ``name`` for each issue date, unless already present.

    Each is built from the observations known on its issue date only. ``levels``: the
    quantile levels of the baseline; by default, on each issue date, the sorted union of the
    levels the members (every model but ``name``) give on that date, so the baseline is
    scored on the levels it is compared on (Bracher et al. 2021, PLOS Comput Biol 17(2):
    e1008618: WIS on different quantile sets are not comparable); the standard levels when
    no member forecast is issued that date. Returns the combined table and whether the
    baseline was generated.
    """
    from forebrief.tables.baseline import persistence_forecast
    from forebrief.tables.schema import STANDARD_LEVELS

    if name in set(forecasts["model"].unique()):
        return forecasts, False
    by_date: dict[pd.Timestamp, tuple[float, ...]] = {}
    if levels is None:
        members = forecasts.loc[forecasts["model"] != name, ["issued", "level"]]
        union = members.assign(level=np.round(members["level"].to_numpy(dtype=float), 9))
        union = union.drop_duplicates().sort_values(["issued", "level"], kind="stable")
        by_date = {
            pd.Timestamp(d): tuple(float(v) for v in part)
            for d, part in union.groupby("issued", sort=False)["level"]
        }
    parts = [forecasts]
    for d in sorted(set(issue_dates)):
        known = known_on(observations, pd.Timestamp(d))
        if known.empty:
            continue
        floors = sorted(set(known["quantity"]) - set(signed))
        base = persistence_forecast(
            known[["region", "quantity", "week_ending", "value"]],
            issued=pd.Timestamp(d),
            horizons=horizons,
            levels=(
                tuple(levels)
                if levels is not None
                else by_date.get(pd.Timestamp(d), STANDARD_LEVELS)
            ),
            name=name,
            nonnegative=floors,
        )
        days = (base["week_ending"] - base["issued"]).dt.days.to_numpy()
        base = base.assign(horizon=np.ceil(days / 7).astype(np.int64))
        parts.append(base)
    out = pd.concat(parts, ignore_index=True)
    for col in ("issued", "week_ending"):
        out[col] = out[col].astype("datetime64[ns]")
    return out, True
