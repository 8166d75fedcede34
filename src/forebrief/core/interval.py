"""Quantile, interval and weighted interval scores, and interval coverage.

Pure numerical core: numpy arrays in, numpy arrays out. Sources: Bracher, Ray, Gneiting &
Reich (2021), *PLOS Comput. Biol.* 17(2): e1008618 (interval score, WIS and its quantile
form; correction e1010592, 2022); Gneiting & Raftery (2007), *JASA* 102:359-378, section 6.2.
Lower scores are better. Quantiles are assumed non-decreasing in their level (checked
upstream by validation); then every score and every WIS part is >= 0.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from forebrief.errors import ConfigError

__all__ = [
    "CentralIntervals",
    "WISParts",
    "central_intervals",
    "interval_coverage",
    "interval_score",
    "quantile_score",
    "wis_parts",
]

#: Two levels tau and 1 - tau are partners when they agree to this tolerance.
LEVEL_TOLERANCE = 1e-9


def _levels(levels: np.ndarray) -> np.ndarray:
    tau = np.asarray(levels, dtype=float)
    if tau.ndim != 1 or tau.size == 0:
        raise ConfigError(f"quantile levels must be a non-empty 1-d list; got shape {tau.shape}")
    if not np.all((tau > 0) & (tau < 1)):
        bad = tau[~((tau > 0) & (tau < 1))][0]
        raise ConfigError(
            f"quantile levels must lie strictly between 0 and 1; got {bad!r}. Give levels such "
            "as 0.05, 0.25, 0.5, 0.75, 0.95."
        )
    return tau


def _observed_and_quantiles(observed: np.ndarray, quantiles: np.ndarray, k: int) -> tuple:
    y = np.asarray(observed, dtype=float)
    q = np.asarray(quantiles, dtype=float)
    if q.ndim != 2 or y.shape != q.shape[:1] or q.shape[1] != k:
        raise ValueError(
            f"need observed of shape (n,) and quantiles of shape (n, {k}); got {y.shape} and "
            f"{q.shape}"
        )
    return y, q


def quantile_score(observed: np.ndarray, quantiles: np.ndarray, levels: np.ndarray) -> np.ndarray:
    """Quantile score QS_tau = 2 (1{y <= q_tau} - tau)(q_tau - y): twice the pinball loss.

    Bracher et al. (2021), quantile form of the WIS (the factor 2 makes the mean over a
    symmetric level set equal the WIS). ``observed`` (n,), ``quantiles`` (n, k), ``levels``
    (k,); returns (n, k). A nan observation gives nan. Cost: O(n x k).
    """
    tau = _levels(levels)
    y, q = _observed_and_quantiles(observed, quantiles, tau.size)
    below = (y[:, None] <= q).astype(float)
    return 2.0 * (below - tau) * (q - y[:, None])


def interval_score(
    observed: np.ndarray, lower: np.ndarray, upper: np.ndarray, alpha: np.ndarray
) -> np.ndarray:
    """Interval score IS_alpha = (u - l) + (2/alpha)(l - y)1{y < l} + (2/alpha)(y - u)1{y > u}.

    Gneiting & Raftery (2007), section 6.2; Bracher et al. (2021). ``alpha`` is the
    miscoverage of each central (1 - alpha) interval, shape (K,); ``lower`` and ``upper``
    have shape (n, K) and ``observed`` (n,). Returns (n, K); a nan observation gives nan.
    Cost: O(n x K).
    """
    a = np.asarray(alpha, dtype=float)
    if a.ndim != 1 or not np.all((a > 0) & (a <= 1)):
        raise ConfigError(
            f"interval miscoverage alpha must be a 1-d array of values in (0, 1]; got {a!r}. "
            "A 90 % interval has alpha 0.1."
        )
    y = np.asarray(observed, dtype=float)
    lo = np.asarray(lower, dtype=float)
    up = np.asarray(upper, dtype=float)
    if lo.ndim != 2 or up.shape != lo.shape or y.shape != lo.shape[:1] or lo.shape[1] != a.size:
        raise ValueError(
            f"need observed (n,), lower and upper (n, {a.size}); got {y.shape}, {lo.shape}, "
            f"{up.shape}"
        )
    yy = y[:, None]
    return (up - lo) + (2.0 / a) * np.maximum(lo - yy, 0.0) + (2.0 / a) * np.maximum(yy - up, 0.0)


@dataclass(frozen=True, eq=False)
class CentralIntervals:
    """Central intervals found in a level set, widest first.

    ``lower[k]`` and ``upper[k]`` index the levels tau_k < 0.5 and 1 - tau_k; ``alpha[k]`` =
    2 tau_k is the miscoverage; ``median`` indexes 0.5, or is None when 0.5 is absent.
    """

    lower: np.ndarray
    upper: np.ndarray
    alpha: np.ndarray
    median: int | None


def central_intervals(levels: np.ndarray) -> CentralIntervals:
    """Pair each level tau < 0.5 with its partner 1 - tau (tolerance 1e-9).

    Bracher et al. (2021): 2K + 1 quantiles give K central intervals with alpha_k = 2 tau_k
    and the median. Levels without a partner are left out. Levels need not be sorted; the
    intervals are returned by increasing tau (widest first). Cost: O(k^2) for k levels.
    """
    tau = _levels(levels)
    match = np.abs(tau[:, None] - (1.0 - tau[None, :])) <= LEVEL_TOLERANCE
    has_partner = match.any(axis=1) & (tau < 0.5 - LEVEL_TOLERANCE)
    lower = np.flatnonzero(has_partner)
    lower = lower[np.argsort(tau[lower], kind="stable")]
    upper = np.argmax(match[lower], axis=1)
    middle = np.flatnonzero(np.abs(tau - 0.5) <= LEVEL_TOLERANCE)
    return CentralIntervals(
        lower=lower.astype(np.int64),
        upper=upper.astype(np.int64),
        alpha=2.0 * tau[lower],
        median=int(middle[0]) if middle.size else None,
    )


@dataclass(frozen=True, eq=False)
class WISParts:
    """Weighted interval score and its three parts, each of shape (n,); the parts sum to wis."""

    wis: np.ndarray
    dispersion: np.ndarray
    overprediction: np.ndarray
    underprediction: np.ndarray


def wis_parts(observed: np.ndarray, quantiles: np.ndarray, levels: np.ndarray) -> WISParts:
    """Weighted interval score and its decomposition (Bracher et al. 2021, PLOS Comput Biol).

    WIS = (1 / (K + 1/2)) (1/2 |y - m| + sum_k (alpha_k / 2) IS_alpha_k), with the K central
    intervals of :func:`central_intervals` and the median m. Decomposition (same paper):
    dispersion = sum_k (alpha_k/2)(u_k - l_k) / (K + 1/2); overprediction =
    [1/2 (m - y)+ + sum_k (l_k - y)+] / (K + 1/2); underprediction =
    [1/2 (y - m)+ + sum_k (y - u_k)+] / (K + 1/2); the median's error goes to over- or
    underprediction. For a symmetric level set with 0.5 the WIS equals the mean of
    :func:`quantile_score` over the levels.

    Without 0.5 in the level set the median term is dropped and the sum is normalised by
    1/K instead (common practice, no source). A level set with neither a central interval
    nor a median raises ConfigError. A nan observation gives nan in every part.
    ``observed`` (n,), ``quantiles`` (n, k), ``levels`` (k,). Cost: O(n x k).
    """
    tau = _levels(levels)
    y, q = _observed_and_quantiles(observed, quantiles, tau.size)
    ci = central_intervals(tau)
    k = ci.lower.size
    if k == 0 and ci.median is None:
        listed = ", ".join(f"{t:g}" for t in tau)
        raise ConfigError(
            f"the quantile levels ({listed}) contain no median and no central interval, so "
            "the weighted interval score is undefined; include 0.5 or pairs tau, 1 - tau"
        )
    lo = q[:, ci.lower]
    up = q[:, ci.upper]
    yy = y[:, None]
    weight = ci.alpha / 2.0
    # weight * (2 / alpha) = 1, so the interval penalties enter with unit weight.
    dispersion = np.sum(weight * (up - lo), axis=1)
    over = np.sum(np.maximum(lo - yy, 0.0), axis=1)
    under = np.sum(np.maximum(yy - up, 0.0), axis=1)
    if ci.median is None:
        norm = float(k)
    else:
        m = q[:, ci.median]
        over = over + 0.5 * np.maximum(m - y, 0.0)
        under = under + 0.5 * np.maximum(y - m, 0.0)
        norm = k + 0.5
    missing = np.isnan(y)
    dispersion = np.where(missing, np.nan, dispersion / norm)
    over = over / norm
    under = under / norm
    return WISParts(
        wis=dispersion + over + under,
        dispersion=dispersion,
        overprediction=over,
        underprediction=under,
    )


def interval_coverage(observed: np.ndarray, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Whether each observation lies in its interval, l <= y <= u (ties count as covered).

    Gneiting, Balabdaoui & Raftery (2007), JRSS-B 69:243-268 (empirical coverage against the
    nominal level). ``lower`` and ``upper`` have shape (n,) or (n, K); ``observed`` (n,).
    Returns bool of the shape of ``lower``; a nan observation counts as not covered, so the
    caller must drop missing observations before taking shares. Cost: O(n x K).
    """
    y = np.asarray(observed, dtype=float)
    lo = np.asarray(lower, dtype=float)
    up = np.asarray(upper, dtype=float)
    if up.shape != lo.shape or lo.shape[:1] != y.shape or lo.ndim not in (1, 2):
        raise ValueError(
            f"need observed (n,), lower and upper (n,) or (n, K); got {y.shape}, {lo.shape}, "
            f"{up.shape}"
        )
    yy = y[:, None] if lo.ndim == 2 else y
    return (lo <= yy) & (yy <= up)
