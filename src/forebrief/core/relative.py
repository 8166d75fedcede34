"""Pairwise relative skill of models scored on partly overlapping items.

Pure numerical core: numpy arrays in, numpy arrays out. Sources: Cramer et al. (2022),
*PNAS* 119(15): e2113561119, Methods (relative WIS); introduced in Bracher et al. (2021),
*Nat. Commun.* 12:5173.
"""

from __future__ import annotations

import operator
from dataclasses import dataclass

import numpy as np

from forebrief.errors import ConfigError

__all__ = ["RelativeSkill", "relative_skill", "relative_skill_pairwise"]


@dataclass(frozen=True, eq=False)
class RelativeSkill:
    """``theta`` (m,): geometric mean of pairwise ratios; ``relative`` (m,): theta / theta of the
    baseline (all nan without a baseline). Values below 1 beat the baseline."""

    theta: np.ndarray
    relative: np.ndarray


def _check_baseline(baseline: int | None, m: int) -> int | None:
    if baseline is None:
        return None
    try:
        b = operator.index(baseline)
    except TypeError:
        b = -1
    if not 0 <= b < m:
        raise ConfigError(
            f"baseline must be a model row index in 0..{m - 1}; got {baseline!r}. Name a "
            "model that was scored."
        )
    return b


def relative_skill_pairwise(
    own: np.ndarray, other: np.ndarray, common: np.ndarray, *, baseline: int | None = None
) -> RelativeSkill:
    """Pairwise relative skill from per-pair sums (Cramer et al. 2022, PNAS, Methods).

    ``own[a, b]`` is the sum of model a's scores over the items a and b are compared on,
    each score taken on what the pair has in common (for the weighted interval score: the
    levels both give, after Bracher et al. 2021, PLOS Comput Biol 17(2): e1008618, who warn
    that WIS on different quantile sets are not comparable); ``other[a, b]`` is the sum of
    b's scores on the same items and levels (so normally ``other = own.T``); ``common[a, b]``
    is the number of those items, 0 where the pair is not compared. All three have shape
    (m, m). theta_ab = own[a, b] / other[a, b] (the ratio of the two means, the count
    cancels); theta_a is the geometric mean of theta_ab over every b with common[a, b] > 0,
    b = a included when common[a, a] > 0 (theta_aa = 1). ``relative`` is theta divided by
    the baseline's theta (row ``baseline``), all nan without a baseline.

    Zero sums (our convention): 0/0 counts as theta_ab = 1; a pair where exactly one sum is
    0 is left out (with ``other = own.T`` this keeps log theta_ab = -log theta_ba and theta
    finite). A model with no compared pair has theta nan. Cost: O(m^2) time and memory.
    """
    o = np.asarray(own, dtype=float)
    t = np.asarray(other, dtype=float)
    c = np.asarray(common, dtype=float)
    if o.ndim != 2 or o.shape[0] != o.shape[1] or t.shape != o.shape or c.shape != o.shape:
        raise ValueError(
            "own, other and common must be square (models x models) matrices of one shape; "
            f"got {o.shape}, {t.shape} and {c.shape}"
        )
    m = o.shape[0]
    for label, arr in (("own", o), ("other", t), ("common", c)):
        bad = ~(np.isfinite(arr) & (arr >= 0))
        if bad.any():
            row, col = (int(v[0]) for v in np.nonzero(bad))
            raise ValueError(
                f"relative skill needs finite sums and counts >= 0; got {arr[row, col]!r} in "
                f"{label}[{row}, {col}]"
            )
    b = _check_baseline(baseline, m)
    both_zero = (o == 0) & (t == 0)
    both_positive = (o > 0) & (t > 0)
    included = (c > 0) & (both_zero | both_positive)
    log_num = np.log(o, out=np.zeros_like(o), where=both_positive)
    log_den = np.log(t, out=np.zeros_like(t), where=both_positive)
    log_theta = np.where(both_positive & included, log_num - log_den, 0.0)
    n_included = included.sum(axis=1)
    mean_log = np.divide(
        log_theta.sum(axis=1),
        n_included,
        out=np.full(m, np.nan),
        where=n_included > 0,
    )
    theta = np.exp(mean_log)
    if b is None:
        relative = np.full(m, np.nan)
    else:
        relative = theta / theta[b] if np.isfinite(theta[b]) else np.full(m, np.nan)
    return RelativeSkill(theta=theta, relative=relative)


def relative_skill(scores: np.ndarray, *, baseline: int | None = None) -> RelativeSkill:
    """Pairwise relative skill (Cramer et al. 2022, PNAS, Methods; Bracher et al. 2021).

    ``scores`` has shape (m models, i items), nan where a model did not forecast an item;
    scores must be >= 0 (WIS, absolute error). For each pair, theta_ab = mean score of a /
    mean score of b over the items both forecast; theta_a is the geometric mean of theta_ab
    over every b sharing at least one item with a, b = a included (theta_aa = 1). The
    geometric mean runs over all models, the baseline included (docs/methods.md §6; the
    variant without the baseline differs when data are missing). With complete data,
    theta_a / theta_base = mean_a / mean_base exactly.

    The special case of :func:`relative_skill_pairwise` where each score does not depend on
    the pair (own = per-pair sums of the matrix, other = own.T). Zero means (our
    convention): 0/0 counts as theta_ab = 1 (both perfect on the common items); a pair
    where exactly one mean is 0 (x/0 or 0/x) is left out of both models' geometric means,
    which keeps log theta_ab = -log theta_ba and theta finite. A model with no items has
    theta nan. ``baseline`` is the row index of the baseline model.

    Cost: two (m x i) @ (i x m) matrix products, O(m^2 i) time, O(m i) memory.
    """
    s = np.asarray(scores, dtype=float)
    if s.ndim != 2:
        raise ValueError(f"scores must have shape (models, items); got {s.shape}")
    m = s.shape[0]
    present = ~np.isnan(s)
    bad = present & ~(np.isfinite(s) & (s >= 0))
    if bad.any():
        row, col = (int(v[0]) for v in np.nonzero(bad))
        raise ValueError(
            f"relative skill needs finite scores >= 0; got {s[row, col]!r} for model row "
            f"{row}, item {col}"
        )
    _check_baseline(baseline, m)
    mask = present.astype(float)
    filled = np.where(present, s, 0.0)
    # own[a, b]: sum of a's scores over the items a and b share; common[a, b]: their number.
    own = filled @ mask.T
    common = mask @ mask.T
    return relative_skill_pairwise(own, own.T, common, baseline=baseline)
