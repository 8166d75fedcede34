"""Scores: the pure numerical core (arrays in, arrays out).

- :mod:`.classical`: Cooke's Classical Model (calibration, information, performance weights).
- :mod:`.interval`: quantile score, interval score, weighted interval score, coverage.
- :mod:`.point`: absolute error and sign of the median's error.
- :mod:`.relative`: pairwise relative skill against a baseline.
"""

from __future__ import annotations

from forebrief.core.classical import (
    Weights,
    bin_counts,
    bin_index,
    calibration_score,
    information_score,
    intrinsic_range,
    performance_weights,
    relative_entropy,
)
from forebrief.core.interval import (
    CentralIntervals,
    WISParts,
    central_intervals,
    interval_coverage,
    interval_score,
    quantile_score,
    wis_parts,
)
from forebrief.core.point import absolute_error, sign_bias
from forebrief.core.relative import RelativeSkill, relative_skill, relative_skill_pairwise

__all__ = [
    "CentralIntervals",
    "RelativeSkill",
    "WISParts",
    "Weights",
    "absolute_error",
    "bin_counts",
    "bin_index",
    "calibration_score",
    "central_intervals",
    "information_score",
    "interval_coverage",
    "interval_score",
    "intrinsic_range",
    "performance_weights",
    "quantile_score",
    "relative_entropy",
    "relative_skill",
    "relative_skill_pairwise",
    "sign_bias",
    "wis_parts",
]
