"""The project's one vocabulary: column names, standard levels and option choices.

Every table, CSV file, message and document uses these names.
"""

from __future__ import annotations

from typing import Literal, TypeVar, get_args

import numpy as np

__all__ = [
    "CM_LEVELS",
    "FORECAST_COLUMNS",
    "FORECAST_KEY",
    "ITEM_KEY",
    "OBSERVATION_COLUMNS",
    "STANDARD_LEVELS",
    "Background",
    "Scale",
    "check_choice",
    "cm_probabilities",
]

#: Columns of a forecast file, one row per quantile (long format).
FORECAST_COLUMNS: tuple[str, ...] = (
    "model",
    "region",
    "quantity",
    "issued",
    "week_ending",
    "level",
    "value",
)
#: Required columns of an observation file; ``reported`` is optional.
OBSERVATION_COLUMNS: tuple[str, ...] = ("region", "quantity", "week_ending", "value")
OPTIONAL_OBSERVATION_COLUMNS: tuple[str, ...] = ("reported",)

#: One forecast: a model's quantiles for one target week issued on one date.
FORECAST_KEY: tuple[str, ...] = ("model", "region", "quantity", "issued", "week_ending")
#: One item to be scored or pooled.
ITEM_KEY: tuple[str, ...] = ("region", "quantity", "week_ending", "horizon")

#: Classical Model levels (5, 25, 50, 75, 95 %): bins with p = (.05, .20, .25, .25, .20, .05).
CM_LEVELS: tuple[float, ...] = (0.05, 0.25, 0.5, 0.75, 0.95)

#: The combinations an ensemble build makes, in table order (forebrief.tables.ensemble); any of them
#: can head the briefing ([ensemble] headline).
COMBINATIONS: tuple[str, ...] = (
    "weighted_pool",
    "equal_pool",
    "quantile_median",
    "recalibrated_pool",
)

#: The 23 levels most public-health forecast collections ask for (common practice, no source).
STANDARD_LEVELS: tuple[float, ...] = (
    0.01,
    0.025,
    *(round(0.05 * k, 2) for k in range(1, 20)),
    0.975,
    0.99,
)

Background = Literal["uniform", "log"]
Scale = Literal["natural", "log"]

_T = TypeVar("_T", bound=str)


def check_choice(name: str, value: str, choices: object) -> str:
    """Return ``value`` if it is one of the ``Literal`` ``choices``; else raise ConfigError."""
    from forebrief.errors import ConfigError

    allowed = get_args(choices)
    if value not in allowed:
        listed = ", ".join(repr(a) for a in allowed)
        raise ConfigError(f"{name} must be one of {listed}; got {value!r}")
    return value


def cm_probabilities(levels: tuple[float, ...] | np.ndarray = CM_LEVELS) -> np.ndarray:
    """Theoretical bin probabilities p_j = tau_j - tau_{j-1}, tau_0 = 0, tau_{R} = 1 (Cooke 1991, ch. 12)."""
    tau = np.asarray(levels, dtype=float)
    return np.diff(np.concatenate(([0.0], tau, [1.0])))
