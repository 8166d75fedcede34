"""Comparing two forecasting methods over issue dates, and the rule that picks the headline one.

Pure computation: arrays and tables in, numbers and plain sentences out; no files.

:func:`diebold_mariano` tests equal predictive accuracy of two methods from the series of
loss differences d_t (Diebold & Mariano 1995, J. Bus. Econ. Statist. 13:253), with the small-
sample correction of Harvey, Leybourne & Newbold (1997, Int. J. Forecasting 13:281).

:func:`choose_headline` applies the headline rule to a back-test's ``by_item`` table: the
untrained quantile median is the headline combination unless another combination has a lower
mean WIS at the headline horizons over at least ``min_dates`` settled issue dates *and* a one-
sided Diebold-Mariano test on the per-date mean WIS gives p < ``p_threshold``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, Literal

import numpy as np
import pandas as pd
from numpy.typing import ArrayLike
from scipy.stats import norm
from scipy.stats import t as student_t

from forebrief.errors import ConfigError
from forebrief.tables.ensemble import METHODS
from forebrief.tables.schema import check_choice

__all__ = [
    "METHOD_NAMES",
    "DMResult",
    "Kernel",
    "choose_headline",
    "diebold_mariano",
]

Kernel = Literal["bartlett", "rectangular"]

#: How each combination is named in a sentence (plain language, lower case).
METHOD_NAMES: dict[str, str] = {
    "weighted_pool": "the reliability-weighted combination",
    "equal_pool": "the equal-weight combination",
    "quantile_median": "the median of the models",
    "recalibrated_pool": "the recalibrated equal-weight combination",
}


@dataclass(frozen=True)
class DMResult:
    """A Diebold-Mariano test of d_t = loss(A) - loss(B); small p means A is worse than B."""

    n: int
    horizon: int
    mean: float  # dbar
    long_run_variance: float  # gamma_0 + 2 sum_k w_k gamma_k
    statistic: float  # DM = dbar / sqrt(long_run_variance / n)
    p_value: float  # P(Z >= DM), Z standard normal
    hln_statistic: float  # DM sqrt((n + 1 - 2h + h(h - 1)/n) / n)
    hln_p_value: float  # P(T >= HLN), T Student t on n - 1 degrees of freedom
    kernel: str  # the lag window used


def _autocovariances(d: np.ndarray, max_lag: int) -> np.ndarray:
    """gamma_k = (1/n) sum_{t=k}^{n-1} (d_t - dbar)(d_{t-k} - dbar), k = 0..max_lag. O(n lags)."""
    e = d - d.mean()
    n = d.size
    return np.array([float(e[k:] @ e[: n - k]) / n for k in range(max_lag + 1)])


def diebold_mariano(d: ArrayLike, *, horizon: int = 1, kernel: Kernel = "bartlett") -> DMResult:
    """Diebold-Mariano test of equal accuracy from loss differences ``d`` in time order.

    DM = dbar / sqrt(V / n), V = gamma_0 + 2 sum_{k=1}^{h-1} w_k gamma_k the long-run variance
    of d from its sample autocovariances (divisor n) up to lag h - 1, because h-step-ahead
    forecast errors are dependent up to that lag (Diebold & Mariano 1995, J. Bus. Econ.
    Statist. 13:253). ``kernel="bartlett"``: the Newey-West weights w_k = 1 - k/h (Newey &
    West 1987, Econometrica 55:703), never negative; ``"rectangular"``: w_k = 1, the truncated
    window of Diebold & Mariano, for which Harvey, Leybourne & Newbold derived their
    correction; when it gives V <= 0 the Bartlett value is used (``kernel`` in the result says
    which). HLN = DM sqrt((n + 1 - 2h + h(h - 1)/n) / n), compared with Student t on n - 1
    degrees of freedom (Harvey, Leybourne & Newbold 1997, Int. J. Forecasting 13:281). Both
    p-values are one-sided, P(statistic >= observed): small p means the first method's loss is
    larger. With V = 0 (all d equal, to rounding) the statistic is 0 when dbar = 0 (p = 0.5) and +-inf
    otherwise. Cost O(n h).

    ``d`` must be one-dimensional and finite with n >= 2, and n + 1 - 2h + h(h - 1)/n > 0
    (``ValueError`` otherwise).
    """
    x = np.asarray(d, dtype=float)
    if x.ndim != 1 or x.size < 2:
        raise ValueError(
            f"loss differences must be one value per issue date, at least 2; got shape {x.shape}"
        )
    if not np.all(np.isfinite(x)):
        raise ValueError(
            f"loss differences must be finite; position {int(np.argmax(~np.isfinite(x)))} is "
            f"{x[~np.isfinite(x)][0]}. Drop dates where either method is unscored."
        )
    if isinstance(horizon, bool) or not isinstance(horizon, int | np.integer) or horizon < 1:
        raise ConfigError(f"horizon must be a whole number of weeks >= 1; got {horizon!r}")
    check_choice("kernel", kernel, Kernel)
    h = int(horizon)
    n = x.size
    factor = (n + 1 - 2 * h + h * (h - 1) / n) / n
    if factor <= 0:
        raise ValueError(
            f"{n} issue dates are too few for a {h}-week-ahead Diebold-Mariano test with the "
            "Harvey-Leybourne-Newbold correction (it needs n + 1 - 2h + h(h-1)/n > 0); "
            "wait for more scored issue dates"
        )
    gamma = _autocovariances(x, h - 1)
    lags = np.arange(1, h)
    bartlett = float(gamma[0] + 2.0 * np.sum((1.0 - lags / h) * gamma[1:]))
    used = kernel
    variance = bartlett
    if kernel == "rectangular":
        variance = float(gamma[0] + 2.0 * np.sum(gamma[1:]))
        if variance <= 0.0:
            variance, used = bartlett, "bartlett"
    dbar = float(x.mean())
    # a constant series has V = 0 up to rounding (about (1e-16 |d|)^2); treat it as 0
    if variance > (1e-12 * float(np.max(np.abs(x)))) ** 2:
        stat = dbar / math.sqrt(variance / n)
    else:
        stat = 0.0 if dbar == 0.0 else math.copysign(math.inf, dbar)
    hln = stat * math.sqrt(factor)
    return DMResult(
        n=n,
        horizon=h,
        mean=dbar,
        long_run_variance=variance,
        statistic=stat,
        p_value=float(norm.sf(stat)),
        hln_statistic=hln,
        hln_p_value=float(student_t.sf(hln, n - 1)),
        kernel=used,
    )


# --------------------------------------------------------------------------------------------
# the headline rule

_KEYS = ["issued", "region", "week_ending", "horizon"]
_NEEDED = ("model", "region", "quantity", "issued", "week_ending", "horizon", "wis")


def _check_method(what: str, name: str) -> None:
    if name not in METHODS:
        raise ConfigError(
            f"{what} {name!r} is not a combination forebrief builds; the valid ones are "
            f"{', '.join(METHODS)}"
        )


def _signif(x: float | None, digits: int) -> float | None:
    if x is None or not math.isfinite(x):
        return None
    return float(f"{x:.{digits}g}")


def _p_text(p: float) -> str:
    return "p < 0.001" if p < 0.001 else f"p = {p:.2g}"


def _change_text(ratio: float, default: str) -> str:
    """'12% lower error than the median of the models' from a WIS ratio (method / default)."""
    base = METHOD_NAMES[default]
    pct = (1.0 - ratio) * 100.0
    if round(pct) == 0:
        word = "slightly lower" if ratio < 1 else "slightly higher" if ratio > 1 else "the same"
        return f"{word} error than {base}" if word != "the same" else f"the same error as {base}"
    return f"{abs(pct):.0f}% {'lower' if pct > 0 else 'higher'} error than {base}"


def _horizons_text(horizons: Sequence[int]) -> str:
    hs = [str(h) for h in horizons]
    listed = hs[0] if len(hs) == 1 else ", ".join(hs[:-1]) + " and " + hs[-1]
    return f"{listed} week{'s' if hs != ['1'] else ''} ahead"


def _settled(frame: pd.DataFrame, horizons: Sequence[int]) -> pd.DataFrame:
    """The rows of the issue dates that have scored items at every one of ``horizons``."""
    if frame.empty:
        return frame
    per_date = frame.groupby("issued")["horizon"].nunique()
    full = per_date.index[(per_date == len(set(horizons))).to_numpy()]
    return frame.loc[frame["issued"].isin(full)]


def _compare(
    wide: pd.DataFrame, default: str, method: str, horizons: Sequence[int]
) -> dict[str, Any]:
    """Default against ``method`` on the items both scored, on the dates settled for both."""
    both = wide.loc[wide[default].notna() & wide[method].notna(), [*_KEYS, default, method]]
    both = _settled(both, horizons)
    if both.empty:
        return {"n": 0, "mean": None, "ratio": None, "dm": None}
    per_date = both.groupby("issued")[[default, method]].mean().sort_index()
    d = (per_date[default] - per_date[method]).to_numpy(dtype=float)
    mean_default = float(both[default].mean())
    mean_method = float(both[method].mean())
    ratio = mean_method / mean_default if mean_default > 0 else math.nan
    return {"n": int(d.size), "mean": mean_method, "ratio": ratio, "d": d, "dm": None}


def choose_headline(
    by_item: pd.DataFrame,
    *,
    quantity: str,
    default: str = "quantile_median",
    candidates: Sequence[str],
    horizons: Sequence[int] = (1, 2),
    min_dates: int = 8,
    p_threshold: float = 0.10,
    forced: str | None = None,
) -> dict[str, Any]:
    """Which combination heads the briefing for ``quantity``, with the figures and the reason.

    The rule: ``default`` (the untrained quantile median) is the headline unless a candidate
    has a lower mean WIS than it at ``horizons`` over at least ``min_dates`` settled issue dates
    and a one-sided Diebold-Mariano test gives p < ``p_threshold``. The test series is, per
    issue date, the mean WIS of the default minus that of the candidate over all regions and
    ``horizons`` of that date (averaging within a date absorbs the dependence between regions
    and horizons forecast on one date), in date order; the long-run variance uses Newey-West
    weights up to lag h - 1 with h = max(``horizons``), and the Harvey-Leybourne-Newbold
    correction (:func:`diebold_mariano`; Diebold & Mariano 1995; Harvey, Leybourne & Newbold
    1997). Only issue dates where both methods have scored items at every one of ``horizons``
    count (settled dates), and only the items both scored (the same items). If several
    candidates qualify, the one with the lowest mean WIS relative to the default on the same
    items is chosen. Every region is kept, the jurisdiction total too: it is one more item of
    each date, on its own (larger) scale. ``forced`` (a method name from the configuration)
    overrides the rule; the figures are still reported.

    ``by_item`` is a back-test's ``by_item`` table (columns model, region, quantity, issued,
    week_ending, horizon, wis, ...); rows of other models are ignored. Returns plain JSON-ready
    values: ``method``, ``reason`` (one sentence), ``default``, ``forced``, ``quantity``,
    ``horizons``, ``n_dates`` (settled dates of the default), ``mean_wis`` (per method, the
    default on its settled items, the others on the items shared with it), ``relative_to_
    default`` (mean WIS ratio on the same items), ``dm_p`` (HLN one-sided p-values),
    ``dm_statistic``, ``n_dates_compared``, ``qualified``, ``challenger`` (the candidate with
    the lowest ratio that was tested, or None), ``min_dates`` and ``p_threshold``. Unknown
    method names raise :class:`ConfigError` listing the valid ones. Cost O(items log items).
    """
    _check_method("the default combination", default)
    for c in candidates:
        _check_method("the candidate combination", c)
    if forced is not None:
        _check_method("the headline combination", forced)
    hs = sorted({int(h) for h in horizons})
    if not hs or hs[0] < 1:
        raise ConfigError(f"horizons must be whole numbers of weeks >= 1; got {list(horizons)}")
    if isinstance(min_dates, bool) or not isinstance(min_dates, int) or min_dates < 3:
        raise ConfigError(f"min_dates must be a whole number >= 3; got {min_dates!r}")
    if not 0.0 < float(p_threshold) < 1.0:
        raise ConfigError(f"p_threshold must lie strictly between 0 and 1; got {p_threshold!r}")
    missing = [c for c in _NEEDED if c not in by_item.columns]
    if missing:
        raise ValueError(f"by_item lacks the column(s) {', '.join(missing)}; pass a back-test's")

    others = [c for c in dict.fromkeys(candidates) if c != default]
    if forced is not None and forced != default and forced not in others:
        others.append(forced)
    methods = [default, *others]
    rows = by_item.loc[
        (by_item["quantity"] == quantity)
        & by_item["horizon"].isin(hs)
        & by_item["model"].isin(methods)
        & by_item["wis"].notna(),
        [*_KEYS, "model", "wis"],
    ]
    # one column of WIS per method, one row per item (a repeated item is averaged)
    rows = rows.assign(model=rows["model"].astype(str))
    wide = rows.groupby([*_KEYS, "model"], sort=True)["wis"].mean().unstack("model")
    wide = wide.reindex(columns=methods).reset_index()
    h_max = hs[-1]
    mine = _settled(wide.loc[wide[default].notna(), [*_KEYS, default]], hs)
    n_dates = int(mine["issued"].nunique())
    mean_default = float(mine[default].mean()) if n_dates else None

    results: dict[str, dict[str, Any]] = {}
    for m in others:
        r = _compare(wide, default, m, hs)
        if r["n"] >= min_dates and r["n"] + 1 - 2 * h_max + h_max * (h_max - 1) / r["n"] > 0:
            r["dm"] = diebold_mariano(r["d"], horizon=h_max)
        results[m] = r
    tested = {m: r for m, r in results.items() if r["dm"] is not None}
    qualified = sorted(
        (
            m
            for m, r in tested.items()
            if r["ratio"] < 1.0 and r["dm"].hln_p_value < p_threshold and m in candidates
        ),
        key=lambda m: (tested[m]["ratio"], others.index(m)),
    )
    pool = [m for m in tested if m in candidates]
    challenger = min(pool, key=lambda m: (tested[m]["ratio"], others.index(m)), default=None)

    label = METHOD_NAMES
    ahead = _horizons_text(hs)
    if forced is not None:
        method = forced
        if forced == default:
            reason = f"{label[forced]} is used because it was chosen in the configuration"
        else:
            r = results[forced]
            if r["ratio"] is None or not math.isfinite(r["ratio"]):
                tail = "it has no scored issue dates to compare with yet"
            else:
                p = "" if r["dm"] is None else f" ({_p_text(r['dm'].hln_p_value)})"
                tail = (
                    f"over the last {r['n']} issue dates it had "
                    f"{_change_text(r['ratio'], default)}{p}"
                )
            reason = f"{label[forced]} is used because it was chosen in the configuration; {tail}"
    elif n_dates < min_dates:
        method = default
        have = "no issue date has" if n_dates == 0 else f"only {n_dates} issue date(s) have"
        reason = (
            f"{label[default]} is used: {have} been scored {ahead} so far, and another "
            f"combination needs at least {min_dates} to replace it"
        )
    elif qualified:
        method = qualified[0]
        r = tested[method]
        reason = (
            f"{label[method]} had {_change_text(r['ratio'], default)} over the last "
            f"{r['n']} issue dates ({_p_text(r['dm'].hln_p_value)})"
        )
        if len(qualified) > 1:
            reason += (
                f", the lowest error of the {len(qualified)} combinations that did clearly better"
            )
    else:
        method = default
        reason = (
            f"{label[default]} is used unless another combination does clearly better; none "
            f"did over the last {n_dates} issue dates"
        )

    mean_wis: dict[str, float | None] = {default: _signif(mean_default, 4)}
    relative: dict[str, float | None] = {default: 1.0 if n_dates else None}
    dm_p: dict[str, float | None] = {}
    dm_stat: dict[str, float | None] = {}
    n_compared: dict[str, int] = {}
    for m, r in results.items():
        mean_wis[m] = _signif(r["mean"], 4)
        ratio = r["ratio"]
        relative[m] = None if ratio is None or not math.isfinite(ratio) else round(ratio, 3)
        dm_p[m] = None if r["dm"] is None else _signif(r["dm"].hln_p_value, 3)
        dm_stat[m] = None if r["dm"] is None else _signif(r["dm"].hln_statistic, 4)
        n_compared[m] = int(r["n"])
    return {
        "method": method,
        "reason": reason,
        "default": default,
        "forced": forced is not None,
        "quantity": quantity,
        "horizons": hs,
        "n_dates": n_dates,
        "mean_wis": mean_wis,
        "relative_to_default": relative,
        "dm_p": dm_p,
        "dm_statistic": dm_stat,
        "n_dates_compared": n_compared,
        "qualified": qualified,
        "challenger": challenger,
        "min_dates": min_dates,
        "p_threshold": float(p_threshold),
    }
