"""Three simple forecasting methods for the open-dataset test, written for that test only.

Each method takes the weekly counts known at the issue date (``history``, oldest first, the
last entry being the week that has just ended) and returns quantiles of shape
(horizons, levels). The driver :func:`issue_forecasts` hands every method a slice of the
series that ends at the issue week, so no method can see a later week.

- :func:`persistence_quantiles`: the median is the last week's count; the spread comes from
  the past h-week changes, made symmetric by adding their negatives, floored at 0. The
  symmetrised changes follow the persistence baseline described by Cramer et al. (2022,
  PNAS 119(15), Methods; from memory); using h-week rather than summed one-week changes for
  horizon h is our choice.
- :func:`moving_average_poisson`: Poisson quantiles (``scipy.stats.poisson.ppf``) around the
  mean of the last three weeks, the same for every horizon. Poisson variance equals the mean,
  so this method ignores the over-dispersion of epidemic counts on purpose.
- :func:`log_growth_lognormal`: a straight line fitted by least squares to ln(y + 1) over the
  last four weeks, extrapolated h weeks; y + 1 is lognormal (``scipy.stats.lognorm.ppf``)
  with log-sd sigma * sqrt(h), sigma the sample sd of all past one-week changes of
  ln(y + 1) (a random walk on the log scale; our choice).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np
import pandas as pd
from scipy.stats import lognorm, poisson

__all__ = [
    "METHODS",
    "issue_forecasts",
    "log_growth_lognormal",
    "moving_average_poisson",
    "persistence_quantiles",
]

Method = Callable[[np.ndarray, np.ndarray, int], np.ndarray]


def persistence_quantiles(history: np.ndarray, levels: np.ndarray, horizons: int) -> np.ndarray:
    """Last value plus quantiles of the symmetrised past h-week changes, floored at 0.

    Needs ``len(history) > horizons``. Quantiles by ``np.quantile`` 'linear' (R type 7).
    Cost: O(horizons x (n log n + levels)).
    """
    y = np.asarray(history, dtype=float)
    out = np.empty((horizons, levels.size))
    for h in range(1, horizons + 1):
        change = y[h:] - y[:-h]
        spread = np.quantile(np.r_[change, -change], levels)
        out[h - 1] = np.maximum(0.0, y[-1] + spread)
    return out


def moving_average_poisson(
    history: np.ndarray, levels: np.ndarray, horizons: int, *, span: int = 3
) -> np.ndarray:
    """Poisson quantiles with mean = mean of the last ``span`` weeks, for every horizon.

    Cost: O(horizons x levels).
    """
    mean = float(np.mean(np.asarray(history, dtype=float)[-span:]))
    return np.tile(poisson.ppf(levels, mean), (horizons, 1))


def log_growth_lognormal(
    history: np.ndarray, levels: np.ndarray, horizons: int, *, span: int = 4
) -> np.ndarray:
    """Extrapolated log-linear trend with lognormal quantiles of y + 1, floored at 0.

    Needs at least ``span`` weeks and two one-week changes. Cost: O(n + horizons x levels).
    """
    z = np.log1p(np.asarray(history, dtype=float))
    t = np.arange(span, dtype=float)
    slope, intercept = np.polyfit(t, z[-span:], 1)
    sigma = float(np.std(np.diff(z), ddof=1))
    out = np.empty((horizons, levels.size))
    for h in range(1, horizons + 1):
        centre = intercept + slope * (span - 1 + h)
        out[h - 1] = np.maximum(
            0.0, lognorm.ppf(levels, s=sigma * np.sqrt(h), scale=np.exp(centre)) - 1.0
        )
    return out


#: model name -> method
METHODS: dict[str, Method] = {
    "persistence": persistence_quantiles,
    "mean3-poisson": moving_average_poisson,
    "loggrowth-lognormal": log_growth_lognormal,
}


def issue_forecasts(
    weekly: pd.DataFrame,
    *,
    model: str,
    method: Method,
    levels: np.ndarray,
    first_week: pd.Timestamp,
    horizons: int = 4,
) -> pd.DataFrame:
    """Forecasts of ``method`` issued the day after every week from ``first_week`` on.

    ``weekly`` has one region and quantity: columns region, quantity, week_ending (sorted,
    7 days apart) and value. Each forecast sees only the weeks up to its issue week. Returns
    the forecast format (model, region, quantity, issued, week_ending, level, value) with
    dates as ISO text, as a file would carry them. Cost: O(weeks x horizons x levels).
    """
    weeks = pd.DatetimeIndex(weekly["week_ending"])
    values = weekly["value"].to_numpy(dtype=float)
    region = str(weekly["region"].iloc[0])
    quantity = str(weekly["quantity"].iloc[0])
    parts = []
    for t in np.flatnonzero(weeks >= first_week):
        q = method(values[: t + 1], levels, horizons)  # only the past and the week just ended
        issued = weeks[t] + pd.Timedelta(days=1)
        targets = weeks[t] + pd.to_timedelta(7 * np.arange(1, horizons + 1), unit="D")
        parts.append(
            pd.DataFrame(
                {
                    "model": model,
                    "region": region,
                    "quantity": quantity,
                    "issued": issued.strftime("%Y-%m-%d"),
                    "week_ending": np.repeat(targets.strftime("%Y-%m-%d"), levels.size),
                    "level": np.tile(levels, horizons),
                    "value": q.ravel(),
                }
            )
        )
    return pd.concat(parts, ignore_index=True)
