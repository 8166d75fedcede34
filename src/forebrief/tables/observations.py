"""What was known when: observations as of a date, with data vintages.

With a ``reported`` column several vintages of one week may exist; a run as of date D uses,
for each week, the latest vintage with ``reported <= D``. Without it, the single value is used.
"""

from __future__ import annotations

import pandas as pd

__all__ = ["observations_as_of", "revisions_between"]


def observations_as_of(
    observations: pd.DataFrame,
    *,
    as_of: pd.Timestamp,
    weeks_before: pd.Timestamp | None = None,
) -> pd.DataFrame:
    """One value per (region, quantity, week_ending) as known on ``as_of``.

    Keeps weeks with ``week_ending <= as_of`` (or ``< weeks_before`` when given, for a forecast
    issued on that date) and, when vintages exist, only those reported on or before ``as_of``,
    taking the latest of them. Returns region, quantity, week_ending, value, reported.
    O(rows log rows).
    """
    obs = observations
    limit = weeks_before if weeks_before is not None else as_of
    inclusive = weeks_before is None
    mask = (obs["week_ending"] <= limit) if inclusive else (obs["week_ending"] < limit)
    has_reported = "reported" in obs.columns and obs["reported"].notna().any()
    if has_reported:
        mask &= obs["reported"].isna() | (obs["reported"] <= as_of)
    known = obs.loc[mask]
    if has_reported:
        known = known.sort_values(
            ["region", "quantity", "week_ending", "reported"], kind="stable", na_position="first"
        )
    known = known.drop_duplicates(["region", "quantity", "week_ending"], keep="last")
    cols = ["region", "quantity", "week_ending", "value", "reported"]
    if "reported" not in known.columns:
        known = known.assign(reported=pd.NaT)
    return (
        known.loc[:, cols]
        .sort_values(["region", "quantity", "week_ending"], kind="stable")
        .reset_index(drop=True)
    )


def revisions_between(
    observations: pd.DataFrame, *, earlier: pd.Timestamp, later: pd.Timestamp
) -> pd.DataFrame:
    """Weeks whose value as known on ``later`` differs from the value known on ``earlier``.

    Returns region, quantity, week_ending, value_then, value_now, change.
    """
    then = observations_as_of(observations, as_of=earlier)
    now = observations_as_of(observations, as_of=later)
    both = then.merge(now, on=["region", "quantity", "week_ending"], suffixes=("_then", "_now"))
    changed = both.loc[both["value_then"] != both["value_now"]].copy()
    changed["change"] = changed["value_now"] - changed["value_then"]
    return changed.loc[
        :, ["region", "quantity", "week_ending", "value_then", "value_now", "change"]
    ].reset_index(drop=True)
